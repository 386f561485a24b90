"""Purchasable capacitor ratings for banks above 1 kV: a construction of standard units.

Above 1 kV a bank is not bought by one voltage rating: it is assembled per phase from single-phase
units of standard voltages and kvar sizes (:mod:`resonance.design.construction`).  The functions here
turn the voltage a detuned bank or filter must withstand, and the capacitance it needs, into such a
construction: the bank's rated voltage is then ``sqrt(3) S unit_kv`` of a wye and its nameplate the
sum of the units.

Pure functions on plain numbers (no files, no study runs).

References
----------
IEEE Std 18-2002 (shunt power capacitors): rated voltage and kvar of units, ``Q = Q_R (U/U_R)^2``,
continuous rms voltage limit 1.10 pu; IEEE Std C37.99 (protection of shunt capacitor banks),
construction and unbalance practice [memory]; IEEE Std 1531-2020 (series L-C branch of a detuned
bank or filter); /work/shared/REFERENCES.md "Capacitor bank construction and unbalance".
"""

from __future__ import annotations

import dataclasses
import math
from typing import Sequence

from resonance.design.construction import (MAX_GROUP_KVAR_SOURCE, _positive, MIN_PARALLEL_UNITS_SOURCE, UNIT_KV_50HZ,
                                           UNIT_KV_60HZ, UNIT_KVAR, Construction, propose_construction,
                                           unit_failure_unbalance)

__all__ = ["LV_LIMIT_KV", "SERIES_REACTOR_CONNECTIONS", "CONNECTION_SOURCE", "KVAR_BAND", "purchasable_rating",
           "stage_ratings", "rating_ladder"]

#: Bus voltage at or below which units are bought by their own voltage rating [kV].
LV_LIMIT_KV = 1.0
#: Connections used for banks with a series (detuning or tuning) reactor per phase [unitless].
SERIES_REACTOR_CONNECTIONS = ("wye_ungrounded", "double_wye_ungrounded")
CONNECTION_SOURCE = ("[common practice] a bank with series reactors is built as ungrounded wye (single or "
                     "double): each phase is one reactor in series with one wye string, so the per-phase "
                     "series L-C branch and its tuning p = X_L/X_C hold as designed, and the floating "
                     "neutral gives the zero-sequence (triplen) currents no path through the tuned branches")
_METHOD_SOURCE = ("IEEE Std 18-2002 unit ratings and Q = Q_R (U/U_R)^2; IEEE Std C37.99 construction and "
                  "unbalance practice [memory]; REFERENCES.md 'Capacitor bank construction and unbalance'")
_MAX_PASSES = 8  # re-scalings of the kvar to the chosen rating; the leg voltage only rises, so few are needed


def _checked(u_bus_kv, u_need_kv, f_hz) -> tuple[float, float, float]:
    u_bus = _positive(u_bus_kv, "u_bus_kv")
    u_need = _positive(u_need_kv, "u_need_kv")
    f = _positive(f_hz, "f_hz")
    if u_bus <= LV_LIMIT_KV:
        raise ValueError(f"u_bus_kv = {u_bus:g} kV is not above {LV_LIMIT_KV:g} kV: a low-voltage bank is bought "
                         "by its units' voltage rating, not built from series groups")
    if u_need < u_bus * (1.0 - 1e-9):
        raise ValueError(f"u_need_kv = {u_need:g} kV is below the bus voltage u_bus_kv = {u_bus:g} kV: pass the "
                         "line-to-line voltage the capacitors must withstand (at least the bus voltage)")
    if f not in (50.0, 60.0):
        raise ValueError(f"f_hz must be 50 or 60 (the unit voltage lists are per frequency), got {f_hz!r}")
    return u_bus, u_need, f


def _unbalance_dict(c: Construction) -> dict | None:
    u = c.unbalance
    if u is None:
        return None
    return {"failed_units": u.failed_units, "v_unit_pu": u.v_unit_pu, "v_unit_rated_pu": u.v_unit_rated_pu,
            "neutral_shift_pu": u.neutral_shift_pu, "neutral_current_pu": u.neutral_current_pu,
            "limit_pu": u.limit_pu, "exceeds_limit": bool(u.exceeds_limit), "first_failed_over": u.first_failed_over}


def _as_dict(c: Construction, u_need_kv: float, kvar_required_rated: float, f_hz: float) -> dict:
    kv_list = UNIT_KV_60HZ if f_hz == 60.0 else UNIT_KV_50HZ
    return {
        "connection": c.connection, "series_groups": c.series_groups, "parallel_units": c.parallel_units,
        "unit_kv": c.unit_kv, "unit_kvar": c.unit_kvar, "strings": c.strings, "units_total": c.units_total,
        "leg_rated_kv": c.leg_rated_kv, "bank_rated_kv": c.bank_rated_kv, "bank_kvar_rated": c.bank_kvar_rated,
        "bank_kvar_at_bus_kv": c.bank_kvar_system, "required_kv": u_need_kv, "required_leg_kv": c.required_leg_kv,
        "kvar_required_at_rated": kvar_required_rated, "overrating": c.overrating,
        "unbalance": _unbalance_dict(c),
        "sources": {"unit_kv": kv_list.source, "unit_kvar": UNIT_KVAR.source,
                    "parallel_units": MIN_PARALLEL_UNITS_SOURCE, "group_kvar": MAX_GROUP_KVAR_SOURCE,
                    "kvar_band": KVAR_BAND_SOURCE,
                    "connection": CONNECTION_SOURCE, "method": _METHOD_SOURCE},
    }


def _one_connection(u_bus: float, q_need: float, u_need: float, f: float, conn: str,
                    unit_kvar: Sequence[float], unit_kv: Sequence[float] | None) -> tuple[Construction, float]:
    """Construction of one connection whose nameplate covers the capacitance at its own rating."""
    q_at = q_need
    for _ in range(_MAX_PASSES):
        c = propose_construction(u_bus, q_at, u_need / math.sqrt(3.0), connections=conn, f_hz=f,
                                 unit_kvar=unit_kvar, unit_kv=unit_kv)[0]
        q_rated = q_need * (c.bank_rated_kv / u_need) ** 2
        if q_rated <= q_at * (1.0 + 1e-12):
            return c, q_rated
        q_at = q_rated  # more kvar at the higher rating: re-run (the group limit may need more series groups)
    raise ValueError(f"no stable {conn} construction for {q_need:g} kvar at {u_need:g} kV")  # pragma: no cover


#: Nameplate excess over the need within which the construction with fewest units is preferred [unitless].
KVAR_BAND = 0.05
KVAR_BAND_SOURCE = ("[project choice] within 5 % above the needed nameplate (inside the -5/+10 % capacitance "
                    "tolerance of units) the fewest, largest units are taken")


def _rank(c: Construction, q_rated: float, order: int):
    bad = c.unbalance is not None and c.unbalance.exceeds_limit
    excess = c.bank_kvar_rated / q_rated - 1.0
    return (bad, round(c.overrating, 9), 0.0 if excess <= KVAR_BAND + 1e-12 else round(excess, 9), c.units_total,
            order)


def _choose(u_bus: float, q_need: float, u_need: float, f: float, conns: Sequence[str],
            unit_kv: Sequence[float] | None) -> tuple[Construction, float]:
    """The best construction over connections and unit sizes (see :func:`purchasable_rating`)."""
    found = []
    for order, conn in enumerate(dict.fromkeys(conns)):
        for size in UNIT_KVAR.values:  # one unit size at a time: every size competes on the ranking
            try:
                c, q_rated = _one_connection(u_bus, q_need, u_need, f, conn, [size], unit_kv)
            except ValueError as e:
                if "unknown" in str(e):
                    raise
                continue  # this size cannot be built within the group kvar limit
            found.append((_rank(c, q_rated, order), c, q_rated))
    if not found:
        raise ValueError(f"no construction of standard units for {q_need:g} kvar at {u_need:g} kV within the "
                         "group kvar limit and the series groups searched")
    _, best, q_rated = min(found, key=lambda t: t[0])
    return best, q_rated


def purchasable_rating(u_bus_kv: float, kvar_nameplate: float, u_need_kv: float, f_hz: float, *,
                       connections: str | Sequence[str] = SERIES_REACTOR_CONNECTIONS) -> dict:
    """A bank rating that can be bought: standard units in series groups, per wye string.

    Parameters
    ----------
    u_bus_kv : float
        Bus (system) voltage, line to line [kV]; above 1 kV.
    kvar_nameplate : float
        Three-phase capacitor output wanted at ``u_need_kv`` (the nameplate a capacitor rated exactly
        ``u_need_kv`` would carry; it fixes the capacitance) [kvar].
    u_need_kv : float
        Line-to-line voltage the capacitors must withstand [kV]; for a detuned bank or filter
        ``U/(1 - p)`` plus the harmonic allowance; at least ``u_bus_kv``.
    f_hz : float
        Fundamental frequency, 50 or 60, choosing the unit voltage list [Hz].
    connections : str or sequence of str, optional
        Connections to consider, names of :data:`resonance.design.construction.CONNECTIONS`
        [unitless]; default ``("wye_ungrounded", "double_wye_ungrounded")``.  Wyes, because a series
        reactor is per phase, in series with one wye string (the per-phase series L-C branch); the
        neutral left floating so that zero-sequence (triplen) currents find no path through the tuned
        branches (common practice).

    Returns
    -------
    dict
        ``rated_kv`` — bank line-to-line rated voltage of the construction [kV];
        ``kvar_rated`` — three-phase nameplate at ``rated_kv``, the sum of the units [kvar], at least
        ``kvar_nameplate (rated_kv / u_need_kv)^2``;
        ``construction`` — plain dict: ``connection``, ``series_groups``, ``parallel_units``, ``unit_kv``
        [kV], ``unit_kvar`` [kvar], ``strings``, ``units_total``, ``leg_rated_kv`` [kV],
        ``bank_rated_kv`` [kV], ``bank_kvar_rated`` [kvar], ``bank_kvar_at_bus_kv`` [kvar] (the
        capacitors alone at the bus voltage), ``required_kv`` [kV], ``required_leg_kv`` [kV],
        ``kvar_required_at_rated`` [kvar], ``overrating`` [unitless], ``unbalance`` (one unit lost in
        one group: ``v_unit_pu`` and ``v_unit_rated_pu`` on the remaining units [pu],
        ``neutral_shift_pu`` [pu of phase-to-neutral], ``neutral_current_pu`` (double wye) [pu],
        ``limit_pu``, ``exceeds_limit``, ``first_failed_over``) and ``sources``.

    Raises
    ------
    ValueError
        A bad parameter, named in the message: not a positive number, ``u_bus_kv`` at or below 1 kV,
        ``u_need_kv`` below ``u_bus_kv``, ``f_hz`` not 50 or 60, an unknown connection.

    Notes
    -----
    The capacitance is fixed by ``kvar_nameplate`` at ``u_need_kv``; at any rating ``U_R`` the same
    capacitance has the nameplate ``Q_R = kvar_nameplate (U_R / u_need_kv)^2`` (IEEE Std 18), so the
    net output of a detuned bank at the bus, ``Q_R (U/U_R)^2 / (1 - p)``, does not depend on the
    rating chosen.  Per connection :func:`resonance.design.construction.propose_construction` gives the
    least-overrated ``S x unit_kv >= u_need_kv / sqrt(3)`` and the unit kvar and count closest at or
    above ``Q_R``; it is repeated with ``Q_R`` at the rating found until the rating no longer moves (a
    larger kvar can need more series groups under the group kvar limit).  Of the connections, the
    This is done for each connection and each unit size of :data:`UNIT_KVAR` on its own, and the
    construction kept is the first by: one lost unit leaves the remaining units within the 1.10 pu
    limit; least overrating; nameplate within :data:`KVAR_BAND` (5 %) above ``Q_R``, else the
    closest above it (the net output at the bus stays the one asked for); fewest units; order of
    ``connections``.

    References
    ----------
    IEEE Std 18-2002, unit ratings, ``Q = Q_R (U/U_R)^2``, 1.10 pu continuous rms voltage [published];
    IEEE Std C37.99, construction and unbalance practice [memory]; REFERENCES.md "Capacitor bank
    construction and unbalance"; unit lists of :mod:`resonance.design.construction` [memory].
    """
    u_bus, u_need, f = _checked(u_bus_kv, u_need_kv, f_hz)
    q_need = _positive(kvar_nameplate, "kvar_nameplate")
    conns = [connections] if isinstance(connections, str) else list(connections)
    if not conns:
        raise ValueError("connections must name at least one connection")
    best, q_rated = _choose(u_bus, q_need, u_need, f, conns, None)
    return {"rated_kv": best.bank_rated_kv, "kvar_rated": best.bank_kvar_rated,
            "construction": _as_dict(best, u_need, q_rated, f)}


def stage_ratings(u_bus_kv: float, stages_kvar: Sequence[float], u_need_kv: float, f_hz: float, *,
                  min_rated_kv: float | None = None,
                  connections: str | Sequence[str] = SERIES_REACTOR_CONNECTIONS) -> dict:
    """One purchasable rating for every stage of a switched bank, each stage a whole construction.

    Parameters
    ----------
    u_bus_kv : float
        Bus voltage, line to line [kV]; above 1 kV.
    stages_kvar : sequence of float
        Three-phase capacitor output wanted of each stage at ``u_need_kv`` [kvar].
    u_need_kv : float
        Line-to-line voltage the capacitors must withstand [kV].
    f_hz : float
        Fundamental frequency, 50 or 60 [Hz].
    min_rated_kv : float, optional
        Rate the bank above this line-to-line voltage (a higher rating tried when the capacitor duty
        fails at the first); the overrating and the unbalance stay reported against ``u_need_kv``
        [kV]; default ``u_need_kv``.
    connections : str or sequence of str, optional
        As :func:`purchasable_rating` [unitless].

    Returns
    -------
    dict
        ``rated_kv`` — the rating common to every stage [kV]; ``steps_kvar`` — nameplate of each stage
        at ``rated_kv`` [kvar]; ``connection``, ``series_groups``, ``unit_kv`` [kV], ``overrating``
        [unitless] common to the stages; ``units_total`` of the whole bank; ``scope`` (plain words);
        ``stages`` — the construction dict of each stage (as :func:`purchasable_rating`'s, with
        ``stage``, 1-based).

    Raises
    ------
    ValueError
        A bad parameter, named in the message (as :func:`purchasable_rating`; an empty or
        non-positive ``stages_kvar``).

    Notes
    -----
    Each stage is switched with its own reactor, so it is a bank of its own (three wye strings, or
    six).  The largest stage fixes the connection, the series groups and the unit voltage
    (:func:`purchasable_rating`); every other stage uses the same connection, unit voltage and series
    groups, so the bank has one rated voltage, each stage with its own unit kvar and count.  (A
    smaller stage takes more series groups than its voltage needs only where the largest one had to,
    under the group kvar limit; its overrating and unbalance are reported against the bank's need.)

    References
    ----------
    As :func:`purchasable_rating`.
    """
    if isinstance(stages_kvar, (str, bytes)):
        raise ValueError(f"stages_kvar must be a list of numbers, got {stages_kvar!r}")
    try:
        stages = [_positive(q, f"stages_kvar[{k}]") for k, q in enumerate(stages_kvar)]
    except TypeError:
        raise ValueError(f"stages_kvar must be a list of numbers, got {stages_kvar!r}") from None
    if not stages:
        raise ValueError("stages_kvar must hold at least one stage")
    u_bus, u_need, f = _checked(u_bus_kv, u_need_kv, f_hz)
    floor = u_need if min_rated_kv is None else max(u_need, _positive(min_rated_kv, "min_rated_kv"))
    lead = purchasable_rating(u_bus, max(stages) * (floor / u_need) ** 2, floor, f, connections=connections)
    lc = lead["construction"]
    u_lead = lead["rated_kv"] * (1.0 - 1e-12)  # the lead's string voltage, for every stage
    out = []
    for k, q in enumerate(stages):
        c, _ = _choose(u_bus, q * (u_lead / u_need) ** 2, u_lead, f, [lc["connection"]], [lc["unit_kv"]])
        q_rated = q * (c.bank_rated_kv / u_need) ** 2
        d = _as_dict(c, u_need, q_rated, f)
        # the stage's own need is the bank's, not the lead's rating: overrating and healthy unit voltage
        v_req = u_need if c.connection == "delta" else u_need / math.sqrt(3.0)
        d["required_leg_kv"] = v_req
        d["overrating"] = c.leg_rated_kv / v_req
        if c.unbalance is not None:
            u = unit_failure_unbalance(c.series_groups, c.parallel_units, 1, c.connection,
                                       v_healthy_pu=v_req / c.leg_rated_kv, limit_pu=c.unbalance.limit_pu)
            d["unbalance"] = _unbalance_dict(dataclasses.replace(c, unbalance=u))
        out.append({"stage": k + 1, **d})
    return {"rated_kv": lead["rated_kv"], "steps_kvar": [s["bank_kvar_rated"] for s in out],
            "connection": lc["connection"], "series_groups": lc["series_groups"], "unit_kv": lc["unit_kv"],
            "overrating": out[0]["overrating"], "units_total": sum(s["units_total"] for s in out),
            "scope": (f"each of the {len(out)} stages is a complete {lc['connection']} bank of its own (switched "
                      "with its own reactor); all stages share the connection, series groups and unit voltage"),
            "stages": out}


def rating_ladder(u_bus_kv: float, stages_kvar: Sequence[float], u_need_kv: float, f_hz: float,
                  count: int, *, connections: str | Sequence[str] = SERIES_REACTOR_CONNECTIONS
                  ) -> list[tuple[float, dict]]:
    """The first purchasable rating of a switched bank and the next higher ones.

    Parameters
    ----------
    u_bus_kv : float
        Bus voltage, line to line [kV]; above 1 kV.
    stages_kvar : sequence of float
        Three-phase capacitor output wanted of each stage at ``u_need_kv`` [kvar].
    u_need_kv : float
        Line-to-line voltage the capacitors must withstand [kV].
    f_hz : float
        Fundamental frequency, 50 or 60 [Hz].
    count : int
        How many higher ratings follow the first [unitless], 0 to 5.
    connections : str or sequence of str, optional
        As :func:`purchasable_rating` [unitless].

    Returns
    -------
    list of (float, dict)
        ``count + 1`` pairs, lowest rating first: the rated voltage rounded to 0.1 V (the value a
        case file carries) [kV] and the :func:`stage_ratings` dict of that construction.

    Raises
    ------
    ValueError
        A bad parameter, named in the message.

    Notes
    -----
    Rung ``k + 1`` is :func:`stage_ratings` with ``min_rated_kv`` just above rung ``k``'s rating:
    the next construction of standard units, for a re-check when the capacitor duty fails; the
    capacitance stays the same (the nameplate scales as ``(U_R / u_need_kv)^2``, IEEE Std 18).

    References
    ----------
    As :func:`purchasable_rating`.
    """
    if isinstance(count, bool) or not isinstance(count, int) or not 0 <= count <= 5:
        raise ValueError(f"count must be a whole number from 0 to 5, got {count!r}")
    out: list[tuple[float, dict]] = []
    floor = None
    while len(out) <= count:
        r = stage_ratings(u_bus_kv, stages_kvar, u_need_kv, f_hz, min_rated_kv=floor, connections=connections)
        out.append((round(r["rated_kv"], 4), r))
        floor = r["rated_kv"] * (1.0 + 1e-6)
    return out

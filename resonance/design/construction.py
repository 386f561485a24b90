"""Construction of capacitor banks above 1 kV from standard single-phase units, and unit-failure unbalance.

A bank above 1 kV is built per phase (or per delta leg) as a string of ``S`` series groups, each of
``P`` equal units in parallel.  :func:`propose_construction` picks ``S``, the unit voltage, the unit
kvar and ``P`` for each connection; :func:`unit_failure_unbalance` gives the voltage on the units left
in a group after ``F`` of its units are lost (externally fused units) and the neutral shift.

Pure functions on plain numbers (no files, no study runs).

References
----------
IEEE Std C37.99 (guide for the protection of shunt capacitor banks), unbalance practice;
IEEE Std 18-2002 (shunt power capacitors), continuous rms voltage limit 1.10 pu;
/work/shared/REFERENCES.md "Capacitor bank construction and unbalance (IEEE Std C37.99 practice)".
"""

from __future__ import annotations

import math
import operator
from dataclasses import dataclass
from typing import Sequence

from resonance.standards.duty import DUTY_LIMITS

__all__ = ["RatingList", "UNIT_KV_60HZ", "UNIT_KV_50HZ", "UNIT_KVAR", "CONNECTIONS", "MIN_PARALLEL_UNITS",
           "MAX_GROUP_KVAR", "UnitFailure", "Construction", "unit_failure_unbalance", "propose_construction"]


@dataclass(frozen=True)
class RatingList:
    """A list of standard ratings with where it comes from.

    Attributes
    ----------
    values : tuple of float
        The ratings, ascending [kV] or [kvar].
    source : str
        Where the list comes from, with its marker [unitless].
    """

    values: tuple[float, ...]
    source: str


#: Unit voltage ratings of 60 Hz practice [kV].
UNIT_KV_60HZ = RatingList(
    (2.4, 4.16, 4.8, 7.2, 7.62, 7.96, 8.32, 9.54, 9.96, 11.4, 12.47, 13.28, 13.8, 14.4),
    "[memory] standard unit voltages of 60 Hz practice, REFERENCES.md 'Capacitor bank construction'")
#: Unit voltage ratings of 50 Hz practice [kV]; 50 Hz units are commonly made to the ordered voltage.
UNIT_KV_50HZ = RatingList(
    (3.0, 3.15, 3.3, 3.64, 3.81, 5.77, 6.0, 6.35, 6.6, 7.2, 7.62, 8.0, 9.0, 10.0, 11.0, 11.55, 12.0, 12.7),
    "[common practice, memory] unit voltages of 50 Hz practice (3.0-12.7 kV)")
#: Unit kvar sizes (both frequencies) [kvar].
UNIT_KVAR = RatingList(
    (50.0, 100.0, 150.0, 200.0, 300.0, 400.0, 500.0, 600.0, 700.0, 800.0, 1000.0),
    "[memory] standard unit sizes, REFERENCES.md 'Capacitor bank construction' (50-1000 kvar)")

#: Least number of units in parallel per series group for externally fused banks, so that a fuse
#: operation leaves the group in service and the unbalance can be detected [unitless].
MIN_PARALLEL_UNITS = 2
MIN_PARALLEL_UNITS_SOURCE = "[common practice] at least two externally fused units per series group"
#: Largest kvar in parallel in one series group (energy discharged into a failed unit and its fuse) [kvar].
MAX_GROUP_KVAR = 4650.0
MAX_GROUP_KVAR_SOURCE = "[common practice, memory] about 4650 kvar per series group for expulsion fuses"

#: IEEE Std 18 continuous rms voltage limit on a unit [pu of rated rms voltage].
UNIT_V_LIMIT_PU = DUTY_LIMITS["ieee18-2002"].v_rms

#: Connections and, for each, (strings per phase on one neutral, neutral held by the source):
#: a wye string runs phase to neutral, a delta leg phase to phase.
_CONNECTION_SHAPE = {
    "wye_grounded": (1, True),
    "wye_ungrounded": (1, False),
    "double_wye_ungrounded": (2, False),
    "delta": (1, True),
}
CONNECTIONS = tuple(_CONNECTION_SHAPE)


@dataclass(frozen=True)
class UnitFailure:
    """Voltages after ``failed_units`` units are lost in one series group.

    Attributes
    ----------
    connection : str
        Bank connection, one of :data:`CONNECTIONS` [unitless].
    series_groups, parallel_units, failed_units : int
        ``S``, ``P`` and ``F`` [unitless].
    v_unit_pu : float
        Voltage on the units left in the affected group, per unit of their healthy voltage [pu].
    v_unit_rated_pu : float
        The same per unit of the unit rating: ``v_unit_pu x v_healthy_pu`` [pu].
    neutral_shift_pu : float or None
        Neutral-to-ground voltage per unit of the phase-to-neutral voltage (ungrounded wyes);
        0 for a grounded wye; None for a delta (no neutral) [pu].
    neutral_current_pu : float or None
        Double wye only: current in the tie between the two neutrals, per unit of the healthy phase
        current of one wye; None otherwise [pu].
    limit_pu : float
        Continuous rms voltage limit on a unit [pu of rated].
    exceeds_limit : bool
        ``v_unit_rated_pu > limit_pu`` [unitless].
    first_failed_over : int or None
        Least number of failed units in one group (1 <= F < P) whose remaining units exceed the
        limit; None if none does [unitless].
    """

    connection: str
    series_groups: int
    parallel_units: int
    failed_units: int
    v_unit_pu: float
    v_unit_rated_pu: float
    neutral_shift_pu: float | None
    neutral_current_pu: float | None
    limit_pu: float
    exceeds_limit: bool
    first_failed_over: int | None


@dataclass(frozen=True)
class Construction:
    """One bank construction.

    Attributes
    ----------
    connection : str
        One of :data:`CONNECTIONS` [unitless].
    series_groups : int
        ``S``, series groups per string [unitless].
    parallel_units : int
        ``P``, units in parallel per group [unitless].
    unit_kv : float
        Unit rated voltage [kV].
    unit_kvar : float
        Unit rated output [kvar].
    strings : int
        Number of strings: 3 (wye, delta) or 6 (double wye) [unitless].
    units_total : int
        ``strings x S x P`` [unitless].
    leg_rated_kv : float
        String rated voltage ``S x unit_kv`` (phase to neutral for wyes, phase to phase for delta) [kV].
    bank_rated_kv : float
        Line-to-line equivalent rated voltage of the bank [kV].
    required_leg_kv : float
        Voltage the string must withstand [kV].
    bank_kvar_rated : float
        Three-phase output at the bank rated voltage [kvar].
    bank_kvar_system : float
        Three-phase output with the system voltage across the bank,
        ``bank_kvar_rated (system_kv / bank_rated_kv)^2`` [kvar].
    overrating : float
        ``leg_rated_kv / required_leg_kv`` [unitless], >= 1.
    unbalance : UnitFailure or None
        One unit lost in one group; None where ``P = 1`` (the loss opens the string).
    """

    connection: str
    series_groups: int
    parallel_units: int
    unit_kv: float
    unit_kvar: float
    strings: int
    units_total: int
    leg_rated_kv: float
    bank_rated_kv: float
    required_leg_kv: float
    bank_kvar_rated: float
    bank_kvar_system: float
    overrating: float
    unbalance: UnitFailure | None


def _count(value, name: str, least: int) -> int:
    if isinstance(value, bool):
        raise ValueError(f"{name} must be a whole number, got {value!r}")
    try:
        n = operator.index(value)
    except TypeError:
        raise ValueError(f"{name} must be a whole number, got {value!r}") from None
    if n < least:
        raise ValueError(f"{name} must be at least {least}, got {n}")
    return n


def _positive(value, name: str) -> float:
    if isinstance(value, bool):
        raise ValueError(f"{name} must be a number, got {value!r}")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(x) or x <= 0.0:
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    return x


def _connection(value, name: str = "connection") -> str:
    if value not in _CONNECTION_SHAPE:
        raise ValueError(f"unknown {name} {value!r}; choose one of {', '.join(CONNECTIONS)}")
    return value


def _ratings(values, name: str) -> tuple[float, ...]:
    if isinstance(values, (str, bytes)):
        raise ValueError(f"{name} must be a list of numbers, got {values!r}")
    try:
        items = list(values)
    except TypeError:
        raise ValueError(f"{name} must be a list of numbers, got {values!r}") from None
    if not items:
        raise ValueError(f"{name} must hold at least one rating")
    return tuple(sorted({_positive(v, f"{name}[{i}]") for i, v in enumerate(items)}))


def _v_unit(s: int, p: int, f: int, n: int, held: bool) -> tuple[float, float | None, float | None]:
    """Closed forms: (voltage on the remaining units [pu of healthy], neutral shift [pu], tie current [pu])."""
    if held:
        return s * p / (s * (p - f) + f), None, None
    d = 3 * n * s * (p - f) + (3 * n - 1) * f
    tie = 3.0 * f / d if n == 2 else None
    return 3 * n * s * p / d, f / d, tie


def unit_failure_unbalance(series_groups: int, parallel_units: int, failed_units: int, connection: str, *,
                           v_healthy_pu: float = 1.0, limit_pu: float = UNIT_V_LIMIT_PU) -> UnitFailure:
    """Voltage on the units left in a series group after some of its units are lost.

    Parameters
    ----------
    series_groups : int
        ``S``, series groups per string [unitless], >= 1.
    parallel_units : int
        ``P``, units in parallel per group [unitless], >= 1.
    failed_units : int
        ``F``, units lost (fuses blown) in one group of one string [unitless], 0 <= F < P.
    connection : str
        ``"wye_grounded"``, ``"wye_ungrounded"``, ``"double_wye_ungrounded"`` (two equal ungrounded
        wyes with their neutrals tied to each other, not to ground) or ``"delta"`` [unitless].
    v_healthy_pu : float, optional
        Healthy voltage on a unit per unit of its rating, for the limit check [pu]; default 1.
    limit_pu : float, optional
        Continuous rms voltage limit on a unit [pu of rated]; default 1.10 (IEEE Std 18-2002).

    Returns
    -------
    UnitFailure
        The voltage on the remaining units [pu], the neutral shift [pu], the neutral tie current of a
        double wye [pu], the limit check and the least failure count that exceeds the limit.

    Raises
    ------
    ValueError
        Counts out of range (``failed_units >= parallel_units``), unknown connection, non-positive
        ``v_healthy_pu`` or ``limit_pu``; the message names the parameter.

    Notes
    -----
    Every unit is the same admittance ``Y``; a healthy group is ``P Y``, the affected group
    ``(P - F) Y``, so a string with the affected group has ``Y_a = Y P (P - F) / (S (P - F) + F)``
    against ``Y_0 = Y P / S`` for a healthy string, and the affected group takes the fraction
    ``P / (S (P - F) + F)`` of its string's voltage (against ``1/S`` when healthy).

    Grounded wye and delta: the source holds each string's voltage (phase to ground, phase to phase),
    so ``V = S P / (S (P - F) + F)`` (REFERENCES.md, grounded wye; the delta leg is the same circuit).

    Ungrounded wyes with ``N`` equal strings per phase on one floating neutral (``N = 1`` wye,
    ``N = 2`` double wye with tied neutrals; derived here): the neutral voltage is
    ``V_n = (Y_a - Y_0) V_A / (Y_a + (3N - 1) Y_0)`` from Kirchhoff's current law at the neutral with
    ``V_B + V_C = -V_A``; the affected string sees ``V_A - V_n = 3 N Y_0 V_A / (Y_a + (3N - 1) Y_0)``.
    With ``D = 3 N S (P - F) + (3N - 1) F``:

    * ``V = 3 N S P / D``; wye ``3 S P / (3 S (P - F) + 2 F)`` (REFERENCES.md), double wye
      ``6 S P / (6 S (P - F) + 5 F)``;
    * neutral shift ``|V_n| / |V_A| = F / D``; double wye ``F / (6 S (P - F) + 5 F)``;
    * double wye neutral tie current, from the affected wye into the other,
      ``|I_n| / (Y_0 |V_A|) = 3 (Y_0 - Y_a) / (Y_a + 5 Y_0) = 3 F / (6 S (P - F) + 5 F)``.

    The position of the affected group in its string does not matter (series elements).

    References
    ----------
    IEEE Std C37.99, unbalance relationships of shunt capacitor banks [memory];
    REFERENCES.md "Capacitor bank construction and unbalance"; double wye and tie current derived as
    above; IEEE Std 18-2002 continuous rms voltage limit 1.10 pu [published].
    """
    s = _count(series_groups, "series_groups", 1)
    p = _count(parallel_units, "parallel_units", 1)
    f = _count(failed_units, "failed_units", 0)
    if f >= p:
        raise ValueError(f"failed_units must be less than parallel_units ({p}), got {f}: "
                         "losing every unit of a group opens the string")
    conn = _connection(connection)
    v_h = _positive(v_healthy_pu, "v_healthy_pu")
    lim = _positive(limit_pu, "limit_pu")
    n, held = _CONNECTION_SHAPE[conn]
    v, shift, tie = _v_unit(s, p, f, n, held)
    if conn == "wye_grounded":
        shift = 0.0
    first = next((k for k in range(1, p) if _v_unit(s, p, k, n, held)[0] * v_h > lim), None)
    return UnitFailure(connection=conn, series_groups=s, parallel_units=p, failed_units=f, v_unit_pu=v,
                       v_unit_rated_pu=v * v_h, neutral_shift_pu=shift, neutral_current_pu=tie, limit_pu=lim,
                       exceeds_limit=v * v_h > lim, first_failed_over=first)


def _best_units(target_string_kvar: float, s: int, sizes: tuple[float, ...], min_p: int,
                max_group: float | None) -> tuple[float, int] | None:
    """(unit kvar, P) with the least string kvar at or above the target, then fewest units."""
    best = None
    for q in sizes:
        p = max(min_p, math.ceil(target_string_kvar / (s * q) - 1e-9))
        if max_group is not None and p * q > max_group * (1 + 1e-12):
            continue
        key = (s * p * q, p)
        if best is None or key < best[0]:
            best = (key, q, p)
    return None if best is None else (best[1], best[2])


def propose_construction(system_kv: float, bank_kvar: float, required_phase_kv: float | None = None, *,
                         connections: str | Sequence[str] = CONNECTIONS, f_hz: float = 60.0,
                         unit_kv: Sequence[float] | None = None, unit_kvar: Sequence[float] | None = None,
                         min_parallel: int = MIN_PARALLEL_UNITS, max_series_groups: int = 16,
                         max_group_kvar: float | None = MAX_GROUP_KVAR,
                         limit_pu: float = UNIT_V_LIMIT_PU) -> list[Construction]:
    """Series groups, unit voltage, unit kvar and units per group for a bank of standard units.

    Parameters
    ----------
    system_kv : float
        System voltage, line to line [kV].
    bank_kvar : float
        Required three-phase output at the bank rated voltage [kvar].
    required_phase_kv : float, optional
        Least voltage rating the capacitors need, per phase as a wye equivalent (phase to neutral)
        [kV]; a delta leg needs ``sqrt(3)`` times this.  For a detuned bank or filter pass
        ``U/(1 - p)`` plus the harmonic allowance.  Default ``system_kv / sqrt(3)``.
    connections : str or sequence of str, optional
        Connections to consider, from :data:`CONNECTIONS` [unitless]; default all four.
    f_hz : float, optional
        Fundamental frequency, 50 or 60, choosing the default unit voltages [Hz].
    unit_kv : sequence of float, optional
        Unit voltage ratings to choose from [kV]; default :data:`UNIT_KV_60HZ` or :data:`UNIT_KV_50HZ`.
    unit_kvar : sequence of float, optional
        Unit kvar sizes to choose from [kvar]; default :data:`UNIT_KVAR`.
    min_parallel : int, optional
        Least number of units in parallel per group [unitless]; default 2 (common practice for
        externally fused units).
    max_series_groups : int, optional
        Most series groups per string searched [unitless]; default 16.
    max_group_kvar : float or None, optional
        Most kvar in parallel in one group [kvar]; default 4650 (common practice, from memory);
        None for no limit.
    limit_pu : float, optional
        Continuous rms voltage limit on a unit for the unbalance check [pu of rated]; default 1.10.

    Returns
    -------
    list of Construction
        One construction per connection, sorted by overrating, then units total, then the order of
        ``connections``.

    Raises
    ------
    ValueError
        A bad parameter (named in the message), or no construction within ``max_series_groups`` and
        ``max_group_kvar``.

    Notes
    -----
    Per connection, with the string's required voltage ``V_req`` (``required_phase_kv`` for wyes,
    ``sqrt(3)`` times it for delta) and ``n`` strings (3; 6 for a double wye):

    1. voltage: the pairs ``(S, unit_kv)`` with ``S unit_kv >= V_req`` are taken in order of the
       least overrating ``S unit_kv / V_req`` (ties: fewer series groups); the first with a feasible
       kvar choice is kept;
    2. kvar: for each unit size ``q``, ``P = max(min_parallel, ceil(bank_kvar / (n S q)))``, dropped if
       ``P q > max_group_kvar``; the bank ``n S P q`` closest at or above ``bank_kvar`` is kept
       (ties: fewest units);
    3. ``bank_kvar_system = n S P q (system_kv / V_LL,rated)^2`` (fixed capacitance), with
       ``V_LL,rated = sqrt(3) S unit_kv`` for wyes and ``S unit_kv`` for delta;
    4. unbalance: :func:`unit_failure_unbalance` with one unit lost and the healthy unit voltage
       ``V_req / (S unit_kv)`` per unit of rating (the units at the required voltage).

    References
    ----------
    IEEE Std C37.99, bank construction and fusing practice [memory]; IEEE Std 18-2002, rated
    voltage and kvar of units, ``Q = Q_R (V/V_R)^2``; REFERENCES.md "Capacitor bank construction and
    unbalance"; unit lists :data:`UNIT_KV_60HZ`, :data:`UNIT_KV_50HZ`, :data:`UNIT_KVAR` (memory).
    """
    v_sys = _positive(system_kv, "system_kv")
    q_req = _positive(bank_kvar, "bank_kvar")
    v_ph = v_sys / math.sqrt(3.0) if required_phase_kv is None else _positive(required_phase_kv, "required_phase_kv")
    f = _positive(f_hz, "f_hz")
    if unit_kv is None:
        if f not in (50.0, 60.0):
            raise ValueError(f"f_hz must be 50 or 60 for the built-in unit voltages, got {f_hz!r}; pass unit_kv")
        unit_kv = (UNIT_KV_60HZ if f == 60.0 else UNIT_KV_50HZ).values
    volts = _ratings(unit_kv, "unit_kv")
    sizes = _ratings(UNIT_KVAR.values if unit_kvar is None else unit_kvar, "unit_kvar")
    min_p = _count(min_parallel, "min_parallel", 1)
    s_max = _count(max_series_groups, "max_series_groups", 1)
    max_group = None if max_group_kvar is None else _positive(max_group_kvar, "max_group_kvar")
    lim = _positive(limit_pu, "limit_pu")
    conns = [connections] if isinstance(connections, str) else list(connections)
    if not conns:
        raise ValueError("connections must name at least one connection")
    conns = list(dict.fromkeys(_connection(c, "connections entry") for c in conns))

    out = []
    for order, conn in enumerate(conns):
        n_per_phase, _ = _CONNECTION_SHAPE[conn]
        strings = 3 * n_per_phase
        v_req = v_ph * math.sqrt(3.0) if conn == "delta" else v_ph
        pairs = sorted((round(s * u, 9), s, u) for s in range(1, s_max + 1) for u in volts if s * u >= v_req * (1 - 1e-12))
        chosen = None
        for leg_kv, s, u in pairs:
            units = _best_units(q_req / strings, s, sizes, min_p, max_group)
            if units is not None:
                chosen = (leg_kv, s, u, *units)
                break
        if chosen is None:
            raise ValueError(f"no {conn} construction within max_series_groups={s_max} and "
                             f"max_group_kvar={max_group}: raise them or pass other unit_kv / unit_kvar")
        leg_kv, s, u, q, p = chosen
        v_ll = leg_kv if conn == "delta" else math.sqrt(3.0) * leg_kv
        q_rated = strings * s * p * q
        unb = None if p == 1 else unit_failure_unbalance(s, p, 1, conn, v_healthy_pu=v_req / leg_kv, limit_pu=lim)
        out.append((leg_kv / v_req, strings * s * p, order, Construction(
            connection=conn, series_groups=s, parallel_units=p, unit_kv=u, unit_kvar=q, strings=strings,
            units_total=strings * s * p, leg_rated_kv=leg_kv, bank_rated_kv=v_ll, required_leg_kv=v_req,
            bank_kvar_rated=q_rated, bank_kvar_system=q_rated * (v_sys / v_ll) ** 2,
            overrating=leg_kv / v_req, unbalance=unb)))
    out.sort(key=lambda t: t[:3])
    return [t[3] for t in out]

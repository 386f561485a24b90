"""Harmonic screening of a proposed stage plan: is a plain bank credible, or must it be detuned?

For each stage state of a plan (step ``k``: stages ``1..k`` in service) the parallel resonance of
the bank with the supply is estimated by the closed form ``h_k = sqrt(S_sc / Q_k)`` and compared
with the significant harmonic orders of the case (its sources' injected orders and the supply's
background) within the case's screening margin.  Where a state resonates within the margin of a
significant order, a detuned bank is proposed: the tuning order, the capacitor rated voltage and
each stage's nameplate for the net output the plan needs.

Pure numeric core: it takes a validated case object and plain numbers, opens no file and prints
nothing.  It is a screening estimate for sizing; ``resonance check`` on the case with the bank is
the study that decides.

References
----------
IEEE Std 1036-2010, clause 6.2 (``h = sqrt(MVA_sc / Mvar_cap)``); IEEE Std 1531-2020 (detuned
banks tuned below the lowest significant harmonic); /work/shared/REFERENCES.md "Resonance",
"Detuned (series reactor) banks".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from resonance.assessment.tuning import DetuningSettings, detuning_settings, significant_orders, tuning_reasons
from resonance.design.detuned_step import capacitor_rating_kv, nameplate_kvar
from resonance.design.mv_rating import LV_LIMIT_KV, rating_ladder
from resonance.errors import InputError, InputProblem
from resonance.harmonics.screening import h_estimate
from resonance.inputs.case_checks import bus_voltages_kv, sc_kva_estimate

__all__ = ["StageState", "Recommendation", "PlanHarmonics", "CaseHarmonics", "case_bank_on_bus",
           "case_harmonics", "stage_states", "choose_tuning_order", "detuned_design", "screen_plan",
           "NAMEPLATE_STEP_KVAR", "ordinal"]

#: Stage nameplates of a proposed detuned bank are rounded up to this step [kvar] (project choice,
#: the same 0.1 kvar the detuning search uses; rounding up keeps the net output at or above the plan).
NAMEPLATE_STEP_KVAR = 0.1

_ARGS = "<arguments>"


@dataclass(frozen=True)
class StageState:
    """The hand estimate of one stage state's parallel resonance against the significant orders.

    Attributes
    ----------
    step : int
        Step ``k`` (stages ``1..k`` in service) [unitless].
    q_kvar : float
        Net capacitive output in service at the bus voltage [kvar].
    h_estimate : float
        ``sqrt(S_sc / Q_k)`` with the nominal supply [unitless].
    h_estimate_weak : float or None
        The same with the weak supply (``sc_mva_min``), when the case gives one [unitless].
    nearest_order : int or None
        Significant order nearest to the estimate (the worse of the two supplies) [unitless].
    margin_pct : float or None
        ``100 (h - n) / n`` to that order [%] (negative: resonance below it).
    margin_supply : str or None
        ``"nominal"`` or ``"weak"``: the supply whose estimate gives that margin [unitless].
    ok : bool
        True when every estimate is farther than the screening margin from every significant order.
    """

    step: int
    q_kvar: float
    h_estimate: float
    h_estimate_weak: float | None
    nearest_order: int | None
    margin_pct: float | None
    margin_supply: str | None
    ok: bool

    @property
    def h_nearest(self) -> float:
        """The estimate (nominal or weak supply) whose margin is :attr:`margin_pct` [unitless]."""
        return self.h_estimate_weak if self.margin_supply == "weak" else self.h_estimate


@dataclass(frozen=True)
class Recommendation:
    """A plain or a detuned bank for the plan, and why.

    Attributes
    ----------
    kind : {"plain", "detuned"}
        The design recommended.
    reason : str
        Plain words [unitless].
    tuning_order : float or None
        Series tuning order ``n`` of the detuned bank [unitless].
    detuning_pct : float or None
        ``p = 1/n^2`` [%].
    rated_kv : float or None
        Capacitor rated voltage of the detuned bank [kV].
    stages_kvar : tuple of float
        Nameplate of each stage at ``rated_kv`` (detuned) [kvar]; empty for a plain bank.
    stages_net_kvar : tuple of float
        Net output of each stage at the bus voltage [kvar].
    h_detuned : tuple of float
        Parallel resonance ``1/sqrt(p + Q_C/S_sc)`` of each detuned stage state (nominal supply)
        [unitless].
    construction : dict or None
        Above 1 kV: the construction of standard units of the stages
        (:func:`resonance.design.mv_rating.stage_ratings`); None at or below 1 kV.
    """

    kind: str
    reason: str
    tuning_order: float | None = None
    detuning_pct: float | None = None
    rated_kv: float | None = None
    stages_kvar: tuple[float, ...] = ()
    stages_net_kvar: tuple[float, ...] = ()
    h_detuned: tuple[float, ...] = ()
    construction: dict | None = None


@dataclass(frozen=True)
class CaseHarmonics:
    """What the screening takes from a case for one bank bus.

    Attributes
    ----------
    bus : str
        Bank bus [unitless].
    bus_kv : float or None
        Nominal voltage of the bus [kV] (None when the case cannot tell).
    s_sc_kva : float or None
        Short-circuit power at the bus, nominal supply [kVA] (None: not estimable).
    s_sc_weak_kva : float or None
        The same with ``sc_mva_min`` [kVA].
    orders : tuple of int
        Significant orders [unitless].
    margin_pct : float
        Screening margin, ``[study] margin_pct`` [%].
    settings : DetuningSettings
        The case's ``[detuning]`` settings.
    sources : tuple of str
        Names of the harmonic sources [unitless].
    note : str
        Why the short-circuit power is unknown, when it is [unitless].
    f_hz : float
        The case's fundamental frequency [Hz].
    """

    bus: str
    bus_kv: float | None
    s_sc_kva: float | None
    s_sc_weak_kva: float | None
    orders: tuple[int, ...]
    margin_pct: float
    settings: DetuningSettings
    sources: tuple[str, ...]
    note: str = ""
    f_hz: float = 60.0


@dataclass(frozen=True)
class PlanHarmonics:
    """The screening of one plan: its stage states and the recommendation.

    Attributes
    ----------
    case : CaseHarmonics
        The case's figures used.
    states : tuple of StageState
        Stage states 1..n of the plan as a plain bank.
    recommendation : Recommendation
        Plain or detuned.
    """

    case: CaseHarmonics
    states: tuple[StageState, ...]
    recommendation: Recommendation

    @property
    def plain_ok(self) -> bool:
        """True when every stage state of the plain bank clears the margin [unitless]."""
        return all(s.ok for s in self.states)


def ordinal(n: int) -> str:
    """``5 -> "5th"``, ``23 -> "23rd"`` (for messages) [unitless]."""
    n = int(n)
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


# ----------------------------------------------------------------------------- from the case
def case_bank_on_bus(case, bus: str):
    """The case's first capacitor bank on ``bus`` (a filter is not a PFC bank), or None.

    Parameters
    ----------
    case : Case
        Validated case.
    bus : str
        Bus name [unitless].

    Returns
    -------
    Bank or None
    """
    for b in case.bank:
        if b.bus == bus and getattr(b, "kind", "capacitor") != "filter":
            return b
    return None


def _source_spectra(case) -> list[tuple[str, dict, int]]:
    """(name, {order: pct}, pulse) of every harmonic source, as the study resolves them
    (:func:`resonance.assessment.study._source_orders`); a bad spectrum raises InputError."""
    from resonance.assessment.study import _source_orders  # noqa: PLC0415

    out, probs = _source_orders(case)
    if probs:
        raise InputError(probs)
    return out


def case_harmonics(case, bus: str) -> CaseHarmonics:
    """Short-circuit power at a bank bus, significant orders and margins from a validated case.

    Parameters
    ----------
    case : Case
        Validated case (:func:`resonance.inputs.case_load.load_case`).
    bus : str
        The bank bus [unitless].

    Returns
    -------
    CaseHarmonics
        ``s_sc_kva`` is None (with a ``note``) for a case whose network comes from a file.

    Raises
    ------
    InputError
        ``bus`` is not a bus of the case (the buses are listed), or a spectrum is bad.

    Notes
    -----
    ``S_sc`` is :func:`resonance.inputs.case_checks.sc_kva_estimate` (supply, transformers and
    cables between it and the bus in series, loads left out).  Significant orders are
    :func:`resonance.assessment.tuning.significant_orders` of the sources and the supply's
    background, with no fallback: a case without sources or background has none.

    References
    ----------
    IEC 60909-0:2016, clause 4.2 (short-circuit impedance, c = 1); REFERENCES.md "Resonance"
    (utility and transformer in series).
    """
    file = case.source_file or "<case>"
    st = detuning_settings(case)
    spectra = _source_spectra(case)
    background = dict(case.supply.background_pct) if case.supply is not None else {}
    orders = significant_orders(spectra, background, st, fallback=())
    margin = float(case.study.margin_pct)
    names = tuple(n for n, _, _ in spectra)
    if case.network is not None or case.supply is None:
        return CaseHarmonics(bus, None, None, None, orders, margin, st, names, f_hz=float(case.frequency_hz),
                             note=f"{file} takes its network from a pandapower file; the short-circuit power at "
                                  f"{bus!r} is estimated from [supply], [[transformer]] and [[cable]] tables only")
    kv, _ = bus_voltages_kv(case)
    if bus not in kv:
        listed = ", ".join(repr(b) for b in sorted(kv)[:12]) + (", ..." if len(kv) > 12 else "")
        raise InputError([InputProblem("<command line>", "--bus",
                                       f"bus {bus!r} is not a bus of the case {file} (buses: {listed})")])
    sc = sc_kva_estimate(case, kv).get(bus)
    weak = None
    s = case.supply
    if s.sc_mva_min is not None:
        w = case.model_copy(update={"supply": s.model_copy(update={"sc_mva": s.sc_mva_min,
                                                                   "x_r": s.x_r_min or s.x_r})})
        weak = sc_kva_estimate(w, kv).get(bus)
    note = "" if sc else f"the short-circuit power at {bus!r} cannot be estimated from the case {file}"
    return CaseHarmonics(bus, float(kv[bus]), sc, weak, orders, margin, st, names, note=note,
                         f_hz=float(case.frequency_hz))


# ----------------------------------------------------------------------------- pure screening
def stage_states(s_sc_kva: float, steps_q_kvar: Sequence[float], orders: Sequence[int], margin_pct: float,
                 s_sc_weak_kva: float | None = None) -> tuple[StageState, ...]:
    """Hand estimate of the parallel resonance of each stage state against the significant orders.

    Parameters
    ----------
    s_sc_kva : float
        Short-circuit power at the bank bus [kVA].
    steps_q_kvar : sequence of float
        Net capacitive output in service at steps 1..n, at the bus voltage [kvar].
    orders : sequence of int
        Significant harmonic orders [unitless].
    margin_pct : float
        Screening margin [%]; a state is not ok when ``|h - n| / n <= margin`` for some order.
    s_sc_weak_kva : float, optional
        Short-circuit power with the weak supply [kVA].

    Returns
    -------
    tuple of StageState

    Notes
    -----
    ``h_k = sqrt(S_sc / Q_k)``; margin ``100 (h_k - n) / n`` to the nearest order ``n`` (the
    study's rule: ok when ``|margin| > margin_pct``).

    References
    ----------
    IEEE Std 1036-2010, clause 6.2; REFERENCES.md "Resonance" (h_r ~= sqrt(S_sc / Q_C) [published];
    +-10 % screening margin [common practice]).
    """
    if not (isinstance(s_sc_kva, (int, float)) and math.isfinite(s_sc_kva) and s_sc_kva > 0):
        raise InputError.single(_ARGS, "s_sc_kva", f"{s_sc_kva!r} must be a finite number > 0")
    ords = sorted({int(h) for h in orders})
    out = []
    for k, q in enumerate(steps_q_kvar, start=1):
        h0 = h_estimate(s_sc_kva, float(q))
        hw = h_estimate(s_sc_weak_kva, float(q)) if s_sc_weak_kva else None
        hs = [("nominal", h0)] + ([("weak", hw)] if hw is not None else [])
        best = None  # (|margin|, order, margin, supply) over both supplies
        for supply, h in hs:
            for n in ords:
                m = 100.0 * (h - n) / n
                if best is None or abs(m) < best[0]:
                    best = (abs(m), n, m, supply)
        ok = best is None or best[0] > margin_pct
        out.append(StageState(k, float(q), h0, hw, best[1] if best else None, best[2] if best else None,
                              best[3] if best else None, ok))
    return tuple(out)


def choose_tuning_order(h_low: int | None, settings: DetuningSettings) -> float | None:
    """Highest of the settings' tuning orders that the project's tuning rule accepts.

    Parameters
    ----------
    h_low : int or None
        Lowest significant harmonic order [unitless].
    settings : DetuningSettings
        ``tuning_orders``, ``order_margin_pct``, ``band_margin_pct`` and tolerances.

    Returns
    -------
    float or None
        Tuning order ``n`` [unitless]; None when none of the list qualifies.

    Notes
    -----
    ``n <= h_low (1 - order_margin/100)`` and the tolerance band's top below
    ``h_low (1 - band_margin/100)`` (:func:`resonance.assessment.tuning.tuning_reasons`, the rule
    a detuned bank in a case is judged by).

    References
    ----------
    IEEE Std 1531-2020; REFERENCES.md "Detuned (series reactor) banks" ("below 90 % of the dominant
    harmonic" [published]).
    """
    for n in sorted(settings.tuning_orders, reverse=True):
        if not tuning_reasons(float(n), h_low, settings):
            return float(n)
    return None


def detuned_design(stages_net_kvar: Sequence[float], u_bus_kv: float, n: float, settings: DetuningSettings,
                   s_sc_kva: float | None = None, f_hz: float = 60.0) -> Recommendation:
    """Detuned stages delivering the plan's net output: rating, nameplates, parallel resonances.

    Parameters
    ----------
    stages_net_kvar : sequence of float
        Net output each stage must deliver at the bus [kvar].
    u_bus_kv : float
        Bus voltage [kV].
    n : float
        Series tuning order [unitless].
    settings : DetuningSettings
        ``standard_cap_kv``, ``mv_cap_step_kv``, ``cap_voltage_margin_pct``.
    s_sc_kva : float, optional
        Short-circuit power at the bus, for the parallel resonances [kVA].
    f_hz : float, optional
        Fundamental frequency, choosing the standard unit voltages above 1 kV [Hz].

    Returns
    -------
    Recommendation
        ``kind = "detuned"`` (``reason`` left empty for the caller).

    Notes
    -----
    ``p = 1/n^2``; capacitor voltage ``U_C = U / (1 - p)`` times ``(1 + margin/100)``, rounded up
    to a rating on offer; nameplate ``Q_CR = Q_net (U_CR/U)^2 (1 - p)`` rounded up to
    :data:`NAMEPLATE_STEP_KVAR`; net ``Q_net = Q_CR (U/U_CR)^2 / (1 - p)``; parallel resonance of
    state k ``h_p = 1/sqrt(p + Q_C,k/S_sc)`` with ``Q_C = Q_net (1 - p)`` the capacitors alone at
    the bus voltage.

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks" [published; h_p derived].
    """
    p = 1.0 / (n * n)
    u_need = u_bus_kv / (1.0 - p) * (1.0 + settings.cap_voltage_margin_pct / 100.0)
    cons = None
    if u_bus_kv > LV_LIMIT_KV:  # above 1 kV: a construction of standard units, as the detuning proposal
        q_need = nameplate_kvar(np.asarray(stages_net_kvar, float), u_need, u_bus_kv, p)
        lad = rating_ladder(u_bus_kv, list(q_need), u_need, f_hz, 0)
        if lad[0][0] / u_bus_kv > 1.6:  # no wye of listed units within the range: delta, reactors in line
            lad = rating_ladder(u_bus_kv, list(q_need), u_need, f_hz, 0, connections="delta")
        u_cr, cons = lad[0]
        plate = np.asarray(cons["steps_kvar"], float)
    else:
        u_cr = capacitor_rating_kv(u_need, settings.standard_cap_kv, settings.mv_cap_step_kv)
        raw = nameplate_kvar(np.asarray(stages_net_kvar, float), u_cr, u_bus_kv, p)
        step = NAMEPLATE_STEP_KVAR
        plate = np.round(np.ceil(raw / step - 1e-9) * step, 6)
    net = plate * (u_bus_kv / u_cr) ** 2 / (1.0 - p)
    h_det: tuple[float, ...] = ()
    if s_sc_kva:
        h_det = tuple(h_estimate(s_sc_kva, float(q), p) for q in np.cumsum(net) * (1.0 - p))
    return Recommendation("detuned", "", tuning_order=float(n), detuning_pct=round(100.0 * p, 4),
                          rated_kv=float(u_cr), stages_kvar=tuple(float(x) for x in plate),
                          stages_net_kvar=tuple(float(x) for x in net), h_detuned=h_det, construction=cons)


def screen_plan(ch: CaseHarmonics, stages_net_kvar: Sequence[float], u_bus_kv: float) -> PlanHarmonics:
    """Screen a plan's stage states as a plain bank and recommend plain or detuned.

    Parameters
    ----------
    ch : CaseHarmonics
        From :func:`case_harmonics` (``s_sc_kva`` must be known).
    stages_net_kvar : sequence of float
        Net output of each stage at the bus, in switching order [kvar].
    u_bus_kv : float
        Bus voltage [kV].

    Returns
    -------
    PlanHarmonics

    Notes
    -----
    Plain when every state clears the margin (:func:`stage_states`); otherwise detuned at
    :func:`choose_tuning_order` below the lowest significant order (:func:`detuned_design`).

    References
    ----------
    As :func:`stage_states` and :func:`detuned_design`.
    """
    if ch.s_sc_kva is None:
        raise InputError.single(_ARGS, "s_sc_kva", ch.note or "short-circuit power unknown")
    steps = np.cumsum(np.asarray(stages_net_kvar, float))
    states = stage_states(ch.s_sc_kva, steps, ch.orders, ch.margin_pct, ch.s_sc_weak_kva)
    bad = [s for s in states if not s.ok]
    orders_txt = ", ".join(str(h) for h in ch.orders) or "none"
    if not bad:
        why = (f"no stage state resonates within {ch.margin_pct:g} % of a significant order "
               f"(significant orders: {orders_txt})")
        if not ch.orders:
            why = "the case has no significant harmonic order (no source or background above the thresholds)"
        return PlanHarmonics(ch, states, Recommendation("plain", why, stages_net_kvar=tuple(map(float,
                                                                                           stages_net_kvar))))
    near = "; ".join(f"step {s.step} ({s.q_kvar:.0f} kvar) h = {s.h_nearest:.2f}"
                     f"{' (weak supply)' if s.margin_supply == 'weak' else ''}, {abs(s.margin_pct):.1f} % from the "
                     f"{ordinal(s.nearest_order)}" for s in bad)
    h_low = ch.orders[0]
    n = choose_tuning_order(h_low, ch.settings)
    if n is None:
        rec = Recommendation("detuned", f"a plain bank resonates near a significant order ({near}); none of the "
                                        f"tuning orders {list(ch.settings.tuning_orders)} clears the lowest "
                                        f"significant order {h_low}: a filter study is needed")
        return PlanHarmonics(ch, states, rec)
    rec = detuned_design(stages_net_kvar, u_bus_kv, n, ch.settings, ch.s_sc_kva, f_hz=ch.f_hz)
    why = (f"a plain bank resonates within {ch.margin_pct:g} % of a significant order: {near}; detuned at "
           f"n = {n:g} (p = {rec.detuning_pct:.2f} %), at least {ch.settings.order_margin_pct:g} % below the "
           f"lowest significant order {h_low}")
    plan, got = float(sum(stages_net_kvar)), float(sum(rec.stages_net_kvar))
    if rec.construction is not None and got > 1.1 * plan:
        why += (f"; the smallest construction of standard units gives {got:.0f} kvar net against the plan's "
                f"{plan:.0f} kvar: fewer, larger stages would suit a bank above 1 kV")
    return PlanHarmonics(ch, states, Recommendation(**{**rec.__dict__, "reason": why}))

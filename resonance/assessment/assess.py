"""Penetration, capacitor duty and distortion limits for every step of every bank.

Pure: takes the validated case, the network arrays and the per-step fundamental
voltages; returns plain per-step figures and findings.

References
----------
IEEE Std 18-2002 (capacitor continuous limits), IEEE Std 519-2014/2022
(distortion limits at the PCC), IEC 61000-3-6 (summation law).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from resonance.assessment.envelope import scenario_words
from resonance.assessment.findings import Finding
from resonance.assessment.verdict import distortion_cause
from resonance.inputs.case import Case
from resonance.standards.compat import InPlantLimits, in_plant_limits, planning_levels
from resonance.standards.duty import capacitor_duty, duty_limits
from resonance.standards.limits import ieee519_current_limits, ieee519_voltage_limits
from resonance.model.network import NetworkArrays
from resonance.harmonics.penetration import Injection, PenetrationResult, penetrate
from resonance.harmonics.scan import ModelSettings
from resonance.standards.spectra import resolve_spectrum

__all__ = ["reported", "voltage_levels", "duty_findings", "pcc_findings", "bus_findings", "StepDuty", "BankAssessment", "build_injection", "assess_bank", "demand_current_a"]


@dataclass(frozen=True, eq=False)
class StepDuty:
    """Distortion and duty figures of one step (unrounded; rounded by the results.json writer).

    ``fields`` holds the per-step keys (``thd_v_pct``, ``cap_*_pct``, ``duty_ok``,
    PCC figures, per-order table); ``findings`` the limits it breaks.
    """

    step: int
    fields: dict
    findings: tuple


@dataclass(frozen=True, eq=False)
class BankAssessment:
    """All steps of one bank in one scenario, plus the bank-off reference."""

    bank: str
    scenario: str
    steps: tuple
    bank_off: dict
    pen: PenetrationResult
    info: dict = field(default_factory=dict)


#: decimals per key of the assessment's figures in results.json (everything else: 4)
_DIGITS = {"cap_v_rms_pct": 3, "cap_v_peak_pct": 3, "cap_i_rms_pct": 3, "cap_kvar_pct": 3, "cap_v1_pct": 3,
           "duty_margins_pct": 3, "bank_i_rms_a": 3, "i_limit_pct_of_il": 3, "isc_over_il": 2, "i_sc_a": 2,
           "i_l_a": 3}


def reported(x, nd: int = 4):
    """The assessment's unrounded figures as results.json and the proposals report them
    (``_DIGITS`` decimals per key, else ``nd``) [same units]."""
    if isinstance(x, dict):
        return {k: reported(v, _DIGITS.get(k, nd)) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [reported(v, nd) for v in x]
    if isinstance(x, (bool, np.bool_)) or x is None or isinstance(x, (str, int, np.integer)):
        return x
    v = float(x)
    return round(v, nd) if math.isfinite(v) else None


def build_injection(case: Case, arr: NetworkArrays, model_bus: dict) -> Injection:
    """Harmonic excitation from the case's sources and background.

    Parameters
    ----------
    case : Case
        Validated case.
    arr : NetworkArrays
        Network [pu].
    model_bus : dict
        Bus name -> model index.

    Returns
    -------
    Injection
        Orders present, source currents [pu] and background voltages [pu].

    Notes
    -----
    Fundamental current of a source ``I_1 = S / (sqrt3 U_n)``; in per unit
    on the system base at its bus ``I_1 = S / S_base``; ``I_h = pct_h / 100 I_1``.
    """
    specs = [resolve_spectrum(hs.spectrum, file=case.source_file, field=f"harmonic_source[{i}].spectrum",
                              phase_deg=hs.phase_deg or None) for i, hs in enumerate(case.harmonic_source)]
    bg = dict(case.supply.background_pct) if case.supply else {}
    orders = sorted({int(h) for s in specs for h, p in zip(s.h, s.pct) if p > 0}
                    | {int(h) for h, p in bg.items() if p > 0})
    orders = [h for h in orders if 2 <= h <= case.study.h_max]
    h = np.array(orders, int)
    i_pu = np.zeros((len(specs), h.size))
    ph = np.zeros((len(specs), h.size))
    for k, (hs, s) in enumerate(zip(case.harmonic_source, specs)):
        i1 = hs.kva / 1000.0 / arr.base_mva
        i_pu[k] = i1 * np.array([s.pct_at(int(x)) for x in h]) / 100.0
        if s.phase_deg is not None:
            lookup = dict(zip((int(x) for x in s.h), s.phase_deg))
            ph[k] = [lookup.get(int(x), 0.0) for x in h]
    bg_v = np.array([bg.get(int(x), 0.0) / 100.0 for x in h])
    bg_ph = None
    if case.supply and case.supply.background_phase_deg:
        bg_ph = np.array([case.supply.background_phase_deg.get(int(x), 0.0) for x in h])
    return Injection(h=h, src_bus=np.array([model_bus[hs.bus] for hs in case.harmonic_source], int),
                     src_i_pu=i_pu, src_phase_deg=ph, bg_v_pu=bg_v, bg_phase_deg=bg_ph)


def demand_current_a(case: Case, v_pcc_kv: float, arr: NetworkArrays | None = None) -> tuple[float, str]:
    """Maximum demand current I_L at the PCC for IEEE 519 current limits.

    Parameters
    ----------
    case : Case
        Validated case.
    v_pcc_kv : float
        PCC nominal voltage [kV].
    arr : NetworkArrays, optional
        Network whose linear loads are summed (a network file's loads are
        not in the case tables) [pu].

    Returns
    -------
    (i_l_a, basis) : (float, str)
        Demand current [A] and how it was obtained.

    Notes
    -----
    ``max_demand_a`` when given; else ``max_demand_kw`` at the power factor of
    the case's loads (1.0 without loads); else the apparent power of the
    case's linear loads plus the harmonic sources' rating taken as active power,
    ``|sum(P + jQ) + sum(S_src)| / (sqrt3 U)`` (the sources are plant load too).
    """
    if arr is not None:
        p_load = float(np.sum(arr.load_p_pu)) * arr.base_mva * 1000.0
        q = float(np.sum(arr.load_q_pu)) * arr.base_mva * 1000.0
    else:
        p_load = sum(ld.kw for ld in case.load)
        q = sum(ld.kw * math.tan(math.acos(ld.pf)) for ld in case.load)
    p = p_load + sum(hs.kva for hs in case.harmonic_source)
    pf = p / math.hypot(p, q) if p > 0 else 1.0
    if case.study.max_demand_a:
        return float(case.study.max_demand_a), "study.max_demand_a"
    if case.study.max_demand_kw:
        return case.study.max_demand_kw / pf / (math.sqrt(3) * v_pcc_kv), f"study.max_demand_kw at pf {pf:.3f}"
    s = math.hypot(p, q)
    return s / (math.sqrt(3) * v_pcc_kv), "linear loads plus harmonic source ratings"


def _pct_table(h: np.ndarray, v: np.ndarray) -> dict:
    return {str(int(a)): float(b) * 100.0 for a, b in zip(h, v)}


def assess_bank(case: Case, arr: NetworkArrays, bank, inj: Injection, vm_steps: np.ndarray, pcc: int,
                sc_mva_pcc: float, settings: ModelSettings, scenario: str, diag_extra=None,
                demand_arr: NetworkArrays | None = None) -> BankAssessment:
    """Penetration, duty and limits of every step of one bank.

    Long on purpose: one pass over the steps keeps each step's figures and its findings
    (:func:`duty_findings`, :func:`pcc_findings`) side by side, with the bank-off reference once.

    Parameters
    ----------
    case : Case
        Validated case (settings, loads).
    arr : NetworkArrays
        Network of the scenario [pu].
    bank : BankModel
        The bank (see :class:`resonance.assessment.study.BankModel`).
    inj : Injection
        Harmonic excitation.
    vm_steps : ndarray, shape (N,)
        Fundamental bus voltage at the bank for each step, from the load flow [pu].
    pcc : int
        Model bus of the point of common coupling [unitless].
    sc_mva_pcc : float
        Short-circuit power at the PCC (physical) [MVA].
    settings : ModelSettings
        Element models.
    scenario : str
        "nominal" or "weak".
    diag_extra : ndarray, optional
        Other banks in service [pu].
    demand_arr : NetworkArrays, optional
        The network at full load, for the maximum demand I_L (a property of the site, not of the
        scenario's loading: IEEE Std 519-2014 clause 3); ``arr`` when None.

    Returns
    -------
    BankAssessment
    """
    st = case.study
    base = arr.base_mva
    n = bank.n_steps
    b = bank.step_b_pu(base)
    xc = 1.0 / b
    h = inj.h.astype(float)
    rows = np.unique(np.array([bank.index, pcc], int)) if arr.n_bus > 300 else None
    if h.size:
        y = bank.step_admittance(h, base)
        pen = penetrate(arr, inj, bank.index, y, xc, settings, st.summation, rows=rows, diag_extra=diag_extra)
        rws = pen.rows
        kb = int(np.nonzero(rws == bank.index)[0][0])
        kp = int(np.nonzero(rws == pcc)[0][0])
        v_bank = pen.v_bus_pu[:, :, kb]  # (N+1, n_h)
        v_pcc = pen.v_bus_pu[:, :, kp]
    else:
        pen = PenetrationResult(h, np.array([bank.index, pcc]), np.zeros((n + 1, 0, 2)), np.zeros((n, 0)),
                                np.zeros((n, 0)), np.zeros((n + 1, 0)))
        v_bank = np.zeros((n + 1, 0))
        v_pcc = np.zeros((n + 1, 0))
    lim = duty_limits(st.duty_limits, file=case.source_file)
    plant_lim = (in_plant_limits(st.in_plant_limits, file=case.source_file)
                 if st.in_plant_limits != "none" else None)
    # capacitor voltage per unit of its own rating; fundamental across the capacitor is V/(1-p)
    kv_ratio = bank.bus_kv / bank.rated_kv
    v1_cap = vm_steps / (1.0 - bank.p) * kv_ratio
    v_cap = np.concatenate([v1_cap[:, None], pen.v_cap_pu * kv_ratio], axis=1)
    hh = np.concatenate([[1.0], h])
    duty = capacitor_duty(hh, v_cap, lim)
    v_kv_pcc = float(arr.bus_kv[pcc])
    vlim = (ieee519_voltage_limits(v_kv_pcc, st.ieee519_edition, file=case.source_file)
            if st.pcc_voltage_limits == "ieee519" else planning_levels(st.pcc_voltage_limits, file=case.source_file))
    thd_level, v_levels, _ = voltage_levels(vlim, h)
    i_base_pcc = base * 1000.0 / (math.sqrt(3) * v_kv_pcc)  # [A]
    i_base_bank = base * 1000.0 / (math.sqrt(3) * bank.bus_kv)
    i_l, il_basis = demand_current_a(case, v_kv_pcc, demand_arr if demand_arr is not None else arr)
    i_sc = sc_mva_pcc * 1000.0 / (math.sqrt(3) * v_kv_pcc)
    ratio = i_sc / i_l if i_l > 0 else float("inf")
    clim = ieee519_current_limits(ratio if math.isfinite(ratio) else 1e9, h if h.size else np.array([5.0]),
                                  st.ieee519_edition, file=case.source_file)
    i1_bank = vm_steps * b / (1.0 - bank.p)  # [pu]
    # the same quantities with the bank (all of its steps) out of service: row 0 of the penetration
    vp_off = v_pcc[0]
    thd_p_off = 100.0 * float(np.sqrt(np.sum(vp_off**2)))
    i_off_a = pen.i_supply_local_pu[0] * i_base_pcc if h.size else np.zeros(0)
    ind_off_pct = 100.0 * i_off_a / i_l if (h.size and i_l > 0) else np.zeros(h.size)
    tdd_off = 100.0 * float(np.sqrt(np.sum(i_off_a**2))) / i_l if i_l > 0 else 0.0
    steps = []
    for s in range(n):
        f: dict = {}
        vb = v_bank[s + 1]
        vp = v_pcc[s + 1]
        thd_b = 100.0 * float(np.sqrt(np.sum(vb**2)))
        thd_p = 100.0 * float(np.sqrt(np.sum(vp**2)))
        worst_ind = float(np.max(vp) * 100.0) if vp.size else 0.0
        i_sup_a = pen.i_supply_local_pu[s + 1] * i_base_pcc if h.size else np.zeros(0)
        tdd = 100.0 * float(np.sqrt(np.sum(i_sup_a**2))) / i_l if i_l > 0 else 0.0
        if h.size:
            ind_pct = 100.0 * i_sup_a / i_l if i_l > 0 else np.zeros_like(i_sup_a)
            i_margin = np.where(clim.limited, clim.individual_pct - ind_pct, np.inf)
            worst_i = float(np.min(i_margin)) if np.any(clim.limited) else float("inf")
        else:
            ind_pct = np.zeros(0)
            worst_i = float("inf")
        ib = pen.i_bank_pu[s] * i_base_bank if h.size else np.zeros(0)
        i_rms_a = float(math.sqrt((i1_bank[s] * i_base_bank) ** 2 + float(np.sum(ib**2))))
        v_ok = thd_p <= thd_level and not np.any(100.0 * vp > v_levels)
        i_ok = tdd <= clim.tdd_pct and worst_i >= 0
        f.update({
            "thd_v_pct": thd_b,
            "cap_v_rms_pct": float(duty.v_rms_pct[s]),
            "cap_v_peak_pct": float(duty.v_peak_pct[s]),
            "cap_i_rms_pct": float(duty.i_rms_pct[s]),
            "cap_kvar_pct": float(duty.kvar_pct[s]),
            "duty_ok": bool(duty.ok[s]),
            "duty_margins_pct": {
                "v_rms": float(duty.v_rms_margin_pct[s]), "v_peak": float(duty.v_peak_margin_pct[s]),
                "i_rms": float(duty.i_rms_margin_pct[s]), "kvar": float(duty.kvar_margin_pct[s])},
            "duty_governing": str(duty.governing[s]),
            "cap_v1_pct": float(v1_cap[s]) * 100.0,
            "bank_i_rms_a": i_rms_a,
            "thd_v_pcc_pct": thd_p,
            "v_h_max_pcc_pct": worst_ind,
            "tdd_pct": tdd,
            "pcc_voltage_ok": bool(v_ok),
            "pcc_current_ok": bool(i_ok),
            "harmonics": [
                {"h": int(hh_), "v_bank_pct": float(vb[j]) * 100, "v_pcc_pct": float(vp[j]) * 100,
                 "v_cap_pct": float(v_cap[s, j + 1]) * 100, "i_bank_a": float(ib[j]),
                 "i_supply_a": float(i_sup_a[j]), "i_supply_pct_of_il": float(ind_pct[j]),
                 "i_limit_pct_of_il": (float(clim.individual_pct[j]) if clim.limited[j] else None)}
                for j, hh_ in enumerate(h.astype(int))],
        })
        finds = duty_findings(bank.name, s + 1, scenario,
                              {"v_rms": float(duty.v_rms_pct[s]), "v_peak": float(duty.v_peak_pct[s]),
                               "i_rms": float(duty.i_rms_pct[s]), "kvar": float(duty.kvar_pct[s])}, lim)
        finds += pcc_findings(bank.name, s + 1, scenario, h, vp, vp_off, vlim, ind_pct, ind_off_pct, clim, ratio)
        if plant_lim is not None:
            finds += bus_findings(bank.name, s + 1, scenario, h, vb, v_bank[0], plant_lim)
        steps.append(StepDuty(step=s + 1, fields=f, findings=tuple(finds)))
    off = {"thd_v_pct": 100.0 * float(np.sqrt(np.sum(v_bank[0] ** 2))),
           "thd_v_pcc_pct": thd_p_off, "tdd_pct": tdd_off,
           # per order at the PCC with the bank off: voltage [% of nominal], current [% of I_L]
           "v_pcc_pct": {str(int(x)): 100.0 * float(v) for x, v in zip(h, vp_off)},
           "i_pcc_pct_of_il": {str(int(x)): float(v) for x, v in zip(h, ind_off_pct)}}
    blim = ieee519_voltage_limits(bank.bus_kv, st.ieee519_edition, file=case.source_file)
    info = {"pcc_v_limits": {"individual_pct": vlim.individual_pct, "thd_pct": vlim.thd_pct, "source": vlim.source},
            # the same table at the bank's own bus voltage (shown beside the bus spectrum; IEEE 519
            # applies at the PCC, so no finding is made there)
            "bus_v_limits": {"individual_pct": blim.individual_pct, "thd_pct": blim.thd_pct, "source": blim.source},
            "in_plant_limits": ({"name": plant_lim.name, "thd_pct": plant_lim.thd_pct,
                                 "individual_pct": {str(k): v for k, v in plant_lim.individual_pct.items()},
                                 "source": plant_lim.source} if plant_lim is not None else None),
            "pcc_i_limits": {"row": clim.row, "tdd_pct": clim.tdd_pct, "source": clim.source,
                             "isc_over_il": ratio if math.isfinite(ratio) else None,
                             "i_l_a": i_l, "i_l_basis": il_basis, "i_sc_a": i_sc},
            "duty_limits": {"name": lim.name, "citation": lim.citation, "v_rms_pct": lim.v_rms * 100,
                            "v_peak_pct": lim.v_peak * 100, "i_rms_pct": lim.i_rms * 100,
                            "kvar_pct": lim.q * 100},
            "orders": [int(x) for x in h]}
    return BankAssessment(bank=bank.name, scenario=scenario, steps=tuple(steps), bank_off=off, pen=pen, info=info)


def duty_findings(bank: str, step: int, scenario: str, duty_pct: dict, lim) -> list[Finding]:
    """Each capacitor duty quantity beyond its limit, one finding each.

    Parameters
    ----------
    bank, scenario : str
        Bank name and supply scenario [unitless].
    step : int
        Step number [unitless].
    duty_pct : dict
        ``{"v_rms", "v_peak", "i_rms", "kvar"}`` -> the quantity [% of rating].
    lim : DutyLimits
        The limit set (:func:`resonance.standards.duty.duty_limits`; fractions of rating).

    Returns
    -------
    list of Finding
        ``duty_<quantity>`` findings, always the bank's.

    References
    ----------
    IEEE Std 18-2012, clause 5 (continuous overload limits), via ``lim.citation``.
    """
    tag = f"bank {bank} step {step} ({scenario_words(scenario)})"
    out = []
    for g, limv in (("v_rms", lim.v_rms), ("v_peak", lim.v_peak), ("i_rms", lim.i_rms), ("kvar", lim.q)):
        val, limp = float(duty_pct[g]), float(limv) * 100.0
        if val > limp:
            out.append(Finding(bank=bank, step=step, scenario=scenario, check=f"duty_{g}", value=val, limit=limp,
                               unit="% of rating", source=lim.citation, cause="bank",
                               message=f"{tag}: capacitor {g.replace('_', ' ')} {val:.1f} % exceeds the "
                                       f"{lim.name} limit {limp:.0f} %"))
    return out


def pcc_findings(bank: str, step: int, scenario: str, h: np.ndarray, v_pcc: np.ndarray, v_pcc_off: np.ndarray,
                 vlim, i_pct: np.ndarray, i_off_pct: np.ndarray, clim, isc_over_il: float) -> list[Finding]:
    """The PCC distortion limits a step breaks, each with its bank-off value and its cause.

    Parameters
    ----------
    bank, scenario : str
        Bank name and supply scenario [unitless].
    step : int
        Step number [unitless].
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    v_pcc, v_pcc_off : ndarray, shape (n_h,)
        Harmonic voltage at the PCC with the step in and with the bank off [pu of nominal].
    vlim : VoltageLimits or InPlantLimits
        IEEE 519 voltage limits at the PCC voltage, or per-order planning levels [%]
        (:func:`voltage_levels`).
    i_pct, i_off_pct : ndarray, shape (n_h,)
        Harmonic current into the supply with the step in and with the bank off [% of I_L].
    clim : CurrentLimits
        IEEE 519 current limits for the short-circuit ratio [% of I_L].
    isc_over_il : float
        Short-circuit ratio I_sc/I_L, for the message [unitless].

    Returns
    -------
    list of Finding
        ``pcc_thd_v``, ``pcc_v_individual`` (the worst order), ``pcc_tdd``, ``pcc_i_individual``
        (the order with the least margin); cause by :func:`resonance.assessment.verdict.distortion_cause`.

    Notes
    -----
    THD = sqrt(sum V_h^2) / V_1 and TDD = sqrt(sum I_h^2) / I_L (IEEE Std 519-2014, clause 3).

    References
    ----------
    IEEE Std 519-2014, tables 1 and 2 (voltage and current distortion limits at the PCC).
    """
    tag = f"bank {bank} step {step} ({scenario_words(scenario)})"
    out = []
    out += _voltage_findings("pcc", "at the PCC", tag, bank, step, scenario, h, v_pcc, v_pcc_off, vlim)
    tdd, tdd_off = float(np.sqrt(np.sum(i_pct**2))), float(np.sqrt(np.sum(i_off_pct**2)))
    if tdd > clim.tdd_pct:
        out.append(Finding(bank=bank, step=step, scenario=scenario, check="pcc_tdd", value=tdd, limit=clim.tdd_pct,
                           unit="% of I_L", source=clim.source, value_bank_off=tdd_off,
                           cause=distortion_cause(tdd, tdd_off, clim.tdd_pct),
                           message=f"{tag}: TDD at the PCC {tdd:.2f} % exceeds the IEEE 519 limit "
                                   f"{clim.tdd_pct:g} % (Isc/IL = {isc_over_il:.0f})"))
    if i_pct.size and np.any(clim.limited):
        margin = np.where(clim.limited, clim.individual_pct - i_pct, np.inf)
        j = int(np.argmin(margin))
        if margin[j] < 0:
            out.append(Finding(bank=bank, step=step, scenario=scenario, check="pcc_i_individual",
                               value=float(i_pct[j]), limit=float(clim.individual_pct[j]), order=int(h[j]),
                               unit="% of I_L", source=clim.source, value_bank_off=float(i_off_pct[j]),
                               cause=distortion_cause(float(i_pct[j]), float(i_off_pct[j]),
                                                      float(clim.individual_pct[j])),
                               message=f"{tag}: harmonic {int(h[j])} current at the PCC {i_pct[j]:.2f} % of "
                                       f"I_L exceeds the IEEE 519 limit {clim.individual_pct[j]:g} %"))
    return out


def bus_findings(bank: str, step: int, scenario: str, h: np.ndarray, v_bus: np.ndarray, v_bus_off: np.ndarray,
                 plant) -> list[Finding]:
    """The in-plant compatibility levels a step breaks at the bank's own bus.

    Parameters
    ----------
    bank, scenario : str
        Bank name and supply scenario [unitless].
    step : int
        Step number [unitless].
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    v_bus, v_bus_off : ndarray, shape (n_h,)
        Harmonic voltage at the bank's bus with the step in and with the bank off [pu of nominal].
    plant : InPlantLimits
        The class's levels (:func:`resonance.standards.compat.in_plant_limits`) [%].

    Returns
    -------
    list of Finding
        ``bus_thd_v`` and ``bus_v_individual`` (the order furthest beyond its level), each with its
        bank-off value and cause (:func:`resonance.assessment.verdict.distortion_cause`).

    References
    ----------
    IEC 61000-2-4:2002, tables 2 to 4 and THD (values from memory, see :mod:`resonance.standards.compat`).
    """
    tag = f"bank {bank} step {step} ({scenario_words(scenario)})"
    return _voltage_findings("bus", "at the bank's bus", tag, bank, step, scenario, h, v_bus, v_bus_off, plant)


def _voltage_findings(where: str, at: str, tag: str, bank: str, step: int, scenario: str, h: np.ndarray,
                      v: np.ndarray, v_off: np.ndarray, vlim) -> list[Finding]:
    """``<where>_thd_v`` and ``<where>_v_individual`` (the order furthest beyond its level) of one
    step, against one limit set (:func:`voltage_levels`), each with its bank-off value and cause."""
    thd_level, levels, (thd_word, ind_word) = voltage_levels(vlim, h)
    out = []
    thd, thd_off = 100.0 * float(np.sqrt(np.sum(v**2))), 100.0 * float(np.sqrt(np.sum(v_off**2)))
    if thd > thd_level:
        out.append(Finding(bank=bank, step=step, scenario=scenario, check=f"{where}_thd_v", value=thd,
                           limit=thd_level, unit="% of nominal voltage", source=vlim.source, value_bank_off=thd_off,
                           cause=distortion_cause(thd, thd_off, thd_level),
                           message=f"{tag}: voltage THD {at} {thd:.2f} % exceeds the {thd_word.format(thd_level)}"))
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(np.isfinite(levels), 100.0 * v / levels, -np.inf)
    if v.size and float(np.max(ratio)) > 1.0:
        j = int(np.argmax(ratio))
        val, lv, off = 100.0 * float(v[j]), float(levels[j]), 100.0 * float(v_off[j])
        out.append(Finding(bank=bank, step=step, scenario=scenario, check=f"{where}_v_individual", value=val,
                           limit=lv, order=int(h[j]), unit="% of nominal voltage", source=vlim.source,
                           value_bank_off=off, cause=distortion_cause(val, off, lv),
                           message=f"{tag}: harmonic {int(h[j])} voltage {at} {val:.2f} % exceeds the "
                                   f"{ind_word.format(lv)}"))
    return out


def voltage_levels(vlim, h: np.ndarray) -> tuple[float, np.ndarray, tuple[str, str]]:
    """THD level, per-order levels and their names for a voltage limit set.

    Parameters
    ----------
    vlim : VoltageLimits or InPlantLimits
        IEEE 519 (one individual limit for every order) or a per-order table [%].
    h : ndarray
        Harmonic orders [unitless].

    Returns
    -------
    (float, ndarray, (str, str))
        THD level [%], the level of each order (NaN where the table has none) [%], and the
        templates naming the THD and the individual limit in messages (``str.format`` with the
        level) [unitless].
    """
    h = np.asarray(h, float)
    if isinstance(vlim, InPlantLimits):
        lv = np.array([vlim.individual_pct.get(int(x), np.nan) for x in h], float)
        kind = "in-plant level" if vlim.name.startswith("iec61000-2-4") else "planning level"
        word = f"{kind} {{:g}} % ({vlim.name})"
        return vlim.thd_pct, lv, (word, word)
    return (vlim.thd_pct, np.full(h.shape, float(vlim.individual_pct)),
            ("IEEE 519 limit {:g} %", "IEEE 519 individual limit {:g} %"))

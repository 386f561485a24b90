"""Turn a :class:`~resonance.assessment.study.StudyResult` into plain data for ``results.json``.

Every float is finite or ``null``; keys are stable contracts (see docs/results.md).
"""

from __future__ import annotations

import math

import numpy as np

from resonance.assessment.assess import reported
from resonance.assessment.envelope import scenario_words
from resonance.assessment.site import site_distortion
from resonance.assessment.verdict import bank_findings, check_passes, site_findings
from resonance import __version__
from resonance.assessment.study import BankScan, StudyResult

__all__ = ["to_dict", "CAUTION", "clean"]

CAUTION = ("Screening aid only. Results must be reviewed by a qualified engineer before any equipment is "
           "specified or bought; local codes, the utility's rules and licensed engineering practice govern.")


def clean(x):
    """Recursively convert numpy types to Python and non-finite floats to None."""
    if isinstance(x, dict):
        return {str(k): clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [clean(v) for v in x]
    if isinstance(x, np.ndarray):
        return clean(x.tolist())
    if isinstance(x, (np.floating, float)):
        v = float(x)
        return v if math.isfinite(v) else None
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def _r(x, nd=4):
    if x is None:
        return None
    v = float(x)
    return round(v, nd) if math.isfinite(v) else None


def _switching_step(s) -> dict:
    """The switching keys of one step (``inrush_peak_a`` and ``inrush_hz`` are contract names)."""
    return {"inrush_peak_a": _r(s.peak_a, 1), "inrush_hz": _r(s.hz, 1), "inrush_kind": s.kind,
            "inrush_peak_damped_a": _r(s.peak_damped_a, 1), "inrush_peak_times_hz": _r(s.peak_times_hz, 0),
            "inrush_over_rated": _r(s.peak_a / s.rated_a, 2), "inrush_loop_uh": _r(s.l_loop_uh, 3),
            "inrush_c_eq_uf": _r(s.c_eq_uf, 3), "voltage_step_pct": _r(s.voltage_step_pct, 4),
            "energising_overvoltage_pu": _r(s.overvoltage_pu, 4),
            "cap_energising_overvoltage_pu": _r(s.cap_overvoltage_pu, 4)}


def switching_block(bs) -> dict:
    """Bank-level switching data: the limits with their sources and the governing step."""
    from resonance.standards import switching as sw  # noqa: PLC0415

    g = bs.governing()
    return {"device_inrush_peak_a": _r(bs.device.peak_a, 1), "device_inrush_hz": _r(bs.device.f_hz, 1),
            "device_source": bs.device.source, "device_typical": bs.device.typical,
            "stage_connection_uh": [_r(x, 4) for x in bs.loop_uh], "stage_connection_source": bs.loop_source,
            "supply_inductance_uh": _r(bs.l_supply_uh, 3),
            "capacitor_peak_limit_a": [_r(x, 1) for x in bs.cap_peak_limit_a],
            "capacitor_peak_limit_source": sw.CAP_TRANSIENT_CURRENT_SOURCE,
            "capacitor_overvoltage_limit_pu": sw.CAP_TRANSIENT_VOLTAGE_PU,
            "capacitor_overvoltage_limit_source": sw.CAP_TRANSIENT_VOLTAGE_SOURCE,
            "voltage_step_limit_pct": bs.voltage_step_limit_pct, "voltage_step_source": sw.VOLTAGE_STEP_SOURCE,
            "governing_step": g.step, "governing_peak_a": _r(g.peak_a, 1), "governing_hz": _r(g.hz, 1)}


def _steps(sc: BankScan, extra_by_step: dict | None, assessment=None, switching=None) -> list[dict]:
    out = []
    duty = {d.step: reported(d.fields) for d in assessment.steps} if assessment is not None else {}
    sw_steps = {x.step: _switching_step(x) for x in switching.steps} if switching is not None else {}
    for s in sc.steps:
        d = {
            "step": s.step,
            "kvar_nameplate": _r(s.kvar_nameplate, 3),
            "kvar_delivered": _r(s.kvar_delivered, 3),
            "kvar_at_nominal_voltage": _r(s.kvar_nominal, 3),
            "v_bus_pu": _r(s.v_bus_pu, 5),
            "h_estimate": _r(s.h_estimate, 4),
            "h_scan": _r(s.h_scan, 4),
            "z_peak_ohm": _r(s.z_peak_ohm, 6),
            "nearest_order": s.nearest_order,
            "nearest_kind": s.nearest_kind,
            "margin_pct": _r(s.margin_pct, 3),
            "resonance_ok": bool(s.resonance_ok),
            "damping_sensitive": bool(s.damping_sensitive),
            "peaks": [{"h": _r(h, 4), "z_ohm": _r(z, 6), "amplification": _r(a, 4)} for h, z, a in s.peaks],
        }
        d.update(duty.get(s.step, {}))
        d.update(sw_steps.get(s.step, {}))
        if extra_by_step and s.step in extra_by_step:
            d.update(extra_by_step[s.step])
        out.append(d)
    return out


def to_dict(res: StudyResult, case_sha256: str = "", extra: dict | None = None) -> dict:
    """Plain-data view of a study for ``results.json``.

    Parameters
    ----------
    res : StudyResult
        Study result.
    case_sha256 : str
        Checksum of the case file bytes [unitless].
    extra : dict, optional
        ``{(bank, scenario): {step: {key: value}}}`` merged into each step and
        ``{"top": {...}}`` merged at the top level (later study stages).

    Returns
    -------
    dict
        JSON-ready data.
    """
    case = res.case
    extra = extra or {}
    banks = []
    for sc in res.scans:
        if sc.scenario != "nominal":
            continue
        b = sc.bank
        entry = {
            "name": b.name,
            "bus": b.bus,
            "bus_kv": _r(b.bus_kv, 5),
            "rated_kv": _r(b.rated_kv, 5),
            "stages_kvar": [float(x) for x in b.stages_kvar],
            "detuning_pct": _r(b.p * 100.0, 4) if b.p > 0 else None,
            "tuning_order": _r(1.0 / math.sqrt(b.p), 4) if b.p > 0 else None,
            "sc_mva": _r(sc.sc_mva, 4),
            "sc_mva_iec60909": _r(res.sc_mva_iec60909.get(b.bus), 4),
            "x_r_at_bus": _r(sc.x_r, 4),
            "steps": _steps(sc, extra.get((b.name, "nominal")), res.assessment_for(b.name, "nominal"),
                            res.switching_for(b.name, "nominal")),
        }
        if res.switching_for(b.name, "nominal") is not None:
            entry["switching"] = switching_block(res.switching_for(b.name, "nominal"))
        asm = res.assessment_for(b.name, "nominal")
        if asm is not None:
            entry["bank_off"] = reported(asm.bank_off)
            entry["limits"] = reported(asm.info)
        # the site's own distortion beside what the bank's steps do to it, every scenario
        entry["site_distortion"] = reported([e for a in res.assessments if a.bank == b.name
                                             for e in site_distortion(a)])
        entry["duty_ok"] = all(s.get("duty_ok", True) for s in entry["steps"])
        entry["resonance_ok"] = all(s["resonance_ok"] for s in entry["steps"])
        weak = res.scans_for(b.name, "weak")
        if weak is not None:
            entry["weak_supply"] = {"sc_mva": _r(weak.sc_mva, 4), "x_r_at_bus": _r(weak.x_r, 4),
                                    "steps": _steps(weak, extra.get((b.name, "weak")),
                                                    res.assessment_for(b.name, "weak"), res.switching_for(b.name, "weak"))}
            wa = res.assessment_for(b.name, "weak")
            if wa is not None:
                entry["weak_supply"]["bank_off"] = reported(wa.bank_off)
        # every scenario of the envelope but the nominal one (whose steps are the contract keys above)
        entry["scenarios"] = {}
        for sn in res.scenarios:
            other = res.scans_for(b.name, sn.name)
            if sn.name == "nominal" or other is None:
                continue
            oa = res.assessment_for(b.name, sn.name)
            entry["scenarios"][sn.name] = {
                "sc_mva": _r(other.sc_mva, 4), "x_r_at_bus": _r(other.x_r, 4),
                "steps": _steps(other, extra.get((b.name, sn.name)), oa, res.switching_for(b.name, sn.name)),
                "bank_off": reported(oa.bank_off) if oa is not None else None,
                "limits": reported(oa.info) if oa is not None else None}
        entry.update(extra.get(("bank", b.name), {}))
        banks.append(entry)
    sup = res.supply
    # every finding says whose it is: "bank" (the bank causes or worsens it) or "site" (already
    # beyond the limit with the bank off, and the bank does not make it worse)
    own = bank_findings(res.findings)
    mine = {id(f) for f in own}
    findings = [{**f.to_dict(), "cause": "bank" if id(f) in mine else "site"} for f in res.findings]
    out = {
        "tool": {"name": "resonance", "version": __version__},
        "caution": CAUTION,
        "case": {"title": case.title, "file": case.source_file, "sha256": case_sha256,
                 "frequency_hz": case.frequency_hz},
        "settings": {
            "h_max": case.study.h_max, "h_step": case.study.h_step,
            "resistance_model": case.study.resistance_model, "load_model": case.study.load_model,
            "margin_pct": case.study.margin_pct, "other_banks": case.study.other_banks,
            "duty_limits": case.study.duty_limits, "ieee519_edition": case.study.ieee519_edition,
            "summation": case.study.summation, "site_findings": case.study.site_findings,
            "in_plant_limits": case.study.in_plant_limits, "pcc_voltage_limits": case.study.pcc_voltage_limits,
        },
        "supply": {
            "bus": sup.bus if sup else None,
            "sc_mva": sup.sc_mva if sup else None,
            "x_r": sup.x_r if sup else None,
            "sc_mva_min": sup.sc_mva_min if sup else None,
            "sc_mva_iec60909_at_pcc": _r(res.sc_mva_iec60909.get(res.pcc_bus), 4),
        },
        "scenarios": [{"name": sn.name, "words": scenario_words(sn.name), "weak_supply": sn.weak,
                       "supply_sc_mva": _r(sup.sc_mva_min if (sn.weak and sup) else (sup.sc_mva if sup else None), 4),
                       "supply_v_pu": _r(sn.v_source_pu, 5), "load_pct": _r(100.0 * sn.load_scale, 3),
                       "sources_pct": _r(100.0 * sn.source_scale, 3)} for sn in res.scenarios],
        "pcc_bus": res.pcc_bus,
        "sc_mva_pcc": _r(res.sc_mva_pcc, 4),
        "harmonic_orders": {"injected": list(res.orders.injected), "background": list(res.orders.background),
                            "characteristic": list(res.orders.characteristic), "pulses": list(res.orders.pulses)},
        "banks": banks,
        "findings": findings,
        "warnings": list(res.warnings),
        # the bank's verdict (the exit status) and the site's own distortion apart from it
        "passed": check_passes(res.findings, case.study.site_findings),
        "site_passed": not site_findings(res.findings),
    }
    out.update(extra.get("top", {}))
    return clean(out)

"""What a proposed filter does, read from its re-check: the PCC with it in, each branch's figures and the
current it absorbs from the background and from the site (plain data for results.json).

Pure: takes study results and cases; opens no file.

References
----------
IEEE Std 1531-2020 (single-tuned branch: tuning, quality factor, the parallel resonance below it);
IEEE Std 18-2002 (capacitor duty, crest as the arithmetic sum of peaks); IEEE Std 519-2014 Table 2.
"""

from __future__ import annotations

import math

from resonance.assessment.tuning import detuning_settings, tuning_band
from resonance.design.detuned_step import detuned_step
from resonance.design.detuning import run_variant
from resonance.design.filter_branch import design_branch
from resonance.errors import InputError, ModelError

__all__ = ["pcc_ratio", "branch_figures", "split_absorbed"]


def pcc_ratio(res, names) -> tuple[float, dict]:
    """Largest PCC current over its limit in the branches' sweeps, and per scenario the full filter's
    PCC figures (top branch, all branches in) [unitless, %]."""
    worst = 0.0
    per = {}
    for asm in res.assessments:
        if asm.bank not in names:
            continue
        lim = asm.info["pcc_i_limits"]
        for s in asm.steps:
            f = s.fields
            r = [f["tdd_pct"] / lim["tdd_pct"]] if lim.get("tdd_pct") else []
            r += [x["i_supply_pct_of_il"] / x["i_limit_pct_of_il"] for x in f["harmonics"] if x.get("i_limit_pct_of_il")]
            worst = max([worst, *r])
        if asm.bank == names[-1] and asm.steps:
            f = asm.steps[-1].fields
            ind = [(x["i_supply_pct_of_il"] / x["i_limit_pct_of_il"], x) for x in f["harmonics"]
                   if x.get("i_limit_pct_of_il")]
            top = max(ind, key=lambda t: t[0]) if ind else (None, {})
            per[asm.scenario] = {
                "tdd_pct": round(f["tdd_pct"], 3), "tdd_limit_pct": lim.get("tdd_pct"),
                "tdd_bank_off_pct": None, "thd_v_pcc_pct": round(f["thd_v_pcc_pct"], 3),
                "i_over_limit_max": None if top[0] is None else round(top[0], 4),
                "i_over_limit_order": top[1].get("h"),
            }
    return worst, per


def branch_figures(res, variant, names, orders, u_kv: float, f_hz: float) -> list[dict]:
    """Per branch: the worst duty and currents over its own sweeps, and what it absorbs with the whole
    filter in (the top branch's sweep) [A, kV, %, kvar, kW]."""
    st = detuning_settings(variant)
    banks = {b.name: b for b in variant.bank}
    top = {asm.scenario: asm for asm in res.assessments if asm.bank == names[-1]}
    out = []
    for i, (name, h) in enumerate(zip(names, orders)):
        b = banks[name]
        p = b.detuning_pct / 100.0
        ds = detuned_step(b.steps_kvar[0], b.rated_kv, p, f_hz, u_kv)
        mine = [asm for asm in res.assessments if asm.bank == name]
        duty = {k: max(s.fields[k] for a in mine for s in a.steps) for k in
                ("cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct", "cap_kvar_pct")}
        i_rms = max(s.fields["bank_i_rms_a"] for a in mine for s in a.steps)
        # peak: arithmetic sum of the per-order peaks (IEEE Std 18 convention for the crest)
        i_pk, absorbed, loss_kw = 0.0, {}, 0.0
        # the branch's L, C, R by the single-tuned branch arithmetic (IEEE Std 1531; resonance.design.filter_branch)
        fb = design_branch(float(ds.q_net_kvar[0]), u_kv, ds.n, f_hz, reactor_q=b.reactor_q, u_cap_rated_kv=b.rated_kv)
        r_ohm = fb.r_ohm
        for a in mine:
            for s in a.steps:
                hs = s.fields["harmonics"]
                i1 = s.fields["bank_i_rms_a"] ** 2 - sum(x["i_bank_a"] ** 2 for x in hs)
                pk = math.sqrt(2.0) * (math.sqrt(max(i1, 0.0)) + sum(x["i_bank_a"] for x in hs))
                i_pk = max(i_pk, pk)
                loss_kw = max(loss_kw, 3.0 * r_ohm * s.fields["bank_i_rms_a"] ** 2 / 1000.0)
        full = top.get("nominal") or next(iter(top.values()), None)
        if full is not None and full.steps:
            # the whole filter in: this branch's own current is in the top branch's sweep only for the top
            # branch; for the others their own sweep with the lower branches in is the nearest state
            src = full if name == names[-1] else next((a for a in mine if a.scenario == full.scenario), None)
            if src is not None and src.steps:
                absorbed = {int(x["h"]): round(x["i_bank_a"], 3) for x in src.steps[-1].fields["harmonics"]
                            if x["i_bank_a"] >= 0.005}
        band = tuning_band(fb.n, st.cap_tolerance_pct, st.reactor_tolerance_pct)
        par = {}
        for sc in res.scans:
            if sc.bank.name == name and sc.steps:
                par[sc.scenario] = [round(pk[0], 3) for pk in sc.steps[-1].peaks if pk[0] < fb.n] or None
        out.append({
            "name": name, "target_order": int(h), "tuning_order": round(fb.n, 4), "f_tuning_hz": round(fb.f_tuning_hz, 2),
            "detuning_pct": round(100.0 * p, 4), "kvar": round(float(ds.q_net_kvar[0]), 2),
            "kvar_nameplate": round(float(b.steps_kvar[0]), 2), "capacitor_rated_kv": b.rated_kv,
            "capacitor_v1_kv": round(fb.u_c1_kv, 5), "reactor_mh": round(fb.l_mh, 5),
            "capacitor_uf": round(fb.c_uf, 3), "reactor_r_ohm": round(r_ohm, 6), "reactor_q": b.reactor_q,
            "quality_factor": round(fb.q_factor, 2), "bandwidth_orders": round(fb.bandwidth_orders, 4),
            "tuning_band": [round(band[0], 4), round(band[1], 4)],
            "reactor_i_rms_a": round(i_rms, 3), "reactor_i_peak_a": round(i_pk, 3),
            "i_fundamental_a": round(fb.i1_a, 3),
            "absorbed_a": {str(k): v for k, v in sorted(absorbed.items())},
            "duty_pct": {k: round(v, 3) for k, v in duty.items()},
            "losses_kw": round(loss_kw, 4),
            "parallel_resonance_below": par,
            "runs_with": list(b.runs_with),
        })
    return out


def _own_currents(res, name: str, scenario: str = "nominal") -> dict:
    """Branch current per order in its own sweep, all of its steps in [A]."""
    asm = next((a for a in res.assessments if a.bank == name and a.scenario == scenario), None)
    if asm is None or not asm.steps:
        return {}
    return {str(int(x["h"])): round(x["i_bank_a"], 3) for x in asm.steps[-1].fields["harmonics"]
            if x["i_bank_a"] >= 0.005}


def split_absorbed(branches: list[dict], variant, model) -> None:
    """Each branch's current from the utility's background distortion alone (the case without its
    harmonic sources) and from the site's sources alone (without the background), nominal supply:
    a filter also absorbs what its neighbours inject [A].  The two need not add up to the total:
    per order they are phasors (superposition of a linear network)."""
    if variant.supply is None:
        return
    runs = {}
    if variant.supply.background_pct:
        runs["absorbed_background_a"] = variant.model_copy(update={"harmonic_source": []})
        runs["absorbed_site_a"] = variant.model_copy(update={"supply": variant.supply.model_copy(
            update={"background_pct": {}})})
    for key, v in runs.items():
        try:
            r = run_variant(v, model)
        except (InputError, ModelError, ValueError):
            continue
        for br in branches:
            br[key] = _own_currents(r, br["name"])

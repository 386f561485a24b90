"""Detuning-reactor proposals for capacitor banks that fail the screening.

For every bank the module tries a list of series tuning orders, rates the
reactor and the capacitors of each candidate, checks the tuning against the
capacitor and reactor tolerances, re-runs the whole study with the detuned bank
in place (every step, nominal and weak supply) and ranks the candidates that
pass.  Where a plain bank fails only on some steps it also looks for another
split of the same total kvar into stages whose every switching state stays
clear of the harmonic orders of concern.

The rating arithmetic lives in :mod:`resonance.design.detuned_step`, the settings and the
tuning rule in :mod:`resonance.assessment.tuning` (the judge applies the same rule to a detuned
bank the user wrote).  :func:`propose_detuning` re-checks every candidate with the one study
(:func:`resonance.assessment.study.run_study`); its verdict is the assessment's
(:mod:`resonance.assessment.verdict`).  No files, no printing.

References
----------
IEEE Std 1531-2020, Guide for the application and specification of harmonic
filters (series L-C branch, detuned banks); IEEE Std 18-2002 (capacitor duty,
via :mod:`resonance.standards.duty`); IEEE Std 519-2014 (PCC limits, via
:mod:`resonance.assessment.assess`); /work/shared/REFERENCES.md "Detuned (series reactor)
banks" (p, n, U_C, Q_net, tolerances, linearity current).
"""

from __future__ import annotations

import math
from dataclasses import asdict

import numpy as np

from resonance.assessment.assess import reported
from resonance.assessment.tuning import (SETTING_SOURCES, DetuningSettings, detuning_settings, parallel_band, tolerance_corners,
                                         significant_orders, tuning_band, tuning_reasons)
from resonance.design.detuned_step import (DetunedStep, capacitor_rating_kv, detuned_step, nameplate_kvar,
                                           next_ratings, rearrange_stages, stage_share_max)
from resonance.design.mv_rating import LV_LIMIT_KV, rating_ladder
from resonance.errors import InputError, ModelError
from resonance.memo import remember

__all__ = ["run_variant", "propose_detuning", "recommended_scans"]

# ----------------------------------------------------------------------------- evaluation of a study result

def _bank_status(result, case, model, bank_name: str) -> dict:
    """Step-by-step figures of one bank in every scenario, and its verdict.

    The verdict is the one assessment's (:func:`resonance.assessment.verdict.bank_findings`): the bank
    passes when no finding in any step or scenario is its own (resonance, capacitor duty, the
    tuning of a detuned bank, and any distortion figure that the bank causes or makes worse;
    the site's own distortion, already beyond its limit with the bank off, does not block it).
    No second set of rules lives here.
    """
    from resonance.assessment.verdict import bank_findings  # noqa: PLC0415

    own = bank_findings(result.findings, bank_name)
    out = {"scenarios": {}, "problems": [f.message for f in own],
           "resonance_ok": not any(f.check == "resonance" for f in own),
           "duty_ok": not any(f.check.startswith("duty_") for f in own),
           "pcc_ok": not any(f.check.startswith("pcc_") for f in own),
           "bus_ok": not any(f.check.startswith("bus_") for f in own),
           "tuning_ok": not any(f.check == "detuning_tuning" for f in own)}
    for sc in result.scans:
        if sc.bank.name != bank_name:
            continue
        asm = result.assessment_for(bank_name, sc.scenario)
        rows = []
        for s, sd in zip(sc.steps, asm.steps):
            f = reported(sd.fields)
            worse = [x.check for x in own if x.scenario == sc.scenario and x.step == s.step
                     and x.check.startswith("pcc_")]
            m = f["duty_margins_pct"]
            rows.append({
                "step": s.step, "h_scan": None if s.h_scan is None else round(s.h_scan, 3),
                "nearest_order": s.nearest_order,
                "margin_pct": None if s.margin_pct is None else round(s.margin_pct, 2),
                "resonance_ok": bool(s.resonance_ok), "duty_ok": bool(f["duty_ok"]),
                "cap_v_rms_pct": f["cap_v_rms_pct"], "cap_v_peak_pct": f["cap_v_peak_pct"],
                "cap_i_rms_pct": f["cap_i_rms_pct"], "cap_kvar_pct": f["cap_kvar_pct"],
                "duty_margin_pct": round(min(m.values()), 3), "duty_governing": f["duty_governing"],
                "bank_i_rms_a": f["bank_i_rms_a"], "i_bank_h_a": {str(hh["h"]): hh["i_bank_a"] for hh in f["harmonics"]},
                "tdd_pct": f["tdd_pct"], "thd_v_pcc_pct": f["thd_v_pcc_pct"], "pcc_worse_than_off": worse,
            })
        out["scenarios"][sc.scenario] = {"sc_mva": round(sc.sc_mva, 4), "steps": rows,
                                         "pcc_off": {"thd_v_pct": reported(asm.bank_off["thd_v_pcc_pct"]),
                                                     "tdd_pct": reported(asm.bank_off["tdd_pct"])}}
    out["passes"] = not own
    return out


def _r(x, nd: int = 4):
    if x is None:
        return None
    if isinstance(x, (list, tuple, np.ndarray)):
        return [_r(v, nd) for v in x]
    return round(float(x), nd)


def _variant(case, bank, **update):
    """The case with ``bank``'s fields changed by ``update`` (validated as a case file is)."""
    return with_banks_in_place(case, bank, [{**bank.model_dump(), **update}])


def with_banks_in_place(case, bank, tables: list[dict]):
    """The case with ``bank`` replaced by the banks of ``tables`` (their ``[[bank]]`` fields), each
    validated and the case checked as a case file is (:class:`InputError` where not)."""
    from resonance.inputs.case import Bank  # noqa: PLC0415
    from resonance.inputs.case_checks import check_case  # noqa: PLC0415

    new = [Bank.model_validate(t) for t in tables]  # same checks as a case file would get
    banks = []
    for b in case.bank:
        banks.extend(new if b.name == bank.name else [b])
    variant = case.model_copy(update={"bank": banks})
    probs = check_case(variant)
    if probs:
        raise InputError(probs)
    return variant


def _touches(lo: float, hi: float, orders, margin_pct: float) -> list[int]:
    m = margin_pct / 100.0
    return [int(h) for h in orders if lo <= h * (1.0 + m) and hi >= h * (1.0 - m)]


def _nice_unit(x: float) -> float:
    if x <= 0:
        return 0.0
    k = math.floor(math.log10(x))
    for mant in (5.0, 2.5, 2.0, 1.0):
        if mant * 10**k <= x * (1 + 1e-9):
            return mant * 10**k
    return 10 ** (k - 1) * 5.0


def _run(variant, model, clock: list):
    clock.append(1)  # counts the re-checks of one bank
    return run_variant(variant, model)


def run_variant(variant, model):
    """Study of a variant of a case on the same plant model, memoised on the model.

    Parameters
    ----------
    variant : Case
        The case with changed bank data (same network).
    model : PlantModel
        Plant model of the original case.

    Returns
    -------
    StudyResult
        As :func:`resonance.assessment.study.run_study` without the IEC 60909 cross-check (the
        proposal does not use it); the same object for the same variant, so a caller
        must not change it.
    """
    from resonance.assessment.study import run_study  # noqa: PLC0415

    return remember("variant_study", (model, _variant_key(variant)),
                    lambda: run_study(variant, model=model, cross_check=False))


def _variant_key(variant) -> tuple:
    return ("study", variant.model_dump_json())


def _reactor_figures(status: dict, q_np: np.ndarray, ratings, p: float, u_kv: float, reactor_q: float,
                     st: DetuningSettings) -> list[dict]:
    """Per-stage reactor duty from the re-check's bank currents."""
    n = q_np.size
    i_rms = np.zeros(n)
    orders = sorted({int(k) for sc in status["scenarios"].values() for r in sc["steps"] for k in r["i_bank_h_a"]})
    i_h = np.zeros((n, len(orders)))
    i_fund = np.zeros(n)
    for sc in status["scenarios"].values():
        rms = np.array([r["bank_i_rms_a"] for r in sc["steps"]], float)
        hm = np.array([[r["i_bank_h_a"].get(str(h), 0.0) for h in orders] for r in sc["steps"]], float)
        hm = hm.reshape(n, len(orders))
        fund = np.sqrt(np.maximum(rms**2 - np.sum(hm**2, axis=1), 0.0))
        i_rms = np.maximum(i_rms, stage_share_max(q_np, rms))
        i_fund = np.maximum(i_fund, stage_share_max(q_np, fund))
        if orders:
            i_h = np.maximum(i_h, stage_share_max(q_np, hm))
    out = []
    for k in range(n):
        i1 = float(ratings.q_net_kvar[k] / (math.sqrt(3.0) * u_kv))  # kvar / kV = A
        i_lin = st.linearity_factor * i1
        crest_sum = float(i_fund[k] + np.sum(i_h[k]))  # arithmetic sum of rms magnitudes = crest / sqrt2
        q_l = 3.0 * i1**2 * float(ratings.x_l_ohm[k]) / 1000.0
        heat = (i_rms[k] / i1) ** 2 if i1 > 0 else float("nan")
        row = {"stage": k + 1, "q_net_kvar": _r(ratings.q_net_kvar[k], 3), "q_nameplate_kvar": _r(q_np[k], 3),
               "x_c_ohm": _r(ratings.x_c_ohm[k], 5), "x_l_ohm": _r(ratings.x_l_ohm[k], 5),
               "l_mh": _r(ratings.l_mh[k], 5), "i1_a": _r(i1, 3), "i_rms_max_a": _r(i_rms[k], 3),
               "i_h_max_a": {str(h): _r(i_h[k, j], 3) for j, h in enumerate(orders)},
               "i_rms_over_i1": _r(i_rms[k] / i1 if i1 > 0 else float("nan"), 4),
               "i_lin_a": _r(i_lin, 3), "i_crest_over_sqrt2_a": _r(crest_sum, 3),
               "linearity_ok": bool(crest_sum <= i_lin), "reactor_kvar": _r(q_l, 4),
               "loss_w_from_q": _r(1000.0 * q_l * heat / reactor_q, 2)}
        if st.reactor_loss_w_per_kvar is not None:
            row["loss_w_rated"] = _r(st.reactor_loss_w_per_kvar * ratings.q_net_kvar[k], 2)
            row["loss_w_duty"] = _r(st.reactor_loss_w_per_kvar * ratings.q_net_kvar[k] * heat, 2)
        out.append(row)
    return out



def _prescreen(case, bank, bm, sc_mva: dict, n_req: float, q_net_stage: np.ndarray, sig: tuple,
               st: DetuningSettings):
    """Ratings and tolerance checks of one tuning order before any re-check.

    Returns ``(cand, why, rate, kv0, p_pct, ladder)``: the candidate's figures so far, the
    reasons it fails the pre-screen (empty: it goes to the re-check), the rating
    function ``rate(kv) -> (q_np, DetunedStep, tolerance)``, the first
    capacitor rating [kV], the detuning [%] and, above 1 kV, the ratings of standard-unit
    constructions (:func:`~resonance.design.mv_rating.rating_ladder`; None at or below 1 kV).  ``sc_mva`` maps each scenario
    to the short-circuit power at the bank bus [MVA].
    """
    f_hz = float(case.frequency_hz)
    u = bm.bus_kv
    p_pct = round(100.0 / n_req**2, 2)
    p = p_pct / 100.0
    n = 1.0 / math.sqrt(p)
    u_c1 = u / (1.0 - p)
    u_need = u_c1 * (1.0 + st.cap_voltage_margin_pct / 100.0)
    kv0 = capacitor_rating_kv(u_need, st.standard_cap_kv, st.mv_cap_step_kv)
    h_low = sig[0] if sig else None
    n_lo, n_hi = tuning_band(n, st.cap_tolerance_pct, st.reactor_tolerance_pct)
    why = tuning_reasons(n, h_low, st)
    ladder = None
    if u > LV_LIMIT_KV:  # above 1 kV: a construction of standard units, not a made-to-order rating
        try:
            q_need = nameplate_kvar(q_net_stage, u_need, u, p)
            ladder = rating_ladder(u, q_need, u_need, f_hz, st.max_rating_steps)
            if ladder[0][0] / u > 1.6:  # no wye string of listed units in range: a delta, reactors in line
                ladder = rating_ladder(u, q_need, u_need, f_hz, st.max_rating_steps, connections="delta")
            kv0 = ladder[0][0]
        except ValueError as e:
            ladder = []
            why.append(f"no construction of standard units ({e})")
    steps_at = dict(ladder or [])
    cand = {"tuning_order": _r(n, 4), "detuning_pct": p_pct, "f_tuning_hz": _r(n * f_hz, 2),
            "u_cap_fundamental_kv": _r(u_c1, 5), "lowest_significant_order": h_low,
            "tolerance": {"cap_pct": list(st.cap_tolerance_pct), "reactor_pct": list(st.reactor_tolerance_pct),
                          "n_band": [_r(n_lo), _r(n_hi)], "hp_band": {}, "touches": []}}

    def rate(kv: float) -> tuple[np.ndarray, DetunedStep, dict]:
        q_np = (np.asarray(steps_at[kv]["steps_kvar"], float) if kv in steps_at
                else np.round(nameplate_kvar(q_net_stage, kv, u, p), 1))
        rt = detuned_step(q_np, kv, p, f_hz, u)
        hp = {}
        touch = set()
        for name, s_sc in sc_mva.items():
            q_cap_bus = np.cumsum(q_np) * (u / kv) ** 2
            lo, hi, nom = parallel_band(p, q_cap_bus, s_sc * 1000.0, st.cap_tolerance_pct,
                                        st.reactor_tolerance_pct)
            hp[name] = {"min": _r(lo), "max": _r(hi), "nominal": _r(nom)}
            for a_, b_ in zip(lo, hi):
                touch |= set(_touches(float(a_), float(b_), sig, st.band_margin_pct))
        return q_np, rt, {"hp_band": hp, "touches": sorted(touch)}

    q_np, rt, tol = rate(kv0)
    cand["tolerance"].update(tol)
    if tol["touches"]:
        why.append(f"a parallel resonance band touches significant order(s) {tol['touches']}")
    cand.update({"rated_kv": kv0, "cap_overrating": _r(kv0 / u_c1, 4), "steps_kvar": [float(x) for x in q_np],
                 "stages": None, "recheck": None, "reactor_q": bank.reactor_q,
                 "construction": steps_at[kv0] if kv0 in steps_at else None})
    if why:
        cand.update({"qualified": False, "why": "rejected before re-check: " + "; ".join(why)})
        cand["stages"] = [{"stage": k + 1, "q_net_kvar": _r(rt.q_net_kvar[k], 3), "q_nameplate_kvar": _r(q_np[k], 3),
                           "x_c_ohm": _r(rt.x_c_ohm[k], 5), "x_l_ohm": _r(rt.x_l_ohm[k], 5),
                           "l_mh": _r(rt.l_mh[k], 5)} for k in range(q_np.size)]
    return cand, why, rate, kv0, p_pct, ladder


def _ratings(kv0: float, u_kv: float, st: DetuningSettings, ladder: list | None = None) -> list[float]:
    """Capacitor ratings a candidate is re-checked at, lowest first [kV]: above 1 kV those of the
    standard-unit constructions (``ladder``), at or below the listed ratings."""
    out = []
    trial = [kv for kv, _ in ladder] if ladder is not None else next_ratings(
        kv0, st.standard_cap_kv, st.mv_cap_step_kv, st.max_rating_steps)
    for kv in trial:
        if kv / u_kv > 1.6:  # the case schema's sanity range for rated_kv
            break
        out.append(kv)
    return out


def _candidate(case, model, bank, bm, scans: dict, n_req: float, q_net_stage: np.ndarray, sig: tuple,
               st: DetuningSettings, clock: list) -> dict:
    u = bm.bus_kv
    cand, why, rate, kv0, p_pct, ladder = _prescreen(case, bank, bm, {k: sc.sc_mva for k, sc in scans.items()}, n_req,
                                             q_net_stage, sig, st)
    if why:
        return cand
    p = p_pct / 100.0
    u_c1 = u / (1.0 - p)
    tried = []
    status = None
    for kv in _ratings(kv0, u, st, ladder):
        q_np, rt, tol = rate(kv)
        try:
            variant = _variant(case, bank, detuning_pct=p_pct, rated_kv=kv, steps_kvar=[float(x) for x in q_np])
            res = _run(variant, model, clock)
        except (InputError, ModelError) as e:
            why.append(f"re-check at {kv:g} kV could not run ({e})")
            break
        status = _bank_status(res, variant, model, bank.name)
        tried.append(kv)
        if status["passes"] or not (status["resonance_ok"] and status["pcc_ok"]):
            break
    if status is None:
        if ladder and not why:
            why.append(f"the first construction of standard units is rated {ladder[0][0]:g} kV, above 1.6 x the "
                       f"bus voltage {u:g} kV (the case schema's range for rated_kv)")
        cand.update({"qualified": False, "why": "; ".join(why) or "no rating could be re-checked"})
        return cand
    worst = {}
    for sc_name, sc in status["scenarios"].items():
        rows = sc["steps"]
        worst[sc_name] = {k: max(r[k] for r in rows) for k in ("cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct",
                                                              "cap_kvar_pct")}
        worst[sc_name]["duty_margin_pct"] = min(r["duty_margin_pct"] for r in rows)
    kv = tried[-1]
    v_rms = max(w["cap_v_rms_pct"] for w in worst.values())
    v_pk = max(w["cap_v_peak_pct"] for w in worst.values())
    cand["tolerance"].update(tol)
    cand.update({
        "rated_kv": kv, "cap_overrating": _r(kv / u_c1, 4), "steps_kvar": [float(x) for x in q_np],
        "construction": dict(ladder or []).get(kv),
        "ratings_tried_kv": tried, "cap_v_rms_max_kv": _r(v_rms / 100.0 * kv, 5),
        "cap_v_peak_max_kv": _r(v_pk / 100.0 * kv * math.sqrt(2.0), 5),
        "duty_margin_min_pct": _r(min(w["duty_margin_pct"] for w in worst.values()), 3),
        "worst": worst,
        "stages": _reactor_figures(status, q_np, rt, p, u, bank.reactor_q, st),
        "recheck": status,
    })
    cand["reactor_i_rms_over_i1_max"] = max(s_["i_rms_over_i1"] for s_ in cand["stages"])
    if tol["touches"]:
        why.append(f"a parallel resonance band touches significant order(s) {tol['touches']}")
    if not status["passes"]:
        why += status["problems"][:6]
        if len(status["problems"]) > 6:
            why.append(f"... {len(status['problems']) - 6} more")
    ok = not why
    cand["qualified"] = ok
    cand["why"] = ("passes every step in every scenario" if ok else "; ".join(why))
    return cand


def _ordinal(h) -> str:
    if h is None:
        return "lowest significant"
    h = int(h)
    suf = "th" if 10 <= h % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(h % 10, "th")
    return f"{h}{suf}"


def _window_distance(n: float, h_low) -> float:
    """Distance of n from the usual tuning window, 4.0-4.4 for a 5th (scaled to the lowest significant order)."""
    if h_low is None:
        return 0.0
    lo, hi = 0.80 * h_low, 0.88 * h_low  # REFERENCES.md: usually tuned 4.0-4.4 [published], scaled (derived)
    return max(lo - n, 0.0, n - hi)


def _rank_key(c: dict):
    return (round(_window_distance(c["tuning_order"], c["lowest_significant_order"]), 3), c["rated_kv"],
            round(c["reactor_i_rms_over_i1_max"], 3), -c["duty_margin_min_pct"])


def _rearrangement(case, model, result, bank, bm, scans: dict, st: DetuningSettings, clock: list) -> dict:
    """Another split of the same total into stages, every state clear of the orders of concern."""
    margin = case.study.margin_pct
    orders = np.array([h for h, _ in result.orders.all()], float)
    stages = np.asarray(bank.steps_kvar, float)
    total = float(stages.sum())
    n_max = int(stages.size)
    unit = st.rearrange_unit_kvar or _nice_unit(total / (4.0 * n_max))
    n_units = max(1, int(round(total / unit)))
    n_units = min(n_units, 400)
    unit = total / n_units
    c = np.arange(1, n_units + 1)
    q_bus = c * unit * (bm.bus_kv / bm.rated_kv) ** 2  # capacitor kvar at the bus voltage
    allowed = np.ones(n_units, bool)
    blocking = []
    for name, sc in scans.items():
        qs = sc.bank.q_cap_nominal_kvar()
        ratio = np.array([(s.h_scan / s.h_estimate) if s.h_scan else np.nan for s in sc.steps], float)
        good = np.isfinite(ratio)
        corr = np.interp(q_bus, qs[good], ratio[good]) if good.any() else np.ones_like(q_bus)
        h_est = 1.0 / np.sqrt(bm.p + q_bus / (sc.sc_mva * 1000.0)) * corr  # screening.h_estimate, vectorised
        if orders.size:
            dist = np.min(np.abs(h_est[:, None] - orders[None, :]) / orders[None, :], axis=1) * 100.0
            ok = dist > margin
        else:
            ok = np.ones(n_units, bool)
        allowed &= ok
        if not ok[-1]:
            j = int(np.argmin(np.abs(h_est[-1] - orders) / orders))
            blocking.append(f"the full bank ({total:g} kvar) resonates near h = {h_est[-1]:.2f} ({name} supply), "
                            f"within {margin:g} % of order {int(orders[j])}")
    out = {"unit_kvar": _r(unit, 3), "total_kvar": total, "max_stages": n_max, "estimate":
           "h = sqrt(S_sc/Q) x (h_scan/h_estimate of the bank as given, interpolated in Q)"}
    sizes = rearrange_stages(allowed, n_max)
    if sizes is None:
        out.update({"exists": False, "steps_kvar": None,
                    "reason": "; ".join(blocking) or "no split of the total keeps every state clear of the orders "
                                                      f"of concern by {margin:g} %"})
        return out
    steps = [float(round(s_ * unit, 3)) for s_ in sizes]
    out.update({"exists": True, "steps_kvar": steps, "states_kvar": [float(x) for x in np.cumsum(steps)]})
    try:
        variant = _variant(case, bank, steps_kvar=steps)
        status = _bank_status(_run(variant, model, clock), variant, model, bank.name)
    except (InputError, ModelError) as e:
        out.update({"confirmed": False, "reason": f"re-check could not run ({e})"})
        return out
    out["confirmed"] = bool(status["resonance_ok"])
    out["qualified"] = bool(status["passes"])
    out["recheck"] = status
    notes = []
    if steps[0] < total / n_max:
        notes.append(f"the first stage ({steps[0]:g} kvar) is small: its resonance is high and sensitive to the "
                     "supply strength")
    if not status["resonance_ok"]:
        notes.append("the full study does not confirm the hand estimate: " + "; ".join(
            p_ for p_ in status["problems"] if "resonance" in p_)[:400])
    if not status["duty_ok"] or not status["pcc_ok"]:
        notes.append("re-arranging does not cure the duty or PCC problems: " + "; ".join(
            p_ for p_ in status["problems"] if "resonance" not in p_)[:400])
    out["reason"] = "; ".join(notes) or "every state passes the full study"
    return out


def _trial_orders(st: DetuningSettings, sig: tuple) -> list[float]:
    """Tuning orders to try, in the order they are tried [unitless]."""
    orders = list(st.tuning_orders)
    if st.search == "continuous" and sig:
        kc, kl = tolerance_corners(st.cap_tolerance_pct, st.reactor_tolerance_pct)
        n_star = min(sig[0] * (1.0 - st.order_margin_pct / 100.0),
                     sig[0] * (1.0 - st.band_margin_pct / 100.0) * math.sqrt(float(np.min(kc * kl))))
        p_star = math.ceil(10000.0 / n_star**2) / 100.0  # rounded up: the order stays at or below n*
        orders.append(1.0 / math.sqrt(p_star / 100.0))
    trial = sorted(set(orders), reverse=True)
    if st.recheck == "first":  # most promising first: inside the usual window, nearest its middle
        h_low = sig[0] if sig else None
        mid = 0.84 * h_low if h_low else 0.0
        trial.sort(key=lambda n_: (round(_window_distance(n_, h_low), 6), abs(n_ - mid)))
    return trial


def propose_detuning(case, model, result) -> dict:
    """Detuned-bank proposals (and stage re-arrangements) for every bank of a case.

    Parameters
    ----------
    case : Case
        The case as given.
    model : PlantModel
        The plant model used for ``result`` (re-used for every re-check; the
        model does not depend on the banks).
    result : StudyResult
        The study of ``case`` as given.

    Returns
    -------
    dict
        Bank name -> plain dict with keys ``status`` ("proposed", "skipped"),
        ``recommended`` (``tuning_order`` [unitless], ``detuning_pct`` [%],
        ``rated_kv`` [kV], ``steps_kvar`` [kvar] nameplate per stage,
        ``reactor_q`` [unitless], ``bank_table`` ready for a ``[[bank]]`` entry)
        or None, ``reason`` (plain words), ``candidates`` (every figure,
        ``qualified``, ``why``), ``rearrangement`` (or None), ``settings`` and
        ``re_checks`` [unitless].

    Notes
    -----
    A candidate qualifies when its nominal tuning is at least
    ``order_margin_pct`` below the lowest significant harmonic, its tolerance
    band at least ``band_margin_pct`` below it, no parallel-resonance band
    touches a significant order, and the full study with the detuned bank has,
    on every step of every scenario, no resonance finding, capacitor duty
    within limits, and no IEEE 519 PCC figure over its limit that is worse
    than with the bank off.  Qualified candidates are ranked by distance from
    the usual tuning window (4.0-4.4 for a 5th), capacitor rated voltage,
    reactor rms over fundamental current (harmonic absorption), duty margin.

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks"; IEEE Std 1531-2020;
    IEEE Std 18-2002; IEEE Std 519-2014.
    """
    st = detuning_settings(case)
    sources = list(result.sources)
    background = dict(case.supply.background_pct) if case.supply else {}
    sig = significant_orders(sources, background, st, fallback=result.orders.characteristic)
    settings_out = {k: (list(v) if isinstance(v, tuple) else v) for k, v in asdict(st).items()}
    settings_out["significant_orders"] = list(sig)
    settings_out["sources"] = SETTING_SOURCES
    out = {}
    for bank in case.bank:
        clock: list[float] = []
        scans = {sc.scenario: sc for sc in result.scans if sc.bank.name == bank.name}
        bm = scans["nominal"].bank
        own = _bank_status(result, case, model, bank.name)
        entry = {"status": "proposed", "recommended": None, "reason": "", "candidates": [], "rearrangement": None,
                 "settings": settings_out, "bank_as_given": {"passes": own["passes"], "problems": own["problems"]}}
        from resonance.assessment.switching import SWITCHING_CHECKS  # noqa: PLC0415
        from resonance.assessment.verdict import bank_findings  # noqa: PLC0415

        mine = bank_findings(result.findings, bank.name)
        if mine and all(f.check in SWITCHING_CHECKS for f in mine):
            entry.update({"status": "skipped", "reason": f"bank {bank.name}'s only findings are of switching; "
                          "a detuned design is not needed for them (see the switching proposal)"})
            out[bank.name] = entry
            continue
        if bm.p > 0 and own["passes"]:
            entry.update({"status": "skipped", "reason": f"bank {bank.name} is already detuned "
                          f"(p = {100 * bm.p:g} %) and passes every step; no proposal needed"})
            out[bank.name] = entry
            continue
        q_net_stage = bm.stages_kvar * (bm.bus_kv / bm.rated_kv) ** 2 / (1.0 - bm.p)
        cands = []
        for n_req in _trial_orders(st, sig):
            c = _candidate(case, model, bank, bm, scans, n_req, q_net_stage, sig, st, clock)
            cands.append(c)
            if st.recheck == "first" and c["qualified"]:
                break
        entry["candidates"] = cands
        good = sorted((c for c in cands if c["qualified"]), key=_rank_key)
        if good:
            b = good[0]
            entry["recommended"] = {
                "tuning_order": b["tuning_order"], "detuning_pct": b["detuning_pct"], "rated_kv": b["rated_kv"],
                "steps_kvar": b["steps_kvar"], "reactor_q": b["reactor_q"], "f_tuning_hz": b["f_tuning_hz"],
                "l_mh_per_stage": [s_["l_mh"] for s_ in b["stages"]],
                "reactor_i_rms_max_a": [s_["i_rms_max_a"] for s_ in b["stages"]],
                "reactor_i_lin_a": [s_["i_lin_a"] for s_ in b["stages"]],
                # the one tolerance band: the terminal, the tables and the chart all show this
                "tuning_band": list(b["tolerance"]["n_band"]),
                "tolerance_pct": {"capacitance": list(st.cap_tolerance_pct),
                                  "inductance": list(st.reactor_tolerance_pct)},
                "lowest_significant_order": b["lowest_significant_order"],
                "order_margin_pct": st.order_margin_pct,
                "parallel_resonance": {sc_: hp["nominal"] for sc_, hp in b["tolerance"]["hp_band"].items()},
                "construction": b["construction"],  # above 1 kV: the standard units (docs/construction.md)
                "bank_table": {"name": bank.name, "bus": bank.bus, "rated_kv": b["rated_kv"],
                               "steps_kvar": b["steps_kvar"], "detuning_pct": b["detuning_pct"],
                               "reactor_q": b["reactor_q"]},
            }
            others = [c for c in good[1:]]
            listed = ", ".join(f"{c['tuning_order']:.2f}" for c in others)
            alt = (f"; of the other qualifying orders ({listed}) "
                   "none sits as well in the usual tuning window with as low a capacitor rating and reactor "
                   "loading") if others else ""
            h_low = b["lowest_significant_order"]
            con = b["construction"]
            built = (f" ({con['connection'].replace('_', ' ')}, {con['series_groups']} x {con['unit_kv']:g} kV "
                     f"standard units in series per string, {con['units_total']} units in all)") if con else ""
            entry["reason"] = (
                f"Tuning order {b['tuning_order']:.2f} (p = {b['detuning_pct']:g} %, {b['f_tuning_hz']:.0f} Hz) stays "
                f"below the {_ordinal(h_low)} harmonic even at the tolerance limits (band {b['tolerance']['n_band'][0]:.2f}-"
                f"{b['tolerance']['n_band'][1]:.2f}) and passes every step in every supply scenario with "
                f"{b['rated_kv'] * 1000:g} V capacitors{built} (duty margin {b['duty_margin_min_pct']:.1f} %, reactor "
                f"rms current up to {b['reactor_i_rms_over_i1_max']:.2f} x fundamental){alt}.")
        else:
            entry["reason"] = ("No tuning order qualifies: " + " | ".join(
                f"{c['tuning_order']:.2f}: {c['why']}" for c in cands))[:2000]
        if not own["resonance_ok"] and bm.p == 0:
            entry["rearrangement"] = _rearrangement(case, model, result, bank, bm, scans, st, clock)
        entry["re_checks"] = len(clock)  # studies run for this bank (no wall-clock time: equal runs stay equal)
        out[bank.name] = entry
    return out


def recommended_studies(case, model, proposals: dict) -> dict:
    """Bank name -> (variant case, re-check :class:`~resonance.assessment.study.StudyResult`) of
    its recommended design: the very study the proposal was accepted on (:func:`run_variant`,
    memoised), every scenario, for the report's section on the proposed design.
    """
    out = {}
    for name, d in proposals.items():
        rec = (d or {}).get("recommended")
        if not rec:
            continue
        bank = next(b for b in case.bank if b.name == name)
        variant = _variant(case, bank, detuning_pct=rec["detuning_pct"], rated_kv=rec["rated_kv"],
                           steps_kvar=list(rec["steps_kvar"]), reactor_q=rec.get("reactor_q", bank.reactor_q))
        out[name] = (variant, run_variant(variant, model))
    return out


def recommended_scans(case, model, proposals: dict) -> dict:
    """Bank name -> nominal :class:`~resonance.assessment.study.BankScan` of its recommended design.

    The scan comes from the re-check that accepted the design (:func:`recommended_studies`), so
    the side-by-side plot shows the very study the proposal was judged on.
    """
    out = {}
    for name, (_variant_case, res) in recommended_studies(case, model, proposals).items():
        sc = res.scans_for(name)
        if sc is not None:
            out[name] = sc
    return out

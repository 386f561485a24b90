"""Tuned harmonic filters for a site whose PCC current is beyond its limits: the search and its proof.

A detuned bank protects itself but leaves the site's own harmonic emission where it is.  Where the
PCC current (an individual harmonic or the TDD) is beyond its IEEE Std 519 limit in any scenario
with a bank, this module looks for single-tuned filter branches that take the bank's place: one
branch per harmonic to absorb, starting at the lowest significant order (a branch tuned above it
would put its parallel resonance with the supply onto it), each tuned a few percent below its
harmonic, together delivering the kvar the site needs.  Every candidate is judged by the one
assessment: the case with the branches in the bank's place (``[[bank]] kind = "filter"``, the higher
branches ``runs_with`` the lower ones) is studied in every scenario, and the candidate qualifies
only when no branch has a finding of its own (resonance, capacitor duty, ``filter_tuning``) and no
PCC current finding is left.  The smallest qualifying design is proposed: fewest branches, then the
lowest capacitor ratings, then the kvar split.  Where none qualifies, the best (the lowest PCC
current over its limit) is reported with its shortfall.

Pure: takes the validated case, the plant model and the study; opens no file.

References
----------
IEEE Std 1531-2020, guide for the application and specification of harmonic filters (single-tuned
branches tuned below the harmonic; capacitor duty; the parallel resonance below the tuning);
IEEE Std 519-2014 Table 2 (PCC current limits); IEEE Std 18-2002 (capacitor duty); REFERENCES.md
"Tuned harmonic filters" [memory].
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from resonance.assessment.tuning import (FILTER_BAND_MARGIN_PCT, detuning_settings, significant_orders,
                                         tuning_band)
from resonance.assessment.verdict import bank_findings, site_findings
from resonance.design.detuned_step import capacitor_rating_kv, nameplate_kvar, next_ratings
from resonance.design.detuning import run_variant, with_banks_in_place
from resonance.design.filter_figures import branch_figures, pcc_ratio, split_absorbed
from resonance.design.mv_rating import LV_LIMIT_KV, rating_ladder
from resonance.errors import InputError, ModelError

__all__ = ["PCC_CURRENT_CHECKS", "FILTER_DEFAULTS", "SPLITS", "branch_tuning", "filter_settings",
           "propose_filters", "filter_studies", "choose_designs", "branch_names", "dropped_keys", "branch_rating"]

#: the PCC current checks a filter is proposed for (IEEE Std 519-2014 Table 2)
PCC_CURRENT_CHECKS = ("pcc_i_individual", "pcc_tdd")

#: defaults of the ``[filter]`` table and where they come from
FILTER_DEFAULTS: dict[str, Any] = {
    "propose": "auto",
    "max_branches": 3,
    "quality": 40.0,
    "below_pct": 6.0,
    "rating_steps": 2,
    "kvar_factors": [1.0, 1.25, 1.5],
}
FILTER_SOURCES = {
    "propose": "project choice: 'auto' searches where a PCC current is beyond its limit with a bank in any "
               "scenario; 'always' for every bank; 'never' for none",
    "max_branches": "common practice: industrial filters have one to three single-tuned branches (5th, 7th, 11th)",
    "quality": "REFERENCES.md 'Tuned harmonic filters': Q = X_n/R at the tuning frequency typical 20-100 [memory]; "
               "40 a mid choice; the branch's reactor_q (X_L/R at the fundamental, as the model uses it) is Q/n",
    "below_pct": "REFERENCES.md 'Tuned harmonic filters': tune 3-10 % below the target order, e.g. 4.7 for the "
                 "5th [memory]; lowered further where the tolerance band would reach the harmonic",
    "kvar": "the kvar the site needs: the bank's full net output at the bus unless [filter] kvar is given",
    "kvar_factors": "project choice: the site's kvar first; larger filters only where it is not enough (a filter "
                    "above the site's need raises the power factor at light load: check it)",
    "splits": "project choice: the kvar split between branches, the lowest order taking the largest share "
              "(it absorbs the largest current)",
}

#: kvar splits between branches (lowest order first) tried for each branch count [unitless]
SPLITS = {
    1: ((1.0,),),
    2: ((0.7, 0.3), (0.6, 0.4), (0.8, 0.2), (0.5, 0.5)),
    3: ((0.5, 0.3, 0.2), (0.6, 0.25, 0.15), (0.4, 0.35, 0.25), (0.45, 0.35, 0.2)),
    4: ((0.45, 0.25, 0.15, 0.15), (0.4, 0.3, 0.15, 0.15), (0.55, 0.2, 0.15, 0.1)),
}


def filter_settings(case) -> dict:
    """The ``[filter]`` settings of a case with the defaults filled in (plain dict) [see FILTER_DEFAULTS]."""
    ft = getattr(case, "filter", None)
    out = dict(FILTER_DEFAULTS)
    out.update({"orders": None, "kvar": None, "banks": None})
    if ft is not None:
        for k, v in ft.model_dump().items():
            if v is not None:
                out[k] = v
    return out


def branch_tuning(h: int, below_pct: float, cap_tol_pct, reactor_tol_pct) -> float:
    """Tuning order of a single-tuned branch absorbing harmonic ``h``.

    Parameters
    ----------
    h : int
        Harmonic order the branch absorbs [unitless].
    below_pct : float
        How far below ``h`` the nominal tuning sits [%].
    cap_tol_pct, reactor_tol_pct : pair of float
        Capacitance and inductance tolerances [%].

    Returns
    -------
    float
        ``h (1 - below_pct/100)``, lowered where the top of the tolerance band
        (:func:`~resonance.assessment.tuning.tuning_band`) would come within
        ``FILTER_BAND_MARGIN_PCT`` of ``h``; rounded down to 0.01 [unitless].

    References
    ----------
    IEEE Std 1531-2020 (tuning below the harmonic so that tolerances, ageing and temperature do not
    push the branch onto it); REFERENCES.md "Tuned harmonic filters" [memory].
    """
    n = h * (1.0 - below_pct / 100.0)
    rise = tuning_band(1.0, cap_tol_pct, reactor_tol_pct)[1]  # the band's top as a factor of n
    n_max = h * (1.0 - FILTER_BAND_MARGIN_PCT / 100.0) / rise
    n = min(n, n_max * (1.0 - 1e-6))
    return math.floor(n * 100.0) / 100.0


def branch_names(bank_name: str, orders) -> list[str]:
    """Names of the branches replacing a bank: the lowest keeps the bank's name, the others
    ``<name>-H<order>`` [unitless]."""
    return [bank_name if i == 0 else f"{bank_name}-H{int(h)}" for i, h in enumerate(orders)]


#: switching keys of the replaced bank that every branch keeps (one value for all its stages)
_CARRIED = ("step_inductance_uh", "bus_length_m", "uh_per_m", "inrush_reactor_uh", "pre_insertion_ohm",
            "device_inrush_peak_ka", "device_inrush_hz")


def _carried(bank) -> dict:
    """The replaced bank's switching data that holds for a single-step branch (per-stage lists do not)."""
    return {k: getattr(bank, k) for k in _CARRIED if getattr(bank, k) is not None
            and not isinstance(getattr(bank, k), list)}


def dropped_keys(bank) -> list[str]:
    """Keys of the replaced bank that do not hold for a single-step branch (per-stage lists) [unitless]."""
    return [k for k in _CARRIED if isinstance(getattr(bank, k), list)]


def _bank_tables(names, orders, ns, kvs, q_np, bank, quality: float) -> list[dict]:
    """The ``[[bank]]`` tables of the branches, in the order they are written (lowest order first); each
    branch's ``reactor_q`` (X_L/R at the fundamental) is ``quality / n`` (``Q = X_n/R = n X_L/R``)."""
    tables = []
    for i, name in enumerate(names):
        t = {"name": name, "bus": bank.bus, "kind": "filter", "rated_kv": kvs[i], "steps_kvar": [float(q_np[i])],
             "detuning_pct": round(100.0 / ns[i] ** 2, 4), "reactor_q": round(max(quality / ns[i], 1.01), 3),
             "runs_with": list(names[:i])}
        if i:
            t.update(_carried(bank))
        tables.append(t)
    return tables


def _filter_variant(case, bank, tables: list[dict]):
    """The case with ``bank`` replaced by the branches of ``tables`` (validated as a case file is)."""
    keep = _carried(bank)
    return with_banks_in_place(case, bank, [{**keep, **t} for t in tables])


def _trigger(result, bank_name: str) -> list:
    """PCC current findings of a bank's sweeps, whoever's they are [Finding]."""
    return [f for f in result.findings if f.bank == bank_name and f.check in PCC_CURRENT_CHECKS]


def _describe(c: dict) -> str:
    return " + ".join(f"{b['kvar']:g} kvar at {b['n']:.2f} ({b['kv']:g} kV)" for b in c["branches"])


def branch_rating(u_kv: float, q_net_kvar: float, n: float, step: int, st, f_hz: float):
    """Capacitor rating of one branch: rung ``step`` of the ratings that can be bought.

    Parameters
    ----------
    u_kv : float
        Bus voltage [kV].
    q_net_kvar : float
        The branch's net output at the bus [kvar].
    n : float
        Tuning order [unitless].
    step : int
        0 for the lowest rating at or above ``U/(1 - 1/n^2)`` (plus ``cap_voltage_margin_pct``), 1 the
        next, ... [unitless].
    st : DetuningSettings
        ``standard_cap_kv``, ``mv_cap_step_kv``, ``cap_voltage_margin_pct`` [kV, %].
    f_hz : float
        Fundamental frequency [Hz].

    Returns
    -------
    tuple
        (rated kV, nameplate kvar at it, construction dict or None) [kV, kvar]; above 1 kV the rating
        is a construction of standard units (:func:`resonance.design.mv_rating.rating_ladder`).

    References
    ----------
    IEEE Std 18-2002 (``Q = Q_R (U/U_R)^2``); IEEE Std 1531-2020 (capacitor voltage of a tuned
    branch ``U/(1 - 1/n^2)``); REFERENCES.md "Tuned harmonic filters" [memory].
    """
    p = 1.0 / n**2
    u_need = u_kv / (1.0 - p) * (1.0 + st.cap_voltage_margin_pct / 100.0)
    if u_kv > LV_LIMIT_KV:
        q_need = float(nameplate_kvar(q_net_kvar, u_need, u_kv, p))
        lad = rating_ladder(u_kv, [q_need], u_need, f_hz, step)
        if lad[0][0] / u_kv > 1.6:  # no wye of listed units within range: delta, reactors in line
            lad = rating_ladder(u_kv, [q_need], u_need, f_hz, step, connections="delta")
        kv, d = lad[step]
        return kv, float(d["steps_kvar"][0]), d["stages"][0]
    kv0 = capacitor_rating_kv(u_need, st.standard_cap_kv, st.mv_cap_step_kv)
    kv = next_ratings(kv0, st.standard_cap_kv, st.mv_cap_step_kv, step)[step]
    return kv, float(np.round(nameplate_kvar(q_net_kvar, kv, u_kv, p), 1)), None


def _study(case, model, bank, names, orders, ns, step, split, q_total, factor, fs, st, u):
    """One candidate: the variant case studied and judged (plain dict, and what the proposal needs)."""
    c = {"branches": [], "split": list(split), "kvar_factor": factor}
    try:
        rated = [branch_rating(u, q_total * s, n, step, st, float(case.frequency_hz)) for s, n in zip(split, ns)]
    except ValueError as e:
        c.update({"qualified": False, "why": f"no capacitor rating ({e})", "pcc_over_limit_max": None,
                  "duty_only": False})
        return c, None
    kvs = [r[0] for r in rated]
    q_np = [r[1] for r in rated]
    tables = _bank_tables(names, orders, ns, kvs, q_np, bank, fs["quality"])
    c["branches"] = [{"order": h, "n": n, "kvar": round(q_total * s, 1), "kv": kv, "kvar_nameplate": q,
                      "construction": r[2]} for h, n, s, kv, q, r in zip(orders, ns, split, kvs, q_np, rated)]
    if min(q_np) < 1.0:
        c.update({"qualified": False, "why": f"a branch below 1 kvar ({min(q_np):g} kvar nameplate)",
                  "pcc_over_limit_max": None, "duty_only": False})
        return c, None
    try:
        variant = _filter_variant(case, bank, tables)
        res = run_variant(variant, model)
    except (InputError, ModelError, ValueError) as e:  # ValueError: pydantic's ValidationError
        c.update({"qualified": False, "why": f"could not be studied ({e})", "pcc_over_limit_max": None,
                  "duty_only": False})
        return c, None
    own = [f for f in bank_findings(res.findings) if f.bank in names]
    left = [f for f in res.findings if f.check in PCC_CURRENT_CHECKS and f.bank in names]
    ratio, per = pcc_ratio(res, names)
    why = sorted({f"{f.check} ({f.bank}, {f.scenario})" for f in own})
    if left:
        why.append(f"PCC current still beyond its limit (up to {ratio:.2f} x the limit)")
    c.update({"qualified": not why, "why": "; ".join(why[:8]) or "clears every PCC current finding "
              "and every branch passes in every scenario", "pcc_over_limit_max": round(ratio, 4),
              "own_findings": len(own), "duty_only": bool(own) and all(f.check.startswith("duty_") for f in own)})
    return c, (c, variant, res, tables, per)


def _search(case, model, bank, orders_all, fs, st, u, q_total, factor, cands, best):
    """Branch counts 1.. ``max_branches`` at one total kvar; per count every split, each at the lowest
    capacitor rating and higher ones while only the capacitor duty fails.  Returns (chosen, best)."""
    for k in range(1, min(fs["max_branches"], len(orders_all)) + 1):
        orders = orders_all[:k]
        names = branch_names(bank.name, orders)
        if {*names} & {b.name for b in case.bank if b.name != bank.name}:
            break
        ns = [branch_tuning(h, fs["below_pct"], st.cap_tolerance_pct, st.reactor_tolerance_pct) for h in orders]
        good = []
        for split in SPLITS.get(k, SPLITS[max(SPLITS)]):
            for step in range(fs["rating_steps"] + 1):
                c, full = _study(case, model, bank, names, orders, ns, step, split, q_total, factor, fs, st, u)
                cands.append(c)
                if full is None:
                    break
                if best is None or (c["own_findings"], c["pcc_over_limit_max"]) < (
                        best[0]["own_findings"], best[0]["pcc_over_limit_max"]):
                    best = full
                if c["qualified"]:
                    good.append((max(b["kv"] for b in c["branches"]), sum(b["kvar_nameplate"] for b in c["branches"]),
                                 len(good), full))
                    break
                if not c["duty_only"]:
                    break  # a higher capacitor rating changes the capacitor duty only
        if good:
            return min(good, key=lambda t: t[:3])[3], best
    return None, best


def propose_filters(case, model, result) -> dict:
    """Tuned-filter proposals for the banks of a case.

    Parameters
    ----------
    case : Case
        The case as given (its optional ``[filter]`` table: ``propose``, ``orders``, ``max_branches``,
        ``kvar`` [kvar], ``kvar_factors``, ``quality`` (Q = X_n/R at the tuning frequency) [unitless],
        ``below_pct`` [%], ``rating_steps``, ``banks``).
    model : PlantModel
        The plant model of ``result`` (re-used for every re-check).
    result : StudyResult
        The study of ``case`` as given.

    Returns
    -------
    dict
        Bank name -> ``{"filter": dict or None, "filter_reason": str, "filter_search": dict}``.
        ``filter`` (when proposed) has ``branches`` (each ``tuning_order``, ``kvar`` [kvar net at the
        bus], ``reactor_mh`` [mH], ``capacitor_rated_kv`` [kV] and the figures of
        :func:`_branch_figures`), ``bank_tables`` (the ``[[bank]]`` tables taking the bank's place),
        ``pcc`` per scenario, ``clears_pcc_current`` and ``clears_site_findings`` (the re-check's
        ``site_passed``) [unitless].

    Notes
    -----
    For ``k = 1 .. max_branches`` the branches absorb the ``k`` lowest of the orders (default: the
    significant orders of :func:`~resonance.assessment.tuning.significant_orders`), tuned by
    :func:`branch_tuning`; for each rating step (the lowest standard capacitor rating at or above
    ``U/(1 - p)``, then the next ones) and each kvar split of :data:`SPLITS` the variant case is
    studied (:func:`~resonance.design.detuning.run_variant`) and judged by the one verdict
    (:func:`~resonance.assessment.verdict.bank_findings`).  The first that qualifies is the
    proposal; the order of the loops is the order of "smallest".

    References
    ----------
    IEEE Std 1531-2020 (single-tuned filter application); IEEE Std 519-2014 Table 2;
    IEEE Std 18-2002; REFERENCES.md "Tuned harmonic filters" [memory].
    """
    fs = filter_settings(case)
    st = detuning_settings(case)
    sources = list(result.sources)
    background = dict(case.supply.background_pct) if case.supply else {}
    sig = significant_orders(sources, background, st, fallback=result.orders.characteristic)
    orders_all = sorted({int(h) for h in (fs["orders"] or sig) if int(h) >= 2})
    settings_out = {k: fs[k] for k in ("propose", "max_branches", "quality", "below_pct", "rating_steps", "kvar_factors",
                                       "orders", "kvar", "banks")}
    settings_out.update({"orders_searched": orders_all, "splits": {str(k): [list(s) for s in v] for k, v in SPLITS.items()},
                         "sources": FILTER_SOURCES})
    out = {}
    for bank in case.bank:
        entry: dict[str, Any] = {"filter": None, "filter_reason": "", "filter_search": {"settings": settings_out,
                                                                                       "candidates": []}}
        out[bank.name] = entry
        trig = _trigger(result, bank.name)
        if bank.kind == "filter" or any(bank.name in b.runs_with for b in case.bank):
            entry["filter_reason"] = f"bank {bank.name} is a filter branch already (judged by filter_tuning)"
            continue
        if fs["propose"] == "never" or (fs["banks"] is not None and bank.name not in fs["banks"]):
            entry["filter_reason"] = "not asked for ([filter] propose = \"never\" or banks)"
            continue
        if not trig and fs["propose"] != "always":
            entry["filter_reason"] = (f"no PCC current finding with bank {bank.name} in any scenario (IEEE Std 519 "
                                      "Table 2 limits met): no filter needed")
            continue
        if not orders_all:
            entry["filter_reason"] = "no significant harmonic order to absorb"
            continue
        scans = {sc.scenario: sc for sc in result.scans if sc.bank.name == bank.name}
        bm = scans["nominal"].bank
        u = bm.bus_kv
        q_total = fs["kvar"] or float(np.sum(bm.stages_kvar) * (u / bm.rated_kv) ** 2 / (1.0 - bm.p))
        cands, best, chosen = [], None, None
        for factor in fs["kvar_factors"]:
            chosen, best = _search(case, model, bank, orders_all, fs, st, u, q_total * factor, factor, cands, best)
            if chosen:
                break
        entry["filter_search"]["candidates"] = cands
        entry["filter_search"]["kvar_total"] = round(q_total, 2)
        entry["filter_search"]["re_checks"] = len(cands)
        fac = "/".join(f"{f:g}" for f in fs["kvar_factors"])
        kmax = min(fs["max_branches"], len(orders_all))
        space = (("1 branch" if kmax == 1 else f"1-{kmax} branches") + " absorbing the "
                 f"{', '.join(str(h) for h in orders_all[:fs['max_branches']])}, {q_total:.0f} kvar in all "
                 f"(x {fac}), {fs['rating_steps'] + 1} capacitor ratings, {len(cands)} designs studied")
        if chosen is None:
            if best is None:
                entry["filter_reason"] = (f"No filter within the searched space ({space}) could be studied: "
                                          + " | ".join(c["why"] for c in cands[:4]))[:2000]
            else:
                c = best[0]
                own_words = ("passes its own checks" if not c["own_findings"] else
                             f"has {c['own_findings']} finding(s) of its own ({c['why'][:300]})")
                r = c["pcc_over_limit_max"]
                pcc_words = (f"leaves the PCC current at {r:.2f} x its IEEE 519 limit ({100 * (r - 1):.0f} % short)"
                             if r > 1.0 else f"keeps the PCC current within its limits ({r:.2f} x)")
                entry["filter_reason"] = (
                    f"No filter within the searched space ({space}) clears the PCC current findings and passes "
                    f"its own checks; the best, {_describe(c)}, {own_words} and {pcc_words}; a larger filter "
                    "([filter] kvar, kvar_factors), more branches ([filter] max_branches) or treating the "
                    "sources themselves would be needed.")
                entry["filter_search"]["best"] = {"branches": c["branches"], "pcc": best[4],
                                                  "pcc_over_limit_max": c["pcc_over_limit_max"],
                                                  "own_findings": c["own_findings"]}
            continue
        c, variant, res, tables, per = chosen
        for scen, d in per.items():
            asm0 = result.assessment_for(bank.name, scen)
            d["tdd_bank_off_pct"] = None if asm0 is None else round(asm0.bank_off["tdd_pct"], 3)
        site_ok = not site_findings(res.findings)
        orders_c = [b["order"] for b in c["branches"]]
        branches = branch_figures(res, variant, branch_names(bank.name, orders_c), orders_c, u,
                                   float(case.frequency_hz))
        for br, cb in zip(branches, c["branches"]):
            br["construction"] = cb["construction"]
        split_absorbed(branches, variant, model)
        losses = sum(b["losses_kw"] for b in branches)
        q_chosen = q_total * c["kvar_factor"]
        more = ("" if c["kvar_factor"] == 1.0 else
                f"; it is {c['kvar_factor']:g} x the site's {q_total:.0f} kvar (the site's kvar alone is not enough): "
                "check the power factor at light load")
        one = len(branches) == 1
        entry["filter"] = {
            "status": "proposed", "bank": bank.name, "bus": bank.bus, "kvar_total": round(q_chosen, 2),
            "kvar_site": round(q_total, 2), "kvar_factor": c["kvar_factor"],
            "branches": branches, "bank_tables": tables, "drop_keys": dropped_keys(bank), "pcc": per, "clears_pcc_current": True,
            "clears_site_findings": site_ok, "losses_kw": round(losses, 4), "re_checks": len(cands),
            "reason": (f"{len(branches)} single-tuned branch{'' if one else 'es'} ("
                       + " + ".join(f"{b['kvar']:.0f} kvar at {b['tuning_order']:.2f} ({b['capacitor_rated_kv']:g} kV)"
                                    for b in branches) + f") in place of bank "
                       f"{bank.name} clear{'s' if one else ''} every PCC current finding in every scenario and "
                       f"pass{'es' if one else ''} every check of {'its' if one else 'their'} own (the smallest of "
                       f"{len(cands)} designs studied{more})"
                       + ("" if site_ok else "; other site findings remain (see the re-check)") + "."),
        }
        entry["filter_reason"] = entry["filter"]["reason"]
    return out


def choose_designs(proposals: dict, detuned_studies: dict) -> None:
    """Mark each proposed filter ``chosen`` (the recommended design of its bank) or not.

    Parameters
    ----------
    proposals : dict
        :func:`propose_filters` output, marked in place (``filter.chosen``, ``filter.chosen_why``).
    detuned_studies : dict
        Bank name -> (variant case, StudyResult) of its recommended detuned design
        (:func:`resonance.design.detuning.recommended_studies`).

    Notes
    -----
    A filter is chosen where its bank has no detuned design, or where the detuned design's re-check
    still has a PCC current finding in the bank's sweeps (the site's emission, or the bank's); where
    the detuned design clears every PCC current finding it is the simpler remedy and the filter is
    offered beside it (project choice, common practice: a filter is bought for the site's compliance).
    """
    for name, e in proposals.items():
        f = (e or {}).get("filter")
        if not f:
            continue
        st = detuned_studies.get(name)
        if st is None:
            f["chosen"], f["chosen_why"] = True, "no detuned design is proposed for this bank"
            continue
        left = [x for x in st[1].findings if x.check in PCC_CURRENT_CHECKS and x.bank == name]
        if left:
            f["chosen"] = True
            f["chosen_why"] = (f"the detuned design leaves {len(left)} PCC current finding(s) in its re-check "
                               f"(e.g. {left[0].check}, {left[0].scenario}); the filter clears them")
        else:
            f["chosen"] = False
            f["chosen_why"] = ("the detuned design already clears every PCC current finding in its re-check: it is "
                               "the recommended design, the filter is offered beside it")
            f["reason"] += " Offered, not chosen: " + f["chosen_why"] + "."
            e["filter_reason"] = f["reason"]


def filter_studies(case, model, proposals: dict, together: bool = True) -> dict:
    """Bank name -> (variant case, re-check StudyResult) of its proposed filter.

    With one filter this is the memoised study the proposal was accepted on.  Where several banks get
    a filter, each was searched with the others as given; ``recommended_case.toml`` holds them all, so
    the case with every filter in place is studied once more and is the re-check of each: its outcome
    is written into each proposal as ``together`` (``banks``, ``clears_pcc_current``,
    ``branch_findings``) and, where it does not clear, said in the reason.
    """
    chosen = [(name, e["filter"]) for name, e in proposals.items()
              if (e or {}).get("filter") and (e["filter"].get("chosen", True) or not together)]
    out = {}
    for name, f in chosen:
        bank = next(b for b in case.bank if b.name == name)
        variant = _filter_variant(case, bank, f["bank_tables"])
        out[name] = (variant, run_variant(variant, model))
    if len(chosen) < 2 or not together:
        return out
    variant = case
    for name, f in chosen:
        bank = next(b for b in variant.bank if b.name == name)
        variant = _filter_variant(variant, bank, f["bank_tables"])
    res = run_variant(variant, model)
    names = {t["name"] for _n, f in chosen for t in f["bank_tables"]}
    own = [x for x in bank_findings(res.findings) if x.bank in names]
    left = [x for x in res.findings if x.check in PCC_CURRENT_CHECKS and x.bank in names]
    tog = {"banks": [n for n, _f in chosen], "clears_pcc_current": not left, "branch_findings": len(own),
                "site_passed": not site_findings(res.findings)}
    for name, f in chosen:
        f["together"] = tog
        f["clears_site_findings"] = tog["site_passed"]
        if left or own:
            f["clears_pcc_current"] = not left
            f["reason"] += (f" With the other proposed filters in place as well ({', '.join(tog['banks'])}), "
                            f"{len(own)} branch finding(s) and {len(left)} PCC current finding(s) remain: "
                            "the filters must be designed together (give [filter] banks one at a time).")
            proposals[name]["filter_reason"] = f["reason"]
        out[name] = (variant, res)
    return out

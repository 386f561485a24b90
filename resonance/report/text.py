"""Words of the submittal report generated from the results: verdicts, methods, assumptions.

Edge layer, no matplotlib.
"""

from __future__ import annotations

from types import SimpleNamespace

from resonance.assessment.envelope import scenario_words

from resonance.report import figures as rf
from resonance.report.tables import (DUTY_KEYS, DUTY_LABEL, _detuning, _duty_limit_set, _fmt_any, _has_duty,
                            _has_penetration, _Limits, _num, _pcc_kv, _s, _thd_bus, _thd_pcc, chosen_filter,
                            limit_set_words)
from resonance.assessment.study import StudyResult

__all__ = ["NOT_EVALUATED"]

NOT_EVALUATED = "not evaluated in this version"


def _steps_list(ks: list[int]) -> str:
    ks = [str(k) for k in ks]
    if len(ks) <= 1:
        return "".join(ks)
    return ", ".join(ks[:-1]) + " and " + ks[-1]


def _res_sentence(steps: list[dict], margin: float, scen: str) -> str:
    bad = [s for s in steps if s.get("resonance_ok") is False]
    with_h = [s for s in steps if s.get("h_scan") is not None and s.get("margin_pct") is not None]
    if not with_h:
        return f"Resonance, {scen} supply: no step shows a resonance near an order of concern in the scan range."
    worst = min(with_h, key=lambda s: abs(s["margin_pct"]))
    side = "above" if worst["margin_pct"] > 0 else "below"
    where = (f"step {worst['step']} (h = {worst['h_scan']:.2f}, {abs(worst['margin_pct']):.1f} % {side} the "
             f"{worst.get('nearest_kind') or ''} {rf.ordinal(worst['nearest_order'])})")
    if bad:
        word = "step" if len(bad) == 1 else "steps"
        return (f"Resonance, {scen} supply: {len(bad)} of {len(steps)} steps resonate inside the +-{margin:g} % "
                f"screening band of an order of concern ({word} {_steps_list([s['step'] for s in bad])}); "
                f"the closest is {where}.")
    return (f"Resonance, {scen} supply: no step resonates inside the +-{margin:g} % screening band; "
            f"the closest is {where}.")


_CHECK_WORDS = {"resonance": "resonance", "pcc_thd_v": "PCC voltage THD", "pcc_v_individual": "PCC individual "
                "harmonic voltage", "pcc_tdd": "PCC TDD", "pcc_i_individual": "PCC individual harmonic current"}


def _check_word(c: str) -> str:
    if c.startswith("duty_"):
        return f"capacitor duty ({DUTY_LABEL.get(c[5:], c[5:])})"
    return _CHECK_WORDS.get(c, c.replace("_", " "))


def _verdict(bank: dict, data: dict, lim: _Limits) -> list[str]:
    """The summary paragraphs of one bank, from its findings (long on purpose: one sentence per
    kind of finding, in the order an engineer reads them)."""
    margin = data["settings"]["margin_pct"]
    kind = (f"a detuned bank (p = {bank['detuning_pct']:g} %, tuning order {bank['tuning_order']:.2f})"
            if bank.get("detuning_pct") else "a plain (undetuned) bank")
    n = len(bank["steps"])
    out = [f"Bank {bank['name']} at bus {bank['bus']} ({bank['bus_kv']:g} kV) is {kind} of {n} steps, "
           f"{sum(bank['stages_kvar']):g} kvar at {bank['rated_kv']:g} kV; short-circuit power at the bus "
           f"{bank['sc_mva']:.2f} MVA."]
    out.append(_res_sentence(bank["steps"], margin, "nominal"))
    if bank.get("weak_supply"):
        out.append(_res_sentence(bank["weak_supply"]["steps"], margin, "weak"))
    steps = bank["steps"]
    if _has_penetration(bank):
        parts = []
        off = bank.get("bank_off") if isinstance(bank.get("bank_off"), dict) else {}
        tb = [(s["step"], _thd_bus(s)) for s in steps if _thd_bus(s) is not None]
        if tb:
            k, v = max(tb, key=lambda x: x[1])
            o = _num(off.get("thd_v_pct"))
            parts.append(f"the highest voltage THD at the bank bus is {v:.2f} % (step {k})"
                         + (f", against {o:.2f} % with the bank off" if o is not None else ""))
        tp = [(s["step"], _thd_pcc(s)) for s in steps if _thd_pcc(s) is not None]
        if tp:
            k, v = max(tp, key=lambda x: x[1])
            lt = (f" against the IEEE 519 limit of {lim.pcc_thd:g} %" + (" - exceeded" if v > lim.pcc_thd else
                                                                           " - within it")) if lim.pcc_thd else ""
            parts.append(f"at the PCC {v:.2f} % (step {k}){lt}")
        td = [(s["step"], _num(s.get("tdd_pct"))) for s in steps if _num(s.get("tdd_pct")) is not None]
        if td:
            k, v = max(td, key=lambda x: x[1])
            lt = (f" against {lim.tdd:g} %" + (" - exceeded" if v > lim.tdd else " - within it")) if lim.tdd else ""
            parts.append(f"the highest TDD at the PCC is {v:.1f} % of I_L (step {k}){lt}")
        out.append("Harmonic penetration, nominal supply: " + "; ".join(parts) + ".")
    else:
        out.append(f"Harmonic penetration (THD at the bank bus and the PCC): {NOT_EVALUATED}.")
    if _has_duty(bank):
        fails = []
        for s in steps:
            over = [DUTY_LABEL[q] for q, k in DUTY_KEYS.items()
                    if _num(s.get(k)) is not None and q in lim.duty and _num(s.get(k)) > lim.duty[q]]
            if over or s.get("duty_ok") is False:
                fails.append((s["step"], over))
        worst = max(((s["step"], q, _num(s.get(k)) - lim.duty[q]) for s in steps for q, k in DUTY_KEYS.items()
                     if _num(s.get(k)) is not None and q in lim.duty), key=lambda x: x[2], default=None)
        if fails:
            detail = "; ".join(f"step {k}: {', '.join(o) if o else 'duty check failed'}" for k, o in fails)
            out.append(f"Capacitor duty, nominal supply: beyond the {limit_set_words(lim.duty_name)} limits on {len(fails)} of {n} "
                       f"steps ({detail}).")
        elif worst is not None:
            out.append(f"Capacitor duty, nominal supply: within the {limit_set_words(lim.duty_name)} limits on every step; the "
                       f"smallest margin is {-worst[2]:.1f} points ({DUTY_LABEL[worst[1]]}, step {worst[0]}).")
    else:
        out.append(f"Capacitor duty against the {limit_set_words(lim.duty_name)} limits: {NOT_EVALUATED}.")
    rec, _c = _detuning(bank)
    if rec:
        bits = []
        if _num(rec.get("detuning_pct")) is not None:
            bits.append(f"p = {_num(rec['detuning_pct']):g} %")
        if _num(rec.get("tuning_order")) is not None:
            bits.append(f"tuning order {_num(rec['tuning_order']):.2f}")
        if _num(rec.get("rated_kv")) is not None:
            bits.append(f"capacitors rated {_num(rec['rated_kv']):g} kV")
        if rec.get("steps_kvar"):
            bits.append(f"steps {_fmt_any(rec['steps_kvar'])} kvar")
        if chosen_filter(bank):
            out.append("Detuned bank (an alternative that protects the bank only): " + ", ".join(bits) + ".")
        else:
            out.append("Recommended detuned bank: " + ", ".join(bits) + ".")
    elif not bank.get("detuning_pct"):
        out.append(f"Detuning proposal: {NOT_EVALUATED}.")
    flt = bank.get("filter")
    if flt:
        lead = "Recommended design: a tuned filter in the bank's place" if chosen_filter(bank) else \
            "Tuned filter offered beside the detuned bank"
        out.append(lead + ": " + "; ".join(
            f"{x['name']} tuned at {_num(x['tuning_order']):.2f}, {_num(x['kvar']):.0f} kvar, capacitors "
            f"{_num(x['capacitor_rated_kv']):g} kV" for x in flt.get("branches", [])) + " (section 7).")
    mine = [f for f in data.get("findings", []) if f.get("bank") == bank["name"]]
    finds = [f for f in mine if f.get("cause", "bank") == "bank"]
    site = [f for f in mine if f.get("cause") == "site"]
    if site:
        out.append(f"Site condition: {len(site)} distortion figure(s) at the PCC are already beyond their limit "
                   "with the bank off and the bank does not make them worse; they are the site's own emission, "
                   "listed with their bank-off values, and do not decide the bank's verdict.")
    if finds:
        by: dict[str, dict[str, set]] = {}
        for f in finds:
            by.setdefault(_check_word(str(f.get("check"))), {}).setdefault(str(f.get("scenario", "nominal")),
                                                                           set()).add(f.get("step"))
        order = [s.get("name") for s in data.get("scenarios", [])] + ["all"]
        scens = sorted({sc for d in by.values() for sc in d}, key=lambda x: order.index(x) if x in order else 99)
        key = ", ".join(f"{scenario_words(sc)}" for sc in scens)
        parts = [f"{w} {'/'.join(str(len(by[w].get(sc, ()))) for sc in scens)}" for w in sorted(by)]
        verdict = (f"Verdict: the bank as specified does not pass the screening: {len(finds)} finding(s) of the "
                   f"bank's. Steps with each finding in the scenarios ({key}), of {n}: " + "; ".join(parts) + ".")
    else:
        verdict = "Verdict: the bank as specified passes every screening check evaluated in this version."
    return [verdict] + out


_R_MODEL = {
    "constant": "series resistance constant with frequency (no skin effect; common practice for screening)",
    "sqrt_h": "series resistance rising as sqrt(h) (skin-effect approximation; common practice)",
    "breuer": "series resistance R(1 + 0.1 h^1.5)/1.1 (Breuer et al., IEEE Trans. PAS; from memory)",
}
_L_MODEL = {
    "parallel_rl": "linear loads as parallel R-L: R = V^2/P, X = h V^2/Q (common practice)",
    "series_rl": "linear loads as series R-L drawing P and Q at the fundamental",
    "cigre_c4": "linear loads by the CIGRE 36.05 model: R = V^2/P, X_s = 0.073 h R, X_p = h R/(6.7 Q/P - 0.74) "
                "(coefficients from memory)",
    "none": "linear loads ignored (no load damping; conservative peaks)",
}


def _pcc_voltage_line(st: dict, data: dict, v_pcc, v519) -> str:
    """The methods line on the PCC voltage limits: IEEE 519 (one individual limit) or a
    per-order planning-level table, as the assessment applied it."""
    where = f"applied at the PCC (bus {data.get('pcc_bus')}" + (f", {v_pcc:g} kV" if v_pcc else "") + ")"
    if v519 is None:
        return f"Voltage distortion limits: {where}."
    ind = v519.individual_pct
    if isinstance(ind, dict):
        levels = ", ".join(f"h{h} {v:g}" for h, v in sorted(ind.items(), key=lambda kv: int(kv[0])))
        return (f"Voltage distortion limits: {st.get('pcc_voltage_limits')} planning levels, {where}: {levels} %, "
                f"THD {v519.thd_pct:g} % ({v519.source}).")
    return (f"Voltage distortion limits: IEEE Std 519-{st.get('ieee519_edition')}, {where}: individual {ind:g} %, "
            f"THD {v519.thd_pct:g} % ({v519.source}).")


def _methods(res: StudyResult, data: dict) -> tuple[list[str], list[str]]:
    st = data["settings"]
    v_pcc = _pcc_kv(res, data)
    pv = next((b["limits"]["pcc_v_limits"] for b in data["banks"] if (b.get("limits") or {}).get("pcc_v_limits")),
              None)  # the assessment's PCC voltage limits (the same for every bank)
    v519 = SimpleNamespace(**pv) if pv else None
    dl = _duty_limit_set(data)
    m = [
        "Supply: Thevenin source at the supply bus, X = V^2/S_sc split by the X/R ratio, reactance proportional "
        "to h." + (" A weak-supply scenario repeats the scan with the minimum short-circuit power."
                   if data["supply"].get("sc_mva_min") else ""),
        "Transformers: X = (Z%/100) V^2/S_T, proportional to h; cables and lines: series R + jX per km with the "
        "shunt capacitance (pi section).",
        f"Resistance model ({st.get('resistance_model')}): "
        f"{_R_MODEL.get(st.get('resistance_model'), st.get('resistance_model'))}.",
        f"Load model ({st.get('load_model')}): {_L_MODEL.get(st.get('load_model'), st.get('load_model'))}.",
        "Capacitors: constant capacitance from the nameplate kvar at the rated voltage (Q = Q_R (U/U_R)^2); detuned "
        "steps with a series reactor p = X_L/X_C of the given X/R. Delivered kvar uses the load-flow bus voltage "
        "with the step in service (Newton-Raphson on the bus admittance matrix pandapower builds, checked "
        "against pandapower's own load flow).",
        f"Frequency scan: driving-point impedance |Z(h)| at the bank bus for every step, h = 1 to {st.get('h_max'):g} "
        f"in steps of {st.get('h_step'):g}, peaks refined locally; h_est = sqrt(S_sc/Q_C) is the hand check "
        "(IEEE Std 1036). Other banks: " + ("in service at full size." if st.get("other_banks") == "full"
                                            else "out of service."),
        f"Screening: a resonance within +-{st.get('margin_pct'):g} % of an injected, background or characteristic "
        "order (k p +- 1) is a finding (common practice).",
        "Short-circuit power at each bank bus is cross-checked with IEC 60909-0:2016 through pandapower.",
        _pcc_voltage_line(st, data, v_pcc, v519),
        "Capacitor duty limits: " + (f"{dl.citation} - rms voltage {dl.v_rms:g}, crest voltage {dl.v_peak:g}, rms "
                                     f"current {dl.i_rms:g}, reactive power {dl.q:g} pu. {dl.note}." if dl else
                                     str(st.get("duty_limits"))),
        *_current_limit_lines(data),
        "Summation of several sources: " + ("arithmetic sum of magnitudes (worst case)." if st.get("summation") ==
                                            "arithmetic" else "IEC 61000-3-6 summation law, exponents 1 (h < 5), "
                                            "1.4 (5-10), 2 (h > 10) (from memory)."),
        "Switching: each step closed at the voltage crest, uncharged; step 1 from the supply alone (isolated), "
        "later steps with the earlier ones in service (back-to-back). Peak and frequency from the transient "
        "solution of the per-phase circuit (supply L and R at the bank bus, each stage's connection, inrush and "
        "detuning reactors) with the power-frequency source; for plain stages behind a weak supply this is the "
        "IEEE C37.99 / C37.012 formula I_pk = sqrt(2/3) V sqrt(C_eq / L_eq) plus a few percent. Voltage step "
        "Q_step / S_sc; energising overvoltage 1 + C_new / (C_on + C_new), damped by the supply.",
    ]
    mem = []
    sw = next((b.get("switching") for b in data["banks"] if b.get("switching")), None)
    if sw:
        mem.append(f"Capacitor units' switching current: {sw.get('capacitor_peak_limit_source')}.")
        mem.append(f"Capacitor transient voltage: {sw.get('capacitor_overvoltage_limit_source')}.")
        mem.append(f"Voltage step limit: {sw.get('voltage_step_source')}.")
        for b in data["banks"]:
            x = b.get("switching") or {}
            if x.get("device_typical") and x.get("device_inrush_peak_a"):
                mem.append(f"Bank {b['name']} switching device: {x.get('device_source')}.")
            if "assumed" in str(x.get("stage_connection_source")) or "memory" in str(x.get("stage_connection_source")):
                mem.append(f"Bank {b['name']} stage connection inductance: {x.get('stage_connection_source')}.")
    if dl:
        for q, src in (("rms voltage", dl.v_rms_source), ("crest voltage", dl.v_peak_source),
                       ("rms current", dl.i_rms_source), ("reactive power", dl.q_source)):
            if "memory" in src:
                mem.append(f"Capacitor {q} limit of {dl.name}: {src}.")
    if v519 and "memory" in v519.source:
        named = "IEEE 519 voltage limits" if st.get("pcc_voltage_limits", "ieee519") == "ieee519" else \
            f"{st.get('pcc_voltage_limits')} planning levels"
        mem.append(f"{named} at {v_pcc:g} kV: {v519.source}.")
    if st.get("summation") != "arithmetic":
        mem.append("IEC 61000-3-6 summation exponents (from memory).")
    if st.get("resistance_model") == "breuer":
        mem.append("Breuer resistance law 1 + 0.1 h^1.5 (from memory).")
    if st.get("load_model") == "cigre_c4":
        mem.append("CIGRE 36.05 load model coefficients 0.073, 6.7 and 0.74 (from memory).")
    for b in data["banks"]:
        rec = _detuning(b)[0]
        tol = rec.get("tolerance_pct") if rec else None
        if tol:
            c, ind = tol.get("capacitance", ("?", "?")), tol.get("inductance", ("?", "?"))
            mem.append(f"Capacitance tolerance {c[0]:+g}/{c[1]:+g} % and inductance tolerance {ind[0]:+g}/"
                       f"{ind[1]:+g} % used for the detuning band (from memory; editions differ).")
            break
    for spec in _builtin_notes(res):
        mem.append(spec)
    mem.append(f"The +-{st.get('margin_pct'):g} % screening band around the orders of concern is common practice, "
               "not a limit of a standard.")
    return m, mem


def _current_limit_lines(data: dict) -> list[str]:
    out = []
    for b in data["banks"]:
        pi = (b.get("limits") or {}).get("pcc_i_limits")
        if not isinstance(pi, dict):
            continue
        bits = [f"Current distortion limits (bank {b['name']}, nominal supply): IEEE Std 519 TDD "
                f"{_s(pi.get('tdd_pct'))} % of I_L"]
        if pi.get("isc_over_il") is not None:
            bits.append(f"I_sc/I_L = {_fmt_any(pi.get('isc_over_il'))} (row {_s(pi.get('row'))})")
        if pi.get("i_l_a") is not None:
            bits.append(f"I_L = {_fmt_any(pi.get('i_l_a'))} A ({_s(pi.get('i_l_basis'))})")
        out.append(", ".join(bits) + (f". Source: {pi['source']}." if pi.get("source") else "."))
    return out


def _builtin_notes(res: StudyResult) -> list[str]:
    from resonance.standards.spectra import BUILTIN_SPECTRA  # noqa: PLC0415
    out = []
    for name in sorted({hs.spectrum for hs in res.case.harmonic_source if isinstance(hs.spectrum, str)}):
        sp = BUILTIN_SPECTRA.get(name)
        note = getattr(sp, "note", "") if sp is not None else ""
        if note and "memory" in note:
            out.append(f"Built-in spectrum '{name}': {note}")
    return out


#: what each PCC quantity is called in plain words
_SITE_WORDS = {"pcc_thd_v": "voltage THD at the PCC", "pcc_v_individual": "harmonic {h} voltage at the PCC",
               "pcc_tdd": "TDD at the PCC", "pcc_i_individual": "harmonic {h} current at the PCC"}
_EFFECT_WORDS = {"lowers": "the bank lowers it", "raises": "the bank raises it (a finding of the bank's)",
                 "no_worse": "the bank does not make it worse"}


def site_lines(bank: dict) -> list[str]:
    """One line per PCC quantity the site has beyond its limit with the bank off (results.json
    ``site_distortion``): bank off against the bank's steps in, and what the bank does to it."""
    out = []
    for e in bank.get("site_distortion") or []:
        what = _SITE_WORDS.get(e.get("check"), str(e.get("check"))).format(h=e.get("order"))
        unit = "% of I_L" if "I_L" in str(e.get("unit")) else "%"
        out.append(f"SITE: bank {bank['name']} ({scenario_words(str(e.get('scenario')))}): {what} {e['bank_off']:.2f} {unit} with the "
                   f"bank off (limit {e['limit']:g} {unit}); {e['with_steps_min']:.2f}-{e['with_steps_max']:.2f} {unit} "
                   f"with its steps in: {_EFFECT_WORDS.get(e.get('effect'), e.get('effect'))}")
    return out

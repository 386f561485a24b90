"""The site's own distortion: the PCC quantities already beyond their limits with the bank off,
and what the bank's steps do to them.

Numeric core on the assessment's figures (:class:`~resonance.assessment.assess.BankAssessment`):
no new computation, only the bank-off row set beside the steps, judged by
:func:`resonance.assessment.verdict.site_effect`.

References
----------
IEEE Std 519-2014, clause 5 and tables 1 and 2 (limits of the whole installation at the PCC).
"""

from __future__ import annotations

from resonance.assessment.verdict import site_effect

__all__ = ["site_distortion", "limit_set_notes"]


def _per_order(steps: list[dict], h: str):
    for f in steps:
        for row in f.get("harmonics", []):
            if str(row.get("h")) == h:
                yield row
                break


def site_distortion(asm) -> list[dict]:
    """Each PCC distortion quantity beyond its limit with the bank off, in one scenario.

    Parameters
    ----------
    asm : BankAssessment
        One bank in one scenario.

    Returns
    -------
    list of dict
        ``{"bank", "scenario", "check", "order", "unit", "bank_off", "with_steps_min",
        "with_steps_max", "limit", "effect"}`` for THD and individual voltages [% of nominal], TDD
        and individual currents [% of I_L]; ``order`` None for THD and TDD.
    """
    vl = asm.info["pcc_v_limits"]
    il = asm.info["pcc_i_limits"]
    steps = [sd.fields for sd in asm.steps]
    off = asm.bank_off
    out = []

    def add(check, order, unit, e):
        if e is not None:
            out.append({"bank": asm.bank, "scenario": asm.scenario, "check": check, "order": order, "unit": unit,
                        **e})

    add("pcc_thd_v", None, "% of nominal voltage",
        site_effect(off["thd_v_pcc_pct"], [f["thd_v_pcc_pct"] for f in steps], vl["thd_pct"]))
    ind = vl["individual_pct"]  # one IEEE 519 limit for every order, or a per-order table
    for h, v_off in off.get("v_pcc_pct", {}).items():
        lv = ind.get(int(h)) if isinstance(ind, dict) else ind
        if lv is None:
            continue
        rows = list(_per_order(steps, h))
        add("pcc_v_individual", int(h), "% of nominal voltage", site_effect(v_off, [r["v_pcc_pct"] for r in rows], lv))
    add("pcc_tdd", None, "% of I_L", site_effect(off["tdd_pct"], [f["tdd_pct"] for f in steps], il["tdd_pct"]))
    for h, i_off in off.get("i_pcc_pct_of_il", {}).items():
        rows = list(_per_order(steps, h))
        lim = next((r["i_limit_pct_of_il"] for r in rows if r.get("i_limit_pct_of_il") is not None), None)
        if lim is not None:
            add("pcc_i_individual", int(h), "% of I_L",
                site_effect(i_off, [r["i_supply_pct_of_il"] for r in rows], lim))
    return out


def limit_set_notes(case) -> list[str]:
    """Which PCC voltage limit set was assumed, and why, where the case leaves it open."""
    st = case.study
    out = []
    if case.frequency_hz == 50 and "pcc_voltage_limits" not in st.model_fields_set:
        out.append("IEEE 519 voltage limits were assumed at the PCC (the default, the case names no set); a utility "
                   "in a 50 Hz region often applies IEC 61000-3-6 planning levels at an MV or HV connection: set "
                   "[study] pcc_voltage_limits = \"iec61000-3-6-mv\" or \"iec61000-3-6-hv\" where it does")
    if st.in_plant_limits == "none":
        out.append("no in-plant compatibility class named: the distortion at the bank buses is reported, not judged; "
                   "set [study] in_plant_limits = \"iec61000-2-4-class1\", \"-class2\" or \"-class3\" to check it")
    if st.pcc_voltage_limits != "ieee519":
        out.append(f"PCC voltages are checked against {st.pcc_voltage_limits} planning levels; PCC currents stay "
                   "checked against IEEE 519 (the emission limits a utility allocates under IEC 61000-3-6 are "
                   "not modelled)")
    return out

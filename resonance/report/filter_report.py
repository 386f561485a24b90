"""The report's tables of a proposed tuned filter and of capacitor constructions above 1 kV.

Edge layer: reads the ``filter`` and ``detuning.recommended.construction`` entries of ``results.json``
(:mod:`resonance.design.filter_search`, :mod:`resonance.design.mv_rating`) and lays them out; nothing
is recomputed here.
"""

from __future__ import annotations

from resonance.assessment.envelope import scenario_words
from resonance.report.tables import Column, Table, _f, _num, _s, _safe, chosen_filter

__all__ = ["filter_tables", "construction_table", "draw_filter_scan"]


def _row(label: str, unit: str, values, fmt=_s) -> tuple:
    return (label, unit, *[fmt(v) if v is not None else "-" for v in values])


def _fmt(nd: int):
    def f(v):
        x = _num(v)
        return "-" if x is None else f"{x:.{nd}f}"
    return f


def _orders_text(d) -> str:
    if not d:
        return "-"
    return ", ".join(f"{k}: {float(v):.0f}" for k, v in d.items() if float(v) >= 0.5) or "-"


def filter_tables(bank: dict) -> list[Table]:
    """The proposed filter of one bank: its branches (one column each) and the PCC with it in.

    Parameters
    ----------
    bank : dict
        The bank's entry of ``results.json`` (with ``filter``).

    Returns
    -------
    list of Table
        ``table_filter_<bank>.csv`` (quantities by branch) and ``table_filter_pcc_<bank>.csv`` (one row
        per scenario); empty when no filter is proposed.
    """
    flt = bank.get("filter")
    if not flt:
        return []
    name = bank["name"]
    brs = flt["branches"]

    def col(key, sub=None):
        return [(b.get(key) or {}).get(sub) if sub else b.get(key) for b in brs]

    absorbed = [_orders_text(b.get("absorbed_a")) for b in brs]
    par = [", ".join(f"{x:.2f}" for x in ((b.get("parallel_resonance_below") or {}).get("nominal") or [])) or "-"
           for b in brs]
    rows = [
        _row("absorbs the harmonic", "-", col("target_order")),
        _row("tuning order n", "-", col("tuning_order"), _fmt(2)),
        _row("tuning band (tolerances)", "-", [f"{b['tuning_band'][0]:.2f}-{b['tuning_band'][1]:.2f}" for b in brs]),
        _row("tuning frequency", "Hz", col("f_tuning_hz"), _fmt(0)),
        _row("net output at the bus", "kvar", col("kvar"), _fmt(0)),
        _row("capacitor nameplate", "kvar", col("kvar_nameplate"), _fmt(1)),
        _row("capacitor rated voltage", "kV", col("capacitor_rated_kv"), _fmt(4)),
        _row("capacitor fundamental voltage", "kV", col("capacitor_v1_kv"), _fmt(4)),
        _row("capacitance per phase (wye)", "uF", col("capacitor_uf"), _fmt(1)),
        _row("reactor inductance", "mH", col("reactor_mh"), _fmt(4)),
        _row("reactor resistance (Q at tuning)", "mohm", [None if b.get("reactor_r_ohm") is None else
                                                         1000.0 * b["reactor_r_ohm"] for b in brs], _fmt(2)),
        _row("fundamental current", "A", col("i_fundamental_a"), _fmt(0)),
        _row("highest rms current", "A", col("reactor_i_rms_a"), _fmt(0)),
        _row("highest peak current", "A", col("reactor_i_peak_a"), _fmt(0)),
        _row("harmonic current absorbed", "A", absorbed),
        _row("  of it from the background alone", "A", [_orders_text(b.get("absorbed_background_a")) for b in brs]),
        _row("  of it from the site's sources alone", "A", [_orders_text(b.get("absorbed_site_a")) for b in brs]),
        _row("reactor losses (highest)", "kW", col("losses_kw"), _fmt(2)),
        _row("capacitor rms voltage", "% of rated", col("duty_pct", "cap_v_rms_pct"), _fmt(1)),
        _row("capacitor peak voltage", "% of rated", col("duty_pct", "cap_v_peak_pct"), _fmt(1)),
        _row("capacitor rms current", "% of rated", col("duty_pct", "cap_i_rms_pct"), _fmt(1)),
        _row("capacitor kvar", "% of rated", col("duty_pct", "cap_kvar_pct"), _fmt(1)),
        _row("parallel resonance below (nominal)", "-", par),
        _row("in service only with", "-", [", ".join(b.get("runs_with") or []) or "-" for b in brs]),
    ]
    t1 = Table(f"table_filter_{_safe(name)}.csv", f"Proposed tuned filter in place of bank {name}: the branches",
               (Column("quantity", "", _s, "left"), Column("unit", "", _s, "left"),
                *[Column(b["name"], "") for b in brs]), tuple(rows),
               "Duty: the highest over every scenario of each branch's own sweep (with the branches it runs with); "
               "absorbed current: per harmonic order in the branch's own sweep, with the branches it runs with in (nominal supply), "
               "and from the supply's background distortion and the site's sources each alone (phasors: the parts need "
               "not add up); peak current: "
               "arithmetic sum of the per-order peaks (IEEE Std 18 convention).")
    prow, bad = [], set()
    for i, (scen, d) in enumerate((flt.get("pcc") or {}).items()):
        prow.append((scenario_words(scen), d.get("tdd_bank_off_pct"), d.get("tdd_pct"), d.get("tdd_limit_pct"),
                     d.get("i_over_limit_max"), d.get("i_over_limit_order"), d.get("thd_v_pcc_pct")))
        if (_num(d.get("i_over_limit_max")) or 0.0) > 1.0:
            bad.add((i, 4))
    t2 = Table(f"table_filter_pcc_{_safe(name)}.csv", f"Proposed tuned filter of bank {name}: the PCC with it in service",
               (Column("scenario", "", _s, "left"), Column("TDD, bank off", "% of I_L", _f(2)),
                Column("TDD, filter in", "% of I_L", _f(2)), Column("TDD limit", "% of I_L", _f(1)),
                Column("largest harmonic current / its limit", "-", _f(2)), Column("at order", "-", _s),
                Column("voltage THD at PCC", "%", _f(2))), tuple(prow),
               "IEEE Std 519-2014 Table 2 current limits; every branch in service.", frozenset(bad))
    return [t1, t2]


def construction_table(bank: dict) -> Table | None:
    """Construction of standard units of the recommended design above 1 kV (filter branches, else the
    detuned stages), one row per branch or stage; None where there is none."""
    flt = chosen_filter(bank)
    if flt:
        items = [(b["name"], b.get("construction")) for b in flt["branches"]]
    else:
        rec = (bank.get("detuning") or {}).get("recommended") or {}
        cons = rec.get("construction") or {}
        items = [(f"stage {s.get('stage', i + 1)}", s) for i, s in enumerate(cons.get("stages") or [])]
    items = [(n, c) for n, c in items if c]
    if not items:
        return None
    rows, bad = [], set()
    for i, (label, c) in enumerate(items):
        u = c.get("unbalance") or {}
        rows.append((label, str(c.get("connection", "")).replace("_", " "), c.get("series_groups"),
                     c.get("parallel_units"), c.get("unit_kv"), c.get("unit_kvar"), c.get("units_total"),
                     c.get("bank_rated_kv"), c.get("overrating"), u.get("v_unit_rated_pu"), u.get("neutral_shift_pu")))
        if u.get("exceeds_limit"):
            bad.add((i, 9))
    return Table(f"table_construction_{_safe(bank['name'])}.csv",
                 f"Recommended design of bank {bank['name']}: construction from standard units",
                 (Column("branch / stage", "", _s, "left"), Column("connection", "", _s, "left"),
                  Column("series groups", "-", _s), Column("units per group", "-", _s), Column("unit", "kV", _s),
                  Column("unit", "kvar", _s), Column("units", "-", _s), Column("bank rated", "kV", _f(3)),
                  Column("overrating", "-", _f(3)), Column("one unit lost: others", "pu of rated", _f(3)),
                  Column("neutral shift", "pu", _f(3))), tuple(rows),
                 "Unit lists from memory (docs/construction.md); one externally fused unit lost in a group "
                 "(IEEE Std C37.99 practice): red where the remaining units exceed 110 % of rated (IEEE Std 18).",
                 frozenset(bad))


def draw_filter_scan(ax, recheck_study, plain, names, title: str, scenario: str = "nominal") -> None:
    """Driving-point impedance at the filter's bus: no filter, then the branches switched in one by one.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    recheck_study : StudyResult
        The re-check of the case with the filter in the bank's place.
    plain : BankScan or None
        The bank as specified, same scenario (its row 0 is the bus with no bank; its last row every step in).
    names : sequence of str
        Branch names, lowest order first [unitless].
    title : str
        Axes title [unitless].
    scenario : str
        Scenario shown [unitless].
    """
    from resonance.report import figures as rf  # noqa: PLC0415
    from resonance.report.plots import STYLE, _style_axes, mark_orders  # noqa: PLC0415

    _style_axes(ax)
    first = recheck_study.scans_for(names[0], scenario)
    if first is None:
        return
    h = first.h
    ax.semilogy(h, first.z_ohm[0], color=STYLE["off"], lw=1.0, ls=(0, (2, 2)), label="no bank, no filter")
    if plain is not None and plain.z_ohm.shape[1] == h.size:
        ax.semilogy(h, plain.z_ohm[-1], color=STYLE["injected"], lw=1.0, ls="--",
                    label=f"bank as specified, all {len(plain.steps)} steps in")
    shades = ("#1d2b3a", "#3b6e8f", "#6fa3b8", "#9cc3cf")
    for k, name in enumerate(names):
        sc = recheck_study.scans_for(name, scenario)
        if sc is None:
            continue
        n = sc.bank.p ** -0.5
        ax.semilogy(h, sc.z_ohm[-1], color=shades[k % len(shades)], lw=1.6 - 0.2 * k,
                    label=f"{' + '.join(names[:k + 1])} in (branch tuned at {n:.2f})")
    mark_orders(ax, recheck_study, float(h[-1]), recheck_study.case.study.margin_pct)
    ax.set_xlim(1.0, float(h[-1]))
    ax.set_xlabel("harmonic order h [-]", color=STYLE["ink"])
    ax.set_ylabel(f"|Z| at bus {first.bank.bus} [ohm]", color=STYLE["ink"])
    ax.set_title(title, color=STYLE["ink"], loc="left", fontsize=9)
    ax.legend(frameon=True, facecolor="white", edgecolor=STYLE["grid"], fontsize=7, loc="upper right")
    rf.plain_numbers(ax)

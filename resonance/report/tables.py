"""Tables of the submittal report and the defensive readers of the results dictionary behind them.

Edge layer, no matplotlib.  :func:`report_tables` turns the study result and the
results dictionary of :func:`resonance.report.results_json.to_dict` into :class:`Table` objects:
raw rows for the CSV files, formatted cells for the PDF.  Keys of later study stages
(penetration, capacitor duty, detuning) are read defensively (see the module notes of
:mod:`resonance.report.document`); the underscore helpers here are shared by the other
``report_*`` modules.
"""

from __future__ import annotations

import csv
import io
import math
import textwrap
from dataclasses import dataclass, field
from typing import Any, Callable

from resonance.names import file_stem
from resonance.outputs import csv_text_cell
from resonance.assessment.envelope import scenario_words
from resonance.assessment.study import StudyResult

__all__ = ["Table", "Column", "report_tables", "DUTY_KEYS", "DUTY_LABEL"]


# ---------------------------------------------------------------------------------------------
# defensive readers of the results dictionary

def _get(d: Any, *keys: str):
    """First present, non-None value among ``keys`` of mapping ``d`` (dotted keys go one level down)."""
    if not isinstance(d, dict):
        return None
    for k in keys:
        if "." in k:
            a, b = k.split(".", 1)
            v = d.get(a)
            v = v.get(b) if isinstance(v, dict) else None
        else:
            v = d.get(k)
        if v is not None:
            return v
    return None


def _thd_bus(step: dict):
    return _num(step.get("thd_v_pct"))


def _thd_pcc(step: dict):
    return _num(step.get("thd_v_pcc_pct"))


#: duty quantity -> per-step key [% of rating]
DUTY_KEYS = {"v_rms": "cap_v_rms_pct", "v_peak": "cap_v_peak_pct", "i_rms": "cap_i_rms_pct", "kvar": "cap_kvar_pct"}
DUTY_LABEL = {"v_rms": "V rms", "v_peak": "V peak", "i_rms": "I rms", "kvar": "Q"}


def _num(x):
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


#: per-order quantity -> its key in a step's ``harmonics`` entry (results.json, docs/results.md)
_ORDER_KEYS = {
    "bus": "v_bank_pct",         # voltage at the bank bus [% of nominal]
    "pcc": "v_pcc_pct",          # voltage at the PCC [% of nominal]
    "cap": "v_cap_pct",          # voltage across the capacitor [% of rated]
    "i_pcc": "i_supply_pct_of_il",  # current into the supply [% of I_L]
    "i_lim": "i_limit_pct_of_il",   # IEEE 519 current limit [% of I_L]
}


def _spectrum(step: dict, where: str) -> dict[int, float]:
    """Per-order value of one step (see :data:`_ORDER_KEYS` for ``where``); {} when absent."""
    out = {}
    for r in step.get("harmonics") or []:
        h, v = _num(r.get("h")), _num(r.get(_ORDER_KEYS[where]))
        if h is not None and v is not None and h > 1.5:
            out[int(round(h))] = v
    return out


def _detuning(bank: dict) -> tuple[dict | None, list[dict]]:
    d = bank.get("detuning") if isinstance(bank, dict) else None
    if not isinstance(d, dict):
        return None, []
    rec = d.get("recommended") if isinstance(d.get("recommended"), dict) else None
    cands = [c for c in (d.get("candidates") or []) if isinstance(c, dict)]
    return rec, cands


def _pcc_kv(res: StudyResult, data: dict) -> float | None:
    """Nominal voltage of the PCC bus [kV] (the study's supply figures)."""
    return float(res.supply.pcc_kv) if res.supply is not None else None


def _duty_limit_set(data: dict):
    """The published duty-limit set the case named (its citation and notes for the methods text;
    the name is validated with the case, so the lookup cannot fail)."""
    from resonance.standards.duty import duty_limits  # noqa: PLC0415

    return duty_limits(data["settings"]["duty_limits"])


@dataclass(frozen=True)
class _Limits:
    """Limits a bank's steps are compared with, as the results give them (nothing looked up)."""

    duty: dict            # quantity -> [% of rating]
    duty_name: str
    pcc_ind: float | None  # [% of nominal]
    pcc_thd: float | None  # [% of nominal]
    pcc_src: str
    tdd: float | None      # [% of I_L]
    i_src: str


def _limits(res: StudyResult, data: dict, bank: dict, scen: str = "nominal") -> _Limits:
    """Limits of a bank in one supply scenario.

    The current limits depend on I_sc/I_L and so on the supply: for the weak
    supply they are taken only from ``weak_supply.limits`` (none shown otherwise).
    """
    lim = bank.get("limits") if isinstance(bank.get("limits"), dict) else {}
    if scen != "nominal":
        wl = ((bank.get("scenarios") or {}).get(scen) or bank.get("weak_supply") or {}).get("limits")
        lim = {**{k: v for k, v in lim.items() if k != "pcc_i_limits"}, **(wl if isinstance(wl, dict) else {})}
    # the limits are the assessment's, as the results give them; none are looked up here
    dl = lim.get("duty_limits") if isinstance(lim.get("duty_limits"), dict) else {}
    duty = {q: _num(dl.get(f"{q}_pct")) for q in DUTY_KEYS}
    duty = {q: v for q, v in duty.items() if v is not None}
    name = str(dl.get("name") or data["settings"].get("duty_limits"))
    pv = lim.get("pcc_v_limits") if isinstance(lim.get("pcc_v_limits"), dict) else {}
    ind, thd, src = _num(pv.get("individual_pct")), _num(pv.get("thd_pct")), str(pv.get("source") or "")
    pi = lim.get("pcc_i_limits") if isinstance(lim.get("pcc_i_limits"), dict) else {}
    return _Limits(duty, name, ind, thd, src, _num(pi.get("tdd_pct")), str(pi.get("source") or ""))


def _has_penetration(bank: dict) -> bool:
    return any(_thd_bus(s) is not None or _thd_pcc(s) is not None for s in bank["steps"])


def _has_duty(bank: dict) -> bool:
    return any(_num(s.get(k)) is not None for s in bank["steps"] for k in DUTY_KEYS.values())


def _safe(name: str) -> str:
    return file_stem(name)


# ---------------------------------------------------------------------------------------------
# tables

def _f(nd: int) -> Callable[[Any], str]:
    def fmt(v):
        x = _num(v)
        return "-" if x is None else f"{x:.{nd}f}"
    return fmt


def _s(v) -> str:
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        return f"{v:g}"
    if isinstance(v, (list, tuple)):
        return ", ".join(_s(x) for x in v)
    return str(v)


@dataclass(frozen=True)
class Column:
    """One table column: label, unit, formatter of the raw value and alignment."""

    label: str
    unit: str = ""
    fmt: Callable[[Any], str] = _s
    align: str = "right"
    wrap: int = 0  # wrap the cell text at this many characters (0: never)


@dataclass(frozen=True)
class Table:
    """A report table: raw rows for the CSV, formatted cells for the PDF.

    ``bad`` holds (row, column) cells drawn in red (a value beyond its limit).
    """

    name: str
    title: str
    columns: tuple
    rows: tuple
    note: str = ""
    bad: frozenset = field(default_factory=frozenset)

    def csv(self) -> str:
        """CSV text: header ``label [unit]``, raw values (empty for None)."""
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([csv_text_cell(c.label.replace("\n", " ") + (f" [{c.unit}]" if c.unit else ""))
                    for c in self.columns])
        for r in self.rows:
            w.writerow(["" if v is None else csv_text_cell(_s(v) if isinstance(v, (list, tuple, bool)) else v)
                        for v in r])
        return buf.getvalue()

    def cells(self) -> list[list[str]]:
        """Formatted cell text."""
        out = []
        for r in self.rows:
            row = []
            for c, v in zip(self.columns, r):
                t = c.fmt(v)
                if c.wrap and len(t) > c.wrap:
                    t = "\n".join(textwrap.wrap(t, c.wrap))
                row.append(t)
            out.append(row)
        return out


def chosen_filter(bank: dict) -> dict | None:
    """The bank's tuned filter where it is the recommended design (``filter.chosen``), else None."""
    f = bank.get("filter")
    return f if f and f.get("chosen") else None


def offered_filter(bank: dict) -> dict | None:
    """The bank's tuned filter where it is offered beside the recommended detuned design, else None."""
    f = bank.get("filter")
    return f if f and not f.get("chosen") else None


#: short code of each check in the step tables' result column
_CODE = {"resonance": "res", "duty_v_rms": "duty", "duty_v_peak": "duty", "duty_i_rms": "duty", "duty_kvar": "duty",
         "pcc_thd_v": "V", "pcc_v_individual": "V", "pcc_tdd": "I", "pcc_i_individual": "I",
         "detuning_tuning": "tune", "filter_tuning": "tune", "bus_thd_v": "B", "bus_v_individual": "B", "inrush_peak": "sw",
         "inrush_frequency": "sw", "inrush_capacitor": "sw", "voltage_step": "sw", "energising_overvoltage": "sw"}


def _codes(findings, step) -> list[str]:
    out = []
    for f in findings:
        c = _CODE.get(str(f.get("check")), str(f.get("check")))
        if f.get("step") == step and c not in out:
            out.append(c)
    return out


def _lim_head(label: str, v) -> str:
    return label + (f"\nlim {v:g}" if v is not None else "")


def _step_rows(steps: list[dict], lim: _Limits, findings=()):
    """Rows of a step table; the result word of each step comes from its findings alone (the
    one judge: ``cause`` says whose each is), never from the figures."""
    cols = [Column("step", "-", _s), Column("kvar\nnameplate", "kvar", _f(0)), Column("kvar\ndelivered", "kvar", _f(1)),
            Column("h_est", "-", _f(2)), Column("h_scan", "-", _f(2)), Column("nearest\norder", "-", _s),
            Column("margin", "%", _f(1)), Column("THD\nbank bus", "%", _f(2)),
            Column(_lim_head("THD\nPCC", lim.pcc_thd), "%", _f(2)), Column(_lim_head("TDD\nPCC", lim.tdd), "%", _f(1))]
    for q in DUTY_KEYS:
        cols.append(Column(_lim_head(DUTY_LABEL[q], lim.duty.get(q)), "%", _f(1)))
    cols.append(Column("result", "", _s, "left"))
    rows, bad = [], set()
    kind_abbr = {"injected": "inj", "background": "bg", "characteristic": "char"}
    for i, s in enumerate(steps):
        near = s.get("nearest_order")
        near_t = "-" if near is None else f"{near} {kind_abbr.get(s.get('nearest_kind'), '')}".strip()
        tdd = _num(s.get("tdd_pct"))
        row = [s.get("step"), s.get("kvar_nameplate"), s.get("kvar_delivered"), s.get("h_estimate"),
               s.get("h_scan"), near_t, s.get("margin_pct"), _thd_bus(s), _thd_pcc(s), tdd]
        if s.get("resonance_ok") is False:
            bad |= {(i, 4), (i, 6)}
        if lim.pcc_thd is not None and _thd_pcc(s) is not None and _thd_pcc(s) > lim.pcc_thd:
            bad.add((i, 8))
        if lim.tdd is not None and tdd is not None and tdd > lim.tdd:
            bad.add((i, 9))
        for j, (q, k) in enumerate(DUTY_KEYS.items()):
            v = _num(s.get(k))
            row.append(v)
            if v is not None and q in lim.duty and v > lim.duty[q]:
                bad.add((i, 10 + j))
        own = _codes([x for x in findings if x.get("cause", "bank") == "bank"], s.get("step"))
        site = _codes([x for x in findings if x.get("cause") == "site"], s.get("step"))
        if own:
            row.append("FAIL " + ",".join(own))
            bad.add((i, len(cols) - 1))
        else:
            row.append("pass (site " + ",".join(site) + ")" if site else "pass")
        rows.append(row)
    return tuple(cols), tuple(tuple(r) for r in rows), frozenset(bad)


#: display name of each duty limit set (the case's ``study.duty_limits`` value)
LIMIT_SET_WORDS = {"ieee18-2002": "IEEE Std 18-2002", "ieee18-2012": "IEEE Std 18-2012",
                   "ieee18-1992": "IEEE Std 18-1992", "iec60831-1": "IEC 60831-1", "iec60871-1": "IEC 60871-1"}


def limit_set_words(name: str) -> str:
    """``ieee18-2002`` -> ``IEEE Std 18-2002`` (unknown names as given) [unitless]."""
    return LIMIT_SET_WORDS.get(str(name), str(name))


def _summary_table(bank: dict, steps: list[dict], scen: str, lim: _Limits, findings=(), note: bool = True) -> Table:
    """Per-step table of one bank in one scenario; ``note``: the key to the columns below it
    (the first table of a bank carries it, the others refer to it)."""
    mine = [f for f in findings if f.get("bank") == bank["name"] and f.get("scenario") in (scen, "all")]
    cols, rows, bad = _step_rows(steps, lim, mine)
    suffix = "" if scen == "nominal" else f"_{scen}"
    return Table(f"table_summary_{_safe(bank['name'])}{suffix}.csv",
                 f"Bank {bank['name']}: every step, {scenario_words(scen)}", cols, rows,
                 "Columns and codes as in the first step table of this bank." if not note else "margin: signed distance of h_scan from the nearest order of concern (inj injected, bg background, "
                 "char characteristic). THD in % of nominal voltage, TDD in % of I_L, duty in % of the capacitor "
                 f"rating ({limit_set_words(lim.duty_name)}); '-' = not evaluated. FAIL codes (from the findings): res resonance, duty "
                 "capacitor duty, V PCC voltage distortion, I PCC current distortion, tune detuned tuning, sw switching (inrush, voltage step), B in-plant "
                 "level at the bank bus; 'pass (site ...)': beyond a limit already with the bank off and not made "
                 "worse by it (the site's own emission).", bad)


def _input_tables(res: StudyResult, data: dict) -> list[Table]:
    c = res.case
    t = []
    sup = c.supply
    if sup is not None:
        bg = ", ".join(f"{h}: {v:g}" for h, v in sorted(sup.background_pct.items())) or "none"
        t.append(Table("table_input_supply.csv", "Supply (utility at the point of common coupling)",
                       (Column("bus", "", _s, "left"), Column("voltage", "kV"), Column("S_sc", "MVA"),
                        Column("X/R", "-"), Column("S_sc weak", "MVA"), Column("X/R weak", "-"),
                        Column("background V_h\norder: %", "% of nominal", _s, "left", 34)),
                       ((sup.bus, sup.kv, sup.sc_mva, sup.x_r, sup.sc_mva_min, sup.x_r_min, bg),)))
    t.append(Table("table_input_transformers.csv", "Transformers",
                   (Column("name", "", _s, "left"), Column("HV bus", "", _s, "left"), Column("LV bus", "", _s, "left"),
                    Column("rating", "kVA"), Column("HV", "kV"), Column("LV", "kV"), Column("Z", "%"),
                    Column("X/R", "-")),
                   tuple((x.name, x.hv_bus, x.lv_bus, x.kva, x.hv_kv, x.lv_kv, x.z_pct, x.x_r) for x in c.transformer)))
    t.append(Table("table_input_cables.csv", "Cables and lines",
                   (Column("name", "", _s, "left"), Column("from bus", "", _s, "left"),
                    Column("to bus", "", _s, "left"),
                    Column("length", "m"), Column("R", "ohm/km"), Column("X", "ohm/km"), Column("C", "nF/km"),
                    Column("in\nparallel", "-")),
                   tuple((x.name, x.from_bus, x.to_bus, x.length_m, x.r_ohm_per_km, x.x_ohm_per_km, x.c_nf_per_km,
                          x.parallel) for x in c.cable)))
    t.append(Table("table_input_loads.csv", "Linear loads",
                   (Column("name", "", _s, "left", 30), Column("bus", "", _s, "left"), Column("P", "kW"),
                    Column("power factor", "-"), Column("Q (from P, pf)", "kvar", _f(1))),
                   tuple((x.name, x.bus, x.kw, x.pf, x.kw * math.tan(math.acos(x.pf))) for x in c.load)))
    spec = {name: sp for name, sp, _p in res.sources}
    pulses = {name: p for name, _sp, p in res.sources}
    rows = []
    for x in c.harmonic_source:
        kind = x.spectrum if isinstance(x.spectrum, str) else "table in case"
        sp = spec.get(x.name) or (x.spectrum if isinstance(x.spectrum, dict) else {})
        rows.append((x.name, x.bus, x.kva, kind, pulses.get(x.name),
                     ", ".join(f"{h}: {v:g}" for h, v in sorted(sp.items()))))
    t.append(Table("table_input_harmonic_sources.csv", "Harmonic sources",
                   (Column("name", "", _s, "left", 22), Column("bus", "", _s, "left"), Column("rating", "kVA"),
                    Column("spectrum", "", _s, "left", 22), Column("pulses", "-"),
                    Column("I_h, order: %", "% of fundamental", _s, "left", 40)), tuple(rows)))
    t.append(Table("table_input_banks.csv", "Capacitor banks",
                   (Column("name", "", _s, "left"), Column("bus", "", _s, "left"), Column("rated", "kV"),
                    Column("stages", "kvar", _s, "left", 30), Column("total", "kvar"),
                    Column("detuning p", "%"), Column("reactor X/R", "-")),
                   tuple((b.name, b.bus, b.rated_kv, list(b.steps_kvar), sum(b.steps_kvar), b.detuning_pct,
                          b.reactor_q if b.detuning_pct else None) for b in c.bank)))
    return t


_REC_WORDS = {"tuning_order": "tuning order n [-]", "detuning_pct": "detuning p = X_L/X_C [%]",
              "rated_kv": "capacitor rated voltage [kV]", "steps_kvar": "stages at rated voltage [kvar]",
              "tuning_band": "tuning order band at the tolerance limits [-]",
              "lowest_significant_order": "lowest significant harmonic [-]",
              "order_margin_pct": "required margin below it [%]",
              "reactor_q": "reactor quality factor X/R at the fundamental [-]",
              "f_tuning_hz": "series tuning frequency [Hz]",
              "l_mh_per_stage": "reactor inductance per stage [mH]",
              "reactor_i_rms_max_a": "highest reactor rms current per stage [A]",
              "reactor_i_lin_a": "reactor linearity current per stage [A]",
              "cap_overrating": "capacitor rated / fundamental voltage [-]",
              "duty_margin_min_pct": "lowest capacitor duty margin [%]",
              "cap_v_rms_max_kv": "highest capacitor rms voltage [kV]",
              "cap_v_peak_max_kv": "highest capacitor crest voltage [kV]",
              "reactor_i_rms_over_i1_max": "highest reactor rms / fundamental current [-]"}


def _band(v) -> str:
    """A tuning band as the terminal and the chart write it: ``lo-hi`` to two decimals."""
    try:
        return f"{float(v[0]):.2f}-{float(v[1]):.2f}"
    except (TypeError, ValueError, IndexError):
        return _fmt_any(v)


def _detuning_tables(bank: dict) -> list[Table]:
    rec, cands = _detuning(bank)
    out = []
    if rec:
        out.append(Table(f"table_detuning_recommended_{_safe(bank['name'])}.csv",
                         f"Bank {bank['name']}: recommended detuned bank",
                         (Column("quantity", "", _s, "left"), Column("value", "", _s, "left", 60)),
                         tuple((_REC_WORDS.get(k, k.replace("_", " ")),
                                _band(v) if k == "tuning_band" else _fmt_any(v)) for k, v in rec.items()
                               if not isinstance(v, dict) and k in _REC_WORDS)))
    if cands:
        def stages(v):
            if isinstance(v, list) and v:
                return f"{len(v)} x {v[0]:g}" if len(set(v)) == 1 else ", ".join(f"{x:g}" for x in v)
            return _fmt_any(v)

        def yes_no(v):
            return "yes" if v else "no"

        cols = (Column("n", "", _fmt_any, "right"), Column("p", "%", _fmt_any, "right"),
                Column("f tuning", "Hz", _fmt_any, "right"), Column("capacitor", "kV", _fmt_any, "right"),
                Column("stages", "kvar", stages, "right", 16), Column("qualifies", "", yes_no, "left"),
                Column("why", "", _s, "left", 70))
        keys = ("tuning_order", "detuning_pct", "f_tuning_hz", "rated_kv", "steps_kvar", "qualified", "why")
        out.append(Table(f"table_detuning_candidates_{_safe(bank['name'])}.csv",
                         f"Bank {bank['name']}: detuning candidates", cols,
                         tuple(tuple(c.get(k) for k in keys) for c in cands)))
    return out


def _fmt_any(v) -> str:
    if isinstance(v, float):
        return f"{v:.4g}"
    if isinstance(v, (list, tuple)):
        vals = [_fmt_any(x) for x in v]
        if len(set(vals)) == 1 and len(vals) > 2:
            return f"{len(vals)} x {vals[0]}"
        return ", ".join(vals)
    return _s(v)


def _spectrum_tables(bank: dict, lim: _Limits, scen: str = "nominal") -> list[Table]:
    """Per-order tables of a bank: one CSV in long form; PDF tables order x step per location."""
    steps = bank["steps"] if scen == "nominal" else (bank.get("weak_supply") or {}).get("steps", [])
    rows_long = [(s.get("step"), r) for s in steps for r in (s.get("harmonics") or [])]
    out = []
    safe = _safe(bank["name"]) + ("" if scen == "nominal" else "_weak")
    if rows_long:
        keys = []
        for _k, r in rows_long:
            keys += [k for k in r if k not in keys and k != "h" and not isinstance(r[k], (dict, list))]
        cols = (Column("step", "-"), Column("h", "-")) + tuple(Column(k, "", _s) for k in keys)
        out.append(Table(f"table_harmonics_{safe}.csv", f"Bank {bank['name']}: per-order results, {scen} supply",
                         cols, tuple((k, r.get("h"), *[r.get(x) for x in keys]) for k, r in rows_long)))
    for where, what, unit in (("bus", f"harmonic voltage at bus {bank['bus']}", "% of nominal"),
                              ("pcc", "harmonic voltage at the PCC", "% of nominal"),
                              ("i_pcc", "harmonic current into the supply at the PCC", "% of I_L")):
        per = [_spectrum(s, where) for s in steps]
        orders = sorted({h for d in per for h in d})
        if not orders:
            continue
        cols = [Column("order h", "-", _s)] + [Column(f"step {s['step']}", unit.split()[0], _f(2)) for s in steps]
        lims = None
        if where == "pcc" and lim.pcc_ind is not None:
            lims = {h: lim.pcc_ind for h in orders}
        elif where == "i_pcc":
            lims = {}
            for s in steps:
                for h, v in _spectrum(s, "i_lim").items():
                    lims.setdefault(h, v)
        if lims:
            cols.append(Column("limit", unit.split()[0], _f(2)))
        rows, bad = [], set()
        for i, h in enumerate(orders):
            row = [h] + [d.get(h) for d in per]
            if lims:
                row.append(lims.get(h))
                for j, d in enumerate(per):
                    if d.get(h) is not None and lims.get(h) is not None and d[h] > lims[h]:
                        bad.add((i, 1 + j))
            rows.append(tuple(row))
        out.append(Table(f"table_spectrum_{where}_{safe}.csv", f"Bank {bank['name']}: {what}, {scen} supply "
                         f"[{unit}]", tuple(cols), tuple(rows), bad=frozenset(bad)))
    return out


_SITE_QTY = {"pcc_thd_v": "voltage THD", "pcc_v_individual": "voltage, order {h}", "pcc_tdd": "current TDD",
             "pcc_i_individual": "current, order {h}"}
_SITE_EFFECT = {"lowers": "lowers it", "raises": "raises it (bank finding)", "no_worse": "no worse"}


def _site_table(bank: dict) -> Table | None:
    """The site's own distortion at the PCC: bank off against the bank's steps in (results.json
    ``site_distortion``), or None when the site is within every limit with the bank off."""
    rows = tuple((scenario_words(str(e.get("scenario"))), _SITE_QTY.get(e.get("check"), str(e.get("check"))).format(h=e.get("order")),
                  e.get("unit"), e.get("limit"), e.get("bank_off"), e.get("with_steps_min"), e.get("with_steps_max"),
                  _SITE_EFFECT.get(e.get("effect"), e.get("effect")))
                 for e in bank.get("site_distortion") or [])
    if not rows:
        return None
    cols = (Column("scenario", "", _s, "left"), Column("quantity at the PCC", "", _s, "left"),
            Column("unit", "", _s, "left"), Column("limit", "", _f(1)), Column("bank off", "", _f(2)),
            Column("steps in, min", "", _f(2)), Column("steps in, max", "", _f(2)),
            Column("the bank", "", _s, "left"))
    return Table(f"table_site_{_safe(bank['name'])}.csv",
                 f"Bank {bank['name']}: the site's own distortion, bank off against its steps in", cols, rows,
                 "Quantities already beyond their IEEE 519 limit with the bank out of service. A step that does not "
                 "make one worse leaves a finding of the site's ('pass (site ...)' in the step tables); one that "
                 "does is a finding of the bank's.")


def scenario_bodies(bank: dict):
    """(scenario, body) of a bank entry: the nominal one (the bank entry itself), then the others."""
    yield "nominal", bank
    for scen, body in (bank.get("scenarios") or {}).items():
        if body.get("steps"):
            yield scen, body


def overview_table(res: StudyResult, data: dict, bank: dict, name: str, title: str) -> Table:
    """One row per scenario of a bank: supply, closest resonance, highest distortion and duty,
    and the number of the bank's findings there (the per-step tables are in an appendix)."""
    rows, bad = [], set()
    findings = [f for f in data.get("findings", ()) if f.get("bank") == bank["name"] and f.get("cause", "bank") == "bank"]
    for i, (scen, body) in enumerate(scenario_bodies(bank)):
        steps = body["steps"]
        lim = _limits(res, data, bank, scen)
        with_m = [x for x in steps if _num(x.get("margin_pct")) is not None]
        close = min(with_m, key=lambda x: abs(x["margin_pct"])) if with_m else None

        def top(vals):
            v = [x for x in vals if x is not None]
            return max(v) if v else None

        thd = top([_thd_pcc(x) for x in steps])
        tdd = top([_num(x.get("tdd_pct")) for x in steps])
        duty = {q: top([_num(x.get(k)) for x in steps]) for q, k in DUTY_KEYS.items()}
        n_f = sum(1 for f in findings if f.get("scenario") in (scen, "all"))
        row = [scenario_words(scen), _num(body.get("sc_mva")),
               None if close is None else f"{close['margin_pct']:+.1f} % (step {close['step']}, h {close['h_scan']:.2f})",
               thd, tdd, *duty.values(), n_f]
        if close is not None and any(x.get("resonance_ok") is False for x in steps):
            bad.add((i, 2))
        if thd is not None and lim.pcc_thd is not None and thd > lim.pcc_thd:
            bad.add((i, 3))
        if tdd is not None and lim.tdd is not None and tdd > lim.tdd:
            bad.add((i, 4))
        for j, q in enumerate(DUTY_KEYS):
            if duty[q] is not None and q in lim.duty and duty[q] > lim.duty[q]:
                bad.add((i, 5 + j))
        if n_f:
            bad.add((i, 9))
        rows.append(tuple(row))
    lim0 = _limits(res, data, bank)
    cols = (Column("scenario", "", _s, "left"), Column("S_sc at bus", "MVA", _f(1)),
            Column("closest resonance\nto an order of concern", "", _s, "left"),
            Column(_lim_head("THD PCC\nhighest", lim0.pcc_thd), "%", _f(2)),
            Column("TDD PCC\nhighest", "%", _f(1)),
            *[Column(_lim_head(DUTY_LABEL[q] + "\nhighest", lim0.duty.get(q)), "%", _f(1)) for q in DUTY_KEYS],
            Column("findings\nof the bank", "-", _s))
    return Table(name, title, cols, tuple(rows),
                 "Highest value over the steps in each scenario (red: beyond the limit of that scenario; the TDD limit "
                 "depends on I_sc/I_L and so on the supply). Every step of every scenario: Appendix B.", frozenset(bad))


def report_tables(res: StudyResult, data: dict) -> list[Table]:
    """Every table of the report (summary, inputs, spectra, detuning).

    Parameters
    ----------
    res : StudyResult
        Study result.
    data : dict
        Results dictionary from :func:`resonance.report.results_json.to_dict`.

    Returns
    -------
    list of Table
        Tables in report order.
    """
    out = []
    for b in data["banks"]:
        lim = _limits(res, data, b)
        out.append(_summary_table(b, b["steps"], "nominal", lim, data.get("findings", ())))
        if b.get("scenarios"):
            out.append(overview_table(res, data, b, f"table_scenarios_{_safe(b['name'])}.csv",
                                      f"Bank {b['name']}: every scenario of the operating envelope"))
        if b.get("weak_supply"):
            out.append(_summary_table(b, b["weak_supply"]["steps"], "weak", _limits(res, data, b, "weak"),
                                      data.get("findings", ()), note=False))
        for scen, body in (b.get("scenarios") or {}).items():
            if scen != "weak" and body.get("steps"):
                out.append(_summary_table(b, body["steps"], scen, _limits(res, data, b, scen),
                                          data.get("findings", ()), note=False))
        site = _site_table(b)
        if site is not None:
            out.append(site)
    out += _input_tables(res, data)
    for b in data["banks"]:
        out += _spectrum_tables(b, _limits(res, data, b))
        out += _detuning_tables(b)
    return out

"""Submittal report: one PDF (matplotlib only) plus every figure and table as files.

Edge layer.  :func:`write_report` reads the study result and the results
dictionary of :func:`resonance.results.to_dict`; keys of later study stages
(penetration, capacitor duty, detuning) are read defensively, so their
sections fill in as those keys appear and say "not evaluated in this version"
until then.

Keys read, beyond those :func:`~resonance.results.to_dict` always writes
---------------------------------------------------------------------------
per step (``banks[].steps[]`` and ``banks[].weak_supply.steps[]``):
    ``thd_v_pct`` (bank bus) and ``thd_v_pcc_pct`` (or ``pcc_thd_v_pct``,
    ``pcc.thd_v_pct``) [% of nominal], ``tdd_pct`` [% of I_L],
    ``cap_v_rms_pct``, ``cap_v_peak_pct``, ``cap_i_rms_pct``, ``cap_kvar_pct``
    [% of rating], ``duty_ok``, ``pcc_voltage_ok``, ``pcc_current_ok`` [bool];
    per order ``harmonics[]``: ``h``, ``v_bank_pct`` (or ``v_bus_pct``),
    ``v_pcc_pct`` [% of nominal], ``i_supply_pct_of_il``, ``i_limit_pct_of_il``
    [% of I_L] (all further scalar keys go to the long CSV).
per bank (``banks[]``):
    ``limits.duty_limits`` {name, v_rms_pct, v_peak_pct, i_rms_pct, kvar_pct},
    ``limits.pcc_v_limits`` {individual_pct, thd_pct, source},
    ``limits.pcc_i_limits`` {tdd_pct, row, isc_over_il, i_l_a, i_l_basis, source}
    (looked up from the settings when absent; current limits of the weak supply
    only from ``weak_supply.limits``), ``bank_off.thd_v_pct``,
    ``detuning.recommended`` {tuning_order, detuning_pct, rated_kv, steps_kvar, ...},
    ``detuning.candidates[]`` (any scalar keys; shown as a table).
study extras (``res.extras``):
    a detuned candidate's :class:`~resonance.study.BankScan` (found by type
    anywhere one level deep, matched on the bank name) for the side-by-side scan.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import math
import textwrap
from dataclasses import dataclass, field
from typing import Any, Callable

import matplotlib

matplotlib.use("Agg")
import numpy as np  # noqa: E402
from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from . import __version__  # noqa: E402
from . import report_figures as rf  # noqa: E402
from .plots import STYLE  # noqa: E402
from .results import CAUTION  # noqa: E402
from .study import BankScan, StudyResult  # noqa: E402

__all__ = ["write_report", "Table", "Column", "report_tables", "NOT_EVALUATED", "SECTIONS"]

NOT_EVALUATED = "not evaluated in this version"
#: section headings in report order (tests look for them)
SECTIONS = ("Summary", "Input data", "Frequency scans", "Detuned bank compared with the plain bank",
            "Harmonic voltage distortion", "Capacitor duty", "Detuning recommendation",
            "Methods and assumptions", "References")

REFERENCES = (
    "IEEE Std 18-2002, IEEE Standard for Shunt Power Capacitors (continuous operating limits).",
    "IEEE Std 519-2014 / IEEE Std 519-2022, IEEE Standard for Harmonic Control in Electric Power Systems.",
    "IEEE Std 1036, IEEE Guide for the Application of Shunt Power Capacitors.",
    "IEC 60909-0:2016, Short-circuit currents in three-phase a.c. systems - Calculation of currents.",
    "IEC 60831-1, Shunt power capacitors of the self-healing type for a.c. systems up to 1000 V.",
    "IEC 61000-3-6, Assessment of emission limits for distorting installations (summation law).",
    "pandapower: L. Thurner et al., IEEE Trans. Power Systems 33(6), 2018 (load flow, IEC 60909).",
)

# ---------------------------------------------------------------------------------------------
# page geometry [in]: A4 portrait
PAGE_W, PAGE_H = 8.27, 11.69
M_LEFT, M_RIGHT, M_TOP, M_BOTTOM = 0.75, 0.65, 0.95, 0.85
TEXT_W = PAGE_W - M_LEFT - M_RIGHT
INK = STYLE["ink"]
FAIL_RED = STYLE["injected"]
HEAD_FILL = "#e8ecf0"
ZEBRA = "#f6f7f9"


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
    return _num(_get(step, "thd_v_pct", "thd_v_bus_pct"))


def _thd_pcc(step: dict):
    return _num(_get(step, "thd_v_pcc_pct", "pcc_thd_v_pct", "pcc.thd_v_pct"))


#: duty quantity -> per-step key [% of rating]
DUTY_KEYS = {"v_rms": "cap_v_rms_pct", "v_peak": "cap_v_peak_pct", "i_rms": "cap_i_rms_pct", "kvar": "cap_kvar_pct"}
DUTY_LABEL = {"v_rms": "V rms", "v_peak": "V peak", "i_rms": "I rms", "kvar": "Q"}


def _num(x):
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


#: per-order quantity -> keys accepted in a ``harmonics`` entry (first present wins)
_ORDER_KEYS = {
    "bus": ("v_bank_pct", "v_bus_pct", "v_pct", "v_h_pct"),   # voltage at the bank bus [% of nominal]
    "pcc": ("v_pcc_pct", "pcc_v_pct"),                        # voltage at the PCC [% of nominal]
    "cap": ("v_cap_pct",),                                    # voltage across the capacitor [% of rated]
    "i_pcc": ("i_supply_pct_of_il", "i_pcc_pct_of_il"),       # current into the supply [% of I_L]
    "i_lim": ("i_limit_pct_of_il",),                          # IEEE 519 current limit [% of I_L]
}
_DICT_KEYS = {"bus": ("v_h_pct", "v_bus_h_pct"), "pcc": ("v_pcc_h_pct", "pcc_v_h_pct")}


def _order_rows(step: dict) -> list[dict]:
    for lk in ("harmonics", "per_order"):
        rows = step.get(lk) if isinstance(step, dict) else None
        if isinstance(rows, list) and rows and isinstance(rows[0], dict):
            return rows
    return []


def _spectrum(step: dict, where: str) -> dict[int, float]:
    """Per-order value of one step (see :data:`_ORDER_KEYS` for ``where``); {} when absent."""
    out = {}
    for r in _order_rows(step):
        h, v = _num(r.get("h")), _num(_get(r, *_ORDER_KEYS[where]))
        if h is not None and v is not None and h > 1.5:
            out[int(round(h))] = v
    if out:
        return out
    m = _get(step, *_DICT_KEYS.get(where, ()))
    if isinstance(m, dict):
        for h, v in m.items():
            hh, vv = _num(h), _num(v)
            if hh is not None and vv is not None and hh > 1.5:
                out[int(round(hh))] = vv
    return out


def _detuning(bank: dict) -> tuple[dict | None, list[dict]]:
    d = bank.get("detuning") if isinstance(bank, dict) else None
    if not isinstance(d, dict):
        return None, []
    rec = d.get("recommended") if isinstance(d.get("recommended"), dict) else None
    cands = [c for c in (d.get("candidates") or []) if isinstance(c, dict)]
    return rec, cands


def _detuned_scan(res: StudyResult, name: str) -> BankScan | None:
    """A detuned candidate's nominal scan for bank ``name`` among the study extras, if any."""
    def hits(v):
        if isinstance(v, BankScan):
            yield v
        elif isinstance(v, dict):
            for w in v.values():
                if isinstance(w, BankScan):
                    yield w
        elif isinstance(v, (list, tuple)):
            for w in v:
                if isinstance(w, BankScan):
                    yield w

    for v in (res.extras or {}).values():
        for s in hits(v):
            if s.bank.name == name and s.bank.p > 0 and s.scenario == "nominal":
                return s
    return None


def _pcc_kv(res: StudyResult, data: dict) -> float | None:
    model = res.extras.get("model") if res.extras else None
    try:
        return float(model.arrays.bus_kv[model.model_bus[data["pcc_bus"]]])
    except Exception:  # noqa: BLE001 - no model: fall back on the case
        sup = res.case.supply
        return float(sup.kv) if sup is not None and sup.bus == data.get("pcc_bus") else None


def _duty_limit_set(data: dict):
    from .duty import duty_limits  # noqa: PLC0415
    try:
        return duty_limits(data["settings"]["duty_limits"])
    except Exception:  # noqa: BLE001 - an unknown set leaves the limit columns without a limit
        return None


def _v519(v_kv: float | None, data: dict):
    if v_kv is None:
        return None
    from .limits import ieee519_voltage_limits  # noqa: PLC0415
    try:
        return ieee519_voltage_limits(v_kv, str(data["settings"].get("ieee519_edition", "2014")))
    except Exception:  # noqa: BLE001 - unknown edition: no limit shown
        return None


@dataclass(frozen=True)
class _Limits:
    """Limits a bank's steps are compared with, as the results give them (or looked up)."""

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
        wl = (bank.get("weak_supply") or {}).get("limits")
        lim = {**{k: v for k, v in lim.items() if k != "pcc_i_limits"}, **(wl if isinstance(wl, dict) else {})}
    dl = lim.get("duty_limits") if isinstance(lim.get("duty_limits"), dict) else None
    if dl:
        duty = {q: _num(dl.get(f"{q}_pct")) for q in DUTY_KEYS}
        duty = {q: v for q, v in duty.items() if v is not None}
        name = str(dl.get("name") or data["settings"].get("duty_limits"))
    else:
        d = _duty_limit_set(data)
        duty = ({"v_rms": 100 * d.v_rms, "v_peak": 100 * d.v_peak, "i_rms": 100 * d.i_rms, "kvar": 100 * d.q}
                if d else {})
        name = d.name if d else str(data["settings"].get("duty_limits"))
    pv = lim.get("pcc_v_limits") if isinstance(lim.get("pcc_v_limits"), dict) else None
    if pv:
        ind, thd, src = _num(pv.get("individual_pct")), _num(pv.get("thd_pct")), str(pv.get("source") or "")
    else:
        v = _v519(_pcc_kv(res, data), data)
        ind, thd, src = (v.individual_pct, v.thd_pct, v.source) if v else (None, None, "")
    pi = lim.get("pcc_i_limits") if isinstance(lim.get("pcc_i_limits"), dict) else {}
    return _Limits(duty, name, ind, thd, src, _num(pi.get("tdd_pct")), str(pi.get("source") or ""))


def _has_penetration(bank: dict) -> bool:
    return any(_thd_bus(s) is not None or _thd_pcc(s) is not None for s in bank["steps"])


def _has_duty(bank: dict) -> bool:
    return any(_num(s.get(k)) is not None for s in bank["steps"] for k in DUTY_KEYS.values())


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


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
        w.writerow([c.label.replace("\n", " ") + (f" [{c.unit}]" if c.unit else "") for c in self.columns])
        for r in self.rows:
            w.writerow(["" if v is None else (_s(v) if isinstance(v, (list, tuple, bool)) else v) for v in r])
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


def _fails(s: dict, lim: _Limits) -> list[str]:
    """Short codes of the checks a step fails: res, duty, V (PCC voltage), I (PCC current)."""
    out = []
    if s.get("resonance_ok") is False:
        out.append("res")
    duty_over = any(_num(s.get(k)) is not None and q in lim.duty and _num(s.get(k)) > lim.duty[q]
                    for q, k in DUTY_KEYS.items())
    if s.get("duty_ok") is False or duty_over:
        out.append("duty")
    thd = _thd_pcc(s)
    if s.get("pcc_voltage_ok") is False or (thd is not None and lim.pcc_thd is not None and thd > lim.pcc_thd):
        out.append("V")
    tdd = _num(s.get("tdd_pct"))
    if s.get("pcc_current_ok") is False or (tdd is not None and lim.tdd is not None and tdd > lim.tdd):
        out.append("I")
    return out


def _lim_head(label: str, v) -> str:
    return label + (f"\nlim {v:g}" if v is not None else "")


def _step_rows(steps: list[dict], lim: _Limits):
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
        f = _fails(s, lim)
        row.append("pass" if not f else "FAIL " + ",".join(f))
        if f:
            bad.add((i, len(cols) - 1))
        rows.append(row)
    return tuple(cols), tuple(tuple(r) for r in rows), frozenset(bad)


def _summary_table(bank: dict, steps: list[dict], scen: str, lim: _Limits) -> Table:
    cols, rows, bad = _step_rows(steps, lim)
    suffix = "" if scen == "nominal" else "_weak"
    return Table(f"table_summary_{_safe(bank['name'])}{suffix}.csv",
                 f"Bank {bank['name']}: every step, {scen} supply", cols, rows,
                 "margin: signed distance of h_scan from the nearest order of concern (inj injected, bg background, "
                 "char characteristic). THD in % of nominal voltage, TDD in % of I_L, duty in % of the capacitor "
                 f"rating ({lim.duty_name}); '-' = not evaluated. FAIL codes: res resonance, duty capacitor duty, "
                 "V PCC voltage distortion, I PCC current distortion.", bad)


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
    spec = {name: sp for name, sp, _p in (res.extras.get("sources") or [])}
    pulses = {name: p for name, _sp, p in (res.extras.get("sources") or [])}
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
              "rated_kv": "capacitor rated voltage [kV]", "steps_kvar": "stages at rated voltage [kvar]"}


def _detuning_tables(bank: dict) -> list[Table]:
    rec, cands = _detuning(bank)
    out = []
    if rec:
        out.append(Table(f"table_detuning_recommended_{_safe(bank['name'])}.csv",
                         f"Bank {bank['name']}: recommended detuned bank",
                         (Column("quantity", "", _s, "left"), Column("value", "", _s, "left", 60)),
                         tuple((_REC_WORDS.get(k, k.replace("_", " ")), _fmt_any(v)) for k, v in rec.items()
                               if not isinstance(v, dict))))
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
    rows_long = [(s.get("step"), r) for s in steps for r in _order_rows(s)]
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


def report_tables(res: StudyResult, data: dict) -> list[Table]:
    """Every table of the report (summary, inputs, spectra, detuning).

    Parameters
    ----------
    res : StudyResult
        Study result.
    data : dict
        Results dictionary from :func:`resonance.results.to_dict`.

    Returns
    -------
    list of Table
        Tables in report order.
    """
    out = []
    for b in data["banks"]:
        lim = _limits(res, data, b)
        out.append(_summary_table(b, b["steps"], "nominal", lim))
        if b.get("weak_supply"):
            out.append(_summary_table(b, b["weak_supply"]["steps"], "weak", _limits(res, data, b, "weak")))
    out += _input_tables(res, data)
    for b in data["banks"]:
        out += _spectrum_tables(b, _limits(res, data, b))
        out += _detuning_tables(b)
    return out


# ---------------------------------------------------------------------------------------------
# page composition

class _Doc:
    """Flowing layout on A4 pages: a cursor moves down; a block that does not fit starts a page."""

    def __init__(self, title: str):
        self.title = title
        self.pages: list[Figure] = []
        self.y = PAGE_H
        self.fig: Figure | None = None
        self.toc: list[tuple[str, int]] = []

    # geometry helpers: y is inches from the top of the page
    def _fy(self, y_in: float) -> float:
        return 1.0 - y_in / PAGE_H

    def new_page(self) -> None:
        self.fig = Figure(figsize=(PAGE_W, PAGE_H))
        self.pages.append((self.fig, None))
        self.y = M_TOP

    def shared_pages(self, fig: Figure, updates) -> None:
        """Pages that are one figure re-pointed by ``update()`` before each is saved."""
        for u in updates:
            self.pages.append((fig, u))
        self.fig = None

    def room(self) -> float:
        return PAGE_H - M_BOTTOM - self.y

    def ensure(self, h: float) -> None:
        if self.fig is None or self.room() < h:
            self.new_page()

    def text(self, x_in: float, y_in: float, s: str, **kw) -> None:
        kw.setdefault("color", INK)
        kw.setdefault("va", "top")
        self.fig.text(x_in / PAGE_W, self._fy(y_in), s, **kw)

    def heading(self, s: str, size: float = 13, toc: bool = True, gap: float = 0.12, keep: float = 0.0) -> None:
        """Section heading; ``keep`` [in] of what follows must fit on the same page."""
        self.ensure(0.9 + keep)
        if self.y > M_TOP + 0.01:
            self.y += gap
        self.text(M_LEFT, self.y, s, fontsize=size, weight="bold")
        if toc:
            self.toc.append((s, len(self.pages)))
        self.y += size / 72 * 1.55

    def para(self, s: str, size: float = 8.5, color: str = INK, weight: str = "normal", indent: float = 0.0,
             gap: float = 0.06) -> None:
        width = int((TEXT_W - indent) * 72 / (size * 0.54))
        lines = []
        for part in s.split("\n"):
            lines += textwrap.wrap(part, width) or [""]
        lh = size / 72 * 1.38
        i = 0
        while i < len(lines):
            self.ensure(lh * min(2, len(lines) - i))
            n = max(1, min(len(lines) - i, int(self.room() / lh)))
            self.text(M_LEFT + indent, self.y, "\n".join(lines[i:i + n]), fontsize=size, color=color, weight=weight,
                      linespacing=1.38)
            self.y += n * lh
            i += n
        self.y += gap

    def bullets(self, items, size: float = 8.5) -> None:
        for it in items:
            width = int((TEXT_W - 0.2) * 72 / (size * 0.54))
            lines = textwrap.wrap(it, width) or [""]
            lh = size / 72 * 1.38
            self.ensure(lh * len(lines))
            self.text(M_LEFT + 0.05, self.y, "\u2022", fontsize=size)
            self.text(M_LEFT + 0.2, self.y, "\n".join(lines), fontsize=size, linespacing=1.38)
            self.y += lh * len(lines) + 0.03
        self.y += 0.05

    def kv(self, pairs, size: float = 9.0, key_w: float = 1.7, mono_keys: tuple = ()) -> None:
        lh = size / 72 * 1.5
        for k, v in pairs:
            self.ensure(lh)
            self.text(M_LEFT, self.y, k, fontsize=size, weight="bold")
            fam = "DejaVu Sans Mono" if k in mono_keys else rf.FONT
            self.text(M_LEFT + key_w, self.y, v, fontsize=size, family=fam)
            self.y += lh

    def table(self, t: Table, size: float = 7.5) -> None:
        cells = t.cells()
        heads = [c.label + (f"\n[{c.unit}]" if c.unit else "") for c in t.columns]

        def widths(sz):
            cw = sz / 72 * 0.56
            w = []
            for j, h in enumerate(heads):
                n = max([len(x) for x in h.split("\n")] + [len(x) for r in cells for x in r[j].split("\n")])
                w.append(n * cw + 0.12)
            return w

        w = widths(size)
        while sum(w) > TEXT_W and size > 5.5:
            size -= 0.25
            w = widths(size)
        if sum(w) > TEXT_W:
            w = [x * TEXT_W / sum(w) for x in w]
        elif sum(w) < TEXT_W * 0.7 and len(w) > 3:
            w = [x * 0.7 * TEXT_W / sum(w) for x in w]
        lh = size / 72 * 1.3
        head_h = max(h.count("\n") + 1 for h in heads) * lh + 0.08
        row_h = [max(x.count("\n") + 1 for x in r) * lh + 0.06 for r in cells] if cells else []
        self.ensure(0.3 + head_h + (row_h[0] if row_h else lh) + 0.1)
        self.text(M_LEFT, self.y, t.title, fontsize=size + 1.5, weight="bold")
        self.y += (size + 1.5) / 72 * 1.6
        if not cells:
            self.para("none in this case", size=size)
            return
        i = 0
        first = True
        while i < len(cells):
            if not first:
                self.ensure(head_h + row_h[i] + 0.1)
                if self.y <= M_TOP + 0.01:
                    self.text(M_LEFT, self.y, t.title + " (continued)", fontsize=size + 1.5, weight="bold")
                    self.y += (size + 1.5) / 72 * 1.6
            self._table_head(heads, w, head_h, size, lh)
            placed = 0
            # a row taller than a whole page is placed anyway (clipped) so the loop always advances
            while i < len(cells) and (self.room() >= row_h[i] or placed == 0):
                self._table_row(cells[i], t, i, w, row_h[i], size, lh)
                i += 1
                placed += 1
            first = False
            if i < len(cells):
                self.new_page()
        x0 = M_LEFT
        self.fig.add_artist(_hline(x0, x0 + sum(w), self.y, 0.8))
        self.y += 0.08
        if t.note:
            self.para(t.note, size=6.8, color="#4a5663")

    def _table_head(self, heads, w, head_h, size, lh):
        x = M_LEFT
        self.fig.add_artist(_rect(x, self.y, sum(w), head_h, HEAD_FILL))
        for j, h in enumerate(heads):
            self.text(x + w[j] / 2, self.y + 0.04, h, fontsize=size, weight="bold", ha="center", linespacing=1.2)
            x += w[j]
        self.fig.add_artist(_hline(M_LEFT, M_LEFT + sum(w), self.y + head_h, 0.8))
        self.y += head_h

    def _table_row(self, row, t, i, w, h, size, lh):
        if i % 2 == 1:
            self.fig.add_artist(_rect(M_LEFT, self.y, sum(w), h, ZEBRA))
        x = M_LEFT
        for j, txt in enumerate(row):
            al = t.columns[j].align
            xx = {"left": x + 0.05, "center": x + w[j] / 2, "right": x + w[j] - 0.06}[al]
            bad = (i, j) in t.bad
            self.text(xx, self.y + 0.03, txt, fontsize=size, ha=al, linespacing=1.2,
                      color=FAIL_RED if bad else INK, weight="bold" if bad else "normal")
            x += w[j]
        self.y += h

    def region(self, h: float) -> tuple[Figure, tuple[float, float, float, float]]:
        """Reserve ``h`` inches for a figure; returns the page and the rectangle (x, y_bottom, w, h) [in]."""
        self.ensure(h)
        rect = (M_LEFT - 0.1, PAGE_H - self.y - h, TEXT_W + 0.2, h)
        self.y += h + 0.1
        return self.fig, rect

    def save(self, pdf, footer_left: str) -> None:
        """Running header, footer and page numbers on every page; write each page to ``pdf``."""
        n = len(self.pages)
        numbers: dict[int, Any] = {}
        for i, (fig, update) in enumerate(self.pages, start=1):
            if id(fig) not in numbers:
                if i > 1:
                    fig.text(M_LEFT / PAGE_W, 1 - 0.45 / PAGE_H, self.title, fontsize=8, color=INK, va="bottom")
                    fig.text(1 - M_RIGHT / PAGE_W, 1 - 0.45 / PAGE_H, f"resonance {__version__}", fontsize=8,
                             color="#6b7785", va="bottom", ha="right")
                    fig.add_artist(_hline(M_LEFT, PAGE_W - M_RIGHT, 0.52, 0.6))
                fig.add_artist(_hline(M_LEFT, PAGE_W - M_RIGHT, PAGE_H - 0.55, 0.6))
                fig.text(M_LEFT / PAGE_W, 0.4 / PAGE_H, footer_left, fontsize=7, color="#6b7785", va="top")
                numbers[id(fig)] = fig.text(1 - M_RIGHT / PAGE_W, 0.4 / PAGE_H, "", fontsize=8, color=INK,
                                            va="top", ha="right")
            if update is not None:
                update()
            numbers[id(fig)].set_text(f"page {i} of {n}")
            pdf.savefig(fig)


def _hline(x0, x1, y_top_in, lw):
    from matplotlib.lines import Line2D  # noqa: PLC0415
    y = 1 - y_top_in / PAGE_H
    return Line2D([x0 / PAGE_W, x1 / PAGE_W], [y, y], lw=lw, color=INK)


def _rect(x_in, y_top_in, w_in, h_in, color):
    from matplotlib.patches import Rectangle  # noqa: PLC0415
    return Rectangle((x_in / PAGE_W, 1 - (y_top_in + h_in) / PAGE_H), w_in / PAGE_W, h_in / PAGE_H,
                     facecolor=color, edgecolor="none", zorder=-1)


# ---------------------------------------------------------------------------------------------
# figures: one spec draws into any rectangle of any figure (report page or stand-alone file)

@dataclass(frozen=True)
class _FigSpec:
    name: str          # file stem
    size: tuple        # stand-alone size (w, h) [in]
    draw: Callable     # draw(fig, rect_in) with rect_in = (x, y_bottom, w, h) [in] inside fig
    page_h: float      # height on the report page [in]


def _axes(fig: Figure, rect, pad=(0.72, 0.25, 0.5, 0.42)):
    """Axes inside ``rect`` (x, y_bottom, w, h) [in] with padding (left, right, bottom, top) [in]."""
    fw, fh = fig.get_size_inches()
    x, y, w, h = rect
    l, r, b, t = pad
    return fig.add_axes(((x + l) / fw, (y + b) / fh, (w - l - r) / fw, (h - b - t) / fh))


def _grid(fig: Figure, rect, nrow, ncol, pad=(0.62, 0.2, 0.45, 0.35)):
    x, y, w, h = rect
    out = []
    for i in range(nrow):
        for j in range(ncol):
            out.append(_axes(fig, (x + j * w / ncol, y + (nrow - 1 - i) * h / nrow, w / ncol, h / nrow), pad))
    return out


LEGEND_PAD = (0.72, 1.75, 0.5, 0.42)
STEP_SIZE = (7.4, 4.1)     # stand-alone per-step figure [in]
STEP_PAGE_H = 4.75         # height of one per-step plot on a page [in]


def _spectrum_panels(bank: dict, b, data: dict, lim: _Limits) -> list[tuple]:
    steps = bank["steps"]
    ed = data["settings"].get("ieee519_edition")
    v_bus = _v519(b.bus_kv, data)
    out = []
    for where, ind, label, ylab in (
            ("bus", v_bus.individual_pct if v_bus else None, f"bank bus {b.bus}", "V_h [% of nominal]"),
            ("pcc", lim.pcc_ind, f"PCC {data.get('pcc_bus')}", "V_h [% of nominal]"),
            ("i_pcc", None, f"current into the supply at the PCC {data.get('pcc_bus')}", "I_h [% of I_L]")):
        spx = [_spectrum(x, where) for x in steps]
        if not any(spx):
            continue
        if where == "i_pcc":
            tdd = [_num(x.get("tdd_pct")) for x in steps]
            worst = int(np.argmax([t if t is not None else -1.0 for t in tdd]))
        else:
            thd = [(_thd_bus(x) if where == "bus" else _thd_pcc(x)) for x in steps]
            worst = int(np.argmax([t if t is not None else -1.0 for t in thd]))
        hs = sorted({h for d in spx for h in d})
        env = [max(d.get(h, 0.0) for d in spx) for h in hs]
        vals = [spx[worst].get(h, 0.0) for h in hs]
        if where == "i_pcc":
            il = _spectrum(steps[worst], "i_lim")
            limit = [il.get(h) for h in hs] if il else None
            lab = f"IEEE 519-{ed} current limit per order"
            crit = "highest TDD"
        else:
            limit, crit = ind, "highest THD"
            lab = f"IEEE 519-{ed} individual limit" + (f" {ind:g} %" if ind is not None else "")
        ref = " (reference only; IEEE 519 applies at the PCC)" if where == "bus" else ""
        out.append((hs, vals, env, limit, lab, f"{label}: step {steps[worst]['step']} ({crit}){ref}", ylab))
    return out


def _fig_specs(res: StudyResult, data: dict) -> dict[str, list]:
    """Figure specs per report section (the per-step plots are handled apart, see :func:`_step_pages`)."""
    specs: dict[str, list] = {"overlay": [], "compare": [], "spectra": [], "duty": [], "band": []}
    banks = {b["name"]: b for b in data["banks"]}
    for sc in res.scans:
        if sc.scenario != "nominal":
            continue
        b = sc.bank
        s = _safe(b.name)
        weak = res.scans_for(b.name, "weak")
        specs["overlay"].append(_FigSpec(
            f"fig_scan_{s}_all", (8.2, 4.0),
            lambda fig, r, sc=sc: rf.draw_scan_all(_axes(fig, r, LEGEND_PAD), res, sc,
                                                   f"Bank {sc.bank.name}: all steps, nominal supply"), 4.0))
        if weak is not None:
            specs["overlay"].append(_FigSpec(
                f"fig_scan_{s}_weak_all", (8.2, 4.0),
                lambda fig, r, w=weak: rf.draw_scan_all(_axes(fig, r, LEGEND_PAD), res, w,
                                                        f"Bank {w.bank.name}: all steps, weak supply"), 4.0))
        det = _detuned_scan(res, b.name)
        if det is not None:
            specs["compare"].append(_FigSpec(
                f"fig_compare_{s}_detuned", (7.4, 4.0),
                lambda fig, r, sc=sc, d=det: rf.draw_scan_compare(_axes(fig, r), res, sc, d), 4.0))
        bank = banks.get(b.name)
        if bank is None:
            continue
        lim = _limits(res, data, bank)
        steps = bank["steps"]
        panels = _spectrum_panels(bank, b, data, lim)
        if panels:
            def draw_sp(fig, r, panels=panels):
                for ax, p in zip(_grid(fig, r, len(panels), 1, (0.72, 0.25, 0.5, 0.35)), panels):
                    rf.draw_spectrum(ax, *p)
            specs["spectra"].append(_FigSpec(f"fig_spectrum_{s}", (7.4, 2.6 * len(panels)), draw_sp,
                                             2.6 * len(panels)))
        if _has_duty(bank):
            vals = {q: [_num(x.get(k)) for x in steps] for q, k in DUTY_KEYS.items()}
            nums = [x["step"] for x in steps]
            specs["duty"].append(_FigSpec(
                f"fig_duty_{s}", (7.4, 5.2),
                lambda fig, r, v=vals, n=nums, lm=lim: rf.draw_duty(_grid(fig, r, 2, 2), n, v, lm.duty, lm.duty_name),
                5.2))
        rec, _c = _detuning(bank)
        n_t = _num(_get(rec, "tuning_order")) if rec else None
        p_pct = _num(_get(rec, "detuning_pct")) if rec else None
        if rec and (n_t or p_pct):
            p = p_pct / 100.0 if p_pct else 1.0 / n_t**2
            n_t = n_t or 1.0 / math.sqrt(p)
            q_r = np.cumsum([float(q) for q in (rec.get("steps_kvar") or b.stages_kvar)])
            u_r = _num(rec.get("rated_kv")) or b.rated_kv
            # X_s/X_C = U^2 Q_R / (S_sc U_R^2); h_p = 1/sqrt(p + X_s/X_C)  [derived, REFERENCES.md "Detuned banks"]
            hp = 1.0 / np.sqrt(p + b.bus_kv**2 * q_r / 1000.0 / (sc.sc_mva * u_r**2))
            dom = min(res.orders.injected) if res.orders.injected else None
            specs["band"].append(_FigSpec(
                f"fig_detuning_{s}", (8.2, 3.6),
                lambda fig, r, n_t=n_t, p=p, hp=hp, k=np.arange(1, hp.size + 1), d=dom, nm=b.name:
                rf.draw_detuning_band(_axes(fig, r, (0.72, 2.6, 0.5, 0.42)), n_t, p, hp, k, d,
                                      f"Bank {nm}: recommended detuning"), 3.6))
    return specs


def _save_fig(fig: Figure, stem: str, out) -> list[str]:
    names = [f"{stem}.png", f"{stem}.svg"]
    fig.savefig(out.file(names[0]), dpi=rf.PNG_DPI, metadata={"Software": None})
    fig.savefig(out.file(names[1]), metadata={"Date": None})
    return names


def _save_spec(spec: _FigSpec, out, cache: dict) -> list[str]:
    fig = cache.get(spec.size)
    if fig is None:
        fig = cache[spec.size] = rf.new_figure(*spec.size)
    else:
        fig.clear()
    spec.draw(fig, (0.0, 0.0) + tuple(spec.size))
    return _save_fig(fig, spec.name, out)


def _step_files(res: StudyResult, sc: BankScan, weak: BankScan | None, out) -> list[str]:
    """One PNG and SVG per step, from one figure re-pointed at each step."""
    fig = rf.new_figure(*STEP_SIZE)
    plot = rf.StepScanPlot(_axes(fig, (0.0, 0.0) + STEP_SIZE), res, sc, weak)
    names = []
    for st in sc.steps:
        plot.show(st.step)
        names += _save_fig(fig, f"fig_scan_{_safe(sc.bank.name)}_step{st.step}", out)
    return names


def _step_pages(doc: "_Doc", res: StudyResult, sc: BankScan, weak: BankScan | None) -> None:
    """Two per-step plots a page: one page figure, re-pointed for every pair of steps."""
    fig = Figure(figsize=(PAGE_W, PAGE_H))
    fig.text(M_LEFT / PAGE_W, 1 - M_TOP / PAGE_H, f"Bank {sc.bank.name}: one plot per step"
             + (" (dashed: weak supply)" if weak is not None else ""), fontsize=9.5, weight="bold", color=INK,
             va="top")
    top = PAGE_H - M_TOP - 0.3
    rects = [(M_LEFT - 0.1, top - (i + 1) * STEP_PAGE_H, TEXT_W + 0.2, STEP_PAGE_H - 0.1) for i in range(2)]
    plots = [rf.StepScanPlot(_axes(fig, r), res, sc, weak) for r in rects]
    n = len(sc.steps)

    def pair(k):
        def update():
            plots[0].show(k)
            plots[1].ax.set_visible(k + 1 <= n)
            if k + 1 <= n:
                plots[1].show(k + 1)
        return update

    doc.shared_pages(fig, [pair(k) for k in range(1, n + 1, 2)])


# ---------------------------------------------------------------------------------------------
# words generated from the data

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
            out.append(f"Capacitor duty, nominal supply: beyond the {lim.duty_name} limits on {len(fails)} of {n} "
                       f"steps ({detail}).")
        elif worst is not None:
            out.append(f"Capacitor duty, nominal supply: within the {lim.duty_name} limits on every step; the "
                       f"smallest margin is {-worst[2]:.1f} points ({DUTY_LABEL[worst[1]]}, step {worst[0]}).")
    else:
        out.append(f"Capacitor duty against the {lim.duty_name} limits: {NOT_EVALUATED}.")
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
        out.append("Recommended detuned bank: " + ", ".join(bits) + ".")
    elif not bank.get("detuning_pct"):
        out.append(f"Detuning proposal: {NOT_EVALUATED}.")
    finds = [f for f in data.get("findings", []) if f.get("bank") == bank["name"]]
    if finds:
        by: dict[str, dict[str, set]] = {}
        for f in finds:
            by.setdefault(str(f.get("scenario", "nominal")), {}).setdefault(_check_word(str(f.get("check"))),
                                                                            set()).add(f.get("step"))
        parts = []
        for scen in sorted(by, key=lambda x: (x != "nominal", x)):
            items = ", ".join(f"{w} (step{'s' if len(k) > 1 else ''} "
                              f"{_steps_list(sorted(x for x in k if x is not None))})"
                              for w, k in sorted(by[scen].items()))
            parts.append(f"{scen} supply - {items}")
        out.append(f"Verdict: the bank as specified does not pass the screening; {len(finds)} finding(s): "
                   + "; ".join(parts) + ".")
    else:
        out.append("Verdict: the bank as specified passes every screening check evaluated in this version.")
    return out


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


def _methods(res: StudyResult, data: dict) -> tuple[list[str], list[str]]:
    st = data["settings"]
    v_pcc = _pcc_kv(res, data)
    v519 = _v519(v_pcc, data)
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
        "(pandapower) with the step in service.",
        f"Frequency scan: driving-point impedance |Z(h)| at the bank bus for every step, h = 1 to {st.get('h_max'):g} "
        f"in steps of {st.get('h_step'):g}, peaks refined locally; h_est = sqrt(S_sc/Q_C) is the hand check "
        "(IEEE Std 1036). Other banks: " + ("in service at full size." if st.get("other_banks") == "full"
                                            else "out of service."),
        f"Screening: a resonance within +-{st.get('margin_pct'):g} % of an injected, background or characteristic "
        "order (k p +- 1) is a finding (common practice).",
        "Short-circuit power at each bank bus is cross-checked with IEC 60909-0:2016 through pandapower.",
        f"Voltage distortion limits: IEEE Std 519-{st.get('ieee519_edition')}, applied at the PCC "
        f"(bus {data.get('pcc_bus')}" + (f", {v_pcc:g} kV" if v_pcc else "") + ")"
        + (f": individual {v519.individual_pct:g} %, THD {v519.thd_pct:g} % ({v519.source})." if v519 else "."),
        "Capacitor duty limits: " + (f"{dl.citation} - rms voltage {dl.v_rms:g}, crest voltage {dl.v_peak:g}, rms "
                                     f"current {dl.i_rms:g}, reactive power {dl.q:g} pu. {dl.note}." if dl else
                                     str(st.get("duty_limits"))),
        *_current_limit_lines(data),
        "Summation of several sources: " + ("arithmetic sum of magnitudes (worst case)." if st.get("summation") ==
                                            "arithmetic" else "IEC 61000-3-6 summation law, exponents 1 (h < 5), "
                                            "1.4 (5-10), 2 (h > 10) (from memory)."),
    ]
    mem = []
    if dl:
        for q, src in (("rms voltage", dl.v_rms_source), ("crest voltage", dl.v_peak_source),
                       ("rms current", dl.i_rms_source), ("reactive power", dl.q_source)):
            if "memory" in src:
                mem.append(f"Capacitor {q} limit of {dl.name}: {src}.")
    if v519 and "memory" in v519.source:
        mem.append(f"IEEE 519 voltage limits at {v_pcc:g} kV: {v519.source}.")
    if st.get("summation") != "arithmetic":
        mem.append("IEC 61000-3-6 summation exponents (from memory).")
    if st.get("resistance_model") == "breuer":
        mem.append("Breuer resistance law 1 + 0.1 h^1.5 (from memory).")
    if st.get("load_model") == "cigre_c4":
        mem.append("CIGRE 36.05 load model coefficients 0.073, 6.7 and 0.74 (from memory).")
    for b in data["banks"]:
        if _detuning(b)[0]:
            mem.append(f"Capacitance tolerance {rf.CAP_TOLERANCE[0] * 100:+.0f}/{rf.CAP_TOLERANCE[1] * 100:+.0f} % "
                       "used for the detuning band (from memory; editions differ).")
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
    from .spectra import BUILTIN_SPECTRA  # noqa: PLC0415
    out = []
    for name in sorted({hs.spectrum for hs in res.case.harmonic_source if isinstance(hs.spectrum, str)}):
        sp = BUILTIN_SPECTRA.get(name)
        note = getattr(sp, "note", "") if sp is not None else ""
        if note and "memory" in note:
            out.append(f"Built-in spectrum '{name}': {note}")
    return out


# ---------------------------------------------------------------------------------------------
# the report

def write_report(res: StudyResult, data: dict, out, *, date: str | None = None) -> list[str]:
    """Stage the PDF report, every figure (PNG and SVG) and every table (CSV).

    Parameters
    ----------
    res : StudyResult
        Study result from :func:`resonance.study.run_study`.
    data : dict
        Results dictionary from :func:`resonance.results.to_dict` (the content of
        ``results.json``); keys of later stages are optional.
    out : OutputDir
        Output directory; files are staged with ``out.file(name)``.
    date : str, optional
        Date printed on the cover (today, ISO format, when None) [unitless].

    Returns
    -------
    list of str
        Names of the staged files, ``report.pdf`` first.

    Notes
    -----
    The PDF carries no creation date and SVGs use a fixed id salt, so the same
    input gives the same content apart from the cover date.
    """
    with matplotlib.rc_context(rf.RC):
        return _write(res, data, out, date or _dt.date.today().isoformat())


def _cover(doc: _Doc, data: dict, date: str) -> float:
    title = data["case"]["title"]
    doc.new_page()
    doc.y = 1.3
    doc.text(M_LEFT, doc.y, "Capacitor bank harmonic screening study", fontsize=11, color="#6b7785")
    doc.y += 0.3
    for line in textwrap.wrap(title, 48):
        doc.text(M_LEFT, doc.y, line, fontsize=19, weight="bold")
        doc.y += 0.38
    doc.y += 0.25
    n_find = len(data.get("findings", []))
    doc.kv([("Case file", str(data["case"].get("file") or "-")),
            ("SHA-256", str(data["case"].get("sha256") or "-")),
            ("Tool", f"{data['tool']['name']} {data['tool']['version']}"),
            ("Date of report", date),
            ("System frequency", f"{data['case']['frequency_hz']} Hz"),
            ("Banks", ", ".join(f"{b['name']} ({b['bus']}, {sum(b['stages_kvar']):g} kvar)" for b in data["banks"])),
            ("PCC", str(data.get("pcc_bus"))),
            ("Screening result", "every check evaluated passes" if data.get("passed") else
             f"{n_find} finding(s) beyond a limit - see the summary")],
           mono_keys=("SHA-256",))
    doc.y += 0.35
    for label, y_off in (("Engineer:", 0.0), ("Signature:", 0.45)):
        doc.text(M_LEFT, doc.y + y_off, label, fontsize=10, weight="bold")
        doc.fig.add_artist(_hline(M_LEFT + 1.0, M_LEFT + 4.2, doc.y + y_off + 0.2, 0.6))
    doc.text(M_LEFT + 4.5, doc.y, "Date:", fontsize=10, weight="bold")
    doc.fig.add_artist(_hline(M_LEFT + 5.0, PAGE_W - M_RIGHT, doc.y + 0.2, 0.6))
    doc.y += 1.0
    box_top = doc.y
    doc.y += 0.12
    doc.para(CAUTION, size=9.5, weight="bold", indent=0.12)
    doc.fig.add_artist(_rect(M_LEFT, box_top, TEXT_W, doc.y - box_top + 0.02, "#fbf1dc"))
    doc.y += 0.35
    return doc.y


def _summary_pages(doc: _Doc, res: StudyResult, data: dict, tbl: dict) -> None:
    for b in data["banks"]:
        lim = _limits(res, data, b)
        doc.new_page()
        doc.heading(f"1 Summary - bank {b['name']}")
        pairs = [("Bus", f"{b['bus']}, {b['bus_kv']:g} kV"),
                 ("Capacitors", f"{len(b['stages_kvar'])} stages, {_fmt_any(b['stages_kvar'])} kvar at "
                                f"{b['rated_kv']:g} kV ({sum(b['stages_kvar']):g} kvar)"),
                 ("Detuning", f"p = {b['detuning_pct']:g} %, tuning order {b['tuning_order']:.2f}"
                  if b.get("detuning_pct") else "none (plain bank)"),
                 ("S_sc at the bus", f"{b['sc_mva']:.2f} MVA (IEC 60909: "
                  + (f"{b['sc_mva_iec60909']:.2f} MVA" if b.get("sc_mva_iec60909") else "-") + "), X/R "
                  + (f"{b['x_r_at_bus']:.2f}" if b.get("x_r_at_bus") else "-"))]
        if b.get("weak_supply"):
            pairs.append(("Weak supply", f"S_sc {b['weak_supply']['sc_mva']:.2f} MVA at the bus"))
        doc.kv(pairs, size=8.5, key_w=1.35)
        doc.y += 0.1
        doc.table(tbl[f"table_summary_{_safe(b['name'])}.csv"], size=7.0)
        if b.get("weak_supply"):
            doc.table(tbl[f"table_summary_{_safe(b['name'])}_weak.csv"], size=7.0)
        doc.ensure(0.6)
        doc.text(M_LEFT, doc.y, "Verdict", fontsize=9.5, weight="bold")
        doc.y += 0.2
        doc.bullets(_verdict(b, data, lim), size=8.0)
        tis = b.get("time_in_step")
        if tis:
            doc.ensure(0.6)
            doc.text(M_LEFT, doc.y, "Time in each step (metered demand)", fontsize=9.5, weight="bold")
            doc.y += 0.2
            shares = ", ".join(f"step {k}: {100 * f:.1f} %" for k, f in enumerate(tis["fraction"]) if f > 0)
            doc.bullets([
                f"Stage controller replayed against {tis['source']} ({tis['total_hours']:.0f} h of intervals, "
                f"target PF in the [demand] table): achieved period PF {tis['pf_achieved_period']:.3f}, "
                f"{tis['switching_ops_per_day']:g} switching operations per day.",
                f"Time in service: {shares}.",
                f"The plant spends {tis['time_with_findings_pct']:.1f} % of the time on steps with findings "
                "(nominal supply)."], size=8.0)
        notes = [w for w in data.get("warnings", []) if f"bank {b['name']} " in w]
        if notes:
            doc.ensure(0.5)
            doc.text(M_LEFT, doc.y, "Notes", fontsize=9, weight="bold")
            doc.y += 0.2
            doc.bullets(notes, size=7.2)
    other = [w for w in data.get("warnings", []) if not any(f"bank {b['name']} " in w for b in data["banks"])]
    if other:
        doc.bullets(other, size=7.2)


def _first_h(specs: list) -> float:
    return specs[0].page_h + 0.5 if specs else 0.0


def _write(res: StudyResult, data: dict, out, date: str) -> list[str]:
    names: list[str] = []
    title = data["case"]["title"]
    doc = _Doc(title)
    tables = report_tables(res, data)
    tbl = {t.name: t for t in tables}
    specs = _fig_specs(res, data)
    cache: dict = {}

    def place(spec: _FigSpec) -> None:
        fig, rect = doc.region(spec.page_h)
        spec.draw(fig, rect)
        names.extend(_save_spec(spec, out, cache))

    toc_y = _cover(doc, data, date)
    cover = doc.fig
    _summary_pages(doc, res, data, tbl)

    doc.new_page()
    doc.heading("2 Input data")
    doc.para(f"As read from {data['case'].get('file')}; units in brackets; bus voltages line-to-line.")
    if res.case.network is not None:
        doc.para(f"Network elements beyond the tables below come from the pandapower file "
                 f"{res.case.network.pandapower_json}.")
    for t in tables:
        if t.name.startswith("table_input_"):
            doc.table(t)

    for sc in res.scans:
        if sc.scenario != "nominal":
            continue
        weak = res.scans_for(sc.bank.name, "weak")
        doc.new_page()
        doc.heading(f"3 Frequency scans - bank {sc.bank.name}")
        doc.para("Driving-point impedance magnitude at the bank bus against harmonic order. Shaded: the "
                 f"+-{res.case.study.margin_pct:g} % screening band around each order of concern, which are the "
                 "ticks of the h axis (red, solid line: injected or background order; grey, dashed: characteristic "
                 "order only). Markers: resonance of each step (X: inside a band). Dotted: bank off.")
        for spec in specs["overlay"]:
            if spec.name.startswith(f"fig_scan_{_safe(sc.bank.name)}_"):
                place(spec)
        _step_pages(doc, res, sc, weak)
        names += _step_files(res, sc, weak, out)

    doc.heading("4 Detuned bank compared with the plain bank", keep=_first_h(specs["compare"]))
    if specs["compare"]:
        for spec in specs["compare"]:
            place(spec)
    else:
        doc.para(f"Scan of a detuned candidate beside the plain bank: {NOT_EVALUATED}.")

    doc.heading("5 Harmonic voltage distortion", keep=_first_h(specs["spectra"]))
    if specs["spectra"]:
        doc.para("Bars: harmonic value of the step with the highest distortion; grey ticks: highest value over all "
                 "steps; red dashes: the IEEE 519 limit (red bars exceed it). Nominal supply.")
        for spec in specs["spectra"]:
            place(spec)
    else:
        doc.para(f"Harmonic voltage spectra at the bank bus and the PCC: {NOT_EVALUATED}.")
    for t in tables:
        if t.name.startswith("table_spectrum_"):
            doc.table(t, size=6.8)

    doc.heading("6 Capacitor duty", keep=_first_h(specs["duty"]))
    if specs["duty"]:
        doc.para("Continuous duty of the capacitors per step, nominal supply, against the limits named "
                 "(dashed); red bars exceed a limit.")
        for spec in specs["duty"]:
            place(spec)
    else:
        doc.para(f"Capacitor duty (rms and crest voltage, rms current, reactive power): {NOT_EVALUATED}.")

    doc.heading("7 Detuning recommendation", keep=_first_h(specs["band"]))
    det_tables = [t for t in tables if t.name.startswith("table_detuning_")]
    if specs["band"] or det_tables:
        for spec in specs["band"]:
            place(spec)
        for t in det_tables:
            doc.table(t)
    else:
        doc.para(f"Detuning reactor proposal: {NOT_EVALUATED}.")

    doc.heading("8 Methods and assumptions")
    meth, mem = _methods(res, data)
    doc.bullets(meth)
    doc.ensure(0.6)
    doc.text(M_LEFT, doc.y, "Taken from memory or common practice (verify against the documents)", fontsize=9.5,
             weight="bold")
    doc.y += 0.22
    doc.bullets(mem)
    doc.heading("9 References")
    doc.bullets(REFERENCES)

    # contents on the cover (page numbers are known now)
    y = toc_y
    cover.text(M_LEFT / PAGE_W, 1 - y / PAGE_H, "Contents", fontsize=10, weight="bold", color=INK, va="top")
    y += 0.25
    for head, page in doc.toc:
        if y > PAGE_H - M_BOTTOM - 0.2:
            break
        cover.text((M_LEFT + 0.1) / PAGE_W, 1 - y / PAGE_H, head, fontsize=8.5, color=INK, va="top")
        cover.text(1 - M_RIGHT / PAGE_W, 1 - y / PAGE_H, str(page), fontsize=8.5, color=INK, va="top", ha="right")
        y += 0.19
    sha = str(data["case"].get("sha256") or "")
    with PdfPages(out.file("report.pdf"), metadata={"CreationDate": None, "Creator": f"resonance {__version__}",
                                                   "Producer": None, "Title": title}) as pdf:
        doc.save(pdf, f"{data['case'].get('file')}  sha256 {sha[:12]}  -  screening aid; see the caution on page 1")
    for t in tables:
        out.write_text(t.name, t.csv())
        names.append(t.name)
    return ["report.pdf"] + names

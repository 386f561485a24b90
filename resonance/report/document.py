"""Submittal report: one PDF (matplotlib only) plus every figure and table as files.

Edge layer.  This module composes the pages; the parts live beside it:
:mod:`resonance.report.tables` (readers of the results and the tables),
:mod:`resonance.report.text` (verdicts, methods), :mod:`resonance.report.layout`
(the page cursor), :mod:`resonance.report.specs` (figure specs and file jobs),
:mod:`resonance.report.figures` (the drawers).

:func:`write_report` reads the study result and the results dictionary of
:func:`resonance.report.results_json.to_dict`; keys of later study stages
(penetration, capacitor duty, detuning) are read defensively, so their
sections fill in as those keys appear and say "not evaluated in this version"
until then.

Keys read, beyond those :func:`~resonance.report.results_json.to_dict` always writes
---------------------------------------------------------------------------
per step (``banks[].steps[]`` and ``banks[].weak_supply.steps[]``):
    ``thd_v_pct`` (bank bus) and ``thd_v_pcc_pct`` (or ``pcc_thd_v_pct``,
    ``pcc.thd_v_pct``) [% of nominal], ``tdd_pct`` [% of I_L],
    ``cap_v_rms_pct``, ``cap_v_peak_pct``, ``cap_i_rms_pct``, ``cap_kvar_pct``
    [% of rating], ``duty_ok``, ``pcc_voltage_ok``, ``pcc_current_ok`` [bool];
    per order ``harmonics[]``: ``h``, ``v_bank_pct``,
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
the check's ``detuned_scans``:
    the recommended design's :class:`~resonance.assessment.study.BankScan` per bank, for the
    side-by-side scan.
"""

from __future__ import annotations

import datetime as _dt
import textwrap

import matplotlib

from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402

from resonance import __version__  # noqa: E402
from resonance.report import figures as rf  # noqa: E402
from resonance.report.layout import INK, M_BOTTOM, M_LEFT, M_RIGHT, PAGE_H, PAGE_W, TEXT_W, _Doc, _hline, _rect  # noqa: E402
from resonance.report.specs import _fig_specs, _FigSpec, _step_pages, file_jobs  # noqa: E402
from resonance.report.tables import Column, Table, _fmt_any, _limits, _safe, report_tables  # noqa: E402
from resonance.report.text import NOT_EVALUATED, _methods, _verdict  # noqa: E402
from resonance.report.results_json import CAUTION  # noqa: E402
from resonance.report.switching_report import switching_table, switching_words  # noqa: E402
from resonance.assessment.study import StudyResult  # noqa: E402

__all__ = ["write_report", "Table", "Column", "report_tables", "NOT_EVALUATED", "SECTIONS"]

#: section headings in report order (tests look for them)
SECTIONS = ("Summary", "Input data", "Frequency scans", "Detuned bank compared with the plain bank",
            "Harmonic voltage distortion", "Capacitor duty", "Switching", "Detuning recommendation",
            "Methods and assumptions", "References")

REFERENCES = (
    "IEEE Std 18-2002, IEEE Standard for Shunt Power Capacitors (continuous operating limits).",
    "IEEE Std 519-2014 / IEEE Std 519-2022, IEEE Standard for Harmonic Control in Electric Power Systems.",
    "IEEE Std 1036, IEEE Guide for the Application of Shunt Power Capacitors.",
    "IEC 60909-0:2016, Short-circuit currents in three-phase a.c. systems - Calculation of currents.",
    "IEC 60831-1, Shunt power capacitors of the self-healing type for a.c. systems up to 1000 V.",
    "IEC 61000-3-6, Assessment of emission limits for distorting installations (summation law).",
    "IEEE Std C37.99-2012, Guide for the Protection of Shunt Capacitor Banks (inrush, back-to-back switching).",
    "IEEE Std C37.012-2005, Application Guide for Capacitance Current Switching for AC High-Voltage Circuit Breakers.",
    "ANSI C37.06-2000 back-to-back capacitor switching limits, as summarised in Siemens TechTopics No. 32.",
    "pandapower: L. Thurner et al., IEEE Trans. Power Systems 33(6), 2018 (load flow, IEC 60909).",
    "W. F. Tinney, C. E. Hart, Power Flow Solution by Newton's Method, IEEE Trans. PAS-86, 1967.",
)


def write_report(result, out, *, date: str | None = None) -> list[str]:
    """Stage the PDF report, every figure (PNG and SVG) and every table (CSV).

    Parameters
    ----------
    result : CheckResult
        The check's typed result (:func:`resonance.pipeline.run_check`); the report reads
        nothing else (no pandapower model, no recomputation): its study, its ``data`` (the
        results.json layout) and the scans of the recommended designs.
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
    input gives the same content apart from the cover date.  The PDF is written
    first, then every stand-alone figure file, each drawn once on its own
    figure and saved as PNG and SVG from it (all in this process: a forked pool
    gained nothing measurable, see ``docs/performance.md``).
    """
    with matplotlib.rc_context(rf.RC):
        return _write(result.study, result.data, dict(result.detuned_scans), out,
                      date or _dt.date.today().isoformat())


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
    n_find = sum(1 for f in data.get("findings", []) if f.get("cause") != "site")
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
        for scen in (b.get("scenarios") or {}):
            extra_t = tbl.get(f"table_summary_{_safe(b['name'])}_{scen}.csv")
            if scen != "weak" and extra_t is not None:
                doc.table(extra_t, size=7.0)
        site = tbl.get(f"table_site_{_safe(b['name'])}.csv")
        if site is not None:
            doc.table(site, size=7.0)
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


def _write(res: StudyResult, data: dict, detuned: dict, out, date: str) -> list[str]:
    tables = report_tables(res, data)
    tables += [t for t in (switching_table(b, data.get("findings", ())) for b in data["banks"]) if t is not None]
    specs = _fig_specs(res, data, detuned)
    jobs = file_jobs(res, specs)
    pdf_path = out.file("report.pdf")
    paths = [tuple(out.file(n) for n in job.names) for job in jobs]
    _pdf(res, data, tables, specs, date, pdf_path)
    for job, p in zip(jobs, paths):
        job.render(p)
    for t in tables:
        out.write_text(t.name, t.csv())
    return ["report.pdf"] + [n for job in jobs for n in job.names] + [t.name for t in tables]


def _pdf(res: StudyResult, data: dict, tables: list, specs: dict, date: str, path) -> None:
    """Lay out every page and write the PDF to ``path`` (long on purpose: the sections in
    report order, each a short block)."""
    title = data["case"]["title"]
    doc = _Doc(title)
    tbl = {t.name: t for t in tables}

    def place(spec: _FigSpec) -> None:
        fig, rect = doc.region(spec.page_h)
        spec.draw(fig, rect)

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
            if spec.bank == sc.bank.name:
                place(spec)
        _step_pages(doc, res, sc, weak)

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

    doc.heading("7 Switching", keep=1.2)
    doc.para("Inrush current of every step on switching in, its frequency, the voltage step at the bus and the "
             "transient voltage on the capacitors, against the switching device's and the capacitor units' limits "
             "(sources in the table notes); red: beyond a limit.")
    for b in data["banks"]:
        t = tbl.get(f"table_switching_{_safe(b['name'])}.csv")
        if t is not None:
            doc.table(t, size=6.8)
        doc.bullets(switching_words(res, b), size=8.0)
        for spec in specs["switching"]:
            if spec.bank == b["name"]:
                place(spec)

    doc.heading("8 Detuning recommendation", keep=_first_h(specs["band"]))
    det_tables = [t for t in tables if t.name.startswith("table_detuning_")]
    if specs["band"] or det_tables:
        for spec in specs["band"]:
            place(spec)
        for t in det_tables:
            doc.table(t)
    else:
        doc.para(f"Detuning reactor proposal: {NOT_EVALUATED}.")

    doc.heading("9 Methods and assumptions")
    meth, mem = _methods(res, data)
    doc.bullets(meth)
    doc.ensure(0.6)
    doc.text(M_LEFT, doc.y, "Taken from memory or common practice (verify against the documents)", fontsize=9.5,
             weight="bold")
    doc.y += 0.22
    doc.bullets(mem)
    doc.heading("10 References")
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
    with PdfPages(path, metadata={"CreationDate": None, "Creator": f"resonance {__version__}",
                                                   "Producer": None, "Title": title}) as pdf:
        doc.save(pdf, f"{data['case'].get('file')}  sha256 {sha[:12]}  -  screening aid; see the caution on page 1")

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
from dataclasses import replace

import matplotlib

from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402

from resonance import __version__  # noqa: E402
from resonance.report import figures as rf  # noqa: E402
from resonance.report import proposed as rp  # noqa: E402
from resonance.report.filter_report import construction_table, filter_tables  # noqa: E402
from resonance.report.layout import GREY, M_BOTTOM, M_LEFT, M_RIGHT, _Doc  # noqa: E402
from resonance.report.specs import _fig_specs, _FigSpec, _step_pages, file_jobs, render_aside  # noqa: E402
from resonance.report.tables import (Column, Table, _fmt_any, _limits, _safe, chosen_filter,  # noqa: E402
                                     limit_set_words, offered_filter, report_tables)
from resonance.report.text import NOT_EVALUATED, _methods, _verdict  # noqa: E402
from resonance.report.results_json import CAUTION  # noqa: E402
from resonance.report.switching_report import switching_table, switching_words  # noqa: E402
from resonance.report.stack import stack_tables  # noqa: E402
from resonance.assessment.envelope import scenario_words  # noqa: E402
from resonance.assessment.study import StudyResult  # noqa: E402

__all__ = ["write_report", "layout_report", "Table", "Column", "report_tables", "NOT_EVALUATED", "SECTIONS"]

#: section headings in report order (tests look for them)
SECTIONS = ("Summary", "Network and input data", "Frequency scans", "Harmonic distortion", "Capacitor duty",
            "Switching", "Proposed design", "Methods and assumptions", "References", "Appendix A", "Appendix B")

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
        results.json layout), the re-checks of the recommended designs and the one-line data.
    out : OutputDir
        Output directory; files are staged with ``out.file(name)``.
    date : str, optional
        Date printed on the cover and in every footer (today, ISO format, when None) [unitless].

    Returns
    -------
    list of str
        Names of the staged files, ``report.pdf`` first.

    Notes
    -----
    The PDF carries no creation date and SVGs use a fixed id salt, so the same input gives
    the same content apart from the date.  Every stand-alone figure file is drawn once on its
    own figure (the whole-bank figures as PNG and SVG, the per-step scans as PNG), in a second
    process while the PDF is written where that is safe (:func:`render_aside`).
    """
    with matplotlib.rc_context(rf.RC):
        book = _Book(result, date or _dt.date.today().isoformat())
        pdf_path = out.file("report.pdf")
        jobs = file_jobs(result.study, book.specs, book.stamp)
        paths = [tuple(out.file(n) for n in job.names) for job in jobs]
        done = render_aside(jobs, paths)  # the stand-alone files beside the pages, on the other core
        try:
            doc = book.layout()
            book.save(doc, pdf_path)
            for t in book.tables:
                out.write_text(t.name, t.csv())
        except BaseException:
            done(redraw=False)  # reap the child; the error is the caller's to report
            raise
        done()
    return ["report.pdf"] + [n for job in jobs for n in job.names] + [t.name for t in book.tables]


def write_scan_figures(result, out, *, date: str | None = None) -> list[str]:
    """Stage only the whole-bank scan figures (``scan_<bank>*.png`` / ``.svg``), for a check
    without the report; the same files the report writes.

    Parameters
    ----------
    result : CheckResult
        The check's typed result.
    out : OutputDir
        Output directory.
    date : str, optional
        Date in the figures' footers (today when None) [unitless].
    """
    from resonance.report.specs import _spec_job  # noqa: PLC0415

    with matplotlib.rc_context(rf.RC):
        book = _Book(result, date or _dt.date.today().isoformat(), tables=False)
        names = []
        for spec in book.specs["overlay"]:
            job = _spec_job(spec, book.stamp)
            job.render(tuple(out.file(n) for n in job.names))
            names += job.names
    return names


def layout_report(result, date: str = "2000-01-01") -> _Doc:
    """Lay out every page of the report without writing it (the tests render and measure it).

    Parameters
    ----------
    result : CheckResult
        The check's typed result.
    date : str
        Date on the cover and in the footers [unitless].

    Returns
    -------
    _Doc
        The pages, the registered text boxes and figure regions (:meth:`_Doc.overflows`).
    """
    with matplotlib.rc_context(rf.RC):
        book = _Book(result, date)
        doc = book.layout()
        book.decorate(doc)
    return doc


def project_lines(case) -> list[tuple[str, str]]:
    """The ``[project]`` fields that are given, as (label, value) pairs for the cover."""
    p = case.project
    pairs = [("Client", p.client), ("Site", p.site), ("Project number", p.number), ("Revision", p.revision),
             ("Prepared by", p.prepared_by), ("Checked by", p.checked_by)]
    return [(k, v) for k, v in pairs if v]


class _Book:
    """One report: the result, its tables and figure specs, laid out section by section."""

    def __init__(self, result, date: str, tables: bool = True):
        self.result, self.date = result, date
        self.res: StudyResult = result.study
        self.data: dict = result.data
        case = result.case
        self.paper = case.paper
        self.rechecks = dict(getattr(result, "rechecks", {}) or {})
        tables = report_tables(self.res, self.data) if tables else []
        tables += [t for t in (switching_table(b, self.data.get("findings", ())) for b in self.data["banks"])
                   if t is not None and tables]
        for name, rc in (self.rechecks.items() if tables else ()):
            tables += rp.proposed_tables(rc, name)
            bank = next((b for b in self.data["banks"] if b["name"] == name), None)
            flt = chosen_filter(bank or {})  # the chosen design is the filter
            for br in (flt or {}).get("branches", [])[1:]:  # the further branches of a filter
                tables += rp.proposed_tables(rc, br["name"])
            rec = ((bank or {}).get("detuning") or {}).get("recommended")
            rt = rp.reactor_table(rec, name) if rec and not flt else None
            if rt is not None:
                tables.append(rt)
        for b in (self.data["banks"] if tables else ()):
            tables += filter_tables(b)
            ct = construction_table(b)
            if ct is not None:
                tables.append(ct)
        self.tables = tables
        self.tbl = {t.name: t for t in tables}
        self.specs = _fig_specs(self.res, self.data, dict(result.detuned_scans), self.rechecks,
                                getattr(result, "one_line", None))
        p = case.project
        ident = " ".join(x for x in (p.number and f"Project {p.number}", p.revision and f"rev. {p.revision}") if x)
        self.ident = ident
        self.stamp = "  |  ".join(x for x in (case.title, ident, self.date, f"resonance {__version__}",
                                              "screening aid, see the report's caution") if x)

    # ------------------------------------------------------------------------------------
    def layout(self) -> _Doc:
        """Every page in report order (long on purpose: the sections in order, each a short block)."""
        res, data, tbl, specs = self.res, self.data, self.tbl, self.specs
        doc = _Doc(data["case"]["title"], self.paper, self.ident)
        self.doc = doc

        place = self.place

        self.toc_y = self._cover(doc)
        self.cover = doc.fig
        doc.new_page()
        self._summary(doc)

        doc.heading("2 Network and input data", keep=_first_h(specs["one_line"]))
        for spec in specs["one_line"]:
            place(spec)
        doc.para(f"As read from {data['case'].get('file')}; units in brackets; bus voltages line-to-line.")
        if res.case.network is not None:
            doc.para(f"Network elements beyond the tables below come from the pandapower file "
                     f"{res.case.network.pandapower_json}.")
        for t in self.tables:
            if t.name.startswith("table_input_") and t.rows:
                doc.table(t)

        doc.heading("3 Frequency scans", keep=_first_h(specs["overlay"]))
        doc.para("Driving-point impedance magnitude at the bank bus against harmonic order. Shaded: the "
                 f"+-{res.case.study.margin_pct:g} % screening band around each order of concern, which are the "
                 "ticks of the h axis (red, solid line: injected or background order; grey, dashed: characteristic "
                 "order only). Markers: resonance of each step (X: inside a band). Dotted: bank off. Steps differ "
                 "by colour and line style. One plot per step, and all steps in the other scenarios of the operating "
                 "envelope: Appendix A.")
        for spec in specs["overlay"]:
            if spec.page and not spec.name.endswith("_scenarios"):
                place(spec)

        doc.heading("4 Harmonic distortion", keep=_first_h(specs["spectra"]))
        if specs["spectra"]:
            doc.para("Bars: harmonic value of the step with the highest distortion (red: beyond its limit); grey "
                     "ticks: highest value over all steps; amber dashes or ticks: the IEEE 519 limit (at the bank bus "
                     "for reference only: IEEE 519 applies at the PCC). Nominal supply; "
                     "the other scenarios are in the tables of the summary, every order of every step in Appendix C.")
            for spec in specs["spectra"]:
                place(spec)
        else:
            doc.para(f"Harmonic voltage spectra at the bank bus and the PCC: {NOT_EVALUATED}.")

        doc.heading("5 Capacitor duty", keep=_first_h(specs["duty"]))
        if specs["duty"]:
            doc.para("Continuous duty of the capacitors per step against the limits named (amber dashes). Bars: "
                     "nominal supply; markers: the other scenarios of the operating envelope, filled red where "
                     "beyond a limit, so a limit that is exceeded only in one scenario shows here.")
            for spec in specs["duty"]:
                place(spec)
        else:
            doc.para(f"Capacitor duty (rms and crest voltage, rms current, reactive power): {NOT_EVALUATED}.")

        doc.heading("6 Switching", keep=1.2)
        doc.para("Inrush current of every step on switching in, its frequency, the voltage step at the bus and the "
                 "transient voltage on the capacitors, against the switching device's and the capacitor units' "
                 "limits (sources in the table notes); red: beyond a limit.")
        for b in data["banks"]:
            t = tbl.get(f"table_switching_{_safe(b['name'])}.csv")
            if t is not None:
                doc.table(t, size=6.8)
            doc.bullets(switching_words(res, b), size=8.0)
            for spec in specs["switching"]:
                if spec.bank == b["name"]:
                    place(spec)

        self._proposed(doc, place)

        self._appendices(doc)
        self._contents(doc)
        return doc

    def place(self, spec: _FigSpec) -> None:
        """Draw ``spec`` in the next region of the page; a figure that nearly fits the rest of the
        page is drawn a little shorter there rather than leaving the rest blank (never below its
        own ``min_h``)."""
        doc = self.doc
        h = spec.page_h
        if doc.fig is not None and 0.0 < spec.min_h <= doc.room() < h:
            h = doc.room()
        fig, rect = doc.region(h)
        spec.draw(fig, rect)

    def _appendices(self, doc: _Doc) -> None:
        """A: a scan per step; B: every step in every scenario; C: every order of every step;
        D: the detuning candidates; E: methods and assumptions; F: references."""
        res, data, tbl = self.res, self.data, self.tbl
        first = True
        for sc in res.scans:
            if sc.scenario != "nominal":
                continue
            _step_pages(doc, res, sc, res.scans_for(sc.bank.name, "weak"),
                        "Appendix A  Frequency scan of each step" if first else "")
            first = False
            for spec in self.specs["overlay"]:  # the other scenarios after the bank's step pages
                if spec.page and spec.bank == sc.bank.name and spec.name.endswith("_scenarios"):
                    self.place(spec)
        doc.heading("Appendix B  Every step in every scenario")
        doc.para("The step tables of the operating envelope's scenarios (the nominal supply is in the summary), "
                 "for the bank as specified and for the proposed design.", size=8.0)
        for b in data["banks"]:  # one table per bank and per proposed bank or branch, a row group per scenario
            s_ = _safe(b["name"])
            plain = [(scenario_words(sc), tbl[f"table_summary_{s_}_{sc}.csv"]) for sc in (b.get("scenarios") or {})
                     if f"table_summary_{s_}_{sc}.csv" in tbl]
            if plain:
                doc.table(stack_tables(plain, f"appendix_b_{s_}.csv", f"Bank {b['name']}: every step in the other "
                                       "scenarios"), size=7.0)
            prop = rp.proposed_bank(self.rechecks.get(b["name"]), b["name"]) or {}
            flt = chosen_filter(b)
            for nm in ([x["name"] for x in flt["branches"]] if flt and prop else [b["name"]] if prop else []):
                rows = [(scenario_words(sc), tbl[f"table_proposed_{_safe(nm)}_{sc}.csv"])
                        for sc in (prop.get("scenarios") or {}) if f"table_proposed_{_safe(nm)}_{sc}.csv" in tbl]
                if rows:
                    doc.table(stack_tables(rows, f"appendix_b_proposed_{_safe(nm)}.csv", f"Proposed design: "
                                           f"{'branch' if flt else 'bank'} {nm}, every step in the other scenarios"),
                              size=7.0)
        spectra = [t for t in self.tables if t.name.startswith("table_spectrum_")]
        if spectra:
            doc.heading("Appendix C  Harmonic spectra of every step", keep=1.5)
            for t in spectra:
                doc.table(t, size=6.8)
        cands = [t for t in self.tables if t.name.startswith("table_detuning_candidates_")]
        offered = [tbl[f"table_filter_{_safe(b['name'])}.csv"] for b in data["banks"]
                   if offered_filter(b) and f"table_filter_{_safe(b['name'])}.csv" in tbl]
        # where the filter is the recommended design, the detuned alternative's data
        alts = [tbl[f"table_detuning_recommended_{_safe(b['name'])}.csv"] for b in data["banks"]
                if chosen_filter(b) and b["name"] in self.rechecks
                and f"table_detuning_recommended_{_safe(b['name'])}.csv" in tbl]
        if cands or offered or alts:
            doc.heading("Appendix D  Detuning candidates" + (" and the tuned filter offered" if offered else "")
                        + (" and the detuned alternative" if alts else ""), keep=1.5)
        for t in alts:
            doc.table(replace(t, title=t.title.replace("recommended detuned bank", "detuned alternative")), size=6.8)
        if cands:
            doc.para("Every tuning order the search tried, with the reason each was or was not qualified (each "
                     "qualified one passed a re-check by the one assessment in every scenario).", size=8.0)
            for t in cands:
                doc.table(t, size=6.8)
        for t in offered:
            doc.table(t, size=6.8)
        doc.heading("Appendix E  Methods and assumptions")
        meth, mem = _methods(res, data)
        doc.bullets(meth, size=7.2)
        doc.subheading("Taken from memory or common practice (verify against the documents)")
        doc.bullets(mem, size=7.2)
        doc.heading("Appendix F  References", keep=doc.bullets_height(REFERENCES, 7.2))  # the list on one page
        doc.bullets(REFERENCES, size=7.2)

    # ------------------------------------------------------------------------------------
    def _cover(self, doc: _Doc) -> float:
        data, case = self.data, self.result.case
        doc.new_page()
        doc.y = 1.2
        doc.text(M_LEFT, doc.y, "Capacitor bank harmonic screening study", fontsize=11, color=GREY)
        doc.y += 0.3
        for line in doc.meter.wrap(data["case"]["title"], doc.tw, 18, "bold"):
            doc.text(M_LEFT, doc.y, line, fontsize=18, weight="bold")
            doc.y += 0.34
        doc.y += 0.2
        doc.kv(project_lines(case) + [("Date of report", self.date)], size=9.5, key_w=1.5)
        doc.y += 0.12
        n_find = sum(1 for f in data.get("findings", []) if f.get("cause") != "site")
        paper_note = ("as the [project] table sets it" if case.project.paper else
                      f"following the case's {case.frequency_hz} Hz system; set [project] paper to change it")
        doc.kv([("Case file", str(data["case"].get("file") or "-")),
                ("SHA-256", str(data["case"].get("sha256") or "-")),
                ("Tool", f"{data['tool']['name']} {data['tool']['version']}"),
                ("System frequency", f"{data['case']['frequency_hz']} Hz"),
                ("Paper", f"{'US letter' if self.paper == 'letter' else 'A4'} ({paper_note})"),
                ("Banks", ", ".join(f"{b['name']} ({b['bus']}, {sum(b['stages_kvar']):g} kvar)" for b in data["banks"])),
                ("PCC", str(data.get("pcc_bus"))),
                ("Duty limits", limit_set_words(data["settings"].get("duty_limits"))),
                ("Screening result", "every check evaluated passes" if data.get("passed") else
                 f"{n_find} finding(s) of the bank's beyond a limit - see the summary")],
               size=8.5, key_w=1.5, mono_keys=("SHA-256",))
        doc.y += 0.3
        x2 = M_LEFT + doc.tw / 2 + 0.1
        for row, (label, who) in enumerate((("Prepared by:", case.project.prepared_by),
                                            ("Checked by:", case.project.checked_by))):
            y = doc.y + row * 0.42
            doc.text(M_LEFT, y, label, fontsize=9.5, weight="bold")
            if who:
                doc.text(M_LEFT + 1.05, y, who, fontsize=9.5)
            doc.hline(M_LEFT + 1.0, x2 - 0.3, y + 0.2, 0.6)
            doc.text(x2, y, "Signature / date:", fontsize=9.5, weight="bold")
            doc.hline(x2 + 1.35, doc.pw - M_RIGHT, y + 0.2, 0.6)
        doc.y += 0.95
        box_top = doc.y
        doc.y += 0.1
        doc.para(CAUTION, size=9.5, weight="bold", indent=0.12, width=doc.tw - 0.12)
        doc.rect(M_LEFT, box_top, doc.tw, doc.y - box_top + 0.04, "#fbf1dc", edge="#c9a45c")
        doc.y += 0.3
        return doc.y

    def _contents(self, doc: _Doc) -> None:
        y = self.toc_y
        fig = self.cover
        doc.text(M_LEFT, y, "Contents", fig=fig, fontsize=10, weight="bold")
        y += 0.24
        for head, page in doc.toc:
            if y > doc.ph - M_BOTTOM - 0.2:
                break
            doc.text(M_LEFT + 0.1, y, doc.meter.wrap(head, doc.tw - 0.8, 8.5)[0], fig=fig, fontsize=8.5)
            doc.text(doc.pw - M_RIGHT, y, str(page), fig=fig, fontsize=8.5, ha="right")
            y += 0.18

    def _summary(self, doc: _Doc) -> None:
        res, data, tbl = self.res, self.data, self.tbl
        for b in data["banks"]:
            lim = _limits(res, data, b)
            doc.heading(f"1 Summary - bank {b['name']}", keep=2.0)
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
            doc.y += 0.05
            doc.subheading("Verdict", keep=0.5)
            doc.bullets(_verdict(b, data, lim), size=8.0)
            doc.table(tbl[f"table_summary_{_safe(b['name'])}.csv"], size=7.0)
            ov = tbl.get(f"table_scenarios_{_safe(b['name'])}.csv")
            if ov is not None:
                doc.table(ov, size=7.0)
            site = tbl.get(f"table_site_{_safe(b['name'])}.csv")
            if site is not None:
                doc.table(site, size=7.0)
            tis = b.get("time_in_step")
            if tis:
                doc.subheading("Time in each step (metered demand)")
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
                doc.subheading("Notes", size=9)
                doc.bullets(notes, size=7.2)
        other = [w for w in data.get("warnings", []) if not any(f"bank {b['name']} " in w for b in data["banks"])]
        if other:
            doc.bullets(other, size=7.2)

    def _proposed(self, doc: _Doc, place) -> None:
        """Section 7: the proposed design, its proof from its own re-check, the candidates."""
        data, specs, tbl = self.data, self.specs, self.tbl
        doc.heading("7 Proposed design", keep=1.0)
        any_rec = False
        for b in data["banks"]:
            name = b["name"]
            det = (b.get("detuning") or {})
            rec = det.get("recommended")
            rc = self.rechecks.get(name)
            t_rec = tbl.get(f"table_detuning_recommended_{_safe(name)}.csv")
            if chosen_filter(b) and rc is not None:
                any_rec = True
                self._filter(doc, place, b, rc, rec, t_rec)
            elif rec and rc is not None:
                any_rec = True
                verdict = ("passes every check of the bank in every scenario" if not rc.bank_findings else
                           f"leaves {len(rc.bank_findings)} finding(s) of the bank's")
                doc.para(f"Bank {name}: a detuned bank with tuning order n = {rec['tuning_order']:.2f} "
                         f"(p = {rec['detuning_pct']:g} %), capacitors rated {rec['rated_kv']:g} kV, stages "
                         f"{_fmt_any(rec['steps_kvar'])} kvar at rated voltage. The proposal was re-checked by the "
                         f"same assessment as the plain bank: it {verdict}. The tables and figures below are that "
                         "re-check (the numbers 'resonance check' gives for recommended_case.toml).", size=8.5)
                if t_rec is not None:
                    doc.table(t_rec, size=7.0)
                for key in (f"table_proposed_scenarios_{_safe(name)}.csv", f"table_proposed_{_safe(name)}.csv"):
                    if key in tbl:
                        doc.table(tbl[key], size=7.0)
                for spec in specs["compare"] + specs["proposed"] + specs["band"]:
                    if spec.bank == name:
                        place(spec)
                rt = tbl.get(f"table_proposed_reactor_{_safe(name)}.csv")
                if rt is not None:
                    doc.table(rt, size=7.0)
                ct = tbl.get(f"table_construction_{_safe(name)}.csv")
                if ct is not None:
                    doc.table(ct, size=7.0)
                if b.get("filter"):  # offered beside the detuned design: its branches in Appendix D
                    doc.para(f"Tuned filter offered: {b.get('filter_reason', '')} (recommended_filter_case.toml; "
                             "its branches: Appendix D)", size=8.0)
                    key = f"table_filter_pcc_{_safe(name)}.csv"
                    if key in tbl:
                        doc.table(tbl[key], size=7.0)
                elif (b.get("filter_search") or {}).get("candidates"):
                    doc.para(f"Tuned filter: {b.get('filter_reason', '')}", size=8.0)
            elif det:
                doc.para(f"Bank {name}: no detuned design is proposed. {det.get('reason') or det.get('status') or ''}",
                         size=8.5)
            if tbl.get(f"table_detuning_candidates_{_safe(name)}.csv") is not None:
                doc.para("Every candidate the search tried, and why each was or was not chosen: Appendix D.", size=8.0)
        if not any_rec and not any((b.get("detuning") or {}) for b in data["banks"]):
            doc.para(f"Detuning reactor proposal: {NOT_EVALUATED}.")

    def _filter(self, doc: _Doc, place, b: dict, rc, rec, t_rec) -> None:
        """The proposed tuned filter of one bank: the claim, the branches, the PCC, each branch's proof."""
        tbl, name, flt = self.tbl, b["name"], b["filter"]
        own = [f for f in rc.bank_findings if f.bank in {x["name"] for x in flt["branches"]}]
        doc.para(f"Bank {name}: the site's own PCC current is beyond its IEEE 519 limits, which a detuned bank does "
                 f"not change; the recommended design is a tuned filter in the bank's place. {flt['reason']} It was "
                 f"re-checked by the same assessment as the plain bank: {len(own)} finding(s) of its branches, "
                 f"site {'within every limit' if rc.site_passed else 'still with findings of its own'}. The tables "
                 "below are that re-check (the numbers 'resonance check' gives for recommended_case.toml).", size=8.5)
        for key in (f"table_filter_{_safe(name)}.csv", f"table_filter_pcc_{_safe(name)}.csv",
                    f"table_construction_{_safe(name)}.csv"):
            if key in tbl:
                doc.table(tbl[key], size=7.0)
        for br in flt["branches"]:
            t = tbl.get(f"table_proposed_{_safe(br['name'])}.csv")
            if t is not None:
                doc.table(t, size=7.0)
        for spec in self.specs["proposed"]:
            if spec.bank == name:
                place(spec)
        if rec:
            doc.para(f"Alternative, protecting the bank only: a detuned bank with tuning order n = "
                     f"{rec['tuning_order']:.2f} (p = {rec['detuning_pct']:g} %), capacitors rated {rec['rated_kv']:g} kV "
                     "(recommended_detuned_case.toml); it passes the bank's own checks but leaves the site's PCC "
                     "current beyond its limits." + (" Its data: Appendix D." if t_rec is not None else ""), size=8.0)
            for spec in self.specs["compare"]:
                if spec.bank == name:
                    place(spec)

    # ------------------------------------------------------------------------------------
    def decorate(self, doc: _Doc) -> None:
        """Header, footer and caution on every page (also done by :meth:`save`)."""
        for i, (fig, _u) in enumerate(doc.pages, start=1):
            if not getattr(fig, "_decorated", False):
                doc.decorate(fig, i, self.footer_left(), self.footer_right(), CAUTION)
                fig._decorated = True

    def footer_left(self) -> str:
        sha = str(self.data["case"].get("sha256") or "")
        return f"{self.data['case'].get('file')}  sha256 {sha[:12]}  |  {self.date}"

    def footer_right(self) -> str:
        p = self.result.case.project
        who = ", ".join(x for x in (p.prepared_by and f"prepared {p.prepared_by}",
                                    p.checked_by and f"checked {p.checked_by}") if x)
        return who

    def save(self, doc: _Doc, path) -> None:
        title = self.data["case"]["title"]
        with PdfPages(path, metadata={"CreationDate": None, "Creator": f"resonance {__version__}",
                                      "Producer": None, "Title": title}) as pdf:
            doc.save(pdf, self.footer_left(), self.footer_right(), CAUTION)


def _first_h(specs: list) -> float:
    """Room a section heading keeps for its first figure (which may be drawn shortened) [in]."""
    return (specs[0].min_h or specs[0].page_h) + 0.3 if specs else 0.0

"""Figures of the submittal report: specs that draw into a page region or a stand-alone file.

Edge layer (matplotlib Agg).  A :class:`_FigSpec` draws one figure into any
rectangle of any figure, so the same code fills a region of a report page and a
stand-alone PNG/SVG file.  :func:`file_jobs` lists the stand-alone files as
:class:`FileJob` objects that can run in any process and in any order: each one
starts from a fresh figure, so its files do not depend on what ran before.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable

import numpy as np
from matplotlib.figure import Figure

from resonance.report import figures as rf
from resonance.report.layout import INK, M_BOTTOM, M_LEFT, M_TOP, _Doc
from resonance.report.tables import (DUTY_KEYS, chosen_filter, _detuning, _get, _has_duty, _limits, _Limits, _num,
                            _safe, _spectrum, _thd_bus, _thd_pcc, limit_set_words)
from resonance.report import proposed as rp
from resonance.assessment.envelope import scenario_words
from resonance.assessment.study import BankScan, StudyResult
from resonance.report.switching_report import SWITCH_FIG_SIZE, draw_switching

__all__ = ["FileJob", "file_jobs", "render_aside", "SERIAL_ENV", "save_png_svg", "STEP_SIZE", "STEP_CHUNK", "PNG_SAVE",
           "FOOTER_H"]

#: height of the footer strip under every stand-alone figure (title, case, revision, date) [in]
FOOTER_H = 0.24


@dataclass(frozen=True)
class _FigSpec:
    name: str          # file stem
    size: tuple        # stand-alone size (w, h) [in]
    draw: Callable     # draw(fig, rect_in) with rect_in = (x, y_bottom, w, h) [in] inside fig
    page_h: float      # height on the report page [in]
    bank: str = ""      # bank the figure belongs to
    page: bool = True   # drawn on a report page
    file: bool = True   # written as a stand-alone file
    min_h: float = 0.0  # may be drawn down to this height [in] to fill the rest of a page (0: never)


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
STEP_PAGE_H = 2.3          # height of one per-step plot on a page [in] (four a page)
STEPS_PER_PAGE = 4
OVERLAY_PAGE_H = 3.4       # height of a whole-bank scan on a page [in]
PROPOSED_SCAN_H = 3.0      # height of the proposed design's scan on a page [in]
SCAN_MIN_H = 2.8           # a whole-bank scan drawn shorter to fill a page, not below [in]
DUTY_PAGE_H = 3.9          # height of the 2 x 2 duty grid on a page [in]
SPECTRUM_PANEL_H = 2.2    # height of one row of spectrum panels (two a row) [in]
SPECTRUM_MIN_H = 1.85     # ... drawn shorter to fill a page, not below [in]
SWITCH_PAGE_H = 2.5        # height of the switching figure on a page [in]
REACTOR_PAGE_H = 1.3       # height of the reactor chart on a page [in]
BAND_PAGE_H = 2.3          # height of the tuning-band figure on a page [in]


def _spectrum_panels(bank: dict, b, data: dict, lim: _Limits) -> list[tuple]:
    steps = bank["steps"]
    ed = data["settings"].get("ieee519_edition")
    v_bus = _get(bank.get("limits"), "bus_v_limits") or {}
    out = []
    for where, ind, label, ylab in (
            ("bus", _num(v_bus.get("individual_pct")), f"bank bus {b.bus}", "V_h [% of nominal]"),
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
        ref = "; reference only" if where == "bus" else ""
        out.append((hs, vals, env, limit, lab, f"{label}\nstep {steps[worst]['step']} ({crit}{ref})", ylab))
    return out


def _duty_others(bank: dict) -> dict:
    """Scenario -> (words, quantity -> per-step duty values) of every scenario but the nominal one."""
    out = {}
    for scen, body in (bank.get("scenarios") or {}).items():
        st = body.get("steps") or []
        if st:
            out[scen] = (scenario_words(scen), {q: [_num(x.get(k)) for x in st] for q, k in DUTY_KEYS.items()})
    return out


def _duty_spec(name: str, bank: dict, lim: _Limits, title_bank: str) -> _FigSpec:
    steps = bank["steps"]
    vals = {q: [_num(x.get(k)) for x in steps] for q, k in DUTY_KEYS.items()}
    nums = [x["step"] for x in steps]
    others = _duty_others(bank)
    return _FigSpec(name, (7.4, 4.6),
                    lambda fig, r, v=vals, n=nums, lm=lim, o=others: rf.draw_duty(
                        _grid(fig, r, 2, 2), n, v, lm.duty, limit_set_words(lm.duty_name), o), DUTY_PAGE_H, title_bank,
                    min_h=DUTY_PAGE_H - 0.6)


def _proposed_specs_for(res: StudyResult, name: str, recheck, det: BankScan | None, bank: dict,
                        plain: BankScan) -> list[_FigSpec]:
    """Figures of the proposed design of bank ``name``: every step's scan, its duty in every
    scenario and its reactors, all from the re-check that accepted it (``bank``: the check's own
    entry of the bank, which holds the proposal)."""
    out = []
    s = _safe(name)
    pb = rp.proposed_bank(recheck, name)
    flt = bank.get("filter")
    if chosen_filter(bank):  # the chosen design is a tuned filter: its scan, branch by branch
        from resonance.report.filter_report import draw_filter_scan  # noqa: PLC0415

        names = [b["name"] for b in flt["branches"]]
        out.append(_FigSpec(
            f"scan_{s}_filter", (8.2, 4.0),
            lambda fig, r, rr=recheck.study, nm=names: draw_filter_scan(
                _axes(fig, r, (0.72, 0.45, 0.5, 0.42)), rr, plain, nm,
                f"Proposed tuned filter in place of bank {name}: the branches switched in, nominal supply"),
            PROPOSED_SCAN_H, name, min_h=SCAN_MIN_H))
        return out  # each branch is one step: its duty in every scenario is in the branch table
    if det is not None:
        out.append(_FigSpec(
            f"scan_{s}_proposed", (8.2, 4.0),
            lambda fig, r, d=det, rr=recheck.study: rf.draw_scan_all(
                _axes(fig, r, LEGEND_PAD), rr, d, f"Proposed design of bank {name}: n = {d.bank.p ** -0.5:.2f} "
                f"(p = {100 * d.bank.p:.3g} %), all steps, nominal supply", plain=plain),
            PROPOSED_SCAN_H, name, min_h=SCAN_MIN_H))
    if pb is not None and _has_duty(pb):
        out.append(replace(_duty_spec(f"fig_duty_{s}_proposed", pb, _limits(recheck.study, recheck.data, pb), name),
                           page_h=DUTY_PAGE_H - 0.4))
    rec, _c = _detuning(bank)
    rows = rp.reactor_rows(rec) if rec else ()
    if rows:
        out.append(_FigSpec(f"fig_reactor_{s}_proposed", rp.REACTOR_FIG_SIZE,
                            lambda fig, r, rows=rows: rp.draw_reactor(
                                _axes(fig, r, (0.72, 0.25, 0.5, 0.42)), rows,
                                f"Proposed design of bank {name}: detuning reactor of each stage"),
                            REACTOR_PAGE_H, name))
    return out


def _fig_specs(res: StudyResult, data: dict, detuned: dict | None = None, rechecks: dict | None = None,
               one_line=None) -> dict[str, list]:
    """Figure specs per report section (the per-step plots are handled apart, see :func:`_step_pages`)."""
    specs: dict[str, list] = {"overlay": [], "compare": [], "spectra": [], "duty": [], "band": [], "switching": [],
                              "proposed": [], "one_line": []}
    if one_line is not None:
        from resonance.report.one_line import draw_one_line, one_line_size  # noqa: PLC0415

        w = 7.2
        h = min(one_line_size(one_line, w), 8.0)
        specs["one_line"].append(_FigSpec(
            "one_line", (w, h), lambda fig, r, d=one_line: draw_one_line(fig, r, d, f"One-line diagram: {res.case.title}"),
            h))
    banks = {b["name"]: b for b in data["banks"]}
    for sc in res.scans:
        if sc.scenario != "nominal":
            continue
        b = sc.bank
        s = _safe(b.name)
        weak = res.scans_for(b.name, "weak")
        specs["overlay"].append(_FigSpec(
            f"scan_{s}", (8.2, 4.0),
            lambda fig, r, sc=sc: rf.draw_scan_all(_axes(fig, r, LEGEND_PAD), res, sc,
                                                   f"Bank {sc.bank.name}: all steps, nominal supply"), OVERLAY_PAGE_H,
            b.name, min_h=SCAN_MIN_H))
        if weak is not None:
            specs["overlay"].append(_FigSpec(
                f"scan_{s}_weak", (8.2, 4.0),
                lambda fig, r, w=weak: rf.draw_scan_all(_axes(fig, r, LEGEND_PAD), res, w,
                                                        f"Bank {w.bank.name}: all steps, weak supply"),
                OVERLAY_PAGE_H, b.name))
        # the other scenarios of the envelope, drawn where they govern (a finding of the bank's
        # there): each its own file; on the page, weak supply and these side by side in one figure
        own = {f.get("scenario") for f in data.get("findings", ())
               if f.get("bank") == b.name and f.get("cause", "bank") == "bank"}
        panels = [(weak, "weak supply")] if weak is not None else []
        if weak is not None:
            specs["overlay"][-1] = replace(specs["overlay"][-1], page=False)
        for sn in res.scenarios:
            other = res.scans_for(b.name, sn.name)
            if sn.name in ("nominal", "weak") or other is None or sn.name not in own:
                continue
            panels.append((other, sn.words))
            specs["overlay"].append(_FigSpec(
                f"scan_{s}_{sn.name}", (8.2, 4.0),
                lambda fig, r, o=other, w=sn.words: rf.draw_scan_all(_axes(fig, r, LEGEND_PAD), res, o,
                                                                     f"Bank {o.bank.name}: all steps, {w}"),
                OVERLAY_PAGE_H, b.name, page=False))
        if panels:
            ncol = 1 if len(panels) == 1 else 2
            nrow = -(-len(panels) // ncol)
            h_grid = 2.25 * nrow + 0.25

            def draw_grid(fig, r, panels=panels, ncol=ncol, nrow=nrow, nm=b.name):
                x, y, w, h = r
                axes = _grid(fig, (x, y, w, h - 0.25), nrow, ncol, (0.62, 0.15, 0.45, 0.3))
                for ax, (scan, words) in zip(axes, panels):
                    rf.draw_scan_all(ax, res, scan, words, legend=False, h_hi=rf.step_view(scan, None))
                for ax in axes[len(panels):]:
                    ax.set_visible(False)
                fw, fh = fig.get_size_inches()
                fig.text((x + 0.1) / fw, (y + h - 0.05) / fh, f"Bank {nm}: all steps in the other scenarios "
                         "(steps coloured and styled as above)", fontsize=9, weight="bold", color=INK, va="top")

            specs["overlay"].append(_FigSpec(f"scan_{s}_scenarios", (8.2, h_grid), draw_grid, h_grid, b.name,
                                             file=False, min_h=2.0 * nrow + 0.25))
        det = (detuned or {}).get(b.name)
        bank = banks.get(b.name)
        if bank is None:
            continue
        lim = _limits(res, data, bank)
        steps = bank["steps"]
        panels = _spectrum_panels(bank, b, data, lim)
        if panels:  # two a row
            ncol = 1 if len(panels) == 1 else 2
            nrow = -(-len(panels) // ncol)

            def draw_sp(fig, r, panels=panels, nrow=nrow, ncol=ncol, ed=data["settings"].get("ieee519_edition")):
                axes = _grid(fig, r, nrow, ncol, (0.62, 0.15, 0.45, 0.45))
                spare = axes[len(panels):]  # an empty slot holds one key for all panels
                for ax, p in zip(axes, panels):
                    rf.draw_spectrum(ax, *p, legend=not spare)
                for k, ax in enumerate(spare):
                    if k == 0:
                        rf.spectrum_key(ax, ed)
                    else:
                        ax.set_visible(False)
            specs["spectra"].append(_FigSpec(f"fig_spectrum_{s}", (7.4, SPECTRUM_PANEL_H * nrow), draw_sp,
                                             SPECTRUM_PANEL_H * nrow, min_h=SPECTRUM_MIN_H * nrow))
        if _has_duty(bank):
            specs["duty"].append(_duty_spec(f"fig_duty_{s}", bank, lim, b.name))
        rc = (rechecks or {}).get(b.name)
        if rc is not None:
            specs["proposed"] += _proposed_specs_for(res, b.name, rc, det, bank, sc)
        every = [x for x in res.switching if x.bank == b.name and x.wave_a.size]
        if every:  # the governing step over every scenario
            gov = max(every, key=lambda x: x.governing().peak_a)
            ttl = f"Bank {b.name}: step {gov.governing().step} switched in, {scenario_words(gov.scenario)}"
            specs["switching"].append(_FigSpec(
                f"fig_switching_{s}", SWITCH_FIG_SIZE,
                lambda fig, r, g=gov, t=ttl: draw_switching(*_grid(fig, r, 1, 2, (0.62, 0.2, 0.45, 0.35)), g, t),
                SWITCH_PAGE_H, b.name, min_h=SWITCH_PAGE_H - 0.3))
        rec, _c = _detuning(bank)
        n_t = _num(_get(rec, "tuning_order")) if rec else None
        p_pct = _num(_get(rec, "detuning_pct")) if rec else None
        band = _get(rec, "tuning_band") if rec else None
        hp = _get(_get(rec, "parallel_resonance"), "nominal") if rec else None
        if rec and n_t and p_pct and band and hp:
            tol = _get(rec, "tolerance_pct") or {}
            c, ind = tol.get("capacitance") or (None, None), tol.get("inductance") or (None, None)
            label = (f"capacitance {c[0]:+g}/{c[1]:+g} %, inductance {ind[0]:+g}/{ind[1]:+g} %"
                     if None not in (*c, *ind) else "the proposal's tolerances")
            hp_arr = np.asarray([_num(x) for x in hp], float)
            specs["band"].append(_FigSpec(
                f"fig_detuning_{s}", (8.2, 3.6),
                lambda fig, r, n_t=n_t, p=p_pct / 100.0, bd=tuple(band), lb=label, hp=hp_arr,
                k=np.arange(1, hp_arr.size + 1), d=_get(rec, "lowest_significant_order"),
                m=_num(_get(rec, "order_margin_pct")), nm=b.name:
                rf.draw_detuning_band(_axes(fig, r, (0.72, 2.6, 0.5, 0.42)), n_t, p, bd, lb, hp, k, d, m,
                                      f"Bank {nm}: recommended detuning"), BAND_PAGE_H, b.name, min_h=BAND_PAGE_H - 0.3))
    return specs


#: PNG writer options: zlib level 1 (level 6, the default, takes about 1.6 times as long to
#: encode a report figure for a file about 8 % smaller: flat colour compresses well at any level)
PNG_SAVE = {"compress_level": 1}
#: steps per per-step file job: small enough to share the work between processes, large
#: enough that the axes set-up (bands, ticks) is paid for a few files at a time
STEP_CHUNK = 4


def save_png_svg(fig: Figure, png: Path, svg: Path) -> None:
    """Write ``fig`` as PNG (at :data:`resonance.report.figures.PNG_DPI`) and SVG, without dates.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        Figure to write.
    png, svg : Path
        Target files.
    """
    fig.savefig(png, dpi=rf.PNG_DPI, metadata={"Software": None}, pil_kwargs=PNG_SAVE)
    fig.savefig(svg, metadata={"Date": None})


@dataclass(frozen=True)
class FileJob:
    """Stand-alone figure files written by one call.

    ``render(paths)`` draws and writes the files named ``names`` to ``paths``
    (same order).  A job builds its own figure, so it may run in any process.
    """

    names: tuple
    render: Callable


def _footer(fig: Figure, stamp: str) -> None:
    """The small footer of a stand-alone figure: what it is, case, revision, date."""
    fw, fh = fig.get_size_inches()
    fig.text(0.08 / fw, 0.07 / fh, stamp, fontsize=5.8, color="#5b6672", va="bottom", ha="left")
    from matplotlib.lines import Line2D  # noqa: PLC0415
    fig.add_artist(Line2D([0.08 / fw, 1 - 0.08 / fw], [(FOOTER_H - 0.03) / fh] * 2, lw=0.4, color="#5b6672"))


def _spec_job(spec: _FigSpec, stamp: str) -> FileJob:
    def render(paths):
        w, h = spec.size
        fig = rf.new_figure(w, h + FOOTER_H)
        spec.draw(fig, (0.0, FOOTER_H, w, h))
        _footer(fig, stamp)
        save_png_svg(fig, *paths)
    return FileJob((f"{spec.name}.png", f"{spec.name}.svg"), render)


def _step_jobs(res: StudyResult, sc: BankScan, weak: BankScan | None, stamp: str) -> list[FileJob]:
    """One PNG per step (the scan figures of the whole bank come as PNG and SVG); each job
    re-points one figure at :data:`STEP_CHUNK` steps."""
    stem = f"scan_{_safe(sc.bank.name)}_step"
    ks = [st.step for st in sc.steps]
    out = []
    for i in range(0, len(ks), STEP_CHUNK):
        chunk = tuple(ks[i:i + STEP_CHUNK])

        def render(paths, chunk=chunk):
            w, h = STEP_SIZE
            fig = rf.new_figure(w, h + FOOTER_H)
            plot = rf.StepScanPlot(_axes(fig, (0.0, FOOTER_H, w, h)), res, sc, weak)
            _footer(fig, stamp)
            for j, k in enumerate(chunk):
                plot.show(k)
                fig.savefig(paths[j], dpi=rf.PNG_DPI, metadata={"Software": None}, pil_kwargs=PNG_SAVE)

        out.append(FileJob(tuple(f"{stem}{k}.png" for k in chunk), render))
    return out


def file_jobs(res: StudyResult, specs: dict[str, list], stamp: str = "") -> list[FileJob]:
    """Every stand-alone figure file of the report, in report order.

    Parameters
    ----------
    res : StudyResult
        Study result.
    specs : dict
        Figure specs per section from :func:`_fig_specs`.
    stamp : str
        Footer of every figure: case title, project, revision, date [unitless].

    Returns
    -------
    list of FileJob
        Per bank its overlay scans and per-step scans, then the compared scans,
        spectra, duty and detuning figures.
    """
    jobs = []
    for sc in res.scans:
        if sc.scenario != "nominal":
            continue
        jobs += [_spec_job(s, stamp) for s in specs["overlay"] if s.bank == sc.bank.name and s.file]
        jobs += _step_jobs(res, sc, res.scans_for(sc.bank.name, "weak"), stamp)
    for sec in ("one_line", "compare", "spectra", "duty", "switching", "proposed", "band"):
        jobs += [_spec_job(s, stamp) for s in specs[sec] if s.file]
    return jobs


def _step_pages(doc: _Doc, res: StudyResult, sc: BankScan, weak: BankScan | None, heading: str = "") -> None:
    """Four per-step plots a page (:data:`STEPS_PER_PAGE`): one page figure, re-pointed for every group of steps."""
    pw, ph, tw = doc.pw, doc.ph, doc.tw
    fig = Figure(figsize=(pw, ph))
    y = M_TOP
    if heading:
        doc.text(M_LEFT, y, heading, fig=fig, fontsize=13, weight="bold")
        doc.toc.append((heading, len(doc.pages) + 1))
        y += 13 / 72 * 1.55 + 0.05
    doc.text(M_LEFT, y, f"Bank {sc.bank.name}: one plot per step"
             + (" (dashed: weak supply)" if weak is not None else ""), fig=fig, fontsize=9.5, weight="bold")
    top = ph - y - 0.3
    k_page = STEPS_PER_PAGE
    step_h = min(STEP_PAGE_H, (top - M_BOTTOM + 0.1) / k_page)
    rects = [(M_LEFT - 0.1, top - (i + 1) * step_h, tw + 0.2, step_h - 0.1) for i in range(k_page)]
    plots = []
    for r in rects:
        doc.regions.append((fig, len(fig.axes), (r[0], r[0] + r[2], ph - r[1] - r[3], ph - r[1])))
        plots.append(rf.StepScanPlot(_axes(fig, r, (0.72, 0.25, 0.45, 0.3)), res, sc, weak))
    n = len(sc.steps)

    def group(k):
        def update():
            for j, plot in enumerate(plots):
                plot.ax.set_visible(k + j <= n)
                if k + j <= n:
                    plot.show(k + j)
        return update

    doc.shared_pages(fig, [group(k) for k in range(1, n + 1, k_page)])


#: environment variable that keeps the stand-alone figures in the calling process ("1")
SERIAL_ENV = "RESONANCE_REPORT_SERIAL"


def render_aside(jobs: list, paths: list):
    """Start writing the stand-alone figure files (:class:`~resonance.report.specs.FileJob`) in a
    forked child process while the caller lays out and writes the PDF; returns ``wait()``, which
    joins the child (the files are complete when it returns).

    Parameters
    ----------
    jobs : list of FileJob
        The files to draw (each builds its own figure, so it may run in any process).
    paths : list of tuple of Path
        Target paths of each job, already staged in the output directory by the caller.

    Returns
    -------
    callable
        ``wait(redraw=True)``: blocks until the files are written.  Where the child failed, the
        files are drawn again in the calling process (unless ``redraw`` is false), so its error
        (if it is one of the code's) is raised there and reaches the command's defect handler.

    Notes
    -----
    The child is made by ``os.fork`` only where that is safe: a POSIX system and a process with
    a single thread (a forked copy of a threaded process may hold another thread's lock).  Else
    (Windows, a batch worker's threads, :data:`SERIAL_ENV` = ``1``) the files are drawn first, in
    the caller.  The child leaves with ``os._exit``, so it flushes no buffer and runs no exit
    handler of the parent's; it stops before its next file when the caller is gone, and
    ``wait(redraw=False)`` (the caller's error path) ends it at once, so no child outlives a
    stopped run by more than one figure.
    """
    import os  # noqa: PLC0415
    import sys  # noqa: PLC0415
    import threading  # noqa: PLC0415

    def draw(parent: int | None = None) -> None:
        for job, p in zip(jobs, paths):
            if parent is not None and os.getppid() != parent:  # the run was stopped: stop too
                os._exit(1)
            job.render(p)

    if not jobs or not hasattr(os, "fork") or threading.active_count() > 1 or os.environ.get(SERIAL_ENV) == "1":
        draw()
        return lambda redraw=True: None
    for stream in (sys.stdout, sys.stderr):
        stream.flush()
    me = os.getpid()
    pid = os.fork()
    if pid == 0:  # the child: draw, then leave without touching the parent's state
        code = 1
        try:
            draw(parent=me)
            code = 0
        finally:
            os._exit(code)

    def wait(redraw: bool = True) -> None:
        if not redraw:  # the caller failed or was interrupted: the files are not wanted
            import signal  # noqa: PLC0415

            try:
                os.kill(pid, signal.SIGTERM)
            except ProcessLookupError:
                pass
        _pid, status = os.waitpid(pid, 0)
        if os.waitstatus_to_exitcode(status) != 0 and redraw:
            draw()
    return wait

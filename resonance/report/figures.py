"""Figure drawers for the submittal report (edge layer, matplotlib Agg).

Every drawer paints into an axes it is given, so the same code fills a region
of a report page and a stand-alone PNG/SVG figure.  Drawers take the study
objects or plain numbers; they compute nothing beyond what a label needs.
The look follows :data:`resonance.report.plots.STYLE`.
"""

from __future__ import annotations

import math


import numpy as np  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import FuncFormatter, LogLocator, MultipleLocator, NullFormatter, NullLocator  # noqa: E402

from resonance.report.plots import STYLE, _style_axes, mark_orders  # noqa: E402
from resonance.assessment.study import BankScan, StudyResult  # noqa: E402

__all__ = [
    "FONT",
    "PNG_DPI",
    "RC",
    "new_figure",
    "step_color",
    "draw_scan_all",
    "draw_scan_step",
    "StepScanPlot",
    "step_view",
    "draw_scan_compare",
    "draw_spectrum",
    "spectrum_key",
    "draw_duty",
    "draw_detuning_band",
    "ordinal",
]

FONT = "DejaVu Sans"
#: resolution of stand-alone PNG figures [dots per inch]; modest for speed, readable on screen
PNG_DPI = 110
#: rc settings for every report figure: one font, Type 3 in PDF (small, fast, text extractable),
#: fixed SVG ids and hash salt so the same input gives byte-identical SVG files; titles at a fixed
#: height (``axes.titley`` given: matplotlib skips placing them clear of top-side tick labels by
#: measuring every child's extent at each draw, which no report axes needs: its ticks are at the
#: bottom, so the title lands where the automatic placement would put it); PNG text unhinted,
#: like the glyph outlines of the PDF and SVG (same widths in every format; laying a string out
#: is about a third cheaper; this rc leaves PDF and SVG output unchanged)
RC = {
    "font.family": FONT,
    "font.size": 8.0,
    "text.hinting": "no_hinting",
    "pdf.fonttype": 3,
    "svg.fonttype": "none",
    "svg.hashsalt": "resonance-report",
    "svg.id": "resonance",
    "path.simplify": True,
    "axes.titlesize": 9.0,
    "axes.titley": 1.0,
    "axes.labelsize": 8.0,
    "legend.fontsize": 6.5,
}


def new_figure(w_in: float, h_in: float) -> Figure:
    """A bare matplotlib figure (no pyplot state) of the given size [in]."""
    return Figure(figsize=(w_in, h_in), dpi=PNG_DPI)


def ordinal(n: int) -> str:
    """``5 -> '5th'``, ``3 -> '3rd'`` [unitless]."""
    n = int(n)
    suf = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suf}"


#: line styles cycled over the steps, so curves stay apart in grey print
STEP_DASHES = ("-", (0, (5, 1.5)), (0, (3, 1, 1, 1)), (0, (1.2, 1.2)))


def step_style(k: int, n: int) -> dict:
    """Line keywords of step ``k`` of ``n``: colour, line style and, for the pale end of the map,
    a dark edge (a stroke behind the line) so it reads on white paper and in grey."""
    import matplotlib.colors as mcolors  # noqa: PLC0415
    from matplotlib import patheffects as pe  # noqa: PLC0415

    col = step_color(k, n)
    r, g, b = mcolors.to_rgb(col)
    kw = {"color": col, "ls": STEP_DASHES[(k - 1) % len(STEP_DASHES)]}
    if 0.2126 * r + 0.7152 * g + 0.0722 * b > 0.55:  # relative luminance (ITU-R BT.709 weights)
        kw["path_effects"] = [pe.Stroke(linewidth=2.3, foreground=STYLE["ink"], alpha=0.75), pe.Normal()]
    return kw


def plain_numbers(ax) -> None:
    """Plain decimal tick labels on linear axes (no offset, no powers of ten) [unitless]."""
    from matplotlib.ticker import ScalarFormatter  # noqa: PLC0415

    for axis in (ax.xaxis, ax.yaxis):
        if axis.get_scale() == "linear":
            f = ScalarFormatter(useOffset=False)
            f.set_scientific(False)
            axis.set_major_formatter(f)
        elif axis.get_scale() == "log":
            axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
            axis.set_minor_formatter(NullFormatter())


def step_color(k: int, n: int):
    """Colour of step ``k`` of ``n`` on the sequential step map."""
    import matplotlib as mpl  # noqa: PLC0415

    cmap = mpl.colormaps[STYLE["cmap"]]
    return cmap(0.1 + 0.8 * (k - 1) / max(n - 1, 1))


def _log_ticks(ax, h_hi: float) -> None:
    """Plain-number |Z| labels on decades (no mathtext), unlabelled 2-5 minor ticks, no minor grid.

    Text artists dominate the drawing time of a scan, so labels are kept few:
    the orders of concern label the h axis (:func:`_order_ticks`).
    """
    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    ax.yaxis.set_minor_locator(LogLocator(base=10.0, subs=(2.0, 5.0)))
    ax.yaxis.set_minor_formatter(NullFormatter())
    ax.xaxis.set_minor_locator(NullLocator())
    ax.grid(False, which="minor")
    ax.grid(False, axis="x")


def _label_axes(ax, bus: str, title: str) -> None:
    ax.set_xlabel("harmonic order h [-]", color=STYLE["ink"])
    ax.set_ylabel(f"|Z| at bus {bus} [ohm]", color=STYLE["ink"])
    ax.set_title(title, color=STYLE["ink"], loc="left", fontsize=9)


def _ylim_log(ax, curves, lo_h, hi_h, h):
    sel = (h >= lo_h) & (h <= hi_h)
    vals = np.concatenate([c[sel] for c in curves if c is not None])
    vals = vals[np.isfinite(vals) & (vals > 0)]
    if vals.size:
        ax.set_ylim(vals.min() / 1.6, vals.max() * 3.0)


def _order_ticks(ax, res: StudyResult, h_hi: float) -> None:
    """The orders of concern as the ticks of the h axis, injected/background ones in red."""
    inj = set(res.orders.injected) | set(res.orders.background)
    hs = [h for h, _kind in res.orders.all() if h <= h_hi]
    if not hs:
        ax.xaxis.set_major_locator(MultipleLocator(5.0 if h_hi > 16 else 1.0))
        return
    ax.set_xticks(hs, [str(h) for h in hs])
    for h, lab in zip(hs, ax.get_xticklabels()):
        lab.set_color(STYLE["injected"] if h in inj else STYLE["characteristic"])
    ax.tick_params(axis="x", labelsize=7)


def draw_scan_all(ax, res: StudyResult, sc: BankScan, title: str, legend: bool = True,
                  plain: BankScan | None = None, h_hi: float | None = None) -> None:
    """All steps of one bank overlaid, bank off dotted, resonances marked.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    res : StudyResult
        Study (orders of concern, screening margin).
    sc : BankScan
        The bank's scan in one scenario: ``h`` [unitless], ``z_ohm`` [ohm].
    title : str
        Axes title [unitless].
    legend : bool
        Draw the legend (right of the axes).
    plain : BankScan, optional
        The bank as specified, same scenario: its full bank is drawn beside ``sc``'s steps
        (for a proposed design overlaid on the plain bank) [ohm].
    h_hi : float, optional
        Upper end of the h axis (default: the scan's end) [unitless].
    """
    _style_axes(ax)
    h_max = float(sc.h[-1]) if h_hi is None else min(float(h_hi), float(sc.h[-1]))
    mark_orders(ax, res, h_max, res.case.study.margin_pct)
    n = len(sc.steps)
    ax.semilogy(sc.h, sc.z_ohm[0], color=STYLE["off"], lw=0.9, ls=(0, (1, 1.5)), label="bank off")
    if plain is not None:
        ax.semilogy(plain.h, plain.z_ohm[-1], color=STYLE["injected"], lw=1.3, ls=(0, (6, 2)),
                    label=f"as specified, all {len(plain.steps)} steps in")
    for st in sc.steps:
        sty = step_style(st.step, n)
        col = sty["color"]
        lab = f"step {st.step}: {st.kvar_nameplate:g} kvar" + (f", h {st.h_scan:.2f}" if st.h_scan else "")
        ax.semilogy(sc.h, sc.z_ohm[st.step], lw=1.1, label=lab, **sty)
        if st.h_scan is not None:
            ax.plot([st.h_scan], [st.z_peak_ohm], ls="none", marker="v" if st.resonance_ok else "X", ms=5,
                    color=col if st.resonance_ok else STYLE["injected"], mec=STYLE["ink"], mew=0.4, zorder=5)
    ax.set_xlim(1.0, h_max)
    _ylim_log(ax, list(sc.z_ohm), 1.0, h_max, sc.h)
    _log_ticks(ax, h_max)
    _order_ticks(ax, res, h_max)
    _label_axes(ax, sc.bank.bus, title)
    if legend:
        ax.legend(frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)


def step_view(sc: BankScan, weak: BankScan | None) -> float:
    """Upper end of the per-step scan axes, common to every step of a bank [unitless].

    Wide enough to show the highest resonance of any step (nominal or weak supply)
    with room to spare, never past the scan's own end.
    """
    hs = [s.h_scan for x in (sc, weak) if x is not None for s in x.steps if s.h_scan is not None]
    return min(float(sc.h[-1]), max(15.0, 1.5 * max(hs))) if hs else float(sc.h[-1])


class StepScanPlot:
    """A per-step scan axes drawn once and re-pointed at each step (fast: ticks, bands reused).

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    res : StudyResult
        Study (orders of concern, screening margin [%]).
    sc : BankScan
        Nominal-supply scan of the bank [ohm].
    weak : BankScan, optional
        Weak-supply scan, drawn dashed [ohm].

    Notes
    -----
    :meth:`show` sets the curves, the resonance markers and the words for step
    ``k``; the shaded +-margin bands and the order lines stay.
    """

    def __init__(self, ax, res: StudyResult, sc: BankScan, weak: BankScan | None = None):
        self.ax, self.res, self.sc, self.weak = ax, res, sc, weak
        _style_axes(ax)
        self.h_hi = step_view(sc, weak)
        self.margin = res.case.study.margin_pct
        mark_orders(ax, res, self.h_hi, self.margin)
        ax.semilogy(sc.h, sc.z_ohm[0], color=STYLE["off"], lw=0.9, ls=(0, (1, 1.5)), label="bank off")
        (self.l_nom,) = ax.semilogy(sc.h, sc.z_ohm[1], lw=1.5, label="nominal supply")
        self.l_weak = None
        if weak is not None:
            (self.l_weak,) = ax.semilogy(weak.h, weak.z_ohm[1], lw=1.2, ls=(0, (4, 2)), label="weak supply")
        self.v_est = ax.axvline(1.0, color=STYLE["ink"], lw=0.6, ls=(0, (1, 2)), zorder=2)
        self.t_est = ax.annotate("", (1.0, 0.02), xycoords=("data", "axes fraction"), xytext=(2, 0),
                                 textcoords="offset points", rotation=90, fontsize=6, color=STYLE["ink"],
                                 va="bottom", ha="left")
        self.marks, self.notes = [], []
        for y in (0.97, 0.905):
            (m,) = ax.plot([np.nan], [np.nan], ls="none", ms=6, mec=STYLE["ink"], mew=0.5, zorder=6)
            t = ax.text(0.015, y, "", transform=ax.transAxes, fontsize=7, ha="left", va="top", zorder=7,
                        bbox={"boxstyle": "square,pad=0.15", "facecolor": "white", "edgecolor": "none",
                              "alpha": 0.85})
            self.marks.append(m)
            self.notes.append(t)
        ax.set_xlim(1.0, self.h_hi)
        _log_ticks(ax, self.h_hi)
        _order_ticks(ax, res, self.h_hi)
        _label_axes(ax, sc.bank.bus, "")
        self.legend = ax.legend(frameon=False, loc="lower right")

    def show(self, k: int) -> None:
        """Point the axes at step ``k`` (1..N) [unitless]."""
        sc, weak, ax = self.sc, self.weak, self.ax
        st = sc.steps[k - 1]
        st_w = weak.steps[k - 1] if weak is not None and k <= len(weak.steps) else None
        sty = step_style(k, len(sc.steps))
        col = sty["color"]
        self.l_nom.set_ydata(sc.z_ohm[k])
        self.l_nom.set_color(col)
        self.l_nom.set_path_effects(sty.get("path_effects", []))
        curves = [sc.z_ohm[0], sc.z_ohm[k]]
        if self.l_weak is not None:
            self.l_weak.set_visible(st_w is not None)
            if st_w is not None:
                self.l_weak.set_ydata(weak.z_ohm[k])
                self.l_weak.set_color(col)
                self.l_weak.set_path_effects(sty.get("path_effects", []))
                curves.append(weak.z_ohm[k])
        self.legend.get_lines()[1].set_color(col)
        self.legend.get_lines()[1].set_path_effects(sty.get("path_effects", []))
        if self.l_weak is not None:
            self.legend.get_lines()[2].set_color(col)
            self.legend.get_lines()[2].set_path_effects(sty.get("path_effects", []))
        self.v_est.set_xdata([st.h_estimate, st.h_estimate])
        self.t_est.xy = (st.h_estimate, 0.02)
        self.t_est.set_text(f"h_est {st.h_estimate:.2f}")
        for m, t, s_, name in zip(self.marks, self.notes, (st, st_w), ("nominal", "weak")):
            if s_ is None or s_.h_scan is None:
                m.set_data([np.nan], [np.nan])
                t.set_text("")
                continue
            bad = not s_.resonance_ok
            m.set_data([s_.h_scan], [s_.z_peak_ohm])
            m.set_marker("X" if bad else "v")
            m.set_color(STYLE["injected"] if bad else col)
            m.set_markeredgecolor(STYLE["ink"])
            where = "" if s_.margin_pct is None else (
                f", {abs(s_.margin_pct):.1f} % {'above' if s_.margin_pct > 0 else 'below'} "
                f"the {s_.nearest_kind or ''} {ordinal(s_.nearest_order)}")
            inside = f" - inside the +-{self.margin:g} % band" if bad else ""
            t.set_text(f"{name} supply: resonance h = {s_.h_scan:.2f}{where}{inside}")
            t.set_color(STYLE["injected"] if bad else STYLE["ink"])
        _ylim_log(ax, curves, 1.0, self.h_hi, sc.h)
        verdict = "inside" if not st.resonance_ok else "outside"
        res_txt = (f"resonance h = {st.h_scan:.2f}, {verdict} the +-{self.margin:g} % band" if st.h_scan is not None
                   else "no resonance in the scan range")
        ax.set_title(f"Step {k}: {st.kvar_nameplate:g} kvar nameplate - {res_txt}", color=STYLE["ink"], loc="left",
                     fontsize=9)


def draw_scan_step(ax, res: StudyResult, sc: BankScan, k: int, weak: BankScan | None = None) -> StepScanPlot:
    """One step's scan with its resonance marked and the screening bands shaded.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    res : StudyResult
        Study (orders of concern, screening margin [%]).
    sc : BankScan
        Nominal-supply scan of the bank [ohm].
    k : int
        Step, 1..N [unitless].
    weak : BankScan, optional
        Weak-supply scan drawn dashed [ohm].

    Returns
    -------
    StepScanPlot
        The plot, to be re-pointed at other steps with ``show(k)``.
    """
    p = StepScanPlot(ax, res, sc, weak)
    p.show(k)
    return p



def draw_scan_compare(ax, res: StudyResult, plain: BankScan, detuned: BankScan, k: int | None = None) -> None:
    """Plain bank and detuned candidate, same step, same axes.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    res : StudyResult
        Study (orders of concern).
    plain, detuned : BankScan
        Scans of the plain bank and of the detuned candidate [ohm].
    k : int, optional
        Step (default: the last step of each) [unitless].
    """
    _style_axes(ax)
    h_max = float(min(plain.h[-1], detuned.h[-1]))
    mark_orders(ax, res, h_max, res.case.study.margin_pct)
    kp = k or len(plain.steps)
    kd = min(k or len(detuned.steps), len(detuned.steps))
    ax.semilogy(plain.h, plain.z_ohm[0], color=STYLE["off"], lw=0.9, ls=(0, (1, 1.5)), label="bank off")
    ax.semilogy(plain.h, plain.z_ohm[kp], color=STYLE["injected"], lw=1.3, label=f"plain bank, step {kp}")
    p_pct = detuned.bank.p * 100.0
    ax.semilogy(detuned.h, detuned.z_ohm[kd], color=STYLE["ink"], lw=1.3,
                label=f"detuned p = {p_pct:.3g} % (n = {1 / math.sqrt(detuned.bank.p):.2f}), step {kd}")
    ax.set_xlim(1.0, h_max)
    _ylim_log(ax, [plain.z_ohm[0], plain.z_ohm[kp], detuned.z_ohm[kd]], 1.0, h_max, plain.h)
    _log_ticks(ax, h_max)
    _order_ticks(ax, res, h_max)
    _label_axes(ax, plain.bank.bus, f"Bank {plain.bank.name}: plain and detuned, full bank in service")
    ax.legend(frameon=False, loc="upper right")


#: a legend drawn over data: white box, no edge, so lines under it do not cross its text
LEGEND_BOX = {"frameon": True, "facecolor": "white", "edgecolor": "none", "framealpha": 0.92, "fancybox": False}


def _LIMIT_EDGE():  # noqa: N802 - a constant made on demand (patheffects import is lazy)
    from matplotlib import patheffects as pe  # noqa: PLC0415

    return [pe.Stroke(linewidth=3.4, foreground=STYLE["ink"]), pe.Normal()]


def draw_spectrum(ax, h, v_pct, env_pct, limit_pct, limit_label: str, title: str,
                  ylabel: str = "V_h [% of nominal]", legend: bool = True) -> None:
    """Harmonic voltage (or current) per order as bars against the individual limit.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    h : array_like
        Orders [unitless].
    v_pct : array_like
        Value of the step shown per order [% of the base named in ``ylabel``].
    env_pct : array_like or None
        Highest value over all steps, drawn as ticks [% of the same base].
    limit_pct : float, array_like or None
        Individual limit: one value for every order, or one per order (None or
        NaN where none applies) [% of the same base].
    limit_label : str
        Legend text for the limit [unitless].
    title : str
        Axes title [unitless].
    ylabel : str, optional
        Axis label with its unit [unitless].
    legend : bool, optional
        Draw the axes' own legend (False where one key serves several panels, see
        :func:`spectrum_key`).
    """
    _style_axes(ax)
    h = np.asarray(h, float)
    v = np.asarray(v_pct, float)
    if limit_pct is None:
        lim = np.full(v.shape, np.nan)
    else:
        lim = np.broadcast_to(np.asarray([np.nan if x is None else x for x in np.atleast_1d(limit_pct)], float),
                              v.shape)
    over = np.nan_to_num(v - lim, nan=-1.0) > 0
    ax.bar(h, v, width=0.7, color=np.where(over, STYLE["injected"], STYLE["ink"]), label="step shown")
    if env_pct is not None:
        ax.plot(h, np.asarray(env_pct, float), ls="none", marker="_", ms=9, mew=1.4, color=STYLE["characteristic"],
                label="highest of all steps")
    if limit_pct is not None and np.ndim(limit_pct) == 0:
        ax.axhline(float(limit_pct), color=STYLE["limit"], lw=1.4, ls=(0, (5, 2)), zorder=4, label=limit_label,
                   path_effects=_LIMIT_EDGE())
    elif np.any(np.isfinite(lim)):
        ax.plot(h, lim, ls="none", marker="_", ms=15, mew=2.4, color=STYLE["limit"], zorder=4, label=limit_label,
                path_effects=_LIMIT_EDGE())
    ax.set_xlim(0.5, max(float(h.max()) + 1.5, 15.0) if h.size else 15.0)
    vals = np.concatenate([v, lim, np.asarray(env_pct if env_pct is not None else [], float)])
    top = float(np.nanmax(vals)) if np.any(np.isfinite(vals)) else 0.0
    ax.set_ylim(0.0, 1.5 * top if top > 0 else 1.0)
    ax.xaxis.set_major_locator(MultipleLocator(2.0 if (h.max() if h.size else 0) <= 30 else 5.0))
    ax.set_xlabel("harmonic order h [-]", color=STYLE["ink"])
    ax.set_ylabel(ylabel, color=STYLE["ink"])
    ax.set_title(title, color=STYLE["ink"], loc="left", fontsize=8.5)
    if legend:
        ax.legend(loc="upper right", **LEGEND_BOX)
    plain_numbers(ax)


def spectrum_key(ax, edition: str) -> None:
    """One key for the spectrum panels of a figure, drawn in an otherwise empty axes.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        The empty slot of the panel grid (its frame and ticks are switched off).
    edition : str
        IEEE 519 edition named in the key [unitless].
    """
    from matplotlib.lines import Line2D  # noqa: PLC0415
    from matplotlib.patches import Patch  # noqa: PLC0415

    ax.set_axis_off()
    handles = [Patch(color=STYLE["ink"], label="step shown (named in the panel's title)"),
               Patch(color=STYLE["injected"], label="step shown, beyond its limit"),
               Line2D([], [], ls="none", marker="_", ms=9, mew=1.4, color=STYLE["characteristic"],
                      label="highest of all steps"),
               Line2D([], [], color=STYLE["limit"], lw=1.4, ls=(0, (5, 2)), path_effects=_LIMIT_EDGE(),
                      label=f"IEEE 519-{edition} limit: individual voltage\n(dashes) or current per order (ticks)")]
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.0, 1.0), borderaxespad=0.0, frameon=False,
              fontsize=7.0, handlelength=2.2)


#: (per-step key, panel title) of the four duty quantities in IEEE Std 18 order
DUTY_PANELS = (("v_rms", "rms voltage [% of rated]"), ("v_peak", "crest voltage [% of rated crest]"),
               ("i_rms", "rms current [% of nominal]"), ("kvar", "reactive power [% of rated kvar]"))


#: marker of each scenario other than the nominal one in the duty chart
SCENARIO_MARKERS = {"weak": "v", "high_voltage_light_load": "^", "weak_light_load": "D"}


def draw_duty(axes, steps, values: dict, limits_pct: dict, limit_name: str, others: dict | None = None) -> None:
    """Capacitor duty per step as bars against its limit, one panel per quantity.

    Parameters
    ----------
    axes : sequence of 4 matplotlib.axes.Axes
        Target axes, in the order of :data:`DUTY_PANELS`.
    steps : array_like of int
        Step numbers [unitless].
    values : dict
        Quantity -> per-step values of the nominal scenario (None where absent) [% of rating].
    limits_pct : dict
        Quantity -> limit [% of rating].
    limit_name : str
        Name of the limit set for the legend [unitless].
    others : dict, optional
        Scenario name -> (words, quantity -> per-step values) of the other scenarios, drawn as
        markers over the bars (filled red where beyond the limit) [% of rating].
    """
    x = np.asarray(steps, int)
    others = others or {}
    for i, (ax, (q, ttl)) in enumerate(zip(axes, DUTY_PANELS)):
        _style_axes(ax)
        v = np.array([np.nan if a is None else float(a) for a in values.get(q, [None] * x.size)])
        lim = limits_pct.get(q)
        bad = (v > lim) if lim is not None else np.zeros(v.shape, bool)
        ax.bar(x, np.nan_to_num(v), width=0.65, color=np.where(bad, STYLE["injected"], STYLE["ink"]),
               label="nominal supply (bars)")
        tops = [v]
        for name, (words, vals) in others.items():
            o = np.array([np.nan if a is None else float(a) for a in vals.get(q, [None] * x.size)][:x.size])
            if o.size < x.size:
                o = np.append(o, np.full(x.size - o.size, np.nan))
            tops.append(o)
            ob = (o > lim) if lim is not None else np.zeros(o.shape, bool)
            mk = SCENARIO_MARKERS.get(name, "o")
            ax.plot(x, o, ls="none", marker=mk, ms=4.5, mfc="white", mec=STYLE["ink"], mew=0.8, zorder=5,
                    label=words)
            if ob.any():
                ax.plot(x[ob], o[ob], ls="none", marker=mk, ms=4.5, mfc=STYLE["injected"], mec=STYLE["ink"],
                        mew=0.8, zorder=6)
        if lim is not None:
            ax.axhline(lim, color=STYLE["limit"], lw=1.4, ls=(0, (5, 2)), zorder=4, path_effects=_LIMIT_EDGE(),
                       label=f"limit ({limit_name})")
        if i == 0:  # one key for the four panels (the same bars, markers and limit dashes in each)
            ax.legend(loc="upper left", borderaxespad=0.2, fontsize=5.8, ncols=2, handlelength=1.6,
                      columnspacing=0.8, **LEGEND_BOX)
        top = np.nanmax(np.concatenate(tops + [np.asarray([lim if lim is not None else 0.0])]))
        ax.set_ylim(0.0, 1.55 * top if np.isfinite(top) and top > 0 else 1.0)
        ax.set_xticks(x)
        ax.set_xlabel("step [-]", color=STYLE["ink"])
        ax.set_title(ttl + (f", limit {lim:g} %" if lim is not None else ""), color=STYLE["ink"], loc="left",
                     fontsize=8)
        plain_numbers(ax)


def draw_detuning_band(ax, n_tuned: float, p: float, band: tuple, band_label: str, h_parallel, steps,
                       dominant: int | None, margin_pct: float | None, title: str) -> None:
    """Tuning order with its tolerance band and each step's parallel resonance.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    n_tuned : float
        Series tuning order of the detuned step, ``1/sqrt(p)`` [unitless].
    p : float
        Detuning factor X_L/X_C [unitless].
    band : (float, float)
        The proposal's tuning band at the tolerance limits (``tuning_band`` of the
        recommended design, :func:`resonance.assessment.tuning.tuning_band`) [unitless].
    band_label : str
        What the band spans (the tolerances the proposal used) [unitless].
    h_parallel : array_like
        Parallel resonance of each step with the supply (``1/sqrt(p + X_s/X_C)``) [unitless].
    steps : array_like of int
        Step numbers [unitless].
    dominant : int or None
        Lowest significant order (the one the tuning must stay below) [unitless].
    margin_pct : float or None
        The proposal's order margin below ``dominant`` [%].
    title : str
        Axes title [unitless].

    Notes
    -----
    Nothing is recomputed here: band, margin and parallel resonances are the proposal's.
    """
    _style_axes(ax)
    lo, hi = float(band[0]), float(band[1])
    y = np.asarray(steps, int)
    ax.axvspan(lo, hi, color=STYLE["band"], alpha=0.8, lw=0, label=f"n at the tolerance limits: {lo:.2f}-{hi:.2f}\n({band_label})")
    ax.axvline(n_tuned, color=STYLE["ink"], lw=1.2, label=f"tuning order n = {n_tuned:.2f} (p = {p * 100:.3g} %)")
    if dominant is not None:
        ax.axvline(dominant, color=STYLE["injected"], lw=1.2, label=f"lowest significant order {dominant}")
        if margin_pct is not None:
            m = dominant * (1.0 - margin_pct / 100.0)
            ax.axvline(m, color=STYLE["injected"], lw=0.8, ls="--", label=f"{100 - margin_pct:g} % of it: {m:.2f}")
    hp = np.asarray(h_parallel, float)
    ax.plot(hp, y, ls="none", marker="o", ms=4, color=STYLE["characteristic"], mec=STYLE["ink"], mew=0.4,
            label="parallel resonance with the supply, per step")
    xs = [lo, hi, n_tuned] + ([dominant] if dominant else []) + list(hp[np.isfinite(hp)])
    ax.set_xlim(max(1.0, min(xs) - 0.6), max(xs) + 0.8)
    if y.size:
        ax.set_ylim(y.min() - 0.7, y.max() + 0.7)
    ax.set_yticks(y)
    ax.invert_yaxis()
    ax.set_xlabel("harmonic order h [-]", color=STYLE["ink"])
    ax.set_ylabel("step [-]", color=STYLE["ink"])
    ax.set_title(title, color=STYLE["ink"], loc="left", fontsize=9)
    ax.legend(frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)

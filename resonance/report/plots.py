"""Scan plots (matplotlib; the command line picks the file backend).  Edge layer: the numeric core never imports this."""

from __future__ import annotations


import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from resonance.assessment.envelope import scenario_words
from resonance.assessment.study import BankScan, StudyResult  # noqa: E402

__all__ = ["scan_figure", "STYLE"]

#: our own look: ink-blue text, warm sand bands, a sequential map for the steps
STYLE = {
    "ink": "#1d2b3a",
    "grid": "#d9dee4",
    "band": "#f3e3c3",
    "injected": "#b5452b",
    "characteristic": "#8a94a0",
    "off": "#6b6b6b",
    "cmap": "cividis",
    "font": "DejaVu Sans",
}


def _style_axes(ax):
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(STYLE["ink"])
    ax.tick_params(colors=STYLE["ink"], labelsize=8)
    ax.grid(True, which="major", color=STYLE["grid"], linewidth=0.6)
    ax.grid(True, which="minor", color=STYLE["grid"], linewidth=0.3, alpha=0.6)


def mark_orders(ax, res: StudyResult, h_max: float, margin_pct: float) -> None:
    """Shade the screening band around each order of concern and draw the order."""
    inj = set(res.orders.injected) | set(res.orders.background)
    for h, kind in res.orders.all():
        if h > h_max:
            continue
        lo, hi = h * (1 - margin_pct / 100), h * (1 + margin_pct / 100)
        # bands of characteristic-only orders above the 25th would merge into one wash: lines only
        if h in inj or h <= 25:
            ax.axvspan(lo, hi, color=STYLE["band"], alpha=0.55 if h in inj else 0.3, lw=0, zorder=0)
        ax.axvline(h, color=STYLE["injected"] if h in inj else STYLE["characteristic"],
                   lw=0.9 if h in inj else 0.6, ls="-" if h in inj else (0, (3, 3)), zorder=1)


def scan_figure(res: StudyResult, sc: BankScan, steps: list[int] | None = None, h_max: float | None = None,
                compare: BankScan | None = None, title: str | None = None):
    """Driving-point impedance at the bank bus versus harmonic order, one curve per step.

    Parameters
    ----------
    res : StudyResult
        Study (for the orders of concern and settings).
    sc : BankScan
        The bank's scan in one scenario.
    steps : list of int, optional
        Steps to draw (all when None); 0 is the bank off.
    h_max : float, optional
        Upper end of the axis [unitless].
    compare : BankScan, optional
        A second scan drawn dashed (e.g. the weak-supply scenario).
    title : str, optional
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
    """
    h_max = h_max or float(sc.h[-1])
    margin = res.case.study.margin_pct
    fig, ax = plt.subplots(figsize=(8.6, 4.0), dpi=130)
    _style_axes(ax)
    mark_orders(ax, res, min(h_max, float(sc.h[-1])), margin)
    steps = list(range(0, len(sc.steps) + 1)) if steps is None else steps
    cmap = plt.get_cmap(STYLE["cmap"])
    n = max(len(sc.steps), 1)
    for s in steps:
        if s == 0:
            ax.semilogy(sc.h, sc.z_ohm[0], color=STYLE["off"], lw=1.0, ls=(0, (1, 1.5)), label="bank off")
            continue
        col = cmap(0.1 + 0.8 * (s - 1) / max(n - 1, 1))
        st = sc.steps[s - 1]
        lab = f"step {s}: {st.kvar_nameplate:g} kvar" + (f", h = {st.h_scan:.2f}" if st.h_scan else "")
        ax.semilogy(sc.h, sc.z_ohm[s], color=col, lw=1.4, label=lab)
        if st.h_scan is not None:
            ax.plot([st.h_scan], [st.z_peak_ohm], marker="v" if st.resonance_ok else "X", ms=6,
                    color=col if st.resonance_ok else STYLE["injected"], mec=STYLE["ink"], mew=0.5, zorder=5)
        if compare is not None and s <= len(compare.steps):
            ax.semilogy(compare.h, compare.z_ohm[s], color=col, lw=1.0, ls="--",
                        label=f"step {s}, {scenario_words(compare.scenario)}")
    ax.set_xlim(1, h_max)
    ax.set_xlabel("harmonic order h", color=STYLE["ink"], fontsize=9)
    ax.set_ylabel(f"|Z| at bus {sc.bank.bus} [ohm]", color=STYLE["ink"], fontsize=9)
    scen = "" if sc.scenario == "nominal" else f" - {scenario_words(sc.scenario)}"
    ax.set_title(title or f"Driving-point impedance, bank {sc.bank.name}{scen}", color=STYLE["ink"],
                 fontsize=10, loc="left")
    ax.legend(fontsize=6.5, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    fig.text(0.01, 0.01, f"shaded: +-{margin:g} % screening band; solid red lines: injected/background orders; "
             "dashed grey: characteristic orders; X: resonance inside a band", fontsize=6, color=STYLE["ink"])
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    _ = np
    return fig

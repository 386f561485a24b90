"""The report figures' look (colours, axes style, the marked orders of concern).

Edge layer: the numeric core never imports this; no pyplot (figures are bare
:class:`matplotlib.figure.Figure` objects drawn by :mod:`resonance.report.figures`).
"""

from __future__ import annotations


from resonance.assessment.study import StudyResult  # noqa: E402

__all__ = ["STYLE", "mark_orders"]

#: our own look: ink-blue text, warm sand bands, a sequential map for the steps
STYLE = {
    "ink": "#1d2b3a",
    "grid": "#d9dee4",
    "band": "#f3e3c3",
    "injected": "#b5452b",
    "characteristic": "#8a94a0",
    "off": "#6b6b6b",
    # limits: amber with a dark edge, drawn above the bars, so a limit stays visible where a
    # (red) bar exceeds it and in grey print (lighter than every bar, darker than the paper)
    "limit": "#e39b1b",
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

"""The batch summary figure (edge layer, matplotlib Agg, no pyplot): for a sweep, the resonance
order and the capacitor duty margin of every bank against the swept value; for a portfolio, the
banks ranked by their resonance margin.  Reads the summary rows only."""

from __future__ import annotations

from matplotlib.figure import Figure

from resonance.report.plots import STYLE, _style_axes

__all__ = ["summary_figure"]


def _num(v):
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return x


def summary_figure(summary: list[dict], swept: list[str]) -> Figure:
    """Summary figure of a batch.

    Parameters
    ----------
    summary : list of dict
        Summary rows (``bank``, ``h_scan_at_lowest_margin`` [unitless], ``duty_margin_min_pct`` [%],
        ``lowest_margin_pct`` [%], ``passed``, the overridden keys).
    swept : list of str
        The overridden keys; a sweep when one of them holds numbers in every row.

    Returns
    -------
    matplotlib.figure.Figure
    """
    key = next((k for k in swept if all(_num(r.get(k)) is not None for r in summary)), None)
    if key is not None and len({r.get(k) for r in summary for k in [key]}) > 1:
        fig = Figure(figsize=(8.2, 3.4))
        a1, a2 = fig.add_subplot(1, 2, 1), fig.add_subplot(1, 2, 2)
        for ax in (a1, a2):
            _style_axes(ax)
        for bank in sorted({r["bank"] for r in summary}):
            rows = sorted((r for r in summary if r["bank"] == bank), key=lambda r: _num(r[key]))
            x = [_num(r[key]) for r in rows]
            a1.plot(x, [_num(r.get("h_scan_at_lowest_margin")) for r in rows], marker="o", ms=3, lw=1.0,
                    label=bank)
            a2.plot(x, [_num(r.get("duty_margin_min_pct")) for r in rows], marker="s", ms=3, lw=1.0, ls="--",
                    label=bank)
        a1.set_xlabel(key)
        a1.set_ylabel("resonance order at the tightest step [-]")
        a2.set_xlabel(key)
        a2.set_ylabel("lowest capacitor duty margin [%]")
        a2.axhline(0.0, color=STYLE["injected"], lw=1.0, ls=":")
        a1.legend(frameon=False, fontsize=6.5)
        fig.suptitle(f"Batch sweep of {key}", fontsize=9)
    else:
        rows = sorted(summary, key=lambda r: _num(r.get("lowest_margin_pct")) or 0.0)
        fig = Figure(figsize=(8.2, max(2.0, 0.28 * len(rows) + 1.0)))
        ax = fig.add_subplot(1, 1, 1)
        _style_axes(ax)
        labels = [f"{r['id']} / {r['bank']}" for r in rows]
        vals = [_num(r.get("lowest_margin_pct")) or 0.0 for r in rows]
        ax.barh(range(len(rows)), vals, color=[STYLE["ink"] if r["passed"] else STYLE["injected"] for r in rows],
                hatch=None)
        for j, r in enumerate(rows):
            if not r["passed"]:  # readable in grey print too
                ax.barh(j, vals[j], color="none", edgecolor="white", hatch="///", lw=0)
        ax.set_yticks(range(len(rows)), labels, fontsize=6.5)
        ax.invert_yaxis()  # the tightest bank on top
        ax.set_xlabel("lowest resonance margin over every step and scenario [%] (red, hatched: bank findings)")
        fig.suptitle("Banks ranked by resonance margin", fontsize=9)
    fig.tight_layout()
    return fig

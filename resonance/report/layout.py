"""Page layout of the submittal report: a flowing cursor over A4 matplotlib figures.

Edge layer.  :class:`_Doc` places text, key/value lists, bullets, tables and figure
regions on page figures and writes every page to a PDF with running header, footer
and page numbers.
"""

from __future__ import annotations

import textwrap
from typing import Any

from matplotlib.figure import Figure

from resonance import __version__
from resonance.report import figures as rf
from resonance.report.plots import STYLE
from resonance.report.tables import Table

__all__ = ["PAGE_W", "PAGE_H", "M_LEFT", "M_RIGHT", "M_TOP", "M_BOTTOM", "TEXT_W", "INK"]

# page geometry [in]: A4 portrait
PAGE_W, PAGE_H = 8.27, 11.69
M_LEFT, M_RIGHT, M_TOP, M_BOTTOM = 0.75, 0.65, 0.95, 0.85
TEXT_W = PAGE_W - M_LEFT - M_RIGHT
INK = STYLE["ink"]
FAIL_RED = STYLE["injected"]
HEAD_FILL = "#e8ecf0"
ZEBRA = "#f6f7f9"


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

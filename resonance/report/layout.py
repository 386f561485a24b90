"""Page layout of the submittal report: a flowing cursor over letter or A4 matplotlib pages.

Edge layer.  :class:`_Doc` places text, key/value lists, bullets, tables and figure
regions on page figures and writes every page to a PDF with running header, footer
and page numbers.  Text is wrapped and tables are sized from the *measured* width of
each string (matplotlib's own font metrics, the ones the PDF is drawn with), and every
text artist is registered with the box it must stay in, so :meth:`_Doc.overflows` can
prove after rendering that nothing crosses its cell, its box or the page margin.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from matplotlib.figure import Figure

from resonance.report import figures as rf
from resonance.report.plots import STYLE
from resonance.report.tables import Table

__all__ = ["PAPERS", "Paper", "M_LEFT", "M_RIGHT", "M_TOP", "M_BOTTOM", "INK", "text_width", "wrap_to"]

#: paper sizes (width, height) [in]: US letter (ANSI A) and ISO 216 A4
PAPERS = {"letter": (8.5, 11.0), "a4": (8.27, 11.69)}
M_LEFT, M_RIGHT, M_TOP, M_BOTTOM = 0.75, 0.65, 0.95, 0.85
INK = STYLE["ink"]
GREY = "#5b6672"
FAIL_RED = STYLE["injected"]
HEAD_FILL = "#e8ecf0"
#: font size of a table's note [pt]
NOTE_SIZE = 6.8
#: a table up to this height (title, rows and note) is kept on one page [in]
KEEP_TABLE_H = 2.0
ZEBRA = "#f6f7f9"


@dataclass(frozen=True)
class Paper:
    """Page geometry [in] of one paper size with the report's margins."""

    name: str
    w: float
    h: float

    @property
    def text_w(self) -> float:
        """Width of the text frame [in]."""
        return self.w - M_LEFT - M_RIGHT

    @classmethod
    def of(cls, name: str) -> "Paper":
        """The named paper (``letter`` or ``a4``)."""
        w, h = PAPERS[name]
        return cls(name, w, h)


class Meter:
    """Measures rendered text with matplotlib's font metrics (the ones the PDF is drawn with).

    One per document: it keeps the widths it measured (a report measures a few thousand
    strings, many of them repeated), and goes with the document.
    """

    #: widths are the sum of the glyphs' unhinted advances, enlarged by this factor [unitless]:
    #: kerning (which only tightens DejaVu's pairs by a fraction of a per cent) is left out, so
    #: the measure never falls short of the drawn width (the overflow test proves it on every page)
    SAFETY = 1.005

    def __init__(self):
        self._fonts: dict = {}
        self._adv: dict = {}
        self._w: dict = {}

    def _advance(self, ch: str, weight: str, family: str) -> float:
        """Advance width of one glyph at 1 pt [in]."""
        key = (ch, weight, family)
        a = self._adv.get(key)
        if a is None:
            from matplotlib import ft2font  # noqa: PLC0415
            from matplotlib.font_manager import FontProperties, findfont, get_font  # noqa: PLC0415

            font = self._fonts.get((weight, family))
            if font is None:
                font = self._fonts[(weight, family)] = get_font(findfont(FontProperties(family=family, weight=weight)))
            flags = getattr(getattr(ft2font, "LoadFlags", None), "NO_HINTING", None)
            if flags is None:  # matplotlib before 3.10
                flags = ft2font.LOAD_NO_HINTING
            font.set_size(100.0, 72)
            a = self._adv[key] = font.load_char(ord(ch), flags=flags).linearHoriAdvance / 65536.0 / 100.0 / 72.0
        return a

    def width(self, s: str, size: float, weight: str = "normal", family: str = rf.FONT) -> float:
        """Drawn width of the widest line of ``s`` [in] at ``size`` [pt] (upper bound, see :data:`SAFETY`)."""
        key = (s, size, weight, family)
        w = self._w.get(key)
        if w is None:
            w = self._w[key] = max(sum(self._advance(ch, weight, family) for ch in line)
                                   for line in s.split("\n")) * size * self.SAFETY
        return w

    def wrap(self, s: str, width_in: float, size: float, weight: str = "normal", family: str = rf.FONT) -> list[str]:
        """Greedy word wrap of ``s`` to lines no wider than ``width_in`` [in] at ``size`` [pt]; a
        single word wider than the line is cut at characters, so no line is ever too wide."""
        out: list[str] = []
        fits = (lambda t: self.width(t, size, weight, family) <= width_in)
        for part in s.split("\n"):
            line = ""
            for word in part.split(" "):
                cand = word if not line else f"{line} {word}"
                if fits(cand):
                    line = cand
                    continue
                if line:
                    out.append(line)
                line = word
                while not fits(line) and len(line) > 1:
                    k = len(line) - 1
                    while k > 1 and not fits(line[:k]):
                        k -= 1
                    out.append(line[:k])
                    line = line[k:]
            out.append(line)
        return out


def text_width(s: str, size: float, weight: str = "normal", family: str = rf.FONT) -> float:
    """Rendered width of the widest line of ``s`` [in] at ``size`` [pt] (a fresh :class:`Meter`)."""
    return Meter().width(s, size, weight, family)


def wrap_to(s: str, width_in: float, size: float, weight: str = "normal", family: str = rf.FONT) -> list[str]:
    """``s`` wrapped to ``width_in`` [in] at ``size`` [pt] (a fresh :class:`Meter`)."""
    return Meter().wrap(s, width_in, size, weight, family)


class _Doc:
    """Flowing layout on pages: a cursor moves down; a block that does not fit starts a page.

    Parameters
    ----------
    title : str
        Running header text [unitless].
    paper : str
        ``letter`` or ``a4``.
    header_right : str
        Right side of the running header (project number, revision) [unitless].
    """

    def __init__(self, title: str, paper: str = "a4", header_right: str = ""):
        self.title = title
        self.paper = Paper.of(paper)
        self.header_right = header_right
        self.meter = Meter()
        self.pages: list[tuple[Figure, Any]] = []
        self.y = self.paper.h
        self.fig: Figure | None = None
        self.toc: list[tuple[str, int]] = []
        #: (figure, text artist, box (x0, x1, y_top, y_bottom) [in from the top-left]) to check
        self.boxes: list[tuple[Figure, Any, tuple]] = []
        #: (figure, first axes index, region box) of each figure region
        self.regions: list[tuple[Figure, int, tuple]] = []

    # geometry -------------------------------------------------------------------------------
    @property
    def pw(self) -> float:
        return self.paper.w

    @property
    def ph(self) -> float:
        return self.paper.h

    @property
    def tw(self) -> float:
        return self.paper.text_w

    def frame(self) -> tuple:
        """The text frame (x0, x1, y_top, y_bottom) [in]."""
        return (M_LEFT, self.pw - M_RIGHT, M_TOP - 0.05, self.ph - M_BOTTOM + 0.05)

    def _fy(self, y_in: float) -> float:
        return 1.0 - y_in / self.ph

    def new_page(self) -> None:
        self.fig = Figure(figsize=(self.pw, self.ph))
        self.pages.append((self.fig, None))
        self.y = M_TOP

    def shared_pages(self, fig: Figure, updates) -> None:
        """Pages that are one figure re-pointed by ``update()`` before each is saved."""
        for u in updates:
            self.pages.append((fig, u))
        self.fig = None

    def room(self) -> float:
        return self.ph - M_BOTTOM - self.y

    def ensure(self, h: float) -> None:
        if self.fig is None or self.room() < h:
            self.new_page()

    # drawing primitives ---------------------------------------------------------------------
    def text(self, x_in: float, y_in: float, s: str, box: tuple | None = None, fig: Figure | None = None, **kw):
        """Text at (x, y) [in from the top-left]; ``box`` (x0, x1, y_top, y_bottom) [in] is where it
        must stay (default: the text frame)."""
        kw.setdefault("color", INK)
        kw.setdefault("va", "top")
        f = fig or self.fig
        t = f.text(x_in / self.pw, self._fy(y_in), s, **kw)
        self.boxes.append((f, t, box or self.frame()))
        return t

    def hline(self, x0: float, x1: float, y_top_in: float, lw: float, fig: Figure | None = None) -> None:
        from matplotlib.lines import Line2D  # noqa: PLC0415
        y = self._fy(y_top_in)
        (fig or self.fig).add_artist(Line2D([x0 / self.pw, x1 / self.pw], [y, y], lw=lw, color=INK))

    def rect(self, x_in, y_top_in, w_in, h_in, color, edge: str = "none", fig: Figure | None = None) -> None:
        from matplotlib.patches import Rectangle  # noqa: PLC0415
        (fig or self.fig).add_artist(Rectangle((x_in / self.pw, 1 - (y_top_in + h_in) / self.ph), w_in / self.pw,
                                               h_in / self.ph, facecolor=color, edgecolor=edge, lw=0.6, zorder=-1))

    def heading(self, s: str, size: float = 13, toc: bool = True, gap: float = 0.12, keep: float = 0.0) -> None:
        """Section heading; ``keep`` [in] of what follows must fit on the same page."""
        self.ensure(0.6 + keep)
        if self.y > M_TOP + 0.01:
            self.y += gap
        self.text(M_LEFT, self.y, s, fontsize=size, weight="bold")
        if toc:
            self.toc.append((s, len(self.pages)))
        self.y += size / 72 * 1.55

    def subheading(self, s: str, size: float = 9.5, keep: float = 0.4) -> None:
        """A bold run-in title kept with ``keep`` [in] of what follows."""
        self.ensure(0.25 + keep)
        self.text(M_LEFT, self.y, s, fontsize=size, weight="bold")
        self.y += size / 72 * 1.6

    def para(self, s: str, size: float = 8.5, color: str = INK, weight: str = "normal", indent: float = 0.0,
             gap: float = 0.06, width: float | None = None) -> None:
        w = (width or self.tw) - indent
        lines = self.meter.wrap(s, w, size, weight)
        lh = size / 72 * 1.38
        i = 0
        while i < len(lines):
            self.ensure(lh * min(2, len(lines) - i))
            n = _lines_here(len(lines) - i, int(self.room() / lh))
            self.text(M_LEFT + indent, self.y, "\n".join(lines[i:i + n]), fontsize=size, color=color, weight=weight,
                      linespacing=1.38, box=(M_LEFT + indent - 0.01, M_LEFT + indent + w + 0.02, self.y - 0.05,
                                             self.y + n * lh + 0.08))
            self.y += n * lh
            i += n
        self.y += gap

    def bullets_height(self, items, size: float = 8.5) -> float:
        """Height [in] :meth:`bullets` takes for ``items`` on one page."""
        lh = size / 72 * 1.38
        return sum(len(self.meter.wrap(it, self.tw - 0.2, size)) * lh + 0.03 for it in items) + 0.05

    def bullets(self, items, size: float = 8.5) -> None:
        lh = size / 72 * 1.38
        for it in items:
            lines = self.meter.wrap(it, self.tw - 0.2, size)
            i = 0
            while i < len(lines):
                self.ensure(lh * min(2, len(lines) - i))
                n = _lines_here(len(lines) - i, int(self.room() / lh))
                if i == 0:
                    self.text(M_LEFT + 0.05, self.y, "\u2022", fontsize=size)
                self.text(M_LEFT + 0.2, self.y, "\n".join(lines[i:i + n]), fontsize=size, linespacing=1.38)
                self.y += lh * n
                i += n
            self.y += 0.03
        self.y += 0.05

    def kv(self, pairs, size: float = 9.0, key_w: float = 1.7, mono_keys: tuple = ()) -> None:
        lh = size / 72 * 1.5
        for k, v in pairs:
            fam = "DejaVu Sans Mono" if k in mono_keys else rf.FONT
            lines = self.meter.wrap(str(v), self.tw - key_w, size, family=fam)
            self.ensure(lh * len(lines))
            self.text(M_LEFT, self.y, k, fontsize=size, weight="bold",
                      box=(M_LEFT, M_LEFT + key_w, self.y - 0.05, self.y + lh + 0.05))
            self.text(M_LEFT + key_w, self.y, "\n".join(lines), fontsize=size, family=fam, linespacing=1.5 / 1.2)
            self.y += lh * len(lines)

    def table(self, t: Table, size: float = 7.5) -> None:
        """A table sized from its measured cell texts; long tables continue on the next page."""
        cells = t.cells()
        heads = [c.label + (f"\n[{c.unit}]" if c.unit else "") for c in t.columns]

        def widths(sz):
            w = []
            for j, h in enumerate(heads):
                n = max([self.meter.width(h, sz, "bold")]
                        + [self.meter.width(r[j], sz, "bold" if (i, j) in t.bad else "normal") for i, r in enumerate(cells)])
                w.append(n + 0.12)
            return w

        w = widths(size)
        while sum(w) > self.tw and size > 5.0:
            size -= 0.25
            w = widths(size)
        if sum(w) > self.tw:  # still too wide at the smallest size: wrap the widest cells' words
            w = [x * self.tw / sum(w) for x in w]
            cells = [[_fit_cell(self.meter, c, w[j] - 0.1, size, (i, j) in t.bad) for j, c in enumerate(r)]
                     for i, r in enumerate(cells)]
            heads = [_fit_cell(self.meter, h, w[j] - 0.1, size, True) for j, h in enumerate(heads)]
        elif sum(w) < self.tw * 0.7 and len(w) > 3:
            w = [x * 0.7 * self.tw / sum(w) for x in w]
        lh = size / 72 * 1.3
        head_h = max(h.count("\n") + 1 for h in heads) * lh + 0.08
        row_h = [max(x.count("\n") + 1 for x in r) * lh + 0.06 for r in cells] if cells else []
        note_h = (len(self.meter.wrap(t.note, self.tw, NOTE_SIZE)) * NOTE_SIZE / 72 * 1.38 + 0.14) if t.note else 0.0
        whole = 0.3 + head_h + sum(row_h) + 0.1 + note_h
        # a short table is kept on one page with its note; a long one starts where a row fits
        self.ensure(whole if whole <= KEEP_TABLE_H else 0.3 + head_h + (row_h[0] if row_h else lh) + 0.1)
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
            self._table_head(heads, w, head_h, size)
            placed = 0
            # a row taller than a whole page is placed anyway (clipped) so the loop always advances
            while i < len(cells) and (self.room() >= row_h[i] or placed == 0):
                self._table_row(cells[i], t, i, w, row_h[i], size)
                i += 1
                placed += 1
            first = False
            if i < len(cells):
                self.new_page()
        self.hline(M_LEFT, M_LEFT + sum(w), self.y, 0.8)
        self.y += 0.08
        if t.note:
            self.para(t.note, size=NOTE_SIZE, color=GREY)

    def _table_head(self, heads, w, head_h, size):
        x = M_LEFT
        self.rect(x, self.y, sum(w), head_h, HEAD_FILL)
        for j, h in enumerate(heads):
            self.text(x + w[j] / 2, self.y + 0.04, h, fontsize=size, weight="bold", ha="center", linespacing=1.2,
                      box=(x, x + w[j], self.y, self.y + head_h + 0.02))
            x += w[j]
        self.hline(M_LEFT, M_LEFT + sum(w), self.y + head_h, 0.8)
        self.y += head_h

    def _table_row(self, row, t, i, w, h, size):
        if i % 2 == 1:
            self.rect(M_LEFT, self.y, sum(w), h, ZEBRA)
        x = M_LEFT
        for j, txt in enumerate(row):
            al = t.columns[j].align
            xx = {"left": x + 0.05, "center": x + w[j] / 2, "right": x + w[j] - 0.06}[al]
            bad = (i, j) in t.bad
            self.text(xx, self.y + 0.03, txt, fontsize=size, ha=al, linespacing=1.2,
                      color=FAIL_RED if bad else INK, weight="bold" if bad else "normal",
                      box=(x, x + w[j], self.y - 0.01, self.y + h + 0.02))
            x += w[j]
        self.y += h

    def region(self, h: float) -> tuple[Figure, tuple[float, float, float, float]]:
        """Reserve ``h`` inches for a figure; returns the page and the rectangle (x, y_bottom, w, h) [in].

        Every axes added to the page after this call up to the next region is checked to stay
        inside the rectangle (:meth:`overflows`).
        """
        self.ensure(h)
        rect = (M_LEFT - 0.1, self.ph - self.y - h, self.tw + 0.2, h)
        self.regions.append((self.fig, len(self.fig.axes), (rect[0], rect[0] + rect[2], self.y, self.y + h)))
        self.y += h + 0.1
        return self.fig, rect

    def save(self, pdf, footer_left: str, footer_right: str = "", caution: str = "") -> None:
        """Running header, footer, caution line and page numbers on every page; write each page to ``pdf``."""
        n = len(self.pages)
        numbers: dict[int, Any] = {}
        for i, (fig, update) in enumerate(self.pages, start=1):
            if id(fig) not in numbers:
                self.decorate(fig, i, footer_left, footer_right, caution)
                numbers[id(fig)] = fig.text(1 - M_RIGHT / self.pw, 1 - (self.ph - 0.53) / self.ph, "", fontsize=8,
                                            color=INK, va="top", ha="right")
            if update is not None:
                update()
            numbers[id(fig)].set_text(f"page {i} of {n}")
            pdf.savefig(fig)

    def decorate(self, fig: Figure, page: int, footer_left: str, footer_right: str, caution: str) -> None:
        """Header (title, project) above the frame and footer (case, caution) below it."""
        page_box = (0.25, self.pw - 0.25, 0.2, self.ph - 0.12)
        if page > 1:
            hr = self.meter.wrap(self.header_right, 2.4, 8)[0] if self.header_right else ""
            room = self.tw - (self.meter.width(hr, 8) + 0.3 if hr else 0.0)
            self.text(M_LEFT, 0.45, self.meter.wrap(self.title, room, 8)[0], fig=fig, fontsize=8, va="bottom", box=page_box)
            if hr:
                self.text(self.pw - M_RIGHT, 0.45, hr, fig=fig, fontsize=8, color=GREY, va="bottom", ha="right",
                          box=page_box)
            self.hline(M_LEFT, self.pw - M_RIGHT, 0.52, 0.6, fig=fig)
        self.hline(M_LEFT, self.pw - M_RIGHT, self.ph - 0.6, 0.6, fig=fig)
        fr = self.meter.wrap(footer_right, 2.0, 7)[0] if footer_right else ""
        left_w = self.tw - 1.0 - (self.meter.width(fr, 7) + 0.2 if fr else 0.0)
        self.text(M_LEFT, self.ph - 0.53, self.meter.wrap(footer_left, left_w, 7)[0], fig=fig, fontsize=7, color=GREY,
                  box=page_box)
        if fr:
            self.text(self.pw - M_RIGHT - 1.0, self.ph - 0.53, fr, fig=fig, fontsize=7, color=GREY, ha="right",
                      box=page_box)
        if caution:
            self.text(M_LEFT, self.ph - 0.36, "\n".join(self.meter.wrap(caution, self.tw, 6.5)[:2]), fig=fig, fontsize=6.5,
                      color=GREY, linespacing=1.25, box=page_box)

    def overflows(self, tol_in: float = 0.01) -> list[str]:
        """Render every page and list each text that leaves its box or the page, and each figure
        region whose axes texts leave the region [in: ``tol_in`` tolerance].

        Returns
        -------
        list of str
            One line per problem, naming the page and the text; empty when everything fits.
        """
        import matplotlib  # noqa: PLC0415

        with matplotlib.rc_context(rf.RC):  # the settings the report is drawn with
            return self._overflows(tol_in)

    def _overflows(self, tol_in: float) -> list[str]:
        from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: PLC0415

        out: list[str] = []
        by_fig: dict[int, list] = {}
        for f, t, box in self.boxes:
            by_fig.setdefault(id(f), []).append((t, box))
        regs: dict[int, list] = {}
        for f, first, box in self.regions:
            regs.setdefault(id(f), []).append((first, box))
        for page, (fig, update) in enumerate(self.pages, start=1):
            if update is not None:
                update()
            canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
            canvas.draw()
            r = canvas.get_renderer()
            dpi = fig.dpi

            def inside(bb, box):
                x0, x1, yt, yb = box
                return (bb.x0 / dpi >= x0 - tol_in and bb.x1 / dpi <= x1 + tol_in
                        and self.ph - bb.y1 / dpi >= yt - tol_in and self.ph - bb.y0 / dpi <= yb + tol_in)

            for t, box in by_fig.get(id(fig), []):
                if t.get_text() and t.get_visible() and not inside(t.get_window_extent(r), box):
                    out.append(f"page {page}: text {t.get_text()[:50]!r} leaves its box")
            rs = sorted(regs.get(id(fig), []), key=lambda x: x[0])
            for k, (first, box) in enumerate(rs):
                last = rs[k + 1][0] if k + 1 < len(rs) else len(fig.axes)
                for ax in fig.axes[first:last]:
                    # what is drawn of the axes: its spines, tick labels, labels, title, legend
                    if ax.get_visible() and not inside(ax.get_tightbbox(r), box):
                        out.append(f"page {page}: figure {ax.get_title(loc='left')[:50]!r} leaves its region")
        return out


def _lines_here(left: int, fit: int) -> int:
    """How many of the ``left`` lines of a paragraph go on this page, where ``fit`` fit: never one
    line alone at the top of the next page (it goes with one more)."""
    n = max(1, min(left, fit))
    if left - n == 1 and n > 2:
        n -= 1
    return n


def _fit_cell(meter: Meter, s: str, w_in: float, size: float, bold: bool) -> str:
    """Cell text wrapped at spaces to ``w_in`` [in] (a table too wide at the smallest size)."""
    return "\n".join(line for part in s.split("\n")
                     for line in meter.wrap(part, w_in, size, "bold" if bold else "normal"))

"""The one-line diagram of the studied network (edge layer, a given matplotlib Figure, no pyplot).

:func:`draw_one_line` draws a :class:`~resonance.model.topology.OneLine` into a rectangle of a
figure; :func:`one_line_size` says how tall it needs to be.  The layout is computed: a tree from
the supply bus down (breadth first, closed connections first), a row per depth; each bus a short
bar with its name and voltage at its left, its elements hanging below it, its first child
straight below and the others beside (or, when too wide, in shelves hung from a riser).
Connections outside the tree run down a channel at each end to a row of their own below the
diagram, or, when many or shelved, show a ring at each end saying where they go.  Our own
symbols: transformer two circles; line a plain connection; switch a small square (hollow when
open); impedance a narrow box; load an arrow; harmonic source a box with a wave; bank two plates
(a coil above when detuned); generator a circle with a wave; supply a double circle with a wave.
Open is dashed and says so; the PCC and bank buses are bold bars, the PCC tagged: no meaning is
carried by colour.  Labels are measured (``get_window_extent``) before the layout is made, so
they do not overlap by construction; the placed labels are checked again (shrunk if need be).
"""

from __future__ import annotations

import math
import textwrap
from collections import deque

import numpy as np
from matplotlib.collections import LineCollection, PatchCollection
from matplotlib.figure import Figure
from matplotlib.patches import Circle, Polygon

from resonance.model.topology import OneLine
from resonance.report.plots import STYLE

__all__ = ["draw_one_line", "one_line_size", "label_problems"]

INK = STYLE["ink"]
#: base font sizes [pt] (the diagram is scaled down from these to fit its rectangle)
LABEL_PT, BUS_PT, TAG_PT, TITLE_PT, NOTE_PT = 6.5, 7.0, 6.0, 8.5, 6.0
#: geometry at scale 1 [in]
PAD, LBL_GAP, STUB, SYM_H, SYM_W, EL_GAP, SLOT_GAP = 0.10, 0.06, 0.10, 0.26, 0.22, 0.04, 0.12
TX_R, SUP_R, SIB_GAP, ROW_MIN, CHAN, MARGIN, RISER = 0.065, 0.10, 0.16, 0.55, 0.07, 0.04, 0.16
#: characters per wrapped label line [unitless]
WRAP = 22
#: ties routed below the diagram at most (more: connectors at each end) [unitless]
MAX_ROUTED = 6
#: smallest scale accepted before a wide bus takes its children in shelves [unitless]
S_FOLD = 0.72
_SYM_W = {"transformer": TX_R, "switch": 0.04, "impedance": 0.035, "line": 0.0}


def _wrap(name: str, label: str, width: int = WRAP) -> str:
    """Name on its own line(s), then the rest of the label broken at its commas."""
    rest = label[len(name):].strip() if label.startswith(name) else label
    lines = textwrap.wrap(name, width, break_long_words=False) or [name]
    cur = ""
    for part in [p.strip() for p in rest.split(",") if p.strip()]:
        cand = f"{cur}, {part}" if cur else part
        if cur and len(cand) > width:
            lines.append(cur + ",")
            cur = part
        else:
            cur = cand
    return "\n".join(lines + ([cur] if cur else []))


def _tree(data: OneLine) -> dict:
    """Breadth-first tree from the supply bus: parents, children, depths, drops and ties."""
    names = [b.name for b in data.buses]
    adj: dict = {n: [] for n in names}
    for k, br in enumerate(data.branches):
        if br.from_bus in adj and br.to_bus in adj and br.from_bus != br.to_bus:
            adj[br.from_bus].append((br.to_bus, k))
            adj[br.to_bus].append((br.from_bus, k))
    parent: dict = {}
    depth: dict = {}
    children: dict = {n: [] for n in names}
    order: list = []
    roots: list = []

    def bfs(start: list, use_open: bool) -> None:
        q = deque(start)
        while q:
            u = q.popleft()
            for v, k in adj[u]:
                if v in parent or (not use_open and not data.branches[k].closed):
                    continue
                parent[v], depth[v] = u, depth[u] + 1
                children[u].append(v)
                order.append(v)
                q.append(v)

    for r in ([data.supply_bus] if data.supply_bus in adj else []) + names:
        if r in parent:
            continue
        parent[r], depth[r] = None, 0
        roots.append(r)
        order.append(r)
        done = len(order) - 1
        bfs([r], False)
        bfs(order[done:], True)
    drops: dict = {n: [] for n in names}
    ties = []
    for k, br in enumerate(data.branches):
        a, b = br.from_bus, br.to_bus
        if a not in adj or b not in adj or a == b:
            continue
        if parent.get(b) == a:
            drops[b].append(k)
        elif parent.get(a) == b:
            drops[a].append(k)
        else:
            ties.append(k)
    return {"roots": roots, "order": order, "children": children, "parent": parent, "depth": depth,
            "drops": drops, "ties": ties}


def _specs(data: OneLine, tree: dict, mode: str) -> dict:
    """Text key -> (string, size [pt], bold, boxed) of every label; ``mode`` 'routed' or 'ends'."""
    t: dict = {("el", k): (_wrap(e.name, e.label), LABEL_PT, False, False) for k, e in enumerate(data.elements)}
    for b in data.buses:
        t[("bus", b.name)], t[("kv", b.name)] = (b.name, BUS_PT, True, False), (f"{b.kv:g} kV", LABEL_PT, False, False)
        if b.pcc:
            t[("tag", b.name)] = ("PCC", TAG_PT, True, True)
    ties = set(tree["ties"])
    for k, br in enumerate(data.branches):
        if k not in ties:
            t[("br", k)] = (_wrap(br.name, br.label), LABEL_PT, False, False)
        elif mode == "routed":
            t[("br", k)] = (br.label, LABEL_PT, False, False)
        else:
            for end, other in enumerate((br.to_bus, br.from_bus)):
                t[("tie", k, end)] = (f"to {other}\n" + _wrap(br.name, br.label), LABEL_PT, False, False)
    return t


def _layout(data: OneLine, tree: dict, size: dict, mode: str, wmax: float) -> dict:
    """Block geometry and positions at scale 1 [in], y downwards; ``size[key] = (w, h)`` [in]."""
    bus = {b.name: b for b in data.buses}
    hang: dict = {b.name: [] for b in data.buses}
    main_sup: dict = {}
    for k, e in enumerate(data.elements):
        if e.kind == "supply" and e.main and e.bus not in main_sup:
            main_sup[e.bus] = ("el", k)
        elif e.bus in hang:
            hang[e.bus].append(("el", k))
    tie_at: dict = {}
    for k in tree["ties"]:
        for end, n in enumerate((data.branches[k].from_bus, data.branches[k].to_bus)):
            (hang[n].append(("tie", k, end)) if mode == "ends" else tie_at.setdefault(n, []).append(k))
    ch, depth = tree["children"], tree["depth"]
    g: dict = {}
    for v, b in bus.items():  # each bus on its own: label column, incoming drops, hanging height
        col = max(size[("bus", v)][0] + (size[("tag", v)][0] + 0.07 if b.pcc else 0.0), size[("kv", v)][0])
        xl = col + LBL_GAP + PAD
        dx, right, dneed = [], xl, 0.0
        for j, k in enumerate(tree["drops"][v]):
            x = right + 0.12 + _SYM_W[data.branches[k].kind] if j else xl
            w, h = size[("br", k)]
            dx.append(x)
            right = x + _SYM_W[data.branches[k].kind] + 0.05 + w
            dneed = max(dneed, h + 0.14, 2 * TX_R + 0.3)
        e_h = max([STUB + SYM_H + EL_GAP + size[key][1] for key in hang[v]] + [0.25 if b.more else 0.0])
        g[v] = {"col": col, "xl": xl, "dx": dx, "in_right": right, "dneed": dneed, "e_h": e_h,
                "top": max(size[("bus", v)][1], size[("tag", v)][1] + 0.03 if b.pcc else 0.0),
                "kv_h": size[("kv", v)][1]}
    n_rows = max(depth.values(), default=0) + 1
    gap = [ROW_MIN] * n_rows  # the band under each row, the same for every bus of a depth
    for v, d in depth.items():
        m = g[v]
        if d + 1 < n_rows:
            below = [g[c]["top"] for c in ch[v]] or [0.0]
            gap[d] = max(gap[d], max(m["e_h"], m["kv_h"] + 0.03) + max(below) + 0.1)
        if d:
            gap[d - 1] = max(gap[d - 1], m["dneed"], m["top"] + 0.12)
    for v in reversed(tree["order"]):  # children before parents
        m, kids = g[v], ch[v]
        xl = m["xl"]
        widths = [max(g[c]["w"], g[c]["in_right"]) for c in kids]
        fold = len(kids) > 1 and xl + sum(widths) + SIB_GAP * len(kids) > wmax
        m["kids"], busy, cur, m["risers"] = [], [], 0.0, []
        if not fold:
            for i, c in enumerate(kids):
                start = max(cur, xl - g[c]["xl"]) if i == 0 else cur
                m["kids"].append((start, gap[depth[v]], 0.0))
                busy.append((start + g[c]["dx"][0] - TX_R - 0.04, start + g[c]["in_right"] + 0.06))
                cur = start + widths[i] + SIB_GAP
        els, px = [], xl + 0.12
        for key in hang[v]:  # elements in the free columns of the band, left to right
            w = max(SYM_W, size[key][0]) + SLOT_GAP
            while any(px < hi and lo < px + w for lo, hi in busy):
                px = min(hi for lo, hi in busy if px < hi and lo < px + w)
            els.append((px + w / 2, key))
            px += w
        m["els"] = els
        band = max([px] + [hi for _, hi in busy])
        if fold:  # shelves of children under the band, hung from a riser at the trunk
            y_h, x0, cur, shelf = m["e_h"] + 0.12, xl + RISER, xl + RISER, []
            for i, c in enumerate(kids + [None]):
                if c is None or (shelf and cur + widths[i] > wmax):
                    dg = max([g[s]["dneed"] for s in shelf] + [g[s]["top"] + 0.14 for s in shelf] + [0.45])
                    last = 0.0
                    for s, sx in zip(shelf, xs):
                        m["kids"].append((sx, y_h + dg, y_h))
                        last = max(last, sx + g[s]["dx"][-1])
                    m["risers"].append(((xl, y_h), (last, y_h)))
                    bottom = max(y_h + dg + g[s]["h"] for s in shelf)
                    cur = max(cur, x0)
                    if c is None:
                        break
                    y_h, shelf, cur = bottom + 0.18, [], x0
                if not shelf:
                    xs = []
                shelf.append(c)
                xs.append(cur)
                cur += widths[i] + SIB_GAP
            m["risers"].append(((xl, 0.0), (xl, y_h)))
        kids_right = max([kx + widths[i] for i, (kx, _, _) in enumerate(m["kids"])] + [0.0])
        m["stub"] = band + 0.04 if bus[v].more else None
        band += 0.14 if bus[v].more else 0.0
        c_x = max(band, kids_right) + 0.04
        m["chans"] = [c_x + CHAN * i for i in range(len(tie_at.get(v, ())))]
        c_x += CHAN * len(m["chans"])
        reach = [xl + 0.3] + m["dx"] + [x for x, _ in els] + m["chans"] + ([m["stub"]] if m["stub"] else [])
        reach += [kx + g[c]["dx"][-1] for c, (kx, ky, ky0) in zip(kids, m["kids"]) if ky0 == 0.0]
        m["bx1"] = max(reach) + 0.08
        m["w"] = max(band, kids_right, m["bx1"] + 0.04, c_x)
        if v in main_sup:
            m["w"] = max(m["w"], xl + SUP_R + 0.06 + size[main_sup[v]][0] + 0.04)
        m["h"] = max([m["e_h"], m["kv_h"] + 0.03] + [ky + g[c]["h"] for c, (_, ky, _) in zip(kids, m["kids"])])
    pos: dict = {}
    x0 = 0.0
    for r in tree["roots"]:
        stack = [(r, x0, 0.0, 0.0)]
        while stack:
            v, bx, y, y0 = stack.pop()
            pos[v] = (bx, y, y0)
            stack.extend((c, bx + kx, y + ky, y + ky0) for c, (kx, ky, ky0) in zip(ch[v], g[v]["kids"]))
        x0 += g[r]["w"] + 2 * SIB_GAP
    return {"g": g, "pos": pos, "main_sup": main_sup, "folded": any(m["risers"] for m in g.values())}


class _Scene:
    """Primitives at scale 1 [in, y downwards] and the diagram's extent."""

    def __init__(self):
        self.segs: dict = {"thin": [], "dash": [], "bar": [], "bold": [], "plate": []}
        self.circles, self.polys, self.texts = [], [], []  # texts: (key, x, y, ha, va)
        self.box = [math.inf, math.inf, -math.inf, -math.inf]

    def _grow(self, pts):
        b, xs, ys = self.box, [p[0] for p in pts], [p[1] for p in pts]
        b[0], b[1], b[2], b[3] = min(b[0], *xs), min(b[1], *ys), max(b[2], *xs), max(b[3], *ys)

    def seg(self, pts, style="thin"):
        self.segs[style].append(pts)
        self._grow(pts)

    def circle(self, x, y, r):
        self.circles.append((x, y, r))
        self._grow([(x - r, y - r), (x + r, y + r)])

    def poly(self, pts, fill=True):
        self.polys.append((pts, fill))
        self._grow(pts)

    def box_at(self, x, y, hw, hh, fill=False):
        self.poly([(x - hw, y - hh), (x + hw, y - hh), (x + hw, y + hh), (x - hw, y + hh)], fill)

    def text(self, key, x, y, ha, va, size):
        (w, h), self.texts = size[key], self.texts + [(key, x, y, ha, va)]
        x0 = {"left": x, "center": x - w / 2, "right": x - w}[ha]
        y0 = {"top": y, "center": y - h / 2, "bottom": y - h}[va]
        self._grow([(x0, y0), (x0 + w, y0 + h)])

    def wave(self, x, y, half_w, amp):
        u = np.linspace(0.0, 2.0 * math.pi, 17)
        self.seg(list(zip(x - half_w + half_w * u / math.pi, y - amp * np.sin(u))))

    def coil(self, x, y0, y1):
        u = np.linspace(0.0, 3.0 * math.pi, 31)
        self.seg(list(zip(x + 0.045 * np.abs(np.sin(u)), y0 + (y1 - y0) * u / (3.0 * math.pi))))


def _element(sc: _Scene, kind: str, x: float, y: float, detuned: bool, reactor: bool, closed: bool) -> None:
    """Symbol hanging from a bar at ``(x, y)`` down to ``y + STUB + SYM_H``."""
    y1, bot = y + STUB, y + STUB + SYM_H
    if kind == "load":
        sc.seg([(x, y), (x, bot - 0.09)])
        sc.poly([(x - 0.05, bot - 0.1), (x + 0.05, bot - 0.1), (x, bot)])
    elif kind == "harmonic_source":
        sc.seg([(x, y), (x, bot - 0.18)])
        sc.box_at(x, bot - 0.09, 0.09, 0.09)
        sc.wave(x, bot - 0.09, 0.06, 0.035)
    elif kind in ("bank", "shunt") and not reactor:
        top = y1 + 0.12 if detuned else y
        if detuned:
            sc.seg([(x, y), (x, y1)])
            sc.coil(x, y1, top)
        p1 = bot - 0.06
        sc.seg([(x, top), (x, p1)])
        sc.seg([(x - 0.09, p1), (x + 0.09, p1)], "plate")
        sc.seg([(x - 0.09, p1 + 0.05), (x + 0.09, p1 + 0.05)], "plate")
        sc.seg([(x, p1 + 0.05), (x, bot)])
    elif kind == "shunt":  # a reactor
        sc.seg([(x, y), (x, y1)]), sc.coil(x, y1, bot - 0.04), sc.seg([(x, bot - 0.04), (x, bot)])
    elif kind == "tie":
        sc.seg([(x, y), (x, bot - 0.08)], "thin" if closed else "dash")
        sc.circle(x, bot - 0.04, 0.04)
    else:  # generator, another supply
        sc.seg([(x, y), (x, bot - 0.18)])
        sc.circle(x, bot - 0.09, 0.09)
        if kind == "supply":
            sc.circle(x, bot - 0.09, 0.065)
        sc.wave(x, bot - 0.09, 0.05, 0.03)


def _drop(sc: _Scene, kind: str, closed: bool, x: float, y0: float, y1: float) -> float:
    """A tree connection from ``y0`` down to ``y1`` at ``x``; returns the symbol's half width."""
    style = "thin" if closed else "dash"
    ym = (y0 + y1) / 2
    half = {"transformer": 0.045 + TX_R, "switch": 0.04, "impedance": 0.08}.get(kind, 0.0)
    sc.seg([(x, y0), (x, ym - half)], style)
    sc.seg([(x, ym + half), (x, y1)], style)
    if kind == "transformer":
        sc.circle(x, ym - 0.045, TX_R), sc.circle(x, ym + 0.045, TX_R)
    elif kind == "switch":
        sc.box_at(x, ym, 0.04, 0.04, fill=closed)
    elif kind == "impedance":
        sc.box_at(x, ym, 0.035, 0.08)
    elif closed:
        sc.seg([(x, ym - 0.01), (x, ym + 0.01)], style)
    return _SYM_W[kind]


def _scene(data: OneLine, tree: dict, size: dict, mode: str, wmax: float) -> tuple:
    lay = _layout(data, tree, size, mode, wmax)
    g, pos = lay["g"], lay["pos"]
    sc = _Scene()
    bus = {b.name: b for b in data.buses}
    for v in tree["order"]:
        b, m, (bx, y, y0) = bus[v], g[v], pos[v]
        sc.seg([(bx + m["col"] + LBL_GAP, y), (bx + m["bx1"], y)], "bold" if (b.pcc or b.bank) else "bar")
        xr = bx + m["col"]
        sc.text(("bus", v), xr, y - 0.015, "right", "bottom", size)
        sc.text(("kv", v), xr, y + 0.015, "right", "top", size)
        if b.pcc:
            sc.text(("tag", v), xr - size[("bus", v)][0] - 0.06, y - 0.03, "right", "bottom", size)
        for cx, key in m["els"]:
            cx += bx
            if key[0] == "el":
                e = data.elements[key[1]]
                _element(sc, e.kind, cx, y, e.detuning_pct is not None, e.inductive, True)
            else:
                _element(sc, "tie", cx, y, False, False, data.branches[key[1]].closed)
            sc.text(key, cx, y + STUB + SYM_H + EL_GAP, "center", "top", size)
        if m["stub"] is not None:
            sx = bx + m["stub"]
            sc.seg([(sx, y), (sx, y + 0.2)], "dash"), sc.seg([(sx - 0.03, y + 0.2), (sx + 0.03, y + 0.2)])
        for (xa, ya), (xb, yb) in m["risers"]:
            sc.seg([(bx + xa, y + ya), (bx + xb, y + yb)])
        if v in lay["main_sup"]:
            x, cy = bx + m["xl"], y - STUB - SUP_R
            sc.seg([(x, y), (x, y - STUB)]), sc.circle(x, cy, SUP_R), sc.circle(x, cy, SUP_R - 0.025)
            sc.wave(x, cy, 0.055, 0.03)
            sc.text(lay["main_sup"][v], x + SUP_R + 0.06, cy, "left", "center", size)
        if tree["parent"][v] is not None:
            for x, k in zip(m["dx"], tree["drops"][v]):
                br = data.branches[k]
                half = _drop(sc, br.kind, br.closed, bx + x, y0, y)
                sc.text(("br", k), bx + x + half + 0.05, (y0 + y) / 2, "left", "center", size)
    if mode == "routed":
        _ties(sc, data, tree, lay, size)
    return sc, lay["folded"]


def _ties(sc: _Scene, data: OneLine, tree: dict, lay: dict, size: dict) -> None:
    """Connections outside the tree: down a channel at each end, along a row of their own."""
    used, ends = {}, {}
    for k in tree["ties"]:
        xs = []
        for n in (data.branches[k].from_bus, data.branches[k].to_bus):
            used[n] = used.get(n, -1) + 1
            xs.append(lay["pos"][n][0] + lay["g"][n]["chans"][used[n]])
        ends[k] = xs
    order = sorted(tree["ties"], key=lambda k: (abs(ends[k][0] - ends[k][1]), k))
    yr = sc.box[3] + 0.12
    for i, k in enumerate(order):
        br = data.branches[k]
        yr += size[("br", k)][1] + 0.06
        (xa, xb), ya, yb = ends[k], lay["pos"][br.from_bus][1], lay["pos"][br.to_bus][1]
        sc.seg([(xa, ya), (xa, yr), (xb, yr), (xb, yb)], "thin" if br.closed else "dash")
        lo, hi = min(xa, xb), max(xa, xb)
        cuts = sorted([lo, hi] + [x for j in order[i + 1:] for x in ends[j] if lo < x < hi])
        a, b = max(zip(cuts[:-1], cuts[1:]), key=lambda ab: ab[1] - ab[0])
        sc.text(("br", k), (a + b) / 2, yr - 0.02, "center", "bottom", size)


# ---------------------------------------------------------------------------------------------
# measuring, fitting, drawing


def _renderer(fig: Figure):
    if not hasattr(fig.canvas, "get_renderer"):
        from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: PLC0415
        FigureCanvasAgg(fig)
    return fig.canvas.get_renderer()


def _make_text(ax, s: str, pt: float, bold: bool, box: bool):
    return ax.text(0.0, 0.0, s, fontsize=pt, fontweight="bold" if bold else "normal", color=INK, clip_on=False,
                   linespacing=1.15, bbox={"boxstyle": "square,pad=0.18", "fc": "white", "ec": INK, "lw": 0.6}
                   if box else None)


def _measure(fig: Figure, artists: dict) -> dict:
    r, dpi = _renderer(fig), fig.dpi
    return {k: (bb.width / dpi, bb.height / dpi) for k, bb in ((k, t.get_window_extent(r)) for k, t in artists.items())}


def _fit_line(ax, fig, s: str, pt: float, bold: bool, width: float):
    """A fixed-size text (title, note) wrapped and shrunk to ``width`` [in]; (artist, height [in])."""
    if not s:
        return None, 0.0
    t = _make_text(ax, s, pt, bold, False)
    w, h = _measure(fig, {0: t})[0]
    if w > width:
        t.set_text("\n".join(textwrap.wrap(s, max(8, int(len(s) * width / w * 0.96)))))
        w, h = _measure(fig, {0: t})[0]
        if w > width:
            t.set_fontsize(pt * width / w * 0.98)
            w, h = _measure(fig, {0: t})[0]
    return t, h


def _scale(sc: _Scene, w: float, h_avail: float | None) -> float:
    s = min(1.0, (w - 2 * MARGIN) / max(sc.box[2] - sc.box[0], 1e-6))
    if h_avail is not None:
        s = min(s, max(h_avail, 0.05) / max(sc.box[3] - sc.box[1], 1e-6))
    return max(s, 1e-3)


def _prepare(fig: Figure, ax, data: OneLine, title: str, width: float, height: float | None) -> dict:
    """Labels made and measured; the layout (plain, or with shelves when that draws larger in
    ``width`` x ``height`` [in]) chosen; title and note fitted to the width."""
    tree = _tree(data)
    specs, arts, size = {}, {}, {}

    def need(mode):
        new = {k: v for k, v in _specs(data, tree, mode).items() if k not in specs}
        specs.update(new)
        made = {k: _make_text(ax, *v) for k, v in new.items()}
        arts.update(made)
        size.update(_measure(fig, made))

    def note(mode):
        n = [data.note] if data.note else []
        n += ["Dashed: an open connection."] if any(not b.closed for b in data.branches) else []
        n += ["A ring marks a connection shown at both its ends."] if mode == "ends" and tree["ties"] else []
        return _fit_line(ax, fig, " ".join(n), NOTE_PT, False, width - 2 * MARGIN)

    t_art, t_h = _fit_line(ax, fig, title or "", TITLE_PT, True, width - 2 * MARGIN)
    mode = "routed" if len(tree["ties"]) <= MAX_ROUTED else "ends"
    need(mode)
    cands = [(_scene(data, tree, size, mode, math.inf)[0], mode)]
    for s_fold in (S_FOLD,) if height is None else (S_FOLD, 0.5, 0.36):
        avail = (width - 2 * MARGIN) / s_fold
        if cands[0][0].box[2] - cands[0][0].box[0] <= avail:
            break
        if tree["ties"]:
            need("ends")
        sc, folded = _scene(data, tree, size, "ends" if tree["ties"] else mode, avail)
        if folded or tree["ties"]:
            cands.append((sc, "ends"))
    best, notes = None, []
    for sc, mode in cands:  # the largest drawing wins (the plain layout unless 5 % smaller)
        n_art, n_h = note(mode)
        notes.append(n_art)
        fixed = 2 * MARGIN + t_h + n_h + (0.08 if t_h else 0.0) + (0.08 if n_h else 0.0)
        s = _scale(sc, width, None if height is None else height - fixed)
        if best is None or s > best["s"] * 1.05:
            best = {"scene": sc, "s": s, "note": (n_art, n_h), "fixed": fixed}
    for n_art in notes:
        if n_art is not None and n_art is not best["note"][0]:
            n_art.remove()
    return {**best, "arts": arts, "specs": specs, "title": (t_art, t_h)}


def one_line_size(data: OneLine, width_in: float, title: str = "", dpi: float | None = None,
                  max_height_in: float | None = 9.0) -> float:
    """Height the diagram needs at a given width.

    Parameters
    ----------
    data : OneLine
        The diagram's data (:func:`resonance.model.topology.one_line_data`).
    width_in : float
        Width available [in].
    title : str
        Title drawn above the diagram ("" for none) [unitless].
    dpi : float, optional
        Resolution of the figure it will be drawn in [dots per inch]; None: matplotlib's
        default figure resolution (the report's page figures).
    max_height_in : float or None
        Tallest the diagram may be [in] (a page's text height); None: no limit.

    Returns
    -------
    float
        Height [in] at which :func:`draw_one_line` draws it as large as the width (and the
        height limit) allow, at most at full size; never above ``max_height_in``.
    """
    fig = Figure(figsize=(max(width_in, 1.0), 4.0), dpi=dpi)
    p = _prepare(fig, fig.add_axes((0, 0, 1, 1)), data, title, width_in, max_height_in)
    sc = p["scene"]
    return p["fixed"] + p["s"] * (sc.box[3] - sc.box[1])


def draw_one_line(fig: Figure, rect_in: tuple, data: OneLine, title: str) -> None:
    """Draw the one-line diagram into a rectangle of a figure.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        Target figure (an Agg canvas is attached when it has none, for measuring text).
    rect_in : tuple of float
        ``(x, y_bottom, w, h)`` of the rectangle inside ``fig`` [in].
    data : OneLine
        The diagram's data (:func:`resonance.model.topology.one_line_data`).
    title : str
        Title above the diagram ("" for none) [unitless].

    Notes
    -----
    Everything is scaled down together (never up) to fit the rectangle; every label is
    measured and lies inside the rectangle, clear of every other label.  The diagram's axes
    carries the gid ``"one-line"``.
    """
    x_in, y_in, w, h = (float(v) for v in rect_in)
    fw, fh = fig.get_size_inches()
    ax = fig.add_axes((x_in / fw, y_in / fh, w / fw, h / fh))
    ax.set_axis_off()
    ax.set(xlim=(0.0, w), ylim=(0.0, h), gid="one-line")
    p = _prepare(fig, ax, data, title, w, h)
    sc, arts, s = p["scene"], p["arts"], p["s"]
    (t_art, t_h), (n_art, _) = p["title"], p["note"]
    top = h - MARGIN
    if t_art is not None:
        t_art.set(position=(MARGIN, top), va="top")
        top -= t_h + 0.08
    if n_art is not None:
        n_art.set(position=(MARGIN, MARGIN), va="bottom")
    placed = {k for k, *_ in sc.texts}
    for k in [k for k in arts if k not in placed]:
        arts.pop(k).remove()
    texts = list(arts.values()) + [t for t in (t_art, n_art) if t is not None]
    for _ in range(6):
        _place(ax, sc, arts, p["specs"], s, w, top)
        if not label_problems(fig, ax, texts):
            break
        s *= 0.94


def _place(ax, sc: _Scene, arts: dict, specs: dict, s: float, w: float, top: float) -> None:
    """Put the scene into ``ax`` at scale ``s``, centred, its top at ``top`` [in]."""
    for a in list(ax.lines) + list(ax.patches) + list(ax.collections):
        a.remove()
    ox = (w - s * (sc.box[2] - sc.box[0])) / 2 - s * sc.box[0]
    oy = top + s * sc.box[1]

    def tr(p):
        return (ox + s * p[0], oy - s * p[1])

    lw = {"thin": 0.8, "dash": 0.8, "bar": 2.4, "bold": 4.6, "plate": 1.6}
    for style, segs in sc.segs.items():
        if segs:
            ax.add_collection(LineCollection([[tr(p) for p in pts] for pts in segs], colors=INK,
                                             linewidths=max(0.3, lw[style] * s), capstyle="butt",
                                             linestyles=(0, (3.0, 2.0)) if style == "dash" else "solid"),
                              autolim=False)
    plain = [Circle(tr((x, y)), r * s) for x, y, r in sc.circles]
    plain += [Polygon([tr(p) for p in pts], closed=True) for pts, fill in sc.polys if not fill]
    solid = [Polygon([tr(p) for p in pts], closed=True) for pts, fill in sc.polys if fill]
    for patches, fc in ((plain, "none"), (solid, INK)):
        if patches:
            ax.add_collection(PatchCollection(patches, facecolors=fc, edgecolors=INK, linewidths=max(0.3, 0.8 * s)),
                              autolim=False)
    for key, x, y, ha, va in sc.texts:
        arts[key].set(position=tr((x, y)), ha=ha, va=va, fontsize=specs[key][1] * s)


def label_problems(fig: Figure, ax, texts: list) -> list[str]:
    """Labels of a drawn diagram that leave its rectangle or overlap another label.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure drawn into.
    ax : matplotlib.axes.Axes
        The diagram's axes (its position is the rectangle).
    texts : list of matplotlib.text.Text
        The labels to check.

    Returns
    -------
    list of str
        One line per problem; empty when every label fits.
    """
    r = _renderer(fig)
    box = ax.get_window_extent(r)
    bbs = np.array([[b.x0, b.y0, b.x1, b.y1] for b in (t.get_window_extent(r) for t in texts)]).reshape(-1, 4)
    tol = 0.5  # [px]
    out = [f"{t.get_text()!r} leaves the rectangle" for t, (x0, y0, x1, y1) in zip(texts, bbs)
           if x0 < box.x0 - tol or x1 > box.x1 + tol or y0 < box.y0 - tol or y1 > box.y1 + tol]
    a = bbs  # overlaps: every pair of extents apart by less than the tolerance on both axes
    ov = ((a[:, None, 0] < a[None, :, 2] - tol) & (a[None, :, 0] < a[:, None, 2] - tol)
          & (a[:, None, 1] < a[None, :, 3] - tol) & (a[None, :, 1] < a[:, None, 3] - tol))
    i, j = np.nonzero(np.triu(ov, 1))
    return out + [f"{texts[p].get_text()!r} overlaps {texts[q].get_text()!r}" for p, q in zip(i, j)]

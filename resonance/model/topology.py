"""The studied network as plain data for a one-line diagram.

:func:`one_line_data` reads the pandapower net of a :class:`~resonance.model.netmodel.PlantModel`
(its element tables only: no pandapower import, no calculation) and the case's banks and
harmonic sources, and returns a frozen :class:`OneLine`: buses, branches and the elements
attached to buses, each with a short label.  :func:`reduce_one_line` keeps the neighbourhood of
the banks and the PCC (and the path to the supply) of a large network.  The drawing lives in
:mod:`resonance.report.one_line`.

Only out-of-service elements (pandapower's ``in_service`` column) are left out; an open
switch keeps its branch, marked ``closed=False``.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass, replace

from resonance.inputs.case import Case

__all__ = ["OneLineBus", "OneLineBranch", "OneLineElement", "OneLine", "one_line_data", "reduce_one_line",
           "MAX_BUSES", "HOPS", "BRANCH_KINDS", "ELEMENT_KINDS", "fmt_num", "steps_text"]

#: networks with more buses than this are drawn reduced (:func:`reduce_one_line`) [unitless]
MAX_BUSES = 40
#: connections kept around each bank bus and the PCC in a reduced diagram [unitless]
HOPS = 2
BRANCH_KINDS = ("transformer", "line", "switch", "impedance")
ELEMENT_KINDS = ("supply", "load", "harmonic_source", "bank", "generator", "shunt")


@dataclass(frozen=True)
class OneLineBus:
    """One bus of the diagram.

    Attributes
    ----------
    name : str
        The bus's name as the case names it (network files: the unique pandapower name,
        else ``#<index>``) [unitless].
    kv : float
        Nominal line-to-line voltage [kV].
    index : int
        pandapower bus index [unitless].
    supply : bool
        The supply (external grid) bus of the study.
    pcc : bool
        The point of common coupling.
    bank : bool
        A studied bank is connected here.
    more : int
        Connections to buses left out of a reduced diagram [unitless] (0 when complete).
    """

    name: str
    kv: float
    index: int
    supply: bool = False
    pcc: bool = False
    bank: bool = False
    more: int = 0


@dataclass(frozen=True)
class OneLineBranch:
    """A connection between two buses.

    Attributes
    ----------
    kind : str
        ``transformer``, ``line``, ``switch`` or ``impedance``.
    name : str
        Element name (pandapower name, else kind and index) [unitless].
    from_bus, to_bus : str
        End buses (a transformer: HV side first) [unitless].
    label : str
        Short label, e.g. ``"TX1 1500 kVA, Z 5.75 %"`` or ``"C-1 45 m"`` [unitless].
    closed : bool
        False when a switch in the branch (or the bus-bus switch itself) is open.
    """

    kind: str
    name: str
    from_bus: str
    to_bus: str
    label: str
    closed: bool = True


@dataclass(frozen=True)
class OneLineElement:
    """Something attached to one bus (supply, load, harmonic source, bank, generator, shunt).

    Attributes
    ----------
    kind : str
        One of :data:`ELEMENT_KINDS`.
    bus : str
        The bus it is connected to [unitless].
    name : str
        Element name [unitless].
    label : str
        Short label beginning with the name, e.g. ``"PFC-1 8 x 100 kvar, 0.48 kV"`` [unitless].
    detuning_pct : float or None
        Detuning reactor p of a detuned bank [%]; None otherwise.
    main : bool
        The study's supply (for ``kind == "supply"``); False for other elements.
    inductive : bool
        A shunt reactor (for ``kind == "shunt"``: pandapower ``q_mvar > 0``); False otherwise.
    """

    kind: str
    bus: str
    name: str
    label: str
    detuning_pct: float | None = None
    main: bool = False
    inductive: bool = False


@dataclass(frozen=True)
class OneLine:
    """The diagram's data: plain values only.

    Attributes
    ----------
    title : str
        The case title [unitless].
    buses : tuple of OneLineBus
        Buses in network order.
    branches : tuple of OneLineBranch
        Connections between the buses listed.
    elements : tuple of OneLineElement
        Elements attached to the buses listed.
    supply_bus, pcc_bus : str
        The supply bus and the point of common coupling [unitless].
    bank_buses : tuple of str
        Buses with a studied bank, in the case's order, no repeats [unitless].
    total_buses : int
        Buses of the whole network (in service) [unitless].
    left_out : int
        Buses of the network not listed (0 when complete) [unitless].
    note : str
        What was left out and why ("" when complete) [unitless].
    """

    title: str
    buses: tuple
    branches: tuple
    elements: tuple
    supply_bus: str
    pcc_bus: str
    bank_buses: tuple
    total_buses: int
    left_out: int = 0
    note: str = ""

    @property
    def bus_names(self) -> tuple:
        """Names of the buses listed, in order [unitless]."""
        return tuple(b.name for b in self.buses)

    def elements_at(self, bus: str) -> tuple:
        """Elements attached to ``bus`` [unitless name], in order.

        Parameters
        ----------
        bus : str
            Bus name [unitless].

        Returns
        -------
        tuple of OneLineElement
        """
        return tuple(e for e in self.elements if e.bus == bus)

    def reduced(self, max_buses: int = MAX_BUSES, hops: int = HOPS) -> "OneLine":
        """The diagram reduced to the banks' and the PCC's neighbourhood (:func:`reduce_one_line`).

        Parameters
        ----------
        max_buses : int
            Largest network drawn complete [unitless].
        hops : int
            Connections kept around each bank bus and the PCC, at most [unitless].

        Returns
        -------
        OneLine
        """
        return reduce_one_line(self, max_buses=max_buses, hops=hops)


# ---------------------------------------------------------------------------------------------
# formatting


def fmt_num(x: float) -> str:
    """A number in three significant digits (whole numbers from 100 on), no trailing zeros (``5.75``, ``2000``).

    Parameters
    ----------
    x : float
        The value [any unit].

    Returns
    -------
    str
    """
    x = float(x)
    if not math.isfinite(x):
        return "?"
    if x == 0:
        return "0"
    digits = max(0, 2 - int(math.floor(math.log10(abs(x)))))
    s = f"{x:.{digits}f}"
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _power(kw: float, unit: str) -> str:
    """``kw`` in k<unit>, in M<unit> from 10 000 k<unit> on."""
    return f"{fmt_num(kw / 1000.0)} M{unit}" if abs(kw) >= 10_000 else f"{fmt_num(kw)} k{unit}"


def steps_text(steps_kvar) -> str:
    """Bank stages grouped: ``[100] * 8 -> "8 x 100 kvar"``, ``[50, 50, 100] -> "2 x 50 + 100 kvar"``.

    Parameters
    ----------
    steps_kvar : sequence of float
        Stage sizes [kvar].

    Returns
    -------
    str
    """
    groups: list[list] = []
    for q in steps_kvar:
        if groups and math.isclose(groups[-1][0], q, rel_tol=1e-9):
            groups[-1][1] += 1
        else:
            groups.append([float(q), 1])
    parts = [(f"{n} x {fmt_num(q)}" if n > 1 else fmt_num(q)) for q, n in groups]
    return " + ".join(parts) + " kvar"


def _length(km: float) -> str:
    return f"{fmt_num(km)} km" if km >= 1.0 else f"{fmt_num(km * 1000.0)} m"


def _text(v) -> str:
    """A table cell as a name ("" for None, NaN and blanks)."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return ""
    s = str(v).strip()
    return "" if s.lower() == "nan" else s


def _num(row, key: str, default: float = float("nan")) -> float:
    try:
        v = float(row.get(key, default))
    except (TypeError, ValueError):
        return default
    return v if math.isfinite(v) else default


def _rows(net, key: str):
    """(index, row dict) of the in-service rows of table ``key`` (none when absent or empty)."""
    if key not in net:
        return []
    df = net[key]
    if not hasattr(df, "to_dict") or len(df) == 0:
        return []
    out = []
    for idx, row in zip(df.index, df.to_dict("records")):
        if "in_service" in row and not bool(row["in_service"]):
            continue
        out.append((int(idx), row))
    return out


# ---------------------------------------------------------------------------------------------
# extraction


def _bus_names(model) -> dict:
    """pandapower index -> the name the case uses: the unique pandapower name, else ``#<index>``."""
    out: dict[int, str] = {}
    for i, name in zip(model.net.bus.index, model.net.bus["name"]):
        i = int(i)
        label = str(name) if isinstance(name, str) and name.strip() else f"#{i}"
        out[i] = label if model.bus_pp.get(label) == i else f"#{i}"
    return out


def _open_switches(net, names: dict) -> tuple[set, list]:
    """(element kind, index) of lines and transformers with an open switch; bus-bus switches."""
    opened: set = set()
    bus_bus = []
    for i, r in _rows(net, "switch"):
        et = _text(r.get("et"))
        closed = bool(r.get("closed", True))
        if et == "b":
            bus_bus.append((i, r, closed))
        elif not closed and et in ("l", "t", "t3"):
            opened.add(({"l": "line", "t": "trafo", "t3": "trafo3w"}[et], int(r["element"])))
    return opened, bus_bus


def _branches(net, names: dict) -> list[OneLineBranch]:
    opened, bus_bus = _open_switches(net, names)
    out: list[OneLineBranch] = []

    def add(kind, name, a, b, label, closed=True):
        if a in names and b in names:
            out.append(OneLineBranch(kind, name, names[a], names[b], label if closed else f"{label}, open", closed))

    for i, r in _rows(net, "trafo"):
        name = _text(r.get("name")) or f"trafo {i}"
        par = int(_num(r, "parallel", 1.0))
        kva = _num(r, "sn_mva") * 1000.0
        size = (f"{par} x " if par > 1 else "") + _power(kva, "VA")
        add("transformer", name, int(r["hv_bus"]), int(r["lv_bus"]),
            f"{name} {size}, Z {fmt_num(_num(r, 'vk_percent'))} %", ("trafo", i) not in opened)
    for i, r in _rows(net, "trafo3w"):
        name = _text(r.get("name")) or f"trafo3w {i}"
        closed = ("trafo3w", i) not in opened
        for side, vk in (("mv", "vk_hv_percent"), ("lv", "vk_lv_percent")):
            kva = min(_num(r, "sn_hv_mva"), _num(r, f"sn_{side}_mva")) * 1000.0
            add("transformer", name, int(r["hv_bus"]), int(r[f"{side}_bus"]),
                f"{name} HV-{side.upper()} {_power(kva, 'VA')}, Z {fmt_num(_num(r, vk))} %", closed)
    for i, r in _rows(net, "line"):
        name = _text(r.get("name")) or f"line {i}"
        par = int(_num(r, "parallel", 1.0))
        label = f"{name} {_length(_num(r, 'length_km', 0.0))}" + (f", {par} parallel" if par > 1 else "")
        add("line", name, int(r["from_bus"]), int(r["to_bus"]), label, ("line", i) not in opened)
    for i, r in _rows(net, "impedance"):
        name = _text(r.get("name")) or f"impedance {i}"
        add("impedance", name, int(r["from_bus"]), int(r["to_bus"]), f"{name} impedance")
    for i, r, closed in bus_bus:
        name = _text(r.get("name")) or f"switch {i}"
        add("switch", name, int(r["bus"]), int(r["element"]), name, closed)
    return out


def _net_elements(model, names: dict, supply_pp: int) -> list[OneLineElement]:
    net = model.net
    out: list[OneLineElement] = []
    main_done = False
    for i, r in _rows(net, "ext_grid"):
        b = int(r["bus"])
        if b not in names:
            continue
        if b == supply_pp and not main_done:
            main_done = True
            label = f"Supply {fmt_num(model.sc_mva_supply)} MVA, X/R {fmt_num(model.x_r_supply)}"
            if model.sc_mva_supply_min is not None:
                label += f", weak {fmt_num(model.sc_mva_supply_min)} MVA"
            out.append(OneLineElement("supply", names[b], "Supply", label, main=True))
            continue
        name = _text(r.get("name")) or f"grid {i}"
        sc = _num(r, "s_sc_max_mva")
        out.append(OneLineElement("supply", names[b], name,
                                  f"{name} {fmt_num(sc)} MVA" if math.isfinite(sc) else name))
    for key, kind, what in (("load", "load", "load"), ("motor", "load", "motor"), ("sgen", "generator", "gen"),
                            ("gen", "generator", "gen"), ("storage", "generator", "storage")):
        for i, r in _rows(net, key):
            b = int(r["bus"])
            if b not in names:
                continue
            name = _text(r.get("name")) or f"{what} {i}"
            if key == "motor":
                kw = _num(r, "pn_mech_mw", 0.0) * 1000.0
                label = f"{name} motor {_power(kw, 'W')}"
            else:
                kw = _num(r, "p_mw", 0.0) * 1000.0 * _num(r, "scaling", 1.0)
                label = f"{name} {_power(kw, 'W')}" + (" storage" if key == "storage" else "")
            out.append(OneLineElement(kind, names[b], name, label))
    for i, r in _rows(net, "shunt"):
        b = int(r["bus"])
        if b not in names:
            continue
        name = _text(r.get("name")) or f"shunt {i}"
        q = _num(r, "q_mvar", 0.0) * 1000.0 * _num(r, "step", 1.0)
        label = f"{name} {_power(abs(q), 'var')} " + ("reactor" if q > 0 else "capacitor")
        out.append(OneLineElement("shunt", names[b], name, label, inductive=q > 0))
    return out


def _case_elements(case: Case) -> list[OneLineElement]:
    out = []
    for s in case.harmonic_source:
        out.append(OneLineElement("harmonic_source", s.bus, s.name, f"{s.name} {_power(s.kva, 'VA')}"))
    for bk in case.bank:
        label = f"{bk.name} {steps_text(bk.steps_kvar)}, {fmt_num(bk.rated_kv)} kV"
        if bk.detuning_pct is not None:
            label += f", p {fmt_num(bk.detuning_pct)} %"
        out.append(OneLineElement("bank", bk.bus, bk.name, label, detuning_pct=bk.detuning_pct))
    return out


def one_line_data(model, case: Case, max_buses: int | None = MAX_BUSES, hops: int = HOPS) -> OneLine:
    """The one-line diagram's data of a studied network.

    Parameters
    ----------
    model : PlantModel
        The plant model (:func:`resonance.model.netmodel.build_model`); its net is read, not changed.
    case : Case
        The validated case (banks, harmonic sources, PCC, title).
    max_buses : int or None
        A network with more buses is reduced (:func:`reduce_one_line`) [unitless]; None: never.
    hops : int
        Connections kept around each bank bus and the PCC when reduced [unitless].

    Returns
    -------
    OneLine
        Buses (in network order), branches and elements; every bus in service (or, reduced,
        the banks' and the PCC's neighbourhood and the path to the supply).
    """
    net = model.net
    all_names = _bus_names(model)
    names = {i: all_names[i] for i, _ in _rows(net, "bus")}
    supply_pp = int(model.bus_pp[model.supply_bus])
    supply = names.get(supply_pp, model.supply_bus)
    pcc = case.study.pcc_bus or (case.supply.bus if case.supply else "") or supply
    pcc = names.get(int(model.bus_pp[pcc]), pcc) if pcc in model.bus_pp else pcc
    bank_buses: list[str] = []
    for bk in case.bank:
        n = names.get(int(model.bus_pp[bk.bus]), bk.bus) if bk.bus in model.bus_pp else bk.bus
        if n not in bank_buses:
            bank_buses.append(n)
    buses = []
    for i, r in _rows(net, "bus"):
        n = names[i]
        buses.append(OneLineBus(n, _num(r, "vn_kv"), i, supply=n == supply, pcc=n == pcc, bank=n in bank_buses))
    # the case names a bus as the case file does ('#3' or its name): show the model's label
    alias = {k: names[int(v)] for k, v in model.bus_pp.items() if int(v) in names}
    case_el = [replace(e, bus=alias.get(e.bus, e.bus)) for e in _case_elements(case)]
    net_el = _net_elements(model, names, supply_pp)
    # the supply first, then per bus: banks, harmonic sources, the network's own elements
    order = {"supply": 0, "bank": 1, "harmonic_source": 2}
    elements = sorted(net_el + case_el, key=lambda e: order.get(e.kind, 3))
    data = OneLine(title=case.title, buses=tuple(buses), branches=tuple(_branches(net, names)),
                   elements=tuple(elements), supply_bus=supply, pcc_bus=pcc, bank_buses=tuple(bank_buses),
                   total_buses=len(buses))
    if max_buses is not None:
        data = reduce_one_line(data, max_buses=max_buses, hops=hops)
    return data


# ---------------------------------------------------------------------------------------------
# reduction


def _adjacency(data: OneLine, closed_only: bool) -> dict:
    adj: dict[str, list] = {b.name: [] for b in data.buses}
    for br in data.branches:
        if closed_only and not br.closed:
            continue
        if br.from_bus in adj and br.to_bus in adj and br.from_bus != br.to_bus:
            adj[br.from_bus].append(br.to_bus)
            adj[br.to_bus].append(br.from_bus)
    return adj


def _bfs(adj: dict, starts) -> dict:
    """Hop count from the nearest start to every bus reached."""
    dist = {s: 0 for s in starts if s in adj}
    q = deque(dist)
    while q:
        u = q.popleft()
        for v in adj[u]:
            if v not in dist:
                dist[v] = dist[u] + 1
                q.append(v)
    return dist


def _path_to(adj: dict, source: str, targets) -> set:
    """Buses on a shortest path from ``source`` to each of ``targets`` (those it reaches)."""
    if source not in adj:
        return set()
    parent = {source: None}
    q = deque([source])
    while q:
        u = q.popleft()
        for v in adj[u]:
            if v not in parent:
                parent[v] = u
                q.append(v)
    keep = set()
    for t in targets:
        while t is not None and t in parent and t not in keep:
            keep.add(t)
            t = parent[t]
    return keep


def reduce_one_line(data: OneLine, max_buses: int = MAX_BUSES, hops: int = HOPS) -> OneLine:
    """The diagram of a large network cut to the neighbourhood of the banks and the PCC.

    Kept: every bank bus, the PCC and the supply bus; every bus within ``hops`` connections of
    a bank bus or the PCC (fewer hops when that is still more than ``max_buses`` buses, down
    to none); and the buses on a shortest path from the supply to each of them (closed
    branches first).  Each kept bus counts its connections to buses left out (``more``).

    Parameters
    ----------
    data : OneLine
        The complete diagram.
    max_buses : int
        Largest network drawn complete [unitless]; ``data`` is returned unchanged at or below.
    hops : int
        Connections kept around each bank bus and the PCC, at most [unitless].

    Returns
    -------
    OneLine
        ``left_out`` buses fewer, with a ``note`` saying how many and which were kept.
    """
    if len(data.buses) <= max_buses:
        return data
    adj_all = _adjacency(data, closed_only=False)
    adj_closed = _adjacency(data, closed_only=True)
    centres = [b for b in (*data.bank_buses, data.pcc_bus) if b in adj_all]
    core = set(centres) | ({data.supply_bus} if data.supply_bus in adj_all else set())
    keep: set = set(core)
    used = 0
    for h in range(max(int(hops), 0), -1, -1):
        dist = _bfs(adj_all, centres)
        near = {b for b, d in dist.items() if d <= h} | core
        path = _path_to(adj_closed, data.supply_bus, near)
        missing = near - path
        if missing:
            path |= _path_to(adj_all, data.supply_bus, missing)
        keep, used = near | path, h
        if len(keep) <= max_buses:
            break
    more = {b: sum(1 for v in adj_all[b] if v not in keep) for b in keep}
    buses = tuple(replace(b, more=more[b.name]) for b in data.buses if b.name in keep)
    branches = tuple(br for br in data.branches if br.from_bus in keep and br.to_bus in keep)
    elements = tuple(e for e in data.elements if e.bus in keep)
    left = data.total_buses - len(buses)
    what = "the bank buses and the PCC" if data.bank_buses else "the PCC"
    note = (f"{left} of {data.total_buses} buses left out: shown are the buses within {used} "
            f"connection{'s' if used != 1 else ''} of {what} and the path from the supply; "
            "a dashed stub marks a connection to a bus left out.")
    return replace(data, buses=buses, branches=branches, elements=elements, left_out=left, note=note)

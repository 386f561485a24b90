"""The one-line diagram: its data lists the studied network (or, for a large network, the banks'
neighbourhood), and its drawing names every bus and bank with labels that stay inside the
drawing's rectangle and clear of each other.

Outside references: the network-file case's feeder is pandapower's CIGRE medium-voltage
benchmark as saved in cases/cigre_mv_network.json (pandapower.networks.create_cigre_network_mv;
CIGRE TF C6.04.02, "Benchmark Systems for Network Integration of Renewable and Distributed
Energy Resources", 2014: 15 buses, two 25 MVA transformers, feeder switches S1-S3 open); the
hop counts and shortest paths of the reduced network are checked with networkx.
"""

from __future__ import annotations

import time
import warnings

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.text import Text

from resonance.inputs.case_load import load_case, parse_case
from resonance.model.netmodel import build_model
from resonance.model.topology import MAX_BUSES, fmt_num, one_line_data, reduce_one_line, steps_text
from resonance.report.one_line import draw_one_line, one_line_size

from .conftest import CASES

BUNDLED = sorted(p.stem for p in CASES.glob("*.toml"))
WIDTH = 7.0  # [in], a report page's text width


@pytest.fixture(scope="module")
def studied():
    out = {}
    for name in BUNDLED:
        case = load_case(CASES / f"{name}.toml")
        model = build_model(case)
        out[name] = (case, model, one_line_data(model, case))
    return out


def _in_service_buses(model) -> set:
    bus = model.net.bus
    return {int(i) for i, ok in zip(bus.index, bus["in_service"]) if bool(ok)}


def _draw(data, w=WIDTH, h=None, title="One-line diagram"):
    h = one_line_size(data, w, title) if h is None else h
    fig = Figure(figsize=(w + 1.0, h + 1.0))
    FigureCanvasAgg(fig)
    t0 = time.perf_counter()
    draw_one_line(fig, (0.5, 0.5, w, h), data, title)
    return fig, (0.5, 0.5, w, h), time.perf_counter() - t0


def _labels(fig) -> list:
    return [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip()]


def _extents_fit(fig, rect, texts) -> list[str]:
    """Every label inside the rectangle and no two labels' extents overlapping (0.5 px slack)."""
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    dpi = fig.dpi
    x, y, w, h = (v * dpi for v in rect)
    bbs = [t.get_window_extent(r) for t in texts]
    bad = [t.get_text() for t, b in zip(texts, bbs)
           if b.x0 < x - 0.5 or b.x1 > x + w + 0.5 or b.y0 < y - 0.5 or b.y1 > y + h + 0.5]
    for i in range(len(bbs)):
        for j in range(i + 1, len(bbs)):
            a, b = bbs[i], bbs[j]
            if min(a.x1, b.x1) - max(a.x0, b.x0) > 0.5 and min(a.y1, b.y1) - max(a.y0, b.y0) > 0.5:
                bad.append(f"{texts[i].get_text()!r} x {texts[j].get_text()!r}")
    return bad


@pytest.mark.parametrize("name", BUNDLED)
def test_the_data_lists_every_bus_and_bank(studied, name):
    case, model, data = studied[name]
    listed = [model.bus_pp[b.name] for b in data.buses]
    assert len(set(listed)) == len(listed)  # every bus once, named as the case may name it
    if data.left_out:
        assert data.total_buses > MAX_BUSES and str(data.left_out) in data.note
        assert data.left_out == len(_in_service_buses(model)) - len(data.buses)
    else:
        assert set(listed) == _in_service_buses(model)
    names = set(data.bus_names)
    assert data.supply_bus in names and data.pcc_bus in names and set(data.bank_buses) <= names
    banks = [e for e in data.elements if e.kind == "bank"]
    assert [e.name for e in banks] == [b.name for b in case.bank]
    for e, b in zip(banks, case.bank):
        assert model.bus_pp[e.bus] == model.bus_pp[b.bus] and e.label.startswith(b.name)
        assert e.detuning_pct == b.detuning_pct
    assert sum(e.kind == "supply" and e.main for e in data.elements) == 1
    for br in data.branches:
        assert br.from_bus in names and br.to_bus in names


def test_labels_say_what_the_case_file_says(studied):
    _, _, demo = studied["demo_plant"]
    labels = {e.label for e in demo.elements} | {b.label for b in demo.branches}
    # cases/demo_plant.toml: TX-1 2000 kVA 5.75 %, FDR-EXT 45 m 2 in parallel, PFC-1 8 x 100 kvar
    assert {"TX-1 2000 kVA, Z 5.75 %", "FDR-EXT 45 m, 2 parallel", "PFC-1 8 x 100 kvar, 0.48 kV",
            "Supply 250 MVA, X/R 10, weak 150 MVA", "Extruder drives 600 kVA", "Motors and process 900 kW"} <= labels
    (pfc,) = [b for b in demo.buses if b.bank]
    assert pfc.name == "MSB-1" and not pfc.pcc and [b.name for b in demo.buses if b.pcc] == ["UTIL-13.8"]
    _, _, cold = studied["cold_store_50hz"]
    assert "APFC-1 6 x 50 kvar, 0.44 kV, p 7 %" in {e.label for e in cold.elements}
    assert steps_text([50.0, 50.0, 100.0]) == "2 x 50 + 100 kvar" and steps_text([300.0]) == "300 kvar"
    assert [fmt_num(v) for v in (5.75, 2000.0, 12.00107, 0.48, 276.45)] == ["5.75", "2000", "12", "0.48", "276"]


def test_the_cigre_feeder_shows_its_open_switches(studied):
    _, model, data = studied["feeder_network_file"]
    assert data.total_buses == 15 and data.left_out == 0
    kinds = [b.kind for b in data.branches]
    assert kinds.count("transformer") == 2 and kinds.count("line") == 15
    sw = model.net.switch
    open_lines = {model.net.line.at[int(e), "name"] for e, et, c in zip(sw.element, sw.et, sw.closed)
                  if et == "l" and not bool(c)}
    assert len(open_lines) == 3
    assert {b.name for b in data.branches if not b.closed} == open_lines
    assert all(b.label.endswith(", open") for b in data.branches if not b.closed)
    fig, _, _ = _draw(data)
    text = " ".join(t.get_text().replace("\n", " ") for t in _labels(fig))
    assert all(name in text for name in open_lines) and "open" in text


@pytest.mark.parametrize("name", BUNDLED)
def test_the_drawing_names_everything_inside_its_rectangle(studied, name):
    case, _, data = studied[name]
    fig, rect, seconds = _draw(data, title=f"One-line diagram: {case.title}")
    texts = _labels(fig)
    strings = [t.get_text() for t in texts]
    assert set(data.bus_names) <= set(strings)
    flat = " ".join(s.replace("\n", " ") for s in strings)
    assert all(b.name in flat for b in case.bank)
    assert "PCC" in strings
    assert _extents_fit(fig, rect, texts) == []
    assert seconds < 1.0
    # a rectangle too small for full size: everything shrinks together and still fits
    small, rect, _ = _draw(data, w=3.2, h=1.6, title="")
    assert _extents_fit(small, rect, _labels(small)) == []
    assert set(data.bus_names) <= {t.get_text() for t in _labels(small)}


def test_the_drawing_size_follows_the_width(studied):
    data = studied["feeder_network_file"][2]
    tall, wide = one_line_size(data, 4.0, max_height_in=None), one_line_size(data, 7.0, max_height_in=None)
    assert tall > 0 and wide > 0 and one_line_size(data, 7.0, max_height_in=3.0) <= 3.0 + 1e-9
    small = studied["cold_store_50hz"][2]
    assert one_line_size(small, 12.0) == pytest.approx(one_line_size(small, 10.0))  # never drawn above full size


def _synthetic_net():
    """Three 19-bus 20 kV feeders from one substation (59 buses; invented data)."""
    import pandapower as pp

    net = pp.create_empty_network(f_hz=50.0)
    hv, mv = pp.create_bus(net, 110.0, name="GRID"), pp.create_bus(net, 20.0, name="SUB-20")
    pp.create_ext_grid(net, hv, s_sc_max_mva=3000.0, rx_max=0.1)
    pp.create_transformer_from_parameters(net, hv, mv, sn_mva=40.0, vn_hv_kv=110.0, vn_lv_kv=20.0, vkr_percent=0.5,
                                          vk_percent=12.0, pfe_kw=0.0, i0_percent=0.0, name="T-SUB")
    ends = []
    for f in range(1, 4):
        prev = mv
        for k in range(1, 20):
            b = pp.create_bus(net, 20.0, name=f"F{f}-{k:02d}")
            pp.create_line_from_parameters(net, prev, b, 0.8, 0.16, 0.11, 250.0, 0.4, name=f"L{f}-{k}")
            pp.create_load(net, b, p_mw=0.3, q_mvar=0.1, name=f"LD{f}-{k}")
            prev = b
        ends.append(prev)
    line = pp.create_line_from_parameters(net, ends[1], ends[2], 1.0, 0.16, 0.11, 250.0, 0.4, name="TIE-23")
    pp.create_switch(net, ends[1], line, et="l", closed=False, name="NO-1")
    return net


def _live_case(raw: dict):
    return parse_case({**raw, "network": {"pandapower_json": "(pandapower net given in the test)"}},
                      file="<test>", base_dir=".")


def test_a_60_bus_network_is_reduced_to_the_banks_neighbourhood():
    import networkx as nx

    net = _synthetic_net()
    case = _live_case({"title": "Synthetic feeders", "frequency_hz": 50,
                       "supply": {"bus": "GRID", "kv": 110.0, "sc_mva": 3000.0, "x_r": 10.0},
                       "harmonic_source": [{"name": "Drives", "bus": "F2-10", "kva": 800.0,
                                            "spectrum": "six-pulse-drive"}],
                       "bank": [{"name": "CAP-F2", "bus": "F2-10", "rated_kv": 20.0, "steps_kvar": [500.0, 500.0]}],
                       "study": {"pcc_bus": "SUB-20"}})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = build_model(case, net=net)
    full = one_line_data(model, case, max_buses=None)
    assert len(full.buses) == full.total_buses == 59 and full.left_out == 0
    data = one_line_data(model, case)
    assert data == reduce_one_line(full) and data == full.reduced()
    # the expected neighbourhood, from networkx on the same connections
    g = nx.MultiGraph([(b.from_bus, b.to_bus) for b in full.branches])
    near = set()
    for centre in ("F2-10", "SUB-20"):
        near |= set(nx.single_source_shortest_path_length(g, centre, cutoff=2))
    closed = nx.Graph([(b.from_bus, b.to_bus) for b in full.branches if b.closed])
    keep = set(near)
    for b in near:
        keep |= set(nx.shortest_path(closed, "GRID", b))
    assert set(data.bus_names) == keep and len(keep) <= MAX_BUSES
    assert data.left_out == 59 - len(keep) and f"{data.left_out} of 59 buses" in data.note
    assert {"F2-10", "SUB-20", "GRID", "F2-08", "F2-12", "F1-01", "F3-02"} <= keep
    assert "F1-03" not in keep and "F2-13" not in keep and "F3-19" not in keep
    more = {b.name: b.more for b in data.buses}
    assert more["F2-12"] == 1 and more["F1-02"] == 1 and more["F2-10"] == 0
    assert {e.name for e in data.elements if e.kind == "load"} == {f"LD{b[1]}-{int(b[3:])}" for b in keep
                                                                     if b.startswith("F")}
    assert all(br.from_bus in keep and br.to_bus in keep for br in data.branches)
    # the reduced drawing, still tidy
    fig, rect, seconds = _draw(data)
    texts = _labels(fig)
    assert set(data.bus_names) <= {t.get_text() for t in texts}
    assert any(str(data.left_out) in t.get_text() for t in texts)
    assert _extents_fit(fig, rect, texts) == [] and seconds < 1.0


def test_out_of_service_elements_are_left_out_and_islands_drawn():
    import pandapower as pp

    net = pp.from_json(str(CASES / "cigre_mv_network.json"))
    line = int(np.flatnonzero(net.line["name"] == "Line 13-14")[0])
    net.line.at[net.line.index[line], "in_service"] = False
    net.load.at[net.load.index[net.load["name"] == "Load R5"][0], "in_service"] = False
    case = _live_case({"title": "CIGRE feeder, one line out", "frequency_hz": 50,
                       "supply": {"bus": "Bus 0", "kv": 110.0, "sc_mva": 5000.0, "x_r": 10.0},
                       "bank": [{"name": "FDR1-CAP", "bus": "Bus 9", "rated_kv": 20.0, "steps_kvar": [600.0]}]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = build_model(case, net=net)
    data = one_line_data(model, case)
    assert "Line 13-14" not in {b.name for b in data.branches} and len(data.branches) == 16
    assert "Load R5" not in {e.name for e in data.elements} and "Load R14" in {e.name for e in data.elements}
    assert "Bus 14" in data.bus_names  # in service, though now cut off from the supply
    fig, rect, _ = _draw(data)
    texts = _labels(fig)
    assert set(data.bus_names) <= {t.get_text() for t in texts}
    assert _extents_fit(fig, rect, texts) == []


def test_every_kind_of_branch_and_element_is_listed_and_drawn():
    import pandapower as pp

    net = pp.create_empty_network(f_hz=50.0)
    hv, mv, lv, mv2, mv3, mv4 = (pp.create_bus(net, kv, name=n) for kv, n in
                                 ((110.0, "HV"), (20.0, "MV"), (0.4, "LV"), (20.0, "MV2"), (20.0, "MV3"), (20.0, "MV4")))
    pp.create_bus(net, 20.0, name="SPARE", in_service=False)
    pp.create_ext_grid(net, hv, s_sc_max_mva=2000.0, rx_max=0.1)
    pp.create_transformer3w_from_parameters(
        net, hv, mv, lv, vn_hv_kv=110.0, vn_mv_kv=20.0, vn_lv_kv=0.4, sn_hv_mva=40.0, sn_mv_mva=40.0, sn_lv_mva=2.0,
        vk_hv_percent=12.0, vk_mv_percent=8.0, vk_lv_percent=10.0, vkr_hv_percent=0.4, vkr_mv_percent=0.4,
        vkr_lv_percent=0.4, pfe_kw=0.0, i0_percent=0.0, name="T3")
    pp.create_switch(net, mv, mv2, et="b", closed=True, name="CB-2")
    pp.create_switch(net, mv2, mv3, et="b", closed=False, name="CB-3")
    pp.create_impedance(net, mv2, mv4, rft_pu=0.01, xft_pu=0.05, sn_mva=10.0, name="Z-4")
    pp.create_sgen(net, mv4, p_mw=2.0, name="PV-1")
    pp.create_shunt(net, mv, q_mvar=0.5, p_mw=0.0, name="R-1")  # pandapower: q_mvar > 0 absorbs (a reactor)
    pp.create_shunt(net, mv2, q_mvar=-1.0, p_mw=0.0, name="C-1")
    pp.create_storage(net, lv, p_mw=0.1, max_e_mwh=0.2, name="BESS")
    pp.create_load(net, mv3, p_mw=1.0, q_mvar=0.2, name="LD-3")
    case = _live_case({"title": "Every kind", "frequency_hz": 50,
                       "supply": {"bus": "HV", "kv": 110.0, "sc_mva": 2000.0, "x_r": 10.0},
                       "bank": [{"name": "LV-CAP", "bus": "LV", "rated_kv": 0.44, "steps_kvar": [50.0, 50.0],
                                 "detuning_pct": 7.0}]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = build_model(case, net=net)
    data = one_line_data(model, case)
    assert data.bus_names == ("HV", "MV", "LV", "MV2", "MV3", "MV4")  # the spare bus is out of service
    branches = {(b.kind, b.from_bus, b.to_bus, b.closed) for b in data.branches}
    assert branches == {("transformer", "HV", "MV", True), ("transformer", "HV", "LV", True),
                        ("impedance", "MV2", "MV4", True), ("switch", "MV", "MV2", True),
                        ("switch", "MV2", "MV3", False)}
    kinds = {e.name: (e.kind, e.bus, e.inductive) for e in data.elements}
    assert kinds == {"Supply": ("supply", "HV", False), "LV-CAP": ("bank", "LV", False),
                     "LD-3": ("load", "MV3", False), "PV-1": ("generator", "MV4", False),
                     "BESS": ("generator", "LV", False), "R-1": ("shunt", "MV", True), "C-1": ("shunt", "MV2", False)}
    fig, rect, _ = _draw(data)
    texts = _labels(fig)
    flat = " ".join(t.get_text().replace("\n", " ") for t in texts)
    assert all(n in flat for n in ("T3", "CB-2", "CB-3", "Z-4", "PV-1", "R-1", "C-1", "BESS", "LV-CAP", "open"))
    assert _extents_fit(fig, rect, texts) == []

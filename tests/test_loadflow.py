"""The arrays load flow (resonance.model.loadflow) against closed forms and pandapower's runpp."""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
import scipy.sparse as sp

from resonance.model import loadflow
from resonance.inputs.case_load import load_case
from resonance.errors import ModelError
from resonance.model.loadflow import PowerFlowCase, newton_raphson, solve_with_shunts
from resonance.model.pp_loadflow import LoadFlow, load_flow_session
from resonance.model.netmodel import build_model

from .conftest import CASES


def _assert_same_arrays(a, b) -> None:
    """Every field of two NetworkArrays equal (arrays element by element)."""
    import dataclasses

    for f in dataclasses.fields(b):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if isinstance(y, np.ndarray):
            np.testing.assert_array_equal(x, y, err_msg=f.name)
        else:
            assert x == y, f.name


def _two_bus(z_pu: complex, s_load_pu: complex) -> PowerFlowCase:
    y = 1.0 / z_pu
    ybus = sp.csr_matrix(np.array([[y, -y], [-y, y]]))
    return PowerFlowCase(ybus=ybus, sbus=np.array([0.0, -s_load_pu]), v0=np.array([1.0 + 0j, 1.0 + 0j]),
                         ref=np.array([0]), pv=np.array([], int), pq=np.array([1]))


@pytest.mark.parametrize("dense_max", [200, 0])
def test_capacitor_behind_source_impedance_is_a_voltage_divider(monkeypatch, dense_max):
    # Reference: derived from the voltage divider V = E Z_c / (Z_s + Z_c) = E / (1 + j B Z_s)
    # (no load; a constant-susceptance capacitor B behind the source impedance Z_s)
    monkeypatch.setattr(loadflow, "DENSE_MAX_BUS", dense_max)
    z_s = 0.005 + 0.05j
    b = 0.4
    v, ok, _ = solve_with_shunts(_two_bus(z_s, 0.0), np.array([1]), np.array([b]))
    assert ok
    assert v[1] == pytest.approx(1.0 / (1.0 + 1j * b * z_s), abs=1e-10)


def test_constant_power_load_on_a_line_matches_the_quadratic():
    # Reference: derived; for a purely reactive line X and a load P at unity power factor,
    # V^4 - V^2 E^2 + (P X)^2 = 0 gives V^2 = (E^2 + sqrt(E^4 - 4 (P X)^2)) / 2 (upper root)
    x, p = 0.2, 1.5
    v, ok, it = newton_raphson(_two_bus(1j * x, p))
    assert ok and it > 0
    assert abs(v[1]) == pytest.approx(np.sqrt((1.0 + np.sqrt(1.0 - 4.0 * (p * x) ** 2)) / 2.0), abs=1e-10)
    # power balance: what the source sends equals the load (lossless line)
    s_ref = v[0] * np.conj((v[0] - v[1]) / (1j * x))
    assert s_ref.real == pytest.approx(p, abs=1e-9)


def test_load_beyond_the_nose_point_does_not_converge():
    # Reference: derived from the quadratic above; no real solution when 2 P X > E^2
    _, ok, _ = newton_raphson(_two_bus(0.2j, 3.0), max_iter=20)
    assert not ok


@pytest.mark.parametrize("case_name", ["demo_plant.toml", "cold_store_50hz.toml", "water_plant_mv.toml",
                                       "feeder_network_file.toml"])
def test_arrays_path_matches_pandapower_runpp_for_every_bank_output(case_name):
    # Reference: pandapower runpp (Newton-Raphson) on the same net with the bank as a shunt
    case = load_case(CASES / case_name)
    model = build_model(case)
    buses = {b.name: b.bus for b in case.bank}
    for weak in (False, True):
        if weak and model.sc_mva_supply_min is None:
            continue
        # the sessions the study uses: the weak one is the nominal one with the supply changed
        fast = load_flow_session(model, buses, weak=weak)
        assert fast.mode == "arrays"
        ref = LoadFlow(model, buses, weak=weak)
        ref.mode = "pandapower"
        for q in (0.0, 75.0, 300.0, 900.0, 1600.0, 300.0):
            outputs = {b.name: q for b in case.bank}
            np.testing.assert_allclose(fast.vm_pu(outputs), ref.vm_pu(outputs), rtol=0, atol=1e-8)


def test_sparse_path_with_generators_matches_pandapower_case118(monkeypatch):
    # Reference: pandapower runpp on its bundled case118 (PV buses), with and without an added shunt
    import pandapower as pp
    import pandapower.networks as pn

    monkeypatch.setattr(loadflow, "DENSE_MAX_BUS", 0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        net = copy.deepcopy(pn.case118())
        pp.runpp(net, calculate_voltage_angles=True, numba=False, init="flat")
    internal = net._ppc["internal"]
    v_pp = internal["V"]
    ref = internal["ref"]
    v0 = np.ones(v_pp.size, complex)
    fixed = np.concatenate([ref, internal["pv"]])
    v0[fixed] = np.abs(v_pp[fixed])
    v0[ref] = v_pp[ref]
    pf = PowerFlowCase(ybus=internal["Ybus"].tocsr(), sbus=internal["Sbus"], v0=v0, ref=ref,
                       pv=internal["pv"], pq=internal["pq"])
    v, ok, _ = newton_raphson(pf)
    assert ok
    np.testing.assert_allclose(v, v_pp, rtol=0, atol=1e-8)
    # a 60 Mvar capacitor on a load bus
    pq_bus = int(internal["pq"][5])
    pp_bus = int(np.nonzero(np.asarray(net._pd2ppc_lookups["bus"]) == pq_bus)[0][0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pp.create_shunt(net, pp_bus, q_mvar=-60.0, p_mw=0.0)
        pp.runpp(net, calculate_voltage_angles=True, numba=False, init="flat")
    v2, ok2, _ = solve_with_shunts(pf, np.array([pq_bus]), np.array([60.0 / float(internal["baseMVA"])]), v_start=v)
    assert ok2
    vm_pp = net.res_bus.vm_pu.to_numpy()
    lookup = np.asarray(net._pd2ppc_lookups["bus"])
    np.testing.assert_allclose(np.abs(v2[lookup[net.bus.index]]), vm_pp, rtol=0, atol=1e-8)


def test_failed_step_is_a_model_error_and_the_session_recovers():
    # Reference: derived; a bank several times the short-circuit power has no plausible
    # operating point near 1 pu (resonance at the fundamental), so the step must be refused
    case = load_case(CASES / "demo_plant.toml")
    model = build_model(case)
    lf = LoadFlow(model, {b.name: b.bus for b in case.bank})
    assert lf.mode == "arrays"
    good = lf.vm_pu({case.bank[0].name: 400.0})
    with pytest.raises(ModelError):
        lf.vm_pu({case.bank[0].name: 1e6 * model.sc_mva_supply})
    np.testing.assert_allclose(lf.vm_pu({case.bank[0].name: 400.0}), good, atol=1e-9)


@pytest.mark.parametrize("case_name", ["demo_plant.toml", "feeder_network_file.toml"])
def test_weak_arrays_equal_a_full_conversion_with_the_weak_supply(case_name):
    # Reference: pandapower to_ppc conversion of the same net with the weak supply data
    # (resonance.model.netmodel.net_to_arrays); the model derives them by changing the grid impedance only
    from resonance.model.netmodel import net_to_arrays

    case = load_case(CASES / case_name)
    model = build_model(case)
    assert model.arrays_weak is not None
    sup = model.bus_pp[model.supply_bus]
    weak = {int(gi): (model.sc_mva_supply_min, model.x_r_supply_min or model.x_r_supply)
            for gi in model.net.ext_grid.index if int(model.net.ext_grid.at[gi, "bus"]) == sup}
    ref, _ = net_to_arrays(model.net, weak)
    _assert_same_arrays(model.arrays_weak, ref)


@pytest.mark.parametrize("case_name", ["demo_plant.toml", "water_plant_mv.toml", "feeder_network_file.toml"])
def test_conversion_in_place_leaves_the_element_tables_alone(case_name):
    # build_model converts its own net in place (net_to_arrays(copy_net=False)); pandapower's
    # to_ppc must not change any element table, so the load flow and IEC 60909 copies see the net
    # as built (checked against a fresh conversion of an untouched copy)
    import pandas as pd

    from resonance.model.netmodel import net_to_arrays

    from resonance.model import netmodel

    case = load_case(CASES / case_name)
    model = build_model(case)
    fresh = (netmodel._from_network_file if case.network is not None else netmodel._build_from_tables)(case)[0]
    before = {k: fresh[k].copy() for k in fresh.keys() if isinstance(fresh[k], pd.DataFrame) and not k.startswith("res")}
    arr, _ = net_to_arrays(fresh, copy_net=False, require_grid_data=False)
    for k, df in before.items():
        pd.testing.assert_frame_equal(fresh[k], df, check_dtype=True, obj=k)
    sc = {int(gi): (model.sc_mva_supply, model.x_r_supply) for gi in model.net.ext_grid.index
          if int(model.net.ext_grid.at[gi, "bus"]) == model.bus_pp[model.supply_bus]}
    again, _ = net_to_arrays(copy.deepcopy(model.net), sc)  # the converted net converts the same again
    _assert_same_arrays(model.arrays, again)


def test_envelope_session_from_arrays_equals_pandapower_at_that_voltage_and_load():
    # the derived session (loads scaled in the injections, EMF raised) against a session that runs
    # pandapower's own runpp with the load scaling and the source voltage set (pandapower load flow)
    from resonance.memo import Memo
    from resonance.model.pp_loadflow import LoadFlow, load_flow_session

    case = load_case(CASES / "demo_plant.toml")
    model = build_model(case)
    buses = {b.name: b.bus for b in case.bank}
    with Memo().active():
        derived = load_flow_session(model, buses, False, 1.076, 0.3)
    direct = LoadFlow(model, buses, weak=False, v_source_pu=1.076, load_scale=0.3)
    assert derived.mode == "arrays"
    for q in (0.0, 300.0, 800.0):
        a = derived.vm_pu({case.bank[0].name: q})
        b = direct.vm_pu({case.bank[0].name: q})
        np.testing.assert_allclose(a, b, atol=1e-7)
    assert float(np.max(direct.vm_pu({case.bank[0].name: 0.0}))) > 1.05  # the raised voltage is there

"""The operating envelope: every step in every scenario (nominal, weak supply, high voltage with
light load, weak supply with light load), judged by the one assessment.

Outside references: IEEE Std 18-2002 clause 5.2 (capacitor rms voltage 110 % of rating)
[published]; the voltage divider of a supply behind its impedance feeding a capacitor,
V = E / |1 + Z_s Y_C| [derived, closed form]; ngspice AC analysis of the same circuit
(tests/refs/spice.py); pandapower's load flow (runpp) with the supply voltage raised.
"""

from __future__ import annotations

import math

import pytest

from resonance.pipeline import run_check

from .refs import spice

#: an invented plant: a 480 V bank of one 300 kvar stage right at a 10 MVA, X/R 10 supply, no
#: loads, no harmonic source: its capacitor voltage is the fundamental divider alone, and its
#: resonance h = sqrt(10 000 / 300) = 5.77 stays clear of the characteristic orders [derived]
CASE = {
    "title": "Envelope test bank", "frequency_hz": 60,
    "supply": {"bus": "MAIN", "kv": 0.48, "sc_mva": 10.0, "x_r": 10.0},
    "bank": [{"name": "C1", "bus": "MAIN", "rated_kv": 0.48, "steps_kvar": [300.0]}],
    "envelope": {"v_max_pu": 1.05, "tap_pct": 2.5},
}
E_HV = 1.05 * 1.025  # the supply EMF of the high-voltage scenario [pu]


def _divider_pu(e_pu: float, q_kvar: float) -> float:
    # closed form: V = E / |1 + Z_s Y_C| on a 1 MVA base, Z_s = (1/S_sc) split by X/R, Y_C = j Q [derived]
    z = 1.0 / 10.0
    r = z / math.hypot(1.0, 10.0)
    zs = complex(r, 10.0 * r)
    yc = 1j * q_kvar / 1000.0
    return e_pu / abs(1.0 + zs * yc)


@pytest.fixture(scope="module")
def res():
    return run_check(CASE)


def test_every_scenario_is_checked(res):
    names = [s["name"] for s in res.data["scenarios"]]
    assert names == ["nominal", "high_voltage_light_load"]  # no sc_mva_min: no weak scenarios
    hv = res.data["scenarios"][1]
    assert hv["supply_v_pu"] == pytest.approx(E_HV) and hv["load_pct"] == 30.0


def test_nominal_passes_and_high_voltage_fails_rms_voltage(res):
    nominal = [f for f in res.findings if f.scenario == "nominal"]
    hv = [f for f in res.findings if f.scenario == "high_voltage_light_load"]
    assert nominal == []  # 103 % at 1.0 pu: within the IEEE 18 110 % rms limit
    assert [(f.check, f.step) for f in hv] == [("duty_v_rms", 1)]
    assert hv[0].limit == pytest.approx(110.0) and hv[0].cause == "bank"
    assert not res.passed
    assert "high voltage, light load" in hv[0].message


def test_capacitor_voltage_is_the_divider_at_the_raised_voltage(res):
    for scen, e in (("nominal", 1.0), ("high_voltage_light_load", E_HV)):
        steps = res.study.assessment_for("C1", scen).steps
        for k, sd in enumerate(steps, start=1):
            ref = 100.0 * _divider_pu(e, 300.0 * k)  # closed form [derived]
            assert sd.fields["cap_v_rms_pct"] == pytest.approx(ref, abs=0.01), (scen, k)
    assert _divider_pu(E_HV, 300.0) > 1.10 > _divider_pu(1.0, 300.0)  # beyond 110 % only at the high voltage


def test_divider_against_ngspice_at_the_raised_voltage():
    spice.require_ngspice()
    # per phase: |Z_s| = U^2/S_sc, X/R 10; C = Q / (w U^2) for the three-phase Q at the line voltage U
    u, s_sc, q, f = 480.0, 10e6, 300e3, 60.0
    w = 2 * math.pi * f
    z = u**2 / s_sc
    r = z / math.hypot(1.0, 10.0)
    elements = [("R", "s", "bus", "n1", r), ("L", "s", "n1", "0", 10.0 * r / w), ("C", "b", "bus", "0", q / (w * u**2))]
    f_hz, zz = spice.ac_impedance(elements, "bus", ["bus"], f, f, 1)
    # Norton: the EMF E behind Z_s is a current E / Z_s into the node: V = E Z_dp / Z_s (ngspice AC analysis)
    zs = complex(r, 10.0 * r)
    v = E_HV * abs(zz["bus"][0] / zs)
    assert v == pytest.approx(_divider_pu(E_HV, 300.0), rel=1e-6)


def test_the_raised_voltage_against_pandapower_runpp():
    import pandapower as pp

    # pandapower's own load flow with the supply at 1.07625 pu and a 300 kvar shunt (constant admittance)
    net = pp.create_empty_network(f_hz=60.0, sn_mva=1.0)
    b0, b1 = pp.create_bus(net, 0.48), pp.create_bus(net, 0.48)
    z_ohm = 0.48**2 / 10.0
    r = z_ohm / math.hypot(1.0, 10.0)
    pp.create_ext_grid(net, b0, vm_pu=E_HV)
    pp.create_impedance(net, b0, b1, rft_pu=r / (0.48**2 / 1.0), xft_pu=10 * r / (0.48**2 / 1.0), sn_mva=1.0)
    pp.create_shunt(net, b1, q_mvar=-0.3, p_mw=0.0)  # pandapower: negative q_mvar delivers (a capacitor)
    pp.runpp(net)
    assert float(net.res_bus.vm_pu.at[b1]) == pytest.approx(_divider_pu(E_HV, 300.0), abs=1e-6)


def test_scenarios_can_be_chosen():
    only = dict(CASE, envelope={"scenarios": ["nominal"]})
    assert [s["name"] for s in run_check(only).data["scenarios"]] == ["nominal"]
    assert run_check(only).passed  # the rms excess exists only at the high voltage


def test_light_load_leaves_the_demand_current_alone():
    # I_L is the site's maximum demand (IEEE Std 519-2014 clause 3), not the scenario's loading
    from .conftest import CASES

    r = run_check(CASES / "cold_store_50hz.toml")
    lim = {sn: r.data["banks"][0]["scenarios"][sn]["limits"]["pcc_i_limits"]["i_l_a"]
           for sn in ("high_voltage_light_load",)}
    assert lim["high_voltage_light_load"] == pytest.approx(r.data["banks"][0]["limits"]["pcc_i_limits"]["i_l_a"])

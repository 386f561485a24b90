"""Self-tests of the outside references in ``tests/refs`` (ngspice AC analysis, scipy
time-domain simulation) against closed-form circuit formulas.

The references import nothing from ``resonance``; these tests only check that the references
themselves are right, so that other tests can trust them. Circuit values are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from .refs import spice, timedomain

TWO_PI = 2.0 * math.pi


# ---------------------------------------------------------------------------------------------
# ngspice AC analysis
# ---------------------------------------------------------------------------------------------

TANK_R_OHM, TANK_L_H, TANK_C_F = 10.0, 1.0e-3, 10.0e-6
TANK = [
    ("R", "tank", "n1", "0", TANK_R_OHM),
    ("L", "tank", "n1", "0", TANK_L_H),
    ("C", "tank", "n1", "0", TANK_C_F),
]

# a series R-L supply branch from ground feeding a capacitor at the bus: 0 -R- m -L- bus -C- 0
BUS_R_OHM, BUS_L_H, BUS_C_F = 0.01, 1.0e-4, 1.0e-3
BUS = [
    ("R", "src", "0", "m", BUS_R_OHM),
    ("L", "src", "m", "bus", BUS_L_H),
    ("C", "bank", "bus", "0", BUS_C_F),
]


def _z_tank(f_hz: np.ndarray) -> np.ndarray:
    # derived from Y = 1/R + j w C + 1/(j w L) (parallel RLC)
    w = TWO_PI * f_hz
    return 1.0 / (1.0 / TANK_R_OHM + 1j * w * TANK_C_F + 1.0 / (1j * w * TANK_L_H))


def _z_bus(f_hz: np.ndarray) -> np.ndarray:
    # derived from Z = (R + j w L) || 1/(j w C)
    w = TWO_PI * f_hz
    z_src = BUS_R_OHM + 1j * w * BUS_L_H
    z_c = 1.0 / (1j * w * BUS_C_F)
    return z_src * z_c / (z_src + z_c)


def _zero_crossing_hz(f_hz: np.ndarray, y: np.ndarray) -> float:
    """Frequency of the single sign change of ``y``, by linear interpolation [Hz]."""
    k = np.flatnonzero(np.sign(y[:-1]) != np.sign(y[1:]))
    assert k.size == 1, f"expected one sign change, found {k.size}"
    i = int(k[0])
    return float(f_hz[i] - y[i] * (f_hz[i + 1] - f_hz[i]) / (y[i + 1] - y[i]))


def test_spice_parallel_tank_matches_closed_form():
    spice.require_ngspice()
    f_hz, z = spice.ac_impedance(TANK, "n1", ["n1"], 100.0, 5000.0, 50)
    np.testing.assert_allclose(f_hz, np.linspace(100.0, 5000.0, 50), rtol=1e-12)
    # ngspice AC analysis vs derived from the parallel RLC admittance
    np.testing.assert_allclose(np.abs(z["n1"]), np.abs(_z_tank(f_hz)), rtol=1e-4)
    np.testing.assert_allclose(z["n1"], _z_tank(f_hz), rtol=1e-4, atol=0.0)


def test_spice_parallel_tank_resonance_frequency():
    spice.require_ngspice()
    f0_hz = 1.0 / (TWO_PI * math.sqrt(TANK_L_H * TANK_C_F))  # derived from f0 = 1/(2 pi sqrt(LC))
    f_hz, z = spice.ac_impedance(TANK, "n1", ["n1"], 0.95 * f0_hz, 1.04 * f0_hz, 200)  # f0 off-grid
    # ngspice AC analysis: Im Z changes sign at f0, where |Z| = R (derived from Y = 1/R there)
    assert _zero_crossing_hz(f_hz, z["n1"].imag) == pytest.approx(f0_hz, rel=1e-4)
    assert np.max(np.abs(z["n1"])) == pytest.approx(TANK_R_OHM, rel=1e-4)


def test_spice_series_rl_feeding_c_driving_point_and_transfer():
    spice.require_ngspice()
    f_hz, z = spice.ac_impedance(BUS, "bus", ["bus", "m"], 50.0, 2500.0, 50)
    z_bus = _z_bus(f_hz)
    # ngspice AC analysis vs derived from Z = (R + j w L) || 1/(j w C)
    np.testing.assert_allclose(np.abs(z["bus"]), np.abs(z_bus), rtol=1e-4)
    np.testing.assert_allclose(z["bus"], z_bus, rtol=1e-4, atol=0.0)
    # transfer impedance to the node between R and L: derived from V_m = V_bus R / (R + j w L)
    z_m = z_bus * BUS_R_OHM / (BUS_R_OHM + 1j * TWO_PI * f_hz * BUS_L_H)
    np.testing.assert_allclose(z["m"], z_m, rtol=1e-4, atol=0.0)


def test_spice_series_rl_feeding_c_resonance_frequency():
    spice.require_ngspice()
    f0_hz = 1.0 / (TWO_PI * math.sqrt(BUS_L_H * BUS_C_F))  # derived from f0 = 1/(2 pi sqrt(LC))
    # Im Z = 0 exactly at w^2 = 1/(LC) - (R/L)^2, derived from Z = (R + j w L) || 1/(j w C)
    f_exact_hz = math.sqrt(1.0 / (BUS_L_H * BUS_C_F) - (BUS_R_OHM / BUS_L_H) ** 2) / TWO_PI
    f_hz, z = spice.ac_impedance(BUS, "bus", ["bus"], 0.95 * f0_hz, 1.05 * f0_hz, 201)
    f_cross_hz = _zero_crossing_hz(f_hz, z["bus"].imag)  # ngspice AC analysis
    assert f_cross_hz == pytest.approx(f_exact_hz, rel=1e-5)
    # the lossless formula is within R^2 C / (2 L) = 5e-4 of it (derived from the line above)
    assert f_cross_hz == pytest.approx(f0_hz, rel=0.5 * BUS_R_OHM**2 * BUS_C_F / BUS_L_H * 1.01)
    assert abs(f_cross_hz / f0_hz - 1.0) > 1e-4  # ... and the shift is really there
    # |Z| peaks at w^2 = (sqrt(1 + 2a) - a) / (LC), a = R^2 C / L (derived from d|Z|^2/dw = 0),
    # i.e. above the Im Z = 0 point: the nearest grid point is the ngspice maximum
    a = BUS_R_OHM**2 * BUS_C_F / BUS_L_H
    f_max_hz = math.sqrt((math.sqrt(1.0 + 2.0 * a) - a) / (BUS_L_H * BUS_C_F)) / TWO_PI
    f_peak_hz = f_hz[np.argmax(np.abs(z["bus"]))]
    assert abs(f_peak_hz - f_max_hz) <= 0.5 * (f_hz[1] - f_hz[0])


def test_spice_netlist_is_regenerated_and_inspectable(tmp_path):
    text = spice.netlist(BUS, "bus", ["bus", "m"], 50.0, 2500.0, 50)
    assert "IINJ 0 bus DC 0 AC 1 0" in text.splitlines()
    assert "ac lin 50 50.0 2500.0" in text.splitlines()
    assert "Lsrc m bus 0.0001" in text.splitlines()  # values written with repr(): unrounded
    assert "wrdata ac_out.txt vr(bus) vi(bus) vr(m) vi(m)" in text.splitlines()
    path = spice.write_netlist(tmp_path / "bus.cir", BUS, "bus", ["bus", "m"], 50.0, 2500.0, 50)
    assert path.read_text(encoding="ascii") == text


def test_spice_keep_dir_keeps_netlist_and_data(tmp_path):
    spice.require_ngspice()
    spice.ac_impedance(TANK, "n1", ["n1"], 100.0, 200.0, 3, keep_dir=tmp_path)
    assert (tmp_path / "circuit.cir").read_text(encoding="ascii") == spice.netlist(
        TANK, "n1", ["n1"], 100.0, 200.0, 3
    )
    assert (tmp_path / "ac_out.txt").is_file()
    assert (tmp_path / "ngspice.log").is_file()


@pytest.mark.parametrize(
    ("elements", "inject", "nodes", "match"),
    [
        ([("X", "a", "n1", "0", 1.0)], "n1", ["n1"], "kind"),
        ([("R", "a", "n1", "0", 0.0)], "n1", ["n1"], "> 0"),
        ([("R", "a", "n1", "0", float("nan"))], "n1", ["n1"], "finite"),
        ([("R", "a", "n1", "0", 1.0)], "n2", ["n1"], "inject_node"),
        ([("R", "a", "n1", "0", 1.0)], "n1", ["n9"], "nodes"),
        ([("R", "a", "n1", "0", 1.0)], "n1", ["0"], "nodes"),
        ([("R", "a", "n1", "0", 1.0), ("R", "a", "n1", "0", 2.0)], "n1", ["n1"], "twice"),
        ([("R", "a", "n1", "0", 1.0), ("R", "b", "N1", "0", 2.0)], "n1", ["n1"], "case"),
        ([("R", "a", "n 1", "0", 1.0)], "n 1", ["n 1"], "node name"),
        ([("R", "a", "n1", "n1", 1.0)], "n1", ["n1"], "both terminals"),
    ],
)
def test_spice_rejects_malformed_circuits(elements, inject, nodes, match):
    with pytest.raises(ValueError, match=match):
        spice.netlist(elements, inject, nodes, 50.0, 100.0, 2)


def test_spice_rejects_bad_sweep():
    with pytest.raises(ValueError, match="f_start_hz"):
        spice.netlist(TANK, "n1", ["n1"], 0.0, 100.0, 2)
    with pytest.raises(ValueError, match="n_points"):
        spice.netlist(TANK, "n1", ["n1"], 50.0, 100.0, 0)


def test_spice_missing_executable_is_a_clear_error(monkeypatch):
    monkeypatch.setattr(spice, "find_ngspice", lambda: None)
    with pytest.raises(spice.NgspiceNotFoundError, match="apt-get install ngspice"):
        spice.ac_impedance(TANK, "n1", ["n1"], 100.0, 200.0, 3)


@pytest.mark.parametrize(("ci", "outcome"), [("true", pytest.fail.Exception), ("", pytest.skip.Exception)])
def test_spice_require_ngspice_fails_in_ci_and_skips_elsewhere(monkeypatch, ci, outcome):
    monkeypatch.setattr(spice, "find_ngspice", lambda: None)
    monkeypatch.setenv("CI", ci)
    with pytest.raises(outcome):
        spice.require_ngspice()


def test_spice_singular_operating_point_is_reported():
    spice.require_ngspice()
    # node n2 hangs on capacitors only: no DC path, so the operating point is singular
    floating = [("C", "a", "n1", "0", 1e-6), ("C", "b", "n1", "n2", 1e-6), ("C", "c", "n2", "0", 1e-6)]
    with pytest.raises(spice.NgspiceError, match="singular"):
        spice.ac_impedance(floating, "n1", ["n2"], 100.0, 200.0, 3)


# ---------------------------------------------------------------------------------------------
# scipy time-domain simulation
# ---------------------------------------------------------------------------------------------

F1_HZ = 50.0
W1 = TWO_PI * F1_HZ
C_BANK_F = 300e3 / (W1 * 400.0**2)  # 300 kvar at 400 V, star equivalent (derived: C = Q / (w V^2))
L_DET_H = 0.07 / (W1**2 * C_BANK_F)  # 7 % detuning (common practice), derived from p = w^2 L C
BASE = {
    "f1_hz": F1_HZ,
    "e_rms_v": 400.0 / math.sqrt(3.0),
    "r_s_ohm": 0.002,
    "l_s_h": 2.0e-5,
    "r_t_ohm": 0.0016,
    "l_t_h": 0.0096 / W1,  # 6 % of (400 V)^2 / 1000 kVA
    "c_f": C_BANK_F,
}
TOPOLOGIES = {
    "plain": {},
    "plain_rd": {"r_d_ohm": 0.01},
    "plain_load": {"r_load_ohm": 0.8, "l_load_h": 4e-3},
    "detuned": {"l_d_h": L_DET_H, "r_d_ohm": 0.002},
    "detuned_load": {"l_d_h": L_DET_H, "r_d_ohm": 0.002, "r_load_ohm": 0.8, "l_load_h": 4e-3},
    "detuned_inductive_load": {"l_d_h": L_DET_H, "r_d_ohm": 0.002, "l_load_h": 4e-3},
    # stiff: a large load resistor with a detuning reactor (time constant L/R ~ 1e-8 s)
    "detuned_stiff": {"l_d_h": L_DET_H, "r_d_ohm": 0.002, "r_load_ohm": 1e4},
}
METHODS = ["solve_ivp", "expm"]
RTOL_TD = 1e-6  # measured worst case ~4e-8 (stiff case); 1e-4 would do for the package tests


def _impedances(p: dict, h: np.ndarray) -> dict[str, np.ndarray]:
    """Closed-form phasor impedances at orders h [ohm] (derived from Z_L = j h w L etc.)."""
    w = W1 * h
    z_ser = p["r_s_ohm"] + p["r_t_ohm"] + 1j * w * (p["l_s_h"] + p["l_t_h"])
    z_c = 1.0 / (1j * w * p["c_f"])
    z_bank = p.get("r_d_ohm", 0.0) + 1j * w * p.get("l_d_h", 0.0) + z_c
    y_load = np.zeros_like(w, dtype=complex)
    if p.get("r_load_ohm") is not None:
        y_load = y_load + 1.0 / p["r_load_ohm"]
    if p.get("l_load_h") is not None:
        y_load = y_load + 1.0 / (1j * w * p["l_load_h"])
    y_shunt = 1.0 / z_bank + y_load
    return {"ser": z_ser, "c": z_c, "bank": z_bank, "y_load": y_load, "y_shunt": y_shunt}


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("topology", sorted(TOPOLOGIES))
def test_td_fundamental_is_the_phasor_divider(topology, method):
    p = {**BASE, **TOPOLOGIES[topology]}
    out = timedomain.simulate(p, [1, 5], method=method)
    z = _impedances(p, np.array([1.0]))
    # derived from the voltage divider V_bus = E Z_sh / (Z_ser + Z_sh), Z_sh = 1 / Y_shunt
    z_sh = 1.0 / z["y_shunt"]
    v_bus = p["e_rms_v"] * z_sh / (z["ser"] + z_sh)
    v_cap = v_bus * z["c"] / z["bank"]  # derived from the divider L_d + R_d over C
    np.testing.assert_allclose(out["v_cap_v"][:1], v_cap, rtol=RTOL_TD, atol=0.0)
    np.testing.assert_allclose(out["v_bus_v"][:1], v_bus, rtol=RTOL_TD, atol=0.0)
    np.testing.assert_allclose(out["i_bank_a"][:1], v_bus / z["bank"], rtol=RTOL_TD, atol=0.0)
    np.testing.assert_allclose(out["i_supply_a"][:1], (p["e_rms_v"] - v_bus) / z["ser"],
                               rtol=RTOL_TD, atol=0.0)
    # zero harmonic injection gives zero distortion (derived: LTI circuit, sinusoidal source)
    assert np.abs(out["v_bus_v"][1]) <= 1e-8 * np.abs(v_bus[0])


INJECTION_A = {5: (300.0, 0.4), 7: (200.0, -1.1), 11: (90.0, 2.5), 13: (60.0, -2.9)}


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("topology", sorted(TOPOLOGIES))
def test_td_injection_with_shorted_source_is_i_times_z_parallel(topology, method):
    p = {**BASE, **TOPOLOGIES[topology], "e_rms_v": 0.0, "injection_a": INJECTION_A}
    h = np.array(sorted(INJECTION_A), dtype=float)
    out = timedomain.simulate(p, h.astype(int), method=method)
    i_h = np.array([m * np.exp(1j * a) for m, a in (INJECTION_A[k] for k in sorted(INJECTION_A))])
    z = _impedances(p, h)
    # derived from V_bus = I_h Z_par(h), Z_par = Z_ser || Z_bank || Z_load (injection INTO the bus)
    z_par = 1.0 / (1.0 / z["ser"] + z["y_shunt"])
    v_bus = i_h * z_par
    np.testing.assert_allclose(out["v_bus_v"], v_bus, rtol=RTOL_TD, atol=0.0)
    np.testing.assert_allclose(out["i_bank_a"], v_bus / z["bank"], rtol=RTOL_TD, atol=0.0)
    np.testing.assert_allclose(out["v_cap_v"], v_bus * z["c"] / z["bank"], rtol=RTOL_TD, atol=0.0)
    # supply current is counted toward the bus, so it is -V_bus / Z_ser here (derived: Ohm's law)
    np.testing.assert_allclose(out["i_supply_a"], -v_bus / z["ser"], rtol=RTOL_TD, atol=0.0)
    # KCL at the bus, per order (derived): i_supply + i_inj = i_bank + i_load
    np.testing.assert_allclose(out["i_supply_a"] + i_h, out["i_bank_a"] + out["i_load_a"],
                               rtol=0.0, atol=RTOL_TD * np.max(np.abs(i_h)))


@pytest.mark.parametrize("topology", ["plain", "detuned_load"])
def test_td_background_voltage_is_the_harmonic_divider(topology):
    background = {5: 0.02 * BASE["e_rms_v"] * np.exp(0.7j), 7: (0.01 * BASE["e_rms_v"], -0.3)}
    p = {**BASE, **TOPOLOGIES[topology], "background_v": background}
    out = timedomain.simulate(p, [5, 7])
    h = np.array([5.0, 7.0])
    e_h = np.array([background[5], 0.01 * BASE["e_rms_v"] * np.exp(-0.3j)])
    z = _impedances(p, h)
    z_sh = 1.0 / z["y_shunt"]
    # derived from the divider V_bus(h) = E_h Z_sh(h) / (Z_ser(h) + Z_sh(h))
    np.testing.assert_allclose(out["v_bus_v"], e_h * z_sh / (z["ser"] + z_sh), rtol=RTOL_TD, atol=0.0)


def test_td_phasors_are_sine_referenced_rms():
    """The waveform is rebuilt from its phasors as sum sqrt2 |X| sin(h w t + arg X)."""
    p = {**BASE, **TOPOLOGIES["detuned"], "injection_a": INJECTION_A}
    pss = timedomain.steady_state(p, n_samples=2048)
    orders = [1, *sorted(INJECTION_A)]
    x = pss.phasors(orders)["v_bus_v"]
    rebuilt = sum(
        math.sqrt(2.0) * np.abs(xh) * np.sin(h * W1 * pss.t_s + np.angle(xh)) for h, xh in zip(orders, x)
    )
    v = pss.waveform("v_bus_v")
    # derived: an LTI circuit driven at orders {1,5,7,11,13} has no other order in steady state
    np.testing.assert_allclose(rebuilt, v, rtol=0.0, atol=1e-9 * np.max(np.abs(v)))
    # the injection itself at t = 0 is sum sqrt2 I sin(phi) (derived from the module's i_inj(t))
    i_inj_0 = sum(math.sqrt(2.0) * m * math.sin(a) for m, a in INJECTION_A.values())
    kcl_0 = (pss.waveform("i_bank_a") + pss.waveform("i_load_a") - pss.waveform("i_supply_a"))[0]
    assert kcl_0 == pytest.approx(i_inj_0, rel=1e-9)
    assert pss.periodicity_residual < 1e-8


def test_td_methods_agree_and_steady_state_is_periodic():
    p = {**BASE, **TOPOLOGIES["detuned_load"], "injection_a": INJECTION_A}
    a = timedomain.steady_state(p, method="solve_ivp")
    b = timedomain.steady_state(p, method="expm")
    # two independent integrations of the same state equations (scipy time-domain simulation)
    for name, ya, yb in zip(timedomain.OUTPUTS, a.y, b.y):
        np.testing.assert_allclose(ya, yb, rtol=0.0, atol=1e-7 * np.max(np.abs(yb)), err_msg=name)
    assert a.periodicity_residual < 1e-7
    assert b.periodicity_residual < 1e-10


def test_td_phasor_dict_and_dataclass_inputs_match():
    p = {**BASE, **TOPOLOGIES["plain"], "injection_a": {5: 100.0 + 50.0j}}
    circuit = timedomain.TimeDomainCircuit(**p)
    assert circuit.injection_a == {5: 100.0 + 50.0j}
    a = timedomain.simulate(circuit, [5], method="expm")
    b = timedomain.simulate(
        {**p, "injection_a": {5: (abs(100.0 + 50.0j), math.atan2(50.0, 100.0))}}, [5], method="expm"
    )
    np.testing.assert_allclose(a["v_bus_v"], b["v_bus_v"], rtol=1e-12, atol=0.0)
    assert set(a) == set(timedomain.OUTPUTS)


@pytest.mark.parametrize(
    ("change", "match"),
    [
        ({"c_f": 0.0}, "c_f"),
        ({"l_s_h": 0.0, "l_t_h": 0.0}, "L_s"),
        ({"r_load_ohm": -1.0}, "r_load_ohm"),
        ({"f1_hz": float("nan")}, "f1_hz"),
        ({"injection_a": {2.5: 1.0}}, "order"),
        ({"background_v": {1: 1.0}}, "order"),
        ({"bogus_ohm": 1.0}, "unknown"),
    ],
)
def test_td_rejects_bad_parameters(change, match):
    with pytest.raises(ValueError, match=match):
        timedomain.simulate({**BASE, **change}, [1])


def test_td_rejects_orders_beyond_nyquist():
    with pytest.raises(ValueError, match="n_samples"):
        timedomain.steady_state({**BASE, "injection_a": {40: 1.0}}, n_samples=64)
    with pytest.raises(ValueError, match="orders"):
        timedomain.simulate(BASE, [0])


def test_refs_do_not_import_the_package():
    import ast
    from pathlib import Path

    for path in sorted((Path(__file__).parent / "refs").glob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module:
                names = [node.module]
            assert not any(n == "resonance" or n.startswith("resonance.") for n in names), path

"""Switching a capacitor step: the closed forms against the published worked check and against an
independent time-domain simulation (scipy ODE integration of the per-phase circuit), and the
proposals that clear a device limit, proven by a re-check of the whole case."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from resonance.standards import switching as sw

from .conftest import ROOT

F = 60.0
W = 2.0 * math.pi * F


def test_worked_check_of_the_references():
    # REFERENCES.md "Switching inrush": 13.8 kV, 60 Hz, two 200 A banks, L_eq = 20 uH ->
    # 14.54 kA, 6.17 kHz [derived from the IEEE C37.99 / C37.012 formulas]; by hand
    # C = 200 A / (omega 7967 V) = 66.6 uF per phase, C_eq = 33.3 uF
    q = math.sqrt(3.0) * 13.8 * 200.0  # kvar of a 200 A bank at 13.8 kV
    c = sw.stage_capacitance_f(q, 13.8, F)
    assert c == pytest.approx(66.6e-6, rel=1e-3)
    peak, hz = sw.undamped_inrush(13.8, c * c / (c + c), 20e-6)
    assert peak == pytest.approx(14_540.0, rel=1e-3)
    assert hz == pytest.approx(6_170.0, rel=1e-3)
    # the transient solution reduces to it when the supply path is absent and the source is
    # held at its crest
    p2, f2 = sw.inrush_transient(sw.crest_phase_v(13.8), None, math.inf, 0.0, (10e-6, 0.0, c), (10e-6, 0.0, c))
    assert p2 == pytest.approx(peak, rel=1e-4) and f2 == pytest.approx(hz, rel=1e-6)
    # and the limiting inductance inverts it (derived)
    assert sw.loop_inductance_for(13.8, c / 2.0, peak, None) == pytest.approx(20e-6, rel=1e-9)
    assert sw.loop_inductance_for(13.8, c / 2.0, None, hz) == pytest.approx(20e-6, rel=1e-9)


def _simulate(v_pk, ls, rs, branches, new, t_end, max_step):
    """Time-domain simulation (scipy DOP853) of an AC source behind ls, rs feeding stages in
    service (``branches``: list of (L, R, C), in AC steady state at the source's crest) and a new
    stage ``new`` = (L, R, C), uncharged, closed at t = 0.  Returns the peak |current| of the new
    stage [A].  Independent of the closed forms: phasor steady state, then Kirchhoff's laws."""
    allb = list(branches) + [new]
    n = len(allb)
    zs = rs + 1j * W * ls
    # phasor steady state before closing (source v(t) = Re(V e^{jwt}), V = v_pk: crest at t = 0)
    if branches:
        y = sum(1.0 / (r + 1j * W * lb + 1.0 / (1j * W * cb)) for lb, r, cb in branches)
        vb = v_pk / (1.0 + zs * y)
        i0 = [vb / (r + 1j * W * lb + 1.0 / (1j * W * cb)) for lb, r, cb in branches]
        x0 = []
        for (lb, r, cb), ii in zip(branches, i0):
            x0 += [ii.real, (ii / (1j * W * cb)).real]
    else:
        x0 = []
    x0 += [0.0, 0.0]
    L = np.array([b[0] for b in allb])
    R = np.array([b[1] for b in allb])
    C = np.array([b[2] for b in allb])

    def rhs(t, x):
        i = x[0::2]
        v = x[1::2]
        vs = v_pk * math.cos(W * t)
        g = 1.0 / L
        if math.isfinite(ls):
            # L_s d(sum i)/dt = vs - rs sum(i) - vb, L_k di_k/dt = vb - R_k i_k - v_k
            vb = ((vs - rs * i.sum()) / ls + np.sum((R * i + v) * g)) / (1.0 / ls + g.sum())
        else:
            vb = np.sum((R * i + v) * g) / g.sum()
        di = (vb - R * i - v) / L
        dv = i / C
        out = np.empty_like(x)
        out[0::2], out[1::2] = di, dv
        return out

    sol = solve_ivp(rhs, (0.0, t_end), np.array(x0, float), method="DOP853", rtol=1e-9, atol=1e-6,
                    max_step=max_step, dense_output=False)
    assert sol.success
    v_close = float(x0[1]) if branches else v_pk
    return float(np.max(np.abs(sol.y[2 * (n - 1)]))), v_close


def test_isolated_step_against_time_domain_simulation():
    # a 480 V, 100 kvar stage energised from a 20 uH supply through 3 uH: the closed form
    # (IEEE C37.99 isolated bank) against a scipy ODE simulation of the same circuit
    c = sw.stage_capacitance_f(100.0, 0.48, F)
    ls, lb = 20e-6, 3e-6
    v = sw.crest_phase_v(0.48)
    peak, hz = sw.undamped_inrush(0.48, c, ls + lb)
    sim, _ = _simulate(v, ls, 0.0, [], (lb, 0.0, c), t_end=1.5 / hz, max_step=1.0 / hz / 400)
    # the closed form leaves out the power-frequency current (omega C V_pk, 6 % of the peak here)
    # and the source's motion during the ring: within 3 %
    assert sim == pytest.approx(peak, rel=0.03)


def test_back_to_back_plain_steps_against_time_domain_simulation():
    # MV: two 200 A stages, 10 uH each, behind a 13.8 kV 250 MVA supply (L_s = 2 mH >> 20 uH):
    # the two-capacitor formula of IEEE C37.012 gives the fast exchange between the stages; the
    # supply's slower recharge (about 300 Hz) adds a few percent later on, which the transient
    # solution carries (scipy ODE simulation over 1.25 periods of the slow mode)
    q = math.sqrt(3.0) * 13.8 * 200.0
    c = sw.stage_capacitance_f(q, 13.8, F)
    zs = 13.8**2 / 250.0
    ls = zs / W
    sim, v_close = _simulate(sw.crest_phase_v(13.8), ls, 0.0, [(10e-6, 0.0, c)], (10e-6, 0.0, c),
                             t_end=1.25 / 300.0, max_step=1.0 / 6170.0 / 200)
    classic, _ = sw.undamped_inrush(13.8 * v_close / sw.crest_phase_v(13.8), c / 2.0, 20e-6)
    two, _ = sw.inrush_transient(sw.crest_phase_v(13.8), F, ls, 0.0, (10e-6, 0.0, c), (10e-6, 0.0, c))
    assert classic * 0.99 <= sim <= classic * 1.10
    assert sim == pytest.approx(two, rel=0.01)


def test_back_to_back_detuned_steps_against_time_domain_simulation():
    # LV detuned stages (p = 7 %: 428 uH each) behind a stiff 20 uH supply: the supply feeds the
    # new stage, the two-capacitor formula underestimates; the two-source solution follows the
    # scipy ODE simulation of the same circuit
    c = sw.stage_capacitance_f(100.0, 0.48, F)
    ld = 0.07 / (W * W * c)
    v = sw.crest_phase_v(0.48)
    on = [(ld, 0.0, c)] * 3
    sim, v_close = _simulate(v, 20e-6, 0.0, on, (ld, 0.0, c), t_end=1.5 / 227.0, max_step=1.0 / 227.0 / 400)
    two, hz = sw.inrush_transient(v, F, 20e-6, 0.0, (ld / 3.0, 0.0, 3.0 * c), (ld, 0.0, c))
    classic, _ = sw.undamped_inrush(0.48, 0.75 * c, ld + ld / 3.0)
    assert 150.0 < hz < 300.0  # about the tuning frequency of the stage
    assert sim == pytest.approx(two, rel=0.01)
    assert classic < 0.6 * sim


def test_damped_step_closed_form_is_an_upper_bound():
    # a stage closed through a 0.3 ohm pre-insertion resistor, and a detuned stage with a reactor
    # X/R of 5: the undamped solution bounds the simulated peak (scipy ODE) from above, the damped
    # one follows it; the series RLC step response (circuit theory, source held at its crest)
    # is close where the loop rings fast
    c = sw.stage_capacitance_f(100.0, 0.48, F)
    v = sw.crest_phase_v(0.48)
    ls, lb, r = 20e-6, 3e-6, 0.3
    upper, hz = sw.undamped_inrush(0.48, c, ls + lb)
    sim, _ = _simulate(v, ls, 0.0, [], (lb, r, c), t_end=3.0 / hz, max_step=1.0 / hz / 400)
    assert sim < 0.6 * upper
    assert sim == pytest.approx(sw.inrush_transient(v, F, ls, 0.0, None, (lb, r, c))[0], rel=0.01)
    assert sim == pytest.approx(sw.damped_peak(v, ls + lb, c, r), rel=0.05)
    ld = 0.07 / (W * W * c)
    rd = W * ld / 5.0
    sim2, _ = _simulate(v, ls, 0.0, [], (ld, rd, c), t_end=1.0 / 150.0, max_step=1.0 / 227.0 / 400)
    up2, _ = sw.inrush_transient(v, F, ls, 0.0, None, (ld, 0.0, c))
    assert sim2 < 0.95 * up2
    assert sim2 == pytest.approx(sw.inrush_transient(v, F, ls, 0.0, None, (ld, rd, c))[0], rel=0.01)


def test_damped_peak_regimes_are_continuous():
    # under-, critically and over-damped forms of the series RLC step response meet at zeta = 1
    # (circuit theory)
    l, c = 10e-6, 1e-3
    r_crit = 2.0 * math.sqrt(l / c)
    a = sw.damped_peak(1.0, l, c, r_crit * (1 - 1e-6))
    b = sw.damped_peak(1.0, l, c, r_crit)
    d = sw.damped_peak(1.0, l, c, r_crit * (1 + 1e-6))
    assert a == pytest.approx(b, rel=1e-4) and d == pytest.approx(b, rel=1e-4)
    assert sw.damped_peak(1.0, l, c, 0.0) == pytest.approx(math.sqrt(c / l))
    # a large resistance limits the peak to about V / R
    assert sw.damped_peak(100.0, l, c, 50.0) == pytest.approx(2.0, rel=0.01)


def test_energising_overvoltage_closed_form():
    # an undamped first step rings to 2 pu (IEEE C37.012 energising transient [from memory]);
    # a step added to three in service overshoots by its share of the charge [derived]
    assert sw.energising_overvoltage_pu(0.0, 1.0, 0.0) == pytest.approx(2.0)
    assert sw.energising_overvoltage_pu(3.0, 1.0, 0.0) == pytest.approx(1.25)
    assert sw.energising_overvoltage_pu(0.0, 1.0, 0.1) < 2.0


def test_voltage_step_closed_form():
    # dV/V = Q / S_sc (IEEE Std 1036 voltage rise [from memory]): 600 kvar on 20 MVA -> 3 %
    assert sw.voltage_step_pct(600.0, 20.0) == pytest.approx(3.0)


MV_CASE = """
title = "Switching test: two MV stages"
frequency_hz = 60

[supply]
bus = "SRC"
kv = 13.8
sc_mva = 250.0
x_r = 10.0

[[load]]
name = "L1"
bus = "SRC"
kw = 3000.0
pf = 0.85

[[bank]]
name = "C1"
bus = "SRC"
rated_kv = 13.8
steps_kvar = [4780.6, 4780.6]
step_inductance_uh = 10.0
device_inrush_peak_ka = 10.0
device_inrush_hz = 4240.0
"""


def test_pipeline_reports_inrush_and_a_reactor_that_clears_the_device_limit(tmp_path):
    from resonance.assessment.switching import SWITCHING_CHECKS
    from resonance.design.switching_fix import FIXABLE_CHECKS
    from resonance.pipeline import run_check
    import tomllib

    raw = tomllib.loads(MV_CASE)
    res = run_check(raw)
    st = res.data["banks"][0]["steps"]
    # step 2: the worked check's circuit (two 200 A stages, 10 + 10 uH) fed also by the supply:
    # at least the two-capacitor value (REFERENCES.md), and within 10 % of it
    v = st[1]["v_bus_pu"]
    assert st[1]["inrush_kind"] == "back_to_back" and st[0]["inrush_kind"] == "isolated"
    assert 14_540.0 * v * 0.999 <= st[1]["inrush_peak_a"] <= 14_540.0 * v * 1.10
    assert st[1]["inrush_hz"] == pytest.approx(6_170.0, rel=0.02)
    checks = {f.check for f in res.findings}
    assert {"inrush_peak", "inrush_frequency"} <= checks
    assert not res.passed
    prop = res.switching_proposals["C1"]
    assert prop["status"] == "proposed" and prop["measure"] == "inrush_reactor"
    l_r = prop["recommended"]["inrush_reactor_uh"]
    # the inductance needed (closed form, derived): 4 240 Hz on C_eq = 33.3 uF -> 42.3 uH in the
    # loop, i.e. about 11 uH more per stage with 10 uH connections
    assert l_r >= 11.0
    # re-check: the case with the reactor, through the whole check again
    raw["bank"][0]["inrush_reactor_uh"] = l_r
    again = run_check(raw)
    assert not [f for f in again.findings if f.check in FIXABLE_CHECKS]
    assert again.data["banks"][0]["steps"][1]["inrush_peak_a"] <= 10_000.0
    assert again.data["banks"][0]["steps"][1]["inrush_hz"] <= 4240.0
    # a reactor one preferred value smaller would not do (the proposal is the smallest)
    raw["bank"][0]["inrush_reactor_uh"] = l_r * 0.8
    smaller = run_check(raw)
    assert [f for f in smaller.findings if f.check in SWITCHING_CHECKS]


def test_lv_device_limit_gets_pre_insertion_resistors_that_clear_it():
    # the demo plant's stage contactors make 5 kA peak; back-to-back steps exceed it
    from resonance.design.switching_fix import FIXABLE_CHECKS
    from resonance.pipeline import run_check
    import tomllib

    path = ROOT / "cases" / "demo_plant.toml"
    res = run_check(path)
    assert any(f.check == "inrush_peak" for f in res.findings)
    prop = res.switching_proposals["PFC-1"]
    assert prop["measure"] == "pre_insertion_resistor" and prop["status"] == "proposed"
    assert prop["re_check"]["switching_cleared"]
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    raw["bank"][0]["pre_insertion_ohm"] = prop["recommended"]["pre_insertion_ohm"]
    raw["demand"]["intervals_csv"] = str(ROOT / "cases" / raw["demand"]["intervals_csv"])
    again = run_check(raw)
    assert not [f for f in again.findings if f.check in FIXABLE_CHECKS]


@pytest.mark.parametrize("name", ["demo_plant", "cold_store_50hz", "water_plant_mv", "feeder_network_file"])
def test_every_bundled_case_reports_inrush_and_voltage_step_per_step(tmp_path, name):
    out = tmp_path / "out"
    subprocess.run([sys.executable, "-m", "resonance", "check", str(ROOT / "cases" / f"{name}.toml"),
                    "--out", str(out), "--no-report", "--no-plots", "--quiet"], capture_output=True, check=False)
    data = json.loads((out / "results.json").read_text(encoding="utf-8"))
    for b in data["banks"]:
        assert b["switching"]["governing_peak_a"] > 0
        for s in b["steps"]:
            assert s["inrush_peak_a"] > 0 and s["inrush_hz"] > 0 and s["voltage_step_pct"] > 0
            assert s["inrush_kind"] == ("isolated" if s["step"] == 1 else "back_to_back")
        for sc in b["scenarios"].values():
            assert all(s["inrush_peak_a"] > 0 for s in sc["steps"])
        assert b["switching_proposal"]["status"] in ("not_needed", "proposed", "none_found")


def test_bad_switching_keys_name_the_field(tmp_path):
    from resonance.errors import InputError
    from resonance.inputs.case_load import parse_case
    import tomllib

    raw = tomllib.loads(MV_CASE)
    raw["bank"][0]["step_inductance_uh"] = [10.0, 10.0, 10.0]
    raw["bank"][0]["bus_length_m"] = 3.0
    with pytest.raises(InputError) as e:
        parse_case(raw, "bad.toml")
    text = str(e.value)
    assert "bad.toml" in text and "bank[0]" in text and "3 values for 2 stages" in text


def test_recommended_case_with_the_reactor_passes_check(tmp_path):
    # the round trip: a bank whose only findings are of switching gets the reactor written into
    # recommended_case.toml, and `resonance check` on that file passes (exit 0), the original
    # fails (exit 1); a detuned design is not proposed for a switching-only problem
    case = tmp_path / "mv.toml"
    case.write_text(MV_CASE + "\n[study]\nmargin_pct = 1.0\n", encoding="utf-8")
    out = tmp_path / "out"

    def check(path, where):
        return subprocess.run([sys.executable, "-m", "resonance", "check", str(path), "--out", str(where),
                               "--no-report", "--no-plots", "--quiet"], capture_output=True, text=True, check=False)

    first = check(case, out)
    assert first.returncode == 1, first.stderr
    data = json.loads((out / "results.json").read_text(encoding="utf-8"))
    bank = data["banks"][0]
    assert {f["check"] for f in data["findings"]} <= {"inrush_peak", "inrush_frequency", "inrush_capacitor"}
    assert bank["detuning"]["status"] == "skipped"
    l_r = bank["switching_proposal"]["recommended"]["inrush_reactor_uh"]
    text = (out / "recommended_case.toml").read_text(encoding="utf-8")
    assert f"inrush_reactor_uh = {l_r!r}" in text
    again = check(out / "recommended_case.toml", tmp_path / "out2")
    assert again.returncode == 0, again.stdout + again.stderr
    data2 = json.loads((tmp_path / "out2" / "results.json").read_text(encoding="utf-8"))
    assert data2["passed"] and data2["banks"][0]["steps"][1]["inrush_peak_a"] <= 10_000.0


def test_a_voltage_step_beyond_its_limit_is_a_finding_no_series_element_clears():
    # dV = Q / S_sc (IEEE Std 1036 [from memory]): 4.78 Mvar on 250 MVA -> 1.9 %, over a 1.5 % limit
    from resonance.pipeline import run_check
    import tomllib

    raw = tomllib.loads(MV_CASE)
    raw["study"] = {"voltage_step_limit_pct": 1.5}
    res = run_check(raw)
    vs = [f for f in res.findings if f.check == "voltage_step" and f.scenario == "nominal"]
    assert vs and vs[0].value == pytest.approx(100 * 4780.6 / 250_000.0 * (1 / 1.0), rel=0.05)
    prop = res.switching_proposals["C1"]
    assert any("voltage" in m for m in prop["not_addressed"])

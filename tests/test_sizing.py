"""Tests of bank sizing from demand: resonance.design.sizing, resonance.inputs.sizing_io, resonance.sizing_cli."""

from __future__ import annotations

import argparse
import hashlib
import importlib.util
import json
import math
import subprocess
import sys
import time
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from resonance.inputs.case import Bank
from resonance.errors import InputError
from resonance.design.controller import (BillingRule, ControllerSettings, monthly_cost, simulate_controller,
                                         time_in_step_table)
from resonance.design.sizing import (bank_output_kvar, kvar_required, nameplate_kvar_for_net, output_factor,
                                     pf_multiplier, power_factor, required_kvar_series, size_bank)
from resonance.sizing_cli import add_parser, run
from resonance.inputs.sizing_io import MAX_REPORTED_PROBLEMS, bank_block_toml, read_intervals

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "cases" / "demo_plant_intervals.csv"


def tan_phi(pf: float) -> float:
    """tan(arccos pf), written out independently of the module."""
    return math.tan(math.acos(pf))


# --------------------------------------------------------------------------- spot sizing
@pytest.mark.parametrize("pf1, pf2, k", [
    (0.50, 1.00, 1.732),  # REFERENCES.md "PF correction sizing" [published manufacturer table]
    (0.50, 0.95, 1.403),  # REFERENCES.md "PF correction sizing" [published manufacturer table]
    (0.60, 0.90, 0.849),  # REFERENCES.md "PF correction sizing" [published manufacturer table]
])
def test_multiplier_table(pf1, pf2, k):
    np.testing.assert_allclose(pf_multiplier(pf1, pf2), k, rtol=0, atol=0.001)


def test_kvar_required_650_kw():
    # REFERENCES.md "PF correction sizing": 650 kW from 0.65 to 1.00 needs 759.9 kvar [derived]
    np.testing.assert_allclose(kvar_required(650.0, 0.65, 1.00), 759.9, rtol=0, atol=0.05)


def test_kvar_required_vectorised_and_negative_when_already_better():
    q = kvar_required(np.array([100.0, 200.0]), np.array([0.8, 0.8]), 0.95)
    # derived from Q = P (tan phi1 - tan phi2)
    np.testing.assert_allclose(q, np.array([100.0, 200.0]) * (tan_phi(0.8) - tan_phi(0.95)), rtol=1e-12)
    assert kvar_required(100.0, 0.97, 0.95) < 0  # derived: tan phi1 < tan phi2


@pytest.mark.parametrize("pf", [0.0, -0.5, 1.2, float("nan")])
def test_pf_out_of_range_is_input_error(pf):
    with pytest.raises(InputError, match="pf_present"):
        kvar_required(100.0, pf, 0.95)


def test_detuned_net_output_worked_examples():
    # REFERENCES.md "Detuned banks", published manufacturer application examples:
    # 60 Hz, 25 kvar at 480 V, p = 7 % -> Q_net = 26.9 kvar at 480 V
    np.testing.assert_allclose(bank_output_kvar(25.0, 0.48, 0.48, 7.0), 26.9, rtol=0, atol=0.05)
    # 50 Hz, 80 kvar at 525 V, p = 7 % -> Q_net at 400 V = 49.9 kvar
    np.testing.assert_allclose(bank_output_kvar(80.0, 0.40, 0.525, 7.0), 49.9, rtol=0, atol=0.05)
    # inverse: 26.9 kvar net needs the 25 kvar nameplate of the same example
    np.testing.assert_allclose(nameplate_kvar_for_net(26.9, 0.48, 0.48, 7.0), 25.0, rtol=0, atol=0.05)
    np.testing.assert_allclose(nameplate_kvar_for_net(49.9, 0.40, 0.525, 7.0), 80.0, rtol=0, atol=0.1)


def test_plain_bank_at_other_voltage():
    # derived from Q_bus = Q_R (U / U_R)^2 (fixed capacitance): 100 kvar at 480 V run at 440 V
    expected = 100.0 * (0.44 / 0.48) ** 2
    np.testing.assert_allclose(bank_output_kvar(100.0, 0.44, 0.48), expected, rtol=1e-12)
    np.testing.assert_allclose(nameplate_kvar_for_net(expected, 0.44, 0.48, None), 100.0, rtol=1e-12)
    np.testing.assert_allclose(nameplate_kvar_for_net(expected, 0.44, 0.48, 0.0), 100.0, rtol=1e-12)
    with pytest.raises(InputError, match="detuning_pct"):
        output_factor(0.48, 0.48, 60.0)


# --------------------------------------------------------------------------- series and plan
P_KW, PF1, PF2 = 800.0, 0.75, 0.95
Q_KVAR = P_KW * tan_phi(PF1)
Q_NEED = P_KW * (tan_phi(PF1) - tan_phi(PF2))  # derived from Q = P (tan phi1 - tan phi2): 442.6 kvar


def constant_load(n=96):
    return np.full(n, P_KW), np.full(n, Q_KVAR)


def test_required_series_constant_load_closed_form():
    p, q = constant_load()
    need = required_kvar_series(p, q, PF2)
    np.testing.assert_allclose(need, Q_NEED, rtol=1e-12, atol=0)  # derived closed form
    # leading or already-good intervals need nothing (derived: max(0, Q - P tan phi2))
    np.testing.assert_array_equal(required_kvar_series([100.0, 100.0], [-20.0, 10.0], 0.95), [0.0, 0.0])


@settings(max_examples=60, deadline=None)
@given(p=st.floats(1.0, 5000.0), pf=st.floats(0.3, 1.0), target=st.floats(0.5, 1.0))
def test_required_series_reaches_target(p, pf, target):
    # derived from pf = P / sqrt(P^2 + Q^2): compensating by exactly the need gives >= target
    q = p * tan_phi(pf)
    (need,) = required_kvar_series([p], [q], target)
    if need == 0.0:  # already at or above the target
        assert power_factor(p, q) >= target - 1e-9
    else:
        np.testing.assert_allclose(power_factor(p, q - need), target, rtol=0, atol=1e-9)


def test_size_bank_equal_rule_constant_load():
    p, q = constant_load()
    plan = size_bank(required_kvar_series(p, q, PF2))
    # derived from the documented equal-stage rule: Q_d = 442.6 kvar; 25 kvar needs 18 stages and
    # 50 kvar needs 9 (> 8); 75 kvar needs ceil(442.6 / 75) = 6
    assert plan.stages_kvar == (75.0,) * 6
    np.testing.assert_allclose(plan.q_design_kvar, Q_NEED, rtol=1e-12)
    assert plan.shortfall_kvar == 0.0 and plan.coverage == 1.0
    assert plan.steps_net_kvar == (0.0, 75.0, 150.0, 225.0, 300.0, 375.0, 450.0)


def test_size_bank_binary_rule():
    # derived from the documented binary rule with the default sizes: base 25 -> 25, 50, 100, 200
    # (sum 375 < 465), 400 is not offered so 200 repeats -> 575 kvar in 5 stages
    plan = size_bank(np.full(10, 465.0), layout="binary")
    assert plan.stages_kvar == (25.0, 50.0, 100.0, 200.0, 200.0)


def test_size_bank_percentile_and_shortfall_and_none_needed():
    q = np.arange(1.0, 101.0)  # 1..100 kvar
    plan = size_bank(q, stage_sizes_kvar=(10.0,), percentile=50, n_stages_max=20)
    # numpy linear-interpolation percentile of 1..100 at 50 % is 50.5 -> 6 stages of 10 kvar [derived]
    assert plan.stages_kvar == (10.0,) * 6
    np.testing.assert_allclose(plan.coverage, 0.60, rtol=1e-12)  # 1..60 of 100 covered [derived]
    big = size_bank(np.full(4, 5000.0))
    assert big.stages_kvar == (200.0,) * 8  # largest size, most stages
    np.testing.assert_allclose(big.shortfall_kvar, 5000.0 - 1600.0, rtol=1e-12)  # a result, not an error
    assert size_bank(np.zeros(5)).stages_kvar == ()


def test_size_bank_on_net_output_of_detuned_bank():
    f = output_factor(0.48, 0.525, 7.0)  # (0.48/0.525)^2 / 0.93 [REFERENCES.md "Detuned banks"]
    plan = size_bank(np.full(3, 400.0), stage_sizes_kvar=(50.0, 100.0), output_factor=f)
    # derived: net per 50 kvar stage = 50 f = 44.94 kvar; ceil(400 / 44.94) = 9 > 8, so 100 kvar x 5
    assert plan.stages_kvar == (100.0,) * 5
    np.testing.assert_allclose(plan.stages_net_kvar, np.full(5, 100.0 * f), rtol=1e-12)


# --------------------------------------------------------------------------- controller
S75 = (75.0,) * 6


def test_controller_settles_on_expected_step():
    p, q = constant_load()
    r = simulate_controller(p, q, 0.25, S75, ControllerSettings(target_pf=PF2))
    # derived from the rule in simulate_controller: smallest k with Q_need - 75 k <= 0.5 * 75
    k_star = math.ceil((Q_NEED - 0.5 * 75.0) / 75.0)
    assert k_star == 6
    # 5 min between operations, 15 min intervals: 3 operations per interval (at 0, 5, 10 min)
    np.testing.assert_array_equal(r.step[:3], [3, 6, 6])
    assert np.all(r.step[1:] == k_star)
    assert r.operations_total == 6
    pf_settled = P_KW / math.hypot(P_KW, Q_KVAR - 450.0)  # derived from pf = P / |S|
    np.testing.assert_allclose(r.pf[1:], pf_settled, rtol=1e-12)
    frac = r.time_in_step_fraction
    np.testing.assert_allclose(frac[3], 1 / 96, rtol=1e-12)
    np.testing.assert_allclose(frac[6], 95 / 96, rtol=1e-12)
    np.testing.assert_allclose(r.time_in_step_hours.sum(), 24.0, rtol=1e-12)
    np.testing.assert_allclose(r.operations_per_day, 6.0, rtol=1e-12)
    assert r.fraction_at_or_above_target == pytest.approx(95 / 96, rel=1e-12)


def test_controller_wide_dead_band_and_slow_switching():
    p, q = constant_load()
    r = simulate_controller(p, q, 0.25, S75, ControllerSettings(PF2, 1.2, 1.2, 5.0))
    # derived: smallest k with Q_need - 75 k <= 1.2 * 75 -> ceil((442.6 - 90) / 75) = 5
    assert r.step[-1] == math.ceil((Q_NEED - 90.0) / 75.0) == 5
    slow = simulate_controller(p, q, 0.25, S75, ControllerSettings(PF2, 0.5, 0.5, 30.0))
    # derived: 30 min between operations with 15 min intervals -> one stage every second interval
    np.testing.assert_array_equal(slow.step[:13], [1, 1, 2, 2, 3, 3, 4, 4, 5, 5, 6, 6, 6])
    assert slow.max_operations_24h == 6


def test_controller_switches_out_on_light_load():
    n = 8
    p = np.full(n, 500.0)
    q = 500.0 * tan_phi(0.95) + 100.0 + np.zeros(n)  # needs 100 kvar [derived]
    r = simulate_controller(p, q, 0.25, S75, ControllerSettings(initial_step=6, min_time_between_ops_min=0.0))
    # derived: largest k with 100 - 75 k >= -0.5 * 75 -> k = 1; zero delay: all at once
    assert np.all(r.step == 1) and r.operations_total == 5


def test_controller_unequal_stages_do_not_hunt():
    n = 40
    p = np.full(n, 500.0)
    q = 500.0 * tan_phi(0.95) + 150.0 + np.zeros(n)
    r = simulate_controller(p, q, 0.25, (25.0, 200.0))
    # derived from the switch-in guard: after stage 1 (e = 125) stage 2 would leave e = -75 < -12.5,
    # beyond the switch-out threshold, so it is not switched in; one operation in all
    assert np.all(r.step == 1) and r.operations_total == 1


def test_controller_leading_load_and_bad_settings():
    p = np.full(4, 100.0)
    r = simulate_controller(p, np.full(4, -30.0), 0.25, S75)
    assert np.all(r.step == 0) and np.all(r.leading) and r.fraction_leading == 1.0
    with pytest.raises(InputError, match="target_pf"):
        simulate_controller(p, p, 0.25, S75, ControllerSettings(target_pf=1.5))
    with pytest.raises(InputError, match="initial_step"):
        simulate_controller(p, p, 0.25, S75, ControllerSettings(initial_step=7))


def test_controller_two_weeks_fast():
    rng = np.random.default_rng(7)
    n = 14 * 96
    p = 900.0 + 300.0 * rng.random(n)
    q = p * 0.8
    simulate_controller(p[:10], q[:10], 0.25, S75)  # warm-up
    t0 = time.perf_counter()
    simulate_controller(p, q, 0.25, S75)
    assert time.perf_counter() - t0 < 0.5  # brief: two weeks well under a second


def test_time_in_step_table_structure():
    p, q = constant_load()
    r = simulate_controller(p, q, 0.25, S75, ControllerSettings(target_pf=PF2))
    t = time_in_step_table(r, (75.0,) * 6)
    assert set(t) == {"steps_kvar", "fraction", "hours", "total_hours"}
    assert len(t["fraction"]) == len(t["hours"]) == 7
    np.testing.assert_allclose(sum(t["fraction"]), 1.0, rtol=1e-12)
    np.testing.assert_allclose(t["total_hours"], 24.0, rtol=1e-12)
    json.dumps(t)  # plain data
    with pytest.raises(InputError):
        time_in_step_table(r, (75.0,))


# --------------------------------------------------------------------------- billing
def test_billing_hand_computed():
    p = np.full(10, 100.0)
    q = np.full(10, 80.0)
    span_days = 10.0 / 24.0
    # hand computed: 1000 kWh, 800 kvarh; free 0.4 x 1000 = 400 kvarh; 400 x 0.05 = 20.00
    kv = BillingRule("kvarh_over_tan", kvarh_rate=0.05, tan_phi_threshold=0.4)
    r = monthly_cost(p, q, 1.0, kv, month_days=span_days)
    assert (r.kwh, r.kvarh, r.peak_kw) == (1000.0, 800.0, 100.0)
    np.testing.assert_allclose(r.charge, 20.0, rtol=1e-12)
    np.testing.assert_allclose(monthly_cost(p, q, 1.0, kv, month_days=2 * span_days).charge, 40.0, rtol=1e-12)
    np.testing.assert_allclose(monthly_cost(p, np.full(10, 30.0), 1.0, kv).charge, 0.0, atol=0)
    # hand computed: pf = 1000 / sqrt(1000^2 + 800^2) = 0.780869; 12/kW x 100 kW x 0.9 / 0.780869 = 1383.07
    dm = BillingRule("pf_demand_adjustment", demand_rate_per_kw=12.0, pf_threshold=0.9)
    r = monthly_cost(p, q, 1.0, dm)
    np.testing.assert_allclose(r.pf, 0.780869, atol=1e-6)
    np.testing.assert_allclose(r.charge, 1383.07, atol=0.01)
    # above the threshold no credit: the plain demand charge 1200 [hand computed]
    np.testing.assert_allclose(monthly_cost(p, np.zeros(10), 1.0, dm).charge, 1200.0, rtol=1e-12)
    with pytest.raises(InputError, match="kind"):
        monthly_cost(p, q, 1.0, BillingRule("flat"))  # type: ignore[arg-type]


# --------------------------------------------------------------------------- CSV
def write(tmp_path: Path, text: str, name="demand.csv") -> Path:
    f = tmp_path / name
    f.write_text(text, encoding="utf-8")
    return f


def problems(err: InputError) -> list[str]:
    return [str(p) for p in err.problems]


def test_bad_rows_all_reported_with_line_and_column(tmp_path):
    f = write(tmp_path, "\n".join([
        "Timestamp, KW ,kvar",                    # 1
        "2024-03-04T00:00:00,100,50",             # 2
        "2024-03-04T00:15:00,abc,50",             # 3 kw not a number
        "2024-03-04T00:30:00,-5,50",              # 4 negative kW
        "2024-03-04T00:30:00,100,50",             # 5 not later than line 4
        "not-a-time,100,50",                      # 6 bad timestamp
        "2024-03-04T01:00:00,100,",               # 7 kvar empty
        "2024-03-04T01:15:00,100",                # 8 too few fields
        "2024-03-04T01:30:00,100,nan",            # 9 kvar not finite
    ]) + "\n")
    with pytest.raises(InputError) as ei:
        read_intervals(f)
    msgs = problems(ei.value)
    assert len(msgs) == 7
    for line, col in ((3, "kw"), (4, "kw"), (5, "timestamp"), (6, "timestamp"), (7, "kvar"), (9, "kvar")):
        assert any(m.startswith(f"{f}: line {line}, column {col}:") for m in msgs), (line, col, msgs)
    assert any(m.startswith(f"{f}: line 8:") and "2 fields" in m for m in msgs)
    assert any("negative" in m and "export" in m for m in msgs)
    assert any("not later than line 4" in m for m in msgs)


def test_pf_column_and_its_errors(tmp_path):
    f = write(tmp_path, "# comment line\ntimestamp,kw,pf\n2024-03-04T00:00:00,100,0.8\n2024-03-04T00:15:00,200,0.6\n")
    d = read_intervals(f)
    assert d.q_source == "pf" and d.dt_h == 0.25
    np.testing.assert_allclose(d.q_kvar, [100 * tan_phi(0.8), 200 * tan_phi(0.6)], rtol=1e-12)  # Q = P tan phi
    f = write(tmp_path, "# comment line\ntimestamp,kw,pf\n2024-03-04T00:00:00,100,1.2\n2024-03-04T00:15:00,200,85\n"
              "2024-03-04T00:30:00,200,0\n")
    with pytest.raises(InputError) as ei:
        read_intervals(f)
    msgs = problems(ei.value)
    # the comment counts: header is line 2, data from line 3
    assert msgs[0].startswith(f"{f}: line 3, column pf:") and "(0, 1]" in msgs[0]
    assert msgs[1].startswith(f"{f}: line 4, column pf:") and "percentage" in msgs[1]
    assert msgs[2].startswith(f"{f}: line 5, column pf:")


def test_file_level_problems(tmp_path):
    with pytest.raises(InputError, match="empty"):
        read_intervals(write(tmp_path, ""))
    with pytest.raises(InputError, match=r"line 1: missing column 'kvar \(or pf\)'"):
        read_intervals(write(tmp_path, "timestamp,kw\n2024-03-04T00:00:00,1\n"))
    with pytest.raises(InputError, match="missing column 'timestamp'"):
        read_intervals(write(tmp_path, "time,kw,kvar\n2024-03-04T00:00:00,1,1\n"))
    with pytest.raises(InputError, match="at least 2"):
        read_intervals(write(tmp_path, "timestamp,kw,kvar\n2024-03-04T00:00:00,1,1\n"))
    with pytest.raises(InputError, match="not found"):
        read_intervals(tmp_path / "absent.csv")
    with pytest.raises(InputError, match="UTC offset"):
        read_intervals(write(tmp_path, "timestamp,kw,kvar\n2024-03-04T00:00:00,1,1\n2024-03-04T00:15:00+01:00,1,1\n"))
    with pytest.raises(InputError, match=r"line 4, column timestamp: 7 min .* whole multiple of the usual"):
        read_intervals(write(tmp_path, "timestamp,kw,kvar\n2024-03-04T00:00:00,1,1\n2024-03-04T00:15:00,1,1\n"
                             "2024-03-04T00:22:00,1,1\n2024-03-04T00:45:00,1,1\n2024-03-04T01:00:00,1,1\n"))
    d = read_intervals(write(tmp_path, "timestamp,kw,kvar\n2024-03-04T00:00:00,1,1\n2024-03-04T00:15:00,1,1\n"
                             "2024-03-04T00:45:00,1,1\n2024-03-04T01:00:00,1,-1\n"))
    assert d.missing_intervals == 1 and d.n == 4 and d.q_kvar[-1] == -1.0  # leading kvar allowed


def test_many_bad_rows_capped(tmp_path):
    rows = ["timestamp,kw,kvar"] + [f"2024-03-04T{h:02d}:00:00,x,1" for h in range(24)] + \
           [f"2024-03-05T{h:02d}:00:00,x,1" for h in range(6)]
    with pytest.raises(InputError) as ei:
        read_intervals(write(tmp_path, "\n".join(rows) + "\n"))
    msgs = problems(ei.value)
    assert len(msgs) == MAX_REPORTED_PROBLEMS + 1
    assert msgs[-1].endswith(f"... and {30 - MAX_REPORTED_PROBLEMS} more problems not shown")


# --------------------------------------------------------------------------- demo data
def test_demo_file_is_reproducible():
    spec = importlib.util.spec_from_file_location("make_demo_intervals", ROOT / "cases" / "make_demo_intervals.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    assert mod.csv_text() == DEMO.read_text(encoding="utf-8")  # seeded generator, committed output


def test_demo_loads_and_sizes():
    d = read_intervals(DEMO)
    # from the generator's definition: 14 days of 15-minute intervals, no gaps, 585-1400 kW by design
    assert d.n == 14 * 96 and d.dt_h == 0.25 and d.missing_intervals == 0 and d.q_source == "kvar"
    assert 550.0 < d.p_kw.min() and d.p_kw.max() < 1450.0
    pf0 = power_factor(d.p_kw, d.q_kvar)
    assert 0.70 < pf0.min() and pf0.max() < 0.87
    need = required_kvar_series(d.p_kw, d.q_kvar, 0.95)
    plan = size_bank(need)
    # the documented equal rule: total covers the 95th percentile, less than one stage over it,
    # and the next smaller offered size would need more than 8 stages
    s = plan.stages_kvar[0]
    assert set(plan.stages_kvar) == {s} and plan.n_stages <= 8
    assert plan.q_design_kvar <= plan.total_net_kvar < plan.q_design_kvar + s
    smaller = [x for x in (25, 50, 75, 100, 150, 200) if x < s]
    assert all(math.ceil(plan.q_design_kvar / x) > 8 for x in smaller)
    r = simulate_controller(d.p_kw, d.q_kvar, d.dt_h, plan.stages_net_kvar)
    # invariant of the controller rule wherever it had time left for another operation (< 3 made):
    # the error lies inside the dead band, or the switch-in guard / full bank stopped it
    cum = np.concatenate(([0.0], np.cumsum(plan.stages_net_kvar)))
    e = d.q_kvar - cum[r.step] - d.p_kw * tan_phi(0.95)
    free = r.ops < 3
    assert np.all(e[free] >= -0.5 * s - 1e-9)
    blocked = (r.step == plan.n_stages) | (e - s <= -0.5 * s)
    assert np.all((e[free] <= 0.5 * s + 1e-9) | blocked[free])
    assert np.median(r.pf) > np.median(pf0)


# --------------------------------------------------------------------------- TOML block
def test_bank_block_round_trip_and_validates():
    text = bank_block_toml('PFC "main" \\ 1', "MSB", 0.48, [75.0, 75, 150.0], detuning_pct=7.0, comment="from demo")
    doc = tomllib.loads(text)
    (bank,) = doc["bank"]
    assert list(bank) == ["name", "bus", "rated_kv", "steps_kvar", "detuning_pct"]
    assert bank["name"] == 'PFC "main" \\ 1' and bank["steps_kvar"] == [75.0, 75.0, 150.0]
    Bank(**bank)  # accepted by the case-file schema
    plain = tomllib.loads(bank_block_toml("B", "LV", 0.6, (50.0,)))["bank"][0]
    assert "detuning_pct" not in plain
    with pytest.raises(InputError, match=r"stages_kvar\[1\]"):
        bank_block_toml("B", "LV", 0.48, [50.0, 0.0])
    with pytest.raises(InputError, match="bus"):
        bank_block_toml("B", " ", 0.48, [50.0])


# --------------------------------------------------------------------------- CLI
def parser():
    p = argparse.ArgumentParser(prog="resonance")
    add_parser(p.add_subparsers(dest="command"))
    return p


def digest(f: Path) -> str:
    return hashlib.sha256(f.read_bytes()).hexdigest()


def test_cli_demo(tmp_path, capsys):
    before = digest(DEMO)
    out = tmp_path / "out"
    args = parser().parse_args(["size", str(DEMO), "--bus", "MSB", "--rated-kv", "0.48", "--target-pf", "0.95",
                                "--stages", "25,50,75,100,150,200", "--out", str(out), "--kvarh-rate", "0.03",
                                "--tan-threshold", "0.4"])
    assert run(args) == 0
    for name in ("sizing.json", "bank_block.toml", "demand_pf.png", "time_in_step.png"):
        assert (out / name).stat().st_size > 0
    assert not list(out.glob(".resonance-partial-*"))
    assert digest(DEMO) == before
    res = json.loads((out / "sizing.json").read_text())
    bank = tomllib.loads((out / "bank_block.toml").read_text())["bank"][0]
    assert bank["steps_kvar"] == res["plan"]["stages_kvar"] and bank["bus"] == "MSB"
    tis = res["time_in_step"]
    assert len(tis["fraction"]) == len(bank["steps_kvar"]) + 1
    np.testing.assert_allclose(sum(tis["fraction"]), 1.0, rtol=1e-12)
    bill = res["billing"][0]
    assert bill["after"]["charge"] <= bill["before"]["charge"]
    assert (out / "demand_pf.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "design demand" in capsys.readouterr().out


def test_cli_detuned_and_no_plots(tmp_path):
    out = tmp_path / "o"
    args = parser().parse_args(["size", str(DEMO), "--bus", "MSB", "--rated-kv", "0.525", "--bus-kv", "0.48",
                                "--detuning-pct", "7", "--out", str(out), "--no-plots"])
    assert run(args) == 0
    res = json.loads((out / "sizing.json").read_text())
    f = (0.48 / 0.525) ** 2 / 0.93  # REFERENCES.md "Detuned banks": Q_net = Q_CR (U/U_CR)^2 / (1 - p)
    np.testing.assert_allclose(res["plan"]["stages_net_kvar"], np.array(res["plan"]["stages_kvar"]) * f, rtol=1e-12)
    # REFERENCES.md "Detuned banks": 480 V, p = 7 % -> U_C = 516.1 V [derived], i.e. 98.3 % of 525 V
    np.testing.assert_allclose(res["plan"]["v_cap_pct_of_rated"], 100 * 516.1 / 525.0, atol=0.01)
    assert tomllib.loads((out / "bank_block.toml").read_text())["bank"][0]["detuning_pct"] == 7.0
    assert not (out / "demand_pf.png").exists()


def test_cli_bad_input_exit_2(tmp_path, capsys):
    bad = write(tmp_path, "timestamp,kw,kvar\n2024-03-04T00:00:00,1,1\n2024-03-04T00:15:00,abc,1\n")
    args = parser().parse_args(["size", str(bad), "--bus", "MSB", "--rated-kv", "0.48", "--out", str(tmp_path / "o")])
    assert run(args) == 2
    err = capsys.readouterr().err
    assert f"{bad}: line 3, column kw:" in err and "Traceback" not in err
    assert not (tmp_path / "o").exists()
    args = parser().parse_args(["size", str(DEMO), "--bus", "MSB", "--rated-kv", "0.48", "--target-pf", "95",
                                "--out", str(tmp_path / "o")])
    assert run(args) == 2
    assert "--target-pf" in capsys.readouterr().err
    args = parser().parse_args(["size", str(DEMO), "--bus", "MSB", "--rated-kv", "0.48", "--stages", "25,x",
                                "--out", str(tmp_path / "o")])
    assert run(args) == 2
    assert "--stages" in capsys.readouterr().err


def test_cli_never_overwrites_input(tmp_path, capsys):
    src = tmp_path / "sizing.json"  # an input that happens to carry an output's name
    src.write_text(DEMO.read_text(encoding="utf-8"), encoding="utf-8")
    before = digest(src)
    args = parser().parse_args(["size", str(src), "--bus", "MSB", "--rated-kv", "0.48", "--out", str(tmp_path)])
    assert run(args) == 2
    assert "would overwrite an input file" in capsys.readouterr().err
    assert digest(src) == before
    assert not list(tmp_path.glob(".resonance-partial-*"))


def test_cli_no_bank_needed(tmp_path):
    f = write(tmp_path, "timestamp,kw,kvar\n2024-03-04T00:00:00,100,10\n2024-03-04T00:15:00,100,12\n")
    out = tmp_path / "o"
    assert run(parser().parse_args(["size", str(f), "--bus", "B", "--rated-kv", "0.48", "--out", str(out)])) == 0
    res = json.loads((out / "sizing.json").read_text())
    assert res["plan"]["stages_kvar"] == [] and res["bank_block"] is None
    assert res["time_in_step"]["fraction"] == [1.0]
    assert not (out / "bank_block.toml").exists()


def test_core_and_cli_import_without_matplotlib():
    code = ("import sys, resonance.design.sizing, resonance.inputs.sizing_io, resonance.sizing_cli; "
            "sys.exit(int('matplotlib' in sys.modules))")
    assert subprocess.run([sys.executable, "-c", code], cwd=ROOT).returncode == 0

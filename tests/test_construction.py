"""Bank construction from standard units and unit-failure unbalance (resonance.design.construction).

Closed forms are checked against REFERENCES.md "Capacitor bank construction and unbalance" and against
an independent nodal solve of the three-phase circuit built unit by unit (numpy, below)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from resonance.design.construction import (CONNECTIONS, UNIT_KV_50HZ, UNIT_KV_60HZ, UNIT_KVAR, propose_construction,
                                           unit_failure_unbalance)

# ----------------------------------------------------------------------------- independent route: nodal solve

W = 2 * math.pi * 60.0
C_UNIT_F = 200e3 / (W * 7.96e3 ** 2)  # one 200 kvar, 7.96 kV unit (any value gives the same ratios)


def _solve(connection, s, p, f, where=0):
    """Solve the bank unit by unit; return (|V| of the affected group, |V_N|, neutral tie current / I_phase).

    Nodes: the three source terminals held at a balanced 1 pu set, the joints between series groups,
    and the neutral (held at 0 for a grounded wye; unknown when floating; the two neutrals of a double
    wye are tied, so one node).  A group of ``k`` units is the admittance ``k j w C``.  Group ``where``
    of the first string (phase A; leg A-B for delta) has ``f`` units removed.
    """
    a = np.exp(2j * np.pi / 3)
    v_src = {"A": 1.0 + 0j, "B": a ** 2, "C": a}
    if connection == "delta":
        ends, wye_of = [("A", "B"), ("B", "C"), ("C", "A")], [0, 0, 0]
    else:
        n_wye = 2 if connection == "double_wye_ungrounded" else 1
        ends = [(ph, "N") for _ in range(n_wye) for ph in "ABC"]
        wye_of = [w for w in range(n_wye) for _ in "ABC"]
    unknown = [] if connection in ("delta", "wye_grounded") else ["N"]
    branches = []  # (node_from, node_to, units, wye, affected)
    for k, (top, bottom) in enumerate(ends):
        joints = [top] + [f"j{k}_{g}" for g in range(1, s)] + [bottom]
        unknown += joints[1:-1]
        for g in range(s):
            hit = k == 0 and g == where
            branches.append((joints[g], joints[g + 1], p - f if hit else p, wye_of[k], hit))
    idx = {nm: i for i, nm in enumerate(unknown)}
    y_uu = np.zeros((len(unknown), len(unknown)), complex)
    rhs = np.zeros(len(unknown), complex)
    fixed = dict(v_src, N=0j) if connection == "wye_grounded" else dict(v_src)
    for u, v, k, _, _ in branches:
        yb = k * 1j * W * C_UNIT_F
        for x, other in ((u, v), (v, u)):
            if x in idx:
                y_uu[idx[x], idx[x]] += yb
                if other in idx:
                    y_uu[idx[x], idx[other]] -= yb
                else:
                    rhs[idx[x]] += yb * fixed[other]
    sol = np.linalg.solve(y_uu, rhs)
    volt = fixed | dict(zip(unknown, sol))
    hit = next(b for b in branches if b[4])
    dv = abs(volt[hit[0]] - volt[hit[1]])
    tie = None
    if connection == "double_wye_ungrounded":
        i_in = sum(k * 1j * W * C_UNIT_F * (volt[u] - volt[v]) for u, v, k, w, _ in branches if v == "N" and w == 0)
        tie = abs(i_in) / abs(p / s * 1j * W * C_UNIT_F)  # healthy phase current of one wye, |V_A| = 1
    return dv, abs(volt.get("N", 0j)), tie


CASES = [(1, 2, 1), (2, 4, 1), (2, 4, 2), (3, 5, 2), (4, 10, 3), (6, 3, 1), (1, 12, 5)]


@pytest.mark.parametrize("connection", CONNECTIONS)
@pytest.mark.parametrize("s,p,f", CASES)
def test_closed_forms_match_a_nodal_solve_of_the_circuit(connection, s, p, f):
    where = (s - 1) // 2  # a group inside the string where S allows (position does not matter)
    dv_fault, shift, tie = _solve(connection, s, p, f, where)
    dv_healthy, shift0, _ = _solve(connection, s, p, 0, where)
    r = unit_failure_unbalance(s, p, f, connection)
    # independent route: numpy nodal admittance solve of the unit-by-unit circuit
    assert r.v_unit_pu == pytest.approx(dv_fault / dv_healthy, rel=1e-10)
    assert shift0 == pytest.approx(0.0, abs=1e-12)  # healthy bank: no neutral shift (nodal solve)
    if connection == "delta":
        assert r.neutral_shift_pu is None
    else:
        assert r.neutral_shift_pu == pytest.approx(shift, rel=1e-10, abs=1e-12)  # nodal solve, |V_A| = 1 pu
    if connection == "double_wye_ungrounded":
        assert r.neutral_current_pu == pytest.approx(tie, rel=1e-10)  # nodal solve: tie current
    else:
        assert r.neutral_current_pu is None


def test_reference_check_s2_p4_f1():
    # REFERENCES.md check, derived from the published formulas: grounded 8/7 = 1.143, ungrounded 24/20 = 1.20
    g = unit_failure_unbalance(2, 4, 1, "wye_grounded")
    u = unit_failure_unbalance(2, 4, 1, "wye_ungrounded")
    assert g.v_unit_pu == pytest.approx(8 / 7, rel=1e-12)
    assert u.v_unit_pu == pytest.approx(24 / 20, rel=1e-12)
    assert u.neutral_shift_pu == pytest.approx(1 / 20, rel=1e-12)  # derived: F / (3 S (P - F) + 2 F)
    assert g.neutral_shift_pu == 0.0  # the grounded neutral does not move (derived)
    # derived in the module's Notes: double wye 6 S P / (6 S (P - F) + 5 F) = 48/41; tie 3F/(...) = 3/41
    d = unit_failure_unbalance(2, 4, 1, "double_wye_ungrounded")
    assert d.v_unit_pu == pytest.approx(48 / 41, rel=1e-12)
    assert d.neutral_shift_pu == pytest.approx(1 / 41, rel=1e-12)
    assert d.neutral_current_pu == pytest.approx(3 / 41, rel=1e-12)
    # delta leg held by the source like a grounded-wye string (derived): 8/7
    assert unit_failure_unbalance(2, 4, 1, "delta").v_unit_pu == pytest.approx(8 / 7, rel=1e-12)


def test_limit_flag_and_first_failure_over_110_pct():
    # IEEE Std 18-2002 continuous rms voltage 1.10 pu [published]; values derived from the closed forms
    u = unit_failure_unbalance(2, 4, 1, "wye_ungrounded")
    assert u.limit_pu == pytest.approx(1.10) and u.exceeds_limit and u.first_failed_over == 1  # 1.20 > 1.10
    g = unit_failure_unbalance(1, 6, 1, "wye_grounded")
    assert g.v_unit_pu == 1.0 and not g.exceeds_limit and g.first_failed_over is None  # S = 1: held (derived)
    # S = 4, P = 10 ungrounded: F = 1 -> 120/110 = 1.0909; F = 2 -> 120/100 = 1.20 (derived)
    r = unit_failure_unbalance(4, 10, 1, "wye_ungrounded")
    assert r.v_unit_pu == pytest.approx(120 / 110, rel=1e-12) and not r.exceeds_limit
    assert r.first_failed_over == 2
    # healthy units at 0.95 pu of rating: 1.0909 x 0.95 = 1.036, F = 2 -> 1.14 (derived)
    r = unit_failure_unbalance(4, 10, 1, "wye_ungrounded", v_healthy_pu=0.95)
    assert r.v_unit_rated_pu == pytest.approx(120 / 110 * 0.95, rel=1e-12) and r.first_failed_over == 2
    assert unit_failure_unbalance(2, 4, 0, "wye_ungrounded").v_unit_pu == 1.0  # nothing lost (derived)


# ----------------------------------------------------------------------------- construction


def _brute_voltage(v_req, volts, s_max=16):
    return min(s * u for s in range(1, s_max + 1) for u in volts if s * u >= v_req * (1 - 1e-12))


@pytest.mark.parametrize("system_kv,bank_kvar,req", [(13.8, 3600.0, 8.4), (4.16, 900.0, None), (34.5, 10800.0, 21.0),
                                                     (69.0, 30000.0, 42.0), (12.47, 1200.0, 7.6)])
def test_construction_follows_its_documented_rule(system_kv, bank_kvar, req):
    out = propose_construction(system_kv, bank_kvar, req)
    assert sorted(c.connection for c in out) == sorted(CONNECTIONS)
    v_ph = system_kv / math.sqrt(3) if req is None else req
    for c in out:
        v_req = v_ph * math.sqrt(3) if c.connection == "delta" else v_ph
        assert c.required_leg_kv == pytest.approx(v_req, rel=1e-12)
        assert c.unit_kv in UNIT_KV_60HZ.values and c.unit_kvar in UNIT_KVAR.values
        leg = c.series_groups * c.unit_kv
        assert leg >= v_req * (1 - 1e-12)  # covers the required voltage
        # least overrating over every S <= 16 and listed unit voltage (brute force of the documented rule;
        # none of these cases is limited by the group kvar)
        assert leg == pytest.approx(_brute_voltage(v_req, UNIT_KV_60HZ.values), rel=1e-12)
        assert c.overrating == pytest.approx(leg / v_req, rel=1e-12) and c.overrating >= 1.0
        n = 6 if c.connection == "double_wye_ungrounded" else 3
        assert c.strings == n and c.units_total == n * c.series_groups * c.parallel_units
        assert c.bank_kvar_rated == pytest.approx(c.units_total * c.unit_kvar, rel=1e-12)
        assert c.bank_kvar_rated >= bank_kvar * (1 - 1e-12)  # at or above the request
        # closest at or above: no listed unit size gives a bank between the request and this one
        for q in UNIT_KVAR.values:
            p = max(2, math.ceil(bank_kvar / (n * c.series_groups * q) - 1e-9))
            assert n * c.series_groups * p * q >= c.bank_kvar_rated * (1 - 1e-12)
        assert c.parallel_units >= 2  # common practice minimum for externally fused units
        v_ll = leg if c.connection == "delta" else math.sqrt(3) * leg
        assert c.bank_rated_kv == pytest.approx(v_ll, rel=1e-12)
        # derived from Q = Q_R (V/V_R)^2 (fixed capacitance)
        assert c.bank_kvar_system == pytest.approx(c.bank_kvar_rated * (system_kv / v_ll) ** 2, rel=1e-12)
        assert c.unbalance.failed_units == 1
        assert c.unbalance.v_unit_rated_pu == pytest.approx(c.unbalance.v_unit_pu / c.overrating, rel=1e-12)
    keys = [(c.overrating, c.units_total) for c in out]
    assert keys == sorted(keys)  # documented order


def test_realistic_13_8_kv_detuned_bank():
    # 13.8 kV, 3600 kvar, required 8.4 kV per phase (about 7.97 kV / (1 - 0.0567) + margin, derived);
    # hand-worked from the 60 Hz list (from memory): wye 1 x 9.54 kV; delta sqrt(3) x 8.4 = 14.55 kV -> 2 x 7.62 kV
    out = {c.connection: c for c in propose_construction(13.8, 3600.0, 8.4)}
    g = out["wye_grounded"]
    assert (g.series_groups, g.unit_kv, g.unit_kvar, g.parallel_units, g.units_total) == (1, 9.54, 600.0, 2, 6)
    assert g.bank_rated_kv == pytest.approx(math.sqrt(3) * 9.54, rel=1e-12)
    assert g.bank_kvar_rated == pytest.approx(3600.0)
    assert g.bank_kvar_system == pytest.approx(3600.0 * (13.8 / (math.sqrt(3) * 9.54)) ** 2, rel=1e-12)  # 2506 kvar
    assert g.overrating == pytest.approx(9.54 / 8.4, rel=1e-12)
    d = out["delta"]
    assert (d.series_groups, d.unit_kv, d.unit_kvar, d.parallel_units) == (2, 7.62, 300.0, 2)
    dw = out["double_wye_ungrounded"]
    assert (dw.series_groups, dw.unit_kv, dw.unit_kvar, dw.parallel_units, dw.units_total) == (1, 9.54, 300.0, 2, 12)
    u = out["wye_ungrounded"].unbalance
    # derived: 3 S P / (3 S (P - F) + 2 F) = 6/5 on the healthy voltage, x 8.4/9.54 of rating = 1.057 <= 1.10
    assert u.v_unit_pu == pytest.approx(1.2, rel=1e-12) and not u.exceeds_limit and u.first_failed_over is None
    assert list(out) == ["delta", "wye_grounded", "wye_ungrounded", "double_wye_ungrounded"]  # overrating, units


def test_user_lists_frequency_and_group_kvar_limit():
    out = propose_construction(11.0, 2400.0, None, connections="wye_ungrounded", f_hz=50.0)
    assert len(out) == 1 and out[0].unit_kv in UNIT_KV_50HZ.values
    # derived: 11/sqrt3 = 6.351 kV is just above 6.35 kV; 1 x 6.6 ties 2 x 3.3 and the fewer groups win
    assert (out[0].series_groups, out[0].unit_kv) == (1, 6.6)
    assert out[0].overrating == pytest.approx(6.6 / (11 / math.sqrt(3)), rel=1e-12)
    c = propose_construction(13.8, 3000.0, None, connections=["wye_grounded"], unit_kv=[8.0], unit_kvar=[250.0],
                             min_parallel=3)[0]
    # derived: 7.97 kV needs 1 x 8.0 kV; 1000 kvar per phase / 250 = 4 units >= 3
    assert (c.series_groups, c.unit_kv, c.unit_kvar, c.parallel_units) == (1, 8.0, 250.0, 4)
    # a 6000 kvar per-phase group would exceed 4650 kvar (common practice, from memory): the search moves to S = 2
    big = propose_construction(13.8, 18000.0, None, connections="wye_grounded")[0]
    assert big.series_groups * big.unit_kv >= 13.8 / math.sqrt(3)
    assert big.parallel_units * big.unit_kvar <= 4650.0 and big.series_groups == 2
    with pytest.raises(ValueError, match="max_group_kvar"):
        propose_construction(13.8, 18000.0, None, connections="wye_grounded", max_series_groups=1)
    assert UNIT_KV_60HZ.source and UNIT_KV_50HZ.source and UNIT_KVAR.source


@pytest.mark.parametrize("call,name", [
    (lambda: propose_construction(-13.8, 3600.0), "system_kv"),
    (lambda: propose_construction(13.8, 0.0), "bank_kvar"),
    (lambda: propose_construction(13.8, 3600.0, -8.4), "required_phase_kv"),
    (lambda: propose_construction(13.8, 3600.0, float("nan")), "required_phase_kv"),
    (lambda: propose_construction(13.8, 3600.0, connections=["wye"]), "connections"),
    (lambda: propose_construction(13.8, 3600.0, connections=[]), "connections"),
    (lambda: propose_construction(13.8, 3600.0, unit_kv=[]), "unit_kv"),
    (lambda: propose_construction(13.8, 3600.0, unit_kvar=[100.0, -5.0]), "unit_kvar"),
    (lambda: propose_construction(13.8, 3600.0, min_parallel=0), "min_parallel"),
    (lambda: propose_construction(13.8, 3600.0, f_hz=55.0), "f_hz"),
    (lambda: unit_failure_unbalance(2, 4, 4, "wye_grounded"), "failed_units"),
    (lambda: unit_failure_unbalance(2, 4, 5, "wye_grounded"), "failed_units"),
    (lambda: unit_failure_unbalance(2, 4, -1, "wye_grounded"), "failed_units"),
    (lambda: unit_failure_unbalance(0, 4, 1, "wye_grounded"), "series_groups"),
    (lambda: unit_failure_unbalance(2, 2.5, 1, "wye_grounded"), "parallel_units"),
    (lambda: unit_failure_unbalance(2, 4, 1, "star"), "connection"),
])
def test_bad_inputs_name_the_parameter(call, name):
    with pytest.raises(ValueError, match=name):
        call()

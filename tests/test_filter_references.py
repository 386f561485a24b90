"""A single-tuned filter branch against outside routes: published and recalled worked examples
(each with its own hand computation), the model's own branch admittance, and an ngspice AC
analysis of a plant with the filter in service (harmonic current into the supply and into the
filter, order by order)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from resonance.assessment.study import run_study
from resonance.design.filter_branch import design_branch
from resonance.inputs.case_load import load_case
from resonance.model.admittance import bank_step_admittance

from .conftest import write_case
from .refs import filter_circuit, spice

W60 = 2.0 * math.pi * 60.0
W50 = 2.0 * math.pi * 50.0


# --------------------------------------------------------------------------- worked examples

#: REFERENCES.md "Detuned (series reactor) banks", worked checks [published manufacturer application
#: examples], p = 7 %: (f [Hz], Q_net at the bus [kvar], bus [kV], capacitor rating [kV]) and the
#: published figures to the examples' rounding (3 to 4 significant figures)
PUBLISHED_LC = (
    ((60.0, 26.9, 0.48, 0.48), {"q_nameplate_kvar": 25.0, "x_c_ohm": 9.21, "x_l_ohm": 0.645, "l_mh": 1.71,
                                "f_tuning_hz": 227.0}),
    ((50.0, 49.9, 0.40, 0.525), {"q_nameplate_kvar": 80.0, "x_c_ohm": 3.445, "x_l_ohm": 0.241, "l_mh": 0.768,
                                 "f_tuning_hz": 189.0}),
)


def test_published_series_lc_examples():
    # the same series L-C arithmetic as a single-tuned branch (IEEE Std 1531 series L-C branch)
    n7 = 1.0 / math.sqrt(0.07)
    for (f, q_net, u, u_r), want in PUBLISHED_LC:
        b = design_branch(q_net, u, n7, f, u_cap_rated_kv=u_r)
        for key, value in want.items():
            assert getattr(b, key) == pytest.approx(value, rel=2e-3), (f, key)  # published example
    # REFERENCES.md [derived]: 480 V, p = 7 % -> U_C = 516.1 V
    assert 1000.0 * design_branch(26.9, 0.48, n7, 60.0).u_c1_kv == pytest.approx(516.1, abs=0.05)
    # the same numbers by hand, closed form (derived: X_C = U_R^2/Q_R, X_L = p X_C,
    # L = X_L/omega, f_r = f/sqrt(p), Q_net = Q_R (U/U_R)^2/(1 - p))
    x_c = 0.525**2 / 0.080
    q_net = 80.0 * (0.40 / 0.525) ** 2 / 0.93
    b = design_branch(q_net, 0.40, n7, 50.0, u_cap_rated_kv=0.525)
    assert b.x_c_ohm == pytest.approx(x_c, rel=1e-12)                         # derived
    assert b.x_l_ohm == pytest.approx(0.07 * x_c, rel=1e-12)                  # derived
    assert b.l_mh == pytest.approx(1000.0 * 0.07 * x_c / W50, rel=1e-12)      # derived
    assert b.f_tuning_hz == pytest.approx(50.0 / math.sqrt(0.07), rel=1e-12)  # derived
    assert b.q_nameplate_kvar == pytest.approx(80.0, rel=1e-12)               # derived


#: the recalled textbook case [memory, not verified against the book]: R. C. Dugan,
#: M. F. McGranaghan, S. Santoso, H. W. Beaty, *Electrical Power Systems Quality*, 2nd ed.,
#: McGraw-Hill 2002, ch. 7 (designing a single-tuned filter): a 480 V, 60 Hz plant bus, a
#: 300 kvar (at 480 V) capacitor bank made into a filter tuned to the 4.7th, checked for duty
#: with higher-rated (600 V) capacitors.  The figures below are as recalled, to the book's
#: rounding (the example's number, page and exact figures are not confirmed); the hand computation
#: that follows derives every one of them independently, so the check stands without the book.
RECALLED = {"x_c_ohm": 0.768, "x_l_ohm": 0.0348, "l_mh": 0.0922, "i1_a": 378.0, "u_c1_v": 502.8,
            "q_nameplate_600v_kvar": 469.0}


def test_recalled_480v_fifth_filter_and_its_hand_computation():
    u, n, q_cap_480 = 0.48, 4.7, 300.0  # [kV], [unitless], [kvar at 480 V]
    p = 1.0 / n**2
    q_net = q_cap_480 / (1.0 - p)  # the branch's net output (REFERENCES.md, Q_net = Q_C/(1 - p))
    b = design_branch(q_net, u, n, 60.0, reactor_q=40.0, u_cap_rated_kv=0.60)
    # against the recalled figures [memory]: the book's rounding, 3 to 4 significant figures
    assert b.x_c_ohm == pytest.approx(RECALLED["x_c_ohm"], rel=1e-3)                    # from memory
    assert b.x_l_ohm == pytest.approx(RECALLED["x_l_ohm"], rel=2e-3)                    # from memory
    assert b.l_mh == pytest.approx(RECALLED["l_mh"], rel=2e-3)                          # from memory
    assert b.i1_a == pytest.approx(RECALLED["i1_a"], rel=2e-3)                          # from memory
    assert 1000.0 * b.u_c1_kv == pytest.approx(RECALLED["u_c1_v"], rel=1e-3)            # from memory
    assert b.q_nameplate_kvar == pytest.approx(RECALLED["q_nameplate_600v_kvar"], rel=2e-3)  # from memory
    # derived hand computation of the same numbers (closed form, every step written out)
    x_c = u**2 / (q_cap_480 / 1000.0)          # 0.2304 / 0.3 = 0.768 ohm
    x_l = x_c / n**2                           # 0.768 / 22.09 = 0.034767 ohm
    l_mh = 1000.0 * x_l / W60                  # 0.092222 mH
    c_uf = 1e6 / (W60 * x_c)                   # 3453.9 uF
    i1 = 1000.0 * u / math.sqrt(3.0) / (x_c - x_l)   # 277.13 V / 0.73323 ohm = 377.95 A
    u_c1 = math.sqrt(3.0) * i1 * x_c / 1000.0  # 0.50276 kV = U / (1 - 1/n^2)
    q_np = 1000.0 * 0.60**2 / x_c              # 468.75 kvar at 600 V
    for got, want in ((b.x_c_ohm, x_c), (b.x_l_ohm, x_l), (b.l_mh, l_mh), (b.c_uf, c_uf), (b.i1_a, i1),
                      (b.u_c1_kv, u_c1), (b.u_c1_kv, u / (1.0 - p)), (b.q_nameplate_kvar, q_np),
                      (b.f_tuning_hz, 282.0), (b.r_ohm, x_l / 40.0)):
        assert got == pytest.approx(want, rel=1e-12)                                   # derived
    assert b.n_band[0] < n < b.n_band[1]
    # with harmonic currents [derived, this test's own figures]: 5th 100 A, 7th 30 A in the branch
    ih = {5: 100.0, 7: 30.0}
    b = design_branch(q_net, u, n, 60.0, reactor_q=40.0, u_cap_rated_kv=0.60, i_harmonic_a=ih)
    v = {1: u_c1, 5: math.sqrt(3.0) * 100.0 * x_c / 5 / 1000.0, 7: math.sqrt(3.0) * 30.0 * x_c / 7 / 1000.0}
    u_rms = math.sqrt(sum(x**2 for x in v.values()))            # 0.50350 kV
    u_crest = math.sqrt(2.0) * sum(v.values())                  # 0.75670 kV (peaks added)
    i_rms = math.sqrt(i1**2 + 100.0**2 + 30.0**2)               # 392.11 A
    q_c = 3.0 * (i1**2 * x_c + 100.0**2 * x_c / 5 + 30.0**2 * x_c / 7) / 1000.0   # 334.03 kvar
    i_rated = q_np / (math.sqrt(3.0) * 0.60)                    # 451.05 A
    assert b.u_c_rms_kv == pytest.approx(u_rms, rel=1e-12)                             # derived
    assert b.u_c_peak_kv == pytest.approx(u_crest, rel=1e-12)                          # derived
    assert b.i_rms_a == pytest.approx(i_rms, rel=1e-12)                                # derived
    assert b.i_peak_a == pytest.approx(math.sqrt(2.0) * (i1 + 130.0), rel=1e-12)       # derived
    assert b.q_c_kvar == pytest.approx(q_c, rel=1e-12)                                 # derived
    assert b.losses_kw == pytest.approx(3.0 * (x_l / 40.0) * i_rms**2 / 1000.0, rel=1e-12)  # derived
    assert b.v_rms_pct == pytest.approx(100.0 * u_rms / 0.60, rel=1e-12)               # derived
    assert b.v_peak_pct == pytest.approx(100.0 * u_crest / (math.sqrt(2.0) * 0.60), rel=1e-12)
    assert b.i_rms_pct == pytest.approx(100.0 * i_rms / i_rated, rel=1e-12)            # derived
    assert b.kvar_pct == pytest.approx(100.0 * q_c / q_np, rel=1e-12)                  # derived
    # IEEE Std 18-2002 limits [published, REFERENCES.md "Capacitor duty"], taken from the duty table
    assert (b.v_rms_limit_pct, b.v_peak_limit_pct, b.i_rms_limit_pct, b.kvar_limit_pct) == pytest.approx(
        (110.0, 120.0, 135.0, 135.0), rel=1e-12)
    margins = {"v_rms": 110.0 - 100.0 * u_rms / 0.60, "v_peak": 120.0 - 100.0 * u_crest / (math.sqrt(2.0) * 0.60),
               "i_rms": 135.0 - 100.0 * i_rms / i_rated, "kvar": 135.0 - 100.0 * q_c / q_np}
    assert b.duty_ok and b.duty_governing == min(margins, key=margins.get) == "v_rms"  # 83.9 % of 110 %
    assert b.duty_margin_pct == pytest.approx(min(margins.values()), rel=1e-12)         # derived


def test_rated_voltage_need_puts_the_governing_duty_at_its_limit():
    # derived: each IEEE Std 18 duty ratio solved for U_R; the need is the largest, so with it the
    # governing duty sits at its limit and the others below theirs
    u, n = 0.48, 4.7
    for ih in ({5: 100.0, 7: 30.0}, {5: 700.0}, {5: 150.0, 7: 300.0, 11: 200.0}, {}):
        b = design_branch(300.0, u, n, 60.0, i_harmonic_a=ih)
        assert b.u_cap_rated_kv == b.u_cap_need_kv >= b.u_c1_kv
        assert b.duty_ok
        if b.u_cap_need_kv > b.u_c1_kv * (1.0 + 2e-9):
            # a duty governs the need: it sits at its limit, and 0.1 % less rated voltage fails it
            assert b.duty_margin_pct == pytest.approx(0.0, abs=1e-6)
            assert not design_branch(300.0, u, n, 60.0, i_harmonic_a=ih,
                                     u_cap_rated_kv=0.999 * b.u_cap_need_kv).duty_ok
        else:
            # small harmonics: the fundamental voltage U/(1 - p) governs and every duty has margin
            assert b.duty_margin_pct > 0.0
    assert design_branch(300.0, u, n, 60.0).u_cap_need_kv == pytest.approx(u / (1 - 1 / n**2), rel=1e-8)
    # a large 5th current makes the current duty govern: I_rms <= 1.35 U_R / (sqrt3 X_C)
    b = design_branch(300.0, u, n, 60.0, i_harmonic_a={5: 700.0})
    assert b.duty_governing == "i_rms"
    assert b.u_cap_need_kv == pytest.approx(
        math.sqrt(3.0) * b.x_c_ohm * math.hypot(b.i1_a, 700.0) / 1000.0 / 1.35, rel=1e-8)  # derived
    with pytest.raises(ValueError):
        design_branch(300.0, u, 0.9, 60.0)
    with pytest.raises(ValueError):
        design_branch(300.0, u, n, 60.0, i_harmonic_a={1: 5.0})


# --------------------------------------------------------------------------- the model's branch

def test_branch_agrees_with_the_model_admittance():
    # the model's series branch (resonance.model.admittance.bank_step_admittance, IEEE Std 1531
    # series L-C branch) with X_C from design_branch: impedance, series resonance at n, and the
    # fundamental capacitor voltage
    u, n, rq = 0.48, 4.7, 40.0
    b = design_branch(300.0, u, n, 60.0, reactor_q=rq)
    z_base = u**2 / 1.0  # [ohm] on 1 MVA
    b_pu = np.array([z_base / b.x_c_ohm])
    h = np.array([1.0, n, 5.0, 7.0])
    z = 1.0 / bank_step_admittance(h, b_pu, b.p, rq)[:, 0] * z_base
    zw = b.r_ohm + 1j * (h * b.x_l_ohm - b.x_c_ohm / h)
    np.testing.assert_allclose(z, zw, rtol=1e-12)  # derived: Z = R + j(h X_L - X_C/h)
    # L and C by their physical values: omega_n = 1/sqrt(L C) at f_tuning
    assert 1.0 / (2 * math.pi * math.sqrt(b.l_mh * 1e-3 * b.c_uf * 1e-6)) == pytest.approx(b.f_tuning_hz, rel=1e-12)
    assert z[1] == pytest.approx(b.r_ohm, abs=1e-12 * b.x_c_ohm)  # purely resistive at n
    fine = np.linspace(4.0, 5.5, 15001)
    zf = np.abs(1.0 / bank_step_admittance(fine, b_pu, b.p, rq)[:, 0])
    assert fine[np.argmin(zf)] == pytest.approx(n, abs=1e-4)
    # half-power points at |Z| = sqrt2 R: bandwidth R / X_L1 in orders (derived, series RLC)
    # (R = min |Z| here, in pu); grid step 1e-4 against a bandwidth of 0.025
    above = fine[zf <= math.sqrt(2.0) * np.min(zf)]
    assert above[-1] - above[0] == pytest.approx(b.bandwidth_orders, rel=1e-2)
    assert b.q_factor == pytest.approx(b.x_n_ohm / b.r_ohm, rel=1e-12) == pytest.approx(n * rq, rel=1e-12)
    # lossless branch: the model's fundamental current and capacitor voltage are design_branch's
    y1 = bank_step_admittance(np.array([1.0]), b_pu, b.p, np.inf)[0, 0] / z_base
    i1 = abs(1000.0 * u / math.sqrt(3.0) * y1)
    assert i1 == pytest.approx(b.i1_a, rel=1e-12)
    assert math.sqrt(3.0) * i1 * b.x_c_ohm / 1000.0 == pytest.approx(b.u_c1_kv, rel=1e-12)
    # with the reactor's R the fundamental differs by (R / (X_C - X_L))^2 / 2 only
    y1r = bank_step_admittance(np.array([1.0]), b_pu, b.p, rq)[0, 0] / z_base
    assert abs(1000.0 * u / math.sqrt(3.0) * y1r) == pytest.approx(b.i1_a, rel=1e-5)
    # the net output the branch was designed for: Q = 3 I1^2 (X_C - X_L)
    assert 3.0 * b.i1_a**2 * (b.x_c_ohm - b.x_l_ohm) / 1000.0 == pytest.approx(300.0, rel=1e-12)


# --------------------------------------------------------------------------- ngspice AC analysis

U_LV, U_HV, F = 0.48, 13.8, 60.0
#: measured agreement with ngspice is better than 1e-6; 1e-5 (tighter than the 1e-3 first asked for)
#: keeps the reactor's resistance visible: doubling it moves the 5th into the supply by about 1e-3
RTOL_SPICE = 1e-5
N_TUNE, RQ, Q_NET, U_CAP = 4.7, 40.0, 300.0, 0.60
SRC = {"D1": ("LV", 400.0, {5: (25.0, 0.0), 7: (12.0, 40.0), 11: (7.0, -70.0)}),
       "D2": ("MCC", 200.0, {5: (30.0, 60.0), 7: (10.0, -20.0), 11: (6.0, 100.0)})}

FILTER_CASE = """
title = "filter cross-check"
frequency_hz = 60

[supply]
bus = "HV"
kv = 13.8
sc_mva = 80.0
x_r = 10.0

[[transformer]]
name = "T1"
hv_bus = "HV"
lv_bus = "LV"
kva = 1500.0
hv_kv = 13.8
lv_kv = 0.48
z_pct = 5.75
x_r = 7.0

[[cable]]
name = "C1"
from_bus = "LV"
to_bus = "MCC"
length_m = 60.0
r_ohm_per_km = 0.10
x_ohm_per_km = 0.09
c_nf_per_km = 600.0

[[load]]
name = "L1"
bus = "LV"
kw = 600.0
pf = 0.85

{sources}
[[bank]]
name = "F5"
bus = "LV"
rated_kv = {u_cap!r}
steps_kvar = [{q_np!r}]
detuning_pct = {p_pct!r}
reactor_q = {rq!r}
kind = "filter"

[study]
load_model = "parallel_rl"
summation = "phasor"
"""


def _sources_toml() -> str:
    out = []
    for name, (bus, kva, spec) in SRC.items():
        pct = ", ".join(f"{h} = {v[0]!r}" for h, v in spec.items())
        ph = ", ".join(f"{h} = {v[1]!r}" for h, v in spec.items())
        out.append(f'[[harmonic_source]]\nname = "{name}"\nbus = "{bus}"\nkva = {kva!r}\n'
                   f"spectrum = {{{pct}}}\nphase_deg = {{{ph}}}\n")
    return "\n".join(out)


def _split(z_ohm: float, x_r: float) -> tuple[float, float]:
    x = z_ohm / math.sqrt(1 + 1 / x_r**2)
    return x / x_r, x


def _network(q_np_kvar: float | None) -> list:
    """FILTER_CASE by hand, per phase (wye equivalent) referred to 480 V [SI]; None: filter out."""
    r_s, x_s = _split(U_LV**2 / 80.0, 10.0)
    r_t, x_t = _split(0.0575 * U_LV**2 / 1.5, 7.0)
    km = 0.06
    q_mvar = 0.6 * math.tan(math.acos(0.85))
    el = [*filter_circuit.supply_elements("hv", r_s, x_s / W60),
          ("R", "t", "hv", "t1", r_t), ("L", "t", "t1", "lv", x_t / W60),
          ("R", "load", "lv", "0", U_LV**2 / 0.6), ("L", "load", "lv", "0", U_LV**2 / q_mvar / W60),
          ("C", "cab1", "lv", "0", 600e-9 * km / 2), ("R", "cab", "lv", "c1", 0.10 * km),
          ("L", "cab", "c1", "mcc", 0.09 * km / W60), ("C", "cab2", "mcc", "0", 600e-9 * km / 2)]
    if q_np_kvar is not None:
        # the case's filter by hand: C from nameplate at rated voltage, L = p X_C / omega, R = X_L / reactor_q
        x_c = U_CAP**2 / (q_np_kvar / 1000.0)
        x_l = x_c / N_TUNE**2
        el += filter_circuit.filter_branch_elements("f5", "lv", 1.0 / (W60 * x_c), x_l / W60, x_l / RQ)
    return el


def test_filter_effect_on_pcc_current_agrees_with_ngspice(tmp_path):
    # Reference: ngspice AC analysis (tests/refs/spice.py, tests/refs/filter_circuit.py) of the same
    # network built by hand from the case data, driven by the same harmonic current sources with
    # their angles, superposed per order; the study's figures at 5th, 7th and 11th within RTOL_SPICE.
    spice.require_ngspice()
    design = design_branch(Q_NET, U_LV, N_TUNE, F, reactor_q=RQ, u_cap_rated_kv=U_CAP)
    text = FILTER_CASE.format(sources=_sources_toml(), u_cap=U_CAP, q_np=design.q_nameplate_kvar,
                              p_pct=100.0 * design.p, rq=RQ)
    res = run_study(load_case(write_case(tmp_path, text)))
    a = res.assessment_for("F5")
    rows = {r["h"]: r for r in a.steps[0].fields["harmonics"]}
    i_l = a.info["pcc_i_limits"]["i_l_a"]
    i_off = {int(k): v * i_l / 100.0 for k, v in a.bank_off["i_pcc_pct_of_il"].items()}  # [A at 13.8 kV]
    i1 = {name: kva / (math.sqrt(3.0) * U_LV) for name, (_, kva, _) in SRC.items()}  # [A]
    inj = {bus: {h: filter_circuit.phasor(i1[name] * pct / 100.0, ph) for h, (pct, ph) in spec.items()}
           for name, (bus, _, spec) in SRC.items()}
    nodes = ["hv", "sup1", "sup0", "lv", "f5c", "f5r"]
    orders = (5, 7, 11)
    on = filter_circuit.superposed_voltages(_network(design.q_nameplate_kvar), inj, nodes, F, orders)
    off = filter_circuit.superposed_voltages(_network(None), inj, ["hv", "sup1", "sup0"], F, orders)
    r_s = _split(U_LV**2 / 80.0, 10.0)[0]
    ratio = U_LV / U_HV  # the supply current referred to the 13.8 kV PCC
    x_c = U_CAP**2 / (design.q_nameplate_kvar / 1000.0)
    r_f = x_c / N_TUNE**2 / RQ
    v_rated = U_CAP * 1000.0 / math.sqrt(3.0)
    for h in orders:
        i_sup_on = abs(on[h]["sup1"] - on[h]["sup0"]) / r_s * ratio
        i_sup_off = abs(off[h]["sup1"] - off[h]["sup0"]) / r_s * ratio
        i_filter = abs(on[h]["f5r"]) / r_f
        v_cap = abs(on[h]["lv"] - on[h]["f5c"])
        assert rows[h]["i_supply_a"] == pytest.approx(i_sup_on, rel=RTOL_SPICE), h   # ngspice AC analysis
        assert i_off[h] == pytest.approx(i_sup_off, rel=RTOL_SPICE), h               # ngspice AC analysis
        assert rows[h]["i_bank_a"] == pytest.approx(i_filter, rel=RTOL_SPICE), h     # ngspice AC analysis
        assert rows[h]["v_cap_pct"] == pytest.approx(100.0 * v_cap / v_rated, rel=RTOL_SPICE), h
        assert rows[h]["v_pcc_pct"] == pytest.approx(100.0 * abs(on[h]["hv"]) / (U_LV * 1000 / math.sqrt(3)),
                                                     rel=RTOL_SPICE), h             # ngspice AC analysis
    # the filter absorbs most of the 5th: the supply's share falls well below the bank-off current
    # (ngspice AC analysis: the same ratio)
    cut5 = rows[5]["i_supply_a"] / i_off[5]
    assert cut5 == pytest.approx(abs(on[5]["sup1"] - on[5]["sup0"]) / abs(off[5]["sup1"] - off[5]["sup0"]),
                                 rel=RTOL_SPICE)
    assert cut5 < 0.3
    # the study's duty of the filter capacitor is design_branch's at the load-flow voltage, with the
    # study's own branch currents (derived: the same IEEE Std 18 arithmetic on the same branch)
    sd = a.steps[0].fields
    vm = sd["cap_v1_pct"] / 100.0 * (1.0 - design.p) * U_CAP / U_LV  # [pu] bus voltage of the step
    at_v = design_branch(Q_NET * vm**2, U_LV * vm, N_TUNE, F, reactor_q=RQ, u_cap_rated_kv=U_CAP,
                         i_harmonic_a={h: r["i_bank_a"] for h, r in rows.items()})
    assert at_v.x_c_ohm == pytest.approx(x_c, rel=1e-12)
    assert at_v.v_rms_pct == pytest.approx(sd["cap_v_rms_pct"], rel=1e-9)
    assert at_v.v_peak_pct == pytest.approx(sd["cap_v_peak_pct"], rel=1e-9)
    assert at_v.i_rms_pct == pytest.approx(sd["cap_i_rms_pct"], rel=1e-9)
    assert at_v.kvar_pct == pytest.approx(sd["cap_kvar_pct"], rel=1e-9)
    assert at_v.i_rms_a == pytest.approx(sd["bank_i_rms_a"], rel=1e-9)
    # and the driving-point impedance at the bus has its series minimum at n (IEEE Std 1531 series branch)
    sc = res.scans_for("F5")
    band = (sc.h > 4.0) & (sc.h < 5.5)
    assert sc.h[band][np.argmin(sc.z_ohm[1][band])] == pytest.approx(N_TUNE, abs=0.02)

"""Resonance order of a source + capacitor against closed forms and published worked examples."""

from __future__ import annotations

import math

import numpy as np
import pytest

from resonance.inputs.case_load import load_case
from resonance.assessment.study import run_study

from .conftest import write_case

LOSSLESS = """
title = "closed form"
frequency_hz = {f}

[supply]
bus = "HV"
kv = 13.8
sc_mva = {sc}
x_r = 200.0

[[transformer]]
name = "T1"
hv_bus = "HV"
lv_bus = "LV"
kva = {kva}
hv_kv = 13.8
lv_kv = 0.48
z_pct = {z}
x_r = 200.0

[[bank]]
name = "B1"
bus = "LV"
rated_kv = 0.48
steps_kvar = {steps}

[study]
load_model = "none"
"""


def _run(tmp_path, **kw):
    case = load_case(write_case(tmp_path, LOSSLESS.format(**kw)))
    return run_study(case).scans_for("B1")


def test_published_example_1500kva_48mva_350kvar(tmp_path):
    # Published worked example (REFERENCES.md "Resonance"): 1500 kVA 5.5 % transformer,
    # 48 MVA utility, 350 kvar -> S_sys = 17 391 kVA, h_r = 7.05.
    sc = _run(tmp_path, f=60, sc=48.0, kva=1500.0, z=5.5, steps="[350.0]")
    assert sc.sc_mva == pytest.approx(17.391, rel=2e-3)  # published S_sys = 17 391 kVA (X/R = 200: |Z| ~ X)
    assert sc.steps[0].h_estimate == pytest.approx(7.05, abs=0.005)  # published h_r = 7.05
    assert sc.steps[0].h_scan == pytest.approx(7.05, abs=0.01)  # published h_r = 7.05


def test_published_example_1000kva_100kvar_infinite_bus(tmp_path):
    # Published worked example (REFERENCES.md): 1000 kVA, 5.3 %, 480 V, 60 Hz, 100 kvar:
    # X_T = 0.01221 ohm, X_C = 2.304 ohm, h_r = 13.74 (infinite source).
    sc = _run(tmp_path, f=60, sc=1.0e6, kva=1000.0, z=5.3, steps="[100.0]")
    x_t = 0.053 * 0.48**2 / 1.0  # derived: X_T = z U^2 / S
    assert x_t == pytest.approx(0.01221, rel=1e-3)  # published X_T
    assert sc.steps[0].h_scan == pytest.approx(13.74, abs=0.015)  # published h_r = 13.74


@pytest.mark.parametrize("f_hz", [50, 60])
def test_h_scan_equals_closed_form_every_step(tmp_path, f_hz):
    # derived from h = sqrt(X_C / X_L) = sqrt(S_sc / Q_C) for an undamped L-C parallel circuit
    sc = _run(tmp_path, f=f_hz, sc=250.0, kva=2000.0, z=6.0, steps="[100.0, 150.0, 200.0, 250.0]")
    s_sys = 1.0 / (1.0 / 250.0 + 0.06 / 2.0)  # [MVA], series combination (published rule)
    for st, q in zip(sc.steps, np.cumsum([100.0, 150.0, 200.0, 250.0])):
        expect = math.sqrt(s_sys * 1000.0 / q)
        assert st.h_estimate == pytest.approx(expect, rel=1e-4)
        # residual X/R = 200 shifts the |Z| peak by ~ (R/X)^2: far below 0.1 %
        assert st.h_scan == pytest.approx(expect, rel=1e-3)


def test_one_x_r_split_keeps_magnitude_and_ratio():
    # IEC 60909-0:2016 clause 6.2: R_Q = Z_Q / sqrt(1 + (X/R)^2), X_Q = R_Q X/R (derived check:
    # |R + jX| = Z and X / R = X/R)
    from resonance.standards.impedance import split_by_x_r
    from resonance.model.netmodel import supply_impedance_pu

    for z_abs, x_r in ((5.0, 10.0), (0.02, 0.5), (1.0, 1e4)):
        z = split_by_x_r(z_abs, x_r)
        assert abs(z) == pytest.approx(z_abs, rel=1e-12)
        assert z.imag / z.real == pytest.approx(x_r, rel=1e-12)
    r, x = supply_impedance_pu(250.0, 12.0, 1.0)  # 250 MVA, X/R 12, 1 MVA base: |Z| = 1/250 pu
    assert math.hypot(r, x) == pytest.approx(1.0 / 250.0, rel=1e-12) and x / r == pytest.approx(12.0)

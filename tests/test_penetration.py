"""Harmonic penetration and capacitor duty: limiting cases, closed forms and the demo plant."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from resonance.inputs.case_load import load_case
from resonance.cli import main
from resonance.assessment.study import run_study

from .conftest import CASES, write_case

STIFF = """
title = "stiff bus"
frequency_hz = 60

[supply]
bus = "HV"
kv = 13.8
sc_mva = 1.0e6
x_r = 10.0
{background}

[[transformer]]
name = "T1"
hv_bus = "HV"
lv_bus = "LV"
kva = 1000.0
hv_kv = 13.8
lv_kv = 0.48
z_pct = 5.0
x_r = 5.0

{source}

[[bank]]
name = "B1"
bus = "LV"
rated_kv = 0.48
steps_kvar = [0.05]

[study]
load_model = "none"
"""


def test_zero_injection_gives_zero_distortion_and_rated_duty(tmp_path):
    # Limiting case (STYLE.md): no source, no background -> no distortion; a tiny bank at its
    # rated voltage on a stiff bus runs at 100 % of every rating (IEEE Std 18 quantities, derived).
    res = run_study(load_case(write_case(tmp_path, STIFF.format(background="", source=""))))
    a = res.assessment_for("B1")
    f = a.steps[0].fields
    assert f["thd_v_pct"] == 0.0 and f["thd_v_pcc_pct"] == 0.0 and f["tdd_pct"] == 0.0
    for key in ("cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct", "cap_kvar_pct"):
        assert f[key] == pytest.approx(100.0, abs=1e-3), key
    assert f["duty_ok"] is True


def test_single_source_voltage_equals_closed_form(tmp_path):
    # derived: one current source I_h into a bus with transformer + supply reactance and a capacitor
    # (no damping): V_h = I_h |Z(h)|, 1/Z = 1/(j h X_s) + j h B_c.  X_s = supply + transformer.
    src = """
[[harmonic_source]]
name = "D1"
bus = "LV"
kva = 200.0
spectrum = {5 = 20.0, 7 = 14.0, 11 = 9.0}
"""
    text = STIFF.format(background="", source=src).replace("steps_kvar = [0.05]", "steps_kvar = [150.0, 150.0]")
    text = text.replace("x_r = 5.0", "x_r = 200.0").replace("x_r = 10.0", "x_r = 200.0")
    res = run_study(load_case(write_case(tmp_path, text)))
    a = res.assessment_for("B1")
    u = 0.48
    x_s = u**2 / 1.0e6 + 0.05 * u**2 / 1.0  # [ohm] at the fundamental
    i1 = 200.0 / (math.sqrt(3) * u)  # [A]
    for sd, q in zip(a.steps, (150.0, 300.0)):
        x_c = u**2 / (q / 1000.0)
        for row in sd.fields["harmonics"]:
            h = row["h"]
            y = 1 / (1j * h * x_s) + 1j * h / x_c
            i_h = i1 * {5: 0.20, 7: 0.14, 11: 0.09}[h]
            v_h = i_h * abs(1 / y)  # [V line-to-neutral]
            v_pct = 100 * v_h / (u * 1000 / math.sqrt(3))
            assert row["v_bank_pct"] == pytest.approx(v_pct, rel=2e-3), h  # X/R = 200 leaves < 2e-3
            # capacitor current I = V h / X_C (derived)
            assert row["i_bank_a"] == pytest.approx(v_h * h / x_c, rel=2e-3)


def test_background_drives_current_into_bank(tmp_path):
    # derived: a background voltage E_h behind the supply impedance with only the bank at the
    # bus gives V_h = E_h X_C/h / |X_C/h - h X_s| (voltage divider, no damping).
    text = STIFF.format(background="background_pct = {5 = 2.0}", source="")
    text = text.replace("sc_mva = 1.0e6", "sc_mva = 50.0").replace("steps_kvar = [0.05]", "steps_kvar = [200.0]")
    text = text.replace("x_r = 5.0", "x_r = 200.0").replace("x_r = 10.0", "x_r = 200.0")
    res = run_study(load_case(write_case(tmp_path, text)))
    f = res.assessment_for("B1").steps[0].fields
    u = 0.48
    x_s = u**2 / 50.0 + 0.05 * u**2 / 1.0
    x_c = u**2 / 0.2
    h = 5
    v = 0.02 * (x_c / h) / abs(x_c / h - h * x_s)
    assert f["harmonics"][0]["v_bank_pct"] == pytest.approx(100 * v, rel=2e-3)


def test_demo_step_nearest_each_order_has_largest_voltage_there(tmp_path):
    # Physics of parallel resonance (IEEE Std 519-2014 annex; derived): at each injected order the
    # step that amplifies it most is one of the two steps whose resonances bracket it most closely
    # (damping makes the peak asymmetric, so the nearer of two near-equal neighbours may lose).
    out = tmp_path / "out"
    rc = main(["check", str(CASES / "demo_plant.toml"), "--out", str(out), "--no-plots", "--no-report", "--quiet"])
    assert rc == 1  # the plain demo bank has findings
    data = json.loads((out / "results.json").read_text())
    steps = data["banks"][0]["steps"]
    for h in (5, 7, 11, 13, 17):
        v = [next(r["v_bank_pct"] for r in s["harmonics"] if r["h"] == h) for s in steps]
        near = [abs(s["h_scan"] - h) for s in steps]
        assert int(np.argmax(v)) in set(np.argsort(near)[:2].tolist()), h
    for s in steps:
        for key in ("thd_v_pct", "cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct", "cap_kvar_pct", "duty_ok"):
            assert key in s

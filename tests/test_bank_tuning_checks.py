"""A detuned bank the user gives gets the proposals' own tuning rule, and every capacitor duty
quantity beyond its limit is a finding of its own.

Sources: tuning order n = 1/sqrt(p) (derived from the series L-C resonance, IEEE Std 1531-2020);
margins: common practice (resonance.design.detuning settings); duty limits IEEE Std 18-2002 clause 5.6
(110 % rms voltage, 120 % crest, 135 % rms current, 135 % kvar; [published] in REFERENCES.md).
"""

from __future__ import annotations

import contextlib
import io
import json

import pytest

from resonance.cli import main

from .conftest import SMALL_CASE


def _bank(text: str, bank: str) -> str:
    i = text.index("[[bank]]")
    return text[:i] + bank


def _run(case_file, tmp_path, text):
    with contextlib.redirect_stdout(io.StringIO()) as so, contextlib.redirect_stderr(io.StringIO()):
        rc = main(["check", str(case_file(text)), "--out", str(tmp_path / "o"), "--no-plots", "--no-report"])
    return rc, json.loads((tmp_path / "o" / "results.json").read_text(encoding="utf-8")), so.getvalue()


STRONG_5TH = SMALL_CASE.replace("spectrum = {5 = 20.0, 7 = 14.0}", "spectrum = {5 = 30.0, 7 = 14.0}")


def test_detuned_bank_tuned_onto_the_5th_is_a_finding(case_file, tmp_path):
    # p = 4 %: n = 1/sqrt(0.04) = 5.0 exactly on the 5th (derived)
    text = _bank(STRONG_5TH, '[[bank]]\nname = "B1"\nbus = "LV"\nrated_kv = 0.525\n'
                             'steps_kvar = [400.0]\ndetuning_pct = 4.0\n')
    rc, data, out = _run(case_file, tmp_path, text)
    tune = [f for f in data["findings"] if f["check"] == "detuning_tuning"]
    assert rc == 1 and tune, data["findings"]
    assert tune[0]["value"] == 5.0 and tune[0]["cause"] == "bank"
    assert "harmonic 5" in tune[0]["message"]
    assert "FINDING" in out and "detuned p = 4 %" in out


def test_detuned_bank_inside_the_tolerance_band_is_a_finding(case_file, tmp_path):
    # p = 5 %: n = 4.47, below 90 % of 5 (4.5); with -5 % capacitance and -3 % inductance the
    # tuning rises to 4.47/sqrt(0.95*0.97) = 4.66 (derived), above 5 (1 - 10 %) = 4.5 with a
    # band margin of 10 % set in the case
    text = _bank(STRONG_5TH, '[[bank]]\nname = "B1"\nbus = "LV"\nrated_kv = 0.525\n'
                             'steps_kvar = [200.0]\ndetuning_pct = 5.0\n\n[detuning]\nband_margin_pct = 10.0\n')
    rc, data, _ = _run(case_file, tmp_path, text)
    tune = [f for f in data["findings"] if f["check"] == "detuning_tuning"]
    assert tune and "tolerances" in tune[0]["message"] and rc == 1


def test_sound_7_percent_bank_has_no_tuning_finding(case_file, tmp_path):
    # p = 7 %: n = 3.78 (derived), well below the 5th even with tolerances
    text = _bank(STRONG_5TH, '[[bank]]\nname = "B1"\nbus = "LV"\nrated_kv = 0.525\n'
                             'steps_kvar = [200.0]\ndetuning_pct = 7.0\n')
    _, data, _ = _run(case_file, tmp_path, text)
    assert not [f for f in data["findings"] if f["check"] == "detuning_tuning"]


def test_every_duty_quantity_beyond_its_limit_is_a_finding(case_file, tmp_path):
    # a plain bank tuned near the 5th with a strong 5th source: several duty quantities exceed
    strong = STRONG_5TH.replace("kva = 300.0", "kva = 600.0")
    rc, data, _ = _run(case_file, tmp_path, _bank(strong, '[[bank]]\nname = "B1"\nbus = "LV"\n'
                                                          'rated_kv = 0.48\nsteps_kvar = [400.0, 400.0]\n'))
    limits = data["banks"][0]["limits"]["duty_limits"]
    keys = {"v_rms": "cap_v_rms_pct", "v_peak": "cap_v_peak_pct", "i_rms": "cap_i_rms_pct", "kvar": "cap_kvar_pct"}
    seen_multi = False
    for s in data["banks"][0]["steps"]:
        over = {q for q, k in keys.items() if s[k] > limits[f"{q}_pct"]}
        got = {f["check"][5:] for f in data["findings"]
               if f["scenario"] == "nominal" and f["step"] == s["step"] and f["check"].startswith("duty_")}
        assert got == over, (s["step"], got, over)
        for f in data["findings"]:
            if f["scenario"] == "nominal" and f["step"] == s["step"] and f["check"].startswith("duty_"):
                assert f["value"] == pytest.approx(s[keys[f["check"][5:]]], abs=1e-3)  # both rounded at the edge
        seen_multi |= len(over) > 1
    assert seen_multi, "the case must drive more than one quantity past its limit"


def test_summary_row_follows_the_findings(case_file, tmp_path):
    # the terminal's per-step word comes from the one assessment: a tuning finding makes it FINDING
    text = _bank(STRONG_5TH, '[[bank]]\nname = "B1"\nbus = "LV"\nrated_kv = 0.525\n'
                             'steps_kvar = [400.0]\ndetuning_pct = 4.0\n')
    rc, data, out = _run(case_file, tmp_path, text)
    row = next(ln for ln in out.splitlines() if ln.strip().startswith("1 ") and "400" in ln)
    # the detuned tuning holds in every scenario ("all"): the row names it so
    assert rc == 1 and row.rstrip().endswith("FINDING all"), row

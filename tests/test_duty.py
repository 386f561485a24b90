"""Tests of resonance.standards.duty: capacitor duty per IEEE Std 18 quantities."""

import numpy as np
import pytest

from resonance.standards.duty import (
    DUTY_LIMITS,
    capacitor_duty,
    duty_limits,
)
from resonance.errors import InputError

H = np.array([1.0, 5.0, 7.0])


def test_worked_check_small_distortion():
    # REFERENCES.md "Capacitor duty" worked check [derived]: V1 = 1.00, V5 = 0.04, V7 = 0.03 pu
    r = capacitor_duty(H, [1.00, 0.04, 0.03], duty_limits("ieee18-2002"))
    np.testing.assert_allclose(r.v_rms_pct, 100.12, atol=0.005)   # V_rms 1.0012 [derived]
    np.testing.assert_allclose(r.v_peak_pct, 107.0, atol=0.005)   # V_crest 1.070 [derived]
    np.testing.assert_allclose(r.i_rms_pct, 104.12, atol=0.005)   # I_rms 1.0412 [derived]
    np.testing.assert_allclose(r.kvar_pct, 101.43, atol=0.005)    # Q 1.0143 [derived]
    assert bool(r.ok)


def test_worked_check_fifth_harmonic_current_edition_matters():
    # REFERENCES.md worked check [derived]: V1 = 1.0, V5 = 0.2236 gives I_rms 1.50,
    # Q 1.25, V_crest 1.2236
    h = np.array([1.0, 5.0])
    v = np.array([1.0, 0.2236])
    r02 = capacitor_duty(h, v, duty_limits("ieee18-2002"))
    np.testing.assert_allclose(r02.i_rms_pct, 150.0, atol=0.01)   # [derived]
    np.testing.assert_allclose(r02.kvar_pct, 125.0, atol=0.01)    # [derived]
    np.testing.assert_allclose(r02.v_peak_pct, 122.36, atol=1e-9)  # [derived] 1 + 0.2236
    # IEEE Std 18-2002 current limit 1.35 [published]: fails by about 15 points
    np.testing.assert_allclose(r02.i_rms_margin_pct, 135.0 - 150.0, atol=0.01)
    # crest limit 1.20 [published]: fails by 2.36 points
    np.testing.assert_allclose(r02.v_peak_margin_pct, 120.0 - 122.36, atol=1e-9)
    assert not bool(r02.ok)
    assert r02.governing == "i_rms"
    # IEEE Std 18-1992 current limit 1.80 [memory]: current passes, crest still fails
    r92 = capacitor_duty(h, v, duty_limits("ieee18-1992"))
    assert float(r92.i_rms_margin_pct) > 0.0
    assert float(r92.v_peak_margin_pct) < 0.0
    assert r92.governing == "v_peak"
    assert not bool(r92.ok)


def test_rated_voltage_without_harmonics_is_100_pct_everywhere():
    # limiting case: V1 = 1 pu only -> every quantity at its rating [derived from the Notes formulas]
    r = capacitor_duty(H, [1.0, 0.0, 0.0], duty_limits())
    for q in (r.v_rms_pct, r.v_peak_pct, r.i_rms_pct, r.kvar_pct):
        np.testing.assert_allclose(q, 100.0, rtol=0, atol=1e-12)
    # margins are the limits minus 100 % (IEEE Std 18-2002 [published])
    np.testing.assert_allclose(r.v_rms_margin_pct, 10.0, atol=1e-12)
    np.testing.assert_allclose(r.v_peak_margin_pct, 20.0, atol=1e-12)
    np.testing.assert_allclose(r.i_rms_margin_pct, 35.0, atol=1e-12)
    np.testing.assert_allclose(r.kvar_margin_pct, 35.0, atol=1e-12)
    assert r.governing == "v_rms"
    np.testing.assert_allclose(r.min_margin_pct, 10.0, atol=1e-12)


def test_overvoltage_alone_governs_by_rms_voltage():
    # V1 = 1.12 pu, no harmonics: V_rms 112 % > 110 % (IEEE Std 18-2002 [published]);
    # I_rms 112 %, Q = 1.12^2 = 125.44 % [derived]
    r = capacitor_duty(H, [1.12, 0.0, 0.0], duty_limits("ieee18-2002"))
    np.testing.assert_allclose(r.kvar_pct, 125.44, rtol=1e-12)
    np.testing.assert_allclose(r.v_rms_margin_pct, -2.0, atol=1e-9)
    assert r.governing == "v_rms"
    assert not bool(r.ok)


def test_batch_shape_matches_one_by_one():
    rng = np.random.default_rng(18)
    h = np.array([1.0, 5.0, 7.0, 11.0, 13.0])
    v = np.concatenate([rng.uniform(0.9, 1.1, (3, 4, 1)), rng.uniform(0.0, 0.08, (3, 4, 4))], axis=-1)
    lim = duty_limits("ieee18-2002")
    r = capacitor_duty(h, v, lim)
    for name in ("v_rms_pct", "v_peak_pct", "i_rms_pct", "kvar_pct", "min_margin_pct", "governing", "ok"):
        assert getattr(r, name).shape == (3, 4)
    for i in range(3):
        for j in range(4):
            one = capacitor_duty(h, v[i, j], lim)
            np.testing.assert_allclose(r.i_rms_pct[i, j], one.i_rms_pct, rtol=1e-14)
            np.testing.assert_allclose(r.kvar_pct[i, j], one.kvar_pct, rtol=1e-14)
            assert r.governing[i, j] == one.governing
    # independent route for I_rms: rms over one period of the sampled current waveform
    # (Parseval), i(t) = sum h V_h sqrt2 sin(h w t) [derived]
    t = np.linspace(0.0, 1.0, 4000, endpoint=False)
    i_t = np.sqrt(2.0) * (h * v[1, 2]) @ np.sin(2 * np.pi * np.outer(h, t))
    np.testing.assert_allclose(r.i_rms_pct[1, 2], 100 * np.sqrt(np.mean(i_t ** 2)), rtol=1e-10)


def test_result_arrays_are_read_only():
    r = capacitor_duty(H, [1.0, 0.05, 0.02], duty_limits())
    with pytest.raises(ValueError):
        r.i_rms_pct[...] = 0.0


def test_complex_phasors_use_magnitudes():
    lim = duty_limits()
    r_c = capacitor_duty(H, np.array([1.0, 0.03j, 0.02 * np.exp(1j)]), lim)
    r_m = capacitor_duty(H, [1.0, 0.03, 0.02], lim)
    np.testing.assert_allclose(r_c.i_rms_pct, r_m.i_rms_pct, rtol=1e-14)


def test_iec_sets_current_and_implied_q():
    lim = duty_limits("iec60831-1")
    # IEC 60831-1 / 60871-1 continuous current 1.30 I_N [published, secondary]
    assert lim.i_rms == pytest.approx(1.30, abs=0)
    assert duty_limits("iec60871-1").i_rms == pytest.approx(1.30, abs=0)
    # the q limit is the product bound 1.10 x 1.30 [derived]
    assert lim.q == pytest.approx(lim.v_rms * lim.i_rms, rel=1e-12)
    rng = np.random.default_rng(60831)
    h = np.arange(1.0, 14.0)
    v = rng.uniform(0.0, 0.04, (500, h.size))
    v[:, 0] = rng.uniform(0.8, 1.15, 500)
    r = capacitor_duty(h, v, lim)
    # Cauchy-Schwarz: Q <= V_rms I_rms, so q cannot govern while both pass [derived]
    assert np.all(r.kvar_pct <= r.v_rms_pct * r.i_rms_pct / 100.0 + 1e-9)
    both_pass = (r.v_rms_margin_pct >= 0) & (r.i_rms_margin_pct >= 0)
    assert 50 < both_pass.sum() < 450   # the draw exercises both outcomes
    assert np.all(r.kvar_margin_pct[both_pass] >= 0)


def test_limit_sets_have_sources_and_values_from_references():
    # REFERENCES.md "Capacitor duty" table: IEEE 18-2002 1.10 / 1.20 / 1.35 / 1.35 [published]
    lim = DUTY_LIMITS["ieee18-2002"]
    assert (lim.v_rms, lim.v_peak, lim.i_rms, lim.q) == (1.10, 1.20, 1.35, 1.35)
    assert "[published]" in lim.i_rms_source
    # IEEE 18-1992 current 1.80 [memory]
    assert DUTY_LIMITS["ieee18-1992"].i_rms == 1.80
    assert "[memory]" in DUTY_LIMITS["ieee18-1992"].i_rms_source
    for lim in DUTY_LIMITS.values():
        for src in (lim.v_rms_source, lim.v_peak_source, lim.i_rms_source, lim.q_source):
            assert any(m in src for m in ("[published", "[memory", "[derived"))
    assert duty_limits().name == "ieee18-2002"


def test_unknown_limit_set_names_the_field():
    with pytest.raises(InputError) as e:
        duty_limits("ieee18-1980", file="plant.toml")
    p = e.value.problems[0]
    assert (p.file, p.field) == ("plant.toml", "study.duty_limits")
    assert "ieee18-2002" in p.problem


@pytest.mark.parametrize("h, v", [
    ([5.0, 7.0], [0.1, 0.1]),            # no fundamental first
    ([1.0, 5.0, 5.0], [1.0, 0.1, 0.1]),  # repeated order
    ([1.0, 5.0], [1.0, 0.1, 0.1]),       # shape mismatch
    ([1.0, 5.0], [1.0, -0.1]),           # negative magnitude
    ([1.0, 5.0], [1.0, np.nan]),         # not finite
])
def test_bad_arrays_raise(h, v):
    with pytest.raises(ValueError):
        capacitor_duty(h, v, duty_limits())

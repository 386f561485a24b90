"""Tests of resonance.standards.spectra: built-in spectra, case tables and summation."""

import numpy as np
import pytest

from resonance.errors import InputError
from resonance.standards.spectra import (
    BUILTIN_SPECTRA,
    characteristic_orders,
    combine,
    resolve_spectrum,
    summation_exponent,
)

F = "plant.toml"
FIELD = "harmonic_source[2].spectrum"


def _thd(s):
    return float(np.sqrt(np.sum(s.pct ** 2)))


def test_ideal_six_pulse_values():
    s = resolve_spectrum("six-pulse-ideal", file=F, field=FIELD)
    # REFERENCES.md "Harmonic sources" [derived, 1/h]: 20.0, 14.29, 9.09, 7.69 % at 5, 7, 11, 13
    np.testing.assert_array_equal(s.h[:4], [5, 7, 11, 13])
    np.testing.assert_allclose(s.pct[:4], [20.0, 14.29, 9.09, 7.69], atol=0.005)
    # ... 5.88, 5.26, 4.35, 4.00 % at 17, 19, 23, 25
    np.testing.assert_allclose(s.pct_at([17, 19, 23, 25]), [5.88, 5.26, 4.35, 4.00], atol=0.005)
    assert s.h[-1] == 49 and s.pulse_number == 6
    assert "[derived]" in s.note


def test_twelve_pulse_has_no_fifth_or_seventh():
    s = BUILTIN_SPECTRA["twelve-pulse-ideal"]
    # characteristic orders 12k +- 1 (REFERENCES.md [published]): 11, 13, 23, 25, 35, 37, 47, 49
    np.testing.assert_array_equal(s.h, [11, 13, 23, 25, 35, 37, 47, 49])
    np.testing.assert_array_equal(s.pct_at([5, 7]), [0.0, 0.0])
    np.testing.assert_allclose(s.pct_at([11, 13]), [100 / 11, 100 / 13], rtol=1e-12)  # 1/h [derived]


def test_drive_spectra_inside_quoted_ranges():
    # REFERENCES.md "Harmonic sources" [memory, typical]: no choke THD_i 80-100 %, h5 60-80 %;
    # 3-5 % choke THD_i 35-45 %, h5 30-40 %, h7 10-15 %
    d = BUILTIN_SPECTRA["six-pulse-drive"]
    assert 80.0 <= _thd(d) <= 100.0
    assert 60.0 <= d.pct_at([5])[0] <= 80.0
    c = BUILTIN_SPECTRA["six-pulse-drive-choke"]
    assert 35.0 <= _thd(c) <= 45.0
    assert 30.0 <= c.pct_at([5])[0] <= 40.0
    assert 10.0 <= c.pct_at([7])[0] <= 15.0
    for s in (d, c):
        assert "from memory" in s.note
        # only characteristic orders of a six-pulse bridge (REFERENCES.md [published])
        assert set(s.h) <= set(characteristic_orders(6, 49))


def test_characteristic_orders():
    # h = k p +- 1 (REFERENCES.md [published])
    np.testing.assert_array_equal(characteristic_orders(6, 25), [5, 7, 11, 13, 17, 19, 23, 25])
    np.testing.assert_array_equal(characteristic_orders(12, 37), [11, 13, 23, 25, 35, 37])
    np.testing.assert_array_equal(characteristic_orders(6, 24.5), [5, 7, 11, 13, 17, 19, 23])
    np.testing.assert_array_equal(characteristic_orders(2, 9), [3, 5, 7, 9])
    with pytest.raises(ValueError):
        characteristic_orders(1, 50)
    with pytest.raises(ValueError):
        characteristic_orders(6.0, 50)


def test_table_with_string_keys_and_phases():
    s = resolve_spectrum({"7": 10, 5: 30.5, "11": 0}, file=F, field=FIELD,
                         phase_deg={"5": -30, "7": 15.0, 11: 0})
    np.testing.assert_array_equal(s.h, [5, 7, 11])
    np.testing.assert_allclose(s.pct, [30.5, 10.0, 0.0], rtol=0, atol=0)
    np.testing.assert_allclose(s.phase_deg, [-30.0, 15.0, 0.0], rtol=0, atol=0)
    assert s.name == "table" and s.pulse_number is None
    with pytest.raises(ValueError):
        s.pct[0] = 1.0  # read-only


@pytest.mark.parametrize("spec, fragment", [
    ({"1": 100.0}, "order '1'"),
    ({"5.5": 10.0}, "order '5.5'"),
    ({101: 1.0}, "order 101"),
    ({"five": 10.0}, "order 'five'"),
    ({5: -1.0}, "order 5: magnitude"),
    ({5: float("nan")}, "order 5: magnitude"),
    ({5: "20"}, "order 5: magnitude"),
    ({5: True}, "order 5: magnitude"),
    ({"5": 1.0, 5: 2.0}, "order 5 is given twice"),
    ({}, "empty"),
    (["six-pulse-ideal"], "built-in spectrum name or a table"),
])
def test_bad_tables_name_file_and_field(spec, fragment):
    with pytest.raises(InputError) as e:
        resolve_spectrum(spec, file=F, field=FIELD)
    p = e.value.problems[0]
    assert (p.file, p.field) == (F, FIELD)
    assert fragment in p.problem


def test_all_problems_reported_at_once():
    with pytest.raises(InputError) as e:
        resolve_spectrum({"1": 5.0, 7: -2.0, 11: 3.0}, file=F, field=FIELD, phase_deg={13: 10.0})
    fields = [p.field for p in e.value.problems]
    assert fields == [FIELD, FIELD, "harmonic_source[2].phase_deg"]


def test_unknown_name_lists_the_valid_names():
    with pytest.raises(InputError) as e:
        resolve_spectrum("six-pulse", file=F, field=FIELD)
    msg = str(e.value)
    assert msg.startswith(f"{F}: {FIELD}: ")
    for name in BUILTIN_SPECTRA:
        assert repr(name) in msg


def test_phases_must_cover_every_order():
    with pytest.raises(InputError) as e:
        resolve_spectrum({5: 20.0, 7: 14.0}, file=F, field=FIELD, phase_deg={5: 0.0})
    p = e.value.problems[0]
    assert p.field == "harmonic_source[2].phase_deg" and "missing: 7" in p.problem


def test_summation_exponents():
    # IEC 61000-3-6 summation law exponents [memory]: 1 (h < 5), 1.4 (5-10), 2 (> 10)
    np.testing.assert_array_equal(summation_exponent([2, 3, 4.9, 5, 7, 10, 10.5, 11, 49]),
                                  [1, 1, 1, 1.4, 1.4, 1.4, 2, 2, 2])


def test_combine_two_equal_sources():
    h = np.array([3.0, 5.0, 7.0, 11.0, 13.0])
    m = np.ones((2, h.size))
    # arithmetic: the sum, 2 [derived]
    np.testing.assert_allclose(combine(m, "arithmetic"), 2.0, rtol=1e-15)
    # summation law for two equal sources: 2^(1/alpha) = 2, 2^(1/1.4) = 1.6407, sqrt(2) [derived]
    np.testing.assert_allclose(combine(m, "iec61000-3-6", h=h),
                               [2.0, 2 ** (1 / 1.4), 2 ** (1 / 1.4), np.sqrt(2), np.sqrt(2)], rtol=1e-14)


def test_combine_summation_pythagorean_and_batch():
    # 3 and 4 above the 10th add as sqrt(3^2 + 4^2) = 5 [derived, alpha = 2]
    m = np.array([[[3.0, 3.0]], [[4.0, 4.0]]])   # (n_src=2, batch=1, n_h=2)
    out = combine(m, "iec61000-3-6", h=[11.0, 4.0])
    assert out.shape == (1, 2)
    np.testing.assert_allclose(out, [[5.0, 7.0]], rtol=1e-14)


def test_combine_phasor():
    m = np.ones((3, 2))
    # three equal phasors 120 deg apart cancel; in phase they add to 3 [derived]
    ph = np.array([[0.0, 10.0], [120.0, 10.0], [240.0, 10.0]])
    np.testing.assert_allclose(combine(m, "phasor", phase_deg=ph), [0.0, 3.0], rtol=0, atol=1e-14)
    # phasor sum never exceeds the arithmetic sum (triangle inequality) [derived]
    rng = np.random.default_rng(36)
    mm = rng.uniform(0, 5, (4, 30))
    pp = rng.uniform(-180, 180, (4, 30))
    assert np.all(combine(mm, "phasor", phase_deg=pp) <= combine(mm) + 1e-12)


def test_combine_bad_input():
    with pytest.raises(InputError) as e:
        combine(np.ones((2, 3)), "rms", file=F)
    assert e.value.problems[0].field == "study.summation"
    with pytest.raises(ValueError):
        combine(np.ones((2, 3)), "iec61000-3-6")           # no h
    with pytest.raises(ValueError):
        combine(np.ones((2, 3)), "phasor")                 # no phases
    with pytest.raises(ValueError):
        combine(-np.ones((2, 3)))                          # negative magnitudes

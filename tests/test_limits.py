"""Tests of resonance.standards.limits: IEEE Std 519 limits, THD and TDD."""

import numpy as np
import pytest

from resonance.errors import InputError
from resonance.standards.limits import (
    ieee519_current_limits,
    ieee519_voltage_limits,
    tdd_pct,
    thd_pct,
)

ODD_ORDERS = np.array([3, 5, 7, 9, 11, 13, 15, 17, 19, 21, 23, 25, 33, 35, 49])


@pytest.mark.parametrize("v_kv, individual, thd, marker", [
    (0.48, 5.0, 8.0, "[published]"),   # IEEE 519-2014 Table 1, V <= 1 kV [published]
    (1.0, 5.0, 8.0, "[published]"),    # upper edge included in the first row (our convention)
    (13.8, 3.0, 5.0, "[memory"),       # 1 < V <= 69 kV: 3.0 / 5.0 [memory]
    (69.0, 3.0, 5.0, "[memory"),       # edge 69 kV in the 1-69 kV row (our convention)
    (115.0, 1.5, 2.5, "[memory]"),     # 69 < V <= 161 kV: 1.5 / 2.5 [memory]
    (230.0, 1.0, 1.5, "[memory]"),     # V > 161 kV: 1.0 / 1.5 [memory]
])
def test_voltage_rows(v_kv, individual, thd, marker):
    lim = ieee519_voltage_limits(v_kv)
    ind, tot, src = lim
    assert ind == pytest.approx(individual, abs=1e-12)
    assert tot == pytest.approx(thd, abs=1e-12)
    assert marker in src and "519-2014" in src


def test_voltage_rows_same_in_2022():
    # REFERENCES.md: IEEE 519-2014 values unchanged in 2022
    for v in (0.4, 13.8, 115.0, 345.0):
        a, b = ieee519_voltage_limits(v, "2014"), ieee519_voltage_limits(v, "2022")
        assert a[:2] == b[:2]
    assert "519-2022" in ieee519_voltage_limits(0.4, "2022").source


@pytest.mark.parametrize("ratio, row, odd, tdd", [
    # IEEE 519-2014 Table 2 (= 1992 table) [published]; row edges: lower edge included
    # (common practice, our documented convention)
    (19.99, "<20", (4.0, 2.0, 1.5, 0.6, 0.3), 5.0),
    (20.0, "20-50", (7.0, 3.5, 2.5, 1.0, 0.5), 8.0),
    (50.0, "50-100", (10.0, 4.5, 4.0, 1.5, 0.7), 12.0),
    (100.0, "100-1000", (12.0, 5.5, 5.0, 2.0, 1.0), 15.0),
    (1000.0, ">1000", (15.0, 7.0, 6.0, 2.5, 1.4), 20.0),
    (1000.1, ">1000", (15.0, 7.0, 6.0, 2.5, 1.4), 20.0),
    (999.9, "100-1000", (12.0, 5.5, 5.0, 2.0, 1.0), 15.0),
])
def test_current_rows_and_order_ranges(ratio, row, odd, tdd):
    # one order from each side of every range edge: 3, 9 | 11, 15 | 17, 21 | 23, 33 | 35, 49
    h = np.array([3, 9, 11, 15, 17, 21, 23, 33, 35, 49])
    lim = ieee519_current_limits(ratio, h)
    expected = np.repeat(np.array(odd), 2)
    np.testing.assert_allclose(lim.individual_pct, expected, rtol=0, atol=1e-12)
    assert lim.row == row
    assert lim.tdd_pct == pytest.approx(tdd, abs=1e-12)
    assert lim.limited.all()


def test_even_orders_2014_quarter_of_odd():
    # IEEE 519-2014: even orders limited to 25 % of the odd limits [published]
    h = np.array([2, 4, 6, 8, 10, 12, 16, 18, 22, 24, 34, 36, 50])
    odd_of_range = np.array([7.0] * 5 + [3.5] * 2 + [2.5] * 2 + [1.0] * 2 + [0.5] * 2)  # row 20-50
    lim = ieee519_current_limits(30.0, h, "2014")
    np.testing.assert_allclose(lim.individual_pct, 0.25 * odd_of_range, rtol=0, atol=1e-12)


def test_even_orders_2022_half_then_full():
    # IEEE 519-2022: even orders 50 % of the odd limit for h <= 6, 100 % above [published]
    h = np.array([2, 4, 6, 8, 10, 12, 16, 18, 50])
    lim = ieee519_current_limits(30.0, h, "2022")
    expected = np.array([3.5, 3.5, 3.5, 7.0, 7.0, 3.5, 3.5, 2.5, 0.5])
    np.testing.assert_allclose(lim.individual_pct, expected, rtol=0, atol=1e-12)
    # odd orders are the same in both editions (REFERENCES.md: values unchanged)
    np.testing.assert_array_equal(ieee519_current_limits(30.0, ODD_ORDERS, "2022").individual_pct,
                                  ieee519_current_limits(30.0, ODD_ORDERS, "2014").individual_pct)


def test_orders_outside_table_are_masked_not_nan():
    h = np.array([1.0, 5.5, 51.0, 0.5, 5.0])
    lim = ieee519_current_limits(10.0, h)
    np.testing.assert_array_equal(lim.limited, [False, False, False, False, True])
    assert np.all(np.isfinite(lim.individual_pct))
    assert lim.individual_pct[4] == pytest.approx(4.0, abs=1e-12)  # Table 2, <20, 3-11 [published]


def test_unknown_edition_names_the_field():
    with pytest.raises(InputError) as e:
        ieee519_current_limits(30.0, [5], "1992", file="plant.toml")
    assert e.value.problems[0].field == "study.ieee519_edition"
    assert e.value.problems[0].file == "plant.toml"
    with pytest.raises(InputError):
        ieee519_voltage_limits(0.48, "2019")


@pytest.mark.parametrize("bad", [0.0, -5.0, np.nan, np.inf])
def test_bad_ratio_and_voltage_raise(bad):
    with pytest.raises(ValueError):
        ieee519_current_limits(bad, [5])
    with pytest.raises(ValueError):
        ieee519_voltage_limits(bad)


def test_thd_ideal_six_pulse_to_25th():
    # ideal six-pulse converter, I_h/I_1 = 1/h (REFERENCES.md "Harmonic sources", derived)
    h = np.array([1, 5, 7, 11, 13, 17, 19, 23, 25])
    mag = 1.0 / h
    # derived: sqrt of the sum of squares of 1/h over the characteristic orders to 25
    expected = 100.0 * np.sqrt(sum(1.0 / k ** 2 for k in (5, 7, 11, 13, 17, 19, 23, 25)))
    np.testing.assert_allclose(thd_pct(h, mag, 1.0), expected, rtol=1e-12)
    # REFERENCES.md "Harmonic sources" lists 20.0, 14.29, 9.09, 7.69, 5.88, 5.26, 4.35, 4.00 %
    listed = np.array([20.0, 14.29, 9.09, 7.69, 5.88, 5.26, 4.35, 4.00])
    np.testing.assert_allclose(thd_pct(h, 100 * mag, 100.0), np.sqrt(np.sum(listed ** 2)), atol=0.01)


def test_thd_ideal_six_pulse_infinite_sum():
    # REFERENCES.md [derived]: THD of the ideal six-pulse current = sqrt((pi/3)^2 - 1) = 31.08 %
    k = np.arange(1, 200_001)
    h = np.concatenate([[1], np.sort(np.concatenate([6 * k - 1, 6 * k + 1]))]).astype(float)
    thd = thd_pct(h, 1.0 / h, 1.0, h_max=np.inf)
    np.testing.assert_allclose(thd, 100 * np.sqrt((np.pi / 3) ** 2 - 1), atol=1e-3)
    np.testing.assert_allclose(thd, 31.08, atol=0.005)
    # IEEE 519 sums to the 50th by default: less than the infinite sum
    assert thd_pct(h, 1.0 / h, 1.0) < thd - 0.5


def test_zero_injection_zero_distortion_and_batch():
    h = np.array([1.0, 5.0, 7.0, 11.0])
    mag = np.zeros((2, 3, 4))
    mag[..., 0] = 100.0
    np.testing.assert_array_equal(thd_pct(h, mag, 100.0), np.zeros((2, 3)))
    rng = np.random.default_rng(519)
    mag[..., 1:] = rng.uniform(0.0, 10.0, (2, 3, 3))
    i_l = rng.uniform(50.0, 150.0, (2, 3))
    out = tdd_pct(h, mag, i_l)
    assert out.shape == (2, 3)
    # derived: TDD = 100 sqrt(sum_{h>1} I_h^2) / I_L, element by element
    np.testing.assert_allclose(out, 100 * np.linalg.norm(mag[..., 1:], axis=-1) / i_l, rtol=1e-13)


def test_thd_base_is_explicit():
    # a 3 % fifth on a bus at 1.05 pu: 3.0 % of nominal, 2.857 % of the measured fundamental
    # [derived from THD = sqrt(sum V_h^2) / base]
    h = np.array([1.0, 5.0])
    v = np.array([1.05, 0.03])
    np.testing.assert_allclose(thd_pct(h, v, 1.0), 3.0, rtol=1e-12)
    np.testing.assert_allclose(thd_pct(h, v, v[0]), 3.0 / 1.05, rtol=1e-12)
    with pytest.raises(ValueError):
        thd_pct(h, v, 0.0)
    with pytest.raises(ValueError):
        thd_pct(h, v[:1], 1.0)

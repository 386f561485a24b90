"""Peak refinement, the adaptive grid's stopping rule and the load models, against closed forms."""

from __future__ import annotations

import numpy as np
import pytest

from resonance.harmonics.grid import _split_dh, adaptive_scan, zoom_refine


def _parallel_rlc(h, h0, q):
    # normalised parallel RLC impedance Z = 1 / (1 + j Q (h/h0 - h0/h)); |Z| peaks at h0 with 1
    # (derived: the admittance's imaginary part vanishes at h = h0)
    return 1.0 / (1.0 + 1j * q * (h / h0 - h0 / h))


@pytest.mark.parametrize("points", [3, 7, 12])
def test_zoom_refine_finds_the_resonance_of_a_parallel_rlc(points):
    h0 = np.array([4.731, 7.05, 13.74, 17.2227])
    q = np.array([5.0, 40.0, 200.0, 1000.0])
    lo, hi = h0 - 0.013, h0 + 0.007

    def f(x):
        return np.abs(_parallel_rlc(x, h0[:, None], q[:, None]))

    hp, zp = zoom_refine(f, lo, hi, xtol=1e-6, points=points)
    # Reference: derived, maximum at h = h0 with |Z| = 1
    np.testing.assert_allclose(hp, h0, atol=1e-6)
    np.testing.assert_allclose(zp, 1.0, atol=1e-6)
    # same answer as scipy's bounded scalar minimiser (Brent's method) on the same brackets
    from scipy.optimize import minimize_scalar

    hg = [minimize_scalar(lambda x, a=a, b=b: -abs(_parallel_rlc(x, a, b)), bounds=(l_, h_), method="bounded",
                          options={"xatol": 1e-9}).x for a, b, l_, h_ in zip(h0, q, lo, hi)]
    np.testing.assert_allclose(hp, hg, atol=2e-6)


def test_zoom_refine_with_no_brackets():
    hp, zp = zoom_refine(lambda x: x, np.zeros(0), np.zeros(0))
    assert hp.size == 0 and zp.size == 0


def test_adaptive_grid_leaves_no_interval_the_rule_would_still_halve():
    # two sharp resonances (Q = 300 and 2000) between base samples 0.1 apart; the stopping rule
    # (resonance.harmonics.grid.adaptive_scan Notes) must hold on every interval of the final grid
    h0 = np.array([[5.03], [11.377]])
    q = np.array([[300.0], [2000.0]])

    def fun(h):
        z = _parallel_rlc(h[None, :], h0, q)
        # dZ/dh = -Z^2 dY/dh, dY/dh = j Q (1/h0 + h0/h^2) (derived)
        dz = -z**2 * 1j * q * (1.0 / h0 + h0 / h[None, :] ** 2)
        return z, dz

    base = np.arange(1.0, 20.0 + 1e-9, 0.1)
    min_step = 0.1 / 64
    sc = adaptive_scan(fun, base, tol=0.05, min_step=min_step, derivative=True, max_levels=12)
    split = _split_dh(sc.h, sc.z, sc.dz, np.arange(sc.h.size - 1), 0.05, min_step)
    assert not split.any()
    # the grid is the base grid plus midpoints only, and is sampled finely at both peaks
    assert np.all(np.diff(sc.h) > 0)
    for c in range(2):
        k = np.argmin(np.abs(sc.h - h0[c, 0]))
        assert abs(sc.h[k] - h0[c, 0]) <= min_step


@pytest.mark.parametrize("p_pu", [0.8, 1e-3, 1e-160, 2.2e-309, 0.0])
def test_load_models_are_finite_and_match_their_defining_circuits(p_pu):
    # Reference: derived from each model's circuit; a vanishing load draws (almost) nothing and
    # must not turn into inf/nan admittance (seen with a denormal kW in a generated case)
    from resonance.model.admittance import load_admittance

    q_pu = 0.6 * p_pu
    h = np.array([1.0, 5.0, 13.0])
    for model in ("parallel_rl", "series_rl", "cigre_c4"):
        y = load_admittance(np.array([p_pu]), np.array([q_pu]), h, model)[:, 0]
        assert np.all(np.isfinite(y)), model
        # scale: no model draws more than 7.7 (P + Q) (CIGRE C4 at h = 1: P + j(6.7 Q - 0.74 P))
        assert np.all(np.abs(y) <= 7.7 * (p_pu + q_pu) + 1e-300), model
    if p_pu < 1e-3:
        return
    y = load_admittance(np.array([p_pu]), np.array([q_pu]), h, "cigre_c4")[:, 0]
    r = 1.0 / p_pu
    k = 6.7 * q_pu / p_pu - 0.74
    # CIGRE C4 circuit: R in series with j 0.073 h R, in parallel with j h R / k (from memory)
    np.testing.assert_allclose(y, 1.0 / (r + 1j * 0.073 * h * r) + k / (1j * h * r), rtol=1e-12)
    y = load_admittance(np.array([p_pu]), np.array([q_pu]), h, "series_rl")[:, 0]
    # series R-L drawing P, Q at the fundamental: Z = (P + j h Q) / (P^2 + Q^2) (derived)
    np.testing.assert_allclose(y, (p_pu**2 + q_pu**2) / (p_pu + 1j * h * q_pu), rtol=1e-12)
    # and at h = 1 every model draws S = P + jQ at 1 pu voltage: S* = Y* (conj) -> Y = P - jQ
    for model in ("parallel_rl", "series_rl"):
        y1 = load_admittance(np.array([p_pu]), np.array([q_pu]), np.array([1.0]), model)[0, 0]
        np.testing.assert_allclose(y1, p_pu - 1j * q_pu, rtol=1e-12)


@pytest.mark.parametrize("p, q_r, r_c", [(0.0, np.inf, 0.0), (0.07, np.inf, 0.0), (0.0567, 50.0, 0.0),
                                         (0.0, np.inf, 0.002), (0.14, 30.0, 0.001)])
def test_step_admittance_derivative_equals_central_difference(p, q_r, r_c):
    # Reference: derived (dY/dh of the series L-C branch), checked against a central difference
    from resonance.model.admittance import bank_step_admittance, bank_step_admittance_dh

    h = np.linspace(1.0, 50.0, 397)
    b = np.array([0.05, 0.1, 0.4])
    eps = 1e-6 * h
    num = (bank_step_admittance(h + eps, b, p, q_r, r_c) - bank_step_admittance(h - eps, b, p, q_r, r_c)) \
        / (2.0 * eps[:, None])
    ana = bank_step_admittance_dh(h, b, p, q_r, r_c)
    np.testing.assert_allclose(ana, num, rtol=1e-6, atol=1e-9 * np.max(np.abs(ana)))

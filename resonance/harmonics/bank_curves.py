"""Bank-bus and PCC curves of every step on one adaptive grid, from a shared coarse start.

A check studies the same network many times over: the bank as given and every detuned
variant the design stage re-checks.  The bank-off impedances ``Z_kk``, ``Z_pp``, ``Z_kp``,
``Z_pk`` (bank bus k, PCC p) do not depend on the bank, so their solve on a coarse grid (every
``LARGE_START_FACTOR``-th order of the study grid, with ``dZ/dh``) is made once and every
variant starts from it.  Each variant's step curves follow by Sherman-Morrison at no further
solve; the grid is then refined, with the derivative rules of
:func:`resonance.harmonics.grid.adaptive_scan`, only where that variant's own curves (at the
bank bus and at the PCC) need it, and the peaks at the bank bus are polished with the
derivative (:func:`resonance.harmonics.scan.polish_peaks`).  The curves on the uniform study
grid are cubic Hermite samples of the solved values and derivatives.

Pure computation: the caller passes the solver (and keeps any memo of it).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from resonance.harmonics.grid import AdaptiveScan, adaptive_scan, hermite_sample
from resonance.harmonics.scan import LARGE_START_FACTOR, SAMPLE_RTOL, polish_peaks

__all__ = ["BankCurves", "coarse_orders", "pair_step_curves", "bank_pcc_curves"]


@dataclass(frozen=True, eq=False)
class BankCurves:
    """The bank-bus and PCC curves of every step of one bank, on one adaptive grid.

    Attributes
    ----------
    h_peak, z_peak : tuple of ndarray
        Per bank-bus curve (row 0 bank off, row s step s): peak orders [unitless] and ``|Z|``
        there [pu].
    scan : AdaptiveScan
        The adaptive grid with ``2 (N + 1)`` curves and their ``dZ/dh``: rows ``0..N`` the
        bank bus, rows ``N+1..2N+1`` the PCC [pu].
    n_evaluations : int
        Orders this bank's search asked the solver for, grid and peaks, the shared start not
        counted (a caller's table may hold some of them already) [unitless].
    """

    h_peak: tuple
    z_peak: tuple
    scan: AdaptiveScan
    n_evaluations: int = 0

    @property
    def n_curves(self) -> int:
        """Curves per bus, ``N + 1`` [unitless]."""
        return self.scan.z.shape[0] // 2

    def bank_scan(self) -> AdaptiveScan:
        """The bank-bus curves alone on the adaptive grid [pu]."""
        return _first_rows(self.scan, self.n_curves)

    def sample(self, h: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Bank-bus and PCC curves at the orders ``h`` (inside the scanned range).

        Parameters
        ----------
        h : ndarray, shape (q,)
            Orders [unitless].

        Returns
        -------
        (z_bank, z_pcc) : tuple of ndarray, complex, each shape (N + 1, q)
            Row 0 bank off, row s step s [pu].

        Notes
        -----
        Piecewise cubic Hermite interpolation of the solved values and ``dZ/dh``
        (:func:`resonance.harmonics.grid.hermite_sample`); exact at the solved orders, and
        within about ``SAMPLE_RTOL`` of ``|Z|`` elsewhere by the grid's sampling rule.
        """
        sc = self.scan
        z = hermite_sample(sc.h, sc.z, sc.dz, np.atleast_1d(np.asarray(h, float)))
        return z[: self.n_curves], z[self.n_curves:]


def _first_rows(sc: AdaptiveScan, n: int) -> AdaptiveScan:
    """The first ``n`` curves of an adaptive scan (the bank bus's of a pair) [pu]."""
    return AdaptiveScan(h=sc.h, z=sc.z[:n], levels=sc.levels, n_evaluations=sc.n_evaluations, dz=sc.dz[:n])


def coarse_orders(h: np.ndarray, factor: int = LARGE_START_FACTOR) -> np.ndarray:
    """The shared start: every ``factor``-th order of the study grid, the last always kept.

    Parameters
    ----------
    h : ndarray, shape (n_h,)
        Uniform study grid [unitless].
    factor : int
        Thinning factor [unitless].

    Returns
    -------
    ndarray
        Orders of ``h`` [unitless] (the same floats, so solved values there are exact samples).

    References
    ----------
    W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge 2007, sec. 4.7 (adaptive
    subdivision from a coarse start).
    """
    h = np.atleast_1d(np.asarray(h, float))
    if h.size <= 2 or factor <= 1:
        return h
    c = h[:: int(factor)]
    return c if c[-1] == h[-1] else np.append(c, h[-1])


def pair_step_curves(z: np.ndarray, dz: np.ndarray, kc: int, pc: int, ys: np.ndarray,
                     dys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Bank-bus and PCC driving-point impedance of every step, and ``d/dh``, from the bank off.

    Parameters
    ----------
    z, dz : ndarray, complex, shape (n_h, m, m)
        Bank-off ``Z[rows, cols]`` and ``dZ/dh`` over the buses ``cols`` (bank bus and PCC) [pu].
    kc, pc : int
        Positions of the bank bus and of the PCC among them (equal when the bank is at the
        PCC) [unitless].
    ys, dys : ndarray, complex, shape (n_h, N)
        Admittance of steps 1..N and ``dY/dh`` [pu].

    Returns
    -------
    (zc, dzc) : tuple of ndarray, complex, each shape (2 (N + 1), n_h)
        Rows ``0..N``: ``Z_kk`` bank off and with step s; rows ``N+1..2N+1``: ``Z_pp`` likewise
        [pu]; and their derivatives [pu].

    Notes
    -----
    With ``g = y / (1 + y Z_kk)`` (Sherman-Morrison, :func:`resonance.harmonics.scan.step_update`):
    ``Z'_kk = Z_kk - g Z_kk^2`` and ``Z'_pp = Z_pp - g Z_pk Z_kp``;
    ``g' = (y' - y^2 Z_kk') / (1 + y Z_kk)^2``, so
    ``Z'_pp' = Z_pp' - g (Z_pk' Z_kp + Z_pk Z_kp') - g' Z_pk Z_kp`` (and the same with p = k).

    References
    ----------
    J. Sherman, W. J. Morrison, "Adjustment of an inverse matrix corresponding to a change in
    one element of a given matrix", Ann. Math. Statist. 21 (1950).
    """
    zkk, dkk = z[:, kc, kc][:, None], dz[:, kc, kc][:, None]
    den = 1.0 + ys * zkk
    g = ys / den
    dg = (dys - ys**2 * dkk) / den**2
    out, dout = [], []
    for a, b in ((kc, kc), (pc, pc)):
        zab = z[:, a, b][:, None]
        t = z[:, a, kc][:, None] * z[:, kc, b][:, None]
        dt = dz[:, a, kc][:, None] * z[:, kc, b][:, None] + z[:, a, kc][:, None] * dz[:, kc, b][:, None]
        out += [zab.T, (zab - g * t).T]
        dout += [dz[:, a, b][None, :], (dz[:, a, b][:, None] - g * dt - dg * t).T]
    return np.concatenate(out, axis=0), np.concatenate(dout, axis=0)


def bank_pcc_curves(solve, h: np.ndarray, step_admittance, kc: int, pc: int, start: tuple,
                    tol: float = 0.05, min_step: float | None = None, xtol: float = 1e-5) -> BankCurves:
    """Every step's bank-bus and PCC curves on an adaptive grid, the bank-bus peaks polished.

    Parameters
    ----------
    solve : callable
        ``solve(h) -> (Z, dZ/dh)``: bank-off ``Z[rows, cols]`` over the bank bus and PCC, each of
        shape (p, m, m), at orders ``h`` of shape (p,) [unitless -> pu, pu].
    h : ndarray, shape (n_h,)
        Uniform study grid [unitless].
    step_admittance : callable
        ``step_admittance(h) -> Y`` of shape (p, N) [pu] with ``step_admittance.dh(h) -> dY/dh``
        [pu] (e.g. the study's bank model).
    kc, pc : int
        Positions of the bank bus and of the PCC among the solved buses [unitless].
    start : (ndarray, ndarray, ndarray)
        The shared start: orders ``h0`` (e.g. :func:`coarse_orders`), bank-off ``Z`` and
        ``dZ/dh`` there as ``solve`` gives them [unitless, pu, pu].
    tol : float
        Refinement threshold on ``|ln(Z_{i+1}/Z_i)|`` [unitless].
    min_step : float, optional
        Narrowest interval (default: step of ``h`` / 16) [unitless].
    xtol : float
        Final width of each peak's bracket [unitless].

    Returns
    -------
    BankCurves
        Peaks at the bank bus, the adaptive grid with both buses' curves, and
        :meth:`BankCurves.sample` for them on ``h``.

    Notes
    -----
    The same rules as :func:`resonance.harmonics.scan.step_peaks` from a coarse start (the
    derivative rule, ``tol``, ``SAMPLE_RTOL`` for the Hermite samples), applied to the bank-bus
    and PCC curves together, so the sampled PCC curves carry the same error estimate; only the
    peaks of the bank-bus curves are searched.

    References
    ----------
    W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge 2007, sec. 3.3 (cubic Hermite
    interpolation) and sec. 4.7 (adaptive subdivision); R. P. Brent, *Algorithms for
    Minimization without Derivatives*, Prentice-Hall 1973, ch. 4-5 (the peak polish).
    """
    h = np.atleast_1d(np.asarray(h, float))
    if min_step is None:
        min_step = float(np.min(np.diff(h))) / 16.0 if h.size > 1 else 1e-3

    def curves(hh: np.ndarray, z: np.ndarray, dz: np.ndarray):
        ys = np.asarray(step_admittance(hh), complex).reshape(hh.size, -1)
        dys = np.asarray(step_admittance.dh(hh), complex).reshape(ys.shape)
        return pair_step_curves(z, dz, kc, pc, ys, dys)

    def fun(hh, derivative=True):
        hh = np.atleast_1d(np.asarray(hh, float))
        zc, dzc = curves(hh, *solve(hh))
        return (zc, dzc) if derivative else zc

    h0, z0, dz0 = start
    h0 = np.asarray(h0, float)
    zc0, dzc0 = curves(h0, np.asarray(z0, complex), np.asarray(dz0, complex))
    sc = adaptive_scan(fun, h0, z=zc0, dz=dzc0, tol=tol, min_step=min_step, derivative=True,
                       sample_rtol=SAMPLE_RTOL)
    n_bank = zc0.shape[0] // 2

    def bank_fun(hh, derivative=True):
        r = fun(hh, derivative)
        return (r[0][:n_bank], r[1][:n_bank]) if derivative else r[:n_bank]

    hs, zs, n_p = polish_peaks(_first_rows(sc, n_bank), bank_fun, xtol, derivative_search=True)
    return BankCurves(h_peak=hs, z_peak=zs, scan=sc, n_evaluations=int(sc.n_evaluations - h0.size + n_p))

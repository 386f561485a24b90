"""Adaptive frequency grid: fine where the impedance changes fast, coarse elsewhere.

A uniform grid resolves a resonance only if its step is small against the
peak's bandwidth.  Here the grid starts uniform (the study's ``h_step``) and
every interval across which any impedance curve changes by more than a set
amount (in magnitude or in phase) is halved, repeatedly, until every interval
either changes little or is narrower than ``min_step``.  Intervals beside a
sampled local maximum are always halved down to ``min_step``, so each peak is
sampled finely on both sides.  Peaks are then the local maxima on the final
grid, each polished inside its bracket by :func:`zoom_refine`.

All evaluations at one refinement level are made in one vectorised call, so
the expensive part (one factorisation per order) stays batched.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["AdaptiveScan", "adaptive_scan", "peak_brackets", "grid_peaks", "zoom_refine", "hermite_refine",
           "hermite_sample"]


@dataclass(frozen=True, eq=False)
class AdaptiveScan:
    """Result of :func:`adaptive_scan`.

    Attributes
    ----------
    h : ndarray, shape (n_h,)
        Sorted orders of the final grid [unitless].
    z : ndarray, complex, shape (c, n_h)
        The curves at those orders [same unit as the function, e.g. pu].
    levels : int
        Refinement levels used [unitless].
    n_evaluations : int
        Orders evaluated, base grid included [unitless].
    dz : ndarray, complex, shape (c, n_h), optional
        ``dZ/dh`` at those orders, when the scan used derivatives [unit per unitless].
    """

    h: np.ndarray
    z: np.ndarray
    levels: int
    n_evaluations: int
    dz: np.ndarray | None = None


def _interval_change(z: np.ndarray) -> np.ndarray:
    """Largest change of ``ln Z`` (magnitude and phase) across each interval, over all curves.

    Parameters
    ----------
    z : ndarray, complex, shape (c, n_h)
        Curves [any unit].

    Returns
    -------
    ndarray, shape (n_h - 1,)
        ``max_c |ln(Z_{i+1} / Z_i)|`` [unitless] (``ln`` complex, principal branch).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = z[:, 1:] / z[:, :-1]
        d = np.abs(np.log(ratio))
    d = np.where(np.isfinite(d), d, np.inf)
    return d.max(axis=0)


def _local_max_mask(za: np.ndarray) -> np.ndarray:
    """Interior samples that are >= both neighbours and > one of them, per curve, shape (c, n_h)."""
    m = np.zeros(za.shape, bool)
    mid = za[:, 1:-1]
    m[:, 1:-1] = (mid >= za[:, :-2]) & (mid >= za[:, 2:]) & ((mid > za[:, :-2]) | (mid > za[:, 2:]))
    return m


def _hermite_turns(f0, f1, g0, g1, width) -> np.ndarray:
    """True where the cubic Hermite interpolant of ``f`` has a stationary point inside the interval.

    Parameters
    ----------
    f0, f1 : ndarray
        Values at the interval ends [any unit].
    g0, g1 : ndarray
        Derivatives at the ends [any unit per unitless].
    width : ndarray
        Interval widths [unitless].

    Returns
    -------
    ndarray of bool

    Notes
    -----
    With ``t`` in [0, 1], ``m0 = g0 w``, ``m1 = g1 w``, ``d = f1 - f0``:
    ``p'(t) = A t^2 + B t + m0``, ``A = 3 (m0 + m1) - 6 d``, ``B = 6 d - 4 m0 - 2 m1``.
    """
    m0, m1, d = g0 * width, g1 * width, f1 - f0
    a = 3.0 * (m0 + m1) - 6.0 * d
    b = 6.0 * d - 4.0 * m0 - 2.0 * m1
    c = m0
    disc = b * b - 4.0 * a * c
    ok = disc >= 0
    sq = np.sqrt(np.where(ok, disc, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        small = np.abs(a) < 1e-14 * (np.abs(b) + np.abs(c) + 1e-300)
        t_lin = np.where(small, -c / np.where(b != 0, b, 1.0), np.nan)
        t1 = np.where(small, t_lin, (-b - sq) / (2 * a))
        t2 = np.where(small, t_lin, (-b + sq) / (2 * a))
    inside = lambda t: np.isfinite(t) & (t > 0.0) & (t < 1.0)  # noqa: E731
    return ok & (inside(t1) | inside(t2))


def _dlogabs(z: np.ndarray, dz: np.ndarray) -> np.ndarray:
    """``d ln|Z| / dh = Re(Z' / Z)`` [1/unitless]."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.real(dz / z)


def adaptive_scan(fun, h: np.ndarray, z: np.ndarray | None = None, tol: float = 0.05,
                  min_step: float = 0.01 / 16, max_levels: int = 12, derivative: bool = False,
                  dz: np.ndarray | None = None, sample_rtol: float | None = None) -> AdaptiveScan:
    """Refine a frequency grid where any curve changes fast.

    Parameters
    ----------
    fun : callable
        ``fun(h) -> Z`` with ``h`` of shape (p,) and ``Z`` complex of shape (c, p)
        (vectorised over orders); with ``derivative=True`` it returns
        ``(Z, dZ/dh)`` [unitless -> any unit].
    h : ndarray, shape (n_h,)
        Sorted base grid [unitless].
    z, dz : ndarray, complex, shape (c, n_h), optional
        ``fun(h)`` when already known.
    tol : float
        Largest accepted change of ``ln Z`` across one interval (0.05: about
        5 % in magnitude or 2.9 degrees in phase) [unitless].
    min_step : float
        Narrowest interval [unitless].
    max_levels : int
        Most halvings [unitless].
    derivative : bool
        ``fun`` also returns ``dZ/dh``; then intervals whose cubic Hermite
        interpolant of ``ln|Z|`` turns inside are halved too, and peaks are
        bracketed by a sign change of ``d|Z|/dh`` [unitless].
    sample_rtol : float, optional
        With derivatives: also halve intervals where the cubic Hermite interpolants of ``Z``
        and of ``ln Z`` disagree at the midpoint by more than this fraction of ``|Z|``, so that
        :func:`hermite_sample` is that accurate between the samples [unitless].

    Returns
    -------
    AdaptiveScan
        Final grid and curves (and derivatives when asked for).

    Notes
    -----
    An interval ``[h_i, h_{i+1}]`` is halved while its width exceeds
    ``min_step`` and

    * ``max_c |ln(Z_c(h_{i+1}) / Z_c(h_i))| > tol`` (fast change), or
    * without derivatives: one of its ends is a sampled local maximum of some ``|Z_c|``;
    * with derivatives: ``d|Z_c|/dh`` has the same sign at both ends but the
      cubic Hermite interpolant of ``ln|Z_c|`` on the interval has a stationary
      point inside (a hidden maximum-minimum pair).

    On the final grid ``|Z|`` and its phase change by at most ``tol`` between
    neighbouring samples except in intervals already at ``min_step``.  Near a
    resonance of quality factor ``Q`` at order ``h_r`` the impedance changes by
    about ``2 Q dh / h_r`` over ``dh`` (single-pole model
    ``Z ~ R / (1 + j 2 Q (h - h_r) / h_r)``), so intervals there are refined to
    ``dh ~ tol h_r / (2 Q)`` or ``min_step``.

    References
    ----------
    W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge 2007, sec. 4.7
    (adaptive subdivision) and sec. 3.3 (cubic Hermite interpolation); the
    single-pole resonance model is the standard parallel RLC response (e.g.
    J. Arrillaga, N. R. Watson, *Power System Harmonics*, 2nd ed., Wiley 2003, ch. 4).
    """
    h = np.asarray(h, float)
    if z is None:
        res = fun(h)
        z, dz = (res if derivative else (res, None))
    z = np.atleast_2d(np.asarray(z, complex))
    dz = None if dz is None else np.atleast_2d(np.asarray(dz, complex))
    n_eval = h.size
    if derivative:
        return _adaptive_scan_dh(fun, h, z, dz, tol, min_step, max_levels, sample_rtol)
    level = 0
    for level in range(1, max_levels + 1):
        width = np.diff(h)
        split = _interval_change(z) > tol
        if derivative:
            la = np.log(np.maximum(np.abs(z), 1e-300))
            g = _dlogabs(z, dz)
            same = np.sign(g[:, :-1]) == np.sign(g[:, 1:])
            turns = same & _hermite_turns(la[:, :-1], la[:, 1:], g[:, :-1], g[:, 1:], width[None, :])
            split |= turns.any(axis=0)
        else:
            lm = _local_max_mask(np.abs(z)).any(axis=0)
            split |= lm[:-1] | lm[1:]
        split &= width > min_step * (1.0 + 1e-9)
        if not split.any():
            level -= 1
            break
        h_new = 0.5 * (h[:-1][split] + h[1:][split])
        res = fun(h_new)
        z_new, dz_new = (res if derivative else (res, None))
        z_new = np.asarray(z_new, complex).reshape(z.shape[0], h_new.size)
        n_eval += h_new.size
        order = np.argsort(np.concatenate([h, h_new]), kind="stable")
        h = np.concatenate([h, h_new])[order]
        z = np.concatenate([z, z_new], axis=1)[:, order]
        if derivative:
            dz = np.concatenate([dz, np.asarray(dz_new, complex).reshape(z_new.shape)], axis=1)[:, order]
    return AdaptiveScan(h=h, z=z, levels=level, n_evaluations=n_eval, dz=dz)


def _sample_terms(z: np.ndarray, dz: np.ndarray, j) -> tuple:
    """Per-sample ``ln|Z|``, phase, ``d ln|Z|/dh`` and a usable-sample mask at samples ``j``."""
    zz = z[:, j]
    mag = np.abs(zz)
    ok = np.isfinite(mag) & (mag > 0)
    la = np.log(np.maximum(mag, 1e-300))
    return la, np.angle(zz), _dlogabs(zz, dz[:, j]), ok


def _split_dh(h: np.ndarray, z: np.ndarray, dz: np.ndarray, i: np.ndarray, tol: float,
              min_step: float, sample_rtol: float | None = None) -> np.ndarray:
    """Which of the intervals ``[h_i, h_{i+1}]`` (indices ``i``) the derivative rule halves.

    ``|ln(Z_b / Z_a)|`` is formed from per-sample logarithms and phases,
    ``sqrt((ln|Z_b| - ln|Z_a|)^2 + wrap(arg Z_b - arg Z_a)^2)`` with the phase difference
    wrapped to (-pi, pi] (the principal logarithm of the ratio), so each sample is
    transformed once although it ends two intervals.  With ``sample_rtol``, an interval is
    also halved where the cubic Hermite interpolants of ``Z`` and of ``ln Z`` disagree at its
    midpoint by more than ``sample_rtol |Z|`` (two interpolants of the same data whose
    difference estimates the error of :func:`hermite_sample` there).
    """
    if i.size == h.size - 1:  # every interval: transform each sample once
        la_, ph_, g_, ok_ = _sample_terms(z, dz, slice(None))
        (la, ph, ga, oka), (lb, pb, gb, okb) = ((x[:, :-1] for x in (la_, ph_, g_, ok_)),
                                                (x[:, 1:] for x in (la_, ph_, g_, ok_)))
    else:
        la, ph, ga, oka = _sample_terms(z, dz, i)
        lb, pb, gb, okb = _sample_terms(z, dz, i + 1)
    width = h[i + 1] - h[i]
    dph = np.mod(pb - ph + np.pi, 2.0 * np.pi) - np.pi
    dph = np.where(dph == -np.pi, np.pi, dph)
    d = np.hypot(lb - la, dph)
    d = np.where(oka & okb & np.isfinite(d), d, np.inf)
    split = d.max(axis=0) > tol
    same = np.sign(ga) == np.sign(gb)
    split |= (same & _hermite_turns(la, lb, ga, gb, width[None, :])).any(axis=0)
    if sample_rtol is not None:
        split |= _sample_disagree(z[:, i], z[:, i + 1], dz[:, i], dz[:, i + 1], dph, lb - la, width,
                                  sample_rtol)
    return split & (width > min_step * (1.0 + 1e-9))


def _sample_disagree(za, zb, dza, dzb, dph, dla, width, rtol) -> np.ndarray:
    """Intervals where the Hermite interpolants of ``Z`` and ``ln Z`` differ at the midpoint by > ``rtol``.

    At ``t = 1/2``: ``H00 = H01 = 1/2``, ``H10 = -H11 = 1/8``;
    ``Z_lin = (Z_a + Z_b)/2 + w (Z'_a - Z'_b)/8`` and
    ``Z_log = Z_a exp(L/2 + w (Z'_a/Z_a - Z'_b/Z_b)/8)`` with ``L = ln(Z_b/Z_a)`` [unitless].
    """
    with np.errstate(all="ignore"):
        z_lin = 0.5 * (za + zb) + 0.125 * width * (dza - dzb)
        z_log = za * np.exp(0.5 * (dla + 1j * dph) + 0.125 * width * (dza / za - dzb / zb))
        bad = np.abs(z_lin - z_log) > rtol * np.abs(z_log)
    return np.where(np.isfinite(z_log), bad, True).any(axis=0)


def _adaptive_scan_dh(fun, h, z, dz, tol, min_step, max_levels, sample_rtol=None) -> AdaptiveScan:
    """:func:`adaptive_scan` with derivatives, testing only the intervals made at the last level.

    Each rule looks at one interval's two end samples only, so an interval that was not halved
    at one level is not halved at any later one; the final grid equals testing every interval
    at every level.
    """
    n_eval = h.size
    active = np.arange(h.size - 1)
    level = 0
    for level in range(1, max_levels + 1):
        split = active[_split_dh(h, z, dz, active, tol, min_step, sample_rtol)] if active.size else active
        if not split.size:
            level -= 1
            break
        h_new = 0.5 * (h[split] + h[split + 1])
        z_new, dz_new = fun(h_new)
        z_new = np.asarray(z_new, complex).reshape(z.shape[0], h_new.size)
        dz_new = np.asarray(dz_new, complex).reshape(z_new.shape)
        n_eval += h_new.size
        h = np.insert(h, split + 1, h_new)
        z = np.insert(z, split + 1, z_new, axis=1)
        dz = np.insert(dz, split + 1, dz_new, axis=1)
        left = split + np.arange(split.size)  # the left halves, at their new positions
        active = np.sort(np.concatenate([left, left + 1]))
    return AdaptiveScan(h=h, z=z, levels=level, n_evaluations=n_eval, dz=dz)


def peak_brackets(scan: AdaptiveScan) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Brackets that each hold one local maximum of ``|Z|``, for every curve.

    Parameters
    ----------
    scan : AdaptiveScan
        Result of :func:`adaptive_scan`.

    Returns
    -------
    (curve, lo, hi) : tuple of ndarray
        Curve index [unitless] and bracket ends [unitless], sorted by curve then order.

    Notes
    -----
    With derivatives: every interval where ``d|Z|/dh`` goes from positive to
    non-positive (a maximum lies inside, by continuity).  Every sampled local
    maximum ``h_i`` not already inside such a bracket adds ``[h_{i-1}, h_{i+1}]``.
    """
    za = np.abs(scan.z)
    h = scan.h
    curves, los, his = [], [], []
    lm = _local_max_mask(za)
    for c in range(za.shape[0]):
        lo_c, hi_c = [], []
        covered = np.zeros(h.size, bool)
        if scan.dz is not None:
            g = _dlogabs(scan.z[c], scan.dz[c])
            i = np.nonzero((g[:-1] > 0) & (g[1:] <= 0))[0]
            lo_c += list(h[i])
            hi_c += list(h[i + 1])
            covered[i] = covered[i + 1] = True
        j = np.nonzero(lm[c] & ~covered)[0]
        lo_c += list(h[j - 1])
        hi_c += list(h[j + 1])
        o = np.argsort(lo_c)
        curves += [c] * len(lo_c)
        los += list(np.asarray(lo_c, float)[o])
        his += list(np.asarray(hi_c, float)[o])
    return np.asarray(curves, int), np.asarray(los, float), np.asarray(his, float)


def grid_peaks(h: np.ndarray, z_abs: np.ndarray, min_rel_prominence: float = 0.0) -> list[np.ndarray]:
    """Local maxima of each curve on a (possibly non-uniform) grid.

    Parameters
    ----------
    h : ndarray, shape (n_h,)
        Sorted orders [unitless].
    z_abs : ndarray, shape (c, n_h) or (n_h,)
        Magnitudes [any unit].
    min_rel_prominence : float
        Keep a maximum only if it stands this fraction above the higher of the
        two minima that bound it [unitless]; 0 keeps every strict local maximum.

    Returns
    -------
    list of ndarray of int
        Grid indices of the peaks of each curve.
    """
    from scipy.signal import find_peaks as _fp  # noqa: PLC0415

    za = np.atleast_2d(np.asarray(z_abs, float))
    out = []
    for row in np.log(np.maximum(za, 1e-300)):
        if min_rel_prominence > 0:
            idx, _ = _fp(row, prominence=np.log1p(min_rel_prominence))
        else:
            idx, _ = _fp(row)
        out.append(idx.astype(int))
    return out


def zoom_refine(fun, lo: np.ndarray, hi: np.ndarray, xtol: float = 1e-5,
                points: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """Maximise unimodal functions on brackets by repeated uniform sampling, all brackets at once.

    Parameters
    ----------
    fun : callable
        ``fun(x) -> f`` with ``x`` of shape (p, m): ``m`` orders inside each of
        the ``p`` brackets; returns ``f`` of the same shape [unitless -> any unit].
    lo, hi : ndarray, shape (p,)
        Brackets, each holding one local maximum [unitless].
    xtol : float
        Final bracket width [unitless].
    points : int
        Interior samples per bracket and pass [unitless].

    Returns
    -------
    (h_max, f_max) : tuple of ndarray
        Location [unitless] and value of each maximum.

    Notes
    -----
    Each pass samples ``points`` equally spaced interior orders
    ``a + k (b - a) / (points + 1)``, ``k = 1..points``; for a unimodal function
    the maximum lies between the neighbours of the largest sample, so the
    bracket shrinks by ``2 / (points + 1)`` per pass.  Fewer, larger batched
    evaluations than golden-section search (which shrinks by 0.618 per
    evaluation) for the same final width.

    References
    ----------
    J. Kiefer, "Sequential minimax search for a maximum", Proc. AMS 4 (1953)
    (search for the maximum of a unimodal function); Press et al.,
    *Numerical Recipes*, 3rd ed., sec. 10.1 (bracketing a maximum by three points).
    """
    a = np.asarray(lo, float).copy()
    b = np.asarray(hi, float).copy()
    if a.size == 0:
        return a, a.copy()
    k = np.arange(1, points + 1) / (points + 1.0)
    rows = np.arange(a.size)
    best_h = 0.5 * (a + b)
    best_f = np.full(a.size, -np.inf)
    while True:
        x = a[:, None] + (b - a)[:, None] * k[None, :]
        fx = np.asarray(fun(x), float).reshape(x.shape)
        j = np.argmax(fx, axis=1)
        xj, fj = x[rows, j], fx[rows, j]
        better = fj > best_f
        best_h = np.where(better, xj, best_h)
        best_f = np.where(better, fj, best_f)
        step = (b - a) / (points + 1.0)
        a, b = np.maximum(best_h - step, a), np.minimum(best_h + step, b)
        if np.max(b - a) <= xtol:
            break
    return best_h, best_f


def _hermite_argmax(a, b, fa, fb, ga, gb) -> np.ndarray:
    """Order of the maximum of the cubic Hermite interpolant of ``f`` on ``[a, b]`` (midpoint if none).

    ``ga > 0 >= gb`` (a maximum inside): the first root of ``p'(t)`` (as in
    :func:`_hermite_turns`) where ``p'`` falls from positive to zero, mapped back to ``h``
    [unitless]; the secant root of ``g`` where the cubic gives none inside.
    """
    w = b - a
    m0, m1, d = ga * w, gb * w, fb - fa
    qa = 3.0 * (m0 + m1) - 6.0 * d
    qb = 6.0 * d - 4.0 * m0 - 2.0 * m1
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        disc = np.sqrt(np.maximum(qb * qb - 4.0 * qa * m0, 0.0))
        t_quad = np.where(qa < 0, (-qb - disc) / (2.0 * qa), (-qb + disc) / (2.0 * qa))
        t_quad = np.where(np.abs(qa) > 1e-12 * (np.abs(qb) + np.abs(m0)), t_quad, -m0 / qb)
        t_lin = m0 / (m0 - m1)
    t = np.where(np.isfinite(t_quad) & (t_quad > 0) & (t_quad < 1), t_quad,
                 np.where(np.isfinite(t_lin) & (t_lin > 0) & (t_lin < 1), t_lin, 0.5))
    return a + t * w


#: a bracket wider than this many ``xtol`` takes one solve in its first pass (at the interpolant's
#: maximum), every other pass the pair that can close it (hermite_refine)
_SINGLE_WIDTHS = 1000.0


def hermite_refine(fun, lo, hi, f_lo, f_hi, g_lo, g_hi, xtol: float = 1e-5,
                   max_passes: int = 60) -> tuple[np.ndarray, np.ndarray, int]:
    """Maximise smooth functions on brackets with their derivatives, all brackets at once.

    Parameters
    ----------
    fun : callable
        ``fun(x, j) -> (f, g)``: value ``f`` (e.g. ``ln|Z|``) and derivative ``g = df/dh`` of
        bracket ``j[i]``'s own curve at order ``x[i]`` (1-d arrays of equal length)
        [unitless -> unitless, 1/unitless].
    lo, hi : ndarray, shape (p,)
        Brackets with ``g(lo) > 0 >= g(hi)``: a maximum inside each [unitless].
    f_lo, f_hi, g_lo, g_hi : ndarray, shape (p,)
        ``f`` and ``g`` at the bracket ends (known from the scan) [unitless, 1/unitless].
    xtol : float
        Final bracket width [unitless].
    max_passes : int
        Most passes [unitless] (the bisection safeguard needs at most about
        ``3 log2(width / xtol)``).

    Returns
    -------
    (h_max, f_max, n_eval) : tuple
        Per bracket: the solved end of the final bracket with the larger ``f`` [unitless],
        its ``f`` [unitless]; and the evaluations made [unitless].

    Notes
    -----
    Each pass takes the maximum ``x*`` of the cubic Hermite interpolant of ``f`` on the
    bracket; in its first pass a bracket wider than 1000 ``xtol`` is cut at ``x*`` alone (one
    solve, a new end near the maximum), in every other pass at the pair ``x* -+ xtol/2``.
    The signs of ``g`` at the new points and at the ends keep the first sub-interval where
    ``g`` turns from positive to non-positive.  When the interpolant is accurate to ``xtol/2``
    a pair closes the bracket to ``xtol``; otherwise it shrinks to one side with a new end near
    the maximum.  A bracket that two passes did not halve is bisected (the safeguard of Brent's
    method).  Every final bracket holds a sign change of ``g`` across at most ``xtol``, so a
    maximum lies within ``xtol`` of the returned order.

    References
    ----------
    R. P. Brent, *Algorithms for Minimization without Derivatives*, Prentice-Hall 1973,
    ch. 4-5 (safeguarded interpolation with bisection); W. C. Davidon, "Variable metric
    method for minimization", AEC Report ANL-5990, 1959 (cubic interpolation from values and
    derivatives at two points); Press et al., *Numerical Recipes*, 3rd ed., sec. 10.3.
    """
    a, b = np.array(lo, float), np.array(hi, float)
    fa, fb, ga, gb = (np.array(x, float) for x in (f_lo, f_hi, g_lo, g_hi))
    n_eval = 0
    w_before = np.full(a.size, np.inf)  # bracket width one pass back
    w_before2 = np.full(a.size, np.inf)  # and two passes back
    for _ in range(max_passes):
        todo = np.nonzero(b - a > xtol * (1.0 + 1e-9))[0]
        if not todo.size:
            break
        w0 = b[todo] - a[todo]
        x = _hermite_argmax(a[todo], b[todo], fa[todo], fb[todo], ga[todo], gb[todo])
        x = np.where(w0 > 0.5 * w_before2[todo], 0.5 * (a[todo] + b[todo]), x)  # two passes, not halved
        single = (w0 > _SINGLE_WIDTHS * xtol) & ~np.isfinite(w_before[todo])  # a wide bracket's first pass
        half = np.where(single, 0.0, 0.5 * np.minimum(xtol, 0.5 * w0))
        x = np.clip(x, a[todo] + half, b[todo] - half)
        pair = np.nonzero(~single)[0]
        xs = np.concatenate([x - half, x[pair] + half[pair]])
        fs, gs = fun(xs, np.concatenate([todo, todo[pair]]))
        n_eval += xs.size
        m = todo.size
        # the sorted orders a <= x- <= x+ <= b (x- = x+ = x on a single-point pass)
        f2, g2 = fs[:m].copy(), gs[:m].copy()
        f2[pair], g2[pair] = fs[m:], gs[m:]
        x2 = x.copy()
        x2[pair] = x[pair] + half[pair]
        pts = np.stack([a[todo], x - half, x2, b[todo]], axis=1)
        fv = np.stack([fa[todo], fs[:m], f2, fb[todo]], axis=1)
        gv = np.stack([ga[todo], gs[:m], g2, gb[todo]], axis=1)
        turn = (gv[:, :-1] > 0) & (gv[:, 1:] <= 0)  # one exists: g > 0 at pts[0], <= 0 at pts[3]
        k = np.argmax(turn, axis=1)
        r = np.arange(m)
        a[todo], b[todo] = pts[r, k], pts[r, k + 1]
        fa[todo], fb[todo] = fv[r, k], fv[r, k + 1]
        ga[todo], gb[todo] = gv[r, k], gv[r, k + 1]
        w_before2[todo], w_before[todo] = w_before[todo], w0
    pick_b = fb > fa
    return np.where(pick_b, b, a), np.where(pick_b, fb, fa), n_eval


def hermite_sample(h: np.ndarray, z: np.ndarray, dz: np.ndarray, h_out: np.ndarray) -> np.ndarray:
    """Curves at other orders by piecewise cubic Hermite interpolation of values and derivatives.

    Parameters
    ----------
    h : ndarray, shape (n_h,)
        Sorted orders where the curves were solved [unitless].
    z, dz : ndarray, complex, shape (c, n_h)
        Values there [any unit, e.g. pu] and ``dZ/dh`` [same unit per unitless].
    h_out : ndarray, shape (q,)
        Orders inside ``[h[0], h[-1]]`` [unitless].

    Returns
    -------
    ndarray, complex, shape (c, q)
        Interpolated curves [same unit as ``z``]; the solved values at the solved orders.

    Notes
    -----
    On ``[h_i, h_{i+1}]`` of width ``w``, ``t = (h - h_i) / w``:
    ``Z = H00 Z_i + H10 w dZ_i + H01 Z_{i+1} + H11 w dZ_{i+1}`` with ``H00 = 2t^3 - 3t^2 + 1``,
    ``H10 = t^3 - 2t^2 + t``, ``H01 = 3t^2 - 2t^3``, ``H11 = t^3 - t^2``.  The error is at
    most ``w^4 max|d^4Z/dh^4| / 384``.  For the single-pole resonance ``Z = R / (1 + j x)``,
    ``x = 2 Q (h - h_r) / h_r``: ``|d^4Z/dx^4| <= 24 R`` and the grid's rule
    ``|ln(Z_{i+1}/Z_i)| <= tol`` keeps ``dx`` at most about ``tol``, so the error is below
    ``tol^4 R / 16`` (4e-7 of the peak at ``tol = 0.05``); near a minimum of ``|Z|`` the
    relative error is larger, which the grid's ``sample_rtol`` rule
    (:func:`adaptive_scan`) bounds by refining where two interpolants disagree.

    References
    ----------
    Press et al., *Numerical Recipes*, 3rd ed., sec. 3.3; C. de Boor, *A Practical Guide to
    Splines*, rev. ed., Springer 2001, ch. II (error of cubic Hermite interpolation); computed by
    ``scipy.interpolate.CubicHermiteSpline``.
    """
    from scipy.interpolate import CubicHermiteSpline  # noqa: PLC0415 - scipy's own, complex values kept

    return CubicHermiteSpline(h, z, dz, axis=1)(np.asarray(h_out, float))

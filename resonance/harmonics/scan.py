"""Frequency scans: impedance columns of Y(h)^-1 and every bank step by rank-one update.

One solve of the step-free network per harmonic order serves every step of a
bank: a step changes only its bus's diagonal by ``Y_s(h)``, so (Sherman-Morrison)

    Z'_ij = Z_ij - Z_ik Y_s Z_kj / (1 + Y_s Z_kk).

Peaks of the driving-point impedance are found on the grid and refined by
re-evaluating the impedance on successively finer local grids.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from resonance.model.admittance import YPattern
from resonance.harmonics.engine import SparseEngine, pool_session, sparse_columns
from resonance.harmonics.grid import (AdaptiveScan, adaptive_scan, hermite_refine, hermite_sample, peak_brackets,
                                      zoom_refine)
from resonance.memo import remember, scope
from resonance.model.network import NetworkArrays

__all__ = [
    "ModelSettings",
    "harmonic_grid",
    "impedance_columns",
    "step_update",
    "find_peaks",
    "DENSE_MAX_BUSES",
    "impedance_columns_dh",
    "central_dh",
    "sparse_engine",
    "driving_point_steps",
    "step_peaks",
    "StepPeaks",
    "LARGE_START_FACTOR",
    "SAMPLE_RTOL",
    "polish_peaks",
]

#: networks up to this many buses use batched dense solves, larger ones sparse LU
#: (crossover measured on this 2-core machine: docs/performance.md)
DENSE_MAX_BUSES = 100

#: on networks above DENSE_MAX_BUSES the adaptive peak search starts on every 16th order of
#: the study grid (0.16 at h_step 0.01) and lets the derivative rule refine (docs/performance.md)
LARGE_START_FACTOR = 16

#: from a coarse start the grid is also refined where two interpolants of the samples disagree
#: by more than this fraction of |Z| (an error estimate for StepPeaks.sample; a feature that
#: leaves no trace at the samples is beyond it: measured 8e-4 at most, tests/test_large_adaptive.py)
SAMPLE_RTOL = 1e-4


@dataclass(frozen=True)
class ModelSettings:
    """Element-model settings for Y(h).

    Attributes
    ----------
    r_model : str
        Series-resistance frequency model (see :mod:`resonance.model.admittance`).
    load_model : str
        Linear-load damping model.
    """

    r_model: str = "constant"
    load_model: str = "parallel_rl"


def harmonic_grid(h_max: float, h_step: float, h_min: float = 1.0) -> np.ndarray:
    """Uniform grid of harmonic orders from ``h_min`` to ``h_max`` inclusive.

    Parameters
    ----------
    h_max, h_min : float
        Range [unitless].
    h_step : float
        Resolution [unitless].

    Returns
    -------
    ndarray
        Orders [unitless].
    """
    n = int(round((h_max - h_min) / h_step)) + 1
    return h_min + h_step * np.arange(n)


def _nudge(h: np.ndarray) -> np.ndarray:
    """Shift orders by a relative 1e-9 (used where a lossless network is exactly singular)."""
    return h * (1.0 + 1e-9)


def sparse_engine(arr: NetworkArrays, settings: ModelSettings = ModelSettings(),
                  pattern: YPattern | None = None) -> SparseEngine:
    """The sparse engine of a network (pattern, ordering, value map), built once per check
    (memoised in the running check's memo, :mod:`resonance.memo`).

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu].
    settings : ModelSettings
        Element models.
    pattern : YPattern, optional
        Precomputed pattern of ``arr``.

    Returns
    -------
    SparseEngine
        Engine for ``arr`` and ``settings`` [see :class:`resonance.harmonics.engine.SparseEngine`].
    """
    return remember("sparse_engine", (arr, settings),
                    lambda: SparseEngine.build(arr, settings.r_model, settings.load_model, pattern))


def impedance_columns(
    arr: NetworkArrays,
    h: np.ndarray,
    cols: np.ndarray,
    settings: ModelSettings = ModelSettings(),
    diag_extra: np.ndarray | None = None,
    rows: np.ndarray | None = None,
    pattern: YPattern | None = None,
    *,
    method: str = "auto",
    workers: int | None = None,
) -> np.ndarray:
    """Columns of the bus impedance matrix ``Z(h) = Y(h)^-1``.

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu].
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    cols : ndarray of int, shape (m,)
        Buses whose columns are wanted (current injected there) [unitless].
    settings : ModelSettings
        Element models.
    diag_extra : ndarray, shape (n_h, n), optional
        Further admittance to ground per bus (banks in service) [pu].
    rows : ndarray of int, optional
        Keep only these rows (all when None) [unitless].
    pattern : YPattern, optional
        Precomputed sparsity pattern.
    method : {"auto", "dense", "sparse"}
        Solver; "auto" picks dense for ``n <= DENSE_MAX_BUSES`` [unitless].
    workers : int, optional
        Processes for the sparse path (default: the CPUs available) [unitless].

    Returns
    -------
    ndarray, shape (n_h, len(rows) or n, m)
        ``Z[:, rows, cols]`` [pu].

    Notes
    -----
    ``Y(h) Z[:, cols] = E[:, cols]`` (unit injections).  Dense batched solves
    (``numpy.linalg.solve`` over a stack of orders) for small networks; for
    larger ones one sparse LU per order with the pattern, the fill-reducing
    ordering and the value map computed once (:mod:`resonance.harmonics.engine`).
    """
    return _columns(arr, h, cols, settings, diag_extra, rows, pattern, method, workers, False, None)


def impedance_columns_dh(
    arr: NetworkArrays,
    h: np.ndarray,
    cols: np.ndarray,
    settings: ModelSettings = ModelSettings(),
    diag_extra: np.ndarray | None = None,
    rows: np.ndarray | None = None,
    pattern: YPattern | None = None,
    *,
    diag_extra_dh: np.ndarray | None = None,
    method: str = "auto",
    workers: int | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Impedance columns and their derivative with respect to the harmonic order.

    Parameters
    ----------
    arr, h, cols, settings, diag_extra, rows, pattern, method, workers
        As for :func:`impedance_columns`.
    diag_extra_dh : ndarray, shape (n_h, n), optional
        ``d(diag_extra)/dh`` [pu].

    Returns
    -------
    (z, dz) : tuple of ndarray, each shape (n_h, len(rows) or n, m)
        ``Z[:, rows, cols]`` [pu] and ``dZ/dh`` [pu].

    Notes
    -----
    ``dZ/dh = -Z (dY/dh) Z`` (derivative of a matrix inverse); the rows come
    from the transposed system ``Y^T W = E_rows``, so the same factorisation
    serves both.

    References
    ----------
    G. H. Golub, C. F. Van Loan, *Matrix Computations*, 4th ed., Johns Hopkins
    2013, sec. 2.6 (perturbation of a matrix inverse).
    """
    return _columns(arr, h, cols, settings, diag_extra, rows, pattern, method, workers, True, diag_extra_dh)


def _columns(arr, h, cols, settings, diag_extra, rows, pattern, method, workers, derivative, diag_extra_dh):
    h = np.atleast_1d(np.asarray(h, float))
    cols = np.asarray(cols, int)
    n = arr.n_bus
    rsel = np.arange(n) if rows is None else np.asarray(rows, int)
    if method not in ("auto", "dense", "sparse"):
        raise ValueError(f"unknown method {method!r}")
    eng = sparse_engine(arr, settings, pattern)
    if method == "dense" or (method == "auto" and n <= DENSE_MAX_BUSES):
        z, dz = _dense_columns(eng, h, cols, diag_extra, rsel, derivative, diag_extra_dh)
        return (z, dz) if derivative else z
    return sparse_columns(eng, h, cols, rsel, diag_extra, workers=workers,
                          derivative=derivative, diag_extra_dh=diag_extra_dh)


def _dense_columns(eng: SparseEngine, h, cols, diag_extra, rsel, derivative, diag_extra_dh):
    """Batched dense solves over chunks of orders (about 2e7 matrix entries per chunk).

    The matrix is the engine's ordered ``P^T Y P`` scattered into a dense stack.
    """
    n = eng.n
    out = np.empty((h.size, rsel.size, cols.size), complex)
    dout = np.empty_like(out) if derivative else None
    chunk = max(1, int(2e7 // max(n * n, 1)))
    col_of = np.repeat(np.arange(n), np.diff(eng.indptr))
    flat = eng.indices.astype(np.int64) * n + col_of  # row-major position in the ordered matrix
    rhs = np.zeros((n, cols.size), complex)
    rhs[eng.iperm[cols], np.arange(cols.size)] = 1.0
    prow = eng.iperm[rsel]
    e_rows = np.zeros((n, rsel.size), complex)
    e_rows[prow, np.arange(rsel.size)] = 1.0

    def dense(data):
        y = np.zeros((data.shape[0], n * n), complex)
        y[:, flat] = data
        return y.reshape(data.shape[0], n, n)

    for a in range(0, h.size, chunk):
        hs = h[a:a + chunk]
        de = None if diag_extra is None else diag_extra[a:a + chunk]
        y = dense(eng.values(hs, de))
        try:
            x = np.linalg.solve(y, np.broadcast_to(rhs, (hs.size, n, cols.size)))
        except np.linalg.LinAlgError:
            # a lossless network is exactly singular at its own resonances
            y = dense(eng.values(_nudge(hs), de))
            x = np.linalg.solve(y, np.broadcast_to(rhs, (hs.size, n, cols.size)))
        out[a:a + chunk] = x[:, prow, :]
        if derivative:
            w = np.linalg.solve(np.swapaxes(y, 1, 2), np.broadcast_to(e_rows, (hs.size, n, rsel.size)))
            dy = dense(eng.values_dh(hs, None if diag_extra_dh is None else diag_extra_dh[a:a + chunk]))
            dout[a:a + chunk] = -(np.swapaxes(w, 1, 2) @ (dy @ x))
    return out, dout


def step_update(z_cols: np.ndarray, k_row: int, k_col: int, y_s: np.ndarray) -> np.ndarray:
    """Impedance columns after adding shunt admittance ``y_s`` at one bus (Sherman-Morrison).

    Parameters
    ----------
    z_cols : ndarray, shape (n_h, r, m)
        Step-free impedance rows x columns; must contain row and column of bus k [pu].
    k_row, k_col : int
        Position of bus k among the rows and among the columns [unitless].
    y_s : ndarray, shape (n_h,) or (n_h, s)
        Admittance added at bus k; with a trailing step axis, all steps at once [pu].

    Returns
    -------
    ndarray, shape (n_h, r, m) or (n_h, s, r, m)
        Updated impedances [pu].

    Notes
    -----
    ``Z'_ij = Z_ij - Z_ik y Z_kj / (1 + y Z_kk)`` (exact for a rank-one change).

    References
    ----------
    J. Sherman, W. J. Morrison, "Adjustment of an inverse matrix corresponding
    to a change in one element of a given matrix", Ann. Math. Statist. 21 (1950).
    """
    zik = z_cols[:, :, k_col]
    zkj = z_cols[:, k_row, :]
    zkk = z_cols[:, k_row, k_col]
    if y_s.ndim == 1:
        g = y_s / (1.0 + y_s * zkk)
        return z_cols - zik[:, :, None] * (g[:, None, None] * zkj[:, None, :])
    g = y_s / (1.0 + y_s * zkk[:, None])  # (n_h, s)
    return z_cols[:, None, :, :] - g[:, :, None, None] * zik[:, None, :, None] * zkj[:, None, None, :]


def find_peaks(h: np.ndarray, z_abs: np.ndarray, min_rel_prominence: float = 0.02) -> list[np.ndarray]:
    """Grid indices of local maxima of ``|Z|`` along the last axis.

    Parameters
    ----------
    h : ndarray, shape (n_h,)
        Orders [unitless].
    z_abs : ndarray, shape (..., n_h)
        Impedance magnitude [any unit].
    min_rel_prominence : float
        A peak must stand this fraction above the higher of the two minima
        that bound it (in log terms) [unitless].

    Returns
    -------
    list of ndarray
        For each leading index (flattened), the grid indices of its peaks.
    """
    from scipy.signal import find_peaks as _fp  # noqa: PLC0415

    flat = np.log(np.maximum(z_abs.reshape(-1, z_abs.shape[-1]), 1e-300))
    out = []
    for row in flat:
        idx, _ = _fp(row, prominence=np.log1p(min_rel_prominence))
        out.append(idx.astype(int))
    return out


def central_dh(fun, h: np.ndarray) -> np.ndarray:
    """Central difference ``(f(h (1+e)) - f(h (1-e))) / (2 h e)``, ``e = 1e-6``, of ``fun(h)`` (first
    axis the orders) [unit of ``fun`` per unitless] (W. H. Press et al., *Numerical Recipes*, 3rd ed.,
    sec. 5.7)."""
    eps = 1e-6 * h
    fp = np.asarray(fun(h + eps), complex)
    fm = np.asarray(fun(h - eps), complex)
    return (fp - fm) / (2.0 * eps.reshape((-1,) + (1,) * (fp.ndim - 1)))


def driving_point_steps(arr: NetworkArrays, h: np.ndarray, bus: int, step_admittance,
                        settings: ModelSettings = ModelSettings(), extra=None,
                        pattern: YPattern | None = None, workers: int | None = None,
                        derivative: bool = False):
    """Driving-point impedance at a bank bus with the bank off and with each step in.

    Parameters
    ----------
    arr : NetworkArrays
        Network without the studied bank [pu].
    h : ndarray, shape (n_h,)
        Orders [unitless].
    bus : int
        Bank bus [unitless].
    step_admittance : callable
        ``step_admittance(h) -> Y`` of shape (n_h, N), the bank admittance with
        steps 1..N in service [pu]; if it has an attribute ``dh`` (a callable of
        the same form giving ``dY/dh``), that replaces the central difference.
    settings : ModelSettings
        Element models.
    extra : callable, optional
        ``extra(h) -> diag_extra`` (n_h, n) or None: other shunts in service [pu].
    pattern : YPattern, optional
        Precomputed pattern.
    workers : int, optional
        Processes for the sparse path [unitless].
    derivative : bool
        Also return ``dZ/dh`` [unitless].

    Returns
    -------
    ndarray, complex, shape (N + 1, n_h), or a tuple of two
        Row 0 bank off, row s step s in service [pu] (and ``dZ/dh`` [pu]).

    Notes
    -----
    One solve per order; the steps by Sherman-Morrison,
    ``Z_s = Z / (1 + Y_s Z)`` with ``Z = Z_kk`` (see :func:`step_update`), and
    ``dZ_s/dh = (Z' - Z^2 Y_s') / (1 + Y_s Z)^2``.  ``Y_s'`` is analytic where
    ``step_admittance.dh`` exists, else a central difference (step ``1e-6 h``), as is
    the derivative of ``extra``.
    """
    h = np.atleast_1d(np.asarray(h, float))
    k = np.array([int(bus)])
    de = None if extra is None else extra(h)
    ys = np.asarray(step_admittance(h), complex).reshape(h.size, -1)
    if not derivative:
        z0 = impedance_columns(arr, h, k, settings, de, rows=k, pattern=pattern, workers=workers)[:, 0, 0]
        zs = z0[:, None] / (1.0 + ys * z0[:, None])
        return np.concatenate([z0[None, :], zs.T], axis=0)
    de_dh = None if de is None else central_dh(extra, h)
    z0, dz0 = impedance_columns_dh(arr, h, k, settings, de, rows=k, pattern=pattern,
                                   diag_extra_dh=de_dh, workers=workers)
    return _with_steps(h, z0[:, 0, 0], dz0[:, 0, 0], step_admittance, ys)


def _with_steps(h: np.ndarray, z0: np.ndarray, dz0: np.ndarray, step_admittance, ys=None):
    """Bank-off ``Z_kk`` and ``dZ_kk/dh`` (shape (n_h,)) -> every step's, by Sherman-Morrison [pu]."""
    if ys is None:
        ys = np.asarray(step_admittance(h), complex).reshape(h.size, -1)
    z0, dz0 = z0[:, None], dz0[:, None]
    dfun = getattr(step_admittance, "dh", None)  # an analytic dY/dh where the caller has one
    if dfun is not None:
        dys = np.asarray(dfun(h), complex).reshape(ys.shape)
    else:
        dys = central_dh(lambda hh: np.asarray(step_admittance(hh), complex).reshape(hh.size, -1), h)
    den = 1.0 + ys * z0
    zs = z0 / den
    dzs = (dz0 - z0**2 * dys) / den**2
    return (np.concatenate([z0.T, zs.T], axis=0), np.concatenate([dz0.T, dzs.T], axis=0))


@dataclass(frozen=True, eq=False)
class StepPeaks:
    """Peaks of the bank-bus impedance of every step, found on an adaptive grid.

    Attributes
    ----------
    h_peak : tuple of ndarray
        Per curve (row 0 bank off, row s step s): refined peak orders [unitless].
    z_peak : tuple of ndarray
        ``|Z|`` at those orders [pu].
    scan : AdaptiveScan
        The adaptive grid and the complex curves (and ``dZ/dh``) on it [pu].
    n_evaluations : int
        Orders solved in all, grid and peak refinement [unitless].
    """

    h_peak: tuple
    z_peak: tuple
    scan: AdaptiveScan
    n_evaluations: int = 0

    def sample(self, h: np.ndarray) -> np.ndarray:
        """Every curve at the orders ``h`` (e.g. the study's uniform grid for tables and plots).

        Parameters
        ----------
        h : ndarray, shape (q,)
            Orders inside the scanned range [unitless].

        Returns
        -------
        ndarray, complex, shape (N + 1, q)
            Row 0 bank off, row s step s [pu].

        Notes
        -----
        Piecewise cubic Hermite interpolation of the solved values and ``dZ/dh``
        (:func:`resonance.harmonics.grid.hermite_sample`); exact at the solved orders.
        """
        sc = self.scan
        return hermite_sample(sc.h, sc.z, sc.dz, np.atleast_1d(np.asarray(h, float)))


def _coarse_grid(h: np.ndarray, factor: int) -> np.ndarray:
    """Every ``factor``-th order of ``h``, the last order always kept [unitless]."""
    c = h[::factor]
    return c if c[-1] == h[-1] else np.append(c, h[-1])


def step_peaks(arr: NetworkArrays, bus: int, step_admittance, h: np.ndarray,
               settings: ModelSettings = ModelSettings(), extra=None, pattern: YPattern | None = None,
               tol: float = 0.05, min_step: float | None = None, xtol: float = 1e-5,
               workers: int | None = None, base: tuple | None = None,
               start_factor: int | None = None) -> StepPeaks:
    """Every local maximum of ``|Z|`` at a bank bus, for the bank off and each step.

    Parameters
    ----------
    arr, bus, step_admittance, settings, extra, pattern, workers
        As for :func:`driving_point_steps`.
    h : ndarray, shape (n_h,)
        Uniform grid, e.g. the study's 0.01 grid [unitless].
    tol : float
        Refinement threshold on ``|ln(Z_{i+1}/Z_i)|`` (:func:`resonance.harmonics.grid.adaptive_scan`) [unitless].
    min_step : float, optional
        Narrowest interval (default: step of ``h`` / 16) [unitless].
    xtol : float
        Final width of each peak's search bracket [unitless].
    base : (ndarray, ndarray), optional
        Bank-off ``Z_kk`` and ``dZ_kk/dh`` on ``h`` (shape (n_h,)), when the caller
        has solved the grid already (e.g. with :func:`impedance_columns_dh`) [pu].
    start_factor : int, optional
        Start the adaptive grid on every ``start_factor``-th order of ``h`` (1: on ``h``).
        Default: ``LARGE_START_FACTOR`` on a network above ``DENSE_MAX_BUSES`` buses when no
        ``base`` is given, else 1 [unitless].

    Returns
    -------
    StepPeaks
        Peaks of every curve, the adaptive grid, and :meth:`StepPeaks.sample` for the curves
        on ``h``.

    Notes
    -----
    A peak is a local maximum of ``|Z(h)|``.  The grid is refined with the
    analytic derivative ``dZ/dh`` (:func:`resonance.harmonics.grid.adaptive_scan`); each
    interval where ``d|Z|/dh`` turns from positive to non-positive brackets a maximum.
    On the uniform start (small networks) a batched sequential search
    (:func:`resonance.harmonics.grid.zoom_refine`) converges inside each bracket; from a
    coarse start (large networks, where every solve is a sparse factorisation) the
    derivative-safeguarded search :func:`resonance.harmonics.grid.hermite_refine` does, with
    two solves per bracket and pass.  Brackets found without a sign change (a sampled
    maximum) always take the sequential search.
    """
    # the running check's memo (or one for this search): the sparse engine is built once; one
    # process pool serves every batch of the search
    with scope(), pool_session():
        return _step_peaks(arr, bus, step_admittance, h, settings, extra, pattern, tol, min_step, xtol, workers,
                           base, start_factor)


def _step_peaks(arr, bus, step_admittance, h, settings, extra, pattern, tol, min_step, xtol, workers, base,
                start_factor) -> StepPeaks:
    h = np.atleast_1d(np.asarray(h, float))
    if min_step is None:
        min_step = float(np.min(np.diff(h))) / 16.0 if h.size > 1 else 1e-3
    if start_factor is None:
        start_factor = LARGE_START_FACTOR if (base is None and arr.n_bus > DENSE_MAX_BUSES) else 1
    start_factor = max(1, int(start_factor))

    def fun(hh, derivative=True):
        return driving_point_steps(arr, hh, bus, step_admittance, settings, extra, pattern, workers, derivative)

    z_base = dz_base = None
    h0 = h
    if base is not None:
        z_base, dz_base = _with_steps(h, np.asarray(base[0], complex), np.asarray(base[1], complex),
                                      step_admittance)
        if start_factor > 1:
            idx = np.searchsorted(h, _coarse_grid(h, start_factor))
            h0, z_base, dz_base = h[idx], z_base[:, idx], dz_base[:, idx]
    elif start_factor > 1 and h.size > 2:
        h0 = _coarse_grid(h, start_factor)
    sc = adaptive_scan(fun, h0, z=z_base, dz=dz_base, tol=tol, min_step=min_step, derivative=True,
                       sample_rtol=SAMPLE_RTOL if start_factor > 1 else None)
    n_eval = sc.n_evaluations - (h0.size if base is not None else 0)
    hs, zs, n_p = polish_peaks(sc, fun, xtol, start_factor > 1)
    return StepPeaks(h_peak=hs, z_peak=zs, scan=sc, n_evaluations=int(n_eval + n_p))


def polish_peaks(sc: AdaptiveScan, fun, xtol: float = 1e-5, derivative_search: bool = True):
    """Every local maximum of every curve of an adaptive scan, polished inside its bracket.

    Parameters
    ----------
    sc : AdaptiveScan
        Scan with derivatives (:func:`resonance.harmonics.grid.adaptive_scan`), curves [pu].
    fun : callable
        ``fun(h, derivative=True)``: the curves of ``sc`` at orders ``h`` (shape (p,)),
        ``(Z, dZ/dh)`` each of shape (c, p), or ``Z`` alone with ``derivative=False``
        [unitless -> pu, pu].
    xtol : float
        Final bracket width [unitless].
    derivative_search : bool
        Polish brackets with a sign change of ``d|Z|/dh`` by
        :func:`resonance.harmonics.grid.hermite_refine` (two solves per pass; for a coarse
        start), else by :func:`resonance.harmonics.grid.zoom_refine` (seven per pass) [unitless].

    Returns
    -------
    (h_peak, z_peak, n_eval) : tuple
        Per curve the sorted peak orders [unitless] and ``|Z|`` there [pu]; the orders solved
        [unitless].

    Notes
    -----
    Brackets from :func:`resonance.harmonics.grid.peak_brackets`; brackets found without a
    sign change (a sampled maximum) always take the sequential search.

    References
    ----------
    R. P. Brent, *Algorithms for Minimization without Derivatives*, Prentice-Hall 1973, ch. 4-5;
    J. Kiefer, "Sequential minimax search for a maximum", Proc. AMS 4 (1953).
    """
    n_eval = 0
    curve, lo, hi = peak_brackets(sc)
    hp, zp = np.zeros(curve.size), np.zeros(curve.size)
    il = np.searchsorted(sc.h, lo)
    ih = np.searchsorted(sc.h, hi)
    la = np.log(np.maximum(np.abs(sc.z), 1e-300))
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.real(sc.dz / sc.z)
    turn = (ih == il + 1) & (g[curve, il] > 0) & (g[curve, np.minimum(ih, sc.h.size - 1)] <= 0)
    use_h = turn & bool(derivative_search)
    if use_h.any():
        jc = curve[use_h]

        def fg(x, j):  # ln|Z| and d ln|Z|/dh of each bracket's own curve
            z, dz = fun(x)
            cc = jc[j]
            zz, dd = z[cc, np.arange(x.size)], dz[cc, np.arange(x.size)]
            return np.log(np.maximum(np.abs(zz), 1e-300)), np.real(dd / zz)

        x, f, n_h = hermite_refine(fg, lo[use_h], hi[use_h], la[jc, il[use_h]], la[jc, ih[use_h]],
                                   g[jc, il[use_h]], g[jc, ih[use_h]], xtol=xtol)
        hp[use_h], zp[use_h] = x, np.exp(f)
        n_eval += n_h
    rest = ~use_h
    if rest.any():
        cr = curve[rest]
        count = [0]

        def f(x):  # x: (bracket, sample) -> |Z| of each bracket's own curve
            count[0] += x.size
            z = np.abs(fun(x.ravel(), False))
            return z[np.repeat(cr, x.shape[1]), np.arange(x.size)].reshape(x.shape)

        hp[rest], zp[rest] = zoom_refine(f, lo[rest], hi[rest], xtol=xtol)
        n_eval += count[0]
    n_c = sc.z.shape[0]
    hs = tuple(np.sort(hp[curve == c]) for c in range(n_c))
    zs = tuple(zp[curve == c][np.argsort(hp[curve == c])] for c in range(n_c))
    return hs, zs, int(n_eval)

"""Frequency scans: impedance columns of Y(h)^-1 and every bank step by rank-one update.

One solve of the step-free network per harmonic order serves every step of a
bank: a step changes only its bus's diagonal by ``Y_s(h)``, so (Sherman-Morrison)

    Z'_ij = Z_ij - Z_ik Y_s Z_kj / (1 + Y_s Z_kk).

Peaks of the driving-point impedance are found on the grid and refined by
re-evaluating the impedance on successively finer local grids.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numpy as np

from .admittance import YPattern
from .engine import SparseEngine, sparse_columns
from .network import NetworkArrays

__all__ = [
    "ModelSettings",
    "harmonic_grid",
    "impedance_columns",
    "step_update",
    "find_peaks",
    "refine_peaks",
    "DENSE_MAX_BUSES",
    "sparse_engine",
    "woodbury_update",
]

#: networks up to this many buses use batched dense solves, larger ones sparse LU
DENSE_MAX_BUSES = 120


@dataclass(frozen=True)
class ModelSettings:
    """Element-model settings for Y(h).

    Attributes
    ----------
    r_model : str
        Series-resistance frequency model (see :mod:`resonance.admittance`).
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


#: engines built for a network, reused across calls (keyed by the arrays object itself)
_ENGINES: "weakref.WeakKeyDictionary[NetworkArrays, dict]" = weakref.WeakKeyDictionary()


def sparse_engine(arr: NetworkArrays, settings: ModelSettings = ModelSettings(),
                  pattern: YPattern | None = None) -> SparseEngine:
    """The sparse engine of a network (pattern, ordering, value map), built once and cached.

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
        Engine for ``arr`` and ``settings`` [see :class:`resonance.engine.SparseEngine`].
    """
    per_arr = _ENGINES.setdefault(arr, {})
    eng = per_arr.get(settings)
    if eng is None:
        eng = SparseEngine.build(arr, settings.r_model, settings.load_model, pattern)
        per_arr[settings] = eng
    return eng


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
    ordering and the value map computed once (:mod:`resonance.engine`).
    """
    h = np.atleast_1d(np.asarray(h, float))
    cols = np.asarray(cols, int)
    n = arr.n_bus
    rsel = np.arange(n) if rows is None else np.asarray(rows, int)
    if method not in ("auto", "dense", "sparse"):
        raise ValueError(f"unknown method {method!r}")
    if method == "dense" or (method == "auto" and n <= DENSE_MAX_BUSES):
        return _dense_columns(arr, h, cols, settings, diag_extra, rsel, pattern or YPattern.build(arr))
    eng = sparse_engine(arr, settings, pattern)
    return sparse_columns(eng, h, cols, rsel, diag_extra, workers=workers)


def _dense_columns(arr, h, cols, settings, diag_extra, rsel, pattern):
    """Batched dense solves over chunks of orders (about 2e7 matrix entries per chunk)."""
    n = arr.n_bus
    out = np.empty((h.size, rsel.size, cols.size), complex)
    chunk = max(1, int(2e7 // max(n * n, 1)))
    rhs = np.zeros((n, cols.size), complex)
    rhs[cols, np.arange(cols.size)] = 1.0
    flat = pattern.rows * n + pattern.cols

    def stack(hs, de):
        vals = pattern.values(arr, hs, de, settings.r_model, settings.load_model)
        y = np.zeros((hs.size, n * n), complex)
        y[:, flat] = vals
        return y.reshape(hs.size, n, n)

    for a in range(0, h.size, chunk):
        hs = h[a:a + chunk]
        de = None if diag_extra is None else diag_extra[a:a + chunk]
        b = np.broadcast_to(rhs, (hs.size, n, cols.size))
        try:
            z = np.linalg.solve(stack(hs, de), b)
        except np.linalg.LinAlgError:
            # a lossless network is exactly singular at its own resonances
            z = np.linalg.solve(stack(_nudge(hs), de), b)
        out[a:a + chunk] = z[:, rsel, :]
    return out


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


def woodbury_update(z_cols: np.ndarray, k_rows: np.ndarray, k_cols: np.ndarray, y_add: np.ndarray) -> np.ndarray:
    """Impedance columns after adding shunt admittances at several buses at once (Woodbury).

    Parameters
    ----------
    z_cols : ndarray, shape (n_h, r, m)
        Change-free impedance rows x columns; must contain the rows and the
        columns of every changed bus [pu].
    k_rows, k_cols : ndarray of int, shape (q,)
        Positions of the changed buses among the rows and among the columns [unitless].
    y_add : ndarray, shape (n_h, q)
        Admittance added at each changed bus [pu].

    Returns
    -------
    ndarray, shape (n_h, r, m)
        Updated impedances [pu].

    Notes
    -----
    With ``D = diag(y)`` and ``K`` the changed buses,
    ``Z' = Z - Z[:, K] D (I + Z[K, K] D)^-1 Z[K, :]``, i.e.
    ``Z' = Z - Z[:, K] (I + D Z[K, K])^-1 D Z[K, :]`` (exact for a rank-q change).

    References
    ----------
    M. A. Woodbury, "Inverting modified matrices", Memorandum Report 42,
    Statistical Research Group, Princeton University, 1950; W. W. Hager,
    "Updating the inverse of a matrix", SIAM Review 31(2), 1989.
    """
    k_rows = np.asarray(k_rows, int)
    k_cols = np.asarray(k_cols, int)
    y = np.asarray(y_add, complex)
    z_ik = z_cols[:, :, k_cols]  # (n_h, r, q)
    z_kj = z_cols[:, k_rows, :]  # (n_h, q, m)
    z_kk = z_cols[:, k_rows][:, :, k_cols]  # (n_h, q, q)
    q = k_rows.size
    m_ = np.eye(q)[None, :, :] + y[:, :, None] * z_kk  # I + D Z_KK
    w = np.linalg.solve(m_, y[:, :, None] * z_kj)  # (I + D Z_KK)^-1 D Z_K:
    return z_cols - z_ik @ w


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


def refine_peaks(fun, h_peaks: np.ndarray, half_width: float, levels: int = 3, points: int = 21) -> tuple[np.ndarray, np.ndarray]:
    """Refine peak orders by evaluating ``fun`` on successively finer local grids.

    Parameters
    ----------
    fun : callable
        ``fun(h, which) -> |Z|`` evaluated at orders ``h`` (shape (p,)) for
        peaks ``which`` (indices into ``h_peaks``); vectorised [unitless].
    h_peaks : ndarray, shape (p,)
        Grid estimates [unitless].
    half_width : float
        Initial half-width of the search window, e.g. the grid step [unitless].
    levels, points : int
        Zoom levels and points per level; final resolution
        ``2 half_width / (points - 1)^levels``.

    Returns
    -------
    (h_ref, z_ref) : tuple of ndarray
        Refined orders [unitless] and ``|Z|`` there.
    """
    h_c = np.asarray(h_peaks, float).copy()
    z_c = np.zeros_like(h_c)
    if h_c.size == 0:
        return h_c, z_c
    w = float(half_width)
    off = np.linspace(-1.0, 1.0, points)
    which = np.repeat(np.arange(h_c.size), points)
    for _ in range(levels):
        hh = (h_c[:, None] + w * off[None, :]).ravel()
        zz = np.asarray(fun(hh, which)).reshape(h_c.size, points)
        j = np.argmax(zz, axis=1)
        h_c = h_c + w * off[j]
        z_c = zz[np.arange(h_c.size), j]
        w = w * 2.0 / (points - 1)
    return h_c, z_c

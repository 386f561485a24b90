"""Sparse scan engine: Y(h) with a fixed pattern and ordering, factorised once per order.

For a large network the driving-point and transfer impedances are columns of
``Z(h) = Y(h)^-1``.  The sparsity pattern of ``Y(h)`` is the same at every order,
so everything structural is done once, in :meth:`SparseEngine.build`:

* the fill-reducing ordering (minimum degree on ``Y + Y^T``, symmetric: rows and
  columns alike, which keeps the diagonal as the pivot sequence);
* the compressed-column layout of the permuted matrix ``P^T Y P``;
* the value map: ``Y(h)`` entries as ``V0 + h V1 + V2 / h`` (parts that are
  linear in ``h`` or ``1/h``: branch charging, fixed shunts) plus sparse
  matrices that scatter the per-element admittances that are not (branch series
  admittance, linear loads, supply impedance) straight into that layout.

Per order only the values are computed and SuperLU factorises with the given
(natural) ordering and a small diagonal-pivot threshold.  Each solution is
checked by its residual; a point whose residual is poor is solved again with
full partial pivoting.

SuperLU holds the GIL (measured: two threads are slower than one), so the
second core is used through a process pool (:func:`sparse_columns`).
"""

from __future__ import annotations

import contextlib
import contextvars
import math
import os
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from resonance.model.admittance import YPattern, load_admittance, resistance_factor
from resonance.model.network import NetworkArrays

__all__ = ["SparseEngine", "sparse_columns", "RESIDUAL_RTOL", "default_workers", "CHECK_WORKERS", "SCAN_PROGRESS",
           "pool_session"]

#: relative residual ``|Y x - b| / |b|`` above which a point is solved again with full pivoting
RESIDUAL_RTOL = 1e-9

#: SuperLU settings for the pre-ordered matrix (measured on case9241pegase, docs/performance.md)
_LU_OPTIONS = dict(permc_spec="NATURAL", diag_pivot_thresh=0.01, relax=16, panel_size=4,
                   options=dict(SymmetricMode=True))

#: orders per vectorised value-assembly chunk (keeps temporaries in cache)
_CHUNK = 16

#: estimated serial work [s] above which a process pool is worth its start-up (about 1 s, spawn)
_POOL_MIN_WORK_S = 6.0


#: the ``workers`` value of the running check (:func:`resonance.pipeline.run_check` sets it for
#: the duration of one check; None: ``RESONANCE_WORKERS`` or the CPU count decides)
CHECK_WORKERS: "contextvars.ContextVar[int | None]" = contextvars.ContextVar("resonance_check_workers",
                                                                            default=None)


#: progress hook of the running command: ``hook(done, total)`` [orders] after every chunk of a
#: sparse scan, so the edge (the CLI) can show a bar; the core only calls it (None: no calls)
SCAN_PROGRESS: "contextvars.ContextVar[object | None]" = contextvars.ContextVar("resonance_scan_progress",
                                                                               default=None)


def default_workers() -> int:
    """Number of processes for the pool [unitless].

    The ``workers`` of the running :func:`resonance.pipeline.run_check` when given, else
    ``RESONANCE_WORKERS`` when it holds a whole number >= 1 (the command line sets nothing
    else; 1 keeps everything in this process), else the CPUs this process may run on.
    """
    given = CHECK_WORKERS.get()
    if given is not None:
        return max(1, int(given))
    env = os.environ.get("RESONANCE_WORKERS", "").strip()
    if env.isdigit() and int(env) >= 1:
        return int(env)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


@dataclass(frozen=True, eq=False)
class SparseEngine:
    """Everything structural about Y(h) of one network, built once.

    Attributes
    ----------
    n : int
        Number of buses [unitless].
    perm : ndarray of int, shape (n,)
        ``perm[i]`` is the original bus at position ``i`` of the ordered matrix [unitless].
    iperm : ndarray of int, shape (n,)
        Inverse of ``perm``: position of original bus ``b`` [unitless].
    indices, indptr : ndarray of int
        Compressed-column structure of ``P^T Y P``.
    diag_slot : ndarray of int, shape (n,)
        Data position of the diagonal entry of original bus ``b``.
    v0, v1, v2 : ndarray, complex, shape (nnz,)
        Value parts ``V0 + h V1 + V2 / h`` [pu].
    s_br, s_ld, s_g : scipy.sparse.csr_matrix
        Scatter of branch series, load and supply admittances into the data [unitless].
    br_r_pu, br_x_pu, ld_p_pu, ld_q_pu, g_r_pu, g_x_pu : ndarray
        Element data the per-order admittances are computed from [pu].
    r_model, load_model : str
        Element models (see :mod:`resonance.model.admittance`).
    """

    n: int
    perm: np.ndarray
    iperm: np.ndarray
    indices: np.ndarray
    indptr: np.ndarray
    diag_slot: np.ndarray
    v0: np.ndarray
    v1: np.ndarray
    v2: np.ndarray
    s_br: sp.csr_matrix
    s_ld: sp.csr_matrix
    s_g: sp.csr_matrix
    br_r_pu: np.ndarray
    br_x_pu: np.ndarray
    ld_p_pu: np.ndarray
    ld_q_pu: np.ndarray
    g_r_pu: np.ndarray
    g_x_pu: np.ndarray
    r_model: str
    load_model: str

    @classmethod
    def build(cls, arr: NetworkArrays, r_model: str = "constant", load_model: str = "parallel_rl",
              pattern: YPattern | None = None) -> "SparseEngine":
        """Pattern, ordering and value map of a network.

        Parameters
        ----------
        arr : NetworkArrays
            Network [pu].
        r_model, load_model : str
            Element models [unitless].
        pattern : YPattern, optional
            Precomputed pattern of ``arr``.

        Returns
        -------
        SparseEngine
            The engine [see attributes].

        Notes
        -----
        Same element models as :func:`resonance.model.admittance.branch_terms` and
        :func:`resonance.model.admittance.diagonal_terms`, rearranged: the branch
        charging ``G + j B(h)`` and fixed shunts are ``a + b h + c / h``;
        the series admittance ``1 / (R k(h) + j h X)``, the loads and the supply
        are scattered through sparse matrices.  The ordering ``P`` comes from
        SuperLU's minimum degree on ``Y + Y^T`` at ``h = 1``.  SuperLU reports
        ``Pr A Pc = L U`` with ``Pc[i, perm_c[i]] = 1``, so ``A Pc = A[:, argsort(perm_c)]``:
        the reused column order is the *inverse* of ``perm_c``.

        References
        ----------
        X. S. Li, "An overview of SuperLU", ACM TOMS 31(3), 2005 (ordering and
        pivoting options); A. George, J. W. H. Liu, *Computer Solution of Large
        Sparse Positive Definite Systems*, Prentice-Hall 1981 (minimum degree).
        """
        pattern = pattern or YPattern.build(arr)
        n = arr.n_bus
        nnz = pattern.rows.size
        keys = pattern.rows.astype(np.int64) * n + pattern.cols

        def pos(r: np.ndarray, c: np.ndarray) -> np.ndarray:
            return np.searchsorted(keys, r.astype(np.int64) * n + c)

        # ordering from one factorisation at the fundamental
        perm = np.arange(n)
        for h_order in (1.0, 1.0 + math.pi / 100.0):  # a lossless net may be singular at one order
            y1 = pattern.values(arr, np.array([h_order]), None, r_model, load_model)[0]
            a1 = sp.csr_matrix((y1, pattern.cols, pattern.indptr), shape=(n, n)).tocsc()
            try:
                lu = spla.splu(a1, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                               options=dict(SymmetricMode=True))
            except RuntimeError:
                continue
            perm = np.argsort(lu.perm_c)  # inverse permutation (see Notes)
            break
        iperm = np.empty(n, int)
        iperm[perm] = np.arange(n)
        r2, c2 = iperm[pattern.rows], iperm[pattern.cols]
        order = np.lexsort((r2, c2))  # column-major order of the permuted matrix
        slot = np.empty(nnz, int)
        slot[order] = np.arange(nnz)
        indices = r2[order].astype(np.int32)
        indptr = np.searchsorted(c2[order], np.arange(n + 1)).astype(np.int32)
        diag_slot = slot[pattern.diag_pos]

        f, t = arr.br_from, arr.br_to
        tap = np.asarray(arr.br_tap, complex)
        m = f.size
        s_ff, s_ft, s_tf, s_tt = (slot[pos(f, f)], slot[pos(f, t)], slot[pos(t, f)], slot[pos(t, t)])
        inv_t2 = 1.0 / (tap * np.conj(tap))
        s_br = sp.csr_matrix(
            (np.concatenate([inv_t2, -1.0 / np.conj(tap), -1.0 / tap, np.ones(m)]),
             (np.concatenate([s_ff, s_ft, s_tf, s_tt]), np.tile(np.arange(m), 4))), shape=(nnz, m))
        v0 = np.zeros(nnz, complex)
        v1 = np.zeros(nnz, complex)
        v2 = np.zeros(nnz, complex)
        # branch charging, half at each end: G + j (h B+ + B- / h)
        bp = np.where(arr.br_b_pu > 0, arr.br_b_pu, 0.0)
        bm = np.where(arr.br_b_pu < 0, arr.br_b_pu, 0.0)
        for s_end, c_end in ((s_ff, inv_t2), (s_tt, np.ones(m))):
            np.add.at(v0, s_end, 0.5 * arr.br_g_pu * c_end)
            np.add.at(v1, s_end, 0.5j * bp * c_end)
            np.add.at(v2, s_end, 0.5j * bm * c_end)
        if arr.sh_bus.size:
            ds = diag_slot[arr.sh_bus]
            np.add.at(v0, ds, arr.sh_g_pu)
            np.add.at(v1, ds, 1j * np.where(arr.sh_b_pu > 0, arr.sh_b_pu, 0.0))
            np.add.at(v2, ds, 1j * np.where(arr.sh_b_pu < 0, arr.sh_b_pu, 0.0))

        def scatter(buses: np.ndarray) -> sp.csr_matrix:
            k = buses.size
            return sp.csr_matrix((np.ones(k), (diag_slot[buses], np.arange(k))), shape=(nnz, k))

        use_loads = arr.load_bus.size > 0 and load_model != "none"
        ld_bus = arr.load_bus if use_loads else np.zeros(0, int)
        return cls(
            n=n, perm=perm, iperm=iperm, indices=indices, indptr=indptr, diag_slot=diag_slot,
            v0=v0, v1=v1, v2=v2, s_br=s_br, s_ld=scatter(ld_bus), s_g=scatter(arr.grid_bus),
            br_r_pu=np.asarray(arr.br_r_pu, float), br_x_pu=np.asarray(arr.br_x_pu, float),
            ld_p_pu=np.asarray(arr.load_p_pu, float) if use_loads else np.zeros(0),
            ld_q_pu=np.asarray(arr.load_q_pu, float) if use_loads else np.zeros(0),
            g_r_pu=np.asarray(arr.grid_r_pu, float), g_x_pu=np.asarray(arr.grid_x_pu, float),
            r_model=r_model, load_model=load_model)

    @property
    def nnz(self) -> int:
        """Stored entries of Y [unitless]."""
        return int(self.indices.size)

    def values(self, h: np.ndarray, diag_extra: np.ndarray | None = None) -> np.ndarray:
        """Data of ``P^T Y(h) P`` in compressed-column order, for every order.

        Parameters
        ----------
        h : ndarray, shape (n_h,)
            Harmonic orders [unitless].
        diag_extra : ndarray, shape (n_h, n), optional
            Further admittance to ground per (original) bus [pu].

        Returns
        -------
        ndarray, shape (n_h, nnz)
            Matrix data [pu].

        Notes
        -----
        ``data = V0 + h V1 + V2/h + S_br y_s(h) + S_ld y_load(h) + S_g y_grid(h)`` with
        ``y_s = 1 / (R k(h) + j h X)`` (:func:`resonance.model.admittance.branch_terms`).
        """
        h = np.atleast_1d(np.asarray(h, float))
        kf = resistance_factor(h, self.r_model)[:, None]
        hc = h[:, None]
        out = self.v0 + hc * self.v1 + self.v2 / hc
        ys = 1.0 / (self.br_r_pu * kf + 1j * hc * self.br_x_pu)
        out += (self.s_br @ ys.T).T
        if self.ld_p_pu.size:
            out += (self.s_ld @ load_admittance(self.ld_p_pu, self.ld_q_pu, h, self.load_model).T).T
        if self.g_r_pu.size:
            yg = 1.0 / (self.g_r_pu * kf + 1j * hc * self.g_x_pu)
            out += (self.s_g @ yg.T).T
        if diag_extra is not None:
            out[:, self.diag_slot] += diag_extra
        return out

    def values_dh(self, h: np.ndarray, diag_extra_dh: np.ndarray | None = None) -> np.ndarray:
        """Derivative ``d data / dh`` of :meth:`values`, for every order.

        Parameters
        ----------
        h : ndarray, shape (n_h,)
            Harmonic orders [unitless].
        diag_extra_dh : ndarray, shape (n_h, n), optional
            Derivative of the further admittance to ground [pu].

        Returns
        -------
        ndarray, shape (n_h, nnz)
            ``dY/dh`` data [pu].

        Notes
        -----
        ``d/dh [1 / (R k(h) + j h X)] = -y^2 (R k'(h) + j X)``; ``k'(h)`` and the
        load admittances are differentiated by central differences with step
        ``1e-6 h`` (relative error about 1e-12 for these smooth functions).
        """
        h = np.atleast_1d(np.asarray(h, float))
        hc = h[:, None]
        eps = 1e-6 * h
        kf = resistance_factor(h, self.r_model)[:, None]
        dk = ((resistance_factor(h + eps, self.r_model) - resistance_factor(h - eps, self.r_model))
              / (2 * eps))[:, None]
        out = self.v1 - self.v2 / hc**2 + 0j * hc
        ys = 1.0 / (self.br_r_pu * kf + 1j * hc * self.br_x_pu)
        out += (self.s_br @ (-(ys**2) * (self.br_r_pu * dk + 1j * self.br_x_pu)).T).T
        if self.ld_p_pu.size:
            lp = load_admittance(self.ld_p_pu, self.ld_q_pu, h + eps, self.load_model)
            lm = load_admittance(self.ld_p_pu, self.ld_q_pu, h - eps, self.load_model)
            out += (self.s_ld @ ((lp - lm) / (2 * eps[:, None])).T).T
        if self.g_r_pu.size:
            yg = 1.0 / (self.g_r_pu * kf + 1j * hc * self.g_x_pu)
            out += (self.s_g @ (-(yg**2) * (self.g_r_pu * dk + 1j * self.g_x_pu)).T).T
        if diag_extra_dh is not None:
            out[:, self.diag_slot] += diag_extra_dh
        return out

    def matrix(self, data: np.ndarray) -> sp.csc_matrix:
        """The ordered matrix ``P^T Y P`` from its data [pu]."""
        return sp.csc_matrix((data, self.indices, self.indptr), shape=(self.n, self.n))

    def solve_chunk(self, h: np.ndarray, cols: np.ndarray, rows: np.ndarray,
                    diag_extra: np.ndarray | None = None, derivative: bool = False,
                    diag_extra_dh: np.ndarray | None = None):
        """``Z[:, rows, cols]`` at every order of ``h``, one factorisation per order.

        Parameters
        ----------
        h : ndarray, shape (n_h,)
            Orders [unitless].
        cols, rows : ndarray of int
            Original bus indices [unitless].
        diag_extra : ndarray, shape (n_h, n), optional
            Further admittance to ground [pu].
        derivative : bool
            Also return ``dZ/dh`` [unitless].
        diag_extra_dh : ndarray, shape (n_h, n), optional
            Derivative of ``diag_extra`` [pu].

        Returns
        -------
        z : ndarray, shape (n_h, len(rows), len(cols))
            Impedances [pu].
        dz : ndarray or None
            ``dZ/dh`` (same shape) when asked for [pu].
        n_fallback : int
            Orders that needed the fully pivoted solve [unitless].

        Notes
        -----
        ``dZ/dh = -Z (dY/dh) Z``: rows from the transposed solve
        ``Y^T W = E_rows``, so ``dZ[rows, cols] = -W^T (dY/dh) X``.
        """
        h = np.atleast_1d(np.asarray(h, float))
        out = np.empty((h.size, rows.size, cols.size), complex)
        dout = np.empty_like(out) if derivative else None
        rhs = np.zeros((self.n, cols.size), complex)
        rhs[self.iperm[cols], np.arange(cols.size)] = 1.0  # right-hand sides in the new order
        prow = self.iperm[rows]
        e_rows = np.zeros((self.n, rows.size), complex)
        e_rows[prow, np.arange(rows.size)] = 1.0
        fallback = 0
        for a in range(0, h.size, _CHUNK):
            hs = h[a:a + _CHUNK]
            de = None if diag_extra is None else diag_extra[a:a + _CHUNK]
            data = self.values(hs, de)
            ddata = None
            if derivative:
                ddata = self.values_dh(hs, None if diag_extra_dh is None else diag_extra_dh[a:a + _CHUNK])
            a_norm = np.sqrt((data.real**2 + data.imag**2).max(axis=1))
            for i in range(data.shape[0]):
                lu, x, fb = self._solve_one(data[i], float(a_norm[i]), rhs, float(hs[i]),
                                            None if de is None else de[i])
                fallback += fb
                out[a + i] = x[prow]
                if derivative:
                    w = lu.solve(e_rows, trans="T")
                    dout[a + i] = -(w.T @ (self.matrix(ddata[i]) @ x))
        return out, dout, fallback

    def _solve_one(self, data: np.ndarray, a_norm: float, rhs: np.ndarray, h: float,
                   diag_extra: np.ndarray | None):
        """One order: factorise with the fixed ordering; check the residual; fall back.

        Returns the factorisation, the solution and 1 if the fallback was used.
        """
        a = self.matrix(data)
        try:
            lu = spla.splu(a, **_LU_OPTIONS)
            x = lu.solve(rhs)
            if _residual_ok(a, a_norm, x, rhs):
                return lu, x, 0
        except RuntimeError:  # exactly singular with this pivot sequence
            pass
        try:
            lu = spla.splu(a, permc_spec="COLAMD")
        except RuntimeError:
            # a lossless network is exactly singular at its resonances: nudge the order
            hn = np.array([h * (1.0 + 1e-9)])
            a = self.matrix(self.values(hn, None if diag_extra is None else diag_extra[None, :])[0])
            lu = spla.splu(a, permc_spec="COLAMD")
        return lu, lu.solve(rhs), 1


def _residual_ok(a: sp.csc_matrix, a_norm: float, x: np.ndarray, b: np.ndarray) -> bool:
    """True when ``max|A x - b| <= RESIDUAL_RTOL (max|A| max|x| + max|b|)`` per column.

    A normwise backward-error test (Higham, *Accuracy and Stability of
    Numerical Algorithms*, 2nd ed., SIAM 2002, sec. 7.1): a small residual
    relative to ``|A| |x|`` means the solution is exact for a nearby matrix.
    """
    r = a @ x - b
    r2 = (r.real**2 + r.imag**2).max(axis=0)
    x2 = (x.real**2 + x.imag**2).max(axis=0)
    if not (np.all(np.isfinite(r2)) and np.all(np.isfinite(x2))):
        return False
    scale = a_norm * np.sqrt(x2) + np.abs(b).max(axis=0)
    return bool(np.all(np.sqrt(r2) <= RESIDUAL_RTOL * scale))


# ------------------------------------------------------------------ process pool
_WORKER_ENGINE: SparseEngine | None = None

#: the pool kept for the block of a :func:`pool_session` (``{"engine", "ex", "workers"}``), None outside one
_SESSION: "contextvars.ContextVar[dict | None]" = contextvars.ContextVar("resonance_pool_session", default=None)


@contextlib.contextmanager
def pool_session():
    """Keep the sparse engine's spawn pool alive across the scans made inside the block.

    An adaptive search solves a dozen small batches of orders one after the other; inside a
    session the pool (and its copy of the engine) is started once, by the first batch worth it,
    and serves every later batch of the same engine.  On leaving the block, normally or by an
    exception or a signal, its processes are shut down (terminated and joined on an exception,
    as in :func:`sparse_columns`).  Nested sessions share the outer one.
    """
    if _SESSION.get() is not None:
        yield
        return
    sess: dict = {}
    token = _SESSION.set(sess)
    try:
        yield
    except BaseException:
        if sess.get("ex") is not None:
            _stop_pool(sess.pop("ex"))
        raise
    finally:
        _SESSION.reset(token)
        if sess.get("ex") is not None:
            sess.pop("ex").shutdown(wait=True)


def _init_worker(engine: SparseEngine) -> None:
    global _WORKER_ENGINE  # noqa: PLW0603 - one engine per worker process
    _WORKER_ENGINE = engine


def _work(h, cols, rows, diag_extra, derivative, diag_extra_dh):
    assert _WORKER_ENGINE is not None
    return _WORKER_ENGINE.solve_chunk(h, cols, rows, diag_extra, derivative, diag_extra_dh)


def sparse_columns(engine: SparseEngine, h: np.ndarray, cols: np.ndarray, rows: np.ndarray,
                   diag_extra: np.ndarray | None = None, workers: int | None = None,
                   chunk: int = 64, derivative: bool = False, diag_extra_dh: np.ndarray | None = None):
    """``Z[:, rows, cols]`` over many orders, spread over processes when it pays.

    Parameters
    ----------
    engine : SparseEngine
        Network engine.
    h : ndarray, shape (n_h,)
        Orders [unitless].
    cols, rows : ndarray of int
        Buses [unitless].
    diag_extra : ndarray, shape (n_h, n), optional
        Further admittance to ground [pu].
    workers : int, optional
        Processes including this one (default: the CPUs available; 1: serial) [unitless].
    chunk : int
        Orders per task [unitless].
    derivative : bool
        Return ``(Z, dZ/dh)`` instead of ``Z`` [unitless].
    diag_extra_dh : ndarray, shape (n_h, n), optional
        Derivative of ``diag_extra`` [pu].

    Returns
    -------
    ndarray, shape (n_h, len(rows), len(cols)), or a tuple of two
        Impedances [pu] (and their derivative [pu]).

    Notes
    -----
    Orders are independent.  Chunks are queued to the pool from the high end;
    this process works from the low end and takes every chunk the pool has not
    started yet, so neither side waits for the other.  A pool is started only
    when the estimated serial work exceeds its start-up cost.
    """
    h = np.atleast_1d(np.asarray(h, float))
    cols = np.asarray(cols, int)
    rows = np.asarray(rows, int)
    workers = default_workers() if workers is None else max(1, int(workers))
    est_s = h.size * 3e-7 * engine.nnz * max(1.0, math.log10(max(engine.n, 10)))
    hook = SCAN_PROGRESS.get()
    sess = _SESSION.get()
    live = sess is not None and sess.get("ex") is not None and sess.get("engine") is engine \
        and sess.get("workers") == workers
    if live:  # the pool is paid for already: worth it for any batch it can split
        chunk = max(4, min(chunk, -(-h.size // (2 * workers))))
    if workers == 1 or h.size < 2 * chunk or (not live and est_s < _POOL_MIN_WORK_S):
        if hook is None:
            z, dz, _ = engine.solve_chunk(h, cols, rows, diag_extra, derivative, diag_extra_dh)
            return (z, dz) if derivative else z
        out = np.empty((h.size, rows.size, cols.size), complex)
        dout = np.empty_like(out) if derivative else None
        for a in range(0, h.size, chunk):  # the same solves, chunk by chunk, reported
            z, dz, _ = engine.solve_chunk(h[a:a + chunk], cols, rows,
                                          None if diag_extra is None else diag_extra[a:a + chunk], derivative,
                                          None if diag_extra_dh is None else diag_extra_dh[a:a + chunk])
            out[a:a + chunk] = z
            if derivative:
                dout[a:a + chunk] = dz
            hook(min(a + chunk, h.size), h.size)
        return (out, dout) if derivative else out
    import multiprocessing as mp  # noqa: PLC0415

    starts = list(range(0, h.size, chunk))
    out = np.empty((h.size, rows.size, cols.size), complex)
    dout = np.empty_like(out) if derivative else None

    def part(a: int):
        return (h[a:a + chunk], cols, rows, None if diag_extra is None else diag_extra[a:a + chunk],
                derivative, None if diag_extra_dh is None else diag_extra_dh[a:a + chunk])

    done = [0]

    def put(a: int, res) -> None:
        out[a:a + chunk] = res[0]
        if derivative:
            dout[a:a + chunk] = res[1]
        done[0] += res[0].shape[0]
        if hook is not None:
            hook(done[0], h.size)

    if live:
        ex = sess["ex"]
    else:
        if sess is not None and sess.get("ex") is not None:  # another engine's pool: replaced
            sess.pop("ex").shutdown(wait=True)
        ex = ProcessPoolExecutor(max_workers=workers - 1, mp_context=mp.get_context("spawn"),
                                 initializer=_init_worker, initargs=(engine,))
        if sess is not None:
            sess.update(engine=engine, ex=ex, workers=workers)
    try:
        futs = {a: ex.submit(_work, *part(a)) for a in reversed(starts)}
        for a in starts:
            if not futs[a].cancel():
                break
            put(a, engine.solve_chunk(*part(a)))
            futs.pop(a)
        for a, fu in futs.items():
            put(a, fu.result())
    except BaseException:
        # interrupted (a signal, an error): no worker may outlive this call
        if sess is not None:
            sess.pop("ex", None)
        _stop_pool(ex)
        raise
    if sess is None:
        ex.shutdown(wait=True)
    return (out, dout) if derivative else out


def _stop_pool(ex: ProcessPoolExecutor) -> None:
    """Cancel the queued chunks, terminate the pool's processes and wait for them."""
    procs = list((getattr(ex, "_processes", None) or {}).values())
    ex.shutdown(wait=False, cancel_futures=True)
    for p in procs:
        if p.is_alive():
            p.terminate()
    for p in procs:
        p.join(timeout=5)
        if p.is_alive():  # pragma: no cover - a worker that ignores SIGTERM
            p.kill()
            p.join()

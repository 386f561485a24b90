"""Bus admittance matrix at harmonic orders.

Builds ``Y(h)`` for a whole vector of harmonic orders at once from
:class:`~resonance.model.network.NetworkArrays`.  Inductive reactances scale with
``h``, capacitive ones with ``1/h`` (susceptances with ``h``); resistances follow
a named model.  The sparsity pattern is the same at every order: it is built
once (:class:`YPattern`) and only the values change.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from resonance.model.network import NetworkArrays

__all__ = [
    "RESISTANCE_MODELS",
    "LOAD_MODELS",
    "resistance_factor",
    "branch_terms",
    "diagonal_terms",
    "load_admittance",
    "bank_step_admittance",
    "bank_step_admittance_dh",
    "StepAdmittance",
    "YPattern",
    "dense_y",
]

#: Frequency dependence of series resistance, ``R(h) = R * factor(h)``.
#: constant: no skin effect (common practice for screening);
#: sqrt_h: ``sqrt(h)`` skin-effect approximation (common practice);
#: breuer: ``1 + 0.1 h^1.5`` (quoted from Breuer et al., HVDC-AC harmonic
#: interaction, IEEE Trans. PAS; from memory).
RESISTANCE_MODELS = ("constant", "sqrt_h", "breuer")

#: Linear-load damping models (see :func:`load_admittance`).
LOAD_MODELS = ("parallel_rl", "series_rl", "cigre_c4", "none")


def resistance_factor(h: np.ndarray, model: str) -> np.ndarray:
    """Multiplier of the fundamental-frequency resistance at order ``h``.

    Parameters
    ----------
    h : ndarray
        Harmonic orders [unitless].
    model : str
        One of :data:`RESISTANCE_MODELS`.

    Returns
    -------
    ndarray
        ``R(h) / R(1)`` [unitless].

    References
    ----------
    J. Arrillaga, N. R. Watson, *Power System Harmonics*, 2nd ed., Wiley 2003,
    ch. 6 (frequency-dependent resistance); Breuer et al., IEEE Trans. PAS
    (``1 + 0.1 h^1.5``, from memory).
    """
    h = np.asarray(h, float)
    if model == "constant":
        return np.ones_like(h)
    if model == "sqrt_h":
        return np.sqrt(np.maximum(h, 1e-12))
    if model == "breuer":
        # normalised so that R(1) equals the fundamental-frequency resistance
        return (1.0 + 0.1 * h**1.5) / 1.1
    raise ValueError(f"unknown resistance model {model!r}")


def _scale_susceptance(b: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Susceptance at order h: capacitive (b > 0) times h, inductive (b < 0) over h.

    Parameters
    ----------
    b : ndarray, shape (k,)
        Fundamental susceptance [pu].
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].

    Returns
    -------
    ndarray, shape (n_h, k)
        Susceptance at each order [pu].
    """
    h = h[:, None]
    return np.where(b > 0, b * h, b / h)


def branch_terms(arr: NetworkArrays, h: np.ndarray, r_model: str = "constant"):
    """Pi-model two-port admittances of every branch at every order.

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu].
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    r_model : str
        Resistance model (:data:`RESISTANCE_MODELS`).

    Returns
    -------
    tuple of ndarray, each shape (n_h, m)
        ``(Yff, Yft, Ytf, Ytt)`` [pu].

    Notes
    -----
    ``Ys = 1 / (R k(h) + j h X)``, ``Yc = G + j B(h)``, tap ``t``:
    ``Yff = (Ys + Yc/2)/|t|^2``, ``Yft = -Ys/conj(t)``, ``Ytf = -Ys/t``,
    ``Ytt = Ys + Yc/2`` (the standard pi formulas, as in MATPOWER's makeYbus).

    References
    ----------
    R. D. Zimmerman et al., MATPOWER User's Manual, sec. 3.2 (branch model).
    """
    h = np.asarray(h, float)
    kf = resistance_factor(h, r_model)[:, None]
    ys = 1.0 / (arr.br_r_pu * kf + 1j * h[:, None] * arr.br_x_pu)
    yc = arr.br_g_pu + 1j * _scale_susceptance(arr.br_b_pu, h)
    t = arr.br_tap
    ytt = ys + yc / 2
    yff = ytt / (t * np.conj(t))
    yft = -ys / np.conj(t)
    ytf = -ys / t
    return yff, yft, ytf, ytt


def load_admittance(p_pu: np.ndarray, q_pu: np.ndarray, h: np.ndarray, model: str) -> np.ndarray:
    """Admittance of linear loads at order ``h`` (constant-impedance at nominal voltage).

    Parameters
    ----------
    p_pu, q_pu : ndarray, shape (l,)
        Active and reactive power at nominal voltage [pu]; ``q > 0`` inductive.
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    model : str
        ``parallel_rl``: R = V^2/P in parallel with X = h V^2/Q;
        ``series_rl``: R and X in series drawing P, Q at the fundamental;
        ``cigre_c4``: R = V^2/P, series ``X_s = 0.073 h R``, parallel
        ``X_p = h R / (6.7 Q/P - 0.74)`` (from memory);
        ``none``: loads ignored (no damping).

    Returns
    -------
    ndarray, shape (n_h, l)
        Load admittance [pu].

    References
    ----------
    CIGRE WG 36.05, "Harmonics, characteristic parameters, methods of study,
    estimates of existing values in the network", Electra 77, 1981 (load
    models; coefficients from memory). IEEE Std 519-2014 clause on system
    modelling (parallel R-L representation, common practice).
    """
    h = np.asarray(h, float)[:, None]
    p = np.asarray(p_pu, float)
    q = np.asarray(q_pu, float)
    if model == "none":
        return np.zeros((h.shape[0], p.shape[0]), complex)
    if model == "parallel_rl":
        q_ind = np.where(q > 0, q, 0.0)
        q_cap = np.where(q < 0, q, 0.0)
        return p + 0j - 1j * q_ind / h - 1j * q_cap * h
    if model == "series_rl":
        # Y = 1 / Z = (P^2 + Q^2) / (P + j h Q): no division by a vanishing power
        s2 = p**2 + q**2
        den = np.where(s2 > 0, p + 1j * h * q, 1.0)
        return np.where(s2 > 0, s2 / den, 0.0) + 0j
    if model == "cigre_c4":
        # R = 1/P, so 1 / (R (1 + j 0.073 h)) = P / (1 + j 0.073 h), and k / (j h R) = k P / (j h)
        # with k P = 6.7 Q - 0.74 P: the same model written without 1/P (no overflow for tiny P)
        pp = np.where(p > 0, p, 0.0)
        y_rs = pp / (1.0 + 1j * 0.073 * h)
        kp = np.where(p > 0, 6.7 * q - 0.74 * p, 0.0)
        y_p = np.where(kp > 0, kp, 0.0) / (1j * h)
        return y_rs + y_p
    raise ValueError(f"unknown load model {model!r}")


def diagonal_terms(
    arr: NetworkArrays, h: np.ndarray, r_model: str = "constant", load_model: str = "parallel_rl"
) -> np.ndarray:
    """Shunt admittance to ground at every bus and order (fixed shunts, loads, supply).

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu].
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    r_model, load_model : str
        See :func:`resistance_factor` and :func:`load_admittance`.

    Returns
    -------
    ndarray, shape (n_h, n)
        Admittance to ground per bus [pu].

    Notes
    -----
    Supply: ``1 / (R k(h) + j h X)`` with the physical (c = 1) Thevenin impedance.
    """
    h = np.asarray(h, float)
    n_h = h.shape[0]
    d = np.zeros((n_h, arr.n_bus), complex)
    if arr.sh_bus.size:
        ysh = arr.sh_g_pu + 1j * _scale_susceptance(arr.sh_b_pu, h)
        _add_columns(d, arr.sh_bus, ysh)
    if arr.load_bus.size and load_model != "none":
        _add_columns(d, arr.load_bus, load_admittance(arr.load_p_pu, arr.load_q_pu, h, load_model))
    if arr.grid_bus.size:
        kf = resistance_factor(h, r_model)[:, None]
        yg = 1.0 / (arr.grid_r_pu * kf + 1j * h[:, None] * arr.grid_x_pu)
        _add_columns(d, arr.grid_bus, yg)
    return d


def _add_columns(d: np.ndarray, idx: np.ndarray, vals: np.ndarray) -> None:
    """Accumulate ``vals[:, k]`` into ``d[:, idx[k]]`` (repeated indices add)."""
    m = sp.csr_matrix((np.ones(idx.size), (np.arange(idx.size), idx)), shape=(idx.size, d.shape[1]))
    d += (m.T @ vals.T).T


def bank_step_admittance(
    h: np.ndarray, b_pu: np.ndarray, p: float = 0.0, reactor_q: float = np.inf, cap_r_pu: float = 0.0
) -> np.ndarray:
    """Admittance of capacitor bank steps, plain or detuned, at every order.

    Parameters
    ----------
    h : ndarray, shape (n_h,)
        Harmonic orders [unitless].
    b_pu : ndarray, shape (s,)
        Capacitor susceptance of each step at the fundamental, i.e. ``1/X_C`` [pu].
    p : float
        Detuning factor ``X_L / X_C`` at the fundamental [unitless]; 0 for a plain bank.
    reactor_q : float
        Quality factor ``X_L / R_L`` of the detuning reactor at the fundamental
        [unitless]; ``inf`` for a lossless reactor.
    cap_r_pu : float
        Capacitor series loss resistance as a fraction of X_C [unitless].

    Returns
    -------
    ndarray, shape (n_h, s)
        Step admittance [pu].

    Notes
    -----
    Plain: ``Y = j h / X_C``.  Detuned:
    ``Y = 1 / (R + j (h p X_C - X_C / h))``, series tuning at ``n = 1/sqrt(p)``.

    References
    ----------
    IEEE Std 1531-2020, Guide for the application and specification of
    harmonic filters, clause on detuned filters (series L-C branch).
    """
    h = np.asarray(h, float)[:, None]
    b = np.asarray(b_pu, float)[None, :]
    with np.errstate(divide="ignore"):
        xc = np.where(b > 0, 1.0 / np.where(b > 0, b, 1.0), np.inf)
    if p <= 0 and cap_r_pu == 0:
        return 1j * h * b + 0j
    r = cap_r_pu * xc
    if p > 0 and np.isfinite(reactor_q):
        r = r + p * xc / reactor_q
    z = r + 1j * (h * p * xc - xc / h)
    return np.where(b > 0, 1.0 / np.where(b > 0, z, 1.0), 0.0)


def bank_step_admittance_dh(
    h: np.ndarray, b_pu: np.ndarray, p: float = 0.0, reactor_q: float = np.inf, cap_r_pu: float = 0.0
) -> np.ndarray:
    """Derivative with respect to the order of :func:`bank_step_admittance`.

    Parameters
    ----------
    h, b_pu, p, reactor_q, cap_r_pu
        As for :func:`bank_step_admittance` [unitless], [pu], [unitless], [unitless], [unitless].

    Returns
    -------
    ndarray, shape (n_h, s)
        ``dY/dh`` [pu per unitless].

    Notes
    -----
    Plain: ``dY/dh = j / X_C``.  Series branch ``Z = R + j (h p X_C - X_C / h)``:
    ``dZ/dh = j (p X_C + X_C / h^2)`` and ``dY/dh = -(dZ/dh) / Z^2`` (the resistance
    does not change with h in this model).

    References
    ----------
    IEEE Std 1531-2020 (series L-C branch), as :func:`bank_step_admittance`.
    """
    h = np.asarray(h, float)[:, None]
    b = np.asarray(b_pu, float)[None, :]
    if p <= 0 and cap_r_pu == 0:
        return np.broadcast_to(1j * b + 0j, (h.shape[0], b.shape[1])).copy()
    with np.errstate(divide="ignore"):
        xc = np.where(b > 0, 1.0 / np.where(b > 0, b, 1.0), np.inf)
    r = cap_r_pu * xc
    if p > 0 and np.isfinite(reactor_q):
        r = r + p * xc / reactor_q
    ok = b > 0
    xs = np.where(ok, xc, 1.0)
    z = np.where(ok, r, 0.0) + 1j * (h * p * xs - xs / h)
    dz = 1j * (p * xs + xs / h**2)
    return np.where(ok, -dz / z**2, 0.0)


class StepAdmittance:
    """The admittance of a bank's steps as a function of the order, ``f(h) -> Y`` [pu], with
    ``f.dh(h) -> dY/dh`` [pu]: the form :func:`resonance.harmonics.scan.step_peaks` takes.

    Parameters
    ----------
    b_pu : ndarray, shape (s,)
        Capacitor susceptance of each (cumulative) step at the fundamental [pu].
    p : float, optional
        Detuning factor ``X_L / X_C`` [unitless]; 0 for a plain bank.
    reactor_q : float, optional
        Quality factor ``X_L / R_L`` of the reactor at the fundamental [unitless].

    References
    ----------
    As :func:`bank_step_admittance` and :func:`bank_step_admittance_dh`.
    """

    def __init__(self, b_pu: np.ndarray, p: float = 0.0, reactor_q: float = np.inf):
        self.b_pu, self.p, self.reactor_q = np.asarray(b_pu, float), float(p), float(reactor_q)

    def __call__(self, h: np.ndarray) -> np.ndarray:
        return bank_step_admittance(h, self.b_pu, self.p, self.reactor_q)

    def dh(self, h: np.ndarray) -> np.ndarray:
        return bank_step_admittance_dh(h, self.b_pu, self.p, self.reactor_q)


@dataclass(frozen=True, eq=False)
class YPattern:
    """Fixed sparsity pattern of Y(h): built once, reused at every order.

    Attributes
    ----------
    n : int
        Number of buses [unitless].
    rows, cols : ndarray
        Row and column of each stored entry, row-major sorted (CSR order).
    indptr : ndarray
        CSR row pointer.
    agg : scipy.sparse.csr_matrix, shape (K, nnz)
        Sums the raw terms (branch and diagonal contributions) into entries.
    """

    n: int
    rows: np.ndarray
    cols: np.ndarray
    indptr: np.ndarray
    agg: sp.csr_matrix
    diag_pos: np.ndarray

    @classmethod
    def build(cls, arr: NetworkArrays) -> "YPattern":
        """Pattern of the network: branch ends plus every diagonal."""
        n = arr.n_bus
        f, t = arr.br_from, arr.br_to
        diag = np.arange(n)
        r = np.concatenate([f, f, t, t, diag])
        c = np.concatenate([f, t, f, t, diag])
        key = r.astype(np.int64) * n + c
        uniq, inv = np.unique(key, return_inverse=True)
        rows, cols = uniq // n, uniq % n
        agg = sp.csr_matrix((np.ones(key.size), (np.arange(key.size), inv)), shape=(key.size, uniq.size))
        indptr = np.searchsorted(rows, np.arange(n + 1))
        diag_pos = np.searchsorted(uniq, diag.astype(np.int64) * n + diag)
        return cls(n, rows, cols, indptr, agg, diag_pos)

    def values(self, arr: NetworkArrays, h: np.ndarray, diag_extra: np.ndarray | None = None,
               r_model: str = "constant", load_model: str = "parallel_rl") -> np.ndarray:
        """Stored values of Y(h) for every order.

        Parameters
        ----------
        arr : NetworkArrays
            Network [pu].
        h : ndarray, shape (n_h,)
            Harmonic orders [unitless].
        diag_extra : ndarray, shape (n_h, n), optional
            Further admittance to ground per bus (e.g. banks in service) [pu].
        r_model, load_model : str
            Element model settings.

        Returns
        -------
        ndarray, shape (n_h, nnz)
            CSR data of Y(h) [pu].
        """
        yff, yft, ytf, ytt = branch_terms(arr, h, r_model)
        d = diagonal_terms(arr, h, r_model, load_model)
        if diag_extra is not None:
            d = d + diag_extra
        raw = np.concatenate([yff, yft, ytf, ytt, d], axis=1)
        return np.asarray((self.agg.T @ raw.T).T)


def dense_y(arr: NetworkArrays, h: np.ndarray, diag_extra: np.ndarray | None = None,
            r_model: str = "constant", load_model: str = "parallel_rl",
            pattern: YPattern | None = None) -> np.ndarray:
    """Y(h) as a dense stack, shape (n_h, n, n) [pu]; see :meth:`YPattern.values`."""
    pattern = pattern or YPattern.build(arr)
    h = np.atleast_1d(np.asarray(h, float))
    vals = pattern.values(arr, h, diag_extra, r_model, load_model)
    n = pattern.n
    y = np.zeros((h.shape[0], n * n), complex)
    y[:, pattern.rows * n + pattern.cols] = vals
    return y.reshape(h.shape[0], n, n)

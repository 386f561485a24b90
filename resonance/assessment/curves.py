"""The study's bank-bus and PCC curves of every step, and the peaks at the bank bus.

Two paths, chosen by the network's size:

* up to ``DENSE_MAX_BUSES`` buses (every bundled case), or with ``ADAPTIVE_CHECK`` off: the
  bank-off columns are solved on the whole uniform study grid (memoised in the check's memo,
  so the detuned re-checks share it), the steps follow by Sherman-Morrison, and the peak search
  (:func:`resonance.harmonics.scan.step_peaks`) refines from that grid;
* above it: the bank-off columns are solved once on a coarse start (every
  ``LARGE_START_FACTOR``-th order, with ``dZ/dh``, memoised the same way) and each bank
  (variant) refines from there only where its own curves need it
  (:func:`resonance.harmonics.bank_curves.bank_pcc_curves`); the uniform curves are Hermite
  samples (docs/performance.md, "Large networks on an adaptive grid").

No I/O: solves through :mod:`resonance.harmonics.scan`, memo through :mod:`resonance.memo`.
"""

from __future__ import annotations

import numpy as np

from resonance.errors import ModelError
from resonance.harmonics.bank_curves import bank_pcc_curves, coarse_orders, pair_step_curves
from resonance.harmonics.engine import pool_session
from resonance.harmonics.grid import AdaptiveScan
from resonance.harmonics.scan import DENSE_MAX_BUSES, ModelSettings, central_dh, impedance_columns_dh, step_peaks
from resonance.memo import remember
from resonance.model.admittance import YPattern
from resonance.model.network import NetworkArrays

__all__ = ["ADAPTIVE_CHECK", "study_curves", "prominent", "OrderTable"]

#: networks above ``DENSE_MAX_BUSES`` buses take the adaptive path in a check (False: the uniform
#: path everywhere, e.g. to compare the two)
ADAPTIVE_CHECK = True


def study_curves(arr: NetworkArrays, bank_bus: int, pcc: int, step_y, h: np.ndarray, settings: ModelSettings,
                 extra, pattern: YPattern) -> tuple[np.ndarray, np.ndarray, tuple, tuple, AdaptiveScan]:
    """Driving-point impedance at the bank bus and at the PCC for every step, and the bank-bus peaks.

    Parameters
    ----------
    arr : NetworkArrays
        Network without the studied bank [pu].
    bank_bus, pcc : int
        Model buses of the bank and of the PCC [unitless].
    step_y : callable
        ``step_y(h) -> Y`` (n_h, N) of steps 1..N with ``step_y.dh`` [pu].
    h : ndarray, shape (n_h,)
        Uniform study grid [unitless].
    settings : ModelSettings
        Element models.
    extra : callable
        ``extra(h) -> diag_extra`` (n_h, n) or None: other banks in service [pu].
    pattern : YPattern
        Pattern of ``arr``.

    Returns
    -------
    (z_bank, z_pcc, h_peak, z_peak, scan)
        ``z_bank``, ``z_pcc``: complex, shape (N + 1, n_h), row 0 bank off [pu]; per bank-bus
        curve the peak orders [unitless] and ``|Z|`` [pu]; ``scan``: the bank-bus curves on the
        grid the peaks' prominence is judged on (:func:`prominent`) [pu].

    Notes
    -----
    Steps by Sherman-Morrison (J. Sherman, W. J. Morrison, Ann. Math. Statist. 21, 1950);
    peaks as :func:`resonance.harmonics.scan.step_peaks` (uniform start) or
    :func:`resonance.harmonics.bank_curves.bank_pcc_curves` (coarse start, large networks).
    """
    cols = np.unique(np.array([bank_bus, pcc], int))
    kc = int(np.nonzero(cols == bank_bus)[0][0])
    pc = int(np.nonzero(cols == pcc)[0][0])
    if ADAPTIVE_CHECK and arr.n_bus > DENSE_MAX_BUSES and h.size > 2:
        return _adaptive(arr, cols, kc, pc, step_y, h, settings, extra, pattern)
    z0, dz0 = _bank_off_columns(arr, h, cols, settings, extra, pattern)
    ys = np.asarray(step_y(h), complex)  # (n_h, N)
    # Sherman-Morrison for the two diagonal entries used (the same arithmetic as the large path)
    zc, _dzc = pair_step_curves(z0, dz0, kc, pc, ys, np.asarray(step_y.dh(h), complex))
    zkk, zpp = zc[: ys.shape[1] + 1], zc[ys.shape[1] + 1:]  # (N+1, n_h) each
    # adaptive grid (resonance.harmonics.grid): brackets every local maximum, even one narrower than the
    # uniform grid; peaks with less than the grid finder's prominence are dropped the same way
    spk = step_peaks(arr, bank_bus, step_y, h, settings, extra=extra, pattern=pattern,
                     base=(z0[:, kc, kc], dz0[:, kc, kc]))
    return zkk, zpp, spk.h_peak, spk.z_peak, spk.scan


def _adaptive(arr, cols, kc, pc, step_y, h, settings, extra, pattern):
    """The large-network path: shared coarse start, this bank's refinement, Hermite samples."""
    h0 = coarse_orders(h)
    if extra(h0[:1]) is None:
        # the bank-off solves depend on the network only: one table per network in the check's memo,
        # so every variant's start and every order an earlier variant refined are solved once
        key = (arr, tuple(int(c) for c in cols), settings)
        solve = remember("bank_off_orders", key, lambda: OrderTable(
            lambda hh: _bank_off_solve(arr, hh, cols, settings, None, None, pattern)))
    else:
        def solve(hh):
            de = extra(hh)
            return _bank_off_solve(arr, hh, cols, settings, de, central_dh(extra, hh), pattern)
    with pool_session():  # one process pool (when one pays) for every batch of this bank's search
        bc = bank_pcc_curves(solve, h, step_y, kc, pc, (h0, *solve(h0)))
    zkk, zpp = bc.sample(h)
    # prominence judged on the adaptive grid and the uniform grid together (the uniform path's
    # grid holds every uniform order too)
    bank = bc.bank_scan()
    h_all = np.union1d(bank.h, h)
    z_all = bc.sample(h_all)[0]
    return zkk, zpp, bc.h_peak, bc.z_peak, AdaptiveScan(h=h_all, z=z_all, levels=bank.levels,
                                                        n_evaluations=bc.n_evaluations)


class OrderTable:
    """Bank-off ``Z`` and ``dZ/dh`` of one network at every order asked for so far (one check's).

    ``table(h) -> (Z, dZ/dh)`` [pu] solves only the orders not in the table yet (an order is
    known when it is the same float; the adaptive grids of variants that share the coarse start
    share their midpoints) and keeps them.  The table only grows: values once solved are never
    changed, so every variant sees the solves it would have made itself.

    ``solve(h) -> (Z, dZ/dh)`` with ``h`` [unitless] of shape (p,) and both [pu] of shape
    (p, m, m).  A memo function (D. Michie, "Memo functions and machine learning", Nature 218,
    1968) over single orders.
    """

    def __init__(self, solve):
        self._solve = solve
        self.h = np.zeros(0)
        self.z = self.dz = None
        self.solved = 0  # orders solved in all [unitless]

    def __call__(self, hh: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        hh = np.atleast_1d(np.asarray(hh, float))
        known = np.zeros(hh.size, bool)
        if self.h.size:
            i = np.minimum(np.searchsorted(self.h, hh), self.h.size - 1)
            known = self.h[i] == hh
        new = np.unique(hh[~known])
        if new.size:
            zn, dzn = self._solve(new)
            self.solved += new.size
            if self.z is None:
                self.h, self.z, self.dz = new, np.asarray(zn), np.asarray(dzn)
            else:
                at = np.searchsorted(self.h, new)
                self.h = np.insert(self.h, at, new)
                self.z, self.dz = np.insert(self.z, at, zn, axis=0), np.insert(self.dz, at, dzn, axis=0)
        i = np.searchsorted(self.h, hh)
        return self.z[i], self.dz[i]


def _bank_off_columns(arr: NetworkArrays, h: np.ndarray, cols: np.ndarray, settings: ModelSettings, extra,
                      pattern: YPattern) -> tuple[np.ndarray, np.ndarray]:
    """Bank-off ``Z[:, cols, cols]`` and ``dZ/dh`` on the grid ``h`` [pu] (read-only arrays)."""
    de = extra(h)
    if de is None:
        # without other banks in service the bank-off scan depends on the network only: shared
        # by the re-checks of detuned variants in the check's memo (read-only arrays)
        key = (arr, h.size, h.tobytes(), tuple(int(c) for c in cols), settings)
        return remember("bank_off_scan", key, lambda: _bank_off_solve(arr, h, cols, settings, None, None, pattern,
                                                                      read_only=True))
    return _bank_off_solve(arr, h, cols, settings, de, central_dh(extra, h), pattern)


def _bank_off_solve(arr, h, cols, settings, de, de_dh, pattern, read_only: bool = False):
    try:
        # with dZ/dh: the same solve seeds the adaptive peak search (scan.step_peaks)
        z0, dz0 = impedance_columns_dh(arr, h, cols, settings, de, rows=cols, pattern=pattern,
                                       diag_extra_dh=de_dh)
    except np.linalg.LinAlgError as e:  # pragma: no cover - nudged inside; a truly singular model
        raise ModelError(f"network admittance is singular ({e})") from None
    if read_only:
        z0.flags.writeable = False
        dz0.flags.writeable = False
    return z0, dz0


def prominent(scan, row: int, hp: np.ndarray, zp: np.ndarray, min_rel: float = 0.02) -> np.ndarray:
    """Peaks standing at least ``min_rel`` above the higher of the minima that bound them.

    Parameters
    ----------
    scan : AdaptiveScan
        Curves on a grid (``scan.h`` [unitless], ``scan.z`` [pu]).
    row : int
        Curve [unitless].
    hp, zp : ndarray
        Peak orders [unitless] and ``|Z|`` there [pu].
    min_rel : float
        Least relative prominence [unitless] (the grid peak finder's 2 %,
        :func:`resonance.harmonics.scan.find_peaks`).

    Returns
    -------
    ndarray of bool
        Which peaks are kept.

    Notes
    -----
    The topographic prominence of a peak: its height above the higher of the lowest points
    between it and higher ground on either side (as ``scipy.signal.peak_prominences``; P. Virtanen
    et al., "SciPy 1.0", Nature Methods 17, 2020).
    """
    h = np.asarray(scan.h, float)
    z = np.abs(np.asarray(scan.z[row] if hasattr(scan, "z") else scan.z_pu[row]))
    keep = np.ones(hp.size, bool)
    for i, (a, b) in enumerate(zip(hp, zp)):
        left = z[h < a]
        right = z[h > a]
        # minima between this peak and the neighbouring higher ground (or the range ends)
        lo_l = left[::-1][: np.argmax(left[::-1] > b) or left.size].min() if left.size else b
        lo_r = right[: np.argmax(right > b) or right.size].min() if right.size else b
        keep[i] = b >= (1.0 + min_rel) * max(lo_l, lo_r)
    return keep

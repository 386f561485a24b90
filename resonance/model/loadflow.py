"""Newton-Raphson fundamental load flow on plain arrays.

The study needs the fundamental bus voltages of every bank step in every supply
scenario.  The network (buses, branches, loads, generators) stays the same from
step to step; only the bank susceptances on a few diagonal entries of the bus
admittance matrix change.  :mod:`resonance.model.netmodel` therefore asks pandapower
for one load flow per session, takes its bus admittance matrix, power
injections and bus types, and re-solves here for each step.  Each session first
re-solves pandapower's own case and compares the voltages before it trusts this
solver (see :class:`resonance.model.pp_loadflow.LoadFlow`).

Nothing here imports pandapower; the inputs are a sparse matrix and arrays.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

__all__ = ["PowerFlowCase", "newton_raphson", "solve_with_shunts", "DENSE_MAX_BUS"]

#: networks up to this many buses are solved with dense matrices (faster below a few hundred)
DENSE_MAX_BUS = 200


@dataclass(frozen=True, eq=False)
class PowerFlowCase:
    """A balanced positive-sequence load-flow problem in per unit.

    Attributes
    ----------
    ybus : scipy.sparse.csr_matrix, shape (n, n)
        Bus admittance matrix at the fundamental [pu].
    sbus : ndarray of complex, shape (n,)
        Specified complex power injection, generation minus load [pu].
    v0 : ndarray of complex, shape (n,)
        Start voltages; their magnitude at reference and PV buses is the set point [pu].
    ref, pv, pq : ndarray of int
        Indices of the reference (slack), voltage-controlled and load buses [unitless].
    """

    ybus: sp.csr_matrix
    sbus: np.ndarray
    v0: np.ndarray
    ref: np.ndarray
    pv: np.ndarray
    pq: np.ndarray

    @property
    def n_bus(self) -> int:
        """Number of buses [unitless]."""
        return self.sbus.size


def _dsbus_dv(ybus: sp.csr_matrix, v: np.ndarray):
    """Partial derivatives of the bus power injections, polar coordinates.

    Notes
    -----
    With ``I = Y V`` and ``S = diag(V) conj(I)``:
    ``dS/dVa = j diag(V) conj(diag(I) - Y diag(V))`` and
    ``dS/dVm = diag(V) conj(Y diag(V/|V|)) + conj(diag(I)) diag(V/|V|)``.

    References
    ----------
    R. D. Zimmerman, "AC Power Flows, Generalized OPF Costs and their
    Derivatives using Complex Matrix Notation", MATPOWER Technical Note 2, 2010, eqs. (20)-(21).
    """
    i = ybus @ v
    dv = sp.diags(v)
    di = sp.diags(i)
    dvn = sp.diags(v / np.abs(v))
    ds_dvm = dv @ (ybus @ dvn).conj() + di.conj() @ dvn
    ds_dva = 1j * dv @ (di - ybus @ dv).conj()
    return ds_dvm, ds_dva


def _dsbus_dv_dense(y: np.ndarray, v: np.ndarray):
    """Dense form of :func:`_dsbus_dv` (same equations) for small networks."""
    i = y @ v
    vn = v / np.abs(v)
    ds_dvm = v[:, None] * np.conj(y * vn[None, :])
    ds_dvm[np.diag_indices_from(ds_dvm)] += np.conj(i) * vn
    ds_dva = -1j * v[:, None] * np.conj(y * v[None, :])
    ds_dva[np.diag_indices_from(ds_dva)] += 1j * v * np.conj(i)
    return ds_dvm, ds_dva


def newton_raphson(case: PowerFlowCase, v_start: np.ndarray | None = None, tol_pu: float = 1e-10,
                   max_iter: int = 30) -> tuple[np.ndarray, bool, int]:
    """Solve the load flow with the full Newton-Raphson method in polar coordinates.

    Parameters
    ----------
    case : PowerFlowCase
        The problem [pu].
    v_start : ndarray of complex, optional
        Start voltages [pu]; the magnitude at reference and PV buses is reset to the
        set point of ``case.v0``.  Default ``case.v0``.
    tol_pu : float
        Convergence limit on the largest active or reactive power mismatch [pu].
    max_iter : int
        Iteration limit [unitless].

    Returns
    -------
    v : ndarray of complex, shape (n,)
        Bus voltages [pu].
    converged : bool
        Whether the mismatch fell below ``tol_pu``.
    iterations : int
        Newton iterations taken [unitless].

    Notes
    -----
    Unknowns are the angles at PV and PQ buses and the magnitudes at PQ buses;
    the mismatch is ``F = [Re(dS)[pv, pq]; Im(dS)[pq]]`` with
    ``dS = V conj(Y V) - S_spec``, and each step solves ``J dx = -F``.
    Generator reactive limits are not enforced.

    References
    ----------
    W. F. Tinney and C. E. Hart, "Power Flow Solution by Newton's Method", IEEE Trans.
    PAS-86 (1967) 1449-1460; R. D. Zimmerman, C. E. Murillo-Sanchez, R. J. Thomas,
    "MATPOWER", IEEE Trans. Power Systems 26 (2011), the ``newtonpf`` formulation.
    """
    v0 = case.v0 if v_start is None else np.asarray(v_start, complex)
    vm = np.abs(v0).astype(float)
    va = np.angle(v0).astype(float)
    fixed = np.concatenate([case.ref, case.pv]).astype(int)
    vm[fixed] = np.abs(case.v0[fixed])
    v = vm * np.exp(1j * va)
    pvpq = np.concatenate([case.pv, case.pq]).astype(int)
    pq = np.asarray(case.pq, int)
    n1, n2 = pvpq.size, pq.size
    dense = case.n_bus <= DENSE_MAX_BUS
    y = case.ybus.toarray() if dense else case.ybus

    def mismatch(vv: np.ndarray) -> np.ndarray:
        ds = vv * np.conj(y @ vv) - case.sbus
        return np.concatenate([ds[pvpq].real, ds[pq].imag])

    f = mismatch(v)
    if not np.all(np.isfinite(f)):
        return v, False, 0
    if f.size == 0 or np.max(np.abs(f)) < tol_pu:
        return v, True, 0
    for it in range(1, max_iter + 1):
        ds_dvm, ds_dva = _dsbus_dv_dense(y, v) if dense else _dsbus_dv(y, v)
        j11 = ds_dva[pvpq][:, pvpq].real
        j12 = ds_dvm[pvpq][:, pq].real
        j21 = ds_dva[pq][:, pvpq].imag
        j22 = ds_dvm[pq][:, pq].imag
        try:
            if dense:
                dx = np.linalg.solve(np.block([[j11, j12], [j21, j22]]), -f)
            else:
                dx = spla.spsolve(sp.bmat([[j11, j12], [j21, j22]], format="csc"), -f)
        except (RuntimeError, ValueError, np.linalg.LinAlgError):
            return v, False, it
        if not np.all(np.isfinite(dx)):
            return v, False, it
        va[pvpq] += dx[:n1]
        vm[pq] += dx[n1:n1 + n2]
        v = vm * np.exp(1j * va)
        f = mismatch(v)
        if not np.all(np.isfinite(f)):
            return v, False, it
        if np.max(np.abs(f)) < tol_pu:
            return v, True, it
    return v, False, max_iter


def solve_with_shunts(case: PowerFlowCase, bus: np.ndarray, b_pu: np.ndarray,
                      v_start: np.ndarray | None = None, tol_pu: float = 1e-10) -> tuple[np.ndarray, bool, int]:
    """Load flow with extra shunt susceptances added to the diagonal.

    Parameters
    ----------
    case : PowerFlowCase
        The problem without the extra shunts [pu].
    bus : ndarray of int, shape (k,)
        Bus of each extra shunt (repeats add) [unitless].
    b_pu : ndarray, shape (k,)
        Susceptance of each shunt at 1 pu voltage, capacitive positive [pu]
        (a capacitor of ``Q`` kvar at nominal voltage is ``Q / 1000 / base_mva``).
    v_start : ndarray of complex, optional
        Start voltages [pu].
    tol_pu : float
        Convergence limit on the power mismatch [pu].

    Returns
    -------
    (v, converged, iterations)
        As :func:`newton_raphson`.

    Notes
    -----
    A constant-susceptance shunt adds ``j B`` to ``Y[k, k]``; its reactive output at
    voltage ``|V|`` is ``B |V|^2``.

    References
    ----------
    J. J. Grainger and W. D. Stevenson, Power System Analysis, McGraw-Hill 1994,
    sec. 7.4 (bus admittance matrix) and ch. 9 (power-flow solutions).
    """
    bus = np.asarray(bus, int)
    b = np.asarray(b_pu, float)
    if bus.size:
        n = case.n_bus
        add = sp.csr_matrix((1j * b, (bus, bus)), shape=(n, n))
        case = PowerFlowCase(ybus=(case.ybus + add).tocsr(), sbus=case.sbus, v0=case.v0,
                             ref=case.ref, pv=case.pv, pq=case.pq)
    return newton_raphson(case, v_start=v_start, tol_pu=tol_pu)

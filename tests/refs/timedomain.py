"""Outside reference: periodic steady state of a bus with a capacitor bank, simulated in time.

This module is one of the *independent* references that the tests of ``resonance`` compare
against. It imports nothing from ``resonance`` and uses no phasor algebra to build its answer:
it writes the state equations of the circuit below, integrates them over one fundamental
period with :func:`scipy.integrate.solve_ivp` (LSODA by default), and extracts per-order phasors with an FFT of
the sampled waveforms.

Circuit (single-phase equivalent, line-to-neutral, SI units)
-----------------------------------------------------------
::

    e(t) --R_s--L_s--R_t--L_t--+-- bus --+----------------+-----------+
                               |         |                |           |
                       i_inj(t) ^      L_d, R_d        R_load      L_load
                               |         |  (optional)  (optional)  (optional)
                               |         C  (v_cap across C)
                               |         |                |           |
    ground --------------------+---------+----------------+-----------+

* ``e(t) = sqrt2*E*sin(w1 t) + sum_h sqrt2*|E_h|*sin(h w1 t + arg E_h)`` is the source EMF
  (fundamental plus optional background harmonics) [V], ``w1 = 2 pi f1`` [rad/s].
* ``R_s + L_s`` (supply) and ``R_t + L_t`` (transformer, referred to the bus side) are in
  series; only their sums enter the equations. ``L_s + L_t`` must be > 0.
* The bank is ``C`` alone (``L_d = R_d = 0``), ``C`` with a series resistor, or a detuned
  bank ``L_d + R_d`` in series with ``C``.
* The optional linear load is ``R_load`` in parallel with ``L_load`` (either may be absent).
* ``i_inj(t) = sum_h sqrt2*|I_h|*sin(h w1 t + arg I_h)`` [A] is a current source that drives
  current **from ground INTO the bus node** ("injection into the bus node"). A drive that
  *draws* a harmonic current ``I_draw`` from the bus is the injection ``I_h = -I_draw``.

Sign conventions of the outputs
-------------------------------
* ``v_bus_v``: bus-to-ground voltage [V]. ``v_cap_v``: voltage across the capacitor's own
  terminals (after the detuning reactor) [V].
* ``i_supply_a``: current in the supply/transformer branch, flowing from the source **toward**
  the bus [A]. ``i_bank_a``: current flowing from the bus **into** the bank [A].
  ``i_load_a``: current flowing from the bus into the linear load [A].
* Phasors are rms and **sine-referenced**: the phasor ``X`` stands for
  ``x(t) = sqrt2*|X|*sin(h w1 t + arg X)``. With this reference an inductor obeys
  ``V = j h w1 L I`` as usual, so ``V_bus(h) = Z_parallel(h) * I_h`` for an injection at a
  bus whose source EMF is zero at order ``h``.

Method (periodic steady state by the monodromy matrix)
------------------------------------------------------
The circuit is linear and time-invariant with forcing of period ``T = 1/f1``:
``x' = A x + B u(t)``. Over one period, ``x(T) = Phi x(0) + x_f`` with ``Phi = expm(A T)``
(the monodromy matrix) and ``x_f`` the state reached at ``T`` from ``x(0) = 0`` (integrated by
``solve_ivp``). The periodic initial state solves ``(I - Phi) x0 = x_f`` exactly, so no
start-up transient has to die out. One more period is then integrated from ``x0`` and
sampled at ``n_samples`` equally spaced instants; the periodicity residual
``|x(T) - x0| / max|x|`` is reported. Because the steady state contains only the forced
integer orders, the FFT of one period has no leakage.

An alternative ``method="expm"`` propagates the state augmented by oscillator states
``(cos h w1 t, sin h w1 t)`` with the exact matrix exponential of one sample step; the
self-tests check both methods against each other.

References
----------
C.-T. Chen, *Linear System Theory and Design*, 3rd ed., Oxford, 1999, section 4.2 (solution
of ``x' = A x + B u`` and its discretisation); T. J. Aprille and T. N. Trick, "Steady-state
analysis of nonlinear circuits with periodic inputs", Proc. IEEE 60(1), 1972 (shooting for the
periodic initial condition with the monodromy matrix) [from memory]; scipy.integrate.solve_ivp
with LSODA (L. R. Petzold, "Automatic selection of methods for solving stiff and nonstiff
systems of ordinary differential equations", SIAM J. Sci. Stat. Comput. 4(1), 1983).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field, fields
from types import MappingProxyType
from typing import Any

import numpy as np
from scipy.integrate import solve_ivp
from scipy.linalg import expm

__all__ = [
    "TimeDomainCircuit",
    "PeriodicSteadyState",
    "OUTPUTS",
    "steady_state",
    "simulate",
]

#: names of the simulated outputs, in the order of ``PeriodicSteadyState.y``
OUTPUTS: tuple[str, ...] = ("v_bus_v", "v_cap_v", "i_bank_a", "i_supply_a", "i_load_a")

_SQRT2 = math.sqrt(2.0)
# forcing signals u(t): 0 = source EMF e [V], 1 = injection i_inj [A], 2 = d(i_inj)/dt [A/s]
_U_E, _U_I, _U_DI = 0, 1, 2
_N_U = 3


def _phasor_map(value: Any, name: str, min_order: int) -> Mapping[int, complex]:
    """Normalise ``{h: phasor}`` (or pairs) into a read-only ``{int: complex}`` mapping."""
    items = value.items() if isinstance(value, Mapping) else value
    out: dict[int, complex] = {}
    for item in items:
        h, x = item
        if isinstance(h, bool) or int(h) != h or int(h) < min_order:
            raise ValueError(f"{name}: order {h!r} must be an integer >= {min_order}")
        if isinstance(x, tuple):
            if len(x) != 2:
                raise ValueError(f"{name}[{h}]: give a complex phasor or (rms, phase_rad)")
            x = complex(float(x[0]) * np.exp(1j * float(x[1])))
        xc = complex(x)
        if not (np.isfinite(xc.real) and np.isfinite(xc.imag)):
            raise ValueError(f"{name}[{h}]: phasor {x!r} is not finite")
        if int(h) in out:
            raise ValueError(f"{name}: order {h} given twice")
        out[int(h)] = xc
    return MappingProxyType(dict(sorted(out.items())))


@dataclass(frozen=True)
class TimeDomainCircuit:
    """Data of the single-phase-equivalent circuit (see the module docstring).

    Parameters
    ----------
    f1_hz : float
        Fundamental frequency [Hz].
    e_rms_v : float
        Fundamental source EMF, line-to-neutral rms, phase 0 (sine reference) [V]; 0 shorts it.
    r_s_ohm, l_s_h : float
        Supply resistance [ohm] and inductance [H].
    r_t_ohm, l_t_h : float
        Transformer resistance [ohm] and leakage inductance [H], referred to the bus side.
    c_f : float
        Bank capacitance per phase (line-to-neutral, i.e. star equivalent) [F]; > 0.
    l_d_h, r_d_ohm : float, optional
        Series (detuning) reactor inductance [H] and resistance [ohm] of the bank; 0 = none.
    r_load_ohm, l_load_h : float or None, optional
        Parallel linear load: resistance [ohm] and inductance [H]; None = absent.
    injection_a : mapping of int to complex, optional
        Harmonic current injected INTO the bus, ``{h: I_h}`` rms phasor, sine reference [A].
        A value may also be ``(rms [A], phase [rad])``.
    background_v : mapping of int to complex, optional
        Background harmonic EMF of the source, ``{h: E_h}`` (h >= 2) rms phasor, sine
        reference [V]; also ``(rms [V], phase [rad])``.
    """

    f1_hz: float
    e_rms_v: float
    r_s_ohm: float
    l_s_h: float
    r_t_ohm: float
    l_t_h: float
    c_f: float
    l_d_h: float = 0.0
    r_d_ohm: float = 0.0
    r_load_ohm: float | None = None
    l_load_h: float | None = None
    injection_a: Mapping[int, complex] = field(default_factory=dict)
    background_v: Mapping[int, complex] = field(default_factory=dict)

    def __post_init__(self) -> None:
        def pos(name: str, allow_zero: bool) -> None:
            v = getattr(self, name)
            if v is None or not np.isfinite(float(v)) or float(v) < 0.0 or (
                not allow_zero and float(v) == 0.0
            ):
                raise ValueError(f"{name}: {v!r} must be finite and {'>=' if allow_zero else '>'} 0")

        pos("f1_hz", False)
        pos("c_f", False)
        for name in ("r_s_ohm", "l_s_h", "r_t_ohm", "l_t_h", "l_d_h", "r_d_ohm"):
            pos(name, True)
        for name in ("r_load_ohm", "l_load_h"):
            if getattr(self, name) is not None:
                pos(name, False)
        if not np.isfinite(float(self.e_rms_v)):
            raise ValueError(f"e_rms_v: {self.e_rms_v!r} must be finite")
        if self.l_s_h + self.l_t_h <= 0.0:
            raise ValueError("l_s_h, l_t_h: the supply branch needs L_s + L_t > 0 [H]")
        object.__setattr__(self, "injection_a", _phasor_map(self.injection_a, "injection_a", 1))
        object.__setattr__(self, "background_v", _phasor_map(self.background_v, "background_v", 2))

    @classmethod
    def from_mapping(cls, params: Mapping[str, Any]) -> TimeDomainCircuit:
        """Build from a plain dict with the field names of this class (units as above)."""
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(params) - known)
        if unknown:
            raise ValueError(f"params: unknown field(s) {unknown}; known: {sorted(known)}")
        return cls(**dict(params))


@dataclass(frozen=True)
class _StateSpace:
    """``x' = A x + B u``, outputs ``y = C x + D u`` (rows in the order of OUTPUTS)."""

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: np.ndarray


class _Lin:
    """Row vectors over ``[x; u]`` for building linear expressions by name."""

    def __init__(self, states: list[str]) -> None:
        self.states = states
        self.n = len(states)

    def x(self, name: str) -> np.ndarray:
        r = np.zeros(self.n + _N_U)
        r[self.states.index(name)] = 1.0
        return r

    def u(self, k: int) -> np.ndarray:
        r = np.zeros(self.n + _N_U)
        r[self.n + k] = 1.0
        return r

    def zero(self) -> np.ndarray:
        return np.zeros(self.n + _N_U)


def _state_space(p: TimeDomainCircuit) -> _StateSpace:
    """Assemble the state equations of the three bank topologies (see Notes of steady_state)."""
    r_ser = p.r_s_ohm + p.r_t_ohm
    l_ser = p.l_s_h + p.l_t_h
    g = 0.0 if p.r_load_ohm is None else 1.0 / p.r_load_ohm
    has_ll = p.l_load_h is not None
    detuned = p.l_d_h > 0.0

    if not detuned:
        states = ["v_c", "i_s"] + (["i_l"] if has_ll else [])
    else:
        # the supply current is not a state: KCL gives i_s = G v + i_d + i_l - i_inj. With a
        # load resistor the bus voltage is a state (the fast mode G v' = -S v + ... is what a
        # large R_load adds); without one, v is algebraic (inductor cut-set at the bus).
        states = ["i_d", "v_c"] + (["i_l"] if has_ll else []) + (["v"] if g > 0.0 else [])
    L = _Lin(states)
    i_l = L.x("i_l") if has_ll else L.zero()
    e, i_inj, di_inj = L.u(_U_E), L.u(_U_I), L.u(_U_DI)
    deriv: dict[str, np.ndarray] = {}

    if not detuned and p.r_d_ohm == 0.0:
        # capacitor straight on the bus: v = v_c, C v' = i_s + i_inj - G v - i_l
        v = L.x("v_c")
        i_s = L.x("i_s")
        i_bank = i_s + i_inj - g * v - i_l
        deriv["v_c"] = i_bank / p.c_f
    elif not detuned:
        # R_d + C branch: KCL  i_s + i_inj = (v - v_c)/R_d + G v + i_l  gives v
        i_s = L.x("i_s")
        v = (i_s + i_inj - i_l + L.x("v_c") / p.r_d_ohm) / (g + 1.0 / p.r_d_ohm)
        i_bank = (v - L.x("v_c")) / p.r_d_ohm
        deriv["v_c"] = i_bank / p.c_f
    else:
        i_d = L.x("i_d")
        # differentiate KCL  i_s + i_inj = i_d + i_l + G v  and insert the inductor equations:
        # G v' + S v = (e - R_ser i_s)/L_ser + (R_d i_d + v_c)/L_d + di_inj,
        # S = 1/L_ser + 1/L_d + 1/L_load
        s = 1.0 / l_ser + 1.0 / p.l_d_h + (1.0 / p.l_load_h if has_ll else 0.0)  # type: ignore[operator]
        v_state = L.x("v") if g > 0.0 else L.zero()
        i_s = g * v_state + i_d + i_l - i_inj
        rhs = (e - r_ser * i_s) / l_ser + (p.r_d_ohm * i_d + L.x("v_c")) / p.l_d_h + di_inj
        if g > 0.0:
            v = v_state
            deriv["v"] = (rhs - s * v) / g
        else:
            v = rhs / s
        i_bank = i_d
        deriv["i_d"] = (v - p.r_d_ohm * i_d - L.x("v_c")) / p.l_d_h
        deriv["v_c"] = i_d / p.c_f
    if "i_s" in states:
        deriv["i_s"] = (e - r_ser * i_s - v) / l_ser
    if has_ll:
        deriv["i_l"] = v / p.l_load_h  # type: ignore[operator]

    rows = np.array([deriv[s_] for s_ in states])
    outs = np.array([v, L.x("v_c"), i_bank, i_s, g * v + i_l])
    n = L.n
    return _StateSpace(a=rows[:, :n], b=rows[:, n:], c=outs[:, :n], d=outs[:, n:])


def _forcing(p: TimeDomainCircuit) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Orders and cos/sin coefficients of u(t) = sum_h a_h cos(h w t) + b_h sin(h w t).

    ``sqrt2*|X| sin(h w t + arg X) = sqrt2 (Re X sin + Im X cos)``; its derivative is
    ``sqrt2 h w (Re X cos - Im X sin)``.
    """
    w1 = 2.0 * math.pi * p.f1_hz
    coef: dict[int, tuple[np.ndarray, np.ndarray]] = {}

    def slot(h: int) -> tuple[np.ndarray, np.ndarray]:
        return coef.setdefault(h, (np.zeros(_N_U), np.zeros(_N_U)))

    a, b = slot(1)
    b[_U_E] += _SQRT2 * float(p.e_rms_v)
    for h, x in p.background_v.items():
        a, b = slot(h)
        a[_U_E] += _SQRT2 * x.imag
        b[_U_E] += _SQRT2 * x.real
    for h, x in p.injection_a.items():
        a, b = slot(h)
        a[_U_I] += _SQRT2 * x.imag
        b[_U_I] += _SQRT2 * x.real
        a[_U_DI] += _SQRT2 * h * w1 * x.real
        b[_U_DI] += -_SQRT2 * h * w1 * x.imag
    orders = np.array(sorted(coef), dtype=int)
    ca = np.array([coef[h][0] for h in orders])
    cb = np.array([coef[h][1] for h in orders])
    return orders, ca, cb


@dataclass(frozen=True)
class PeriodicSteadyState:
    """One sampled period of the periodic steady state.

    Attributes
    ----------
    f1_hz : float
        Fundamental frequency [Hz].
    t_s : numpy.ndarray, shape (n_samples,)
        Sample instants ``k T / n_samples``, k = 0 .. n_samples-1 [s].
    y : numpy.ndarray, shape (len(OUTPUTS), n_samples)
        Output waveforms in the order of :data:`OUTPUTS` [V] or [A].
    periodicity_residual : float
        ``max|x(T) - x(0)| / max|x|`` over the states of the last integrated period [unitless].
    method : str
        "solve_ivp" or "expm" [unitless].
    integrator : str
        The ``solve_ivp`` method used ("" for "expm") [unitless].
    """

    f1_hz: float
    t_s: np.ndarray
    y: np.ndarray
    periodicity_residual: float
    method: str
    integrator: str

    def waveform(self, name: str) -> np.ndarray:
        """Samples of output ``name`` (one of :data:`OUTPUTS`) [V] or [A]."""
        return self.y[OUTPUTS.index(name)]

    def phasors(self, orders: Iterable[int]) -> dict[str, np.ndarray]:
        """Rms, sine-referenced phasors per order from the FFT of the period [V] or [A].

        Notes
        -----
        With ``c_h = (2/N) sum_k y_k exp(-j 2 pi h k / N)``, ``y(t) = |c_h| cos(h w t + arg c_h)``
        per order, and the sine-referenced rms phasor is ``X_h = j c_h / sqrt2``.
        """
        h = np.asarray(list(orders), dtype=int)
        n = self.y.shape[1]
        if h.ndim != 1 or h.size == 0 or np.any(h < 1) or np.any(h >= n // 2):
            raise ValueError(f"orders: need integers 1 <= h < {n // 2}, got {h.tolist()}")
        c = np.fft.rfft(self.y, axis=1) * (2.0 / n)
        x = 1j * c[:, h] / _SQRT2
        return {name: x[i].copy() for i, name in enumerate(OUTPUTS)}


def steady_state(
    params: TimeDomainCircuit | Mapping[str, Any],
    *,
    n_samples: int = 4096,
    method: str = "solve_ivp",
    rtol: float = 1e-10,
    integrator: str = "LSODA",
) -> PeriodicSteadyState:
    """Periodic steady state of the circuit, sampled over one fundamental period.

    Parameters
    ----------
    params : TimeDomainCircuit or mapping
        Circuit data; a mapping uses the field names of :class:`TimeDomainCircuit` (SI units:
        [Hz], [V], [ohm], [H], [F], [A]).
    n_samples : int, optional
        Samples per period; every forced order must be below ``n_samples / 2`` [unitless].
    method : {"solve_ivp", "expm"}, optional
        ``solve_ivp`` integration with the monodromy shooting step, or exact exponential
        stepping of the state augmented by oscillator states [unitless].
    rtol : float, optional
        Relative tolerance of ``solve_ivp`` [unitless]; the absolute tolerance per state is
        ``rtol`` times 1e-3 of that state's peak found in a first, coarse pass.
    integrator : str, optional
        ``solve_ivp`` method [unitless]. "LSODA" (default) switches between Adams and BDF by
        itself, so it stays fast when a large load resistor with a detuning reactor makes the
        system stiff; "Radau" and "BDF" also work (slower); "DOP853"/"RK45" only for
        non-stiff circuits.

    Returns
    -------
    PeriodicSteadyState
        Sampled waveforms of :data:`OUTPUTS` [V], [A].

    Notes
    -----
    States: capacitor voltage ``v_c`` [V], supply current ``i_s`` [A] (bank without
    reactor), reactor current ``i_d`` [A], load-inductor current ``i_l`` [A], bus voltage ``v``
    [V] (detuned bank with a load resistor). With ``L = L_s + L_t``, ``R = R_s + R_t``,
    ``G = 1/R_load``, bus voltage ``v``:

    * ``L i_s' = e - R i_s - v``;  ``L_load i_l' = v``;  ``C v_c' = i_bank``.
    * Plain bank: ``v = v_c``, ``i_bank = i_s + i_inj - G v - i_l``.
    * Bank with ``R_d`` only: ``v = (i_s + i_inj - i_l + v_c/R_d) / (G + 1/R_d)``,
      ``i_bank = (v - v_c)/R_d``.
    * Detuned bank: ``L_d i_d' = v - R_d i_d - v_c``, ``i_bank = i_d``. The supply current
      follows from KCL, ``i_s = G v + i_d + i_l - i_inj``; differentiating KCL gives
      ``G v' + S v = (e - R i_s)/L + (R_d i_d + v_c)/L_d + d(i_inj)/dt`` with
      ``S = 1/L + 1/L_d + 1/L_load``. With a load resistor ``v`` is a state (so a large
      ``R_load`` costs no cancellation ``v = (i_s + i_inj - i_d - i_l)/G``); without one, the
      inductors and the current source form a cut-set and ``v`` is algebraic (``G = 0``).

    Periodic steady state: ``(I - expm(A T)) x0 = x_f`` (see the module docstring).

    References
    ----------
    C.-T. Chen, *Linear System Theory and Design*, 3rd ed., 1999, section 4.2.
    """
    p = params if isinstance(params, TimeDomainCircuit) else TimeDomainCircuit.from_mapping(params)
    if int(n_samples) != n_samples or n_samples < 8:
        raise ValueError(f"n_samples: {n_samples!r} must be an integer >= 8")
    n_samples = int(n_samples)
    ss = _state_space(p)
    orders, ca, cb = _forcing(p)
    if orders.max() >= n_samples // 2:
        raise ValueError(f"n_samples: {n_samples} samples cannot carry order {orders.max()}")
    period = 1.0 / p.f1_hz
    w = 2.0 * math.pi * p.f1_hz * orders
    n = ss.a.shape[0]
    t_s = np.arange(n_samples) * (period / n_samples)

    def u_of(t: np.ndarray) -> np.ndarray:
        t = np.atleast_1d(t)
        return ca.T @ np.cos(np.outer(w, t)) + cb.T @ np.sin(np.outer(w, t))  # (3, len(t))

    if method == "expm":
        # oscillator states z_h = (cos h w t, sin h w t): z_h' = h w (-sin, cos)
        m = len(orders)
        a_aug = np.zeros((n + 2 * m, n + 2 * m))
        a_aug[:n, :n] = ss.a
        for k in range(m):
            a_aug[:n, n + 2 * k] = ss.b @ ca[k]
            a_aug[:n, n + 2 * k + 1] = ss.b @ cb[k]
            a_aug[n + 2 * k, n + 2 * k + 1] = -w[k]
            a_aug[n + 2 * k + 1, n + 2 * k] = w[k]
        z0 = np.zeros(2 * m)
        z0[0::2] = 1.0
        phi_t = expm(a_aug * period)
        x0 = np.linalg.solve(np.eye(n) - phi_t[:n, :n], phi_t[:n, n:] @ z0)
        step = expm(a_aug * (period / n_samples))
        xa = np.empty((n + 2 * m, n_samples + 1))
        xa[:, 0] = np.concatenate([x0, z0])
        for k in range(n_samples):
            xa[:, k + 1] = step @ xa[:, k]
        x = xa[:n, :n_samples]
        x_end = xa[:n, n_samples]
    elif method == "solve_ivp":
        a = ss.a
        b_cos, b_sin = ss.b @ ca.T, ss.b @ cb.T  # (n, len(orders))

        def fun(t: float, x: np.ndarray) -> np.ndarray:
            return a @ x + b_cos @ np.cos(w * t) + b_sin @ np.sin(w * t)

        def jac(t: float, x: np.ndarray) -> np.ndarray:
            return a

        options: dict[str, Any] = {"method": integrator}
        if integrator in ("Radau", "BDF", "LSODA"):
            options["jac"] = jac
        phi = expm(a * period)

        def shoot(atol: np.ndarray | float, tol: float) -> tuple[np.ndarray, Any]:
            forced = solve_ivp(fun, (0.0, period), np.zeros(n), rtol=tol, atol=atol, **options)
            if not forced.success:
                raise RuntimeError(f"solve_ivp failed on the forced response: {forced.message}")
            x0_ = np.linalg.solve(np.eye(n) - phi, forced.y[:, -1])
            sol = solve_ivp(fun, (0.0, period), x0_, rtol=tol, atol=atol,
                            t_eval=np.append(t_s, period), **options)
            if not sol.success:
                raise RuntimeError(f"solve_ivp failed on the periodic solution: {sol.message}")
            return x0_, sol

        # coarse pass to learn each state's size, then the tight pass with atol scaled to it
        _, coarse = shoot(1e-9, 1e-6)
        peak = np.max(np.abs(coarse.y), axis=1)
        scale = np.where(peak > 0.0, peak, max(float(peak.max()), 1e-30))
        x0, sol = shoot(rtol * 1e-3 * scale, rtol)
        x = sol.y[:, :n_samples]
        x_end = sol.y[:, n_samples]
    else:
        raise ValueError(f"method: {method!r} is not 'solve_ivp' or 'expm'")

    y = ss.c @ x + ss.d @ u_of(t_s)
    x_peak = float(np.max(np.abs(x)))
    residual = float(np.max(np.abs(x_end - x0)) / x_peak) if x_peak > 0.0 else 0.0
    return PeriodicSteadyState(f1_hz=float(p.f1_hz), t_s=t_s, y=y,
                               periodicity_residual=residual, method=method,
                               integrator=integrator if method == "solve_ivp" else "")


def simulate(
    params: TimeDomainCircuit | Mapping[str, Any],
    orders: Iterable[int],
    *,
    n_samples: int = 4096,
    method: str = "solve_ivp",
    rtol: float = 1e-10,
    integrator: str = "LSODA",
) -> dict[str, np.ndarray]:
    """Per-order rms phasors of the periodic steady state (time-domain simulation + FFT).

    Parameters
    ----------
    params : TimeDomainCircuit or mapping
        Circuit data (see :class:`TimeDomainCircuit`; SI units).
    orders : iterable of int
        Harmonic orders to report, ``1 <= h < n_samples/2`` [unitless].
    n_samples, method, rtol, integrator
        As in :func:`steady_state`.

    Returns
    -------
    dict of str to numpy.ndarray of complex, shape (len(orders),)
        ``v_bus_v`` [V], ``v_cap_v`` [V], ``i_bank_a`` [A], ``i_supply_a`` [A],
        ``i_load_a`` [A]: rms phasors, sine reference (``x = sqrt2 |X| sin(h w1 t + arg X)``),
        signs as in the module docstring.

    References
    ----------
    C.-T. Chen, *Linear System Theory and Design*, 3rd ed., 1999, section 4.2.
    """
    pss = steady_state(params, n_samples=n_samples, method=method, rtol=rtol,
                       integrator=integrator)
    return pss.phasors(orders)

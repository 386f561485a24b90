"""Detuned stages: the rating arithmetic of a series reactor and its capacitors, and stage splits.

Pure functions on plain numbers and arrays (no files, no study runs).

References
----------
IEEE Std 1531-2020 (series L-C branch); IEEE Std 18-2002 (capacitor ratings);
/work/shared/REFERENCES.md "Detuned (series reactor) banks" (p, n, U_C, Q_net).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["DetunedStep", "detuned_step", "nameplate_kvar", "capacitor_rating_kv", "next_ratings",
           "stage_share_max", "rearrange_stages"]

# ----------------------------------------------------------------------------- pure rating arithmetic

@dataclass(frozen=True, eq=False)
class DetunedStep:
    """Ratings of detuned stages (per phase, wye equivalent).

    Attributes
    ----------
    x_c_ohm : ndarray
        Capacitor reactance at the fundamental ``U_CR^2 / Q_CR`` [ohm].
    x_l_ohm : ndarray
        Reactor reactance ``p X_C`` [ohm].
    l_mh : ndarray
        Reactor inductance [mH].
    n : float
        Series tuning order ``1/sqrt(p)`` [unitless].
    f_tuning_hz : float
        Series tuning frequency [Hz].
    u_c1_kv : float
        Fundamental capacitor voltage at the bus voltage, ``U/(1-p)`` [kV].
    q_net_kvar : ndarray
        Net output of each stage at the bus voltage [kvar].
    """

    x_c_ohm: np.ndarray
    x_l_ohm: np.ndarray
    l_mh: np.ndarray
    n: float
    f_tuning_hz: float
    u_c1_kv: float
    q_net_kvar: np.ndarray


def detuned_step(q_cap_kvar, u_cap_kv: float, p: float, f_hz: float, u_bus_kv: float) -> DetunedStep:
    """Reactor and capacitor figures of detuned stages.

    Parameters
    ----------
    q_cap_kvar : float or array_like
        Capacitor nameplate of each stage at ``u_cap_kv`` [kvar].
    u_cap_kv : float
        Capacitor rated voltage, line to line [kV].
    p : float
        Detuning factor ``X_L / X_C`` [unitless], 0 < p < 1.
    f_hz : float
        Fundamental frequency [Hz].
    u_bus_kv : float
        Bus voltage, line to line [kV].

    Returns
    -------
    DetunedStep

    Notes
    -----
    ``X_C = U_CR^2 / Q_CR`` (wye equivalent per phase), ``X_L = p X_C``,
    ``L = X_L / (2 pi f)``, ``n = 1/sqrt(p)``, ``U_C = U / (1 - p)``,
    ``Q_net = Q_CR (U/U_CR)^2 / (1 - p)``.

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks" [published]; IEEE Std 1531-2020
    (series L-C branch).
    """
    q = np.atleast_1d(np.asarray(q_cap_kvar, float))
    if not (0.0 < p < 1.0):
        raise ValueError(f"detuning factor p = {p} must be between 0 and 1")
    x_c = 1000.0 * u_cap_kv**2 / q
    x_l = p * x_c
    n = 1.0 / math.sqrt(p)
    return DetunedStep(x_c_ohm=x_c, x_l_ohm=x_l, l_mh=1000.0 * x_l / (2.0 * math.pi * f_hz), n=n,
                       f_tuning_hz=n * f_hz, u_c1_kv=u_bus_kv / (1.0 - p),
                       q_net_kvar=q * (u_bus_kv / u_cap_kv) ** 2 / (1.0 - p))


def nameplate_kvar(q_net_kvar, u_cap_kv: float, u_bus_kv: float, p: float) -> np.ndarray:
    """Capacitor nameplate that delivers a given net output at the bus.

    Parameters
    ----------
    q_net_kvar : float or array_like
        Wanted net output of the detuned stage at ``u_bus_kv`` [kvar].
    u_cap_kv : float
        Capacitor rated voltage [kV].
    u_bus_kv : float
        Bus voltage [kV].
    p : float
        Detuning factor [unitless].

    Returns
    -------
    ndarray
        ``Q_CR = Q_net (U_CR/U)^2 (1 - p)`` [kvar].

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks", inverse of
    ``Q_net = Q_CR (U/U_CR)^2 / (1 - p)`` [published].
    """
    return np.asarray(q_net_kvar, float) * (u_cap_kv / u_bus_kv) ** 2 * (1.0 - p)


def capacitor_rating_kv(u_need_kv: float, standard_kv, mv_step_kv: float = 0.1) -> float:
    """Lowest rated voltage that can be bought at or above a need.

    Parameters
    ----------
    u_need_kv : float
        Needed capacitor voltage [kV].
    standard_kv : sequence of float
        Ratings on offer [kV].
    mv_step_kv : float
        Above the list (medium voltage, made to order): round up to this step [kV].

    Returns
    -------
    float
        The lowest listed rating at or above the need; above the list, the need
        rounded up to a multiple of ``mv_step_kv`` [kV].

    Notes
    -----
    Common practice (from memory): low-voltage units come in standard ratings,
    medium-voltage banks are assembled from units made to order.
    """
    tol = 1e-9
    for kv in sorted(standard_kv):
        if kv >= u_need_kv - tol:
            return float(kv)
    return float(round(math.ceil(u_need_kv / mv_step_kv - tol) * mv_step_kv, 6))


def next_ratings(kv0: float, standard_kv, mv_step_kv: float, count: int) -> list[float]:
    out = [kv0]
    while len(out) <= count:
        out.append(capacitor_rating_kv(out[-1] * (1.0 + 1e-6) + 1e-9, standard_kv, mv_step_kv))
    return out


def stage_share_max(stage_kvar, step_values: np.ndarray) -> np.ndarray:
    """Largest share of a step quantity that each stage carries.

    Parameters
    ----------
    stage_kvar : array_like, shape (N,)
        Stage sizes (all stages of one detuning factor) [kvar].
    step_values : ndarray, shape (N,) or (N, m)
        A current of the whole bank at steps 1..N [A].

    Returns
    -------
    ndarray, shape (N,) or (N, m)
        For stage k the maximum over steps s >= k of ``value_s Q_k / sum_{j<=s} Q_j`` [A].

    Notes
    -----
    Stages with equal p are parallel branches of equal shape, so they share the
    bank current in proportion to their capacitance (derived).
    """
    q = np.asarray(stage_kvar, float)
    v = np.asarray(step_values, float)
    cum = np.cumsum(q)
    share = np.where(np.arange(q.size)[:, None] <= np.arange(q.size)[None, :], q[:, None] / cum[None, :], 0.0)
    if v.ndim == 1:
        return np.max(share * v[None, :], axis=1)
    return np.max(share[:, :, None] * v[None, :, :], axis=1)


def rearrange_stages(allowed: np.ndarray, n_max: int) -> tuple[int, ...] | None:
    """Split ``U`` units into at most ``n_max`` stages whose cumulative states are all allowed.

    Parameters
    ----------
    allowed : ndarray of bool, shape (U,)
        ``allowed[c - 1]``: the state with ``c`` units in service is acceptable [unitless].
    n_max : int
        Most stages [unitless].

    Returns
    -------
    tuple of int or None
        Stage sizes in units (first switched first); None when no split exists.

    Notes
    -----
    Lexicographic choice: the largest stage as small as possible (fine
    control), then the smallest stage as large as possible (no token stages),
    then as many stages as allowed.  Solved by a reachability table over
    (stages used, units in service) for each trial pair of stage bounds.
    """
    a = np.asarray(allowed, bool)
    u = int(a.size)
    if u == 0 or not a[-1] or n_max < 1:
        return None
    ok = np.concatenate([[True], a])  # state 0 (bank off) is always reachable

    def table(lo: int, hi: int) -> np.ndarray:
        # reach[k, c]: c units in service after exactly k stages of lo..hi units, every state allowed
        reach = np.zeros((n_max + 1, u + 1), bool)
        reach[0, 0] = True
        for k in range(1, n_max + 1):
            prev = reach[k - 1]
            cur = np.zeros(u + 1, bool)
            for step in range(lo, hi + 1):
                cur[step:] |= prev[: u + 1 - step]
            reach[k] = cur & ok
        return reach

    for hi in range(1, u + 1):
        if not table(1, hi)[:, u].any():
            continue
        for lo in range(hi, 0, -1):
            reach = table(lo, hi)
            ks = np.nonzero(reach[:, u])[0]
            if ks.size == 0:
                continue
            k = int(ks.max())
            sizes, c = [], u
            for kk in range(k, 0, -1):  # walk back through reachable states
                for step in range(hi, lo - 1, -1):
                    if c - step >= 0 and reach[kk - 1, c - step]:
                        sizes.append(step)
                        c -= step
                        break
            return tuple(reversed(sizes))
    return None  # pragma: no cover - hi = u always reaches u in one stage



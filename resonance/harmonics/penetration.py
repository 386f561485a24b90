"""Harmonic penetration: voltages and currents at every order for every bank step.

Harmonic sources are current injections (Norton), the supply's background
distortion is a voltage behind the supply impedance (converted to its Norton
equivalent at the supply bus).  Each contribution is solved on its own with
the step's admittance in service (rank-one update of the step-free solution),
then the contributions are combined order by order by the chosen summation rule.

References
----------
IEEE Std 519-2014, annex on harmonic analysis (current-injection method);
J. Arrillaga, N. R. Watson, *Power System Harmonics*, 2nd ed., Wiley 2003,
ch. 8 (harmonic penetration by nodal analysis).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from resonance.model.admittance import resistance_factor
from resonance.model.network import NetworkArrays
from resonance.harmonics.scan import ModelSettings, impedance_columns, step_update
from resonance.standards.spectra import combine

__all__ = ["Injection", "PenetrationResult", "penetrate"]


@dataclass(frozen=True, eq=False)
class Injection:
    """Harmonic excitation of the network.

    Attributes
    ----------
    h : ndarray of int, shape (n_h,)
        Harmonic orders (>= 2) [unitless].
    src_bus : ndarray of int, shape (n_src,)
        Model bus of each harmonic current source [unitless].
    src_i_pu : ndarray, shape (n_src, n_h)
        Current magnitude injected by each source [pu of the system base current at its bus].
    src_phase_deg : ndarray, shape (n_src, n_h) or None
        Angles of the source currents, when measured [deg].
    bg_v_pu : ndarray, shape (n_h,)
        Background voltage behind the supply impedance [pu of the supply bus nominal].
    bg_phase_deg : ndarray, shape (n_h,) or None
        Angles of the background voltage [deg].
    """

    h: np.ndarray
    src_bus: np.ndarray
    src_i_pu: np.ndarray
    src_phase_deg: np.ndarray | None
    bg_v_pu: np.ndarray
    bg_phase_deg: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class PenetrationResult:
    """Harmonic voltages and currents of every step of one bank (combined magnitudes).

    Attributes
    ----------
    h : ndarray, shape (n_h,)
        Orders [unitless].
    rows : ndarray of int
        Model buses whose voltages are kept [unitless].
    v_bus_pu : ndarray, shape (N + 1, n_h, len(rows))
        Harmonic voltage magnitude, step 0 = bank off [pu of bus nominal].
    v_cap_pu : ndarray, shape (N, n_h)
        Harmonic voltage across the capacitor of the bank [pu of the bus nominal]
        (equal to the bus voltage for a plain bank).
    i_bank_pu : ndarray, shape (N, n_h)
        Harmonic current in the bank [pu of the base current at the bank bus].
    i_supply_local_pu : ndarray, shape (N + 1, n_h)
        Harmonic current flowing into the supply driven by the local sources
        only (the plant's emission) [pu of the base current at the supply bus].
    """

    h: np.ndarray
    rows: np.ndarray
    v_bus_pu: np.ndarray
    v_cap_pu: np.ndarray
    i_bank_pu: np.ndarray
    i_supply_local_pu: np.ndarray


def _combine(parts: np.ndarray, rule: str, h: np.ndarray, phases: np.ndarray | None) -> np.ndarray:
    """Combine contributions along axis 0 (complex phasors) by the summation rule.

    Parameters
    ----------
    parts : ndarray, complex, shape (n_c, ..., n_h)
        Phasor of each contribution for a unit-angle excitation [pu].
    rule : str
        "arithmetic", "iec61000-3-6" or "phasor".
    h : ndarray, shape (n_h,)
        Orders [unitless].
    phases : ndarray, shape (n_c, n_h) or None
        Excitation angles for the phasor rule [deg].

    Returns
    -------
    ndarray, shape (..., n_h)
        Combined magnitude [pu].
    """
    if rule == "phasor":
        ph = np.zeros((parts.shape[0], h.size)) if phases is None else phases
        rot = np.exp(1j * np.deg2rad(ph))
        rot = rot.reshape((parts.shape[0],) + (1,) * (parts.ndim - 2) + (h.size,))
        return np.abs(np.sum(parts * rot, axis=0))
    mags = np.abs(parts)
    # move the order axis last for the library's combine; it already is
    return combine(mags, rule, h=h)


def penetrate(arr: NetworkArrays, inj: Injection, bank_bus: int, bank_y: np.ndarray, xc_pu: np.ndarray,
              settings: ModelSettings, rule: str = "arithmetic", rows: np.ndarray | None = None,
              diag_extra: np.ndarray | None = None) -> PenetrationResult:
    """Harmonic penetration for every step of one bank.

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu]; its supply (grid) impedance carries the background source.
    inj : Injection
        Sources and background.
    bank_bus : int
        Model bus of the bank [unitless].
    bank_y : ndarray, shape (n_h, N)
        Admittance of each step at each order [pu].
    xc_pu : ndarray, shape (N,)
        Fundamental capacitive reactance of each step's capacitors [pu].
    settings : ModelSettings
        Element models.
    rule : str
        Summation rule: "arithmetic" (worst case, default), "iec61000-3-6", "phasor".
    rows : ndarray of int, optional
        Buses whose voltages are kept (all when None).
    diag_extra : ndarray, shape (n_h, n), optional
        Other banks in service [pu].

    Returns
    -------
    PenetrationResult

    Notes
    -----
    With ``Z'`` the impedance matrix with the step in service:
    ``V = Z'[:, s] I_s`` for a source at bus s; background ``E_h`` behind
    ``Z_g(h)`` is the injection ``E_h / Z_g(h)`` at the supply bus.  Bank current
    ``I_b = Y_step V_bank``; capacitor voltage ``I_b X_C / h``; current into
    the supply from local sources ``V_supply / Z_g``.
    """
    h = np.asarray(inj.h, float)
    n = arr.n_bus
    rows = np.arange(n) if rows is None else np.asarray(rows, int)
    g_bus = arr.grid_bus
    src = np.asarray(inj.src_bus, int)
    cols = np.unique(np.concatenate([src, g_bus, [bank_bus]]).astype(int))
    rws = np.unique(np.concatenate([rows, cols]).astype(int))
    z0 = impedance_columns(arr, h, cols, settings, diag_extra, rows=rws)  # (n_h, r, m)
    kr = int(np.searchsorted(rws, bank_bus))
    kc = int(np.searchsorted(cols, bank_bus))
    zs = step_update(z0, kr, kc, bank_y)  # (n_h, N, r, m)
    zall = np.concatenate([z0[:, None], zs], axis=1)  # (n_h, N+1, r, m)
    kf = resistance_factor(h, settings.r_model)[:, None]
    zg = arr.grid_r_pu * kf + 1j * h[:, None] * arr.grid_x_pu  # (n_h, g)
    parts = []
    for i, b in enumerate(src):
        c = int(np.searchsorted(cols, b))
        parts.append(zall[:, :, :, c] * inj.src_i_pu[i][:, None, None])
    n_local = len(parts)
    if g_bus.size and np.any(inj.bg_v_pu > 0):
        v_bg = 0
        for j, gb in enumerate(g_bus):
            c = int(np.searchsorted(cols, gb))
            v_bg = v_bg + zall[:, :, :, c] * (inj.bg_v_pu / zg[:, j])[:, None, None]
        parts.append(v_bg)
    if not parts:
        zero = np.zeros((zall.shape[1], h.size, rws.size))
        steps = zall.shape[1] - 1
        return PenetrationResult(h, rows, zero[:, :, np.searchsorted(rws, rows)], np.zeros((steps, h.size)),
                                 np.zeros((steps, h.size)), np.zeros((steps + 1, h.size)))
    phases = None
    if rule == "phasor":
        ph = [inj.src_phase_deg[i] if inj.src_phase_deg is not None else np.zeros(h.size) for i in range(n_local)]
        if len(parts) > n_local:
            ph.append(inj.bg_phase_deg if inj.bg_phase_deg is not None else np.zeros(h.size))
        phases = np.array(ph)
    # parts: (n_c, n_h, N+1, r) -> order axis last
    p = np.stack(parts).transpose(0, 2, 3, 1)  # (n_c, N+1, r, n_h)
    v = _combine(p, rule, h, phases)  # (N+1, r, n_h)
    # bank branch: current and capacitor voltage from the bank-bus voltage phasors
    vk = p[:, 1:, kr, :]  # (n_c, N, n_h)
    yb = bank_y.T[None]  # (1, N, n_h)
    ib = vk * yb
    vcap = ib * (xc_pu[None, :, None] / h[None, None, :])
    i_bank = _combine(ib, rule, h, phases)
    v_cap = _combine(vcap, rule, h, phases)
    # emission into the supply: local sources only
    if g_bus.size and n_local:
        gi = [int(np.searchsorted(rws, gb)) for gb in g_bus]
        i_sup = 0
        for j, r in enumerate(gi):
            i_sup = i_sup + p[:n_local, :, r, :] / zg[:, j][None, None, :]
        i_supply = _combine(i_sup, rule, h, None if phases is None else phases[:n_local])
    else:
        i_supply = np.zeros((zall.shape[1], h.size))
    keep = np.searchsorted(rws, rows)
    v_rows = v[:, keep, :].transpose(0, 2, 1)  # (N+1, n_h, rows)
    return PenetrationResult(h=h, rows=rows, v_bus_pu=v_rows, v_cap_pu=v_cap, i_bank_pu=i_bank,
                             i_supply_local_pu=i_supply)

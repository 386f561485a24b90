"""Plain-array description of a network for the harmonic core.

The numeric core never sees a pandapower object.  :mod:`resonance.model.netmodel`
(the one module that imports pandapower) converts a net into a
:class:`NetworkArrays`; everything downstream works on these arrays.

All impedances and admittances are per unit on the system base ``base_mva``
and the nominal voltage of each bus, evaluated at the fundamental frequency.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

__all__ = ["NetworkArrays", "BRANCH_LINE", "BRANCH_TRAFO", "BRANCH_OTHER"]

#: branch kinds, used to pick the frequency dependence of the resistance
BRANCH_LINE = 0
BRANCH_TRAFO = 1
BRANCH_OTHER = 2


@dataclass(frozen=True, eq=False)
class NetworkArrays:
    """Fundamental-frequency network data as plain arrays.

    Attributes
    ----------
    f_hz : float
        System fundamental frequency [Hz].
    base_mva : float
        System base power [MVA].
    bus_names : tuple of str
        Name of each model bus (index = position) [unitless].
    bus_kv : ndarray, shape (n,)
        Nominal line-to-line voltage of each bus [kV].
    br_from, br_to : ndarray of int, shape (m,)
        Branch end buses [unitless].
    br_r_pu, br_x_pu : ndarray, shape (m,)
        Series resistance and reactance at the fundamental [pu].
    br_g_pu, br_b_pu : ndarray, shape (m,)
        Total shunt conductance and susceptance of the branch (pi model,
        half at each end) at the fundamental [pu]; ``b > 0`` is capacitive
        (line charging), ``b < 0`` inductive (magnetising).
    br_tap : ndarray, shape (m,)
        Off-nominal ratio at the from end [unitless] (1 for lines).
    br_kind : ndarray of int, shape (m,)
        ``BRANCH_LINE``, ``BRANCH_TRAFO`` or ``BRANCH_OTHER``.
    sh_bus, sh_g_pu, sh_b_pu : ndarray, shape (k,)
        Fixed shunts other than the studied banks at the fundamental [pu];
        ``b > 0`` capacitive, ``b < 0`` inductive.
    load_bus, load_p_pu, load_q_pu : ndarray, shape (l,)
        Linear loads: active and reactive power at nominal voltage [pu].
    grid_bus, grid_r_pu, grid_x_pu : ndarray, shape (g,)
        Supply (external grid) Thevenin impedance at the fundamental, with
        voltage factor c = 1 (the physical impedance) [pu].
    """

    f_hz: float
    base_mva: float
    bus_names: tuple
    bus_kv: np.ndarray
    br_from: np.ndarray
    br_to: np.ndarray
    br_r_pu: np.ndarray
    br_x_pu: np.ndarray
    br_g_pu: np.ndarray
    br_b_pu: np.ndarray
    br_tap: np.ndarray
    br_kind: np.ndarray
    sh_bus: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    sh_g_pu: np.ndarray = field(default_factory=lambda: np.zeros(0))
    sh_b_pu: np.ndarray = field(default_factory=lambda: np.zeros(0))
    load_bus: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    load_p_pu: np.ndarray = field(default_factory=lambda: np.zeros(0))
    load_q_pu: np.ndarray = field(default_factory=lambda: np.zeros(0))
    grid_bus: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    grid_r_pu: np.ndarray = field(default_factory=lambda: np.zeros(0))
    grid_x_pu: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def n_bus(self) -> int:
        """Number of model buses [unitless]."""
        return len(self.bus_names)

    def bus_index(self, name: str) -> int:
        """Index of the bus called ``name`` [unitless]; KeyError if absent."""
        return self.bus_names.index(name)

    def z_base_ohm(self) -> np.ndarray:
        """Base impedance of each bus, ``kV^2 / MVA`` [ohm]."""
        return self.bus_kv**2 / self.base_mva

    def with_grid(self, r_pu: np.ndarray, x_pu: np.ndarray) -> "NetworkArrays":
        """Copy with a different supply impedance (e.g. the weak-supply scenario)."""
        return replace(self, grid_r_pu=np.asarray(r_pu, float), grid_x_pu=np.asarray(x_pu, float))

    def without_grid(self) -> "NetworkArrays":
        """Copy with the supply impedance removed (the bare network's Ybus)."""
        return replace(self, grid_bus=np.zeros(0, int), grid_r_pu=np.zeros(0), grid_x_pu=np.zeros(0))

    def without_loads(self) -> "NetworkArrays":
        """Copy with every linear load removed (for short-circuit power)."""
        return replace(self, load_bus=np.zeros(0, int), load_p_pu=np.zeros(0), load_q_pu=np.zeros(0))

"""Outside reference: harmonic currents of a network with a single-tuned filter, by ngspice.

Imports nothing from ``resonance``.  The circuit is a plain element list (see
:mod:`tests.refs.spice`); this module adds the series R-L-C filter branch, a supply branch
whose current can be read off, and the per-order superposition of several harmonic current
sources: each source is solved on its own by an ngspice AC analysis at the order's frequency
(1 A injected, node voltage = transfer impedance) and the node voltages are summed as phasors
weighted by the source currents.  Branch currents follow by Ohm's law across a resistor of the
branch, so every current is read from the SPICE solution of the same circuit.

References
----------
ngspice User's Manual (version 39), 15.3.1 ".ac"; superposition of independent sources in a
linear circuit (any circuit-theory text, e.g. C. K. Alexander, M. N. O. Sadiku,
*Fundamentals of Electric Circuits*, ch. 4).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

from . import spice

__all__ = ["filter_branch_elements", "supply_elements", "superposed_voltages", "phasor"]


def filter_branch_elements(name: str, bus: str, c_f: float, l_h: float, r_ohm: float) -> list:
    """Series C - L - R branch from ``bus`` to ground (per phase, wye equivalent).

    Parameters
    ----------
    name : str
        Prefix of the element and internal node names [unitless].
    bus : str
        Node the branch hangs from [unitless].
    c_f, l_h, r_ohm : float
        Capacitance [F], inductance [H] and series resistance [ohm].

    Returns
    -------
    list of element tuples
        ``bus -C- {name}c -L- {name}r -R- 0``: the branch current is ``V({name}r) / R`` and the
        capacitor voltage ``V(bus) - V({name}c)`` [unitless].
    """
    return [("C", f"{name}", bus, f"{name}c", c_f), ("L", f"{name}", f"{name}c", f"{name}r", l_h),
            ("R", f"{name}", f"{name}r", "0", r_ohm)]


def supply_elements(bus: str, r_ohm: float, l_h: float) -> list:
    """Thevenin supply impedance (the ideal source is a short at harmonic orders).

    Parameters
    ----------
    bus : str
        Supply bus [unitless].
    r_ohm, l_h : float
        Supply resistance [ohm] and inductance [H].

    Returns
    -------
    list of element tuples
        ``bus -L- sup1 -R- sup0 -(1 nohm)- 0``: the current into the supply is
        ``(V(sup1) - V(sup0)) / r_ohm`` [unitless].
    """
    return [("L", "sup", bus, "sup1", l_h), ("R", "sup", "sup1", "sup0", r_ohm), ("R", "supgnd", "sup0", "0", 1e-9)]


def superposed_voltages(elements: Sequence, injections: Mapping[str, Mapping[int, complex]],
                        nodes: Sequence[str], f1_hz: float, orders: Sequence[int]) -> dict[int, dict[str, complex]]:
    """Node voltages of the circuit driven by several harmonic current sources, order by order.

    Parameters
    ----------
    elements : sequence of element tuples
        The circuit (values in [ohm], [H], [F]).
    injections : mapping of node to (mapping of order to complex)
        Current phasor injected from ground into each node at each order [A].
    nodes : sequence of str
        Nodes whose voltage is returned [unitless].
    f1_hz : float
        Fundamental frequency [Hz].
    orders : sequence of int
        Harmonic orders solved [unitless].

    Returns
    -------
    dict of order to (dict of node to complex)
        ``V_k(h) = sum_j Z_kj(h) I_j(h)`` [V].

    Notes
    -----
    One ngspice AC analysis per source node and order, at ``h f1`` (a single-point ``.ac``).
    """
    out: dict[int, dict[str, complex]] = {}
    for h in orders:
        v = {k: 0j for k in nodes}
        f = float(h) * f1_hz
        for src, by_order in injections.items():
            i = complex(by_order.get(h, 0.0))
            if i == 0:
                continue
            _, z = spice.ac_impedance(elements, src, nodes, f, f, 1)
            for k in nodes:
                v[k] += complex(z[k][0]) * i
        out[int(h)] = v
    return out


def phasor(mag: float, deg: float) -> complex:
    """``mag`` at angle ``deg`` [same unit as mag]."""
    return mag * complex(math.cos(math.radians(deg)), math.sin(math.radians(deg)))

"""Impedances from the figures nameplates and utilities give: |Z| and X/R.

Pure formulas, used alike by the validation-time estimate (:mod:`resonance.inputs.case_checks`),
the supply of the plant model and its transformers (:mod:`resonance.model.netmodel`).
"""

from __future__ import annotations

import math

__all__ = ["split_by_x_r"]


def split_by_x_r(z_abs: float, x_r: float) -> complex:
    """The complex impedance of magnitude ``z_abs`` and reactance-to-resistance ratio ``x_r``.

    Parameters
    ----------
    z_abs : float
        Impedance magnitude, in any unit (ohm, per unit, per cent) [same unit out].
    x_r : float
        X/R ratio, > 0 [unitless].

    Returns
    -------
    complex
        ``R + jX`` with ``R = |Z| / sqrt(1 + (X/R)^2)`` and ``X = R (X/R)`` [unit of ``z_abs``].

    References
    ----------
    IEC 60909-0:2016, clause 6.2 (network feeder: ``R_Q`` and ``X_Q`` from ``Z_Q`` and
    ``R_Q/X_Q``) and clause 6.3.1 (transformer: ``R_T`` from ``u_Rr``, ``X_T`` from
    ``Z_T`` and ``R_T``).
    """
    r = z_abs / math.hypot(1.0, x_r)
    return complex(r, r * x_r)

"""Shunt-capacitor duty: rms and crest voltage, rms current and reactive power.

The four continuous-duty quantities of IEEE Std 18 are computed from the
harmonic voltage magnitudes at the capacitor's own terminals, in per unit of
the capacitor's rating, and compared with a named set of limits.  Limits are
cited data (:data:`DUTY_LIMITS`); a limit exceeded is a negative margin, never
an exception.

All per-unit values are on the capacitor's rating: voltage base the rated rms
voltage ``V_R``, current base the nominal current from the rated kvar and the
rated voltage, power base the rated kvar.  With the fundamental capacitive
reactance ``X_C1`` (at ``V_R``, ``Q_R``) the current at order ``h`` is
``I_h = h V_h / X_C1``, i.e. ``h V_h`` in per unit.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping

import numpy as np

from resonance.errors import InputError

__all__ = [
    "DutyLimits",
    "DutyResult",
    "DUTY_LIMITS",
    "DEFAULT_DUTY_LIMITS",
    "DUTY_QUANTITIES",
    "duty_limits",
    "capacitor_duty",
]

#: Names of the duty quantities, in the order used for ties of the governing margin.
DUTY_QUANTITIES = ("v_rms", "v_peak", "i_rms", "kvar")


@dataclass(frozen=True)
class DutyLimits:
    """One named set of continuous capacitor-duty limits, each with its source.

    Attributes
    ----------
    name : str
        Setting name, e.g. ``"ieee18-2002"`` [unitless].
    citation : str
        Standard and edition the set comes from [unitless].
    v_rms : float
        Limit on rms voltage including harmonics, per unit of rated rms voltage [pu].
    v_rms_source : str
        Where ``v_rms`` comes from, with its marker (published, memory, derived)
        [unitless].
    v_peak : float
        Limit on crest voltage including harmonics, per unit of ``sqrt(2)`` times
        the rated rms voltage [pu].
    v_peak_source : str
        Where ``v_peak`` comes from [unitless].
    i_rms : float
        Limit on rms current including harmonics, per unit of the nominal current
        from rated kvar and rated voltage [pu].
    i_rms_source : str
        Where ``i_rms`` comes from [unitless].
    q : float
        Limit on reactive power including harmonics, per unit of rated kvar [pu].
    q_source : str
        Where ``q`` comes from [unitless].
    note : str
        How the standard qualifies the limits (e.g. contingency, not design
        basis) [unitless].
    """

    name: str
    citation: str
    v_rms: float
    v_rms_source: str
    v_peak: float
    v_peak_source: str
    i_rms: float
    i_rms_source: str
    q: float
    q_source: str
    note: str = ""


_IEC_Q_NOTE = (
    "[derived] REFERENCES.md cites no separate IEC reactive-power limit; the value used is "
    "v_rms x i_rms = 1.10 x 1.30 = 1.43, which the voltage and current limits already imply "
    "(Cauchy-Schwarz: sum h V_h^2 <= V_rms I_rms), so it cannot govern while they are met"
)
_IEC_PEAK_NOTE = (
    "[memory] REFERENCES.md cites no IEC crest limit; the crest is screened at sqrt(2) x the "
    "1.10 U_N rms level, a conservative choice of this project; confirm against the standard"
)
_IEC_V_NOTE = (
    "[memory] 1.10 U_N is the level allowed 8 h in every 24 h (IEC 60831-1) / 12 h (IEC 60871-1), "
    "used here as the continuous screen"
)

#: Built-in limit sets.  Values and markers copied from REFERENCES.md
#: "Capacitor duty - IEEE Std 18"; IEC entries as documented in each source note.
DUTY_LIMITS: Mapping[str, DutyLimits] = MappingProxyType({
    "ieee18-2002": DutyLimits(
        name="ieee18-2002",
        citation="IEEE Std 18-2002, continuous operating limits including harmonics",
        v_rms=1.10, v_rms_source="[published] IEEE Std 18-2002",
        v_peak=1.20, v_peak_source="[published] IEEE Std 18-2002",
        i_rms=1.35, i_rms_source="[published] IEEE Std 18-2002",
        q=1.35, q_source="[published] IEEE Std 18-2002",
        note="[published] the 2002 text calls these contingency limits, not a design basis",
    ),
    "ieee18-2012": DutyLimits(
        name="ieee18-2012",
        citation="IEEE Std 18-2012, continuous operating limits including harmonics",
        v_rms=1.10, v_rms_source="[memory] IEEE Std 18-2012",
        v_peak=1.20, v_peak_source="[memory] IEEE Std 18-2012",
        i_rms=1.35, i_rms_source="[memory] IEEE Std 18-2012",
        q=1.35, q_source="[memory] IEEE Std 18-2012",
        note="[memory] values recalled as unchanged from the 2002 edition",
    ),
    "ieee18-1992": DutyLimits(
        name="ieee18-1992",
        citation="IEEE Std 18-1992, continuous operating limits including harmonics",
        v_rms=1.10, v_rms_source="[memory] IEEE Std 18-1992",
        v_peak=1.20, v_peak_source="[memory] IEEE Std 18-1992",
        i_rms=1.80, i_rms_source="[memory] IEEE Std 18-1992",
        q=1.35, q_source="[memory] IEEE Std 18-1992",
        note="[memory] the 1992 edition allowed 1.80 pu rms current",
    ),
    "iec60831-1": DutyLimits(
        name="iec60831-1",
        citation="IEC 60831-1 (self-healing shunt capacitors, rated voltage <= 1 kV)",
        v_rms=1.10, v_rms_source=_IEC_V_NOTE,
        v_peak=1.10, v_peak_source=_IEC_PEAK_NOTE,
        i_rms=1.30, i_rms_source="[published, secondary] continuous rms current up to 1.30 I_N",
        q=1.43, q_source=_IEC_Q_NOTE,
        note="[memory] 1.43 I_N is allowed where capacitance is at its +10 % tolerance; "
             "not used here (capacitance is taken at nameplate)",
    ),
    "iec60871-1": DutyLimits(
        name="iec60871-1",
        citation="IEC 60871-1 (shunt capacitors, rated voltage > 1 kV)",
        v_rms=1.10, v_rms_source=_IEC_V_NOTE,
        v_peak=1.10, v_peak_source=_IEC_PEAK_NOTE,
        i_rms=1.30, i_rms_source="[published, secondary] continuous rms current up to 1.30 I_N",
        q=1.43, q_source=_IEC_Q_NOTE,
        note="[memory] 1.43 I_N is allowed where capacitance is at its +10 % tolerance; "
             "not used here (capacitance is taken at nameplate)",
    ),
})

#: Limit set used when the study names none.
DEFAULT_DUTY_LIMITS = "ieee18-2002"


def duty_limits(name: str = DEFAULT_DUTY_LIMITS, *, file: str = "<input>") -> DutyLimits:
    """Look up a named set of capacitor-duty limits.

    Parameters
    ----------
    name : str
        One of the keys of :data:`DUTY_LIMITS` [unitless].
    file : str, optional
        Input file the name came from, for the error message [unitless].

    Returns
    -------
    DutyLimits
        The limits with their sources [pu].

    Raises
    ------
    InputError
        Unknown name; the problem names the field ``study.duty_limits``.

    References
    ----------
    IEEE Std 18-2002, *IEEE Standard for Shunt Power Capacitors*, continuous
    operating limits. IEC 60831-1 and IEC 60871-1, maximum permissible current
    and voltage. Values and their markers: REFERENCES.md, "Capacitor duty".
    """
    try:
        return DUTY_LIMITS[name]
    except (KeyError, TypeError):
        valid = ", ".join(repr(k) for k in DUTY_LIMITS)
        raise InputError.single(file, "study.duty_limits",
                                f"unknown duty-limit set {name!r}; choose one of {valid}") from None


@dataclass(frozen=True, eq=False)
class DutyResult:
    """Capacitor duty for one or many operating points.

    Every array has the batch shape of the input voltages (the input shape
    without its last axis; ``()`` for a single spectrum).  Arrays are read-only.

    Attributes
    ----------
    limits : DutyLimits
        The limit set the margins refer to [pu].
    v_rms_pct : ndarray
        rms voltage including harmonics [% of rated rms voltage].
    v_peak_pct : ndarray
        Crest voltage, arithmetic sum of peaks [% of sqrt(2) x rated rms voltage].
    i_rms_pct : ndarray
        rms current including harmonics [% of nominal current].
    kvar_pct : ndarray
        Reactive power including harmonics [% of rated kvar].
    v_rms_margin_pct, v_peak_margin_pct, i_rms_margin_pct, kvar_margin_pct : ndarray
        Limit minus value; negative means exceeded [percentage points].
    min_margin_pct : ndarray
        Smallest of the four margins [percentage points].
    governing : ndarray of str
        Name of the quantity with the smallest margin, one of
        :data:`DUTY_QUANTITIES` (ties go to the earlier name) [unitless].
    ok : ndarray of bool
        True where every margin is >= 0 [unitless].
    """

    limits: DutyLimits
    v_rms_pct: np.ndarray
    v_peak_pct: np.ndarray
    i_rms_pct: np.ndarray
    kvar_pct: np.ndarray
    v_rms_margin_pct: np.ndarray
    v_peak_margin_pct: np.ndarray
    i_rms_margin_pct: np.ndarray
    kvar_margin_pct: np.ndarray
    min_margin_pct: np.ndarray
    governing: np.ndarray
    ok: np.ndarray


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a)
    a.setflags(write=False)
    return a


def capacitor_duty(h: np.ndarray, v_cap_pu: np.ndarray, limits: DutyLimits) -> DutyResult:
    r"""Capacitor duty from the harmonic voltages at its terminals.

    Parameters
    ----------
    h : array_like, shape (n_h,)
        Harmonic orders, distinct, all >= 1; ``h[0]`` must be 1 (the
        fundamental) [unitless].
    v_cap_pu : array_like, shape (..., n_h)
        Voltage magnitude across the capacitor at each order, per unit of the
        capacitor's rated rms voltage [pu].  Leading axes are a batch (e.g.
        bank steps or cases) computed at once.  Complex phasors are accepted
        and their magnitudes used.  For a detuned bank pass the voltage across
        the capacitor itself (which exceeds the bus voltage by about
        ``1 / (1 - p)`` at the fundamental), not the bus voltage [pu].
    limits : DutyLimits
        Limit set, e.g. from :func:`duty_limits` [pu].

    Returns
    -------
    DutyResult
        Values in percent of rating, margins in percentage points, the
        governing quantity and the pass flag, all of the batch shape
        [%, percentage points, unitless].

    Raises
    ------
    ValueError
        ``h`` not a 1-D array of distinct finite orders >= 1 starting at 1, or
        ``v_cap_pu`` negative, not finite, or with a last axis not matching ``h``.

    Notes
    -----
    With ``V_h`` in per unit of the rated voltage and capacitance at nameplate
    (``I_h = h V_h / X_C1``):

    .. math::

        V_{rms} = \sqrt{\textstyle\sum_h V_h^2},\quad
        V_{crest} = \textstyle\sum_h V_h,\quad
        I_{rms} = \sqrt{\textstyle\sum_h (h V_h)^2},\quad
        Q = \textstyle\sum_h h V_h^2.

    The crest assumes all peaks coincide (conservative).  Margins are
    ``100 limit - value_pct`` [percentage points].

    References
    ----------
    IEEE Std 18-2002, *IEEE Standard for Shunt Power Capacitors*, continuous
    operating limits including harmonics.  IEEE Std 1036, *Guide for the
    Application of Shunt Power Capacitors*, duty arithmetic (from memory;
    REFERENCES.md, "Capacitor duty").
    """
    h = np.asarray(h, dtype=float)
    if h.ndim != 1 or h.size == 0:
        raise ValueError("h must be a non-empty 1-D array of harmonic orders")
    if not np.all(np.isfinite(h)) or np.any(h < 1.0):
        raise ValueError("harmonic orders must be finite and >= 1")
    if h[0] != 1.0:
        raise ValueError(f"h[0] must be the fundamental (1), got {h[0]:g}")
    if np.unique(h).size != h.size:
        raise ValueError("harmonic orders must be distinct")
    v = np.asarray(v_cap_pu)
    if np.iscomplexobj(v):
        v = np.abs(v)
    v = v.astype(float, copy=False)
    if v.ndim == 0 or v.shape[-1] != h.size:
        raise ValueError(f"v_cap_pu must have shape (..., {h.size}), got {v.shape}")
    if not np.all(np.isfinite(v)) or np.any(v < 0.0):
        raise ValueError("v_cap_pu must hold finite magnitudes >= 0")

    hv = h * v
    values = np.stack([
        np.sqrt(np.sum(v * v, axis=-1)),     # V_rms
        np.sum(v, axis=-1),                  # V_crest
        np.sqrt(np.sum(hv * hv, axis=-1)),   # I_rms
        np.sum(hv * v, axis=-1),             # Q
    ]) * 100.0
    limit_pct = 100.0 * np.array([limits.v_rms, limits.v_peak, limits.i_rms, limits.q])
    margins = limit_pct.reshape((4,) + (1,) * (values.ndim - 1)) - values
    idx = np.argmin(margins, axis=0)
    min_margin = np.min(margins, axis=0)
    return DutyResult(
        limits=limits,
        v_rms_pct=_frozen(values[0]),
        v_peak_pct=_frozen(values[1]),
        i_rms_pct=_frozen(values[2]),
        kvar_pct=_frozen(values[3]),
        v_rms_margin_pct=_frozen(margins[0]),
        v_peak_margin_pct=_frozen(margins[1]),
        i_rms_margin_pct=_frozen(margins[2]),
        kvar_margin_pct=_frozen(margins[3]),
        min_margin_pct=_frozen(min_margin),
        governing=_frozen(np.asarray(DUTY_QUANTITIES)[idx]),
        ok=_frozen(min_margin >= 0.0),
    )

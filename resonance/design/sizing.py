"""Bank sizing from a plant's demand: spot sizing and the stage plan.

The simulated stage controller and the billing arithmetic are in
:mod:`resonance.design.controller`.

Pure numeric core: takes numbers and arrays, returns frozen dataclasses.  It
opens no file, prints nothing and imports no plotting library; reading the
interval CSV and writing the ``[[bank]]`` block live in
:mod:`resonance.inputs.sizing_io`, the command in :mod:`resonance.sizing_cli`.

Conventions
-----------
* Real power ``p_kw`` [kW] is imported power (>= 0).  Reactive power
  ``q_kvar`` [kvar] is positive when lagging (inductive, drawn from the
  supply) and negative when leading.
* Power factors ``pf`` are magnitudes in (0, 1] [unitless]; a power factor
  given without a reactive power is taken as lagging.
* A bank's *nameplate* stage sizes are at the capacitor's rated voltage; its
  *net* output is what it delivers at the bus (see :func:`output_factor`).
  Demand is always compared with the net output.
* Step ``k`` means stages ``1..k`` in service (step 0: bank off), the same
  step definition the frequency-scan check uses.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal, Sequence

import numpy as np

from resonance.errors import InputError

__all__ = [
    "STANDARD_STAGES_KVAR",
    "STAGE_LAYOUTS",
    "pf_multiplier",
    "kvar_required",
    "output_factor",
    "bank_output_kvar",
    "nameplate_kvar_for_net",
    "power_factor",
    "required_kvar_series",
    "BankPlan",
    "size_bank",
]

#: Default list of stage sizes offered [kvar, nameplate at rated voltage].
#: Common practice for low-voltage switched banks; a setting, not a standard.
STANDARD_STAGES_KVAR: tuple[float, ...] = (25.0, 50.0, 75.0, 100.0, 150.0, 200.0)

#: Stage layouts understood by :func:`size_bank`.
STAGE_LAYOUTS = ("equal", "binary")

#: Where the core reports bad arguments (it reads no file).
_ARGS = "<arguments>"

#: Average month used to scale energy charges from the data span [day]
#: (365.25 / 12; a convention, change it per billing period).
_MONTH_DAYS = 365.25 / 12.0


# --------------------------------------------------------------------------- checks
def _check_pf(name: str, pf) -> np.ndarray:
    a = np.asarray(pf, dtype=float)
    if not np.all(np.isfinite(a)) or np.any(a <= 0.0) or np.any(a > 1.0):
        shown = f" {float(a):g}" if a.ndim == 0 else "s"
        raise InputError.single(_ARGS, name, f"power factor{shown} must be in (0, 1]")
    return a


def _check_nonneg(name: str, x) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if not np.all(np.isfinite(a)) or np.any(a < 0.0):
        raise InputError.single(_ARGS, name, "must be finite and >= 0")
    return a


def _check_pos(name: str, x: float) -> float:
    if not (isinstance(x, (int, float)) and math.isfinite(x) and x > 0):
        raise InputError.single(_ARGS, name, f"{x!r} must be a finite number > 0")
    return float(x)


def _tan_phi(pf: np.ndarray) -> np.ndarray:
    """tan(arccos pf) = sqrt(1 - pf^2) / pf for pf in (0, 1]."""
    return np.sqrt(1.0 - pf * pf) / pf


def _scalar_or_array(a: np.ndarray):
    return float(a) if a.ndim == 0 else a


# --------------------------------------------------------------------------- spot sizing
def pf_multiplier(pf1, pf2):
    """Kvar per kW needed to raise the power factor from ``pf1`` to ``pf2``.

    Parameters
    ----------
    pf1 : float or array_like
        Present power factor, lagging [unitless].
    pf2 : float or array_like
        Target power factor, lagging [unitless].

    Returns
    -------
    float or ndarray
        Multiplier ``k`` [kvar/kW]; negative when ``pf1`` already exceeds ``pf2``.

    Notes
    -----
    ``k = tan(arccos pf1) - tan(arccos pf2)``.

    References
    ----------
    Q_C = P (tan phi1 - tan phi2): REFERENCES.md "PF correction sizing"
    [published, e.g. manufacturers' power-factor multiplier tables].
    """
    t = _tan_phi(_check_pf("pf_present", pf1)) - _tan_phi(_check_pf("pf_target", pf2))
    return _scalar_or_array(t)


def kvar_required(p_kw, pf_present, pf_target):
    """Reactive power to add to raise a load's power factor.

    Parameters
    ----------
    p_kw : float or array_like
        Real power of the load [kW].
    pf_present : float or array_like
        Present power factor, lagging [unitless].
    pf_target : float or array_like
        Target power factor, lagging [unitless].

    Returns
    -------
    float or ndarray
        Capacitive reactive power at the bus [kvar]; negative when the present
        power factor is already above the target (no bank needed).

    Notes
    -----
    ``Q_C = P (tan phi1 - tan phi2)``, ``phi = arccos pf``.

    References
    ----------
    REFERENCES.md "PF correction sizing" [published].
    """
    p = _check_nonneg("p_kw", p_kw)
    return _scalar_or_array(p * np.asarray(pf_multiplier(pf_present, pf_target)))


def output_factor(v_bus_kv: float, v_cap_rated_kv: float, detuning_pct: float | None = None) -> float:
    """Net output at the bus per kvar of nameplate rating.

    Parameters
    ----------
    v_bus_kv : float
        Bus voltage, line-to-line [kV].
    v_cap_rated_kv : float
        Rated voltage of the capacitors, line-to-line [kV].
    detuning_pct : float, optional
        Detuning ``p = X_L / X_C`` at the fundamental [%]; None or 0 for a
        plain bank.

    Returns
    -------
    float
        ``Q_net / Q_rated`` [unitless].

    Notes
    -----
    Plain bank: ``Q_bus = Q_R (U / U_R)^2``.  Detuned bank:
    ``Q_net = Q_CR (U / U_CR)^2 / (1 - p)``; the capacitor itself then runs at
    ``U_C = U / (1 - p)``, which must not exceed its rating (checked by the
    duty module, not here).

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks" [published manufacturer
    application examples]; Q proportional to U^2 for a fixed capacitance.
    """
    u = _check_pos("v_bus_kv", v_bus_kv)
    ur = _check_pos("v_cap_rated_kv", v_cap_rated_kv)
    p = 0.0 if detuning_pct is None else float(detuning_pct) / 100.0
    if not (math.isfinite(p) and 0.0 <= p < 0.5):
        raise InputError.single(_ARGS, "detuning_pct", f"{detuning_pct!r} must be in [0, 50) %")
    return (u / ur) ** 2 / (1.0 - p)


def bank_output_kvar(q_rated_kvar, v_bus_kv: float, v_cap_rated_kv: float, detuning_pct: float | None = None):
    """Net reactive output at the bus of a stage of given nameplate rating.

    Parameters
    ----------
    q_rated_kvar : float or array_like
        Nameplate rating at the capacitor's rated voltage [kvar].
    v_bus_kv : float
        Bus voltage [kV].
    v_cap_rated_kv : float
        Capacitor rated voltage [kV].
    detuning_pct : float, optional
        Detuning [%]; None for a plain bank.

    Returns
    -------
    float or ndarray
        Net output at the bus [kvar].

    Notes
    -----
    ``Q_net = Q_R (U / U_R)^2 / (1 - p)``, see :func:`output_factor`.

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks" [published].
    """
    q = _check_nonneg("q_rated_kvar", q_rated_kvar)
    return _scalar_or_array(q * output_factor(v_bus_kv, v_cap_rated_kv, detuning_pct))


def nameplate_kvar_for_net(q_net_kvar, v_bus_kv: float, v_cap_rated_kv: float, detuning_pct: float | None):
    """Nameplate rating that delivers a required net output at the bus.

    Parameters
    ----------
    q_net_kvar : float or array_like
        Required net output at the bus [kvar].
    v_bus_kv : float
        Bus voltage [kV].
    v_cap_rated_kv : float
        Capacitor rated voltage [kV].
    detuning_pct : float or None
        Detuning [%]; None or 0 for a plain bank.

    Returns
    -------
    float or ndarray
        Nameplate rating at the rated voltage [kvar].

    Notes
    -----
    ``Q_CR = Q_net (1 - p) (U_CR / U)^2`` (inverse of :func:`bank_output_kvar`).

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks": a detuned bank is sized on
    its net output, not its nameplate [published].
    """
    q = _check_nonneg("q_net_kvar", q_net_kvar)
    return _scalar_or_array(q / output_factor(v_bus_kv, v_cap_rated_kv, detuning_pct))


# --------------------------------------------------------------------------- series
def power_factor(p_kw, q_kvar) -> np.ndarray:
    """Power factor magnitude of each interval.

    Parameters
    ----------
    p_kw : array_like
        Real power [kW].
    q_kvar : array_like
        Reactive power, lagging positive [kvar].

    Returns
    -------
    ndarray
        ``|cos phi|`` [unitless]; 1.0 where both P and Q are zero.

    Notes
    -----
    ``pf = P / sqrt(P^2 + Q^2)``.

    References
    ----------
    Definition of displacement power factor (IEEE Std 1459-2010, fundamental quantities).
    """
    p = np.asarray(p_kw, dtype=float)
    q = np.asarray(q_kvar, dtype=float)
    s = np.hypot(p, q)
    out = np.ones(np.broadcast(p, q).shape)
    np.divide(np.abs(p), s, out=out, where=s > 0)
    return out


def required_kvar_series(p_kw, q_kvar, pf_target: float) -> np.ndarray:
    """Capacitive kvar each interval needs to reach the target power factor.

    Parameters
    ----------
    p_kw : array_like
        Real power per interval [kW].
    q_kvar : array_like
        Reactive power per interval, lagging positive [kvar].
    pf_target : float
        Target power factor, lagging [unitless].

    Returns
    -------
    ndarray
        Required net compensation at the bus [kvar], >= 0 (an interval already
        at or above the target, or leading, needs none).

    Notes
    -----
    ``Q_C = max(0, Q - P tan(arccos pf_target))``; with ``Q = P tan phi1`` this
    is ``P (tan phi1 - tan phi2)``.

    References
    ----------
    REFERENCES.md "PF correction sizing" [published].
    """
    p = _check_nonneg("p_kw", p_kw)
    q = np.asarray(q_kvar, dtype=float)
    if not np.all(np.isfinite(q)):
        raise InputError.single(_ARGS, "q_kvar", "must be finite")
    t2 = float(_tan_phi(_check_pf("pf_target", pf_target)))
    return np.maximum(q - p * t2, 0.0)


# --------------------------------------------------------------------------- stage plan
@dataclass(frozen=True)
class BankPlan:
    """Proposed bank: stage sizes and the demand they were chosen for.

    Attributes
    ----------
    stages_kvar : tuple of float
        Stage nameplate ratings at the capacitor rated voltage, in switching
        order [kvar]; empty when no compensation is needed.
    stages_net_kvar : tuple of float
        Net output of each stage at the bus [kvar].
    q_design_kvar : float
        Design demand: the chosen percentile of the required series [kvar].
    q_max_kvar : float
        Largest required value in the series [kvar].
    percentile : float
        Percentile used [%].
    layout : str
        ``"equal"`` or ``"binary"``.
    output_factor : float
        Net output per kvar of nameplate [unitless].
    coverage : float
        Fraction of intervals whose requirement the full bank meets [unitless].
    """

    stages_kvar: tuple[float, ...]
    stages_net_kvar: tuple[float, ...]
    q_design_kvar: float
    q_max_kvar: float
    percentile: float
    layout: str
    output_factor: float
    coverage: float

    @property
    def n_stages(self) -> int:
        """Number of stages [unitless]."""
        return len(self.stages_kvar)

    @property
    def total_kvar(self) -> float:
        """Total nameplate rating [kvar]."""
        return float(sum(self.stages_kvar))

    @property
    def total_net_kvar(self) -> float:
        """Total net output at the bus [kvar]."""
        return float(sum(self.stages_net_kvar))

    @property
    def steps_net_kvar(self) -> tuple[float, ...]:
        """Net output at step k = 0..n (stages 1..k in service) [kvar]."""
        return (0.0,) + tuple(float(x) for x in np.cumsum(self.stages_net_kvar))

    @property
    def shortfall_kvar(self) -> float:
        """Design demand not covered by the full bank [kvar] (> 0: too few stages allowed)."""
        return max(0.0, self.q_design_kvar - self.total_net_kvar)


def _layout_stages(base: float, sizes: Sequence[float], layout: str, q_net: float, factor: float,
                   n_max: int) -> list[float] | None:
    """Stages for one base size, or None if ``n_max`` stages cannot reach ``q_net``."""
    if layout == "equal":
        n = max(1, math.ceil(q_net / (base * factor) - 1e-9))
        return [base] * n if n <= n_max else None
    stages: list[float] = []
    s = base
    avail = set(sizes)
    while sum(stages) * factor < q_net - 1e-9:
        if len(stages) >= n_max:
            return None
        stages.append(s)
        if 2 * s in avail:
            s = 2 * s
    return stages


def size_bank(q_needed_kvar_series, stage_sizes_kvar: Sequence[float] = STANDARD_STAGES_KVAR,
              percentile: float = 95.0, n_stages_max: int = 8, layout: Literal["equal", "binary"] = "equal",
              output_factor: float = 1.0) -> BankPlan:
    """Propose a bank total and a stage plan from a required-kvar series.

    Parameters
    ----------
    q_needed_kvar_series : array_like
        Required net compensation per interval at the bus [kvar], e.g. from
        :func:`required_kvar_series`.
    stage_sizes_kvar : sequence of float
        Stage nameplate ratings on offer [kvar].
    percentile : float
        Percentile of the series used as design demand [%].
    n_stages_max : int
        Most stages allowed (controller outputs) [unitless].
    layout : {"equal", "binary"}
        Stage layout rule (see Notes).
    output_factor : float
        Net output per kvar of nameplate (:func:`output_factor`) [unitless].

    Returns
    -------
    BankPlan
        The proposal.  If even ``n_stages_max`` of the largest size cannot
        reach the design demand, the plan is that largest bank and
        :attr:`BankPlan.shortfall_kvar` is positive (a result, not an error).

    Notes
    -----
    Design demand ``Q_d`` = the ``percentile``-th percentile of the series
    (linear interpolation).  The total is ``Q_d`` rounded up to whole stages.

    ``equal`` (default): ``n`` stages of one size ``s``, ``n = ceil(Q_d / (f s))``;
    ``s`` is the smallest offered size with ``n <= n_stages_max``.  With
    stages switched in order (step k = stages 1..k) equal stages give a
    uniform step of ``f s``, so this is the finest resolution allowed.

    ``binary``: stages ``s, 2s, 4s, ...`` while the doubled size is on offer,
    then repeats of the last size, until the total reaches ``Q_d``; ``s`` is
    the smallest offered size needing at most ``n_stages_max`` stages.  Fewer
    stages for the same total, but with switching in order the step grows
    from ``s`` to the largest stage (coarse near full output).

    References
    ----------
    Percentile design demand and stage layout: common practice; the rule
    itself is this project's.
    """
    q = np.asarray(q_needed_kvar_series, dtype=float).ravel()
    if q.size == 0 or not np.all(np.isfinite(q)) or np.any(q < 0):
        raise InputError.single(_ARGS, "q_needed_kvar_series", "must be a non-empty series of finite values >= 0")
    if not (0.0 < percentile <= 100.0):
        raise InputError.single(_ARGS, "percentile", f"{percentile!r} must be in (0, 100]")
    if not (isinstance(n_stages_max, int) and n_stages_max >= 1):
        raise InputError.single(_ARGS, "n_stages_max", f"{n_stages_max!r} must be an integer >= 1")
    if layout not in STAGE_LAYOUTS:
        raise InputError.single(_ARGS, "layout", f"{layout!r} must be one of {', '.join(STAGE_LAYOUTS)}")
    sizes = sorted({float(s) for s in stage_sizes_kvar})
    if not sizes or any(not math.isfinite(s) or s <= 0 for s in sizes):
        raise InputError.single(_ARGS, "stage_sizes_kvar", "must list stage sizes > 0 kvar")
    f = _check_pos("output_factor", output_factor)
    q_d = float(np.percentile(q, percentile))
    q_max = float(q.max())
    stages: list[float] = []
    if q_d > 0.0:
        for s in sizes:
            got = _layout_stages(s, sizes, layout, q_d, f, n_stages_max)
            if got is not None:
                stages = got
                break
        else:  # not reachable: the largest bank allowed, with a shortfall
            stages = [sizes[-1]] * n_stages_max
    net = tuple(s * f for s in stages)
    coverage = float(np.mean(q <= sum(net) + 1e-9))
    return BankPlan(tuple(stages), net, q_d, q_max, float(percentile), layout, f, coverage)

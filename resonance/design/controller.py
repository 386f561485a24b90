"""A switched bank on interval demand: the simulated stage controller, time in step, billing.

Pure numeric core (numbers and arrays in, frozen dataclasses out); conventions as in
:mod:`resonance.design.sizing` (``p_kw`` imported power, ``q_kvar`` positive lagging, step ``k``
= stages ``1..k`` in service).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Literal, Sequence

import numpy as np

from resonance.design.sizing import _ARGS, _MONTH_DAYS, _check_nonneg, _check_pf, _check_pos, _tan_phi, power_factor
from resonance.errors import InputError

__all__ = ["ControllerSettings", "ControllerResult", "simulate_controller", "time_in_step_table", "BillingRule",
           "BillingResult", "monthly_cost"]

@dataclass(frozen=True)
class ControllerSettings:
    """Settings of the simulated stage controller (this project's design).

    Attributes
    ----------
    target_pf : float
        Power factor aimed at, lagging [unitless].
    switch_in_fraction : float
        Switch the next stage in when the reactive deficit exceeds this
        fraction of the smallest stage [unitless].
    switch_out_fraction : float
        Switch the last stage out when the surplus exceeds this fraction of
        the smallest stage [unitless].
    min_time_between_ops_min : float
        Least time between two switching operations [min].
    initial_step : int
        Step in service at the start [unitless].
    target_offset_pf : float
        The controller aims at ``min(target_pf + target_offset_pf, 1)``
        instead of ``target_pf`` [unitless]; the achieved power factor is
        still judged against ``target_pf``.  0 (the default) aims at the
        target itself.

    Notes
    -----
    The default band (0.5, 0.5) switches whenever an operation brings the net
    reactive power closer to the target (derived: with equal stages ``s``,
    ``|e - s| < |e|`` exactly when ``e > s/2``).  Wider fractions mean fewer
    operations.  The 5 min default is a setting of this project, chosen to
    exceed usual capacitor discharge times (common practice), not a standard
    value.

    With the symmetric band the controller rests anywhere within half a
    smallest stage of the aimed reactive power, so about half the time it
    sits short of it (a deficit) and the power factor is just below the
    aim.  Aiming a little above the target (``target_offset_pf > 0``) moves
    that resting band toward more compensation, i.e. it biases the dead band
    toward switching in: the target is then met most of the time, at the
    cost of some over-compensation.
    """

    target_pf: float = 0.95
    switch_in_fraction: float = 0.5
    switch_out_fraction: float = 0.5
    min_time_between_ops_min: float = 5.0
    initial_step: int = 0
    target_offset_pf: float = 0.0

    @property
    def aim_pf(self) -> float:
        """Power factor the controller aims at, ``min(target_pf + target_offset_pf, 1)`` [unitless]."""
        return min(float(self.target_pf) + float(self.target_offset_pf), 1.0)


@dataclass(frozen=True)
class ControllerResult:
    """What the simulated controller did, interval by interval and in summary.

    Attributes
    ----------
    step : ndarray of int
        Step in service in each interval (0 = bank off) [unitless].
    q_net_kvar : ndarray
        Reactive power drawn from the supply after compensation [kvar].
    pf : ndarray
        Achieved power factor magnitude [unitless].
    leading : ndarray of bool
        True where the compensated load is leading.
    ops : ndarray of int
        Switching operations made at the start of each interval [unitless].
    stages_kvar : tuple of float
        Net stage outputs used [kvar].
    dt_h : float
        Interval length [h].
    target_pf : float
        Target power factor [unitless].
    aim_pf : float or None
        Power factor the controller aimed at (target plus offset) [unitless];
        None means the target itself.
    """

    step: np.ndarray = field(repr=False)
    q_net_kvar: np.ndarray = field(repr=False)
    pf: np.ndarray = field(repr=False)
    leading: np.ndarray = field(repr=False)
    ops: np.ndarray = field(repr=False)
    stages_kvar: tuple[float, ...]
    dt_h: float
    target_pf: float
    aim_pf: float | None = None

    @property
    def hours(self) -> float:
        """Simulated time [h]."""
        return self.step.size * self.dt_h

    @property
    def time_in_step_fraction(self) -> np.ndarray:
        """Fraction of time at step k = 0..n [unitless]."""
        n = len(self.stages_kvar)
        return np.bincount(self.step, minlength=n + 1) / max(self.step.size, 1)

    @property
    def time_in_step_hours(self) -> np.ndarray:
        """Time at step k = 0..n [h]."""
        return self.time_in_step_fraction * self.hours

    @property
    def fraction_at_or_above_target(self) -> float:
        """Fraction of time with power factor magnitude >= target [unitless]."""
        return float(np.mean(self.pf >= self.target_pf - 1e-12))

    @property
    def fraction_leading(self) -> float:
        """Fraction of time the compensated load is leading [unitless]."""
        return float(np.mean(self.leading))

    def pf_percentiles(self, q=(1, 5, 25, 50, 75, 95, 99)) -> dict[float, float]:
        """Percentiles of the achieved power factor magnitude.

        Parameters
        ----------
        q : sequence of float
            Percentiles [%].

        Returns
        -------
        dict
            percentile [%] -> power factor [unitless].
        """
        return {float(k): float(v) for k, v in zip(q, np.percentile(self.pf, q))}

    @property
    def operations_total(self) -> int:
        """Switching operations in the whole series [unitless]."""
        return int(self.ops.sum())

    @property
    def operations_per_day(self) -> float:
        """Mean switching operations per day [1/day]."""
        return self.operations_total / (self.hours / 24.0) if self.hours > 0 else 0.0

    @property
    def max_operations_24h(self) -> int:
        """Most operations in any 24 h window of whole intervals [unitless]."""
        w = max(1, min(self.ops.size, int(round(24.0 / self.dt_h))))
        c = np.concatenate(([0], np.cumsum(self.ops)))
        return int((c[w:] - c[:-w]).max()) if self.ops.size else 0


def simulate_controller(p_kw, q_kvar, dt_h: float, stages_kvar: Sequence[float],
                        settings: ControllerSettings = ControllerSettings()) -> ControllerResult:
    """Simulate a stage controller switching a bank against interval demand.

    Parameters
    ----------
    p_kw : array_like
        Real power per interval [kW].
    q_kvar : array_like
        Reactive power per interval before compensation, lagging positive [kvar].
    dt_h : float
        Interval length [h].
    stages_kvar : sequence of float
        Net output of each stage at the bus, in switching order [kvar].
    settings : ControllerSettings
        Controller settings.

    Returns
    -------
    ControllerResult
        Step, achieved power factor and operations per interval.

    Notes
    -----
    At step ``k`` the bank delivers ``Q_k = sum(stages[:k])``; the error is
    ``e = Q - Q_k - P tan(arccos pf_aim)`` (positive: deficit), with
    ``pf_aim = min(pf_target + offset, 1)`` (:attr:`ControllerSettings.aim_pf`).  With
    ``s_min`` the smallest stage:

    * switch in stage ``k+1`` if ``e > a_in s_min`` and
      ``e - stage[k+1] > -a_out s_min`` (never switch into a surplus that
      would itself trigger a switch-out: no hunting);
    * switch out stage ``k`` if ``e < -a_out s_min``.

    The controller acts at the start of each interval on that interval's
    demand (the interval average is all the data tells); it makes one
    operation at a time, at least ``min_time_between_ops_min`` apart, as many
    as fit in the interval, and the step reached is in service for the whole
    interval.  Achieved ``pf = P / sqrt(P^2 + (Q - Q_k)^2)``.

    References
    ----------
    Controller rule: this project's design.  Power factor definition:
    IEEE Std 1459-2010 (fundamental quantities).
    """
    p = _check_nonneg("p_kw", p_kw).ravel()
    q = np.asarray(q_kvar, dtype=float).ravel()
    if q.shape != p.shape or p.size == 0 or not np.all(np.isfinite(q)):
        raise InputError.single(_ARGS, "q_kvar", "must be finite, non-empty and the same length as p_kw")
    dt_h = _check_pos("dt_h", dt_h)
    st = np.asarray(stages_kvar, dtype=float).ravel()
    if not np.all(np.isfinite(st)) or np.any(st <= 0):
        raise InputError.single(_ARGS, "stages_kvar", "every stage must be > 0 kvar")
    s = settings
    _check_pf("settings.target_pf", s.target_pf)
    for name in ("switch_in_fraction", "switch_out_fraction", "min_time_between_ops_min", "target_offset_pf"):
        v = getattr(s, name)
        if not (math.isfinite(v) and v >= 0):
            raise InputError.single(_ARGS, f"settings.{name}", f"{v!r} must be a finite number >= 0")
    t2 = float(_tan_phi(np.asarray(s.aim_pf)))
    n = st.size
    if not (0 <= s.initial_step <= n):
        raise InputError.single(_ARGS, "settings.initial_step", f"{s.initial_step} must be in 0..{n}")

    cum = np.concatenate(([0.0], np.cumsum(st)))
    s_min = float(st.min()) if n else 0.0
    up = s.switch_in_fraction * s_min
    down = -s.switch_out_fraction * s_min
    # error at step 0 (deficit before compensation), vectorised; the loop only tracks state
    e0 = (q - p * t2).tolist()
    dt_min = dt_h * 60.0
    t_gap = s.min_time_between_ops_min
    step = np.empty(p.size, dtype=np.int64)
    ops = np.zeros(p.size, dtype=np.int64)
    k = s.initial_step
    t_next = 0.0  # earliest time the next operation may be made [min]
    cum_l = cum.tolist()
    st_l = st.tolist()
    for i, e_i in enumerate(e0):
        t = max(i * dt_min, t_next)
        t_end = (i + 1) * dt_min
        made = 0
        while t < t_end and made < n:
            e = e_i - cum_l[k]
            if k < n and e > up and e - st_l[k] > down:
                k += 1
            elif k > 0 and e < down:
                k -= 1
            else:
                break
            made += 1
            t_next = t + t_gap
            t = t_next
        step[i] = k
        ops[i] = made
    q_net = q - cum[step]
    return ControllerResult(step, q_net, power_factor(p, q_net), q_net < 0, ops,
                            tuple(float(x) for x in st), dt_h, float(s.target_pf), float(s.aim_pf))


def time_in_step_table(result: ControllerResult, steps_kvar: Sequence[float] | None = None) -> dict:
    """Time in each step as a plain, JSON-ready dict for the check's results.

    Parameters
    ----------
    result : ControllerResult
        A controller simulation.
    steps_kvar : sequence of float, optional
        Nameplate stage sizes to record with the table [kvar]; defaults to the
        net stage outputs the simulation used.

    Returns
    -------
    dict
        ``{"steps_kvar": [q_1, ..., q_n], "fraction": [f_0, ..., f_n],
        "hours": [h_0, ..., h_n], "total_hours": T}``; index ``k`` of
        ``fraction``/``hours`` is step ``k`` (stages 1..k in service, 0 = off)
        [kvar], [unitless], [h], [h].

    References
    ----------
    Step definition shared with the frequency-scan check (resonance.inputs.case.Bank).
    """
    steps = list(result.stages_kvar if steps_kvar is None else steps_kvar)
    if len(steps) != len(result.stages_kvar):
        raise InputError.single(_ARGS, "steps_kvar", f"has {len(steps)} stages, the simulation {len(result.stages_kvar)}")
    return {
        "steps_kvar": [float(x) for x in steps],
        "fraction": [float(x) for x in result.time_in_step_fraction],
        "hours": [float(x) for x in result.time_in_step_hours],
        "total_hours": float(result.hours),
    }


# --------------------------------------------------------------------------- billing
@dataclass(frozen=True)
class BillingRule:
    """A reactive-power billing rule (user data; no real tariff is built in).

    Attributes
    ----------
    kind : {"kvarh_over_tan", "pf_demand_adjustment"}
        ``kvarh_over_tan``: a charge per kvarh above ``tan_phi_threshold``
        times the kWh of the period.  ``pf_demand_adjustment``: the demand
        charge is scaled by ``pf_threshold / pf`` when the period's power
        factor is below ``pf_threshold`` (never reduced above it).
    kvarh_rate : float
        Price per excess kvarh [currency/kvarh] (``kvarh_over_tan``).
    tan_phi_threshold : float
        Free kvarh per kWh [kvar/kW] (``kvarh_over_tan``).
    demand_rate_per_kw : float
        Demand charge per kW of the period's peak [currency/kW]
        (``pf_demand_adjustment``).
    pf_threshold : float
        Power factor below which the demand charge grows [unitless]
        (``pf_demand_adjustment``).
    """

    kind: Literal["kvarh_over_tan", "pf_demand_adjustment"]
    kvarh_rate: float = 0.0
    tan_phi_threshold: float = 0.0
    demand_rate_per_kw: float = 0.0
    pf_threshold: float = 0.9


@dataclass(frozen=True)
class BillingResult:
    """Charge for one month under a :class:`BillingRule`.

    Attributes
    ----------
    kwh : float
        Real energy in the data [kWh].
    kvarh : float
        Lagging reactive energy in the data (leading intervals count 0) [kvarh].
    pf : float
        Period power factor ``kWh / sqrt(kWh^2 + kvarh^2)`` [unitless].
    peak_kw : float
        Highest interval demand [kW].
    charge : float
        Charge for one month [currency].
    """

    kwh: float
    kvarh: float
    pf: float
    peak_kw: float
    charge: float


def monthly_cost(p_kw, q_kvar, dt_h: float, rule: BillingRule, month_days: float = _MONTH_DAYS) -> BillingResult:
    """Reactive-power related charge for one month, from interval data.

    Parameters
    ----------
    p_kw : array_like
        Real power per interval [kW].
    q_kvar : array_like
        Reactive power per interval, lagging positive [kvar].
    dt_h : float
        Interval length [h].
    rule : BillingRule
        The billing rule.
    month_days : float
        Length of the billing month [day]; energy charges are scaled from the
        data span to it.

    Returns
    -------
    BillingResult
        Energies, period power factor, peak and the month's charge.

    Notes
    -----
    ``kvarh_over_tan``: ``C = r max(0, kvarh - tan_thr kWh) (month_days / span_days)``.
    ``pf_demand_adjustment``: ``C = d P_peak max(1, pf_thr / pf)``, with
    ``pf = kWh / sqrt(kWh^2 + kvarh^2)``; the data's peak and power factor
    are taken as the month's (no scaling).  Call it once with the load as
    measured and once with the compensated ``q_net_kvar`` for before/after.

    References
    ----------
    The rule is user data; no tariff is implied.
    """
    p = _check_nonneg("p_kw", p_kw).ravel()
    q = np.asarray(q_kvar, dtype=float).ravel()
    if q.shape != p.shape or p.size == 0 or not np.all(np.isfinite(q)):
        raise InputError.single(_ARGS, "q_kvar", "must be finite, non-empty and the same length as p_kw")
    dt_h = _check_pos("dt_h", dt_h)
    month_days = _check_pos("month_days", month_days)
    kwh = float(p.sum() * dt_h)
    kvarh = float(np.maximum(q, 0.0).sum() * dt_h)
    pf = float(power_factor(kwh, kvarh))
    peak = float(p.max())
    if rule.kind == "kvarh_over_tan":
        if not (rule.kvarh_rate >= 0 and rule.tan_phi_threshold >= 0):
            raise InputError.single(_ARGS, "rule", "kvarh_rate and tan_phi_threshold must be >= 0")
        span_days = p.size * dt_h / 24.0
        charge = rule.kvarh_rate * max(0.0, kvarh - rule.tan_phi_threshold * kwh) * month_days / span_days
    elif rule.kind == "pf_demand_adjustment":
        _check_pf("rule.pf_threshold", rule.pf_threshold)
        if not rule.demand_rate_per_kw >= 0:
            raise InputError.single(_ARGS, "rule.demand_rate_per_kw", "must be >= 0")
        factor = max(1.0, rule.pf_threshold / pf) if pf > 0 else 1.0  # pf = 0 only with no kWh, peak 0
        charge = rule.demand_rate_per_kw * peak * factor
    else:
        raise InputError.single(_ARGS, "rule.kind", f"{rule.kind!r} must be kvarh_over_tan or pf_demand_adjustment")
    return BillingResult(kwh, kvarh, pf, peak, float(charge))

"""Single-tuned harmonic filter branch: the rating arithmetic of one series R-L-C branch.

Pure functions on plain numbers (no files, no study runs).  The branch is the series L-C
circuit of a detuned stage (:func:`resonance.design.detuned_step.detuned_step` gives its
reactances, inductance, tuning and fundamental capacitor voltage) with the reactor's
resistance and the harmonic currents a penetration study puts through it; the capacitor's
duty is the IEEE Std 18 arithmetic of :func:`resonance.standards.duty.capacitor_duty`
against its limit set, and the tuning tolerance band is
:func:`resonance.assessment.tuning.tuning_band`.

Conventions (the same as the model's :func:`resonance.model.admittance.bank_step_admittance`
and the case's ``[[bank]] reactor_q``): per phase of the wye equivalent; voltages line to line;
``reactor_q`` is the reactor's ``X_L / R`` at the **fundamental**, so ``R = X_L1 / reactor_q``,
constant with frequency; the filter quality factor at the tuning frequency is then
``Q_f = X_n / R = n reactor_q``.

References
----------
IEEE Std 1531-2020, *Guide for the Application and Specification of Harmonic Filters*
(single-tuned branch, tuning below the target order, quality factor); IEEE Std 18-2002,
*Standard for Shunt Power Capacitors* (continuous duty including harmonics); J. Arrillaga,
N. R. Watson, *Power System Harmonics*, 2nd ed., Wiley 2003, ch. 7 (passive filters: tuned
filter, sharpness ``Q = X_n / R``, bandwidth); /work/shared/REFERENCES.md "Tuned harmonic
filters" and "Detuned (series reactor) banks".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping

import numpy as np

from resonance.assessment.tuning import tuning_band
from resonance.design.detuned_step import detuned_step, nameplate_kvar
from resonance.standards.duty import DEFAULT_DUTY_LIMITS, capacitor_duty, duty_limits

__all__ = ["FilterBranch", "design_branch"]

_SQ3 = math.sqrt(3.0)
_SQ2 = math.sqrt(2.0)
#: the computed rated-voltage need is raised by this part so that the governing duty sits at
#: its limit and not a rounding error beyond it [unitless] (project choice)
_NEED_ROUNDING = 1e-9


@dataclass(frozen=True, eq=False)
class FilterBranch:
    """Ratings and duty of one single-tuned filter branch (per phase, wye equivalent).

    Attributes
    ----------
    n : float
        Tuning order ``sqrt(X_C / X_L)`` [unitless].
    p : float
        ``X_L / X_C = 1 / n^2`` at the fundamental [unitless].
    f_hz, f_tuning_hz : float
        Fundamental and series tuning frequency ``n f`` [Hz].
    u_bus_kv : float
        Bus voltage, line to line [kV].
    q_net_kvar : float
        Net fundamental output of the branch at the bus, three-phase [kvar].
    x_c_ohm, x_l_ohm : float
        Capacitor and reactor reactance at the fundamental [ohm].
    r_ohm : float
        Reactor resistance ``X_L / reactor_q`` (constant with frequency) [ohm].
    c_uf : float
        Capacitance per phase of the wye equivalent [uF].
    l_mh : float
        Reactor inductance [mH].
    reactor_q : float
        Reactor ``X_L / R`` at the fundamental [unitless].
    x_n_ohm : float
        Characteristic reactance ``sqrt(X_L X_C) = n X_L = X_C / n`` (of either element at
        the tuning frequency) [ohm].
    q_factor : float
        Filter quality factor (sharpness) ``X_n / R = n reactor_q`` [unitless].
    bandwidth_orders : float
        Half-power bandwidth of the series resonance, ``R / X_L1 = 1 / reactor_q``, in
        harmonic orders (``n / Q_f``) [unitless].
    n_band : (float, float)
        Tuning order over the capacitor (-5/+10 %) and reactor (+-3 %) tolerances of
        :func:`resonance.assessment.tuning.tuning_band` [unitless].
    orders : tuple of int
        Harmonic orders of the currents given, ascending [unitless].
    i1_a : float
        Fundamental branch current ``U / (sqrt3 (X_C - X_L))`` [A].
    i_h_a : Mapping of int to float
        Harmonic branch current by order (as given) [A rms].
    u_c1_kv : float
        Fundamental capacitor voltage ``U / (1 - p)``, line to line [kV].
    u_c_h_kv : Mapping of int to float
        Capacitor voltage at each order ``sqrt3 I_h X_C / h``, line to line [kV rms].
    u_c_rms_kv : float
        Capacitor rms voltage with harmonics, line to line [kV].
    u_c_peak_kv : float
        Capacitor crest voltage, arithmetic sum of the fundamental and harmonic peaks
        ``sqrt2 (U_C1 + sum U_Ch)``, line-to-line scale [kV].
    i_rms_a : float
        Branch (capacitor and reactor) rms current ``sqrt(I_1^2 + sum I_h^2)`` [A].
    i_peak_a : float
        Branch crest current, arithmetic sum of peaks ``sqrt2 (I_1 + sum I_h)`` [A].
    q_c_kvar : float
        Capacitor reactive power with harmonics ``3 sum I_h^2 X_C / h`` (h = 1 included) [kvar].
    q_l_kvar : float
        Reactor reactive power with harmonics ``3 sum h I_h^2 X_L`` (h = 1 included) [kvar].
    u_cap_rated_kv : float
        Capacitor rated voltage the duty refers to (given, or the computed need) [kV].
    u_cap_need_kv : float
        Lowest rated voltage meeting the fundamental voltage and every duty limit [kV].
    q_nameplate_kvar : float
        Capacitor nameplate ``U_R^2 / X_C`` at ``u_cap_rated_kv`` [kvar].
    i_cap_rated_a : float
        Capacitor nominal current from nameplate and rated voltage ``Q_R / (sqrt3 U_R)`` [A].
    losses_kw : float
        Reactor losses ``3 R (I_1^2 + sum I_h^2)``, three phases [kW].
    duty_limits : str
        Name of the IEEE Std 18 limit set used [unitless].
    v_rms_pct, v_peak_pct, i_rms_pct, kvar_pct : float
        Capacitor duty in % of its rating (rms voltage, crest voltage of ``sqrt2 U_R``, rms
        current of ``i_cap_rated_a``, kvar of ``q_nameplate_kvar``) [%].
    v_rms_limit_pct, v_peak_limit_pct, i_rms_limit_pct, kvar_limit_pct : float
        The limits of the set [%].
    duty_margin_pct : float
        Smallest of the four margins (limit minus value) [percentage points].
    duty_governing : str
        The quantity with the smallest margin (``v_rms``, ``v_peak``, ``i_rms``, ``kvar``) [unitless].
    duty_ok : bool
        Every duty within its limit [unitless].
    """

    n: float
    p: float
    f_hz: float
    f_tuning_hz: float
    u_bus_kv: float
    q_net_kvar: float
    x_c_ohm: float
    x_l_ohm: float
    r_ohm: float
    c_uf: float
    l_mh: float
    reactor_q: float
    x_n_ohm: float
    q_factor: float
    bandwidth_orders: float
    n_band: tuple
    orders: tuple
    i1_a: float
    i_h_a: Mapping
    u_c1_kv: float
    u_c_h_kv: Mapping
    u_c_rms_kv: float
    u_c_peak_kv: float
    i_rms_a: float
    i_peak_a: float
    q_c_kvar: float
    q_l_kvar: float
    u_cap_rated_kv: float
    u_cap_need_kv: float
    q_nameplate_kvar: float
    i_cap_rated_a: float
    losses_kw: float
    duty_limits: str
    v_rms_pct: float
    v_peak_pct: float
    i_rms_pct: float
    kvar_pct: float
    v_rms_limit_pct: float
    v_peak_limit_pct: float
    i_rms_limit_pct: float
    kvar_limit_pct: float
    duty_margin_pct: float
    duty_governing: str
    duty_ok: bool


def _positive(name: str, value: float) -> float:
    v = float(value)
    if not math.isfinite(v) or v <= 0.0:
        raise ValueError(f"{name} = {value!r} must be finite and > 0")
    return v


def _harmonics(i_harmonic_a) -> dict[int, float]:
    out: dict[int, float] = {}
    for h, i in dict(i_harmonic_a or {}).items():
        if int(h) != h or h < 2:
            raise ValueError(f"i_harmonic_a: order {h!r} must be an integer >= 2 (the fundamental "
                             "follows from q_net_kvar)")
        if not math.isfinite(float(i)) or i < 0.0:
            raise ValueError(f"i_harmonic_a[{h}] = {i!r} must be finite and >= 0 [A]")
        out[int(h)] = float(i)
    return dict(sorted(out.items()))


def design_branch(q_net_kvar: float, u_bus_kv: float, n: float, f_hz: float, *, reactor_q: float = 40.0,
                  u_cap_rated_kv: float | None = None,
                  i_harmonic_a: dict[int, float] | None = None) -> FilterBranch:
    """Reactor, capacitor and duty of one single-tuned filter branch.

    Parameters
    ----------
    q_net_kvar : float
        Net fundamental output of the branch at the bus (capacitor minus reactor),
        three-phase [kvar].
    u_bus_kv : float
        Bus voltage, line to line [kV].
    n : float
        Tuning order, > 1 [unitless].
    f_hz : float
        Fundamental frequency [Hz].
    reactor_q : float, optional
        Reactor ``X_L / R`` at the fundamental, as the case's ``[[bank]] reactor_q`` and the
        model's branch admittance use it; ``inf`` for a lossless reactor [unitless].
    u_cap_rated_kv : float, optional
        Capacitor rated voltage, line to line [kV].  Default: the computed need
        ``u_cap_need_kv`` (see Notes), not rounded to a rating on offer
        (:func:`resonance.design.detuned_step.capacitor_rating_kv` does that).
    i_harmonic_a : dict of int to float, optional
        Harmonic currents through the branch by order (>= 2), e.g. from a penetration
        study [A rms per phase].

    Returns
    -------
    FilterBranch
        Reactances [ohm], C [uF], L [mH], currents [A], voltages [kV], powers [kvar, kW]
        and the capacitor duty against IEEE Std 18-2002 [%].

    Raises
    ------
    ValueError
        A non-positive or non-finite input, ``n <= 1``, an order below 2 or a negative current.

    Notes
    -----
    With ``p = 1/n^2`` the net output ``Q_net = U^2 / (X_C - X_L)`` gives
    ``X_C = U^2 / (Q_net (1 - p))``, ``X_L = p X_C``, ``R = X_L / reactor_q``,
    ``C = 1 / (2 pi f X_C)``, ``L = X_L / (2 pi f)``, ``f_n = n f``;
    ``I_1 = U / (sqrt3 (X_C - X_L))``, ``U_C1 = sqrt3 I_1 X_C = U / (1 - p)``;
    at order h the capacitor voltage is ``U_Ch = sqrt3 I_h X_C / h``.
    ``U_C,rms = sqrt(sum U_Ch^2)``, ``U_C,crest = sqrt2 sum U_Ch`` (peaks coincident,
    IEEE Std 18 convention, conservative), ``I_rms = sqrt(sum I_h^2)``,
    ``Q_C = 3 sum I_h^2 X_C / h``, losses ``3 R sum I_h^2`` (sums over h = 1 and the
    harmonics).  Duty per unit of the rating (``U_R``, ``Q_R = U_R^2 / X_C``,
    ``I_R = U_R / (sqrt3 X_C)``) by :func:`resonance.standards.duty.capacitor_duty`.
    The rated-voltage need is the largest of ``U_C1``, ``U_C,rms / k_v``,
    ``U_C,crest / (sqrt2 k_p)``, ``sqrt3 X_C I_rms / k_i`` and ``sqrt(X_C Q_C / k_q)``
    with the limits ``k`` of the set (each duty ratio solved for ``U_R``).
    Quality factor ``Q_f = X_n / R`` with ``X_n = sqrt(X_L X_C)``; half-power bandwidth
    ``Delta h = R / X_L1 = n / Q_f``.

    References
    ----------
    IEEE Std 1531-2020, single-tuned filter branch, tuning and quality factor; IEEE Std
    18-2002, continuous capacitor duty including harmonics (limits
    :data:`resonance.standards.duty.DUTY_LIMITS`); J. Arrillaga, N. R. Watson, *Power System
    Harmonics*, 2nd ed., Wiley 2003, ch. 7 (tuned filter, ``Q = X_n / R``, bandwidth);
    REFERENCES.md "Detuned (series reactor) banks" (``U_C = U/(1 - p)``,
    ``Q_net = Q_CR (U/U_CR)^2/(1 - p)``) [published].
    """
    q_net = _positive("q_net_kvar", q_net_kvar)
    u = _positive("u_bus_kv", u_bus_kv)
    f = _positive("f_hz", f_hz)
    n = _positive("n", n)
    if n <= 1.0:
        raise ValueError(f"tuning order n = {n} must be above 1 (a capacitive branch at the fundamental)")
    rq = float(reactor_q)
    if math.isnan(rq) or rq <= 0.0:
        raise ValueError(f"reactor_q = {reactor_q!r} must be > 0 (inf: lossless reactor)")
    ih = _harmonics(i_harmonic_a)
    p = 1.0 / n**2
    # the series L-C physics of a detuned stage, referred to a capacitor rated at the bus voltage
    step = detuned_step(nameplate_kvar(q_net, u, u, p), u, p, f, u)
    x_c, x_l = float(step.x_c_ohm[0]), float(step.x_l_ohm[0])
    r = x_l / rq if math.isfinite(rq) else 0.0
    i1 = 1000.0 * u / (_SQ3 * (x_c - x_l))  # [A]
    h = np.array([1.0] + [float(k) for k in ih], float)
    i_h = np.array([i1] + list(ih.values()), float)
    u_ch = _SQ3 * i_h * x_c / h / 1000.0  # [kV] line-to-line scale; u_ch[0] = U/(1-p)
    u_rms = float(np.sqrt(np.sum(u_ch**2)))
    u_crest = _SQ2 * float(np.sum(u_ch))
    i_rms = float(np.sqrt(np.sum(i_h**2)))
    q_c = 3.0 * float(np.sum(i_h**2 * x_c / h)) / 1000.0
    lim = duty_limits(DEFAULT_DUTY_LIMITS)
    need = max(float(u_ch[0]), u_rms / lim.v_rms, u_crest / (_SQ2 * lim.v_peak),
               _SQ3 * x_c * i_rms / 1000.0 / lim.i_rms, math.sqrt(x_c * q_c / 1000.0 / lim.q))
    need *= 1.0 + _NEED_ROUNDING
    u_r = need if u_cap_rated_kv is None else _positive("u_cap_rated_kv", u_cap_rated_kv)
    duty = capacitor_duty(h, u_ch / u_r, lim)
    return FilterBranch(
        n=n, p=p, f_hz=f, f_tuning_hz=float(step.f_tuning_hz), u_bus_kv=u, q_net_kvar=q_net,
        x_c_ohm=x_c, x_l_ohm=x_l, r_ohm=r, c_uf=1e6 / (2.0 * math.pi * f * x_c), l_mh=float(step.l_mh[0]),
        reactor_q=rq, x_n_ohm=math.sqrt(x_l * x_c), q_factor=math.sqrt(x_l * x_c) / r if r > 0 else math.inf,
        bandwidth_orders=r / x_l, n_band=tuning_band(n), orders=tuple(ih),
        i1_a=i1, i_h_a=MappingProxyType(dict(ih)), u_c1_kv=float(step.u_c1_kv),
        u_c_h_kv=MappingProxyType({k: float(v) for k, v in zip(ih, u_ch[1:])}),
        u_c_rms_kv=u_rms, u_c_peak_kv=u_crest, i_rms_a=i_rms, i_peak_a=_SQ2 * float(np.sum(i_h)),
        q_c_kvar=q_c, q_l_kvar=3.0 * float(np.sum(h * i_h**2)) * x_l / 1000.0,
        u_cap_rated_kv=u_r, u_cap_need_kv=need, q_nameplate_kvar=1000.0 * u_r**2 / x_c,
        i_cap_rated_a=1000.0 * u_r / (_SQ3 * x_c), losses_kw=3.0 * r * i_rms**2 / 1000.0,
        duty_limits=lim.name,
        v_rms_pct=float(duty.v_rms_pct), v_peak_pct=float(duty.v_peak_pct), i_rms_pct=float(duty.i_rms_pct),
        kvar_pct=float(duty.kvar_pct), v_rms_limit_pct=100.0 * lim.v_rms, v_peak_limit_pct=100.0 * lim.v_peak,
        i_rms_limit_pct=100.0 * lim.i_rms, kvar_limit_pct=100.0 * lim.q,
        duty_margin_pct=float(duty.min_margin_pct), duty_governing=str(duty.governing),
        duty_ok=bool(duty.ok),
    )

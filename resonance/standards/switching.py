"""Switching a capacitor step: inrush current, its frequency, the voltage step and the energising
overvoltage, in closed form; and the limits these are judged against, as data with sources.

Numeric core, plain numbers in and out (SI units unless a name says otherwise).  The circuit is
the per-phase wye equivalent of the three-phase bank: a stage of ``Q`` kvar at ``U`` kV is a
capacitance ``C = Q / (omega U^2)`` per phase, switched at the instant the phase voltage is at
its crest (the worst case), with the capacitor uncharged.

References
----------
IEEE Std C37.99-2012 (guide for the protection of shunt capacitor banks) and IEEE Std
C37.012-2005 (application guide for capacitance current switching), the isolated and
back-to-back inrush formulas (REFERENCES.md "Switching inrush"); the series RLC step response
of any circuit-theory text (e.g. Nilsson and Riedel, *Electric Circuits*, the natural and step
response of RLC circuits).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["stage_capacitance_f", "crest_phase_v", "undamped_inrush", "inrush_transient", "inrush_wave", "damped_peak", "energising_overvoltage_pu",
           "voltage_step_pct", "loop_inductance_for", "DeviceRating", "typical_device",
           "CAP_TRANSIENT_CURRENT_FACTOR", "CAP_TRANSIENT_CURRENT_SOURCE", "CAP_TRANSIENT_VOLTAGE_PU",
           "CAP_TRANSIENT_VOLTAGE_SOURCE", "VOLTAGE_STEP_SOURCE", "DEFAULT_LOOP_UH", "LOOP_UH_SOURCE",
           "UH_PER_M_DEFAULT", "UH_PER_M_SOURCE"]

#: peak switching current a capacitor unit withstands, as a multiple of its rated rms current
#: [unitless]: IEC 60831-1 / IEC 60871-1 (switching inrush up to 100 I_N peak) [from memory]; IEEE Std 18
#: leaves transient currents to application practice (IEEE Std 1036) [from memory]
CAP_TRANSIENT_CURRENT_FACTOR = 100.0
CAP_TRANSIENT_CURRENT_SOURCE = ("IEC 60831-1 / IEC 60871-1 switching transient current of a capacitor unit, "
                                "100 x rated rms current peak [from memory; verify against the unit's data]")
#: peak capacitor voltage on energising a step, per unit of the unit's rated crest [unitless]:
#: energising doubles at most the crest the unit already carries, and IEEE Std 18-2002 allows a
#: crest of 1.2 x rated (its peak-voltage limit), so 2 x 1.2 = 2.4 [derived]; capacitor standards
#: expect units to be switched routinely at about 2 pu (IEC 60831-1 switching overvoltage 2 sqrt(2)
#: U_N peak [from memory])
CAP_TRANSIENT_VOLTAGE_PU = 2.4
CAP_TRANSIENT_VOLTAGE_SOURCE = ("twice the IEEE Std 18-2002 crest limit (1.2 x rated crest) [derived]; the "
                                "energising transient of about 2 pu is the routine event capacitor units are "
                                "built for (IEC 60831-1 [from memory]); verify against the unit's data")
VOLTAGE_STEP_SOURCE = ("rapid voltage change of a switched bank: utility rules commonly allow 2-3 % for "
                       "infrequent steps (common practice; IEC 61000-3-3 d_max 3.3 % for LV equipment [from memory])")

#: inductance of a stage's own connection (bus bar, cable and switching device between the
#: stage and the bank's common bus) when the case gives none [uH]: common practice, an assumed
#: value (LV: a few metres of conductor in an automatic bank's cubicle; MV: bus work between
#: steps a few tens of metres apart, the order of the REFERENCES.md worked check)
DEFAULT_LOOP_UH = {"lv": 3.0, "mv": 20.0}
LOOP_UH_SOURCE = ("assumed default (common practice), not from the case: give [[bank]] step_inductance_uh or "
                  "bus_length_m from the layout")
#: inductance per metre of a stage connection when only its length is given [uH/m]: about
#: 0.5-1 uH/m for bus bar or single-core cables laid apart, 0.3 for three-core cable [from memory]
UH_PER_M_DEFAULT = 0.7
UH_PER_M_SOURCE = "0.7 uH/m, bus bar or single-core cable laid apart (common practice) [from memory]"


def stage_capacitance_f(q_kvar: float, u_kv: float, f_hz: float) -> float:
    """Per-phase (wye-equivalent) capacitance of a three-phase stage [F].

    Parameters
    ----------
    q_kvar : float
        Stage reactive power at ``u_kv`` [kvar].
    u_kv : float
        Line-to-line voltage the kvar is given at [kV].
    f_hz : float
        System frequency [Hz].

    Returns
    -------
    float
        ``C = Q / (2 pi f U^2)`` [F].

    References
    ----------
    IEEE Std 18-2002, rated reactive power of a capacitor ``Q = omega C U^2``.
    """
    return q_kvar * 1e3 / (2.0 * math.pi * f_hz * (u_kv * 1e3) ** 2)


def crest_phase_v(u_kv: float) -> float:
    """Crest of the phase-to-neutral voltage, ``sqrt(2/3) U_LL`` [V], for ``u_kv`` line-to-line [kV]."""
    return math.sqrt(2.0 / 3.0) * u_kv * 1e3


def undamped_inrush(u_kv: float, c_f: float, l_h: float) -> tuple[float, float]:
    """Peak [A] and frequency [Hz] of the inrush of an uncharged capacitance through an inductance.

    Parameters
    ----------
    u_kv : float
        Line-to-line voltage at the instant of closing (rms) [kV].
    c_f : float
        Capacitance being charged, per phase [F]: the stage for isolated switching, the series
        combination ``C1 C2 / (C1 + C2)`` for back-to-back switching.
    l_h : float
        Inductance of the loop, per phase [H]: the supply's plus the stage's for isolated
        switching, the inductance between the steps for back-to-back switching.

    Returns
    -------
    (float, float)
        ``I_pk = sqrt(2/3) U sqrt(C / L)`` [A] and ``f = 1 / (2 pi sqrt(L C))`` [Hz]; an upper
        bound of the damped circuit's peak (:func:`damped_peak`).

    References
    ----------
    IEEE Std C37.99-2012 and IEEE Std C37.012-2005, isolated and back-to-back bank switching
    (REFERENCES.md "Switching inrush").
    """
    return crest_phase_v(u_kv) * math.sqrt(c_f / l_h), 1.0 / (2.0 * math.pi * math.sqrt(l_h * c_f))


def inrush_transient(v_pk: float, f_sys_hz: float | None, l_s: float, r_s: float, on, new) -> tuple[float, float]:
    """Peak [A] and frequency [Hz] of a stage's inrush (see :func:`inrush_wave`)."""
    peak, hz, _t, _i = inrush_wave(v_pk, f_sys_hz, l_s, r_s, on, new)
    return peak, hz


def inrush_wave(v_pk: float, f_sys_hz: float | None, l_s: float, r_s: float, on, new):
    """Peak [A] and frequency [Hz] of a stage's inrush, fed by the supply and the stages in service.

    Parameters
    ----------
    v_pk : float
        Crest of the source's phase voltage [V]; the stage closes at that crest (t = 0).
    f_sys_hz : float or None
        System frequency [Hz]; None holds the source at its crest (the classic closed forms'
        assumption, right when the inrush rings much faster than the system frequency).
    l_s, r_s : float
        Supply inductance [H] and resistance [ohm] at the bank's bus; ``l_s = inf``: no supply
        path (the two-capacitor circuit of :func:`undamped_inrush`).
    on : (float, float, float) or None
        The stages in service taken together: their connections' inductance in parallel [H],
        resistance [ohm] and capacitance [F], in steady state before closing (charged to the
        crest when ``f_sys_hz`` is None); None for the first step (isolated switching).
    new : (float, float, float)
        The stage switched in: inductance [H], resistance [ohm], capacitance [F], uncharged.

    Returns
    -------
    (float, float, ndarray, ndarray)
        The largest ``|i_new(t)|`` [A] of the linear circuit's response, the frequency of the
        natural mode carrying most of it [Hz], and the current ``i_new`` [A] against time ``t``
        [s] from closing over 1.25 periods of the slowest mode.

    Notes
    -----
    The bus has no capacitance of its own: the supply, the in-service stages and the new stage
    share one node.  The state ``x`` (branch currents and capacitor voltages) obeys
    ``dx/dt = A x + b v_s(t)``; its solution is the power-frequency steady state (a phasor) plus
    ``V e^(Lambda t) c`` (eigen-decomposition of ``A``) fitted to the state at closing.  Where the
    inrush rings only a few times faster than the system frequency (detuned stages) the source's
    own motion and the power-frequency current add up to a third to the classic closed form; where
    the stages' own inductance is large against the supply's, the supply carries the inrush of a
    back-to-back step, which the two-capacitor formula misses.

    References
    ----------
    IEEE Std C37.012-2005 (isolated and back-to-back switching, source and bank contributions)
    [from memory]; state-space solution of a linear circuit with a sinusoidal source (any
    circuit-theory text, e.g. Nilsson and Riedel, *Electric Circuits*).
    """
    l_new, r_new, c_new = new
    gs = 0.0 if not math.isfinite(l_s) else 1.0 / l_s
    if on is None:
        lt, rt = l_s + l_new, r_s + r_new
        a = np.array([[-rt / lt, -1.0 / lt], [1.0 / c_new, 0.0]])
        b = np.array([1.0 / lt, 0.0])
        x0 = np.zeros(2)
        k_new = 0
    else:
        l_on, r_on, c_on = on
        g_on, g_new = 1.0 / l_on, 1.0 / l_new
        den = gs + g_on + g_new
        # v_b = (gs (v_s - r_s i_s) + g_on (r_on i_on + v_on) + g_new (r_new i_new + v_new)) / den, i_s = i_on + i_new
        rb = np.array([-gs * r_s + g_on * r_on, g_on, -gs * r_s + g_new * r_new, g_new]) / den
        a = np.zeros((4, 4))
        a[0] = (rb - np.array([r_on, 1.0, 0.0, 0.0])) * g_on
        a[1, 0] = 1.0 / c_on
        a[2] = (rb - np.array([0.0, 0.0, r_new, 1.0])) * g_new
        a[3, 2] = 1.0 / c_new
        b = np.array([g_on, 0.0, g_new, 0.0]) * gs / den
        k_new = 2
        if f_sys_hz is None or gs == 0.0:
            x0 = np.array([0.0, v_pk, 0.0, 0.0])
        else:  # the in-service stages in their power-frequency steady state at the crest
            w = 2.0 * math.pi * f_sys_hz
            i_on = v_pk / (r_s + 1j * w * l_s + r_on + 1j * w * l_on + 1.0 / (1j * w * c_on))
            x0 = np.array([i_on.real, (i_on / (1j * w * c_on)).real, 0.0, 0.0])
    lam, vec = np.linalg.eig(a)
    if f_sys_hz is None or gs == 0.0 and on is not None:
        # source held at the crest: the steady state is DC (charges shared, or charged to v_pk)
        if gs == 0.0 and on is not None:
            v_end = x0[1] * on[2] / (on[2] + c_new)
            x_ss = np.array([0.0, v_end, 0.0, v_end])
        else:
            x_ss = np.zeros_like(x0)
            x_ss[1::2] = v_pk
        xp0, xp_new, w = x_ss, None, 0.0
    else:
        w = 2.0 * math.pi * f_sys_hz
        phasor = np.linalg.solve(1j * w * np.eye(a.shape[0]) - a, b * v_pk)
        xp0, xp_new = phasor.real, phasor[k_new]
    coef = np.linalg.solve(vec, (x0 - xp0).astype(complex))
    amp = vec[k_new] * coef
    osc = np.abs(lam.imag) > 1e-9 * max(1.0, float(np.max(np.abs(lam))))
    wn = np.abs(lam.imag[osc]) if np.any(osc) else np.abs(lam.real)
    w_fast = float(np.max(wn))
    w_slow = float(np.min(wn[wn > 0])) if np.any(wn > 0) else w_fast
    t_end = 1.25 * 2.0 * math.pi / w_slow

    def current(tt: np.ndarray) -> np.ndarray:
        out = np.real(np.exp(np.outer(tt, lam)) @ amp)
        return out + np.real(xp_new * np.exp(1j * w * tt)) if xp_new is not None else out

    # 32 samples per period of the fastest mode, then the largest sample refined on a fine grid
    n = int(min(100_000, max(400, 32.0 * w_fast * t_end / (2.0 * math.pi))))
    t = np.linspace(0.0, t_end, n)
    i_new = current(t)
    j = int(np.argmax(np.abs(i_new)))
    fine = np.linspace(t[max(j - 1, 0)], t[min(j + 1, n - 1)], 129)
    peak = max(float(np.max(np.abs(current(fine)))), float(abs(i_new[j])))
    dominant = int(np.argmax(np.abs(amp) * osc)) if np.any(osc) else int(np.argmax(np.abs(amp)))
    return peak, float(abs(lam[dominant].imag)) / (2.0 * math.pi), t, i_new


def damped_peak(v0: float, l_h: float, c_f: float, r_ohm: float) -> float:
    """Peak current of a series RLC loop closed onto a voltage step ``v0`` (capacitor uncharged) [A].

    Parameters
    ----------
    v0 : float
        Voltage step driving the loop [V].
    l_h, c_f, r_ohm : float
        Loop inductance [H], capacitance [F] and resistance [ohm].

    Returns
    -------
    float
        The first (largest) peak of ``i(t)``: underdamped ``v0 / (omega_d L) e^(-alpha t*) sin(omega_d t*)``
        with ``t* = atan(omega_d / alpha) / omega_d``; critically damped ``v0 / (e alpha L)``;
        overdamped ``v0 / (L (s1 - s2)) (e^(s1 t*) - e^(s2 t*))`` at ``t* = ln(s2 / s1) / (s1 - s2)``.
        ``alpha = R / 2L``, ``omega_0 = 1 / sqrt(LC)``.

    References
    ----------
    The step response of the series RLC circuit (Nilsson and Riedel, *Electric Circuits*,
    chapter on the natural and step response of RLC circuits).
    """
    if r_ohm <= 0.0:
        return v0 * math.sqrt(c_f / l_h)
    alpha = r_ohm / (2.0 * l_h)
    w0 = 1.0 / math.sqrt(l_h * c_f)
    if alpha < w0 * (1.0 - 1e-9):
        wd = math.sqrt(w0 * w0 - alpha * alpha)
        t = math.atan2(wd, alpha) / wd
        return v0 / (wd * l_h) * math.exp(-alpha * t) * math.sin(wd * t)
    if alpha <= w0 * (1.0 + 1e-9):
        return v0 / (math.e * alpha * l_h)
    root = math.sqrt(alpha * alpha - w0 * w0)
    s1, s2 = -alpha + root, -alpha - root  # s2 < s1 < 0
    t = math.log(s2 / s1) / (s1 - s2)
    return v0 / (l_h * (s1 - s2)) * (math.exp(s1 * t) - math.exp(s2 * t))


def energising_overvoltage_pu(c_on_f: float, c_new_f: float, zeta: float) -> float:
    """Peak bus voltage after a step is energised, per unit of the crest before closing [unitless].

    Parameters
    ----------
    c_on_f : float
        Capacitance already in service on the bus [F] (0 for the first step).
    c_new_f : float
        Capacitance of the step switched in [F].
    zeta : float
        Damping ratio of the supply-side (lower-frequency) oscillation [unitless].

    Returns
    -------
    float
        ``1 + C_new / (C_on + C_new) exp(-pi zeta / sqrt(1 - zeta^2))``: the fast exchange between
        the steps pulls the bus to ``C_on / (C_on + C_new)`` of its crest, and the supply then
        recharges the whole bank through its inductance, overshooting the crest by the
        charge it lost; 2 pu for an undamped first step.

    References
    ----------
    IEEE Std C37.012-2005 (energising transient of a capacitor bank, about 2 pu) [from memory];
    the overshoot of the series RLC step response (circuit theory) for the damping [derived].
    """
    share = c_new_f / (c_on_f + c_new_f)
    z = min(max(zeta, 0.0), 0.999999)
    return 1.0 + share * math.exp(-math.pi * z / math.sqrt(1.0 - z * z))


def voltage_step_pct(q_step_kvar: float, sc_mva: float) -> float:
    """Voltage rise on switching in a step [%]: ``dV / V = Q_step / S_sc``.

    Parameters
    ----------
    q_step_kvar : float
        Reactive power of the step switched in, at the bus voltage [kvar].
    sc_mva : float
        Short-circuit power at the bus [MVA].

    References
    ----------
    IEEE Std 1036-2010 (application of shunt power capacitors), voltage rise ``Q / S_sc``
    [from memory; the formula is the linearised voltage drop of any power-systems text].
    """
    return 100.0 * q_step_kvar / (sc_mva * 1000.0)


def loop_inductance_for(u_kv: float, c_eq_f: float, peak_a: float | None, f_hz: float | None) -> float:
    """Smallest loop inductance that keeps an undamped inrush within a peak and a frequency [H].

    Parameters
    ----------
    u_kv : float
        Line-to-line voltage [kV].
    c_eq_f : float
        Capacitance charged in the loop [F] (see :func:`undamped_inrush`).
    peak_a : float or None
        Peak current limit [A] (None: not limited).
    f_hz : float or None
        Frequency limit [Hz] (None: not limited).

    Returns
    -------
    float
        ``max(C (V_pk / I_lim)^2, 1 / ((2 pi f_lim)^2 C))`` [H], the inverse of
        :func:`undamped_inrush`.

    References
    ----------
    As :func:`undamped_inrush`, solved for L [derived].
    """
    need = 0.0
    if peak_a:
        need = max(need, c_eq_f * (crest_phase_v(u_kv) / peak_a) ** 2)
    if f_hz:
        need = max(need, 1.0 / ((2.0 * math.pi * f_hz) ** 2 * c_eq_f))
    return need


@dataclass(frozen=True)
class DeviceRating:
    """Inrush capability of the device that switches a step.

    Attributes
    ----------
    peak_a : float or None
        Rated transient inrush peak current [A] (None: not given).
    f_hz : float or None
        Rated transient inrush frequency [Hz] (None: not given).
    source : str
        Where the figures come from: the case (the device's data) or a typical value, marked so.
    typical : bool
        True when the figures are typical values, not the device's own.
    """

    peak_a: float | None
    f_hz: float | None
    source: str
    typical: bool


def typical_device(bus_kv: float) -> DeviceRating:
    """Typical inrush capability of a switching device when the case gives none.

    Parameters
    ----------
    bus_kv : float
        Nominal voltage of the bank's bus [kV].

    Returns
    -------
    DeviceRating
        Above 1 kV: a definite-purpose capacitor-switching breaker, 10 kA peak at 4 240 Hz
        (ANSI C37.06-2000 limits as summarised in the Siemens TechTopics No. 32 note; typical,
        verify against the breaker's nameplate).  At 1 kV and below: none (LV contactors differ
        too widely; the capacitor units' own limit still applies).

    References
    ----------
    Siemens TechTopics No. 32, "Capacitor switching applications" (ANSI C37.06-2000 back-to-back
    limits: peak inrush 10 kA or less, inrush frequency not above 4 240 Hz).
    """
    if bus_kv > 1.0:
        return DeviceRating(peak_a=10_000.0, f_hz=4240.0, typical=True,
                            source=("typical definite-purpose breaker, 10 kA peak at 4 240 Hz (ANSI C37.06-2000 as "
                                    "summarised in Siemens TechTopics No. 32); verify against the breaker's nameplate"))
    return DeviceRating(peak_a=None, f_hz=None, typical=True,
                        source="no LV switching-device rating given; the capacitor units' own limit applies")

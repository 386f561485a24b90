"""Switching every step of a bank: inrush, back-to-back inrush, voltage step, energising
overvoltage, and the findings they make against the device's and the capacitor units' limits.

Numeric core, plain data.  The study stage (:mod:`resonance.assessment.study`) calls
:func:`switching_study` with its scans (the short-circuit power and X/R at the bank's bus and the
bus voltage of every step, in every scenario); the closed forms and the limits are
:mod:`resonance.standards.switching`'s.

The circuit, per phase: the supply (``L_s``, ``R_s`` from the short-circuit power and X/R at the
bank's bus, loads and banks out, IEC 60909 style), the bank's common bus, and for every stage
its own connection (bus bar, cable, device: ``step_inductance_uh`` or ``bus_length_m``, else a
marked default), its inrush-limiting reactor (``inrush_reactor_uh``) and, on a detuned bank, its
detuning reactor (``p X_C``, with the resistance of its X/R), in series with its capacitors.
Step 1 is energised from the supply alone (isolated); step k > 1 is energised with stages
1..k-1 in service (back-to-back: their connections in parallel, then the new stage's).

References
----------
IEEE Std C37.99-2012; IEEE Std C37.012-2005 (REFERENCES.md "Switching inrush").
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from resonance.assessment.envelope import scenario_words
from resonance.assessment.findings import Finding
from resonance.standards import switching as sw

__all__ = ["SwitchingStep", "BankSwitching", "switching_study", "loop_uh", "SWITCHING_CHECKS"]

#: the checks of this module (also in :data:`resonance.assessment.findings.CHECKS`)
SWITCHING_CHECKS = ("inrush_peak", "inrush_frequency", "inrush_capacitor", "voltage_step", "energising_overvoltage")


@dataclass(frozen=True)
class SwitchingStep:
    """Switching in the last stage of one step (stages 1..k-1 already in service).

    Attributes
    ----------
    step : int
        Step number [unitless].
    kind : str
        ``"isolated"`` (step 1) or ``"back_to_back"`` [unitless].
    u_kv : float
        Bus voltage at closing [kV] (with the step in: the higher, conservative value).
    c_new_uf, c_on_uf, c_eq_uf : float
        Capacitance switched in, already in service, and charged in the loop, per phase [uF].
    l_loop_uh : float
        Inductance of the inrush loop, per phase [uH].
    r_loop_ohm : float
        Resistance of the loop (supply or detuning reactors, and a pre-insertion resistor) [ohm].
    peak_a : float
        Governing peak inrush current [A]: undamped closed form (an upper bound), or with a
        pre-insertion resistor the larger of the insertion and bypass peaks.
    peak_damped_a : float
        Peak with the loop's resistance [A] (circuit theory, :func:`resonance.standards.switching.damped_peak`).
    hz : float
        Inrush frequency [Hz].
    rated_a : float
        Rated rms current of the stage's capacitors [A].
    voltage_step_pct : float
        Voltage rise at the bus on switching the stage in [%].
    overvoltage_pu : float
        Peak bus voltage after energising, per unit of the crest before closing [unitless].
    cap_overvoltage_pu : float
        That peak on the stage's capacitors, per unit of their rated crest [unitless].
    """

    step: int
    kind: str
    u_kv: float
    c_new_uf: float
    c_on_uf: float
    c_eq_uf: float
    l_loop_uh: float
    r_loop_ohm: float
    peak_a: float
    peak_damped_a: float
    hz: float
    rated_a: float
    voltage_step_pct: float
    overvoltage_pu: float
    cap_overvoltage_pu: float

    @property
    def peak_times_hz(self) -> float:
        """Product of peak current and frequency [A/s] (a measure of contact duty)."""
        return self.peak_a * self.hz


@dataclass(frozen=True)
class BankSwitching:
    """Every step of one bank switched in one scenario, with the limits used.

    Attributes
    ----------
    bank, scenario : str
        Bank and scenario names [unitless].
    steps : tuple of SwitchingStep
    device : resonance.standards.switching.DeviceRating
        Inrush capability of the switching device, with its source.
    loop_uh : tuple of float
        Inductance of each stage's own connection [uH] (reactors not included).
    loop_source : str
        Where ``loop_uh`` comes from [unitless].
    cap_peak_limit_a : tuple of float
        Peak current each stage's capacitors withstand [A].
    voltage_step_limit_pct : float
        Voltage step limit [%].
    l_supply_uh : float
        Supply inductance at the bank's bus, per phase [uH].
    wave_ms, wave_a : ndarray
        Inrush current of the governing step (with the loop's resistance) [A] against time from
        closing [ms], for the report's figure.
    """

    bank: str
    scenario: str
    steps: tuple
    device: sw.DeviceRating
    loop_uh: tuple
    loop_source: str
    cap_peak_limit_a: tuple
    voltage_step_limit_pct: float
    l_supply_uh: float
    wave_ms: np.ndarray = field(default_factory=lambda: np.zeros(0), compare=False)
    wave_a: np.ndarray = field(default_factory=lambda: np.zeros(0), compare=False)

    def governing(self) -> SwitchingStep:
        """The step with the highest peak inrush current."""
        return max(self.steps, key=lambda s: s.peak_a)


def loop_uh(bank, bus_kv: float) -> tuple[tuple[float, ...], str]:
    """Inductance of each stage's own connection [uH] and its source, from the case's bank.

    Parameters
    ----------
    bank : resonance.inputs.case.Bank
        The case's bank (``step_inductance_uh``, ``bus_length_m``, ``uh_per_m``).
    bus_kv : float
        Nominal voltage of its bus [kV] (chooses the LV or MV default).

    Returns
    -------
    (tuple of float, str)
        Per-stage inductance [uH] and where it comes from.
    """
    n = len(bank.steps_kvar)

    def per_stage(v):
        return tuple(float(x) for x in v) if isinstance(v, list) else (float(v),) * n

    if bank.step_inductance_uh is not None:
        return per_stage(bank.step_inductance_uh), "case file (step_inductance_uh)"
    if bank.bus_length_m is not None:
        k = bank.uh_per_m if bank.uh_per_m is not None else sw.UH_PER_M_DEFAULT
        src = f"case file (bus_length_m at {bank.uh_per_m:g} uH/m)" if bank.uh_per_m is not None else \
            f"case file (bus_length_m) at {sw.UH_PER_M_SOURCE}"
        return tuple(k * x for x in per_stage(bank.bus_length_m)), src
    key = "mv" if bus_kv > 1.0 else "lv"
    return (sw.DEFAULT_LOOP_UH[key],) * n, sw.LOOP_UH_SOURCE


def _device(bank, bus_kv: float) -> sw.DeviceRating:
    if bank.device_inrush_peak_ka is not None or bank.device_inrush_hz is not None:
        pk = bank.device_inrush_peak_ka * 1000.0 if bank.device_inrush_peak_ka is not None else None
        return sw.DeviceRating(peak_a=pk, f_hz=bank.device_inrush_hz, typical=False,
                               source="the switching device's rating given in the case file")
    return sw.typical_device(bus_kv)


def bank_switching(bank, bm, sc, f_hz: float, limit_pct: float) -> BankSwitching:
    """Switching figures of every step of one bank in one scenario.

    Parameters
    ----------
    bank : resonance.inputs.case.Bank
        The case's bank (switching data).
    bm : resonance.assessment.study.BankModel
        Its model (stages [kvar] at ``rated_kv`` [kV], bus voltage [kV], p, reactor X/R).
    sc : resonance.assessment.study.BankScan
        Its scan in the scenario: ``sc_mva`` [MVA] and ``x_r`` at the bus, bus voltage per step [pu].
    f_hz : float
        System frequency [Hz].
    limit_pct : float
        Voltage step limit [%].

    Returns
    -------
    BankSwitching

    References
    ----------
    IEEE Std C37.99-2012 / C37.012-2005 closed forms (:mod:`resonance.standards.switching`).
    """
    w = 2.0 * math.pi * f_hz
    n = bm.n_steps
    c = [sw.stage_capacitance_f(float(q), bm.rated_kv, f_hz) for q in bm.stages_kvar]
    wire, wire_src = loop_uh(bank, bm.bus_kv)
    extra = (bank.inrush_reactor_uh or 0.0)
    l_det = [bm.p / (w * w * cj) for cj in c]  # X_L = p X_C at the fundamental
    r_det = [w * ld / bm.reactor_q if bm.p > 0 else 0.0 for ld in l_det]
    l_stage = [(wire[j] + extra) * 1e-6 + l_det[j] for j in range(n)]
    z_s = bm.bus_kv**2 / sc.sc_mva  # [ohm]
    xr = sc.x_r if math.isfinite(sc.x_r) else 1e6
    l_s = z_s * xr / math.sqrt(1.0 + xr * xr) / w
    r_s = z_s / math.sqrt(1.0 + xr * xr)
    r_pre = bank.pre_insertion_ohm or 0.0
    steps, waves = [], []
    for k in range(n):
        u = bm.bus_kv * float(sc.steps[k].v_bus_pu)
        c_new = c[k]
        v0 = sw.crest_phase_v(u)
        if k == 0:
            c_on, c_eq, on, on_r = 0.0, c_new, None, None
            l_loop, r_loop = l_s + l_stage[0], r_s + r_det[0]
        else:
            c_on = sum(c[:k])
            c_eq = c_on * c_new / (c_on + c_new)
            l_on = 1.0 / sum(1.0 / x for x in l_stage[:k])
            r_on = 1.0 / sum(1.0 / x for x in r_det[:k]) if all(x > 0 for x in r_det[:k]) else 0.0
            on, on_r = (l_on, 0.0, c_on), (l_on, r_on, c_on)
            # the new stage is fed by the stages in service and by the supply at once
            l_loop = l_stage[k] + 1.0 / (1.0 / l_s + 1.0 / l_on)
            r_loop = r_det[k] + r_on
        peak, hz = sw.inrush_transient(v0, f_hz, l_s, 0.0, on, (l_stage[k], 0.0, c_new))
        damped, _hz, t_s, i_a = sw.inrush_wave(v0, f_hz, l_s, r_s, on_r, (l_stage[k], r_det[k] + r_pre, c_new))
        waves.append((t_s, i_a))
        if r_pre > 0:
            # insertion: the resistor in the loop; bypass: the loop closes onto the voltage left across it
            x = w * r_pre * c_new
            peak = max(damped, peak * x / math.sqrt(1.0 + x * x))
        # the supply's slower recharge of the whole bank sets the overshoot (its damping ratio)
        c_tot = c_on + c_new
        zeta = r_s / 2.0 * math.sqrt(c_tot / l_s) if l_s > 0 else 1.0
        ov = sw.energising_overvoltage_pu(c_on, c_new, zeta)  # a pre-insertion resistor is not credited
        q_bus = float(bm.stages_kvar[k]) * (bm.bus_kv / bm.rated_kv) ** 2 / (1.0 - bm.p)
        steps.append(SwitchingStep(
            step=k + 1, kind="isolated" if k == 0 else "back_to_back", u_kv=u, c_new_uf=c_new * 1e6,
            c_on_uf=c_on * 1e6, c_eq_uf=c_eq * 1e6, l_loop_uh=l_loop * 1e6, r_loop_ohm=r_loop + r_pre,
            peak_a=peak, peak_damped_a=min(damped, peak), hz=hz,
            rated_a=float(bm.stages_kvar[k]) / (math.sqrt(3.0) * bm.rated_kv),
            voltage_step_pct=sw.voltage_step_pct(q_bus, sc.sc_mva), overvoltage_pu=ov,
            cap_overvoltage_pu=ov * u / bm.rated_kv / (1.0 - bm.p)))
    g = max(range(n), key=lambda j: steps[j].peak_a)
    keep = max(1, waves[g][0].size // 1500)  # a figure's worth of points
    return BankSwitching(bank=bm.name, scenario=sc.scenario, steps=tuple(steps), device=_device(bank, bm.bus_kv),
                         wave_ms=waves[g][0][::keep] * 1e3, wave_a=waves[g][1][::keep],
                         loop_uh=tuple(wire), loop_source=wire_src,
                         cap_peak_limit_a=tuple(sw.CAP_TRANSIENT_CURRENT_FACTOR * s.rated_a for s in steps),
                         voltage_step_limit_pct=limit_pct, l_supply_uh=l_s * 1e6)


def switching_findings(bs: BankSwitching) -> list[Finding]:
    """Findings of one bank's switching in one scenario (the one assessment's checks)."""
    out = []
    words = scenario_words(bs.scenario)
    dev = bs.device
    for s, cap_lim in zip(bs.steps, bs.cap_peak_limit_a):
        what = "energising" if s.kind == "isolated" else "back-to-back switching"
        head = f"bank {bs.bank} step {s.step} ({words}): {what}"

        def add(check, value, limit, unit, source, msg):
            out.append(Finding(bank=bs.bank, step=s.step, scenario=bs.scenario, check=check, value=value,
                               limit=limit, unit=unit, source=source, cause="bank", message=f"{head} {msg}"))

        if dev.peak_a is not None and s.peak_a > dev.peak_a:
            add("inrush_peak", s.peak_a, dev.peak_a, "A peak", dev.source,
                f"draws {s.peak_a / 1000:.2f} kA peak, above the switching device's {dev.peak_a / 1000:.3g} kA")
        if dev.f_hz is not None and s.hz > dev.f_hz:
            add("inrush_frequency", s.hz, dev.f_hz, "Hz", dev.source,
                f"rings at {s.hz:.0f} Hz, above the switching device's {dev.f_hz:.0f} Hz")
        if s.peak_a > cap_lim:
            add("inrush_capacitor", s.peak_a, cap_lim, "A peak", sw.CAP_TRANSIENT_CURRENT_SOURCE,
                f"draws {s.peak_a / 1000:.2f} kA peak, {s.peak_a / s.rated_a:.0f} x the stage's rated current "
                f"(capacitor limit {sw.CAP_TRANSIENT_CURRENT_FACTOR:.0f} x)")
        if s.voltage_step_pct > bs.voltage_step_limit_pct:
            add("voltage_step", s.voltage_step_pct, bs.voltage_step_limit_pct, "%", sw.VOLTAGE_STEP_SOURCE,
                f"raises the bus voltage by {s.voltage_step_pct:.2f} % (limit {bs.voltage_step_limit_pct:g} %)")
        if s.cap_overvoltage_pu > sw.CAP_TRANSIENT_VOLTAGE_PU:
            add("energising_overvoltage", s.cap_overvoltage_pu, sw.CAP_TRANSIENT_VOLTAGE_PU,
                "pu of the capacitor's rated crest", sw.CAP_TRANSIENT_VOLTAGE_SOURCE,
                f"drives the capacitors to {s.cap_overvoltage_pu:.2f} x their rated crest voltage "
                f"(limit {sw.CAP_TRANSIENT_VOLTAGE_PU:g} x)")
    return out


def switching_study(case, scans) -> tuple[tuple, list[Finding], list[str]]:
    """Switching of every step of every bank in every scenario of a study.

    Parameters
    ----------
    case : resonance.inputs.case.Case
        The case (banks' switching data, frequency [Hz], voltage step limit [%]).
    scans : sequence of resonance.assessment.study.BankScan
        The study's scans (every bank and scenario).

    Returns
    -------
    (tuple of BankSwitching, list of Finding, list of str)
        Figures, findings and notes (assumed values the engineer should replace).
    """
    by_name = {b.name: b for b in case.bank}
    out, findings, notes = [], [], []
    for sc in scans:
        bank = by_name[sc.bank.name]
        bs = bank_switching(bank, sc.bank, sc, float(case.frequency_hz), case.study.voltage_step_limit_pct)
        out.append(bs)
        findings += switching_findings(bs)
        if sc.scenario == "nominal":
            if bs.loop_source == sw.LOOP_UH_SOURCE:
                notes.append(f"bank {bank.name}: the inductance of each stage's connection is not given; "
                             f"{bs.loop_uh[0]:g} uH per stage is assumed for the inrush (give step_inductance_uh "
                             "or bus_length_m)")
            if bs.device.typical:
                notes.append(f"bank {bank.name}: switching device inrush capability: {bs.device.source} (give "
                             "device_inrush_peak_ka and device_inrush_hz from the device's data)")
    return tuple(out), findings, notes

"""Orchestrator: case -> plant model -> scans of every bank step -> StudyResult.

Pure apart from the pandapower calls made through :mod:`resonance.model.netmodel`
(load flow, IEC 60909): no files, no printing, no plotting.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from resonance.model.admittance import StepAdmittance, YPattern, bank_step_admittance
from resonance.inputs.case import Case
from resonance.memo import remember, scope
from resonance.inputs.case_checks import case_hints
from resonance.errors import InputError, InputProblem, ModelError
from resonance.assessment.envelope import scenario_arrays, scenario_words, scenarios_of
from resonance.assessment.findings import Finding
from resonance.assessment.site import limit_set_notes
from resonance.model.network import NetworkArrays
from resonance.assessment.curves import prominent, study_curves
from resonance.harmonics.scan import ModelSettings, harmonic_grid, impedance_columns
from resonance.harmonics.screening import HarmonicOrders, h_estimate, nearest_order, orders_of_concern

__all__ = ["StepScan", "BankScan", "StudyResult", "run_study", "BankModel", "bank_models", "iec60909_cross_check",
           "with_cross_check", "bus_short_circuit"]


@dataclass(frozen=True, eq=False)
class BankModel:
    """A bank as the core sees it.

    Attributes
    ----------
    name, bus : str
        Bank and bus names.
    index : int
        Model bus index [unitless].
    bus_kv, rated_kv : float
        Bus nominal and capacitor rated voltage [kV].
    stages_kvar : ndarray
        Stage sizes at rated voltage [kvar].
    p : float
        Detuning factor X_L/X_C [unitless] (0: plain bank).
    reactor_q : float
        Reactor X/R [unitless].
    """

    name: str
    bus: str
    index: int
    bus_kv: float
    rated_kv: float
    stages_kvar: np.ndarray
    p: float
    reactor_q: float

    @property
    def n_steps(self) -> int:
        """Number of steps [unitless]."""
        return int(self.stages_kvar.size)

    def q_cap_nominal_kvar(self) -> np.ndarray:
        """Cumulative capacitor kvar of steps 1..N at the bus nominal voltage [kvar].

        Notes
        -----
        ``Q = Q_rated (U_n / U_R)^2`` (constant capacitance).
        """
        return np.cumsum(self.stages_kvar) * (self.bus_kv / self.rated_kv) ** 2

    def step_b_pu(self, base_mva: float) -> np.ndarray:
        """Capacitor susceptance ``1/X_C`` of steps 1..N at the fundamental [pu]."""
        return self.q_cap_nominal_kvar() / 1000.0 / base_mva

    def step_admittance(self, h: np.ndarray, base_mva: float) -> np.ndarray:
        """Admittance of steps 1..N at orders h, shape (n_h, N) [pu]."""
        return bank_step_admittance(h, self.step_b_pu(base_mva), self.p, self.reactor_q)


class _StepAdmittance(StepAdmittance):
    """:class:`~resonance.model.admittance.StepAdmittance` of a bank model, keeping the last large
    grid's values (the study's base grid is asked for more than once)."""

    def __init__(self, bank: "BankModel", base_mva: float):
        super().__init__(bank.step_b_pu(base_mva), bank.p, bank.reactor_q)
        self._last = (None, None)  # (grid, Y)

    def __call__(self, h: np.ndarray) -> np.ndarray:
        if self._last[0] is h:
            return self._last[1]
        y = super().__call__(h)
        if h.size > 64:
            y.flags.writeable = False
            self._last = (h, y)
        return y


def _in_with(bank: "BankModel", banks: list, other_mode: str, runs_with: dict) -> list:
    """The other banks in service (fully) while ``bank`` is swept: all of them with ``[study]
    other_banks = "full"``, else those the bank runs with (``[[bank]] runs_with``: a filter's
    lower branches) [unitless]."""
    return [o for o in banks if o is not bank and (other_mode == "full" or o.name in runs_with.get(bank.name, ()))]


def bank_models(case: Case, arr: NetworkArrays, model_bus: dict) -> list[BankModel]:
    """Bank models for every bank of the case [see :class:`BankModel`]."""
    out = []
    for b in case.bank:
        m = model_bus[b.bus]
        out.append(BankModel(name=b.name, bus=b.bus, index=m, bus_kv=float(arr.bus_kv[m]), rated_kv=b.rated_kv,
                             stages_kvar=np.asarray(b.steps_kvar, float),
                             p=(b.detuning_pct or 0.0) / 100.0, reactor_q=b.reactor_q))
    return out


@dataclass(frozen=True, eq=False)
class StepScan:
    """Screening result of one step of one bank in one supply scenario.

    Units: kvar [kvar], voltages [pu], orders [unitless], impedance [ohm], margin [%].
    """

    step: int
    kvar_nameplate: float
    kvar_nominal: float
    kvar_delivered: float
    v_bus_pu: float
    h_estimate: float
    h_scan: float | None
    z_peak_ohm: float | None
    peaks: tuple
    nearest_order: int | None
    nearest_kind: str | None
    margin_pct: float | None
    resonance_ok: bool
    damping_sensitive: bool


@dataclass(frozen=True, eq=False)
class BankScan:
    """All steps of one bank in one supply scenario, with the scan curves.

    Attributes
    ----------
    scenario : str
        A scenario of the operating envelope (:mod:`resonance.assessment.envelope`).
    sc_mva : float
        Physical (c = 1) short-circuit power at the bank bus, loads excluded [MVA].
    x_r : float
        X/R of the Thevenin impedance at the bank bus [unitless].
    h : ndarray, shape (n_h,)
        Scan orders [unitless].
    z_ohm : ndarray, shape (N + 1, n_h)
        Driving-point impedance magnitude at the bank bus, row 0 bank off [ohm].
    z_pcc_ohm : ndarray, shape (N + 1, n_h)
        Driving-point impedance magnitude at the PCC bus [ohm].
    steps : tuple of StepScan
    """

    bank: BankModel
    scenario: str
    sc_mva: float
    x_r: float
    h: np.ndarray
    z_ohm: np.ndarray
    z_pcc_ohm: np.ndarray
    steps: tuple


@dataclass(frozen=True)
class SupplyFigures:
    """The supply and PCC figures of the plant model that the results report.

    Attributes
    ----------
    bus : str
        Supply (external grid) bus [unitless].
    sc_mva, x_r : float
        Supply short-circuit power [MVA] and X/R [unitless] (nominal scenario).
    sc_mva_min : float or None
        Weak-supply short-circuit power [MVA].
    pcc_kv : float
        Nominal voltage of the PCC bus [kV].
    """

    bus: str
    sc_mva: float
    x_r: float
    sc_mva_min: float | None
    pcc_kv: float


@dataclass(frozen=True, eq=False)
class StudyResult:
    """Everything the study stage found (typed, unrounded); the edge writes it out.

    ``sources`` are the resolved source spectra ``(name, {order: pct}, pulses)`` [%];
    ``supply`` the model's supply and PCC figures.  The result holds no pandapower model.
    """

    case: Case
    orders: HarmonicOrders
    scans: tuple
    sc_mva_iec60909: dict
    pcc_bus: str
    settings: ModelSettings
    findings: tuple
    warnings: tuple = field(default_factory=tuple)
    assessments: tuple = field(default_factory=tuple)
    sc_mva_pcc: float = float("nan")
    sources: tuple = field(default_factory=tuple)
    supply: SupplyFigures | None = None
    #: the operating envelope the study ran in (:class:`resonance.assessment.envelope.Scenario`)
    scenarios: tuple = field(default_factory=tuple)
    #: switching of every bank in every scenario (:class:`resonance.assessment.switching.BankSwitching`)
    switching: tuple = field(default_factory=tuple)

    def assessment_for(self, bank: str, scenario: str = "nominal"):
        """Penetration and duty of one bank in one scenario (None if absent)."""
        for a in self.assessments:
            if a.bank == bank and a.scenario == scenario:
                return a
        return None

    @property
    def passed(self) -> bool:
        """The verdict (:func:`resonance.assessment.verdict.check_passes`): no bank finding, and no
        site finding either when the case sets ``site_findings = "fail"``."""
        from resonance.assessment.verdict import check_passes  # noqa: PLC0415

        return check_passes(self.findings, self.case.study.site_findings)

    def switching_for(self, bank: str, scenario: str = "nominal"):
        """Switching figures of one bank in one scenario (None if absent)."""
        return next((x for x in self.switching if x.bank == bank and x.scenario == scenario), None)

    def scans_for(self, bank: str, scenario: str = "nominal") -> BankScan | None:
        """The scan of one bank in one scenario (None if absent)."""
        for s in self.scans:
            if s.bank.name == bank and s.scenario == scenario:
                return s
        return None


def thevenin_pu(arr: NetworkArrays, buses: np.ndarray, settings: ModelSettings) -> np.ndarray:
    """Driving-point impedance at the fundamental, loads excluded (short-circuit impedance).

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu].
    buses : ndarray of int
        Buses [unitless].
    settings : ModelSettings
        Element models (the resistance model matters little at h = 1).

    Returns
    -------
    ndarray, complex
        ``Z_kk(1)`` [pu].

    References
    ----------
    IEC 60909-0:2016, clause 4.2 (short-circuit impedance at the fault
    location, here with c = 1 and no correction factors).
    """
    buses = np.asarray(buses, int)
    # one load-free copy per network and check, so its solver set-up is reused
    bare = remember("no_loads", arr, arr.without_loads)
    z = impedance_columns(bare, np.array([1.0]), buses,
                          ModelSettings(settings.r_model, "none"), rows=buses)
    return np.diagonal(z[0])


def bus_short_circuit(arr: NetworkArrays, bus: int, settings: ModelSettings) -> tuple[float, float]:
    """Short-circuit power [MVA] and X/R [unitless] at a model bus, from the Thevenin impedance.

    Parameters
    ----------
    arr : NetworkArrays
        Network [pu].
    bus : int
        Model bus [unitless].
    settings : ModelSettings
        Element models.

    Returns
    -------
    (float, float)
        ``S_sc = S_base / |Z_th|`` [MVA] and ``X_th / R_th`` [unitless], with ``Z_th`` from
        :func:`thevenin_pu` (no loads, no banks).

    References
    ----------
    IEC 60909-0:2016, clause 4.2 (as :func:`thevenin_pu`, with c = 1).
    """
    zt = thevenin_pu(arr, np.array([bus]), settings)[0]
    return float(arr.base_mva / abs(zt)), (float(zt.imag / zt.real) if zt.real > 0 else float("inf"))


def _scan_bank(arr: NetworkArrays, bank: BankModel, others: list[BankModel], other_mode: str, pcc: int,
               h: np.ndarray, settings: ModelSettings, orders: HarmonicOrders, margin_pct: float,
               vm_steps: np.ndarray, scenario: str, pattern: YPattern, h_step: float) -> BankScan:
    base = arr.base_mva

    def extra(hh: np.ndarray) -> np.ndarray | None:
        if other_mode != "full" or not others:
            return None
        d = np.zeros((hh.size, arr.n_bus), complex)
        for ob in others:
            d[:, ob.index] += ob.step_admittance(hh, base)[:, -1]
        return d

    step_y = _StepAdmittance(bank, base)
    # the uniform path on small networks, the adaptive one from a shared coarse start on large ones
    zkk, zpp, h_peak, z_peak, prom = study_curves(arr, bank.index, pcc, step_y, h, settings, extra, pattern)
    zb_k = bank.bus_kv**2 / base
    zb_p = float(arr.bus_kv[pcc]) ** 2 / base
    sc_mva, x_r = bus_short_circuit(arr, bank.index, settings)
    q_nom = bank.q_cap_nominal_kvar()
    hs_, zs_, st_ = [], [], []
    for s in range(bank.n_steps):
        hp, zp = np.asarray(h_peak[s + 1], float), np.asarray(z_peak[s + 1], float)
        keep = prominent(prom, s + 1, hp, zp)
        hs_ += list(hp[keep])
        zs_ += list(zp[keep])
        st_ += [s] * int(np.sum(keep))
    h_ref, z_ref, flat_step_arr = np.array(hs_, float), np.array(zs_, float), np.array(st_, int)
    steps = []
    for s in range(bank.n_steps):
        sel = flat_step_arr == s
        hp, zp = h_ref[sel], z_ref[sel]
        # amplification against the bank-off impedance picks the bank's own resonance
        z_off = np.interp(hp, h, np.abs(zkk[0])) if hp.size else hp
        amp = zp / np.maximum(z_off, 1e-300)
        peaks = tuple((float(a), float(b * zb_k), float(c)) for a, b, c in zip(hp, zp, amp))
        if hp.size:
            j = int(np.argmax(amp))
            h_scan, z_pk = float(hp[j]), float(zp[j] * zb_k)
            near, kind, margin = nearest_order(h_scan, orders)
            ok = margin is None or abs(margin) > margin_pct
            sensitive = bool(amp[j] > 10.0)
        else:
            h_scan = z_pk = None
            near = kind = margin = None
            ok, sensitive = True, False
        vm = float(vm_steps[s])
        factor = 1.0 / (1.0 - bank.p)
        steps.append(StepScan(
            step=s + 1, kvar_nameplate=float(np.sum(bank.stages_kvar[: s + 1])),
            kvar_nominal=float(q_nom[s] * factor), kvar_delivered=float(q_nom[s] * factor * vm**2),
            v_bus_pu=vm, h_estimate=h_estimate(sc_mva * 1000.0, float(q_nom[s]), bank.p),
            h_scan=h_scan, z_peak_ohm=z_pk, peaks=peaks, nearest_order=near, nearest_kind=kind,
            margin_pct=margin, resonance_ok=ok, damping_sensitive=sensitive))
    return BankScan(bank=bank, scenario=scenario, sc_mva=float(sc_mva), x_r=float(x_r), h=h,
                    z_ohm=np.abs(zkk) * zb_k, z_pcc_ohm=np.abs(zpp) * zb_p, steps=tuple(steps))


def _source_orders(case: Case) -> tuple[list[tuple[str, dict, int]], list[InputProblem]]:
    """Resolved spectra of every harmonic source: (name, {order: pct}, pulse)."""
    out, probs = [], []
    for i, hs in enumerate(case.harmonic_source):
        from resonance.standards.spectra import resolve_spectrum  # noqa: PLC0415

        try:
            sp_ = resolve_spectrum(hs.spectrum, file=case.source_file, field=f"harmonic_source[{i}].spectrum",
                                   phase_deg=hs.phase_deg or None)
        except InputError as e:
            probs += e.problems
            continue
        out.append((hs.name, dict(zip((int(x) for x in sp_.h), (float(x) for x in sp_.pct))),
                    int(sp_.pulse_number or 6)))
    return out, probs


def run_study(case: Case, model=None, cross_check: bool = True) -> StudyResult:
    """Run the screening study of a case.

    Parameters
    ----------
    case : Case
        Validated case.
    model : PlantModel, optional
        Pre-built plant model (built from the case when None).
    cross_check : bool
        Run the IEC 60909 short-circuit cross-check (pandapower); without it
        ``sc_mva_iec60909`` is empty (the detuning re-checks do not report it).

    Returns
    -------
    StudyResult
        Scans, steps and findings of every bank (nominal and weak supply).

    Raises
    ------
    InputError
        Inputs that are valid by schema but unusable (unknown spectrum names,
        a network file that does not fit).
    """
    with scope():  # the running check's memo, or one for this study alone
        return _run_study(case, model, cross_check)


def _run_study(case: Case, model, cross_check: bool) -> StudyResult:
    """The study stage of :func:`run_study`, top to bottom: sources, load flows per step, scans,
    penetration and duty, findings.  Long on purpose: each stage is a few lines on the previous
    one's results, and splitting it would only pass a dozen locals around."""
    from resonance.model import netmodel  # noqa: PLC0415  (pandapower is imported only here)
    from resonance.model.pp_loadflow import bank_voltages  # noqa: PLC0415

    sources, probs = _source_orders(case)
    if probs:
        raise InputError(probs)
    if model is None:
        model = netmodel.build_model(case)
    arr = model.arrays
    st = case.study
    settings = ModelSettings(st.resistance_model, st.load_model)
    banks = bank_models(case, arr, model.model_bus)
    pcc_name = case.study.pcc_bus or model.supply_bus
    pcc = model.model_bus[pcc_name]
    background = dict(case.supply.background_pct) if case.supply else {}
    orders = orders_of_concern(sources, background, st.h_max)
    h = harmonic_grid(st.h_max, st.h_step)
    pattern = YPattern.build(arr)
    # likely input mistakes (case_checks.case_hints) travel with the results
    warnings_: list[str] = [f"input {hint.field}: {hint.problem}" for hint in case_hints(case)]
    warnings_ += limit_set_notes(case)
    # fundamental voltage of every step from a load flow with that step in service
    vm: dict[tuple[str, str], np.ndarray] = {}
    full = {o.name: float(o.q_cap_nominal_kvar()[-1] / (1 - o.p)) for o in banks}
    runs_with = {b.name: set(b.runs_with) for b in case.bank}
    # the operating envelope: every scenario with its own supply, voltage and loading
    envelope = scenarios_of(case, model.arrays_weak is not None)
    nets = {sn.name: scenario_arrays(arr, model.arrays_weak, sn) for sn in envelope}
    for sn in envelope:
        scenario = sn.name
        buses = {b.name: b.bus for b in banks}
        for b in banks:
            base_q = {o.name: full[o.name] for o in _in_with(b, banks, st.other_banks, runs_with)}
            v = np.ones(b.n_steps)
            for s in range(b.n_steps):
                q = float(b.q_cap_nominal_kvar()[s] / (1.0 - b.p))
                try:
                    v[s] = bank_voltages(model, buses, {**base_q, b.name: q}, weak=sn.weak, v_source_pu=sn.v_source_pu,
                                         load_scale=sn.load_scale)[b.index]
                except ModelError as e:
                    warnings_.append(f"bank {b.name} step {s + 1} ({scenario}): {e}; nominal voltage assumed")
            vm[(b.name, scenario)] = v
    scans = []
    for sn in envelope:
        scenario, a = sn.name, nets[sn.name]
        for b in banks:
            others = _in_with(b, banks, st.other_banks, runs_with)
            scans.append(_scan_bank(a, b, others, "full", pcc, h, settings, orders, st.margin_pct,
                                    vm[(b.name, scenario)], scenario, pattern, st.h_step))
    # penetration, capacitor duty and distortion limits of every step
    from resonance.assessment.assess import assess_bank, build_injection  # noqa: PLC0415

    assessments = []
    sc_pcc = float("nan")
    for sn in envelope:
        scenario, a = sn.name, nets[sn.name]
        inj = build_injection(case, a, model.model_bus)
        if sn.source_scale != 1.0:
            inj = dataclasses.replace(inj, src_i_pu=inj.src_i_pu * sn.source_scale)
        s_pcc = bus_short_circuit(a, pcc, settings)[0]
        if scenario == "nominal":
            sc_pcc = float(s_pcc)
        for b in banks:
            others = _in_with(b, banks, st.other_banks, runs_with)
            extra = None
            if others and inj.h.size:
                extra = np.zeros((inj.h.size, a.n_bus), complex)
                for ob in others:
                    extra[:, ob.index] += ob.step_admittance(inj.h.astype(float), a.base_mva)[:, -1]
            assessments.append(assess_bank(case, a, b, inj, vm[(b.name, scenario)], pcc, float(s_pcc), settings, scenario,
                                           diag_extra=extra, demand_arr=arr))
    findings = []
    for sc in scans:
        for s in sc.steps:
            if not s.resonance_ok:
                findings.append(Finding(
                    bank=sc.bank.name, step=s.step, scenario=sc.scenario, check="resonance",
                    value=s.h_scan, limit=st.margin_pct, unit="harmonic order (limit: % margin)",
                    source="screening margin of the case ([study] margin_pct; common practice)", cause="bank",
                    order=s.nearest_order,
                    message=(f"bank {sc.bank.name} step {s.step} ({scenario_words(sc.scenario)}): resonance at "
                             f"h = {s.h_scan:.2f} is {abs(s.margin_pct):.1f} % from the {s.nearest_kind} "
                             f"order {s.nearest_order} (screening margin {st.margin_pct:g} %)"),
                ))
            if s.damping_sensitive and s.h_scan is not None:
                warnings_.append(f"bank {sc.bank.name} step {s.step} ({sc.scenario}): peak at h = {s.h_scan:.2f} "
                                 "is lightly damped; harmonic voltages there depend strongly on the load model")
        asm = next((x for x in assessments if x.bank == sc.bank.name and x.scenario == sc.scenario), None)
        if asm is not None:
            for sd in asm.steps:
                findings.extend(sd.findings)
        if sc.steps and sc.steps[0].h_scan is None:
            warnings_.append(f"bank {sc.bank.name} ({sc.scenario}): no resonance below h_max = {st.h_max:g} on step 1")
    from resonance.assessment.tuning import detuned_bank_findings  # noqa: PLC0415 - the proposals' own tuning rule

    findings.extend(detuned_bank_findings(case, sources, orders.characteristic, scans))
    from resonance.assessment.switching import switching_study  # noqa: PLC0415

    switching, sw_findings, sw_notes = switching_study(case, scans)
    findings += sw_findings
    res = StudyResult(case=case, orders=orders, scans=tuple(scans), sc_mva_iec60909={}, pcc_bus=pcc_name,
                       settings=settings, findings=tuple(findings),
                       assessments=tuple(assessments), sc_mva_pcc=sc_pcc, sources=tuple(sources),
                       scenarios=tuple(envelope), switching=switching, warnings=tuple(warnings_ + sw_notes),
                       supply=SupplyFigures(bus=model.supply_bus, sc_mva=float(model.sc_mva_supply),
                                            x_r=float(model.x_r_supply), sc_mva_min=model.sc_mva_supply_min,
                                            pcc_kv=float(arr.bus_kv[pcc])))
    return with_cross_check(res, case, model) if cross_check else res


def iec60909_cross_check(case: Case, model) -> dict:
    """IEC 60909 short-circuit power at the bank buses and the PCC (memoised in the check's memo).

    Parameters
    ----------
    case : Case
        Validated case.
    model : PlantModel
        Its plant model.

    Returns
    -------
    dict
        Bus name -> S_k'' [MVA] (:func:`resonance.model.netmodel.iec60909_sc_mva`,
        pandapower's IEC 60909-0 module).

    Raises
    ------
    Exception
        Whatever pandapower raises when the cross-check cannot run;
        :func:`with_cross_check` turns it into a warning.
    """
    from resonance.model import netmodel  # noqa: PLC0415

    buses = tuple(sorted({b.bus for b in case.bank} | {case.study.pcc_bus or model.supply_bus}))
    return dict(remember("iec60909", (model, buses), lambda: netmodel.iec60909_sc_mva(model, list(buses))))


def with_cross_check(res: StudyResult, case: Case, model) -> StudyResult:
    """The study with its IEC 60909 figures [MVA] (:func:`iec60909_cross_check`), or with a
    warning where the cross-check cannot run (a failed cross-check is reported, not fatal)."""
    try:
        sc_iec = iec60909_cross_check(case, model)
    except Exception as e:  # noqa: BLE001 - pandapower's own errors
        return dataclasses.replace(res, sc_mva_iec60909={}, warnings=res.warnings + (
            f"IEC 60909 cross-check not available ({type(e).__name__})",))
    return dataclasses.replace(res, sc_mva_iec60909=sc_iec)

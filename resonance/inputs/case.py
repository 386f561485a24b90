"""Case file schema: the validated, frozen :class:`Case` and its tables.

The case file is written by hand by an engineer in engineering units.  The schema fixes
every key, its unit and its range; :mod:`resonance.inputs.case_load` reads the TOML file and
reports every problem at once as an :class:`~resonance.errors.InputError` whose lines name the
file, the field (e.g. ``transformer[0].z_pct``) and what is wrong;
:mod:`resonance.inputs.case_checks` holds the checks that need the whole case and the
non-fatal hints (:func:`~resonance.inputs.case_checks.case_hints`).
"""

from __future__ import annotations

import math
import unicodedata
from typing import Annotated, Any, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, Strict, field_validator, model_validator


__all__ = ["Case", "Supply", "Transformer", "Cable", "Load", "HarmonicSource", "Bank", "StudySettings",
           "NetworkFile", "DetuningTable", "DemandLink", "Envelope", "SCENARIO_NAMES", "one_line"]

#: a number given as a TOML number: ``true`` or ``"13.8"`` are refused rather
#: than read as 1.0 or 13.8 (an int is accepted where a float is expected)
Num = Annotated[float, Strict()]
#: an integer given as a TOML integer
Int = Annotated[int, Strict()]


#: Unicode categories refused in the case's text (names, bus names, title, paths): control
#: characters (escape sequences, bell, tab, newline), format characters (bidirectional
#: overrides, zero-width characters) and line/paragraph separators; they would change how a
#: terminal or a report shows the text, or make two names that look alike differ
_REFUSED_CATEGORIES = {"Cc": "control character", "Cf": "invisible format character",
                       "Zl": "line separator", "Zp": "paragraph separator"}


def _refused_char(text: str) -> str:
    """Description of the first refused character of ``text`` ("" when there is none)."""
    for k, ch in enumerate(text):
        kind = _REFUSED_CATEGORIES.get(unicodedata.category(ch))
        if kind:
            return f"{kind} U+{ord(ch):04X} at position {k + 1}"
    return ""


class _Strict(BaseModel):
    """Base: unknown keys are errors, values are frozen once read, text is printable."""

    model_config = ConfigDict(extra="forbid", frozen=True, str_strip_whitespace=True, allow_inf_nan=False)

    @field_validator("*", mode="after")
    @classmethod
    def _printable(cls, v: Any, info: Any) -> Any:
        if isinstance(v, str) and info.field_name not in ("source_file", "base_dir"):
            bad = _refused_char(v)
            if bad:
                raise ValueError(f"contains a {bad}; names, bus names, the title and file names must be "
                                 "printable text (remove escape sequences, tabs and line breaks)")
        return v


Name = Field(min_length=1, max_length=80)


class Supply(_Strict):
    """Utility supply at the point of common coupling.

    ``sc_mva`` is the three-phase short-circuit power [MVA] and ``x_r`` its
    X/R ratio [unitless]; ``sc_mva_min``/``x_r_min`` describe the weak-supply
    scenario; ``background_pct`` maps harmonic order -> voltage behind the
    supply impedance [% of nominal]; ``background_phase_deg`` optional angles [deg].
    """

    bus: str = Name
    kv: Num = Field(gt=0.05, le=800.0)
    sc_mva: Num = Field(gt=0.0, le=1.0e6)
    x_r: Num = Field(gt=0.0, le=200.0)
    sc_mva_min: Num | None = Field(default=None, gt=0.0, le=1.0e6)
    x_r_min: Num | None = Field(default=None, gt=0.0, le=200.0)
    background_pct: dict[int, Num] = Field(default_factory=dict)
    background_phase_deg: dict[int, Num] = Field(default_factory=dict)

    @field_validator("background_pct")
    @classmethod
    def _bg(cls, v: dict[int, float]) -> dict[int, float]:
        for h, pct in v.items():
            if h < 2:
                raise ValueError(f"harmonic order {h} must be an integer >= 2")
            if not (0.0 <= pct <= 30.0) or not math.isfinite(pct):
                raise ValueError(f"order {h}: {pct} % must be between 0 and 30 % of nominal")
        return v

    @field_validator("background_phase_deg")
    @classmethod
    def _bg_phase(cls, v: dict[int, float]) -> dict[int, float]:
        for h in v:
            if h < 2:
                raise ValueError(f"harmonic order {h} must be an integer >= 2")
        return v

    @model_validator(mode="after")
    def _weak(self) -> "Supply":
        if self.x_r_min is not None and self.sc_mva_min is None:
            raise ValueError("x_r_min is given without sc_mva_min; the weak-supply scenario needs sc_mva_min")
        if self.sc_mva_min is not None and self.sc_mva_min > self.sc_mva:
            raise ValueError(f"sc_mva_min ({self.sc_mva_min}) is larger than sc_mva ({self.sc_mva});"
                             " the weak-supply scenario must not be stronger than the nominal one")
        return self


class Transformer(_Strict):
    """Two-winding transformer: rating [kVA], voltages [kV], impedance [%] and X/R."""

    name: str = Name
    hv_bus: str = Name
    lv_bus: str = Name
    kva: Num = Field(gt=0.0, le=2.0e6)
    hv_kv: Num = Field(gt=0.05, le=800.0)
    lv_kv: Num = Field(gt=0.05, le=800.0)
    z_pct: Num = Field(gt=0.5, le=30.0)
    x_r: Num = Field(gt=0.1, le=200.0)

    @model_validator(mode="after")
    def _sides(self) -> "Transformer":
        if self.hv_bus == self.lv_bus:
            raise ValueError("hv_bus and lv_bus are the same bus")
        if self.lv_kv > self.hv_kv:
            raise ValueError(f"lv_kv ({self.lv_kv}) is above hv_kv ({self.hv_kv}); swap the windings")
        return self


class Cable(_Strict):
    """Cable or line: length [m], series R and X [ohm/km], shunt capacitance [nF/km]."""

    name: str = Name
    from_bus: str = Name
    to_bus: str = Name
    length_m: Num = Field(ge=0.0, le=200_000.0)
    r_ohm_per_km: Num = Field(ge=0.0, le=50.0)
    x_ohm_per_km: Num = Field(ge=0.0, le=10.0)
    c_nf_per_km: Num = Field(default=0.0, ge=0.0, le=5000.0)
    parallel: Int = Field(default=1, ge=1, le=20)

    @model_validator(mode="after")
    def _ends(self) -> "Cable":
        if self.from_bus == self.to_bus:
            raise ValueError("from_bus and to_bus are the same bus")
        return self


class Load(_Strict):
    """Linear load: active power [kW] and displacement power factor [unitless, lagging]."""

    name: str = Name
    bus: str = Name
    kw: Num = Field(ge=0.0, le=5.0e6)
    pf: Num = Field(gt=0.0, le=1.0)


class HarmonicSource(_Strict):
    """Non-linear load injecting harmonic currents.

    ``kva`` sets the fundamental current at the bus voltage; ``spectrum`` is a
    built-in spectrum name or a table order -> % of the fundamental current;
    ``phase_deg`` optional measured angles per order [deg].
    """

    name: str = Name
    bus: str = Name
    kva: Num = Field(gt=0.0, le=2.0e6)
    spectrum: Union[str, dict[int, Num]]
    phase_deg: dict[int, Num] = Field(default_factory=dict)

    @field_validator("spectrum")
    @classmethod
    def _spec(cls, v: Union[str, dict[int, float]]) -> Union[str, dict[int, float]]:
        from resonance.standards.spectra import BUILTIN_SPECTRA  # noqa: PLC0415  (pure data; imported late to keep case light)

        if isinstance(v, str):
            if v not in BUILTIN_SPECTRA:
                valid = ", ".join(repr(k) for k in BUILTIN_SPECTRA)
                raise ValueError(f"unknown spectrum {one_line(repr(v), 60)}; built-in spectra are {valid}, "
                                 "or give a table {order = percent}")
            return v
        if not v:
            raise ValueError("the spectrum table is empty")
        bad = []  # every wrong order at once
        for h, pct in v.items():
            if h < 2:
                bad.append(f"harmonic order {h} must be an integer >= 2")
            elif not math.isfinite(pct) or pct < 0 or pct > 200:
                bad.append(f"order {h}: {pct} % must be between 0 and 200 % of the fundamental")
        if bad:
            raise ValueError("; ".join(bad))
        return v

    @field_validator("phase_deg")
    @classmethod
    def _phase(cls, v: dict[int, float]) -> dict[int, float]:
        for h in v:
            if h < 2:
                raise ValueError(f"harmonic order {h} must be an integer >= 2")
        return v


class Bank(_Strict):
    """Capacitor bank: stage sizes at the rated voltage, switched in order.

    ``steps_kvar`` [kvar] are stage sizes at ``rated_kv`` [kV]; step k means
    stages 1..k in service.  ``detuning_pct`` (p = X_L/X_C at the fundamental
    [%]) makes it a detuned bank; ``reactor_q`` is the reactor X/R [unitless].
    """

    name: str = Name
    bus: str = Name
    rated_kv: Num = Field(gt=0.05, le=800.0)
    steps_kvar: list[Num] = Field(min_length=1, max_length=64)
    detuning_pct: Num | None = Field(default=None, gt=0.0, lt=50.0)
    reactor_q: Num = Field(default=50.0, gt=1.0, le=1000.0)
    #: switching (docs/case-file.md, "Switching"): inductance of each stage's own connection
    #: between the stage and the bank's common bus [uH], one value for every stage or one per stage
    step_inductance_uh: Union[Num, list[Num], None] = None
    #: ... or the length of that connection [m] (one value or one per stage), at ``uh_per_m`` [uH/m]
    bus_length_m: Union[Num, list[Num], None] = None
    uh_per_m: Num | None = Field(default=None, gt=0.0, le=10.0)
    #: an inrush-limiting reactor in series with every stage [uH]
    inrush_reactor_uh: Num | None = Field(default=None, ge=0.0, le=100_000.0)
    #: a pre-insertion (damping) resistor of the stage's switching device, per phase [ohm]
    pre_insertion_ohm: Num | None = Field(default=None, gt=0.0, le=1000.0)
    #: the switching device's rated transient inrush peak current [kA] and frequency [Hz]
    device_inrush_peak_ka: Num | None = Field(default=None, gt=0.0, le=1000.0)
    device_inrush_hz: Num | None = Field(default=None, gt=0.0, le=200_000.0)
    #: "capacitor" (a plain or detuned bank) or "filter" (single-tuned harmonic filter branches:
    #: ``detuning_pct`` = 100 / n^2 with the tuning order n just below the harmonic it absorbs)
    kind: Literal["capacitor", "filter"] = "capacitor"
    #: banks (by name) that are always in service, fully, while this bank is in: the interlock of
    #: a multi-branch filter (the 7th branch only after the 5th); they are the reference "bank off"
    runs_with: list[str] = Field(default_factory=list, max_length=16)

    @model_validator(mode="after")
    def _switching(self) -> "Bank":
        if self.kind == "filter" and self.detuning_pct is None:
            raise ValueError("a filter (kind = \"filter\") needs detuning_pct = 100 / n^2 of its tuning order n")
        if self.name in self.runs_with:
            raise ValueError(f"runs_with names the bank itself ({self.name!r})")
        n = len(self.steps_kvar)
        for key in ("step_inductance_uh", "bus_length_m"):
            v = getattr(self, key)
            vals = v if isinstance(v, list) else ([] if v is None else [v])
            if isinstance(v, list) and len(v) != n:
                raise ValueError(f"{key} has {len(v)} values for {n} stages; give one value for every stage "
                                 "or one per stage")
            hi = 100_000.0 if key == "step_inductance_uh" else 10_000.0
            for x in vals:
                if not math.isfinite(x) or x <= 0 or x > hi:
                    raise ValueError(f"{key} value {x} must be > 0 and at most {hi:g}")
        if self.step_inductance_uh is not None and self.bus_length_m is not None:
            raise ValueError("give step_inductance_uh or bus_length_m, not both")
        if self.uh_per_m is not None and self.bus_length_m is None:
            raise ValueError("uh_per_m is given without bus_length_m")
        return self

    @field_validator("steps_kvar")
    @classmethod
    def _steps(cls, v: list[float]) -> list[float]:
        for i, q in enumerate(v):
            if not math.isfinite(q) or q <= 0:
                raise ValueError(f"stage {i + 1} is {q} kvar; every stage must be > 0 kvar")
        return v


class NetworkFile(_Strict):
    """An existing pandapower network (JSON) whose buses the case names."""

    pandapower_json: str = Field(min_length=1)


class StudySettings(_Strict):
    """Study settings, all with defaults (see docs/case-file.md)."""

    h_max: Num = Field(default=50.0, ge=2.0, le=100.0)
    h_step: Num = Field(default=0.01, ge=0.0005, le=0.05)
    resistance_model: Literal["constant", "sqrt_h", "breuer"] = "constant"
    load_model: Literal["parallel_rl", "series_rl", "cigre_c4", "none"] = "parallel_rl"
    margin_pct: Num = Field(default=10.0, ge=0.0, le=50.0)
    other_banks: Literal["off", "full"] = "off"
    duty_limits: Literal["ieee18-2002", "ieee18-2012", "ieee18-1992", "iec60831-1", "iec60871-1"] = "ieee18-2002"
    ieee519_edition: Literal["2014", "2022"] = "2014"
    summation: Literal["arithmetic", "iec61000-3-6", "phasor"] = "arithmetic"
    #: "report": the site's own distortion (beyond its limit with the bank off and not made worse)
    #: is reported apart and does not fail the check; "fail": it fails the check too
    site_findings: Literal["report", "fail"] = "report"
    #: harmonic voltage limits at the PCC: IEEE 519 (edition above) or IEC 61000-3-6 planning levels
    pcc_voltage_limits: Literal["ieee519", "iec61000-3-6-mv", "iec61000-3-6-hv"] = "ieee519"
    #: compatibility levels checked at each bank's bus inside the plant ("none": not checked)
    in_plant_limits: Literal["none", "iec61000-2-4-class1", "iec61000-2-4-class2", "iec61000-2-4-class3"] = "none"
    pcc_bus: str | None = None
    #: at least 1 kW (see :data:`DEMAND_MIN_KVA`), at most 10 GW
    max_demand_kw: Num | None = Field(default=None, ge=1.0, le=1.0e7)
    #: at most 1 MA; the lower bound depends on the PCC voltage (:func:`bus_kv_problems`)
    max_demand_a: Num | None = Field(default=None, gt=0.0, le=1.0e6)
    #: largest voltage step allowed on switching one stage [%] (common practice: 2-3 %)
    voltage_step_limit_pct: Num = Field(default=3.0, ge=0.1, le=20.0)


class DetuningTable(_Strict):
    """Optional ``[detuning]`` settings of the detuned-bank proposals.

    Every key may be left out (the defaults and their sources are in
    :class:`resonance.design.detuning.DetuningSettings`); the values are range-checked
    by :func:`resonance.design.detuning.detuning_settings`.
    """

    tuning_orders: list[Num] | None = None
    search: Literal["list", "continuous"] | None = None
    order_margin_pct: Num | None = None
    band_margin_pct: Num | None = None
    significant_background_pct: Num | None = None
    significant_injection_pct: Num | None = None
    cap_tolerance_pct: list[Num] | None = None
    reactor_tolerance_pct: list[Num] | None = None
    standard_cap_kv: list[Num] | None = None
    mv_cap_step_kv: Num | None = None
    cap_voltage_margin_pct: Num | None = None
    max_rating_steps: int | None = None
    reactor_loss_w_per_kvar: Num | None = None
    linearity_factor: Num | None = None
    rearrange_unit_kvar: Num | None = None
    recheck: Literal["all", "first"] | None = None


#: the supply and loading conditions a case can be checked in (see docs/case-file.md, [envelope])
SCENARIO_NAMES = ("nominal", "weak", "high_voltage_light_load", "weak_light_load")


class Envelope(_Strict):
    """Optional ``[envelope]``: the operating conditions every step is checked in.

    ``nominal`` is the supply at ``sc_mva`` and 1.0 pu with the plant at full load; ``weak`` the
    supply at ``sc_mva_min``; ``high_voltage_light_load`` the supply at ``v_max_pu`` (plus the tap)
    with the linear loads at ``light_load_pct``; ``weak_light_load`` the weak supply with light
    load.  The weak scenarios exist only where ``sc_mva_min`` is given.
    """

    #: supply voltage of the high-voltage scenario [pu] (1.05: ANSI C84.1 Range A upper limit,
    #: a common screening choice, REFERENCES.md "Operating envelope" [memory])
    v_max_pu: Num = Field(default=1.05, ge=1.0, le=1.15)
    #: transformer tap raising the plant's voltage in that scenario [%] (common practice: a
    #: -2.5 % tap raises the secondary by about 2.5 %)
    tap_pct: Num = Field(default=0.0, ge=0.0, le=10.0)
    #: linear load in the light-load scenarios [% of the case's loads] (common practice: 20-40 %
    #: at night and weekends, REFERENCES.md "Operating envelope")
    light_load_pct: Num = Field(default=30.0, ge=1.0, le=100.0)
    #: scale the harmonic sources with the load as well (false: sources at full output, the
    #: worse case for distortion)
    sources_follow_load: bool = False
    #: the scenarios to check (default: all four where they exist)
    scenarios: list[Literal["nominal", "weak", "high_voltage_light_load", "weak_light_load"]] | None = None


class DemandLink(_Strict):
    """Optional ``[demand]``: metered interval data that weights each step by time in service.

    ``intervals_csv`` is read by :func:`resonance.inputs.sizing_io.read_intervals`; the
    stage controller (settings as in ``resonance size``) is replayed against it
    with the bank's stages, giving the time spent in each step.
    """

    intervals_csv: str = Field(min_length=1)
    bank: str | None = None
    target_pf: Num = Field(default=0.95, gt=0.5, le=1.0)
    switch_in_fraction: Num = Field(default=0.5, gt=0.0, le=1.0)
    switch_out_fraction: Num = Field(default=0.5, gt=0.0, le=1.0)
    min_time_between_ops_min: Num = Field(default=5.0, ge=0.0, le=1440.0)


class Project(_Strict):
    """Optional ``[project]``: the submittal's identity, printed on the report's cover and footers.

    ``paper`` picks the report's page size; unset, it follows the case: ``letter`` for a 60 Hz
    system (North American practice), ``a4`` for 50 Hz (ISO 216), and the report says which.
    """

    number: str = Field(default="", max_length=60)
    revision: str = Field(default="", max_length=20)
    prepared_by: str = Field(default="", max_length=80)
    checked_by: str = Field(default="", max_length=80)
    client: str = Field(default="", max_length=120)
    site: str = Field(default="", max_length=120)
    paper: Literal["letter", "a4"] | None = None


class FilterTable(_Strict):
    """Optional ``[filter]``: the tuned-filter proposal (:mod:`resonance.design.filter_search`).

    Defaults and their sources: :data:`resonance.design.filter_search.FILTER_DEFAULTS`.
    """

    #: "auto": where a PCC current is beyond its limit with a bank; "always"; "never"
    propose: Literal["auto", "always", "never"] = "auto"
    #: harmonic orders the branches may absorb (default: the significant orders)
    orders: list[int] | None = Field(default=None, min_length=1, max_length=8)
    #: most single-tuned branches in one filter
    max_branches: int = Field(default=3, ge=1, le=4)
    #: the filter's net output at the bus, all branches [kvar] (default: the bank's full output)
    kvar: Num | None = Field(default=None, gt=0.0, le=1.0e6)
    #: quality factor Q = X_n / R of each branch at its tuning frequency [unitless]; the branch's
    #: ``reactor_q`` (X_L / R at the fundamental, as the model uses it) is Q / n
    quality: Num = Field(default=40.0, gt=2.0, le=1000.0)
    #: nominal tuning below the absorbed harmonic [%]
    below_pct: Num = Field(default=6.0, ge=3.0, le=20.0)
    #: further capacitor ratings tried above the lowest one [unitless]
    rating_steps: int = Field(default=2, ge=0, le=4)
    #: total kvar tried, as factors of ``kvar`` (the larger only where the smaller is not enough)
    kvar_factors: list[Num] = Field(default_factory=lambda: [1.0, 1.25, 1.5], min_length=1, max_length=6)
    #: banks to search for (default: every bank)
    banks: list[str] | None = Field(default=None, max_length=64)

    @field_validator("orders")
    @classmethod
    def _orders(cls, v):
        if v is not None and any(h < 2 or h > 100 for h in v):
            raise ValueError("orders must be harmonic orders from 2 to 100")
        return v

    @field_validator("kvar_factors")
    @classmethod
    def _factors(cls, v):
        if any(not (0.1 <= f <= 5.0) for f in v):
            raise ValueError("kvar_factors must be factors from 0.1 to 5 of the filter's kvar")
        return v


class Case(_Strict):
    """A whole study case as read from one TOML file."""

    title: str = Field(min_length=1, max_length=200)
    frequency_hz: Literal[50, 60]
    supply: Supply | None = None
    transformer: list[Transformer] = Field(default_factory=list)
    cable: list[Cable] = Field(default_factory=list)
    load: list[Load] = Field(default_factory=list)
    harmonic_source: list[HarmonicSource] = Field(default_factory=list)
    bank: list[Bank] = Field(min_length=1)
    network: NetworkFile | None = None
    study: StudySettings = Field(default_factory=StudySettings)
    detuning: DetuningTable | None = None
    filter: FilterTable = Field(default_factory=FilterTable)
    demand: DemandLink | None = None
    envelope: Envelope = Field(default_factory=Envelope)
    project: Project = Field(default_factory=Project)
    #: path of the file the case came from (set by :func:`load_case`)
    source_file: str = ""
    #: directory that relative paths in the case are resolved against
    base_dir: str = ""

    @property
    def paper(self) -> str:
        """Report paper size: ``project.paper``, else ``letter`` at 60 Hz and ``a4`` at 50 Hz."""
        return self.project.paper or ("letter" if self.frequency_hz == 60 else "a4")

    @property
    def pcc_bus(self) -> str:
        """Bus taken as the point of common coupling (default: the supply bus)."""
        if self.study.pcc_bus:
            return self.study.pcc_bus
        return self.supply.bus if self.supply else ""



def one_line(text: str, limit: int = 80) -> str:
    """``text`` with control characters escaped and cut to ``limit`` characters (keys come from the file)."""
    t = "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in str(text))
    return t if len(t) <= limit else t[: limit - 3] + "..."



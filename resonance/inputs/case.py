"""Case file (TOML): schema, validation and physical sanity checks.

The case file is written by hand by an engineer in engineering units.  This
module turns it into a validated, frozen :class:`Case`; every problem found is
reported at once as an :class:`~resonance.errors.InputError` whose lines name
the file, the field (e.g. ``transformer[0].z_pct``) and what is wrong.

Likely mistakes that still make a valid case (a stage of 0.1 kvar, a bank
larger than its transformer, voltages typical of the other supply frequency)
are not errors: :func:`case_hints` (also ``Case.hints``) returns them as
``InputProblem`` lines for the caller to print as warnings.
"""

from __future__ import annotations

import difflib
import math
import tomllib
import unicodedata
from collections import deque
from pathlib import Path
from typing import Annotated, Any, Literal, Union

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, Strict, ValidationError, field_validator, model_validator

from resonance.errors import InputError, InputProblem

__all__ = [
    "Case",
    "Supply",
    "Transformer",
    "Cable",
    "Load",
    "HarmonicSource",
    "Bank",
    "StudySettings",
    "NetworkFile",
    "load_case",
    "parse_case",
    "bus_voltages_kv",
    "check_case",
    "case_hints",
    "sc_kva_estimate",
    "bus_kv_problems",
    "STAGE_MIN_KVAR",
    "DEMAND_MIN_KVA",
]

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
                raise ValueError(f"unknown spectrum {_one_line(repr(v), 60)}; built-in spectra are {valid}, "
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
    pcc_bus: str | None = None
    #: at least 1 kW (see :data:`DEMAND_MIN_KVA`), at most 10 GW
    max_demand_kw: Num | None = Field(default=None, ge=1.0, le=1.0e7)
    #: at most 1 MA; the lower bound depends on the PCC voltage (:func:`bus_kv_problems`)
    max_demand_a: Num | None = Field(default=None, gt=0.0, le=1.0e6)


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
    demand: DemandLink | None = None
    #: path of the file the case came from (set by :func:`load_case`)
    source_file: str = ""
    #: directory that relative paths in the case are resolved against
    base_dir: str = ""

    @property
    def pcc_bus(self) -> str:
        """Bus taken as the point of common coupling (default: the supply bus)."""
        if self.study.pcc_bus:
            return self.study.pcc_bus
        return self.supply.bus if self.supply else ""

    @property
    def hints(self) -> tuple[InputProblem, ...]:
        """Non-fatal warnings about likely mistakes (see :func:`case_hints`)."""
        return case_hints(self)


_HINTS = {
    "extra_forbidden": "unknown key (typo?)",
    "missing": "required key is missing",
}


def _one_line(text: str, limit: int = 80) -> str:
    """``text`` with control characters escaped and cut to ``limit`` characters (keys come from the file)."""
    t = "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in str(text))
    return t if len(t) <= limit else t[: limit - 3] + "..."


def _loc_to_field(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif str(part) in ("str", "constrained-str", "[key]") or str(part).startswith(("dict[", "function-")):
            continue
        else:
            out += ("." if out else "") + _one_line(str(part), 40)
    return out


def _allowed_keys(model: type[BaseModel], loc: tuple) -> list[str]:
    """Keys allowed at the table that contains ``loc`` (for unknown-key hints)."""
    cur: Any = model
    for part in loc[:-1]:
        if isinstance(part, int):
            continue
        fld = getattr(cur, "model_fields", {}).get(part)
        if fld is None:
            return []
        ann = fld.annotation
        args = getattr(ann, "__args__", ())
        cand = [a for a in (ann, *args) if isinstance(a, type) and issubclass(a, BaseModel)]
        if not cand:
            return []
        cur = cand[0]
    return sorted(k for k in getattr(cur, "model_fields", {}) if k not in ("source_file", "base_dir"))


def _problems_from_validation(err: ValidationError, file: str) -> list[InputProblem]:
    probs: list[InputProblem] = []
    seen: set[tuple[str, str]] = set()
    for e in err.errors():
        loc = tuple(e["loc"])
        fld = _loc_to_field(loc)
        kind = e["type"]
        msg = e["msg"]
        if kind == "extra_forbidden":
            allowed = _allowed_keys(Case, loc)
            msg = "unknown key (typo?)" + (f"; allowed here: {', '.join(allowed)}" if allowed else "")
        elif kind == "missing":
            msg = "required key is missing"
        elif kind.startswith("literal_error"):
            msg = f"{msg}; got {_one_line(repr(e.get('input')), 60)}"
        elif kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
            msg = f"{msg}; got {_one_line(repr(e.get('input')), 60)}"
        elif kind == "value_error":
            msg = msg.removeprefix("Value error, ")
        given = e.get("input")
        if ".spectrum" in fld and kind == "string_type" and isinstance(given, dict):
            continue  # a table was given: the table branch of the union reports what is wrong in it
        if kind in ("float_type", "int_type", "bool_type") or kind.endswith("_parsing"):
            msg = f"{msg}; got {_one_line(repr(e.get('input')), 60)}"
        elif kind == "finite_number":
            msg = f"must be a finite number; got {_one_line(repr(e.get('input')), 60)}"
        key = (fld, msg)
        if fld.endswith(".spectrum") and kind in ("string_type", "dict_type"):
            # a union error: report once, in plain words
            key = (fld, "spectrum")
            msg = "must be a built-in spectrum name or a table {order = percent}"
        if key in seen:
            continue
        seen.add(key)
        probs.append(InputProblem(file, fld, _one_line(msg, 300)))
    return probs


#: fault current above which a supply short-circuit power is taken to be in kVA [kA]
#: (common practice: public supplies rarely exceed about 100 kA; 300 kA leaves room)
_I_SC_MAX_KA = 300.0


def _is_num(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _rows(raw: dict, key: str) -> list[tuple[int, dict]]:
    """``(index, table)`` of an array of tables in the raw document (anything else: none)."""
    v = raw.get(key)
    return [(i, t) for i, t in enumerate(v) if isinstance(t, dict)] if isinstance(v, list) else []


#: highest nominal voltage a case accepts [kV] (the schema's upper bound; the highest
#: IEC 60038 level is 765/800 kV)
_KV_MAX = 800.0


def _looks_like_volts(v: Any) -> bool:
    """A finite number above 1000 whose value in kV would be a usable voltage (so the hint is one)."""
    return _is_num(v) and 1000.0 < v <= 1000.0 * _KV_MAX


def _volts_hint(file: str, field: str, v: float) -> InputProblem:
    return InputProblem(file, field, f"{v:g} kV looks like a value in volts; give kV (e.g. {v / 1000:g})")


def _unit_hints(raw: dict, file: str) -> list[InputProblem]:
    """Catch unit mistakes that the ranges alone would report less clearly (these are errors)."""
    probs = []
    sup = raw.get("supply") if isinstance(raw.get("supply"), dict) else {}
    kv = sup.get("kv")
    if _looks_like_volts(kv):
        probs.append(_volts_hint(file, "supply.kv", kv))
    for i, t in _rows(raw, "transformer"):
        hv = t.get("hv_kv")
        for k in ("hv_kv", "lv_kv"):
            v = t.get(k)
            volts_lv = (k == "lv_kv" and _is_num(v) and _is_num(hv) and v > hv and v >= 100 and v / 1000 < hv)
            if _looks_like_volts(v) or (volts_lv and v <= 1000.0 * _KV_MAX):
                probs.append(_volts_hint(file, f"transformer[{i}].{k}", v))
        z = t.get("z_pct")
        if _is_num(z) and 0 < z <= 0.5:
            probs.append(InputProblem(file, f"transformer[{i}].z_pct", f"{z:g} looks like per unit; give percent (e.g. {z * 100:g})"))
    for i, bk in _rows(raw, "bank"):
        v = bk.get("rated_kv")
        if _looks_like_volts(v):
            probs.append(_volts_hint(file, f"bank[{i}].rated_kv", v))
        p = bk.get("detuning_pct")
        if _is_num(p) and 0 < p < 0.5:
            # detuned banks are built with p of about 5.67 to 14 % (REFERENCES: detuned banks, memory)
            probs.append(InputProblem(file, f"bank[{i}].detuning_pct", f"{p:g} looks like a fraction; give percent "
                                      f"(e.g. {p * 100:g}); detuned banks use about 5 to 14 %"))
    for i, ld in _rows(raw, "load"):
        pf = ld.get("pf")
        if _is_num(pf) and 10 <= pf <= 100:
            probs.append(InputProblem(file, f"load[{i}].pf", f"{pf:g} looks like a percentage; give the power factor "
                                      f"as a fraction (e.g. {pf / 100:g})"))
        elif _is_num(pf) and not 0 < pf <= 1:
            probs.append(InputProblem(file, f"load[{i}].pf", f"{pf:g} is not a power factor; it must be in (0, 1], "
                                      "e.g. 0.85"))
    study = raw.get("study") if isinstance(raw.get("study"), dict) else {}
    md = study.get("max_demand_kw")
    if _is_num(md) and 0 < md < DEMAND_MIN_KVA:
        probs.append(InputProblem(file, "study.max_demand_kw",
                                  f"{md:g} kW is below the smallest maximum demand the study takes, "
                                  f"{DEMAND_MIN_KVA:g} kW: the IEEE 519 current limits are per cent of this demand, "
                                  "and a service with a capacitor bank draws far more (check the unit: kW, not MW)"))
    dm = raw.get("demand") if isinstance(raw.get("demand"), dict) else {}
    tpf = dm.get("target_pf")
    if _is_num(tpf) and 10 <= tpf <= 100:
        probs.append(InputProblem(file, "demand.target_pf", f"{tpf:g} looks like a percentage; give the power factor "
                                  f"as a fraction (e.g. {tpf / 100:g})"))
    return probs


def parse_case(raw: dict, file: str = "<case>", base_dir: str = ".") -> Case:
    """Validate a parsed TOML document and return a :class:`Case`.

    Parameters
    ----------
    raw : dict
        The TOML document as parsed by :mod:`tomllib`.
    file : str
        File name used in error messages.
    base_dir : str
        Directory against which relative paths in the case are resolved.

    Returns
    -------
    Case
        Validated case.

    Raises
    ------
    InputError
        Every problem found, each naming the file, the field and the problem.
    """
    hints = _unit_hints(raw, file)
    hinted = {p.field for p in hints}
    try:
        case = Case.model_validate({**raw, "source_file": file, "base_dir": str(base_dir)})
    except ValidationError as err:
        probs = [p for p in _problems_from_validation(err, file) if p.field not in hinted]
        raise InputError(hints + probs) from None
    if hints:
        raise InputError(hints)
    probs = check_case(case)
    if probs:
        raise InputError(probs)
    return case


def load_case(path: str | Path) -> Case:
    """Read, parse and validate a case file.

    Parameters
    ----------
    path : str or Path
        Case file (TOML).

    Returns
    -------
    Case
        Validated case.

    Raises
    ------
    InputError
        The file is missing, unreadable, not TOML, or fails validation.
    """
    p = Path(path)
    file = str(path)
    if not p.exists():
        raise InputError.single(file, "", "file not found")
    if p.is_dir():
        raise InputError.single(file, "", "is a directory, not a case file")
    if p.stat().st_size > 5_000_000:
        raise InputError.single(file, "", "case file is larger than 5 MB; that is not a hand-written case")
    try:
        text = p.read_bytes().decode("utf-8")
    except UnicodeDecodeError as e:
        raise InputError.single(file, "", f"not UTF-8 text (byte {e.start})") from None
    except OSError as e:
        raise InputError.single(file, "", f"cannot read: {e.strerror}") from None
    # a UTF-8 byte-order mark (some Windows editors write one) is not TOML but carries no meaning:
    # it is dropped, as the recommended case file's writer drops it when it reads the case
    text = text.removeprefix("\ufeff")
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise InputError.single(file, "", f"not valid TOML: {e}") from None
    except RecursionError:
        raise InputError.single(file, "", "arrays or tables are nested too deeply to be a case file "
                                "(a hand-written case nests tables a few levels deep)") from None
    try:
        return parse_case(raw, file, str(p.resolve().parent))
    except RecursionError:
        raise InputError.single(file, "", "values are nested too deeply to be a case file "
                                "(a hand-written case nests tables a few levels deep)") from None


# ---------------------------------------------------------------- physical checks

def _names_unique(case: Case, file: str) -> list[InputProblem]:
    probs = []
    for table in ("transformer", "cable", "load", "harmonic_source", "bank"):
        seen: dict[str, int] = {}
        for i, item in enumerate(getattr(case, table)):
            if item.name in seen:
                probs.append(InputProblem(file, f"{table}[{i}].name",
                                          f"duplicate name {item.name!r} (also {table}[{seen[item.name]}])"))
            else:
                seen[item.name] = i
    # bank names become output file names (scan_<name>.csv, scan_<name>_weak.csv, ...): names that
    # map to the same file name, also on a case-insensitive file system, would overwrite each other
    files: dict[str, int] = {}
    for i, bk in enumerate(case.bank):
        key = _file_stem(bk.name).casefold()
        j = files.get(key)
        if j is not None and case.bank[j].name != bk.name:
            probs.append(InputProblem(file, f"bank[{i}].name", f"{bk.name!r} gives the same output file names as "
                                      f"bank[{j}] {case.bank[j].name!r}; choose names that differ in letters or digits"))
        files.setdefault(key, i)
    for i, bk in enumerate(case.bank):
        key = _file_stem(bk.name).casefold()
        if key.endswith("_weak") and key[: -len("_weak")] in files:
            j = files[key[: -len("_weak")]]
            probs.append(InputProblem(file, f"bank[{i}].name", f"{bk.name!r} collides with the weak-supply outputs "
                                      f"of bank[{j}] {case.bank[j].name!r}; choose another name"))
    return probs


def _file_stem(name: str) -> str:
    """Bank name as used in output file names (as the CLI and the report write them)."""
    from resonance.names import file_stem  # noqa: PLC0415

    return file_stem(name)


def bus_voltages_kv(case: Case) -> tuple[dict[str, float], list[InputProblem]]:
    """Nominal voltage of every bus, propagated from the supply through the network.

    Parameters
    ----------
    case : Case
        A case built from tables (no network file).

    Returns
    -------
    dict
        Bus name -> nominal voltage [kV] for every bus reachable from the supply.
    list of InputProblem
        Transformer windings whose rated voltage does not match the bus
        (more than 10 % apart, common practice for a tap range) and buses that
        cannot be reached from the supply.
    """
    file = case.source_file
    probs: list[InputProblem] = []
    kv: dict[str, float] = {}
    if case.supply is None:
        return kv, probs
    adj: dict[str, list[tuple[str, str, int, str]]] = {}
    for i, t in enumerate(case.transformer):
        adj.setdefault(t.hv_bus, []).append((t.lv_bus, "transformer", i, "hv"))
        adj.setdefault(t.lv_bus, []).append((t.hv_bus, "transformer", i, "lv"))
    for i, c in enumerate(case.cable):
        adj.setdefault(c.from_bus, []).append((c.to_bus, "cable", i, ""))
        adj.setdefault(c.to_bus, []).append((c.from_bus, "cable", i, ""))
    kv[case.supply.bus] = case.supply.kv
    queue = deque([case.supply.bus])
    while queue:
        b = queue.popleft()
        for other, kind, i, side in adj.get(b, []):
            if kind == "transformer":
                t = case.transformer[i]
                here_kv = t.hv_kv if side == "hv" else t.lv_kv
                there_kv = t.lv_kv if side == "hv" else t.hv_kv
                if abs(here_kv - kv[b]) > 0.10 * kv[b]:
                    probs.append(InputProblem(file, f"transformer[{i}].{side}_kv",
                                              f"{here_kv} kV does not match bus {b!r} at {kv[b]:g} kV"))
                if other in kv:
                    if abs(kv[other] - there_kv) > 0.10 * kv[other]:
                        oside = "lv" if side == "hv" else "hv"
                        probs.append(InputProblem(file, f"transformer[{i}].{oside}_kv",
                                                  f"{there_kv} kV does not match bus {other!r} at {kv[other]:g} kV"))
                    continue
                kv[other] = there_kv
            else:
                if other in kv:
                    if abs(kv[other] - kv[b]) > 0.10 * kv[b]:
                        probs.append(InputProblem(file, f"cable[{i}]",
                                                  f"joins bus {b!r} ({kv[b]:g} kV) and bus {other!r} ({kv[other]:g} kV)"))
                    continue
                kv[other] = kv[b]
            queue.append(other)
    # a mismatch is seen from both ends of the branch: report it once per field
    first: dict[str, InputProblem] = {}
    for pr in probs:
        first.setdefault(pr.field, pr)
    return kv, list(first.values())


def check_case(case: Case) -> list[InputProblem]:
    """Physical sanity checks that need the whole case (names, buses, voltages).

    Parameters
    ----------
    case : Case
        Schema-valid case.

    Returns
    -------
    list of InputProblem
        Empty when the case is consistent.

    Notes
    -----
    Rules: unique names per table, and bank names that give distinct output
    file names; no cable with zero series impedance; demand given once; a
    supply (or a network file); every named bus exists (with the closest name
    as a hint) and is connected to the supply; transformer windings and cables
    match the voltages of their buses (10 %); a ``demand.bank`` that exists; the
    voltage checks of :func:`bus_kv_problems` (bank rating 0.85 to 1.6 times its
    bus voltage, a value in volts named as such; stages of at least
    :data:`STAGE_MIN_KVAR` at the bus voltage; a demand current of at least
    :data:`DEMAND_MIN_KVA`); a bank not below the
    short-circuit power at its bus (``h_r = sqrt(S_sc/Q) <= 1``); harmonic
    orders and angles within the scan and with a magnitude.
    """
    file = case.source_file
    probs = _names_unique(case, file)
    for i, c in enumerate(case.cable):
        if c.length_m * math.hypot(c.r_ohm_per_km, c.x_ohm_per_km) == 0.0:
            fld = "length_m" if c.length_m == 0 else "r_ohm_per_km"
            probs.append(InputProblem(file, f"cable[{i}].{fld}",
                                      "the cable has zero series impedance; a cable without impedance is a busbar: "
                                      "put the equipment on one bus, or give the real length and impedance"))
    st = case.study
    if st.max_demand_kw is not None and st.max_demand_a is not None:
        probs.append(InputProblem(file, "study.max_demand_a", "give either max_demand_kw or max_demand_a, not both"))
    if case.demand is not None and case.demand.bank is not None and case.demand.bank not in {b.name for b in case.bank}:
        probs.append(InputProblem(file, "demand.bank", f"no bank named {case.demand.bank!r} (banks: "
                                  + ", ".join(repr(b.name) for b in case.bank) + ")"))
    if case.network is None:
        if case.supply is None:
            probs.append(InputProblem(file, "supply", "required (or give [network] pandapower_json)"))
            return probs
        kv, vprobs = bus_voltages_kv(case)
        probs += vprobs
        known = set(kv)
        defined = {case.supply.bus}
        for t in case.transformer:
            defined |= {t.hv_bus, t.lv_bus}
        for c in case.cable:
            defined |= {c.from_bus, c.to_bus}
        for table, key in (("load", "bus"), ("harmonic_source", "bus"), ("bank", "bus")):
            for i, item in enumerate(getattr(case, table)):
                b = getattr(item, key)
                if b not in defined:
                    probs.append(InputProblem(file, f"{table}[{i}].{key}", _no_bus(b, defined)))
                elif b not in known:
                    probs.append(InputProblem(file, f"{table}[{i}].{key}", f"bus {b!r} is not connected to the supply"))
        for table, a, b in (("transformer", "hv_bus", "lv_bus"), ("cable", "from_bus", "to_bus")):
            for i, item in enumerate(getattr(case, table)):
                for key in (a, b):
                    if getattr(item, key) not in known:
                        probs.append(InputProblem(file, f"{table}[{i}].{key}",
                                                  f"bus {getattr(item, key)!r} is not connected to the supply"))
        probs += bus_kv_problems(case, {b: v for b, v in kv.items()}, pcc_bus=case.pcc_bus)
        if st.pcc_bus and st.pcc_bus not in defined:
            probs.append(InputProblem(file, "study.pcc_bus", _no_bus(st.pcc_bus, defined)))
        elif st.pcc_bus and st.pcc_bus not in known:
            probs.append(InputProblem(file, "study.pcc_bus", f"bus {st.pcc_bus!r} is not connected to the supply"))
        if not probs:
            probs += _bank_beyond_supply(case, kv)
    for i, hs in enumerate(case.harmonic_source):
        for h in list(hs.spectrum.items()) if isinstance(hs.spectrum, dict) else []:
            if h[0] > st.h_max:
                probs.append(InputProblem(file, f"harmonic_source[{i}].spectrum",
                                          f"order {h[0]} is above the scan range h_max = {st.h_max:g}"))
        for h in hs.phase_deg:
            if isinstance(hs.spectrum, dict) and h not in hs.spectrum:
                probs.append(InputProblem(file, f"harmonic_source[{i}].phase_deg",
                                          f"order {h} has an angle but no magnitude in the spectrum"))
    if case.supply is not None:
        for h in case.supply.background_pct:
            if h > st.h_max:
                probs.append(InputProblem(file, "supply.background_pct",
                                          f"order {h} is above the scan range h_max = {st.h_max:g}"))
        for h in case.supply.background_phase_deg:
            if h not in case.supply.background_pct:
                probs.append(InputProblem(file, "supply.background_phase_deg",
                                          f"order {h} has an angle but no magnitude in background_pct"))
    return probs


#: smallest stage output at the bus nominal voltage that the study takes [kvar] (project choice:
#: the detuned-bank proposals state nameplate stages in 0.1 kvar steps, and a stage must not
#: round to nothing; real low-voltage capacitor units start at about 1 kvar)
STAGE_MIN_KVAR = 0.05
#: smallest maximum demand at the point of common coupling [kVA] (project choice: the IEEE 519
#: current limits are per cent of this demand, and a service with a capacitor bank draws far
#: more; a smaller value is a unit mistake and would make every per-cent figure meaningless)
DEMAND_MIN_KVA = 1.0


def bus_kv_problems(case: Case, kv: dict[str, float], pcc_bus: str = "") -> list[InputProblem]:
    """Checks that need the nominal voltage of the banks' buses and of the PCC.

    Used for table-built cases (voltages from :func:`bus_voltages_kv`) and, once the
    network file is read, for network-file cases (voltages from the file's bus table).

    Parameters
    ----------
    case : Case
        Schema-valid case.
    kv : dict
        Bus name -> nominal line-to-line voltage [kV]; buses left out are not checked.
    pcc_bus : str
        Bus of the point of common coupling, for the demand check ("" for none) [unitless].

    Returns
    -------
    list of InputProblem
        A bank rating outside 0.85 to 1.6 times its bus voltage (a value in volts is named
        as such); a stage delivering less than :data:`STAGE_MIN_KVAR` at the bus voltage; a
        ``study.max_demand_a`` below :data:`DEMAND_MIN_KVA` at the PCC voltage.

    Notes
    -----
    A stage of ``Q_R`` at rated voltage ``U_R`` delivers ``Q = Q_R (U_n / U_R)^2`` at the bus
    nominal voltage ``U_n``; a demand current ``I`` is ``S = sqrt(3) U_n I`` at the PCC.

    References
    ----------
    IEEE Std 18-2012, clause 5 (capacitor output proportional to the square of the voltage).
    """
    file = case.source_file
    probs: list[InputProblem] = []
    for i, bk in enumerate(case.bank):
        u = kv.get(bk.bus)
        if u is None or not (math.isfinite(u) and u > 0):
            continue
        ratio = bk.rated_kv / u
        if 0.85 <= ratio / 1000.0 <= 1.6:
            probs.append(_volts_hint(file, f"bank[{i}].rated_kv", bk.rated_kv))
            continue
        if not (0.85 <= ratio <= 1.6):
            probs.append(InputProblem(file, f"bank[{i}].rated_kv",
                                      f"{bk.rated_kv:g} kV does not suit bus {bk.bus!r} at {u:g} kV "
                                      "(expected 0.85 to 1.6 times the bus voltage)"))
            continue
        for k, q in enumerate(bk.steps_kvar):
            q_bus = q / ratio**2
            if q_bus < STAGE_MIN_KVAR:
                at = "" if ratio == 1.0 else f" ({q_bus:.3g} kvar at the bus's {u:g} kV)"
                probs.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                          f"stage {k + 1} is {q:g} kvar{at}; the smallest stage the study takes is "
                                          f"{STAGE_MIN_KVAR:g} kvar at the bus voltage (stages are kvar, not Mvar)"))
                break
    st = case.study
    u_pcc = kv.get(pcc_bus)
    if st.max_demand_a is not None and u_pcc is not None and math.isfinite(u_pcc) and u_pcc > 0:
        s_kva = math.sqrt(3.0) * u_pcc * st.max_demand_a
        if s_kva < DEMAND_MIN_KVA:
            probs.append(InputProblem(file, "study.max_demand_a",
                                      f"{st.max_demand_a:g} A at {u_pcc:g} kV is a demand of {s_kva:.3g} kVA; the "
                                      f"maximum demand must be at least {DEMAND_MIN_KVA:g} kVA (the IEEE 519 current "
                                      "limits are per cent of it; check the unit: A, not kA)"))
    return probs


def _no_bus(name: str, defined: set[str]) -> str:
    """'bus ... does not exist' with the closest names as a hint."""
    close = difflib.get_close_matches(name, sorted(defined), n=1, cutoff=0.6)
    if not close:
        close = [d for d in sorted(defined) if d.casefold() == name.casefold()]
    hint = f"; did you mean {close[0]!r}?" if close else ""
    shown = sorted(defined)
    listed = ", ".join(repr(b) for b in shown[:12]) + (", ..." if len(shown) > 12 else "")
    return f"bus {name!r} does not exist{hint} (buses: {listed})"


def sc_kva_estimate(case: Case, kv: dict[str, float] | None = None) -> dict[str, float]:
    """Short-circuit power at every bus of a table-built case, loads excluded.

    Parameters
    ----------
    case : Case
        Schema-valid case with a supply and no network file.
    kv : dict, optional
        Bus name -> nominal voltage [kV] (from :func:`bus_voltages_kv` when None).

    Returns
    -------
    dict
        Bus name -> ``S_sc = U_n^2 / |Z_kk(1)|`` [kVA] for every bus reachable
        from the supply; empty when the nodal matrix cannot be solved.

    Notes
    -----
    Per unit on a 1 MVA base and each bus's nominal voltage: supply
    ``|Z| = 1/S_sc`` split by X/R; transformer ``Z = (z%/100) / S_T`` split by
    X/R; cable ``Z = (r + jx) L / (n U^2)``; shunt capacitance and loads left
    out; nominal ratios.  ``Z_kk`` is the diagonal of the inverse nodal
    admittance matrix.  It is the validation-time estimate used for hints; the
    study's own figure comes from the full harmonic model.

    References
    ----------
    IEC 60909-0:2016, clause 4.2 (short-circuit impedance at the fault
    location, here with c = 1 and no correction factors).
    """
    if case.supply is None or case.network is not None:
        return {}
    if kv is None:
        kv, _ = bus_voltages_kv(case)
    names = sorted(kv)
    idx = {b: k for k, b in enumerate(names)}
    y = np.zeros((len(names), len(names)), complex)

    def z_split(z_abs: float, x_r: float) -> complex:
        return z_abs * complex(1.0, x_r) / math.hypot(1.0, x_r)

    def branch(a: str, b: str, z: complex) -> None:
        if a in idx and b in idx and z != 0:
            i, j = idx[a], idx[b]
            y[i, i] += 1 / z
            y[j, j] += 1 / z
            y[i, j] -= 1 / z
            y[j, i] -= 1 / z

    s = case.supply
    k0 = idx[s.bus]
    y[k0, k0] += 1 / z_split(1.0 / s.sc_mva, s.x_r)
    for t in case.transformer:
        branch(t.hv_bus, t.lv_bus, z_split(t.z_pct / 100.0 / (t.kva / 1000.0), t.x_r))
    for c in case.cable:
        if c.from_bus in kv:
            z_ohm = complex(c.r_ohm_per_km, c.x_ohm_per_km) * c.length_m / 1000.0 / c.parallel
            branch(c.from_bus, c.to_bus, z_ohm / kv[c.from_bus] ** 2)
    try:
        with np.errstate(all="raise"):
            zkk = np.diagonal(np.linalg.inv(y))
    except (np.linalg.LinAlgError, FloatingPointError):
        return {}
    return {b: float(1000.0 / abs(zkk[idx[b]])) for b in names if abs(zkk[idx[b]]) > 0}


def _bank_kvar_at_bus(bk: Bank, bus_kv: float) -> float:
    """Whole bank at the bus nominal voltage, ``Q_R (U_n/U_R)^2`` [kvar]."""
    return float(sum(bk.steps_kvar)) * (bus_kv / bk.rated_kv) ** 2


def _bank_beyond_supply(case: Case, kv: dict[str, float]) -> list[InputProblem]:
    """A bank at least as large as the short-circuit power at its bus resonates at or below the fundamental."""
    sc = sc_kva_estimate(case, kv)
    probs = []
    for i, bk in enumerate(case.bank):
        if bk.bus not in sc or bk.bus not in kv:
            continue
        q = _bank_kvar_at_bus(bk, kv[bk.bus])
        if q >= sc[bk.bus]:
            # h_r = sqrt(S_sc / Q) (REFERENCES.md, resonance) is <= 1 here
            probs.append(InputProblem(
                case.source_file, f"bank[{i}].steps_kvar",
                f"the whole bank ({q:,.0f} kvar at {kv[bk.bus]:g} kV) is not below the short-circuit power at bus "
                f"{bk.bus!r} (about {sc[bk.bus]:,.0f} kVA): it would resonate with the supply at "
                f"h = {math.sqrt(sc[bk.bus] / q):.2f}, at or below the fundamental; check the units of steps_kvar (kvar, not "
                "Mvar), supply.sc_mva (MVA) and transformer kva (kVA)"))
    return probs


#: nominal voltages typical of 60 Hz and of 50 Hz systems [kV] (common practice:
#: North American ANSI C84.1 levels against IEC 60038 levels)
_TYPICAL_KV = {60: (0.208, 0.24, 0.48, 0.6, 2.4, 4.16, 12.47, 13.2, 13.8, 34.5),
               50: (0.4, 0.415, 0.69, 3.3, 6.6, 10.0, 11.0, 20.0, 33.0)}
#: a stage below this is taken to be a value in Mvar [kvar] (common practice:
#: low-voltage PFC stages start at a few kvar)
_STAGE_MIN_KVAR = 1.0
#: voltage-rise share above which a bank gets a hint [unitless]
#: (dV/V ~= Q/S_sc, REFERENCES.md "from memory"; 10 % is common practice for a worry)
_RISE_HINT = 0.10


def _mva_hint(kva: float, small_kva: float) -> str:
    """Hint for a rating below ``small_kva``: in MVA when 1000 times it is a rating, else just tiny."""
    if kva * 1000.0 >= small_kva:
        return f"{kva:g} kVA looks like a value in MVA (give kVA, e.g. {kva * 1000:g})"
    return f"{kva:g} kVA is implausibly small (check the value and its unit, kVA)"


def case_hints(case: Case) -> tuple[InputProblem, ...]:
    """Non-fatal warnings about a valid case that probably holds a mistake.

    Parameters
    ----------
    case : Case
        A case that passed :func:`check_case`.

    Returns
    -------
    tuple of InputProblem
        One line each (file, field, hint).  The study still runs; the caller
        prints these (``warning: <problem>``) and may copy them into the
        results.

    Notes
    -----
    Hints: a supply fault current above 300 kA (MVA given as kVA, or an
    infinite bus); a stage below 1 kvar (Mvar given as kvar); a bank larger than the
    transformers feeding its bus; a bank whose switching would raise the
    voltage by more than 10 % (``dV/V ~= Q/S_sc``); nominal voltages typical of
    the other supply frequency; a transformer under 10 kVA or a harmonic
    source under 1 kVA (MVA given as kVA); a built-in spectrum with orders
    above ``h_max`` (left out of the study).
    """
    file = case.source_file
    out: list[InputProblem] = []
    sup = case.supply
    if sup is not None:
        # far above any public supply's fault current the value was probably given in kVA
        # (a very large value is also the usual stand-in for an infinite bus: hence a hint)
        i_ka = sup.sc_mva / (math.sqrt(3.0) * sup.kv)
        if i_ka > _I_SC_MAX_KA:
            out.append(InputProblem(file, "supply.sc_mva", f"{sup.sc_mva:g} MVA is a fault current of {i_ka:,.0f} kA "
                                    f"at {sup.kv:g} kV; that looks like a value in kVA (give MVA, e.g. "
                                    f"{sup.sc_mva / 1000:g}), unless an infinite bus is meant"))
    for i, bk in enumerate(case.bank):
        small = [k + 1 for k, q in enumerate(bk.steps_kvar) if q < _STAGE_MIN_KVAR]
        if small:
            q0 = bk.steps_kvar[small[0] - 1]
            out.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                    f"stage {small[0]} is {q0:g} kvar; that looks like a value in Mvar "
                                    f"(give kvar, e.g. {q0 * 1000:g})"))
    for i, t in enumerate(case.transformer):
        if t.kva < 10.0:
            out.append(InputProblem(file, f"transformer[{i}].kva", _mva_hint(t.kva, 10.0)))
    for i, hs in enumerate(case.harmonic_source):
        if hs.kva < 1.0:
            out.append(InputProblem(file, f"harmonic_source[{i}].kva", _mva_hint(hs.kva, 1.0)))
    from resonance.standards.spectra import BUILTIN_SPECTRA  # noqa: PLC0415  (pure data; imported late to keep case light)

    for i, hs in enumerate(case.harmonic_source):
        named = BUILTIN_SPECTRA.get(hs.spectrum) if isinstance(hs.spectrum, str) else None
        if named is not None:
            above = [int(h) for h in named.h if h > case.study.h_max]
            if above:
                out.append(InputProblem(file, f"harmonic_source[{i}].spectrum",
                                        f"{hs.spectrum!r} has {len(above)} orders above h_max = "
                                        f"{case.study.h_max:g} ({above[0]} to {above[-1]}); they are left out of "
                                        "the study"))
    if case.network is None and case.supply is not None:
        kv, vprobs = bus_voltages_kv(case)
        for i, bk in enumerate(case.bank):
            feeding = [t for t in case.transformer if t.lv_bus == bk.bus]
            if bk.bus in kv and feeding:
                s_t = sum(t.kva for t in feeding)
                q = _bank_kvar_at_bus(bk, kv[bk.bus])
                if q > s_t:
                    out.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                            f"the whole bank ({q:,.0f} kvar) is {100 * q / s_t:.0f} % of the "
                                            f"{s_t:,.0f} kVA of transformers feeding bus {bk.bus!r}; check the units "
                                            "(a correction bank is normally well below the transformer rating)"))
        sc = sc_kva_estimate(case, kv) if not vprobs else {}
        for i, bk in enumerate(case.bank):
            if bk.bus in sc:
                q = _bank_kvar_at_bus(bk, kv[bk.bus])
                if _RISE_HINT < q / sc[bk.bus] < 1.0:
                    out.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                            f"the whole bank is {100 * q / sc[bk.bus]:.0f} % of the short-circuit "
                                            f"power at bus {bk.bus!r} (about {sc[bk.bus]:,.0f} kVA): switching it "
                                            f"raises the voltage by roughly that much and puts the resonance at "
                                            f"h = {math.sqrt(sc[bk.bus] / q):.2f}"))
        other = 50 if case.frequency_hz == 60 else 60
        volts = sorted(set(kv.values()))

        def typical(v: float, f: int) -> bool:
            return any(abs(v - t) <= 0.01 * t for t in _TYPICAL_KV[f])

        if volts and any(typical(v, other) for v in volts) and not any(typical(v, case.frequency_hz) for v in volts):
            shown = ", ".join(f"{v:g}" for v in volts if typical(v, other))
            out.append(InputProblem(file, "frequency_hz",
                                    f"{case.frequency_hz} Hz, but the bus voltages ({shown} kV) are typical of "
                                    f"{other} Hz systems; check frequency_hz"))
    return tuple(out)

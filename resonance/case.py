"""Case file (TOML): schema, validation and physical sanity checks.

The case file is written by hand by an engineer in engineering units.  This
module turns it into a validated, frozen :class:`Case`; every problem found is
reported at once as an :class:`~resonance.errors.InputError` whose lines name
the file, the field (e.g. ``transformer[0].z_pct``) and what is wrong.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from collections import deque
from pathlib import Path
from typing import Annotated, Any, Literal, Union

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, Strict, ValidationError, field_validator, model_validator

from .errors import InputError, InputProblem

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
]

#: a number given as a TOML number: ``true`` or ``"13.8"`` are refused rather
#: than read as 1.0 or 13.8 (an int is accepted where a float is expected)
Num = Annotated[float, Strict()]
#: an integer given as a TOML integer
Int = Annotated[int, Strict()]


class _Strict(BaseModel):
    """Base: unknown keys are errors, values are frozen once read."""

    model_config = ConfigDict(extra="forbid", frozen=True, str_strip_whitespace=True, allow_inf_nan=False)


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
        if self.length_m * math.hypot(self.r_ohm_per_km, self.x_ohm_per_km) == 0.0:
            raise ValueError("zero series impedance (length_m, r_ohm_per_km and x_ohm_per_km give 0 ohm); "
                             "a cable without impedance is a busbar: put the equipment on one bus, "
                             "or give the cable's real length and impedance")
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
        if isinstance(v, dict):
            if not v:
                raise ValueError("the spectrum table is empty")
            for h, pct in v.items():
                if h < 2:
                    raise ValueError(f"harmonic order {h} must be an integer >= 2")
                if not math.isfinite(pct) or pct < 0 or pct > 200:
                    raise ValueError(f"order {h}: {pct} % must be between 0 and 200 % of the fundamental")
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
    max_demand_kw: Num | None = Field(default=None, gt=0.0)
    max_demand_a: Num | None = Field(default=None, gt=0.0)


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


def _loc_to_field(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif str(part) in ("str", "constrained-str", "[key]") or str(part).startswith(("dict[", "function-")):
            continue
        else:
            out += ("." if out else "") + str(part)
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
            msg = f"{msg}; got {e.get('input')!r}"
        elif kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
            msg = f"{msg}; got {e.get('input')!r}"
        elif kind == "value_error":
            msg = msg.removeprefix("Value error, ")
        given = e.get("input")
        if ".spectrum" in fld and kind == "string_type" and isinstance(given, dict):
            continue  # a table was given: the table branch of the union reports what is wrong in it
        if kind in ("float_type", "int_type", "bool_type") or kind.endswith("_parsing"):
            msg = f"{msg}; got {e.get('input')!r}"
        elif kind == "finite_number":
            msg = f"must be a finite number; got {e.get('input')!r}"
        key = (fld, msg)
        if fld.endswith(".spectrum") and kind in ("string_type", "dict_type"):
            # a union error: report once, in plain words
            key = (fld, "spectrum")
            msg = "must be a built-in spectrum name or a table {order = percent}"
        if key in seen:
            continue
        seen.add(key)
        probs.append(InputProblem(file, fld, msg))
    return probs


def _unit_hints(raw: dict, file: str) -> list[InputProblem]:
    """Catch unit mistakes that the ranges alone would report less clearly."""
    probs = []
    sup = raw.get("supply") if isinstance(raw.get("supply"), dict) else {}
    kv = sup.get("kv")
    if isinstance(kv, (int, float)) and kv > 1000:
        probs.append(InputProblem(file, "supply.kv", f"{kv} kV looks like a value in volts; give kV (e.g. {kv / 1000:g})"))
    for i, t in enumerate(raw.get("transformer") or []):
        if not isinstance(t, dict):
            continue
        hv = t.get("hv_kv")
        for k in ("hv_kv", "lv_kv"):
            v = t.get(k)
            volts_lv = (k == "lv_kv" and isinstance(v, (int, float)) and isinstance(hv, (int, float))
                        and v > hv and v >= 100 and v / 1000 < hv)
            if isinstance(v, (int, float)) and (v > 1000 or volts_lv):
                probs.append(InputProblem(file, f"transformer[{i}].{k}", f"{v} kV looks like a value in volts; give kV (e.g. {v / 1000:g})"))
        z = t.get("z_pct")
        if isinstance(z, (int, float)) and 0 < z <= 0.5:
            probs.append(InputProblem(file, f"transformer[{i}].z_pct", f"{z} looks like per unit; give percent (e.g. {z * 100:g})"))
    for i, b in enumerate(raw.get("bank") or []):
        if not isinstance(b, dict):
            continue
        v = b.get("rated_kv")
        if isinstance(v, (int, float)) and v > 1000:
            probs.append(InputProblem(file, f"bank[{i}].rated_kv", f"{v} kV looks like a value in volts; give kV (e.g. {v / 1000:g})"))
    for i, l in enumerate(raw.get("load") or []):
        if isinstance(l, dict):
            pf = l.get("pf")
            if isinstance(pf, (int, float)) and 10 <= pf <= 100:
                probs.append(InputProblem(file, f"load[{i}].pf", f"{pf} looks like a percentage; give the power factor as a fraction (e.g. {pf / 100:g})"))
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
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise InputError.single(file, "", f"not valid TOML: {e}") from None
    return parse_case(raw, file, str(p.resolve().parent))


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
    return probs


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
    return kv, probs


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
    """
    file = case.source_file
    probs = _names_unique(case, file)
    st = case.study
    if st.max_demand_kw is not None and st.max_demand_a is not None:
        probs.append(InputProblem(file, "study.max_demand_a", "give either max_demand_kw or max_demand_a, not both"))
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
                    probs.append(InputProblem(file, f"{table}[{i}].{key}",
                                              f"bus {b!r} does not exist (buses: {', '.join(sorted(defined))})"))
                elif b not in known:
                    probs.append(InputProblem(file, f"{table}[{i}].{key}", f"bus {b!r} is not connected to the supply"))
        for table, a, b in (("transformer", "hv_bus", "lv_bus"), ("cable", "from_bus", "to_bus")):
            for i, item in enumerate(getattr(case, table)):
                for key in (a, b):
                    if getattr(item, key) not in known:
                        probs.append(InputProblem(file, f"{table}[{i}].{key}",
                                                  f"bus {getattr(item, key)!r} is not connected to the supply"))
        for i, bk in enumerate(case.bank):
            if bk.bus in kv:
                ratio = bk.rated_kv / kv[bk.bus]
                if not (0.85 <= ratio <= 1.6):
                    probs.append(InputProblem(file, f"bank[{i}].rated_kv",
                                              f"{bk.rated_kv} kV does not suit bus {bk.bus!r} at {kv[bk.bus]:g} kV "
                                              "(expected 0.85 to 1.6 times the bus voltage)"))
        if st.pcc_bus and st.pcc_bus not in defined:
            probs.append(InputProblem(file, "study.pcc_bus", f"bus {st.pcc_bus!r} does not exist"))
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
    return probs

"""Reading a case file: TOML text to a validated :class:`~resonance.inputs.case.Case`.

Every problem is reported at once as an :class:`~resonance.errors.InputError` whose lines name
the file, the field and what is wrong (unknown keys with the closest allowed key, missing keys,
values out of range, likely unit mistakes such as volts given for kV).  No I/O beyond reading
the one file.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from resonance.errors import InputError, InputProblem
from resonance.inputs.case import Case, one_line
from resonance.inputs.case_checks import (_KV_MAX, DEMAND_MIN_KVA, _is_num, _looks_like_volts, _volts_hint,
                                          check_case)

__all__ = ["parse_case", "load_case"]

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
            out += ("." if out else "") + one_line(str(part), 40)
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
            msg = f"{msg}; got {one_line(repr(e.get('input')), 60)}"
        elif kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
            msg = f"{msg}; got {one_line(repr(e.get('input')), 60)}"
        elif kind == "value_error":
            msg = msg.removeprefix("Value error, ")
        given = e.get("input")
        if ".spectrum" in fld and kind == "string_type" and isinstance(given, dict):
            continue  # a table was given: the table branch of the union reports what is wrong in it
        if kind in ("float_type", "int_type", "bool_type") or kind.endswith("_parsing"):
            msg = f"{msg}; got {one_line(repr(e.get('input')), 60)}"
        elif kind == "finite_number":
            msg = f"must be a finite number; got {one_line(repr(e.get('input')), 60)}"
        key = (fld, msg)
        if fld.endswith(".spectrum") and kind in ("string_type", "dict_type"):
            # a union error: report once, in plain words
            key = (fld, "spectrum")
            msg = "must be a built-in spectrum name or a table {order = percent}"
        if key in seen:
            continue
        seen.add(key)
        probs.append(InputProblem(file, fld, one_line(msg, 300)))
    return probs


def _rows(raw: dict, key: str) -> list[tuple[int, dict]]:
    """``(index, table)`` of an array of tables in the raw document (anything else: none)."""
    v = raw.get(key)
    return [(i, t) for i, t in enumerate(v) if isinstance(t, dict)] if isinstance(v, list) else []



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



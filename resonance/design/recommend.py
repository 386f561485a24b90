"""The recommended design as a case file: the user's case with each bank that needs a new design
replaced by the proposal, ready to run again (``DIR/recommended_case.toml``).

Edge layer, but pure: text in, text out.  The user's file is edited line by line so that its
comments and layout stay where they are; only the keys of a replaced bank change, and relative
paths of other input files are rewritten so that the new file, which lives in the output
folder, still finds them.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

__all__ = ["RECOMMENDED_CASE", "recommended_case_text"]

#: name of the file ``resonance check`` writes beside results.json
RECOMMENDED_CASE = "recommended_case.toml"

#: bank keys a proposal sets, in the order they are written when missing
_BANK_KEYS = ("kind", "rated_kv", "steps_kvar", "detuning_pct", "reactor_q", "runs_with", "inrush_reactor_uh",
              "pre_insertion_ohm")
#: keys holding paths relative to the case's folder, by table
_PATH_KEYS = {"network": "pandapower_json", "demand": "intervals_csv"}

_HEADER_RE = re.compile(r"^\s*(\[\[?)\s*[\"']?([A-Za-z0-9_.\-]+)[\"']?\s*\]\]?\s*(#.*)?$")
_KEY_RE = re.compile(r"^\s*[\"']?([A-Za-z0-9_\-]+)[\"']?\s*=")


def _toml_value(v) -> str:
    """A TOML literal of a number, string or list of numbers."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(float(v)) if isinstance(v, float) else str(v)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return json.dumps(str(v))  # a TOML basic string is a JSON string for these characters


def _sections(lines: list[str]) -> list[tuple[str, int, int]]:
    """(table name, first line, end line) of every table; the top level is named ""."""
    out = []
    name, start = "", 0
    depth = 0
    for i, ln in enumerate(lines):
        m = _HEADER_RE.match(ln) if depth == 0 else None
        if m:
            out.append((name, start, i))
            name, start = m.group(2), i
        depth += _bracket_change(ln)
    out.append((name, start, len(lines)))
    return out


def _bracket_change(line: str) -> int:
    """Net number of ``[`` opened on a value line (strings and comments skipped)."""
    if _HEADER_RE.match(line):
        return 0
    d, in_str, quote = 0, False, ""
    for ch in line:
        if in_str:
            if ch == quote:
                in_str = False
        elif ch in "\"'":
            in_str, quote = True, ch
        elif ch == "#":
            break
        elif ch == "[":
            d += 1
        elif ch == "]":
            d -= 1
    return d


def _key_span(lines: list[str], i: int) -> int:
    """End line (exclusive) of the key/value that starts at line ``i`` (multi-line arrays)."""
    depth = _bracket_change(lines[i])
    j = i + 1
    while depth > 0 and j < len(lines):
        depth += _bracket_change(lines[j])
        j += 1
    return j


def _set_keys(lines: list[str], start: int, end: int, values: dict, drop=()) -> list[str]:
    """Lines ``start:end`` of one table with ``values`` set (replaced in place or appended) and the keys
    of ``drop`` commented out."""
    body = lines[start:end]
    out, done, i = [], set(), 0
    while i < len(body):
        m = _KEY_RE.match(body[i])
        if m and m.group(1) in drop:
            j = _key_span(body, i)
            out.extend(f"# {x}    # not for the recommended design" for x in body[i:j])
            i = j
            continue
        if m and m.group(1) in values:
            k = m.group(1)
            j = _key_span(body, i)
            out.append(f"{k} = {_toml_value(values[k])}    # recommended (was: "
                       + " ".join(x.strip() for x in body[i:j]).split("=", 1)[1].split("#")[0].strip() + ")")
            done.add(k)
            i = j
            continue
        out.append(body[i])
        i += 1
    # missing keys go after the last key line of the table (before trailing blank lines)
    tail = len(out)
    while tail > 1 and not out[tail - 1].strip():
        tail -= 1
    extra = [f"{k} = {_toml_value(values[k])}    # recommended" for k in _BANK_KEYS if k in values and k not in done]
    return out[:tail] + extra + out[tail:]


def recommended_case_text(case_text: str, case_path: "str | os.PathLike[str]", out_dir: "str | os.PathLike[str]",
                          designs: dict, *, tool: str = "resonance") -> str | None:
    """The case text with every bank of ``designs`` replaced by its recommended design.

    Parameters
    ----------
    case_text : str
        The user's case file as read [unitless].
    case_path : path
        Where the case file is (relative paths in it are resolved from its folder) [unitless].
    out_dir : path
        Folder the new file will be written to [unitless].
    designs : dict
        Bank name -> the ``bank_table`` of its recommended design (keys ``rated_kv`` [kV],
        ``steps_kvar`` [kvar], ``detuning_pct`` [%], ``reactor_q`` [unitless], or the switching
        proposal's ``inrush_reactor_uh`` [uH] / ``pre_insertion_ohm`` [ohm]) [unitless].
    tool : str
        Name and version written in the header [unitless].

    Returns
    -------
    str or None
        The new case text, or None when no bank needs a new design [unitless].

    Notes
    -----
    Only the ``[[bank]]`` tables named in ``designs`` change (their keys are replaced where
    they stand, the old value kept in a comment); every other line, comment included, is
    kept.  Relative ``network.pandapower_json`` and ``demand.intervals_csv`` paths are
    rewritten relative to ``out_dir``.
    """
    if not designs:
        return None
    lines = case_text.splitlines()
    if lines and lines[0].startswith("\ufeff"):
        lines[0] = lines[0][1:]
    case_dir = Path(case_path).resolve().parent
    out = Path(out_dir).resolve()
    sections = _sections(lines)
    new: list[str] = []
    replaced = []
    for name, a, b in sections:
        chunk = lines[a:b]
        if name == "bank":
            bank_name = None
            for ln in chunk:
                m = re.match(r'^\s*["\']?name["\']?\s*=\s*("(?:[^"\\]|\\.)*"|\'[^\']*\')', ln)
                if m:
                    lit = m.group(1)
                    bank_name = json.loads(lit) if lit.startswith('"') else lit[1:-1]
                    break
            if bank_name in designs:
                d = designs[bank_name]
                vals = {k: d[k] for k in _BANK_KEYS if d.get(k) is not None}
                chunk = _set_keys(lines, a, b, vals, d.get("drop_keys", ()))
                for extra in d.get("extra_banks", ()):
                    while chunk and not chunk[-1].strip():
                        chunk = chunk[:-1]
                    chunk = chunk + ["", "[[bank]]    # recommended: a further branch of the filter"] + [
                        f"{k} = {_toml_value(v)}" for k, v in extra.items() if v is not None] + [""]
                replaced.append(bank_name)
        elif name in _PATH_KEYS:
            key = _PATH_KEYS[name]
            fixed = []
            for ln in chunk:
                m = re.match(rf'^(\s*["\']?{key}["\']?\s*=\s*)("(?:[^"\\]|\\.)*")(.*)$', ln)
                if m:
                    p = Path(json.loads(m.group(2)))
                    if not p.is_absolute():
                        target = case_dir / p
                        try:
                            rel = os.path.relpath(target, out)
                        except ValueError:  # pragma: no cover - other drive (Windows)
                            rel = str(target)
                        ln = f"{m.group(1)}{json.dumps(Path(rel).as_posix())}{m.group(3)}"
                fixed.append(ln)
            chunk = fixed
        new.extend(chunk)
    if not replaced:
        return None
    text = "\n".join(new) + "\n"
    if not _holds(text, designs):  # a layout the line editor does not follow: say so, write nothing
        return None
    desc = "; ".join(f"bank {n}: {_describe(designs[n])}" for n in replaced)
    header = [f"# Recommended design written by {tool} from {Path(case_path).name}.",
              f"# Changed: {desc}.",
              "# Every other line is the original case; paths of other input files point back to it.",
              "# A screening aid: to be reviewed by a qualified engineer before any equipment is specified.",
              ""]
    return "\n".join(header) + "\n" + text


def _describe(d: dict) -> str:
    """One line on what a design changes (detuning, inrush reactor, pre-insertion resistor)."""
    parts = []
    if d.get("kind") == "filter":
        tabs = [d, *d.get("extra_banks", ())]
        return (f"single-tuned filter, {len(tabs)} branch{'es' if len(tabs) > 1 else ''}: " + "; ".join(
            f"{t.get('name', '')} tuned at {(100.0 / t['detuning_pct']) ** 0.5:.2f}, {t['steps_kvar'][0]:g} kvar "
            f"at {t['rated_kv']:g} kV" for t in tabs))
    if d.get("detuning_pct") is not None:
        parts.append(f"detuned p = {d['detuning_pct']:g} %, capacitors {d['rated_kv']:g} kV, "
                     f"stages {', '.join(f'{q:g}' for q in d['steps_kvar'])} kvar")
    if d.get("inrush_reactor_uh") is not None:
        parts.append(f"inrush reactor {d['inrush_reactor_uh']:g} uH per stage")
    if d.get("pre_insertion_ohm") is not None:
        parts.append(f"pre-insertion resistors {d['pre_insertion_ohm']:g} ohm")
    return ", ".join(parts)


def _holds(text: str, designs: dict) -> bool:
    """True when ``text`` parses and every bank of ``designs`` has its recommended keys."""
    try:
        import tomllib  # noqa: PLC0415
    except ModuleNotFoundError:  # pragma: no cover - Python 3.10
        import tomli as tomllib  # noqa: PLC0415
    try:
        doc = tomllib.loads(text)
    except Exception:  # noqa: BLE001 - any parse failure means the edit did not hold
        return False
    banks = {b.get("name"): b for b in doc.get("bank", []) if isinstance(b, dict)}
    for name, d in designs.items():
        for want in (d, *d.get("extra_banks", ())):
            b = banks.get(want.get("name", name))
            if b is None:
                return False
            for k in _BANK_KEYS:
                if want.get(k) is not None and b.get(k) != want[k]:
                    return False
            if any(k in b for k in d.get("drop_keys", ()) if want is d):
                return False
    return True

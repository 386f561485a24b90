"""Edge of the sizing tool: read interval demand (CSV), write a ``[[bank]]`` block (TOML text).

Interval CSV format
-------------------
* UTF-8 text (a byte-order mark is accepted), comma separated, one header
  row.  Lines whose first non-blank character is ``#`` and blank lines are
  skipped anywhere in the file (they still count for line numbers).
* Header names are matched case-insensitively after trimming spaces:

  ``timestamp``  ISO 8601 date-time, e.g. ``2024-03-04T06:15:00`` or
                 ``2024-03-04 06:15:00-05:00``; all rows naive or all with a
                 UTC offset.  Strictly increasing.  The timestamp labels the
                 interval; the interval length is the usual spacing of the rows.
  ``kw``         real power, average over the interval [kW], >= 0 (a plant
                 exporting real power is refused).
  ``kvar``       reactive power [kvar], lagging positive, leading negative.
  ``pf``         power factor in (0, 1], taken as lagging (used only when
                 there is no ``kvar`` column; with both, ``kvar`` is used and
                 ``pf`` is ignored).

  Other columns are ignored.
* Every spacing between rows must be a whole multiple of the usual spacing;
  a larger multiple is a gap (missing intervals are counted, not filled, and
  the series is then treated as contiguous).

Every bad row is reported (up to 20 problems, then a count of the rest), each
naming the file, the line (1-based, header = line 1 when no comment precedes
it) and the column.
"""

from __future__ import annotations

import csv
import math
from collections import Counter
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Sequence

import numpy as np

from resonance.errors import InputError, InputProblem

__all__ = ["IntervalData", "read_intervals", "bank_block_toml", "MAX_REPORTED_PROBLEMS"]

#: Problems listed before the rest are only counted.
MAX_REPORTED_PROBLEMS = 20


@dataclass(frozen=True)
class IntervalData:
    """Interval demand read from one CSV file.

    Attributes
    ----------
    file : str
        Path as given [unitless].
    timestamps : tuple of datetime
        Interval labels.
    p_kw : ndarray
        Real power per interval [kW].
    q_kvar : ndarray
        Reactive power per interval, lagging positive [kvar].
    dt_h : float
        Interval length: the most common spacing of the rows [h].
    q_source : str
        ``"kvar"`` or ``"pf"``: the column the reactive power came from.
    missing_intervals : int
        Intervals missing in gaps of the series [unitless].
    """

    file: str
    timestamps: tuple[datetime, ...] = field(repr=False)
    p_kw: np.ndarray = field(repr=False)
    q_kvar: np.ndarray = field(repr=False)
    dt_h: float
    q_source: str
    missing_intervals: int

    @property
    def n(self) -> int:
        """Number of intervals [unitless]."""
        return int(self.p_kw.size)

    @property
    def span_h(self) -> float:
        """Time covered by the intervals present [h]."""
        return self.n * self.dt_h


class _Problems:
    """Collects problems; only the first MAX_REPORTED_PROBLEMS are kept in full."""

    def __init__(self, file: str):
        self.file = file
        self.items: list[InputProblem] = []
        self.count = 0

    def add(self, line: int, column: str | None, problem: str) -> None:
        self.count += 1
        if len(self.items) < MAX_REPORTED_PROBLEMS:
            where = f"line {line}" + (f", column {column}" if column else "")
            self.items.append(InputProblem(self.file, where, problem))

    def raise_if_any(self) -> None:
        if not self.count:
            return
        items = list(self.items)
        if self.count > len(items):
            items.append(InputProblem(self.file, "", f"... and {self.count - len(items)} more problems not shown"))
        raise InputError(items)


def _number(text: str) -> float | None:
    try:
        x = float(text)
    except ValueError:
        return None
    return x if math.isfinite(x) else None


def _rows(path: Path, file: str):
    """(line number, fields) of every non-blank, non-comment line."""
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            text = fh.read()
    except FileNotFoundError:
        raise InputError.single(file, "", "file not found") from None
    except IsADirectoryError:
        raise InputError.single(file, "", "is a directory, not a CSV file") from None
    except UnicodeDecodeError as e:
        raise InputError.single(file, "", f"is not UTF-8 text (byte {e.start}); save it as UTF-8 CSV") from None
    except OSError as e:
        raise InputError.single(file, "", f"cannot be read ({e.strerror})") from None
    lines = text.splitlines()
    reader = csv.reader(lines)
    out = []
    try:
        for fields in reader:
            n = reader.line_num
            if not fields or all(not f.strip() for f in fields) or fields[0].lstrip().startswith("#"):
                continue
            out.append((n, [f.strip() for f in fields]))
    except csv.Error as e:
        raise InputError.single(file, f"line {reader.line_num}", f"is not valid CSV ({e})") from None
    return out


def read_intervals(path) -> IntervalData:
    """Read interval demand from a CSV file (format in the module docstring).

    Long on purpose: every row and column is checked where it is read, so each problem names
    its line and column.

    Parameters
    ----------
    path : str or Path
        CSV file.

    Returns
    -------
    IntervalData
        The series, ready for :func:`resonance.design.sizing.required_kvar_series`.

    Raises
    ------
    InputError
        Every problem found, each naming the file, line and column.
    """
    file = str(path)
    rows = _rows(Path(path), file)
    if not rows:
        raise InputError.single(file, "", "the file is empty (expected a header row: timestamp,kw,kvar or timestamp,kw,pf)")
    hline, header = rows[0]
    names = [h.lower() for h in header]
    probs = _Problems(file)
    dup = [n for n, c in Counter(names).items() if c > 1 and n in ("timestamp", "kw", "kvar", "pf")]
    for n in dup:
        probs.add(hline, n, "appears more than once in the header")
    missing = [n for n in ("timestamp", "kw") if n not in names]
    if "kvar" not in names and "pf" not in names:
        missing.append("kvar (or pf)")
    for n in missing:
        probs.add(hline, None, f"missing column {n!r} (columns found: {', '.join(header) or 'none'})")
    probs.raise_if_any()
    col = {n: names.index(n) for n in ("timestamp", "kw", "kvar", "pf") if n in names}
    q_source = "kvar" if "kvar" in col else "pf"
    data = rows[1:]
    if len(data) < 2:
        raise InputError.single(file, "", f"has {len(data)} data row(s); at least 2 are needed to tell the interval length")

    ts: list[datetime | None] = []
    p = np.full(len(data), np.nan)
    q = np.full(len(data), np.nan)
    aware_ref: tuple[int, bool] | None = None
    last: tuple[int, datetime] | None = None
    for i, (line, fields) in enumerate(data):
        if len(fields) != len(header):
            probs.add(line, None, f"has {len(fields)} fields, the header has {len(header)}")
            ts.append(None)
            continue
        raw_t = fields[col["timestamp"]]
        t = None
        try:
            t = datetime.fromisoformat(raw_t)
        except ValueError:
            probs.add(line, "timestamp", f"{raw_t!r} is not an ISO 8601 date-time (e.g. 2024-03-04T06:15:00)")
        if t is not None:
            aware = t.utcoffset() is not None
            if aware_ref is None:
                aware_ref = (line, aware)
            if aware != aware_ref[1]:
                probs.add(line, "timestamp", f"{raw_t!r} {'has' if aware else 'has no'} UTC offset but line "
                          f"{aware_ref[0]} {'has' if aware_ref[1] else 'has none'}; use one form for all rows")
                t = None
            elif last is not None and t <= last[1]:
                probs.add(line, "timestamp", f"{raw_t!r} is not later than line {last[0]} "
                          f"({last[1].isoformat()}); timestamps must increase")
                t = None
            else:
                last = (line, t)
        ts.append(t)
        raw_p = fields[col["kw"]]
        x = _number(raw_p)
        if x is None:
            probs.add(line, "kw", f"{raw_p!r} is not a finite number" if raw_p else "is empty")
        elif x < 0:
            probs.add(line, "kw", f"{x:g} kW is negative (export); real-power export is not supported, "
                      "sizing assumes the plant imports")
        else:
            p[i] = x
        if q_source == "kvar":
            raw_q = fields[col["kvar"]]
            y = _number(raw_q)
            if y is None:
                probs.add(line, "kvar", f"{raw_q!r} is not a finite number" if raw_q else "is empty")
            else:
                q[i] = y
        else:
            raw_pf = fields[col["pf"]]
            y = _number(raw_pf)
            if y is None:
                probs.add(line, "pf", f"{raw_pf!r} is not a finite number" if raw_pf else "is empty")
            elif not (0.0 < y <= 1.0):
                hint = f"; {y:g} looks like a percentage, give {y / 100:g}" if 10.0 <= y <= 100.0 else ""
                probs.add(line, "pf", f"{y:g} is outside (0, 1]{hint}")
            elif not np.isnan(p[i]):
                q[i] = p[i] * math.sqrt(1.0 - y * y) / y
    probs.raise_if_any()

    # every row is valid here; check the spacing
    sec = np.array([(b - a).total_seconds() for a, b in zip(ts[:-1], ts[1:])])
    values, counts = np.unique(np.round(sec, 3), return_counts=True)
    dt_s = float(values[np.argmax(counts)])
    mult = sec / dt_s
    whole = np.round(mult)
    bad = np.flatnonzero(np.abs(mult - whole) * dt_s > 1.0)  # 1 s tolerance
    for j in bad:
        probs.add(data[j + 1][0], "timestamp", f"{sec[j] / 60:g} min after the previous row is not a whole "
                  f"multiple of the usual spacing of {dt_s / 60:g} min")
    probs.raise_if_any()
    p.setflags(write=False)
    q.setflags(write=False)
    return IntervalData(file, tuple(ts), p, q, dt_s / 3600.0, q_source, int((whole - 1).sum()))  # type: ignore[arg-type]


# --------------------------------------------------------------------------- TOML hand-off
def _toml_str(s: str) -> str:
    out = ['"']
    for ch in s:
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ch in "\b\t\n\f\r":
            out.append({"\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r"}[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_float(name: str, x: float) -> str:
    if isinstance(x, bool) or not isinstance(x, (int, float, np.floating, np.integer)) or not math.isfinite(x) or x <= 0:
        raise InputError.single("<arguments>", name, f"{x!r} must be a finite number > 0")
    return repr(float(x))


def bank_block_toml(name: str, bus: str, rated_kv: float, stages_kvar: Sequence[float],
                    detuning_pct: float | None = None, comment: str | None = None) -> str:
    """A ``[[bank]]`` table for the case file, as TOML text.

    Parameters
    ----------
    name : str
        Bank name.
    bus : str
        Bus the bank connects to (a bus name of the case).
    rated_kv : float
        Capacitor rated voltage, line-to-line [kV].
    stages_kvar : sequence of float
        Stage nameplate ratings at ``rated_kv``, in switching order [kvar].
    detuning_pct : float, optional
        Detuning ``p = X_L / X_C`` [%]; the key is left out when None.
    comment : str, optional
        Text written as ``#`` comment lines above the table.

    Returns
    -------
    str
        The table, ending in a newline, with exactly the keys ``name``,
        ``bus``, ``rated_kv``, ``steps_kvar`` and (optional) ``detuning_pct``
        of :class:`resonance.inputs.case.Bank`.
    """
    for key, v in (("name", name), ("bus", bus)):
        if not isinstance(v, str) or not v.strip():
            raise InputError.single("<arguments>", key, "must be a non-empty text")
    if not len(stages_kvar):
        raise InputError.single("<arguments>", "stages_kvar", "needs at least one stage")
    lines = [f"# {c}".rstrip() for c in (comment.splitlines() if comment else [])]
    lines += [
        "[[bank]]",
        f"name = {_toml_str(name)}",
        f"bus = {_toml_str(bus)}",
        f"rated_kv = {_toml_float('rated_kv', rated_kv)}",
        "steps_kvar = [" + ", ".join(_toml_float(f"stages_kvar[{i}]", q) for i, q in enumerate(stages_kvar)) + "]",
    ]
    if detuning_pct is not None:
        lines.append(f"detuning_pct = {_toml_float('detuning_pct', detuning_pct)}")
    return "\n".join(lines) + "\n"

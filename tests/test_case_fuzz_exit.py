"""Schema fuzzing of a real case: ``main`` ends with 0, 1 or 2 and never raises.

The bundled demo (``cases/demo_plant.toml``, read with :mod:`tomllib`) is changed in one to
three places: a number scaled by a plausible slip (1000 for a unit, 10 for a typo), a value
replaced by a wrong type, NaN, an infinity, a negative, zero, a huge
or tiny number, an empty or hostile string, a list or a table; a key removed; an unknown key
added.  The changed document is written back as TOML and checked with
``main(["check", CASE, "--out", DIR, "--no-plots", "--no-report"])``.

Invariant: the exit status is 0 or 1 (the case still makes sense) or 2 (bad input, with a
message naming the case file); never 3 (a defect of the tool) and never an exception out of
``main``.  Hypothesis runs derandomised with a bounded number of examples, so the run is
reproducible and short; the demo's scan step is made coarser (``h_step = 0.05``, the largest
the schema takes) only to keep the cases that still run quick.
"""

from __future__ import annotations

import contextlib
import copy
import io
import math
import os
import shutil
import tempfile
import tomllib
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from resonance.cli import main

from .conftest import CASES

BASE = tomllib.loads((CASES / "demo_plant.toml").read_text(encoding="utf-8"))
BASE.setdefault("study", {})["h_step"] = 0.05


def _paths(node, prefix=()) -> list[tuple]:
    """Every key path in the document (tables, arrays and leaves)."""
    out = []
    items = node.items() if isinstance(node, dict) else enumerate(node) if isinstance(node, list) else ()
    for k, v in items:
        out.append((*prefix, k))
        out += _paths(v, (*prefix, k))
    return out


def _get(doc, path):
    for k in path:
        doc = doc[k]
    return doc


PATHS = _paths(BASE)
TABLE_PATHS = [()] + [p for p in PATHS if isinstance(_get(BASE, p), dict)]

HOSTILE = st.one_of(
    st.sampled_from([float("nan"), float("inf"), -float("inf"), 0, 0.0, -1, -1.0e9, 1.0e308, 1.0e-300,
                     5.0e-324, 2**63 - 1, -(2**63), True, False, "", " ", "x" * 300, "\x1b[31m", "\x07",
                     "six-pulse-drive", "0.48", "#0", "UTIL-13.8", "MSB-1", "../../etc/passwd",
                     [], [0.0], [float("nan")], [-1.0, 2.0], [[]], {}, {"5": float("inf")}, {"1": 5.0},
                     {"x": 1}]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.text(max_size=12),
    st.lists(st.floats(allow_nan=True, allow_infinity=True), max_size=4),
)

NUMERIC_PATHS = [p for p in PATHS if isinstance(_get(BASE, p), (int, float)) and not isinstance(_get(BASE, p), bool)]

MUTATION = st.one_of(
    # a plausible slip (a unit off by 1000, a typo's factor): these cases often still run
    st.tuples(st.just("scale"), st.sampled_from(NUMERIC_PATHS),
              st.sampled_from([1e-6, 1e-3, 0.01, 0.1, 0.5, 0.9, 1.1, 2.0, 10.0, 1e3, 1e6])),
    st.tuples(st.just("replace"), st.sampled_from(PATHS), HOSTILE),
    st.tuples(st.just("delete"), st.sampled_from(PATHS), st.none()),
    st.tuples(st.just("add"), st.sampled_from(TABLE_PATHS), st.tuples(st.sampled_from(["bogus", "kv ", "Name", ""]),
                                                                       HOSTILE)),
)


def _apply(doc: dict, mutation) -> None:
    kind, path, arg = mutation
    try:
        if kind == "add":
            table = _get(doc, path)
            if isinstance(table, dict):
                key, value = arg
                table[key] = value
            return
        parent = _get(doc, path[:-1])
        if not isinstance(parent, (dict, list)):
            return
        if kind == "replace":
            parent[path[-1]] = arg
        elif kind == "scale":
            old = parent[path[-1]]
            if isinstance(old, (int, float)) and not isinstance(old, bool):
                parent[path[-1]] = float(old) * arg
        else:
            del parent[path[-1]]
    except (KeyError, IndexError, TypeError):
        pass  # an earlier mutation removed or replaced the container


# ------------------------------------------------------------------------------------ TOML out

def _toml_string(s: str) -> str:
    out = []
    for ch in s:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F or 0xD800 <= ord(ch) <= 0xDFFF:
            out.append(f"\\u{ord(ch) & 0xFFFF:04X}" if not 0xD800 <= ord(ch) <= 0xDFFF else "?")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return _toml_string(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_string(str(k))} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def _toml(doc: dict) -> str:
    """The document as TOML: every top-level value on one line (tables inline)."""
    return "".join(f"{_toml_string(str(k))} = {_toml_value(v)}\n" for k, v in doc.items())


def test_writer_round_trips_the_demo():
    # the writer itself is checked, so a failure below is the tool's and not the test's
    assert tomllib.loads(_toml(BASE)) == BASE


#: ``RESONANCE_FUZZ_EXAMPLES=2000`` runs a longer search by hand (as in tests/test_fuzz.py)
_N = int(os.environ.get("RESONANCE_FUZZ_EXAMPLES", "0"))


@settings(max_examples=_N or 40, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.lists(MUTATION, min_size=1, max_size=3))
def test_mutated_demo_ends_with_0_1_or_2(mutations):
    doc = copy.deepcopy(BASE)
    for m in mutations:
        _apply(doc, m)
    text = _toml(doc)
    assert tomllib.loads(text) is not None  # valid TOML: the schema, not the syntax, is fuzzed
    with tempfile.TemporaryDirectory() as d:
        work = Path(d)
        shutil.copy(CASES / "demo_plant_intervals.csv", work / "demo_plant_intervals.csv")
        case = work / "case.toml"
        case.write_text(text, encoding="utf-8")
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            rc = main(["check", str(case), "--out", str(work / "out"), "--no-plots", "--no-report"])
        defect = work / "out" / "resonance-defect.txt"
        detail = defect.read_text(encoding="utf-8") if defect.exists() else err.getvalue()
        assert rc in (0, 1, 2), f"exit {rc} for mutations {mutations!r}:\n{detail}"
        assert "Traceback" not in err.getvalue(), detail
        if rc == 2:
            assert str(case) in err.getvalue(), err.getvalue()

"""Tests for resonance.inputs.safeload: untrusted pandapower JSON files.

Every crafted file starts from genuine ``pandapower.to_json`` output and is
altered in one place.  Where a test shows that the crafted file is dangerous,
it does so by handing the same text to ``pandapower.from_json_string``
directly (behaviour measured on pandapower 3.5.6) and observing the effect, so
the refusal tests cannot pass on a harmless file.
"""

from __future__ import annotations

import copy
import functools
import json
import os
import subprocess
import sys
import warnings
from pathlib import Path

import pytest

from resonance.errors import InputError, ResonanceError
from resonance.inputs.safeload import DEFAULT_MAX_BYTES, check_pandapower_json_text, read_pandapower_json

pp = pytest.importorskip("pandapower")
pn = pytest.importorskip("pandapower.networks")

# --------------------------------------------------------------------------- helpers

# Audit hook recording every file opened while `_OPENED` is a list.  Audit hooks
# cannot be removed (PEP 578); while `_OPENED[0]` is None the hook does nothing.
_OPENED: list = [None]


def _audit(event, args):
    if event == "open" and _OPENED[0] is not None and isinstance(args[0], (str, bytes, os.PathLike)):
        _OPENED[0].append(os.path.realpath(os.fsdecode(args[0])))


sys.addaudithook(_audit)


class _Recorder:
    """Context manager: the real paths of all files opened inside the block."""

    def __enter__(self):
        self.paths = []
        _OPENED[0] = self.paths
        return self

    def __exit__(self, *exc):
        _OPENED[0] = None
        return False


@functools.lru_cache(maxsize=None)
def _genuine(name: str) -> tuple[str, int, int]:
    """(to_json text, bus count, line count) of a bundled pandapower network."""
    with warnings.catch_warnings():
        # mv_oberrhein() runs a power flow while building, and pandapower warns
        # (DeprecationWarning, "tap_dependency_table is missing") about its own
        # bundled data; that is pandapower building its example, not our code.
        warnings.filterwarnings("ignore", category=DeprecationWarning, message="tap_dependency_table")
        net = getattr(pn, name)()
    return pp.to_json(net), len(net.bus), len(net.line)


def _doc(name: str = "case9") -> dict:
    """A fresh, mutable parse of a genuine file."""
    return json.loads(_genuine(name)[0])


def _table(doc: dict, key: str) -> dict:
    """The parsed payload of table ``key`` (a copy)."""
    return json.loads(doc["_object"][key]["_object"])


def _set_table(doc: dict, key: str, payload: dict) -> None:
    doc["_object"][key]["_object"] = json.dumps(payload)


def _write(tmp_path: Path, doc_or_text, name: str = "net.json") -> Path:
    p = tmp_path / name
    text = doc_or_text if isinstance(doc_or_text, str) else json.dumps(doc_or_text)
    p.write_text(text, encoding="utf-8")
    return p


@pytest.fixture
def no_pandapower_load(monkeypatch):
    """Replace pandapower.from_json_string by a recorder; yields the call list."""
    calls = []
    monkeypatch.setattr(pp, "from_json_string", lambda *a, **k: calls.append(a))
    return calls


def _refused(path: Path, field: str, *words: str, **kw) -> InputError:
    """Assert read_pandapower_json refuses ``path`` at JSON path ``field``."""
    with pytest.raises(InputError) as ei:
        read_pandapower_json(path, **kw)
    err = ei.value
    label = kw.get("file_label", str(path))
    msg = str(err)
    assert label in msg
    assert any(p.field == field and p.file == label for p in err.problems), msg
    assert f"{label}: {field}: " in msg if field else f"{label}: " in msg
    for w in words:
        assert w in msg, msg
    return err


# --------------------------------------------------------------------------- (a) _module tag

_PROBE_SRC = (
    "from pathlib import Path\n"
    "Path(__file__).with_name({flag!r}).write_text('imported')\n"
    "class Thing:\n"
    "    def __init__(self, *a, **k):\n"
    "        pass\n"
)


def _probe_module(tmp_path: Path, monkeypatch, name: str) -> Path:
    """Write a module whose import creates a flag file; put it on sys.path."""
    flag = f"{name}.flag"
    (tmp_path / f"{name}.py").write_text(_PROBE_SRC.format(flag=flag), encoding="utf-8")
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.delitem(sys.modules, name, raising=False)
    return tmp_path / flag


def test_probe_control_raw_pandapower_imports_named_module(tmp_path, monkeypatch):
    # Control for the test below: pandapower's own reader imports a module named
    # in a _module tag (measured on pandapower 3.5.6), so the probe is effective.
    flag = _probe_module(tmp_path, monkeypatch, "rsl_probe_control")
    doc = _doc()
    doc["_object"]["probe"] = {"_module": "rsl_probe_control", "_class": "Thing", "_object": "{}"}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pp.from_json_string(json.dumps(doc))
    except Exception:  # noqa: BLE001 - whether it then fails does not matter here
        pass
    finally:
        imported = "rsl_probe_control" in sys.modules
        sys.modules.pop("rsl_probe_control", None)
    assert imported and flag.exists()


@pytest.mark.parametrize("where", ["net_value", "dtype_keys"])
def test_module_tag_is_not_imported(tmp_path, monkeypatch, no_pandapower_load, where):
    name = f"rsl_probe_{where}"
    flag = _probe_module(tmp_path, monkeypatch, name)
    doc = _doc()
    if where == "net_value":
        doc["_object"]["probe"] = {"_module": name, "_class": "Thing", "_object": "{}"}
        field = "$._object.probe"
    else:
        # a tag hidden in the dtype mapping beside a table: pandapower's object
        # hook sees every dict of the file, so this too would import the module
        doc["_object"]["bus"]["dtype"] = {"_module": name, "_class": "Thing"}
        field = "$._object.bus.dtype"
    path = _write(tmp_path, doc)
    _refused(path, field, name, "import")
    assert name not in sys.modules
    assert not flag.exists()
    assert no_pandapower_load == []


# --------------------------------------------------------------------------- (b) function tag

@pytest.mark.parametrize("where", ["net_value", "cell"])
def test_function_tag_refused(tmp_path, no_pandapower_load, where):
    tag = {"_module": "os", "_class": "function", "_object": "getcwd"}
    doc = _doc()
    if where == "net_value":
        doc["_object"]["hook"] = tag
        field = "$._object.hook"
    else:
        bus = _table(doc, "bus")
        bus["data"][0][0] = tag  # the name cell of bus 0
        _set_table(doc, "bus", bus)
        field = "$._object.bus._object.data[0][0]"
    path = _write(tmp_path, doc)
    _refused(path, field, "function reference", "'os'")
    assert no_pandapower_load == []


# --------------------------------------------------------------------------- (c) payload is a path

def _secret_table(tmp_path: Path) -> Path:
    """A local file holding a valid bus table with a recognisable name."""
    secret = tmp_path / "secret.json"
    payload = {"columns": ["name", "vn_kv", "type", "zone", "in_service", "geo"],
               "index": [0], "data": [["SECRET-BUS", 1.0, "b", None, True, None]]}
    secret.write_text(json.dumps(payload), encoding="utf-8")
    return secret


def test_path_payload_control_raw_pandapower_reads_file(tmp_path):
    # Control: pandapower reads an absolute *.json path given as a table payload
    # (measured on pandapower 3.5.6), and the audit hook sees the open.
    secret = _secret_table(tmp_path)
    doc = _doc()
    doc["_object"]["bus"]["_object"] = str(secret)
    with _Recorder() as rec:
        net = pp.from_json_string(json.dumps(doc))
    assert list(net.bus.name) == ["SECRET-BUS"]
    assert os.path.realpath(secret) in rec.paths


@pytest.mark.parametrize("variant", ["plain", "padded", "relative"])
def test_path_payload_refused_and_not_opened(tmp_path, no_pandapower_load, variant):
    secret = _secret_table(tmp_path)
    doc = _doc()
    payload = {"plain": str(secret), "padded": f"  {secret}\n", "relative": "secret.json"}[variant]
    doc["_object"]["bus"]["_object"] = payload
    path = _write(tmp_path, doc)
    with _Recorder() as rec:
        _refused(path, "$._object.bus._object", "inline JSON text", "path")
    assert os.path.realpath(secret) not in rec.paths
    assert os.path.realpath(path) in rec.paths  # the hook works: the network file itself was opened
    assert no_pandapower_load == []


def test_payload_not_a_string_refused(tmp_path, no_pandapower_load):
    doc = _doc()
    doc["_object"]["bus"]["_object"] = _table(doc, "bus")  # an object instead of JSON text
    _refused(_write(tmp_path, doc), "$._object.bus._object", "inline JSON text")
    assert no_pandapower_load == []


# --------------------------------------------------------------------------- (d) controllers

def test_controller_refused(tmp_path, no_pandapower_load):
    import pandapower.control as control

    net = pn.case9()
    control.ConstControl(net, element="load", variable="p_mw", element_index=0)
    assert len(net.controller) == 1
    path = _write(tmp_path, pp.to_json(net))  # genuine pandapower output
    _refused(path, "$._object.controller", "controller table has 1 row", "objects")
    assert no_pandapower_load == []


def test_controller_rows_refused_even_without_tags(tmp_path):
    doc = _doc()
    ctrl = _table(doc, "controller")
    ctrl["index"] = [0]
    ctrl["data"] = [[None] * len(ctrl["columns"])]
    _set_table(doc, "controller", ctrl)
    _refused(_write(tmp_path, doc), "$._object.controller", "controller")


# --------------------------------------------------------------------------- (e) size

def test_oversized_file_refused_before_reading(tmp_path, no_pandapower_load):
    text = _genuine("case9")[0]
    path = _write(tmp_path, text)
    size = path.stat().st_size
    with _Recorder() as rec:
        _refused(path, "", f"{size} bytes", f"limit of {size - 1} bytes", max_bytes=size - 1)
    assert os.path.realpath(path) not in rec.paths  # size checked from stat, file never opened
    assert no_pandapower_load == []


def test_size_limit_is_inclusive_and_default_admits_largest_bundled(tmp_path):
    text, n_bus, _ = _genuine("case9")
    path = _write(tmp_path, text)
    net = read_pandapower_json(path, max_bytes=path.stat().st_size)
    assert len(net.bus) == n_bus
    big = _genuine("case9241pegase")[0]
    assert len(big.encode("utf-8")) < DEFAULT_MAX_BYTES


def test_file_growing_after_stat_is_capped(tmp_path, monkeypatch):
    # the size seen by stat is faked smaller than the file, as if it grew in between
    from resonance.inputs import safeload

    path = _write(tmp_path, _genuine("case9")[0])
    real = os.stat(path)
    fake = os.stat_result((real.st_mode, 0, 0, 1, 0, 0, 10, 0, 0, 0))

    class _Os:
        fspath = staticmethod(os.fspath)

        @staticmethod
        def stat(p):
            return fake

    monkeypatch.setattr(safeload, "os", _Os)
    _refused(path, "", "limit of 100 bytes", max_bytes=100)


@pytest.mark.parametrize("bad", [0, -1, 1.5, True])
def test_bad_max_bytes_is_a_programming_error(tmp_path, bad):
    with pytest.raises(ValueError):
        read_pandapower_json(tmp_path / "x.json", max_bytes=bad)


# --------------------------------------------------------------------------- (f) syntax, encoding, top level

def _line_col(text: str, idx: int) -> tuple[int, int]:
    """1-based line and column of character ``idx`` (derived from the text)."""
    return text.count("\n", 0, idx) + 1, idx - text.rfind("\n", 0, idx)


def test_invalid_json_reports_line_and_column(tmp_path, no_pandapower_load):
    text = '{\n  "_module": "pandapower.auxiliary",\n  "_class" "pandapowerNet"\n}\n'
    idx = text.index('"pandapowerNet"')  # the ':' is missing just before this string
    line, col = _line_col(text, idx)
    assert (line, col) == (3, 12)  # derived by counting characters of the text above
    _refused(_write(tmp_path, text), "", "not valid JSON", f"line {line}, column {col}")
    assert no_pandapower_load == []


def test_invalid_payload_json_reports_path(tmp_path):
    doc = _doc()
    doc["_object"]["bus"]["_object"] = '{"columns": [1, 2,'
    _refused(_write(tmp_path, doc), "$._object.bus._object", "payload is not valid JSON", "line 1, column")


def test_not_utf8_refused(tmp_path):
    raw = _genuine("case9")[0].encode("utf-8")
    pos = raw.index(b'"pandapowerNet"')
    path = tmp_path / "latin.json"
    path.write_bytes(raw[:pos] + b"\xff" + raw[pos:])
    _refused(path, "", "not UTF-8", f"offset {pos}")


def test_utf8_bom_accepted(tmp_path):
    text, n_bus, n_line = _genuine("case9")
    path = tmp_path / "bom.json"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    net = read_pandapower_json(path)
    assert (len(net.bus), len(net.line)) == (n_bus, n_line)


@pytest.mark.parametrize("text, hint", [
    ("[]", "not a pandapower network"),
    ('{"bus": {}, "line": {}}', "older untagged format"),
    ('{"_module": "pandapower.auxiliary", "_class": "Other", "_object": {}}', "not a pandapower network"),
    ('{"_module": "pandapower.auxiliary", "_class": "pandapowerNet", "_object": "{}"}', "must be a JSON object"),
])
def test_top_level_not_a_net(tmp_path, text, hint):
    field = "$._object" if "must be" in hint else "$"
    _refused(_write(tmp_path, text), field, hint)


def test_missing_file_and_directory(tmp_path):
    _refused(tmp_path / "absent.json", "", "cannot read")
    _refused(tmp_path, "", "not a regular file")


def test_file_label_used_in_messages(tmp_path):
    err = _refused(_write(tmp_path, "[]"), "$", "network", file_label="case.toml: network.pandapower_json")
    assert isinstance(err, ResonanceError)


def test_pandapower_failure_becomes_input_error(tmp_path):
    doc = _doc()
    bus = _table(doc, "bus")
    bus["data"] = bus["data"][:-1]  # index and data no longer match: passes our check, pandas fails
    _set_table(doc, "bus", bus)
    path = _write(tmp_path, doc)
    with pytest.raises(InputError) as ei:
        read_pandapower_json(path)
    (prob,) = ei.value.problems
    assert prob.file == str(path) and prob.field == ""
    assert "pandapower could not build a network" in prob.problem
    assert ei.value.__cause__ is None and ei.value.__suppress_context__


# --------------------------------------------------------------------------- (g) genuine files

@pytest.mark.parametrize("name", [
    "example_multivoltage", "case9", "case118", "mv_oberrhein", "create_cigre_network_mv", "case9241pegase",
])
def test_genuine_files_load(tmp_path, name):
    text, n_bus, n_line = _genuine(name)
    net = read_pandapower_json(_write(tmp_path, text))
    # expected counts come from the network pandapower built, not from our reader
    assert (len(net.bus), len(net.line)) == (n_bus, n_line)
    assert net.controller.empty


def test_genuine_rich_net_loads(tmp_path):
    # results, a group (lists in cells), a Series at net level, geodata and std_types
    net = pn.example_multivoltage()
    pp.runpp(net)
    pp.create_group(net, ["bus", "line"], [[0, 1, 2], [0, 1]], name="g1")
    net["vn_series"] = net.bus.vn_kv.copy()
    path = _write(tmp_path, pp.to_json(net))
    back = read_pandapower_json(path)
    assert len(back.res_bus) == len(net.res_bus) == len(net.bus)
    assert list(back.group.element_index) == [[0, 1, 2], [0, 1]]
    assert back.vn_series.tolist() == net.vn_series.tolist()
    assert set(back.std_types["line"]) == set(net.std_types["line"])


def test_geodata_is_genuinely_present_and_accepted():
    text = _genuine("mv_oberrhein")[0]
    bus = _table(json.loads(text), "bus")
    j = bus["columns"].index("geo")
    assert all(isinstance(row[j], str) for row in bus["data"])  # GeoJSON text, as pandapower writes it
    check_pandapower_json_text(text, file="oberrhein.json")


# --------------------------------------------------------------------------- (h) tags inside cells

def _cell_variants():
    probe = {"_module": "rsl_probe_cell", "_class": "Thing", "_object": "{}"}
    npint = {"_module": "numpy", "_class": "int64", "_object": 3}
    return {
        "tag_in_cell": (probe, "$._object.bus._object.data[0][0]"),
        "tag_in_list_in_cell": ([1, [2, probe]], "$._object.bus._object.data[0][0][1][1]"),
        "tag_in_dict_in_cell": ({"a": {"b": npint}}, "$._object.bus._object.data[0][0].a.b"),
        "module_only": ({"_module": "rsl_probe_cell"}, "$._object.bus._object.data[0][0]"),
    }


@pytest.mark.parametrize("variant", list(_cell_variants()))
def test_tagged_objects_inside_cells_refused(tmp_path, monkeypatch, no_pandapower_load, variant):
    flag = _probe_module(tmp_path, monkeypatch, "rsl_probe_cell")
    cell, field = _cell_variants()[variant]
    doc = _doc()
    bus = _table(doc, "bus")
    bus["data"][0][0] = copy.deepcopy(cell)
    _set_table(doc, "bus", bus)
    _refused(_write(tmp_path, doc), field, "cells must hold plain values")
    assert "rsl_probe_cell" not in sys.modules and not flag.exists()
    assert no_pandapower_load == []


def test_tag_in_columns_orient_payload_refused(tmp_path):
    doc = _doc()
    doc["_object"]["bus"]["orient"] = "columns"
    doc["_object"]["bus"]["_object"] = json.dumps({"name": {"0": {"_module": "os", "_class": "x"}}})
    _refused(_write(tmp_path, doc), '$._object.bus._object.name["0"]', "cells must hold plain values")


def test_geo_cell_object_refused(tmp_path):
    doc = _doc("mv_oberrhein")
    bus = _table(doc, "bus")
    j = bus["columns"].index("geo")
    bus["data"][0][j] = {"type": "Point", "coordinates": [0.0, 0.0]}
    _set_table(doc, "bus", bus)
    _refused(_write(tmp_path, doc), f"$._object.bus._object.data[0][{j}]", "GeoJSON text")


def test_nested_net_and_other_tags_refused(tmp_path):
    doc = _doc()
    doc["_object"]["inner"] = {"_module": "pandapower.auxiliary", "_class": "pandapowerNet", "_object": {}}
    doc["_object"]["std_types"]["line"]["x"] = {"_module": "builtins", "_class": "complex", "_object": "1j"}
    err = _refused(_write(tmp_path, doc), "$._object.inner", "tagged object")
    assert any(p.field == "$._object.std_types.line.x" for p in err.problems)


# --------------------------------------------------------------------------- metadata beside table tags

@pytest.mark.parametrize("change, field, words", [
    ({"compression": "gzip"}, "$._object.bus.compression", ("not written by pandapower",)),
    ({"orient": "records"}, "$._object.bus.orient", ("orient",)),
    ({"dtype": {"name": "geometry"}}, "$._object.bus.dtype.name", ("plain dtype",)),
    ({"is_multiindex": "yes"}, "$._object.bus.is_multiindex", ("true or false",)),
    ({"_state": {}}, "$._object.bus._state", ("not written by pandapower",)),
])
def test_table_metadata_refused(tmp_path, change, field, words):
    doc = _doc()
    doc["_object"]["bus"].update(change)
    _refused(_write(tmp_path, doc), field, *words)


def test_underscore_net_key_refused(tmp_path):
    doc = _doc()
    doc["_object"]["_ppc"] = {}
    _refused(_write(tmp_path, doc), "$._object._ppc", "'_'")


def test_many_problems_are_capped(tmp_path):
    doc = _doc()
    for i in range(30):
        doc["_object"][f"hook{i}"] = {"_module": "os", "_class": "function", "_object": "getcwd"}
    with pytest.raises(InputError) as ei:
        read_pandapower_json(_write(tmp_path, doc))
    probs = ei.value.problems
    assert len(probs) == 21 and probs[-1].problem == "... and 10 more problem(s)"  # 20 listed + 1 note


# --------------------------------------------------------------------------- purity / laziness

def test_check_text_is_pure_and_accepts_genuine_text():
    text, _, _ = _genuine("case9")
    with _Recorder() as rec:
        out = check_pandapower_json_text(text, file="x.json")
    assert rec.paths == []
    a, b = json.loads(out)["_object"], json.loads(text)["_object"]
    assert a.keys() == b.keys()
    for k in a:  # the same document, each table's payload written again from its parsed form
        if isinstance(a[k], dict) and isinstance(a[k].get("_object"), str):
            assert json.loads(a[k]["_object"]) == json.loads(b[k]["_object"])
            a[k] = {**a[k], "_object": None}
            b[k] = {**b[k], "_object": None}
    assert a == b
    assert rec.paths == []


def test_import_does_not_import_pandapower():
    code = ("import sys, resonance.inputs.safeload\n"
            "bad = [m for m in ('pandapower', 'pandas') if m in sys.modules]\n"
            "sys.exit(1 if bad else 0)\n")
    root = Path(__file__).resolve().parents[1]
    res = subprocess.run([sys.executable, "-W", "error", "-c", code], cwd=root, capture_output=True,
                         text=True, timeout=60, check=False)
    assert res.returncode == 0, res.stderr


# --------------------------------------------------------------------------- one document (issue: duplicate keys)

def _sentinel_module(tmp_path: Path, name: str) -> Path:
    """A module that records its import by writing a file; returns that file's path."""
    mark = tmp_path / f"{name}.imported"
    (tmp_path / f"{name}.py").write_text(f"open({str(mark)!r}, 'w').write('ran')\n", encoding="utf-8")
    return mark


def _dup_first(text_obj: str, key: str, first: str) -> str:
    """Insert ``"key": first`` as the first member of the JSON object text ``text_obj``."""
    assert text_obj.startswith("{")
    return "{" + json.dumps(key) + ": " + first + ", " + text_obj[1:]


@pytest.mark.parametrize("where", ["bus", "dtype"])
def test_duplicate_key_with_a_module_is_refused_and_nothing_imported(tmp_path, monkeypatch, where):
    """A first duplicate that names a module (the standard parser keeps the last one) must not
    reach pandapower: refused with its JSON path, and the sentinel module never runs."""
    name = f"evil_{where}_mod"
    mark = _sentinel_module(tmp_path, name)
    monkeypatch.syspath_prepend(str(tmp_path))
    text, _, _ = _genuine("case9")
    evil = json.dumps({"_module": name, "_class": "Thing", "_object": "{}"})
    doc = json.loads(text)
    body = json.dumps(doc["_object"])
    if where == "bus":
        body = _dup_first(body, "bus", evil)
        field = '$._object.bus'
    else:
        bus = json.dumps(doc["_object"]["bus"])
        bus = _dup_first(bus, "dtype", evil)
        body = body.replace(json.dumps(doc["_object"]["bus"]), bus, 1)
        field = '$._object.bus.dtype'
    crafted = '{"_module": "pandapower.auxiliary", "_class": "pandapowerNet", "_object": ' + body + "}"
    # the standard parser alone would not see the module: the last duplicate wins
    assert name not in json.dumps(json.loads(crafted))
    path = _write(tmp_path, crafted)
    with pytest.raises(InputError) as ei:
        read_pandapower_json(path)
    assert not mark.exists() and name not in sys.modules
    p = ei.value.problems[0]
    assert p.field == field and "occurs more than once" in p.problem


def test_duplicate_key_inside_a_table_payload_is_refused(tmp_path):
    doc = _doc("case9")
    raw = doc["_object"]["bus"]["_object"]
    doc["_object"]["bus"]["_object"] = _dup_first(raw, "columns", '["x"]')
    with pytest.raises(InputError) as ei:
        read_pandapower_json(_write(tmp_path, doc))
    assert ei.value.problems[0].field == "$._object.bus._object.columns"


def test_pandapower_gets_the_checked_document_not_the_text(tmp_path, monkeypatch):
    """What pandapower is handed parses to the same network as the file, from text the check wrote."""
    calls = []
    real = pp.from_json_string
    monkeypatch.setattr(pp, "from_json_string", lambda t, *a, **k: calls.append(t) or real(t, *a, **k))
    text, n_bus, n_line = _genuine("case9")
    spaced = text.replace(", ", ",   ")  # same document, different text
    net = read_pandapower_json(_write(tmp_path, spaced))
    assert len(calls) == 1 and calls[0] != spaced
    assert len(net.bus) == n_bus and len(net.line) == n_line


def test_nesting_and_size_are_bounded(tmp_path, monkeypatch):
    """A file under the byte limit cannot ask for unbounded work: nesting and cells are capped."""
    import resonance.inputs.safeload as sl

    doc = _doc("case9")
    deep = []
    for _ in range(sl.MAX_DEPTH + 5):
        deep = [deep]
    doc["_object"]["user_pf_options"] = deep
    with pytest.raises(InputError) as ei:
        read_pandapower_json(_write(tmp_path, doc))
    assert "nested more than" in ei.value.problems[0].problem
    monkeypatch.setattr(sl, "MAX_CELLS", 50)  # case9 holds more than 50 cells
    with pytest.raises(InputError) as ei:
        read_pandapower_json(_write(tmp_path, _doc("case9"), "n2.json"))
    assert any("cells in all" in p.problem and p.field == "$._object" for p in ei.value.problems)
    monkeypatch.setattr(sl, "MAX_TABLE_ROWS", 3)  # case9 has 9 buses
    monkeypatch.setattr(sl, "MAX_CELLS", 10_000_000)
    with pytest.raises(InputError) as ei:
        read_pandapower_json(_write(tmp_path, _doc("case9"), "n3.json"))
    assert any(p.field == "$._object.bus" and "rows" in p.problem for p in ei.value.problems)


def test_an_element_table_that_is_a_plain_list_is_refused(tmp_path):
    doc = _doc("case9")
    doc["_object"]["bus"] = [[1, 2, 3]]
    with pytest.raises(InputError) as ei:
        read_pandapower_json(_write(tmp_path, doc))
    p = ei.value.problems[0]
    assert p.field == "$._object.bus" and "not a table" in p.problem

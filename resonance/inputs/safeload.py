"""Loading pandapower network JSON files that come from someone else.

pandapower's own reader (``pandapower.from_json_string`` / ``from_json``,
measured on pandapower 3.5.6) acts on the file's instructions while it
parses.  A dict anywhere in the file carrying ``_module`` and ``_class`` makes
it import the named module *before* any allow-list check (importing runs the
module's code); a ``function`` tag is resolved to a callable; controller and
characteristic objects are built with attributes taken from the file; and a
table whose payload is an absolute path ending in ``.json`` is read from the
local disk.  Extra keys beside a table tag are passed on to
``pandas.read_json`` as keyword arguments.

So this module reads the text with the plain :mod:`json` module first (which
builds only dicts, lists, strings, numbers, booleans and null), walks the whole
structure, including the JSON text held inside every table, and accepts only
what ``pandapower.to_json`` writes for a network:

* the top level: ``{"_module": "pandapower.auxiliary", "_class":
  "pandapowerNet", "_object": {...}}``;
* values of the network: a table (``_module="pandas.core.frame"``,
  ``_class="DataFrame"``), a series (``"pandas.core.series"``, ``"Series"``)
  or plain JSON without tags (``std_types``, ``user_pf_options``, ``name``,
  ``f_hz``, ``sn_mva``, ``version``, ``format_version``, ``converged``, ...);
* beside a table tag only the keys pandapower writes (``orient``, ``dtype``,
  ``is_multiindex``, ``is_multicolumn`` and the index/column names), with
  plain dtype names;
* a table payload that is inline JSON text of an object (it starts with
  ``{``), never a path, and whose cells hold plain values only (no tag at any
  depth); ``geo`` cells are GeoJSON *text* (a string) or null;
* an empty ``controller`` table.

Everything else is refused with an :class:`~resonance.errors.InputError` whose
field is the JSON path of the offending element, e.g.
``pandapower_json: $._object.controller``.  Paths continue into the JSON text of
a table: ``$._object.bus._object.data[0][5]`` is row 0, column 5 of the
``data`` array inside the string ``$._object.bus._object``.  Problems with the
file as a whole (size, encoding, JSON syntax) carry the field ``""``.

Which tags genuine files use was found by writing every network in
``pandapower.networks`` (pandapower 3.5.6) with ``pandapower.to_json`` and
walking the result: only the three tags above occur, every table uses
``orient="split"``, the dtypes are ``float64``, ``object``, ``bool``,
``uint32``, ``int64`` and ``Int64``, no cell holds a tagged object, ``geo``
cells are GeoJSON strings, and the ``group`` table holds plain lists in cells.
A net with a controller stores the controller as a tagged object in the
``controller.object`` cell; such files are refused.
"""

from __future__ import annotations

import json
import os
import re
import stat
from typing import TYPE_CHECKING, Any

from resonance.errors import InputError, InputProblem

if TYPE_CHECKING:  # pragma: no cover - typing only; pandapower is imported lazily
    from pandapower.auxiliary import pandapowerNet

__all__ = ["DEFAULT_MAX_BYTES", "check_pandapower_json_text", "read_pandapower_json"]

#: Default size limit for a network file [bytes] (64 MiB).  The largest network
#: bundled with pandapower 3.5.6, ``case9241pegase`` (9241 buses, 13797 lines),
#: is 4.1 MB as written by ``pandapower.to_json``; the limit leaves room for
#: result tables and geodata (about 15 times that) while keeping the memory
#: needed to parse a hostile file bounded.
DEFAULT_MAX_BYTES = 64 * 1024 * 1024

#: Deepest nesting accepted in the file itself (pandapower writes 3 to 5 levels) [unitless].
MAX_DEPTH = 32
#: Deepest nesting accepted inside one table's JSON text (cells hold plain values;
#: the ``group`` table holds lists in cells) [unitless].
MAX_PAYLOAD_DEPTH = 16
#: Most rows in one table [unitless]; ``case9241pegase`` has 13 797 lines.
MAX_TABLE_ROWS = 500_000
#: Most table cells in one file [unitless]; bounds the memory and time of building the
#: DataFrames (measured: ``case9241pegase`` holds 523 195 cells).
MAX_CELLS = 10_000_000
#: Most entries in the network object [unitless].
MAX_TABLES = 1000

#: at most this many problems are listed in one error
_MAX_PROBLEMS = 20

_NET_TAG = ("pandapower.auxiliary", "pandapowerNet")
_FRAME_TAG = ("pandas.core.frame", "DataFrame")
_SERIES_TAG = ("pandas.core.series", "Series")
_TAG_KEYS = ("_module", "_class")
#: element tables the model reads; each must be a DataFrame tag when present
_ELEMENT_TABLES = frozenset({"bus", "ext_grid", "load", "sgen", "gen", "line", "trafo", "trafo3w", "shunt",
                             "impedance", "switch", "ward", "xward", "motor", "storage", "asymmetric_load"})

# keys pandapower's json_dataframe / json_series write beside the tag
_FRAME_KEYS = frozenset({
    "_module", "_class", "_object", "orient", "dtype", "is_multiindex", "is_multicolumn",
    "index_name", "index_names", "column_name", "column_names",
})
_SERIES_KEYS = frozenset({
    "_module", "_class", "_object", "orient", "dtype", "typ", "is_multiindex",
    "index_name", "index_names",
})
_FRAME_ORIENTS = ("split", "columns")
_SERIES_ORIENTS = ("split", "index")
_NAME_KEYS = ("index_name", "index_names", "column_name", "column_names")

#: plain numpy / pandas dtype names (no extension types that would need an import)
_DTYPE_RE = re.compile(
    r"(?:object|bool|boolean|str|string|category"
    r"|u?int(?:8|16|32|64)|U?Int(?:8|16|32|64)"
    r"|float(?:16|32|64)|Float(?:32|64)|complex(?:64|128)"
    r"|(?:datetime|timedelta)64\[(?:s|ms|us|ns)\])\Z"
)
_IDENT_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")


# --------------------------------------------------------------------------- paths

def _key(path: str, key: str) -> str:
    """JSON path of member ``key`` of the object at ``path``."""
    if _IDENT_RE.match(key):
        return f"{path}.{key}"
    return f"{path}[{json.dumps(key)}]"


def _render(node: tuple) -> str:
    """Render a lazily built path node ``(parent, key)`` / ``(root_str,)``."""
    parts: list[str] = []
    while len(node) == 2:
        node, k = node
        parts.append(f"[{k}]" if isinstance(k, int) else _key("", k))
    root = node[0]
    return root + "".join(reversed(parts))


def _short(value: Any, n: int = 60) -> str:
    """Short repr of a value from the file, for a message."""
    r = repr(value)
    return r if len(r) <= n else r[: n - 3] + "..."


# --------------------------------------------------------------------------- checks

class _Problems:
    """Collects problems for one file, capped at ``_MAX_PROBLEMS``."""

    def __init__(self, file: str):
        self.file = file
        self.items: list[InputProblem] = []
        self.dropped = 0

    def add(self, field: str, problem: str) -> None:
        if len(self.items) < _MAX_PROBLEMS:
            self.items.append(InputProblem(self.file, field, problem))
        else:
            self.dropped += 1

    def raise_if_any(self) -> None:
        if not self.items:
            return
        items = list(self.items)
        if self.dropped:
            items.append(InputProblem(self.file, "", f"... and {self.dropped} more problem(s)"))
        raise InputError(items)


def _tag_problem(d: dict, where: str) -> str:
    """Message for a tagged dict found where no tag is allowed."""
    module, cls = d.get("_module"), d.get("_class")
    if cls == "function":
        what = (f"a function reference (_module={_short(module)}, _object={_short(d.get('_object'))}): "
                "pandapower would import that module and hand back a callable named by the file")
    else:
        what = (f"a tagged object (_module={_short(module)}, _class={_short(cls)}): pandapower would "
                "import the named module, which runs its code, and build the object from the file")
    return (f"{what}; refused {where}. Only the network, DataFrame and Series tags that "
            "pandapower.to_json writes for a network are accepted.")


def _scan_untagged(value: Any, root: str, probs: _Problems, where: str) -> None:
    """Refuse any dict carrying ``_module`` or ``_class`` anywhere inside ``value``.

    Iterative (no recursion limit); path strings are built only for problems.
    """
    stack: list[tuple[Any, tuple]] = [(value, (root,))]
    while stack:
        obj, node = stack.pop()
        if isinstance(obj, dict):
            if any(k in obj for k in _TAG_KEYS):
                probs.add(_render(node), _tag_problem(obj, where))
                continue
            for k, v in obj.items():
                if isinstance(v, (dict, list)):
                    stack.append((v, (node, k)))
        elif isinstance(obj, list):
            for i, v in enumerate(obj):
                if isinstance(v, (dict, list)):
                    stack.append((v, (node, i)))


def _is_plain_scalar(v: Any) -> bool:
    return v is None or isinstance(v, (str, int, float, bool))


class _DupDict(dict):
    """A JSON object in which some key occurred more than once (``dups`` lists them)."""

    dups: tuple = ()


def _pairs(pairs: list) -> dict:
    """``object_pairs_hook`` that keeps the first value and marks every repeated key.

    The standard parser lets the last of two equal keys win while other readers may
    take the first; a repeated key is refused (by :func:`_refuse_duplicates`) so that
    the check and pandapower can only ever see one and the same document.
    """
    d = dict(pairs)
    if len(d) == len(pairs):
        return d
    seen: set = set()
    dups = []
    for k, _ in pairs:
        if k in seen and k not in dups:
            dups.append(k)
        seen.add(k)
    out = _DupDict(d)
    out.dups = tuple(dups)
    return out


def _walk_limits(doc: Any, root: str, probs: "_Problems", max_depth: int) -> None:
    """Refuse repeated keys anywhere in ``doc`` and nesting deeper than ``max_depth``.

    Iterative (no recursion limit); path strings are built only for problems.
    """
    stack: list[tuple[Any, tuple, int]] = [(doc, (root,), 1)]
    deep_reported = False
    while stack:
        obj, node, depth = stack.pop()
        if depth > max_depth:
            if not deep_reported:
                probs.add(_render(node), f"nested more than {max_depth} levels deep; a network file "
                                         "written by pandapower.to_json is never nested this deeply")
                deep_reported = True
            continue
        if isinstance(obj, dict):
            if isinstance(obj, _DupDict):
                for k in obj.dups:
                    probs.add(_render((node, k)), f"key {k!r} occurs more than once in this object; JSON "
                                                  "readers disagree on which one counts, so the file is refused")
            for k, v in obj.items():
                if isinstance(v, (dict, list)):
                    stack.append((v, (node, k), depth + 1))
        elif isinstance(obj, list):
            for i, v in enumerate(obj):
                if isinstance(v, (dict, list)):
                    stack.append((v, (node, i), depth + 1))


def _parse_json(text: str, file: str, field: str, what: str) -> Any:
    """``json.loads`` with syntax errors turned into an InputError (repeated keys marked)."""
    try:
        return json.loads(text, object_pairs_hook=_pairs)
    except json.JSONDecodeError as exc:
        raise InputError.single(
            file, field, f"{what} is not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}"
        ) from None
    except RecursionError:
        raise InputError.single(file, field, f"{what} is nested too deeply to be a network file") from None


class _CellBudget:
    """Counts the cells of every table of one file against :data:`MAX_CELLS`."""

    def __init__(self):
        self.cells = 0

    def add(self, n: int) -> None:
        self.cells += int(n)


def _payload_size(payload: dict, orient: str) -> tuple[int, int]:
    """Rows and cells of a table payload [unitless]."""
    if orient == "split":
        data = payload.get("data", [])
        if not isinstance(data, list):
            return 0, 0
        cells = sum(len(r) if isinstance(r, list) else 1 for r in data)
        return len(data), cells
    lengths = [len(col) if isinstance(col, (dict, list)) else 1 for col in payload.values()]
    return max(lengths, default=0), sum(lengths)


def _payload_rows(payload: dict, orient: str) -> int:
    """Number of rows in a table payload [unitless]."""
    if orient == "split":
        idx = payload.get("index", payload.get("data", []))
        return len(idx) if isinstance(idx, list) else 0
    lengths = [len(col) for col in payload.values() if isinstance(col, (dict, list))]
    return max(lengths, default=0)


def _check_geo(payload: dict, orient: str, path: str, probs: _Problems) -> None:
    """``geo`` cells must be GeoJSON text or null (pandapower 3 writes strings)."""
    problem = ("a geo cell must be GeoJSON text (a string) or null, as pandapower.to_json writes it; "
               "an object here would be turned into geometry objects by the reader")
    if orient == "split":
        cols, data = payload.get("columns"), payload.get("data")
        if not (isinstance(cols, list) and isinstance(data, list)) or "geo" not in cols:
            return
        j = cols.index("geo")
        for i, row in enumerate(data):
            if isinstance(row, list) and j < len(row) and not (row[j] is None or isinstance(row[j], str)):
                probs.add(f"{path}.data[{i}][{j}]", problem)
    else:
        col = payload.get("geo")
        if isinstance(col, dict):
            for k, v in col.items():
                if not (v is None or isinstance(v, str)):
                    probs.add(_key(f"{path}.geo", k), problem)


def _check_table(key: str, d: dict, path: str, file: str, probs: _Problems, budget: "_CellBudget") -> None:
    """Check one DataFrame / Series tag of the network at ``path``."""
    is_frame = (d.get("_module"), d.get("_class")) == _FRAME_TAG
    kind = "DataFrame" if is_frame else "Series"
    allowed = _FRAME_KEYS if is_frame else _SERIES_KEYS
    for k in d:
        if k not in allowed:
            probs.add(_key(path, k), f"key {k!r} is not written by pandapower beside a {kind} tag "
                                     "(pandapower would pass it to pandas.read_json); refused")
    # metadata values must themselves be free of tags (the reader's object hook sees every dict)
    for k, v in d.items():
        if k not in ("_module", "_class", "_object") and isinstance(v, (dict, list)):
            _scan_untagged(v, _key(path, k), probs, f"in the metadata of a {kind}")

    orient = d.get("orient", "columns" if is_frame else "index")
    orients = _FRAME_ORIENTS if is_frame else _SERIES_ORIENTS
    if orient not in orients:
        probs.add(f"{path}.orient", f"orient {_short(orient)} is not one pandapower writes for a {kind} "
                                    f"(expected one of {', '.join(orients)})")
    if "dtype" in d:
        dt = d["dtype"]
        if is_frame:
            if not isinstance(dt, dict):
                probs.add(f"{path}.dtype", "must be an object mapping column names to dtype names")
            else:
                for col, name in dt.items():
                    if not (isinstance(name, str) and _DTYPE_RE.match(name)):
                        probs.add(_key(f"{path}.dtype", col), f"dtype {_short(name)} is not a plain dtype name "
                                  "(e.g. float64, int64, uint32, bool, object)")
        elif not (isinstance(dt, str) and _DTYPE_RE.match(dt)):
            probs.add(f"{path}.dtype", f"dtype {_short(dt)} is not a plain dtype name (e.g. float64, object)")
    if not is_frame and "typ" in d and d["typ"] != "series":
        probs.add(f"{path}.typ", f"typ must be 'series', not {_short(d['typ'])}")
    for k in ("is_multiindex", "is_multicolumn"):
        if k in d and not isinstance(d[k], bool):
            probs.add(f"{path}.{k}", f"must be true or false, not {_short(d[k])}")
    for k in _NAME_KEYS:
        if k in d:
            v = d[k]
            ok = _is_plain_scalar(v) or (isinstance(v, list) and all(_is_plain_scalar(x) for x in v))
            if not ok:
                probs.add(f"{path}.{k}", "must be a plain name or a list of plain names")

    if "_object" not in d:
        probs.add(path, f"{kind} tag without an inline _object payload; refused")
        return
    raw = d["_object"]
    ppath = f"{path}._object"
    if not isinstance(raw, str) or not raw.strip().startswith("{"):
        probs.add(ppath, f"the {kind} payload must be inline JSON text of an object (starting with '{{'), "
                         f"not {_short(raw)}: pandapower reads a local file when the payload is a path, "
                         "so anything else is refused")
        return
    payload = _parse_json(raw, file, ppath, f"the {kind} payload")
    if not isinstance(payload, dict):
        probs.add(ppath, f"the {kind} payload must be a JSON object")
        return
    _walk_limits(payload, ppath, probs, MAX_PAYLOAD_DEPTH)
    rows, cells = _payload_size(payload, orient if isinstance(orient, str) else "")
    if rows > MAX_TABLE_ROWS:
        probs.add(path, f"the table has {rows} rows, more than the limit of {MAX_TABLE_ROWS} "
                        "(the largest network bundled with pandapower has under 14 000)")
    budget.add(cells)
    # pandapower receives exactly what was checked: the payload written again from the parsed form
    d["_object"] = json.dumps(payload, ensure_ascii=False)
    if isinstance(orient, str) and orient in orients:
        if key == "controller" and is_frame and _payload_rows(payload, orient) > 0:
            probs.add(path, f"the controller table has {_payload_rows(payload, orient)} row(s): controllers "
                            "are Python objects that pandapower builds from the file (class and attributes "
                            "chosen by the file), so networks with controllers are refused; remove them "
                            "(net.controller.drop(net.controller.index, inplace=True)) and save the net again")
            return
        if is_frame:
            _check_geo(payload, orient, ppath, probs)
    _scan_untagged(payload, ppath, probs, f"inside a {kind} (cells must hold plain values)")


def check_pandapower_json_text(text: str, *, file: str) -> None:
    """Check that pandapower JSON text describes a network and nothing more.

    Pure: no file is opened and pandapower is not imported.  The text is
    parsed with the standard :mod:`json` module (a key repeated in one object
    is refused, naming its JSON path; nesting, table rows and cells are
    bounded, see :data:`MAX_DEPTH`, :data:`MAX_CELLS`) and walked completely,
    including the JSON text held inside each table (see the module docstring
    for what is accepted).

    Parameters
    ----------
    text : str
        Content of the file [unitless].
    file : str
        Name of the file as it should appear in messages [unitless].

    Returns
    -------
    str
        The checked document written again as JSON text (each table's payload
        too) [unitless]: hand this, never the original text, to pandapower, so
        the reader sees exactly the structure that was checked.

    Raises
    ------
    InputError
        Invalid JSON (with line and column), a top level that is not a
        pandapower network, any tag other than the network / DataFrame /
        Series tags, a table payload that is not inline JSON text, a tagged
        object inside a table cell, or a non-empty controller table.  Each
        problem names ``file``, the JSON path of the element and the problem.

    References
    ----------
    RFC 8259, *The JavaScript Object Notation (JSON) Data Interchange Format*
    (2017), for the syntax; the tag layout is that written by
    ``pandapower.to_json`` (pandapower 3.5.6, ``pandapower/io_utils.py``).

    Notes
    -----
    A file is accepted iff every dict holding ``_module`` or ``_class`` is the
    top-level network tag or a DataFrame/Series tag directly under it, and
    every table payload ``p`` satisfies ``p.strip().startswith("{")``.
    """
    if not isinstance(text, str):
        raise TypeError("text must be str")
    doc = _parse_json(text, file, "", "the file")
    probs = _Problems(file)
    budget = _CellBudget()
    _walk_limits(doc, "$", probs, MAX_DEPTH)
    probs.raise_if_any()
    expected = ("a pandapower network as written by pandapower.to_json, i.e. an object with "
                "_module='pandapower.auxiliary', _class='pandapowerNet' and an _object holding the tables")
    if not isinstance(doc, dict) or (doc.get("_module"), doc.get("_class")) != _NET_TAG:
        hint = ""
        if isinstance(doc, dict) and "bus" in doc and not any(k in doc for k in _TAG_KEYS):
            hint = " (this looks like an older untagged format: load and save it again with a current pandapower)"
        raise InputError.single(file, "$", f"the top level is not {expected}{hint}")
    for k in doc:
        if k not in ("_module", "_class", "_object"):
            probs.add(_key("$", k), f"key {k!r} is not written by pandapower beside the network tag; refused")
    body = doc.get("_object")
    if not isinstance(body, dict):
        probs.add("$._object", "the network's _object must be a JSON object holding the tables "
                               f"(older nested-string form or {type(body).__name__} refused)")
        probs.raise_if_any()
        return
    for key, value in body.items():
        path = _key("$._object", key)
        if key.startswith("_"):
            probs.add(path, "keys starting with '_' are not written by pandapower.to_json; refused")
            continue
        if key in _ELEMENT_TABLES and not (isinstance(value, dict) and
                                           (value.get("_module"), value.get("_class")) == _FRAME_TAG):
            what = {list: "a list", dict: "an object", str: "a string"}.get(type(value), type(value).__name__)
            probs.add(path, f"the {key!r} entry is {what}, not a table: pandapower.to_json writes every "
                            "element table as a DataFrame tag")
            continue
        if isinstance(value, dict) and any(t in value for t in _TAG_KEYS):
            tag = (value.get("_module"), value.get("_class"))
            if tag in (_FRAME_TAG, _SERIES_TAG):
                _check_table(key, value, path, file, probs, budget)
            else:
                probs.add(path, _tag_problem(value, "as a value of the network"))
        elif isinstance(value, (dict, list)):
            _scan_untagged(value, path, probs, "in plain network data")
    if len(body) > MAX_TABLES:
        probs.add("$._object", f"{len(body)} entries, more than the limit of {MAX_TABLES} "
                               "(a pandapower network has about 80)")
    if budget.cells > MAX_CELLS:
        probs.add("$._object", f"the tables hold {budget.cells} cells in all, more than the limit of "
                               f"{MAX_CELLS} (the largest network bundled with pandapower, "
                               "case9241pegase, holds about 520 000); a file this large would take minutes and gigabytes to build")
    probs.raise_if_any()
    return json.dumps(doc, ensure_ascii=False)


def read_pandapower_json(path: "str | os.PathLike[str]", *, file_label: "str | None" = None,
                         max_bytes: int = DEFAULT_MAX_BYTES) -> "pandapowerNet":
    """Read a pandapower network JSON file from an untrusted source.

    The size is checked before reading, the text is checked with
    :func:`check_pandapower_json_text`, and only then is it handed to
    ``pandapower.from_json_string``; any exception raised there is turned into
    an :class:`~resonance.errors.InputError`.  pandapower is imported here,
    not when this module is imported.

    Parameters
    ----------
    path : str or os.PathLike
        Location of the file [unitless].
    file_label : str, optional
        Name of the file in messages [unitless]; defaults to ``str(path)``.
    max_bytes : int, optional
        Largest file accepted [bytes]; default :data:`DEFAULT_MAX_BYTES`
        (64 MiB, about 15 times the largest network bundled with pandapower).

    Returns
    -------
    pandapowerNet
        The network [unitless].  It is a new object owned by the caller; copy
        it before changing it if it is to be reused.

    Raises
    ------
    InputError
        The file cannot be read, is larger than ``max_bytes``, is not UTF-8,
        fails :func:`check_pandapower_json_text`, or pandapower cannot build a
        network from it.
    ValueError
        ``max_bytes`` is not a positive integer (a programming error).

    References
    ----------
    RFC 3629, *UTF-8, a transformation format of ISO 10646* (2003); RFC 8259
    (JSON).  Reader behaviour measured on pandapower 3.5.6.

    Notes
    -----
    Accepted iff ``size <= max_bytes``, the bytes decode as UTF-8 (a leading
    byte-order mark is dropped), the check passes and pandapower succeeds.
    """
    if isinstance(max_bytes, bool) or not isinstance(max_bytes, int) or max_bytes <= 0:
        raise ValueError("max_bytes must be a positive integer")
    label = str(path) if file_label is None else str(file_label)
    fspath = os.fspath(path)
    try:
        st = os.stat(fspath)
    except OSError as exc:
        raise InputError.single(label, "", f"cannot read the file: {exc.strerror or exc}") from None
    if not stat.S_ISREG(st.st_mode):
        raise InputError.single(label, "", "not a regular file")
    too_big = (f"the file is larger than the limit of {max_bytes} bytes ({max_bytes // (1024 * 1024)} MiB), "
               "about 15 times the largest network bundled with pandapower; remove result tables "
               "(res_*) and geodata before saving if the network is genuinely this large")
    if st.st_size > max_bytes:
        raise InputError.single(label, "", f"{st.st_size} bytes: {too_big}")
    try:
        with open(fspath, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise InputError.single(label, "", f"cannot read the file: {exc.strerror or exc}") from None
    if len(data) > max_bytes:  # grew after stat
        raise InputError.single(label, "", too_big)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError.single(
            label, "", f"not UTF-8 text: byte 0x{data[exc.start]:02x} at byte offset {exc.start} ({exc.reason})"
        ) from None
    if text.startswith("\ufeff"):
        text = text[1:]
    checked = check_pandapower_json_text(text, file=label)

    import pandapower  # noqa: PLC0415 - lazy: importing resonance must not import pandapower
    from pandapower.auxiliary import pandapowerNet  # noqa: PLC0415

    try:
        net = pandapower.from_json_string(checked)  # the checked document, never the raw text
    except Exception as exc:  # noqa: BLE001 - anything pandapower raises is bad input here
        msg = f"{type(exc).__name__}: {exc}"
        if len(msg) > 300:
            msg = msg[:297] + "..."
        raise InputError.single(label, "", f"pandapower could not build a network from the file: {msg}") from None
    if not isinstance(net, pandapowerNet):
        raise InputError.single(label, "", f"pandapower returned a {type(net).__name__}, not a network")
    return net

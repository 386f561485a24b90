"""Outside reference: driving-point and transfer impedances from an ngspice AC analysis.

This module is one of the *independent* references that the tests of ``resonance`` compare
against. It imports nothing from ``resonance``: a circuit is given as a plain list of R, L and
C elements, written out as a SPICE netlist, solved by ngspice (``ngspice -b``, batch mode) and
read back.

Method
------
A 1 A AC current source (phase 0) is connected from ground (node ``"0"``) into the injection
node. Because the circuit is linear and the source is 1 A, the complex node voltage that
ngspice reports at node ``k`` equals the impedance ``Z(k, inject)`` [ohm]: the driving-point
impedance for ``k == inject`` and the transfer impedance otherwise.

The netlist generator lives here (it is committed with the tests) so that every test run
regenerates the netlists from the same source; :func:`write_netlist` writes one to disk for
inspection.

Circuit convention
------------------
Elements are tuples ``(kind, name, node_a, node_b, value)`` with ``kind`` one of ``"R"``
(value in [ohm]), ``"L"`` (value in [H]) or ``"C"`` (value in [F]). Node ``"0"`` is ground.
The circuit is the single-phase (per-phase, line-to-neutral) equivalent. Node names are
case-insensitive in SPICE, so two names differing only in case are rejected.

References
----------
ngspice User's Manual (version 39), chapter 15.3.1 ".ac: Small-Signal AC Analysis",
chapter 17.5 "wrdata" and the ``.control`` section (interactive interpreter in batch mode).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from collections.abc import Iterable, Sequence
from pathlib import Path

import numpy as np

__all__ = [
    "Element",
    "NgspiceError",
    "NgspiceNotFoundError",
    "find_ngspice",
    "require_ngspice",
    "netlist",
    "write_netlist",
    "ac_impedance",
]

Element = tuple[str, str, str, str, float]
"""One circuit element ``(kind, name, node_a, node_b, value)``; value in [ohm], [H] or [F]."""

_KINDS = {"R": "ohm", "L": "H", "C": "F"}
_NAME_RE = re.compile(r"^[A-Za-z0-9_]+$")
_DATA_FILE = "ac_out.txt"


class NgspiceError(RuntimeError):
    """ngspice ran but failed, timed out, or wrote output that cannot be read."""


class NgspiceNotFoundError(NgspiceError):
    """The ngspice executable is not installed (Debian package ``ngspice``)."""


def find_ngspice() -> str | None:
    """Return the path of the ngspice executable, or None when it is not installed.

    Returns
    -------
    str or None
        Absolute path of ``ngspice`` found on ``PATH`` (or ``/usr/bin/ngspice``) [unitless].
    """
    found = shutil.which("ngspice")
    if found is None and os.access("/usr/bin/ngspice", os.X_OK):
        found = "/usr/bin/ngspice"
    return found


def require_ngspice() -> str:
    """Return the ngspice path for a test, or skip / fail the calling test.

    Without ngspice the calling test is skipped, except when the environment variable ``CI``
    is set (to anything but "" / "0" / "false"): CI must have ngspice, so the test fails.

    Returns
    -------
    str
        Path of the ngspice executable [unitless].
    """
    import pytest  # imported here: only test code calls this helper

    exe = find_ngspice()
    if exe is not None:
        return exe
    ci = os.environ.get("CI", "").strip().lower()
    if ci not in ("", "0", "false", "no"):
        pytest.fail("ngspice is not installed but CI is set: install the Debian package ngspice")
    pytest.skip("ngspice is not installed (Debian package ngspice)")
    raise AssertionError("unreachable")  # pragma: no cover


def _check_node(node: str, where: str) -> str:
    if not isinstance(node, str) or not _NAME_RE.match(node):
        raise ValueError(f"{where}: node name {node!r} must be a non-empty string of [A-Za-z0-9_]")
    if node.lower() == "gnd":
        raise ValueError(f"{where}: node name 'gnd' is an alias of ground in ngspice; use '0'")
    return node


def _spice_name(kind: str, name: str) -> str:
    # A SPICE element's type is its first letter: prefix the kind unless it is already there.
    return name if name[:1].upper() == kind else f"{kind}{name}"


def _validate(
    elements: Sequence[Element], inject_node: str, nodes: Sequence[str]
) -> tuple[list[str], list[str]]:
    """Check the circuit; return SPICE element lines and the lower-cased nodes to report."""
    if len(elements) == 0:
        raise ValueError("elements: the circuit has no element")
    lines: list[str] = []
    seen_names: set[str] = set()
    node_case: dict[str, str] = {"0": "0"}
    for i, element in enumerate(elements):
        where = f"elements[{i}]"
        if len(element) != 5:
            raise ValueError(f"{where}: expected (kind, name, node_a, node_b, value), got {element!r}")
        kind, name, node_a, node_b, value = element
        kind = str(kind).upper()
        if kind not in _KINDS:
            raise ValueError(f"{where}: kind {kind!r} is not one of R, L, C")
        if not isinstance(name, str) or not _NAME_RE.match(name):
            raise ValueError(f"{where}: element name {name!r} must be a string of [A-Za-z0-9_]")
        for node in (node_a, node_b):
            _check_node(node, where)
            prior = node_case.setdefault(node.lower(), node)
            if prior != node:
                raise ValueError(
                    f"{where}: nodes {prior!r} and {node!r} differ only in case; SPICE "
                    "would merge them"
                )
        if node_a == node_b:
            raise ValueError(f"{where}: both terminals on node {node_a!r}")
        value_f = float(value)
        if not np.isfinite(value_f) or value_f <= 0.0:
            raise ValueError(f"{where}: value {value!r} [{_KINDS[kind]}] must be finite and > 0")
        spice = _spice_name(kind, name)
        if spice.lower() in seen_names:
            raise ValueError(f"{where}: element name {spice!r} is used twice")
        seen_names.add(spice.lower())
        # repr() of a float round-trips exactly, so the netlist carries the value unrounded.
        lines.append(f"{spice} {node_a} {node_b} {value_f!r}")
    _check_node(inject_node, "inject_node")
    if inject_node == "0" or inject_node.lower() not in node_case:
        raise ValueError(f"inject_node: {inject_node!r} is ground or not a node of the circuit")
    report: list[str] = []
    for node in nodes:
        _check_node(node, "nodes")
        if node == "0" or node.lower() not in node_case:
            raise ValueError(f"nodes: {node!r} is ground or not a node of the circuit")
        if node_case[node.lower()] != node:
            raise ValueError(f"nodes: {node!r} is spelt {node_case[node.lower()]!r} in the circuit")
        report.append(node.lower())
    if len(report) == 0:
        raise ValueError("nodes: no node to report")
    if len(set(report)) != len(report):
        raise ValueError(f"nodes: {list(nodes)!r} repeats a node")
    return lines, report


def _check_sweep(f_start_hz: float, f_stop_hz: float, n_points: int) -> None:
    if not (np.isfinite(f_start_hz) and np.isfinite(f_stop_hz)):
        raise ValueError("f_start_hz, f_stop_hz: must be finite")
    if not 0.0 < f_start_hz <= f_stop_hz:
        raise ValueError(f"f_start_hz, f_stop_hz: need 0 < {f_start_hz} <= {f_stop_hz} [Hz]")
    if int(n_points) != n_points or n_points < 1:
        raise ValueError(f"n_points: {n_points!r} must be a positive integer")
    if n_points > 1 and f_start_hz == f_stop_hz:
        raise ValueError("n_points: more than one point needs f_stop_hz > f_start_hz")


def netlist(
    elements: Sequence[Element],
    inject_node: str,
    nodes: Sequence[str],
    f_start_hz: float,
    f_stop_hz: float,
    n_points: int,
    *,
    data_file: str = _DATA_FILE,
    title: str = "resonance test reference circuit",
) -> str:
    """Write the SPICE netlist of a 1 A AC injection and a linear AC sweep.

    Parameters
    ----------
    elements : sequence of (kind, name, node_a, node_b, value)
        The circuit; ``kind`` is "R", "L" or "C" and ``value`` is in [ohm], [H] or [F]
        respectively. Node "0" is ground [unitless].
    inject_node : str
        Node into which the 1 A AC source drives current from ground [unitless].
    nodes : sequence of str
        Nodes whose voltage (= impedance to ``inject_node``) is written out [unitless].
    f_start_hz, f_stop_hz : float
        First and last frequency of the sweep, both included [Hz].
    n_points : int
        Number of equally spaced frequencies, ``numpy.linspace(f_start, f_stop, n)`` [unitless].
    data_file : str, optional
        File name that ``wrdata`` writes, relative to ngspice's working directory [unitless].
    title : str, optional
        First (title) line of the netlist [unitless].

    Returns
    -------
    str
        The netlist text [unitless].

    Notes
    -----
    With the source ``I 0 inject AC 1`` (1 A flowing out of the source's second terminal into
    ``inject``), linearity gives ``V(k) = Z(k, inject) * 1 A``. ngspice-39 has no ".ac list"
    form, so the frequencies are ``.ac lin``; the source's DC value is 0, so the operating
    point is zero everywhere (a node with no DC path to ground makes that operating point
    singular: give such a node a resistor).

    The ``.control`` block writes real and imaginary parts with ``wrdata`` after
    ``set wr_singlescale`` (one frequency column) and ``set wr_vecnames`` (a header line).

    References
    ----------
    ngspice User's Manual (version 39), 15.3.1 ".ac" and 17.5 "wrdata".
    """
    lines, report = _validate(elements, inject_node, nodes)
    _check_sweep(float(f_start_hz), float(f_stop_hz), int(n_points))
    if not _NAME_RE.match(Path(data_file).stem) or Path(data_file).name != data_file:
        raise ValueError(f"data_file: {data_file!r} must be a plain file name")
    title_line = re.sub(r"[\r\n]+", " ", title)
    vectors = " ".join(f"vr({k}) vi({k})" for k in report)
    out = [
        f"* {title_line}",
        "* generated by tests/refs/spice.py: 1 A AC current source from ground into "
        f"{inject_node}; V(node) = Z(node, {inject_node}) [ohm]",
        *lines,
        f"IINJ 0 {inject_node} DC 0 AC 1 0",
        ".control",
        "set wr_singlescale",
        "set wr_vecnames",
        "option numdgt=15",
        f"ac lin {int(n_points)} {float(f_start_hz)!r} {float(f_stop_hz)!r}",
        f"wrdata {data_file} {vectors}",
        "quit",
        ".endc",
        ".end",
        "",
    ]
    return "\n".join(out)


def write_netlist(
    path: str | os.PathLike[str],
    elements: Sequence[Element],
    inject_node: str,
    nodes: Sequence[str],
    f_start_hz: float,
    f_stop_hz: float,
    n_points: int,
    *,
    data_file: str = _DATA_FILE,
) -> Path:
    """Write the netlist of :func:`netlist` to ``path`` for inspection or a manual run.

    Parameters
    ----------
    path : path-like
        File to write [unitless].
    elements, inject_node, nodes, f_start_hz, f_stop_hz, n_points, data_file
        As in :func:`netlist`; frequencies in [Hz].

    Returns
    -------
    pathlib.Path
        The path written [unitless]. Running ``ngspice -b <path>`` in its folder writes
        ``data_file`` there.
    """
    target = Path(path)
    target.write_text(
        netlist(elements, inject_node, nodes, f_start_hz, f_stop_hz, n_points, data_file=data_file),
        encoding="ascii",
    )
    return target


def _parse(text: str, report: Sequence[str], n_points: int) -> tuple[np.ndarray, np.ndarray]:
    """Parse ``wrdata`` output: header, then rows of frequency, (re, im) per node."""
    rows = [ln.split() for ln in text.splitlines() if ln.strip()]
    if not rows:
        raise NgspiceError("ngspice wrote an empty data file")
    header = [h.lower() for h in rows[0]]
    expected = ["frequency"] + [f"{p}({k})" for k in report for p in ("vr", "vi")]
    if header != expected:
        raise NgspiceError(f"unexpected wrdata header {rows[0]!r}; expected {expected!r}")
    try:
        data = np.array([[float(v) for v in row] for row in rows[1:]], dtype=float)
    except ValueError as exc:
        raise NgspiceError(f"non-numeric value in ngspice output: {exc}") from exc
    if data.ndim != 2 or data.shape != (n_points, len(expected)):
        raise NgspiceError(
            f"ngspice wrote {data.shape} values; expected ({n_points}, {len(expected)})"
        )
    if not np.all(np.isfinite(data)):
        raise NgspiceError("ngspice output holds non-finite values (singular circuit?)")
    return data[:, 0], data[:, 1::2] + 1j * data[:, 2::2]


def ac_impedance(
    elements: Sequence[Element],
    inject_node: str,
    nodes: Iterable[str],
    f_start_hz: float,
    f_stop_hz: float,
    n_points: int,
    *,
    timeout_s: float = 60.0,
    keep_dir: str | os.PathLike[str] | None = None,
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Impedances ``Z(node, inject_node)`` from an ngspice AC analysis of the circuit.

    Parameters
    ----------
    elements : sequence of (kind, name, node_a, node_b, value)
        The circuit, as in :func:`netlist`; values in [ohm], [H], [F].
    inject_node : str
        Node into which the 1 A AC test current is injected from ground [unitless].
    nodes : iterable of str
        Nodes to report; ``inject_node`` itself gives the driving-point impedance [unitless].
    f_start_hz, f_stop_hz : float
        First and last frequency, both included [Hz].
    n_points : int
        Number of equally spaced frequencies [unitless].
    timeout_s : float, optional
        Wall-clock limit for the ngspice run [s].
    keep_dir : path-like or None, optional
        If given, the netlist, the data file and ngspice's log are written there and kept;
        otherwise a temporary folder is used and removed [unitless].

    Returns
    -------
    f_hz : numpy.ndarray of float, shape (n_points,)
        Frequencies as ngspice reports them [Hz].
    z_ohm : dict of str to numpy.ndarray of complex, shape (n_points,)
        ``Z(node, inject_node)`` per requested node (keys spelt as given) [ohm].

    Raises
    ------
    NgspiceNotFoundError
        ngspice is not installed.
    NgspiceError
        ngspice failed, timed out or wrote unreadable output.
    ValueError
        The circuit or the sweep is malformed.

    Notes
    -----
    ``Z(k, j) = V_k / I_j`` with ``I_j = 1 A`` injected into node ``j`` from ground.

    References
    ----------
    ngspice User's Manual (version 39), 15.3.1 ".ac" and 17.5 "wrdata".
    """
    node_list = list(nodes)
    _, report = _validate(elements, inject_node, node_list)
    text = netlist(elements, inject_node, node_list, f_start_hz, f_stop_hz, n_points)
    exe = find_ngspice()
    if exe is None:
        raise NgspiceNotFoundError(
            "ngspice is not installed: install the Debian package 'ngspice' (apt-get install ngspice)"
        )
    with tempfile.TemporaryDirectory(prefix="refs_spice_") as tmp:
        work = Path(keep_dir) if keep_dir is not None else Path(tmp)
        work.mkdir(parents=True, exist_ok=True)
        cir = work / "circuit.cir"
        cir.write_text(text, encoding="ascii")
        out_file = work / _DATA_FILE
        if out_file.exists():
            out_file.unlink()
        try:
            proc = subprocess.run(
                [exe, "-b", "-n", cir.name],
                cwd=work,
                capture_output=True,
                text=True,
                timeout=timeout_s,
                check=False,
                stdin=subprocess.DEVNULL,
            )
        except subprocess.TimeoutExpired as exc:
            raise NgspiceError(f"ngspice did not finish within {timeout_s} s") from exc
        log = f"--- stdout ---\n{proc.stdout}\n--- stderr ---\n{proc.stderr}"
        (work / "ngspice.log").write_text(log, encoding="utf-8")
        if proc.returncode != 0 or not out_file.exists():
            raise NgspiceError(
                f"ngspice exited with status {proc.returncode} and "
                f"{'wrote' if out_file.exists() else 'did not write'} {_DATA_FILE}:\n{log[-3000:]}"
            )
        for bad in ("singular matrix", "error:", "fatal"):
            if bad in log.lower():
                raise NgspiceError(f"ngspice reported {bad!r}:\n{log[-3000:]}")
        f_hz, z = _parse(out_file.read_text(encoding="ascii", errors="replace"), report, int(n_points))
    return f_hz, {node: z[:, i].copy() for i, node in enumerate(node_list)}

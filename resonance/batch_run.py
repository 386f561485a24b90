"""Batch and parametric studies: many case rows through :func:`resonance.pipeline.run_check` on Dask.

An input is a case file, a folder of case files, or a manifest CSV (a column ``case`` with the case
path relative to the manifest, an optional column ``id``, and any number of columns ``table.key``,
e.g. ``supply.sc_mva``, ``study.margin_pct`` or ``bank.PFC-1.steps_kvar``, whose cells override the
case's values for that row).  Each row is one task on a ``dask.distributed`` cluster (a local
cluster of single-threaded worker processes by default, or an existing scheduler); results stream
back as they finish and are written by this process, atomically: ``DIR/cases/<id>/results.json``
then ``DIR/cases/<id>/done.json`` (the row's input checksum), so an interrupted batch resumes where
it stopped and a killed run never leaves a row that looks finished.  The numeric core knows nothing
of Dask.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

from resonance import __version__
from resonance.errors import InputError, InputProblem

__all__ = ["Row", "BatchResult", "batch", "read_rows", "run_batch", "summary_rows", "SUMMARY_COLUMNS", "sweep_manifest"]

#: the first columns of summary.csv (contract names), then the overridden keys, then these
SUMMARY_COLUMNS = ("id", "case", "bank", "passed")
_TAIL_COLUMNS = ("site_passed", "bank_findings", "worst_step", "worst_scenario", "governing_check",
                 "governing_value", "governing_limit", "governing_unit", "lowest_margin_pct",
                 "h_scan_at_lowest_margin", "duty_margin_min_pct", "inrush_peak_max_a", "recommended")
ERROR_COLUMNS = ("id", "case", "file", "field", "message")


@dataclass(frozen=True)
class Row:
    """One case row of a batch.

    Attributes
    ----------
    id : str
        Row id (also its folder ``DIR/cases/<id>/``) [unitless].
    case : str
        Case file path as given (relative to the working directory) [unitless].
    overrides : dict
        ``table.key`` -> cell text (TOML value syntax) [unitless].
    source : str
        Where the row came from (the manifest and its line, or the case file) [unitless].
    """

    id: str
    case: str
    overrides: dict = field(default_factory=dict)
    source: str = ""
    #: write the PDF report, the scan tables and the figures into ``report_dir`` (on the worker)
    report_dir: str = ""


def _safe_id(text: str) -> str:
    from resonance.names import file_stem  # noqa: PLC0415

    return file_stem(text)


def read_rows(inputs) -> tuple[list[Row], list[InputProblem]]:
    """Rows of a batch from case files, folders of case files and manifest CSVs.

    Parameters
    ----------
    inputs : sequence of str or Path
        Case files (``.toml``), folders (every ``*.toml`` in them, sorted) or manifests (``.csv``).

    Returns
    -------
    (list of Row, list of InputProblem)
        The rows, and the problems of inputs that could not be read (file, field, what).
    """
    rows: list[Row] = []
    probs: list[InputProblem] = []
    for inp in inputs:
        p = Path(inp)
        if p.is_dir():
            found = sorted(x for x in p.glob("*.toml") if x.is_file())
            if not found:
                probs.append(InputProblem(str(p), "INPUT", "the folder holds no case file (*.toml)"))
            rows += [Row(_safe_id(x.stem), str(x), {}, str(x)) for x in found]
        elif p.suffix.lower() == ".csv" and p.is_file():
            r, pr = _manifest(p)
            rows += r
            probs += pr
        elif p.is_file():
            rows.append(Row(_safe_id(p.stem), str(p), {}, str(p)))
        else:
            probs.append(InputProblem(str(p), "INPUT", "no such case file, folder or manifest"))
    seen: dict[str, int] = {}
    out = []
    for r in rows:  # ids must be unique: later duplicates get -2, -3, ...
        n = seen.get(r.id, 0) + 1
        seen[r.id] = n
        out.append(r if n == 1 else Row(f"{r.id}-{n}", r.case, r.overrides, r.source))
    return out, probs


def _manifest(path: Path) -> tuple[list[Row], list[InputProblem]]:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as e:
        return [], [InputProblem(str(path), "FILE", f"cannot be read ({e})")]
    reader = csv.DictReader(io.StringIO(text))
    cols = reader.fieldnames or []
    if "case" not in cols:
        return [], [InputProblem(str(path), "case", "the manifest has no column 'case' (the case file of each row)")]
    bad = [c for c in cols if c not in ("case", "id") and c.count(".") < 1]
    if bad:
        return [], [InputProblem(str(path), c, "a column must be 'case', 'id' or 'table.key' (e.g. supply.sc_mva)")
                    for c in bad]
    rows = []
    for k, rec in enumerate(reader, start=2):
        case = (rec.get("case") or "").strip()
        rid = (rec.get("id") or "").strip() or f"{path.stem}-{k - 1:04d}"
        over = {c: (rec.get(c) or "").strip() for c in cols if c not in ("case", "id") and (rec.get(c) or "").strip()}
        target = case if not case or Path(case).is_absolute() else str(path.parent / case)
        rows.append(Row(_safe_id(rid), target, over, f"{path} line {k}"))
    return rows, []


def _value(cell: str):
    """A manifest cell as a TOML value (number, list, string, boolean); bare text as a string."""
    import tomllib  # noqa: PLC0415

    try:
        return tomllib.loads(f"v = {cell}")["v"]
    except Exception:  # noqa: BLE001 - not TOML syntax: the text itself
        return cell


def apply_overrides(raw: dict, overrides: dict, source: str) -> dict:
    """The case document with the row's overrides set (``table.key`` or ``table.NAME.key``).

    Parameters
    ----------
    raw : dict
        The parsed case file (changed in place and returned).
    overrides : dict
        ``table.key`` -> cell text.  For array tables (``bank``, ``load``, ``transformer``, ...) the
        element is named: ``bank.PFC-1.steps_kvar``; a single element may be addressed without its
        name (``bank.steps_kvar``).
    source : str
        The manifest and line, for error messages.

    Raises
    ------
    InputError
        A column naming no table or no element of the case (the manifest line and column named).
    """
    probs = []
    for col, cell in overrides.items():
        table, _, rest = col.partition(".")
        node = raw.get(table)
        if isinstance(node, list):
            name, dot, key = rest.rpartition(".")
            if not dot:
                if len(node) != 1:
                    probs.append(InputProblem(source, col, f"the case has {len(node)} [[{table}]] entries: name one "
                                              f"({table}.NAME.{rest})"))
                    continue
                elem = node[0]
                key = rest
            else:
                elem = next((e for e in node if isinstance(e, dict) and e.get("name") == name), None)
                if elem is None:
                    probs.append(InputProblem(source, col, f"the case has no [[{table}]] named {name!r}"))
                    continue
            elem[key] = _value(cell)
        elif isinstance(node, dict) or node is None:
            if node is None:
                if table not in ("study", "envelope", "detuning", "supply"):
                    probs.append(InputProblem(source, col, f"the case has no [{table}] table"))
                    continue
                node = raw.setdefault(table, {})
            node[rest] = _value(cell)
        else:
            probs.append(InputProblem(source, col, f"{table} is not a table of the case"))
    if probs:
        raise InputError(probs)
    return raw


def _input_bytes(row: Row) -> bytes:
    """Every input byte a row depends on: case file, network file, interval CSV, overrides, version."""
    import tomllib  # noqa: PLC0415

    h = hashlib.sha256()
    p = Path(row.case)
    data = p.read_bytes()
    h.update(data)
    try:
        doc = tomllib.loads(data.decode("utf-8-sig"))
    except Exception:  # noqa: BLE001 - the task reports the parse error itself
        doc = {}
    for table, key in (("network", "pandapower_json"), ("demand", "intervals_csv")):
        name = (doc.get(table) or {}).get(key) if isinstance(doc.get(table), dict) else None
        if isinstance(name, str):
            f = p.parent / name
            h.update(f.read_bytes() if f.is_file() else b"(missing)")
    h.update(json.dumps(row.overrides, sort_keys=True).encode())
    h.update(b"report" if row.report_dir else b"")
    h.update(__version__.encode())
    return h.digest()


def checksum(row: Row) -> str:
    """Hex checksum of a row's inputs and the tool version (the resume key) [unitless]."""
    return _input_bytes(row).hex()


def run_row(row: Row) -> dict:
    """Check one row (runs on a Dask worker): results.json text and the summary, or the error.

    Returns
    -------
    dict
        ``{"id", "status": "ok", "results_json", "summary": [...]}`` or ``{"id", "status": "error",
        "file", "field", "message"}``.
    """
    from resonance.errors import ModelError, ResonanceError  # noqa: PLC0415
    from resonance.inputs.case_load import load_case, parse_case  # noqa: PLC0415
    from resonance.pipeline import run_check  # noqa: PLC0415
    import dataclasses  # noqa: PLC0415
    import tomllib  # noqa: PLC0415

    t0 = time.perf_counter()
    try:
        path = Path(row.case)
        if not row.case:
            raise InputError([InputProblem(row.source, "case", "the row names no case file")])
        if not path.is_file():
            raise InputError([InputProblem(row.source, "case", f"no such case file: {row.case}")])
        if row.overrides:
            try:
                raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))
            except tomllib.TOMLDecodeError as e:
                raise InputError([InputProblem(row.case, "TOML", str(e))]) from None
            case = parse_case(apply_overrides(raw, row.overrides, row.source), file=str(path),
                              base_dir=str(path.parent))
        else:
            case = load_case(path)
        res = run_check(case, workers=1)
        res = dataclasses.replace(res, case_sha256=hashlib.sha256(path.read_bytes()).hexdigest())
        data = res.data
        if row.report_dir:
            _write_report(res, row, path)
        return {"id": row.id, "status": "ok", "results_json": json.dumps(data, indent=2, sort_keys=False) + "\n",
                "summary": summary_rows(row, data), "seconds": time.perf_counter() - t0}
    except InputError as e:
        p = e.problems[0]
        return {"id": row.id, "status": "error", "file": p.file, "field": p.field,
                "message": "; ".join(x.problem for x in e.problems)}
    except (ModelError, ResonanceError) as e:
        return {"id": row.id, "status": "error", "file": row.case, "field": "MODEL", "message": str(e)}
    except Exception as e:  # noqa: BLE001 - a crash of one row becomes an error row
        return {"id": row.id, "status": "error", "file": row.case, "field": "DEFECT",
                "message": f"{type(e).__name__}: {e}"}


def _write_report(res, row: Row, path: Path) -> None:
    """The row's report, scan tables and figures into ``row.report_dir`` (atomically, as ``check``)."""
    from resonance.outputs import OutputDir  # noqa: PLC0415
    from resonance.report.document import write_report  # noqa: PLC0415
    from resonance.report.scan_tables import write_scan_tables  # noqa: PLC0415

    out = OutputDir(row.report_dir, protect=[path], last=("report.pdf",))
    try:
        write_scan_tables(res.study, out)
        write_report(res, out)
        out.commit()
    except BaseException:
        out.discard()
        raise


def summary_rows(row: Row, data: dict) -> list[dict]:
    """One summary row per bank of a checked row (plain data for summary.csv / summary.json)."""
    out = []
    for b in data["banks"]:
        own = [f for f in data["findings"] if f["bank"] == b["name"] and f.get("cause") == "bank"]
        worst = max(own, key=lambda f: _excess(f), default=None)
        every = list(b["steps"]) + [s for sc in (b.get("scenarios") or {}).values() for s in sc["steps"]]
        margins = [abs(s["margin_pct"]) for s in every if s.get("margin_pct") is not None]
        tight = min((s for s in every if s.get("margin_pct") is not None), key=lambda s: abs(s["margin_pct"]),
                    default=None)
        duty = [min(s["duty_margins_pct"].values()) for s in every if s.get("duty_margins_pct")]
        rec = (b.get("detuning") or {}).get("recommended")
        sw = (b.get("switching_proposal") or {}).get("recommended")
        recommended = (f"detuned p = {rec['detuning_pct']:g} %, {rec['rated_kv']:g} kV" if rec else
                       ", ".join(f"{k} = {v:g}" for k, v in sw.items()) if sw else "")
        out.append({"id": row.id, "case": row.case, "bank": b["name"], "passed": not own,
                    **{k: v for k, v in row.overrides.items()},
                    "site_passed": data.get("site_passed"), "bank_findings": len(own),
                    "worst_step": worst["step"] if worst else None,
                    "worst_scenario": worst["scenario"] if worst else None,
                    "governing_check": worst["check"] if worst else None,
                    "governing_value": worst["value"] if worst else None,
                    "governing_limit": worst["limit"] if worst else None,
                    "governing_unit": worst["unit"] if worst else None,
                    "lowest_margin_pct": min(margins) if margins else None,
                    "h_scan_at_lowest_margin": tight["h_scan"] if tight else None,
                    "duty_margin_min_pct": min(duty) if duty else None,
                    "inrush_peak_max_a": max((s.get("inrush_peak_a") or 0.0) for s in b["steps"]),
                    "recommended": recommended})
    return out


def _excess(f: dict) -> float:
    """How far a finding is beyond its limit (relative; the resonance check by its margin)."""
    v, lim = f.get("value"), f.get("limit")
    if f["check"] == "resonance" or v is None or not lim:
        return 0.0
    return abs(v / lim - 1.0)


def _atomic(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.partial-{os.getpid()}")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def _finished(out: Path, row: Row, key: str):
    """The stored result of a row finished with the same inputs, or None."""
    d = out / "cases" / row.id
    try:
        done = json.loads((d / "done.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if done.get("checksum") != key or not (d / "results.json").is_file():
        return None
    return done


@dataclass
class BatchResult:
    """What a batch did.

    Attributes
    ----------
    summary : list of dict
        One row per case row and bank (the summary.csv rows).
    errors : list of dict
        One row per case row that could not be run (file, field, message).
    submitted : int
        Tasks sent to the cluster (rows not finished before) [unitless].
    skipped : int
        Rows already finished with the same inputs (resumed) [unitless].
    """

    summary: list
    errors: list
    submitted: int
    skipped: int
    pending: int = 0

    @property
    def exit_status(self) -> int:
        """0 every bank passes, 1 a bank finding, 2 some rows could not be run (or were left)."""
        if self.errors or self.pending:
            return 2
        return 0 if all(r["passed"] for r in self.summary) else 1

    def table(self):
        """The summary as a pandas DataFrame (one row per case row and bank)."""
        import pandas as pd  # noqa: PLC0415

        return pd.DataFrame(self.summary)


def run_batch(inputs, out, *, scheduler: str | None = None, workers: int | None = None,
              max_rows: int | None = None, progress=None, report: bool = False) -> BatchResult:
    """Run every row of a batch on Dask and write the outputs.

    Parameters
    ----------
    inputs : sequence of str or Path
        Case files, folders and manifests (:func:`read_rows`).
    out : str or Path
        Output folder: ``summary.csv``, ``summary.json``, ``errors.csv`` and ``cases/<id>/``.
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``); None starts a local cluster of
        single-threaded worker processes, closed at the end.
    workers : int, optional
        Worker processes of the local cluster (default: the CPU count) [unitless].
    max_rows : int, optional
        Run at most this many unfinished rows, leaving the rest for a later run (resume) [unitless].
    progress : callable, optional
        ``progress(done, total, eta_s)`` after each finished row.
    report : bool
        Also write each row's PDF report, scan tables and figures to ``DIR/cases/<id>/report/``
        (on the worker: the output folder must be reachable from every worker).

    Returns
    -------
    BatchResult

    Raises
    ------
    InputError
        No row could be read at all (every input named with what is wrong).
    """
    rows, probs = read_rows(inputs)
    if not rows:
        raise InputError(probs or [InputProblem("INPUT", "INPUT", "no case rows given")])
    out = Path(out)
    if report:
        import dataclasses  # noqa: PLC0415

        rows = [dataclasses.replace(r, report_dir=str((out / "cases" / r.id / "report").absolute())) for r in rows]
    (out / "cases").mkdir(parents=True, exist_ok=True)
    errors = [{"id": "", "case": "", "file": p.file, "field": p.field, "message": p.problem} for p in probs]
    results: dict[str, dict] = {}
    todo = []
    skipped = 0
    for r in rows:
        try:
            key = checksum(r)
        except OSError:
            key = ""
        done = _finished(out, r, key) if key else None
        if done is not None:
            results[r.id] = done
            skipped += 1
        else:
            todo.append((r, key))
    pending = 0
    if max_rows is not None and len(todo) > max_rows:
        pending = len(todo) - max_rows
        todo = todo[:max_rows]
    if todo:
        _run_on_dask(todo, out, results, scheduler, workers, progress)
    summary = []
    for r in rows:
        d = results.get(r.id)
        if d is None:
            continue
        if d["status"] == "ok":
            summary += d["summary"]
        else:
            errors.append({"id": r.id, "case": r.case, "file": d["file"], "field": d["field"], "message": d["message"]})
    _write_summary(out, rows, summary, errors)
    return BatchResult(summary=summary, errors=errors, submitted=len(todo), skipped=skipped, pending=pending)


def batch(inputs, out, *, scheduler: str | None = None, workers: int | None = None, max_rows: int | None = None,
          report: bool = False):
    """Python API of ``resonance batch``: the summary as a pandas DataFrame (one row per case row and bank).

    Parameters are those of :func:`run_batch`.  The DataFrame's ``attrs`` hold ``errors`` (the
    rows that could not be run), ``submitted``, ``skipped`` and ``exit_status``.
    """
    res = run_batch(inputs, out, scheduler=scheduler, workers=workers, max_rows=max_rows, report=report)
    df = res.table()
    df.attrs.update(errors=res.errors, submitted=res.submitted, skipped=res.skipped, exit_status=res.exit_status)
    return df


def _run_on_dask(todo, out: Path, results: dict, scheduler, workers, progress) -> None:
    from dask.distributed import Client, LocalCluster, as_completed  # noqa: PLC0415

    cluster = None
    if scheduler:
        client = Client(scheduler, timeout="30s")
    else:
        import dask  # noqa: PLC0415

        n = workers or os.cpu_count() or 1
        # Dask's nannies set MALLOC_TRIM_THRESHOLD_=65536 for their workers by default: measured here it
        # makes a check about 40 % slower (short tasks allocate and free many numpy arrays); the
        # one-thread BLAS settings are kept (one single-threaded worker per core)
        with dask.config.set({"distributed.nanny.pre-spawn-environ": {
                "OMP_NUM_THREADS": 1, "MKL_NUM_THREADS": 1, "OPENBLAS_NUM_THREADS": 1}}):
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=":0",
                                   silence_logs=40)
        client = Client(cluster)
    try:
        keys = {}
        futs = []
        for r, key in todo:
            f = client.submit(run_row, r, pure=False, key=f"resonance-row-{r.id}-{key[:12]}")
            keys[f.key] = (r, key)
            futs.append(f)
        t0 = time.monotonic()
        for k, f in enumerate(as_completed(futs), start=1):
            r, key = keys[f.key]
            try:
                d = f.result()
            except Exception as e:  # noqa: BLE001 - a lost worker or a task that could not run
                d = {"id": r.id, "status": "error", "file": r.case, "field": "WORKER",
                     "message": f"{type(e).__name__}: {e}"}
            if d["status"] == "ok":
                _atomic(out / "cases" / r.id / "results.json", d.pop("results_json"))
                # done.json last: a row without it is not finished
                _atomic(out / "cases" / r.id / "done.json",
                        json.dumps({"checksum": key, "status": "ok", "summary": d["summary"], "id": r.id},
                                   indent=1) + "\n")
            results[r.id] = d
            if progress is not None:
                el = time.monotonic() - t0
                progress(k, len(futs), el / k * (len(futs) - k))
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _write_summary(out: Path, rows, summary: list, errors: list) -> None:
    over = []
    for r in rows:
        over += [c for c in r.overrides if c not in over]
    cols = list(SUMMARY_COLUMNS) + over + list(_TAIL_COLUMNS)
    from resonance.outputs import csv_text_cell  # noqa: PLC0415

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    for s in summary:
        w.writerow([csv_text_cell(_cell(s.get(c))) for c in cols])
    _atomic(out / "summary.csv", buf.getvalue())
    _atomic(out / "summary.json", json.dumps(summary, indent=1, sort_keys=False) + "\n")
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(ERROR_COLUMNS)
    for e in errors:
        w.writerow([csv_text_cell(_cell(e.get(c))) for c in ERROR_COLUMNS])
    _atomic(out / "errors.csv", buf.getvalue())
    if summary:
        from resonance.report.batch_figure import summary_figure  # noqa: PLC0415

        fig = summary_figure(summary, over)
        tmp = out / f".summary.png.partial-{os.getpid()}"
        fig.savefig(tmp, dpi=110, format="png", metadata={"Software": None})
        os.replace(tmp, out / "summary.png")


def _cell(v):
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float) and not math.isfinite(v):
        return ""
    return v


def sweep_manifest(case: str, key: str, lo: float, hi: float, n: int, manifest: str | Path) -> str:
    """Text of a manifest sweeping one key of a case from ``lo`` to ``hi`` in ``n`` rows.

    Parameters
    ----------
    case : str
        Case file (written relative to the manifest's folder).
    key : str
        ``table.key`` to sweep (e.g. ``supply.sc_mva``).
    lo, hi : float
        First and last value [unit of the key].
    n : int
        Number of rows (>= 2) [unitless].
    manifest : str or Path
        Where the manifest will be written (for the relative case path).
    """
    if n < 2:
        raise InputError([InputProblem("--steps", "--steps", f"{n}: a sweep needs at least 2 rows")])
    rel = os.path.relpath(Path(case).resolve(), Path(manifest).resolve().parent)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["id", "case", key])
    for k in range(n):
        v = lo + (hi - lo) * k / (n - 1)
        w.writerow([f"{Path(case).stem}-{k + 1:03d}", Path(rel).as_posix(), repr(round(v, 10))])
    return buf.getvalue()


def _progress_bar(done: int, total: int, eta_s: float) -> None:
    width = 30
    fill = int(width * done / max(total, 1))
    sys.stderr.write(f"\r[{'#' * fill}{'.' * (width - fill)}] {done}/{total} rows, about {eta_s:.0f} s left ")
    if done == total:
        sys.stderr.write("\n")
    sys.stderr.flush()

"""Command-line interface: ``resonance check CASE --out DIR``.

Exit status: 0 every check passes; 1 a finding beyond a limit; 2 bad input or usage;
3 a defect of the tool (an unexpected error: one line on the terminal, the traceback in
``DIR/resonance-defect.txt``); 128 + n when ended by signal n (SIGINT, SIGTERM, SIGHUP),
with no staging folder and no child process left.
Heavy libraries (pandapower, matplotlib) are imported only inside the commands.
Everything printed has control characters escaped (a title cannot drive the terminal).
"""

from __future__ import annotations

import argparse
import dataclasses
import hashlib
import json
import os
import signal
import sys
import traceback
from pathlib import Path

from resonance import __version__
from resonance.errors import InputError, ModelError, ResonanceError

__all__ = ["main", "build_parser"]

EXIT_OK, EXIT_FINDING, EXIT_INPUT, EXIT_DEFECT = 0, 1, 2, 3

#: the run in progress: case path and open output folder (for the defect and signal paths)
_STATE: dict = {"case": None, "out": None, "out_arg": None}

#: errors of the output medium (full disk, quota, read-only, permission): exit 2, not a defect
_WRITE_ERRNOS = frozenset({28, 122, 30, 13, 1})  # ENOSPC, EDQUOT, EROFS, EACCES, EPERM

#: file in the output folder that receives the traceback of a defect of the tool
DEFECT_FILE = "resonance-defect.txt"


def _escape(text: str) -> str:
    """``text`` with control characters (other than newline) shown as escapes, e.g. ``\\x1b``."""
    if text.isprintable():
        return text
    out = []
    for ch in text:
        if ch == "\n" or ch.isprintable():
            out.append(ch)
        elif ch == "\t":
            out.append("    ")
        else:
            out.append(ch.encode("unicode_escape").decode("ascii"))
    return "".join(out)


def _say(text: str, file=None) -> None:
    """Print one message with control characters escaped."""
    print(_escape(str(text)), file=file if file is not None else sys.stdout)


class _Terminated(BaseException):
    """Raised in the main thread by SIGTERM or SIGHUP, like KeyboardInterrupt for SIGINT."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _on_signal(signum, _frame):
    # ignore a second signal while the first one unwinds and cleans up
    for sig in (signal.SIGTERM, signal.SIGHUP, signal.SIGINT):
        try:
            signal.signal(sig, signal.SIG_IGN)
        except (ValueError, OSError):  # pragma: no cover
            pass
    raise _Terminated(signum)


def _install_signals() -> dict:
    """SIGTERM and SIGHUP raise :class:`_Terminated` (main thread only); returns the old handlers."""
    old = {signal.SIGINT: signal.getsignal(signal.SIGINT)}  # restored too: a second signal ignores it
    for sig in (signal.SIGTERM, signal.SIGHUP):
        try:
            old[sig] = signal.signal(sig, _on_signal)
        except (ValueError, OSError):  # not the main thread: leave the handlers alone
            pass
    return old


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # usage errors -> exit 2 with one clear line
        self.print_usage(sys.stderr)
        print(f"resonance: error: {message}", file=sys.stderr)
        raise SystemExit(EXIT_INPUT)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (also used to generate docs/cli.md)."""
    p = _Parser(prog="resonance", description=(
        "Screening studies for power-factor-correction capacitor banks: frequency scan of every bank "
        "step, harmonic penetration, capacitor duty and distortion limits, detuning proposals."),
        epilog="Exit status: 0 all checks pass, 1 a finding beyond a limit, 2 bad input or usage, "
               "3 a defect of the tool (traceback in DIR/resonance-defect.txt).")
    p.add_argument("--version", action="version", version=f"resonance {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    c = sub.add_parser("check", help="run the full check of a case file and write results",
                       description="Run the full check of a case file: scans, penetration, duty, limits, detuning.")
    c.add_argument("case", metavar="CASE", help="case file (TOML)")
    c.add_argument("--out", metavar="DIR", required=True, help="output directory (created if missing)")
    c.add_argument("--no-plots", action="store_true", help="write results.json and tables only")
    c.add_argument("--no-report", action="store_true", help="skip the PDF report")
    c.add_argument("--quiet", action="store_true", help="print only findings")
    bt = sub.add_parser("batch", help="check many case rows (files, folders, manifest CSVs) on a Dask cluster",
                        description="Check every case row on a Dask cluster (a local one by default); writes "
                                    "DIR/summary.csv, DIR/summary.json, DIR/errors.csv and DIR/cases/<id>/results.json. "
                                    "Re-running the same command skips rows already finished with the same inputs.")
    bt.add_argument("inputs", metavar="INPUT", nargs="+", help="case file, folder of case files, or manifest CSV")
    bt.add_argument("--out", metavar="DIR", required=True, help="output directory (created if missing)")
    bt.add_argument("--scheduler", metavar="ADDRESS", help="run on an existing Dask scheduler (tcp://host:8786)")
    bt.add_argument("--workers", metavar="N", type=int, help="worker processes of the local cluster (default: CPUs)")
    bt.add_argument("--max-rows", metavar="N", type=int, help="run at most N unfinished rows now (resume later)")
    bt.add_argument("--report", action="store_true",
                    help="also write each row's PDF report and figures to DIR/cases/<id>/report/ (they dominate the cost)")
    bt.add_argument("--quiet", action="store_true", help="no progress bar")
    bt.set_defaults(run=_batch)
    sw = sub.add_parser("sweep", help="write a manifest CSV that sweeps one key of a case over a range",
                        description="Write a manifest for `resonance batch` sweeping one key (table.key) of a case.")
    sw.add_argument("case", metavar="CASE", help="case file (TOML)")
    sw.add_argument("--key", required=True, help="the key to sweep, e.g. supply.sc_mva or bank.PFC-1.rated_kv")
    sw.add_argument("--from", dest="lo", type=float, required=True, help="first value")
    sw.add_argument("--to", dest="hi", type=float, required=True, help="last value")
    sw.add_argument("--steps", type=int, required=True, help="number of rows (>= 2)")
    sw.add_argument("--manifest", required=True, help="manifest CSV to write (not overwritten if it exists)")
    sw.set_defaults(run=_sweep)
    try:
        from resonance.sizing_cli import add_parser as _add_size  # noqa: PLC0415
    except ImportError:  # pragma: no cover - sizing is optional at import time
        _add_size = None
    if _add_size is not None:
        _add_size(sub)
    return p


def _fmt(x, nd=2, w=7):
    return f"{x:{w}.{nd}f}" if x is not None else f"{'-':>{w}}"


def _summary(data: dict) -> str:
    lines = [f"{data['case']['title']}  ({data['case']['frequency_hz']} Hz)"]
    for b in data["banks"]:
        kind = f"detuned p = {b['detuning_pct']:g} %" if b.get("detuning_pct") else "plain"
        iec = f"{b['sc_mva_iec60909']:.2f}" if b["sc_mva_iec60909"] is not None else "-"
        lines.append(f"\nbank {b['name']} at {b['bus']} ({b['bus_kv']:g} kV, {kind}); "
                     f"S_sc = {b['sc_mva']:.2f} MVA (IEC 60909: {iec} MVA)")
        lines.append("  step    kvar  h_est  h_scan  near  margin%  THDbus%  THDpcc%  Vrms%  Vpk%  Irms%  kvar%  TDD%  result")
        # the one judge: a row is "ok" when the bank has no finding of its own at that step in any
        # scenario; "site" when only the site's own distortion is beyond a limit; else FINDING with
        # the scenarios where it governs (the figures shown are the nominal ones)
        mine = [f for f in data["findings"] if f["bank"] == b["name"]]
        order = [s["name"] for s in data.get("scenarios", [])] + ["all"]
        for s in b["steps"]:
            here = [f for f in mine if f["step"] == s["step"]]
            own = sorted({f["scenario"] for f in here if f["cause"] == "bank"},
                         key=lambda x: order.index(x) if x in order else len(order))
            word = ("ok" if not here else "site") if not own else \
                "FINDING " + ",".join(_SCEN_ABBR.get(x, x) for x in own)
            near = f"{s['nearest_order']:>4}" if s["nearest_order"] is not None else "   -"
            lines.append(f"  {s['step']:>4} {s['kvar_nameplate']:>7.0f} {_fmt(s['h_estimate'], 2, 6)} "
                         f"{_fmt(s['h_scan'], 2, 7)} {near} {_fmt(s['margin_pct'], 1, 8)} "
                         f"{_fmt(s.get('thd_v_pct'), 2, 8)} {_fmt(s.get('thd_v_pcc_pct'), 2, 8)} "
                         f"{_fmt(s.get('cap_v_rms_pct'), 1, 6)} {_fmt(s.get('cap_v_peak_pct'), 1, 5)} "
                         f"{_fmt(s.get('cap_i_rms_pct'), 1, 6)} {_fmt(s.get('cap_kvar_pct'), 1, 6)} "
                         f"{_fmt(s.get('tdd_pct'), 1, 5)}  {word}")
    if len(data.get("scenarios", [])) > 1:
        lines.append("  (figures: nominal supply; FINDING names the scenarios: "
                     + ", ".join(f"{_SCEN_ABBR.get(s['name'], s['name'])} {s['words']}" for s in data["scenarios"])
                     + ")")
    return "\n".join(lines)


#: short names of the scenarios in the terminal table
_SCEN_ABBR = {"nominal": "nom", "weak": "weak", "high_voltage_light_load": "HV/LL", "weak_light_load": "weak/LL",
              "all": "all"}


def _input_files(case, case_path: Path) -> list[Path]:
    """Every input file the case names (case, network, demand intervals): never written."""
    files = [case_path]
    base = Path(case.base_dir)
    if case.network is not None:
        files.append(base / case.network.pandapower_json)
    demand = getattr(case, "demand", None)
    csv_name = getattr(demand, "intervals_csv", None) if demand is not None else None
    if csv_name:
        files.append(base / csv_name)
    return files


class _ScanBar:
    """Progress of a long sparse scan on stderr (the core calls it through
    :data:`resonance.harmonics.engine.SCAN_PROGRESS` with orders done and in all); shown once a
    scan has run ``after_s`` seconds, never with ``--quiet``."""

    def __init__(self, after_s: float = 3.0):
        self.after_s, self.t0, self.last, self.shown = after_s, 0.0, None, False

    def __call__(self, done: int, total: int) -> None:
        import time  # noqa: PLC0415

        now = time.monotonic()
        if self.last is None or done <= self.last[0] or self.last[0] >= self.last[1]:
            self.t0, self.shown = now, False  # a new scan
        self.last = (done, total)
        if now - self.t0 < self.after_s and not self.shown:
            return
        self.shown = True
        fill = int(30 * done / max(total, 1))
        sys.stderr.write(f"\rscan [{'#' * fill}{'.' * (30 - fill)}] {done}/{total} orders ")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()


def _check(args) -> int:
    """``resonance check``: argv -> :func:`resonance.pipeline.run_check` -> writers -> exit code."""
    from resonance.harmonics.engine import SCAN_PROGRESS  # noqa: PLC0415

    token = SCAN_PROGRESS.set(None if args.quiet else _ScanBar())
    try:
        return _check_run(args)
    finally:
        SCAN_PROGRESS.reset(token)


def _check_run(args) -> int:
    """The body of :func:`_check`."""
    from resonance.inputs.case_checks import case_hints  # noqa: PLC0415
    from resonance.inputs.case_load import load_case  # noqa: PLC0415
    from resonance.outputs import OutputDir  # noqa: PLC0415
    from resonance.pipeline import run_check  # noqa: PLC0415

    case_path = Path(args.case)
    case = load_case(case_path)
    _STATE["case"] = str(case_path)
    for hint in case_hints(case):  # likely mistakes in a valid case: reported, not fatal
        _say(f"warning: {hint}", sys.stderr)
    out = OutputDir(args.out, protect=_input_files(case, case_path))
    _STATE["out"] = out
    workers = _workers()  # a bad RESONANCE_WORKERS is named here
    try:
        result = run_check(case, workers=workers)
        result = dataclasses.replace(result, case_sha256=hashlib.sha256(case_path.read_bytes()).hexdigest())
        data = result.data
        _write_outputs(args, case_path, out, result)
        rec_text = _recommended_case(case_path, out, result.proposals, result.switching_proposals,
                                     result.filter_proposals)
        written = out.commit()
    except BaseException:
        out.discard()
        raise
    finally:
        _STATE["out"] = None
    _tell(args, data, out, written, rec_text)
    return EXIT_OK if result.passed else EXIT_FINDING


def _batch(args) -> int:
    """``resonance batch``: rows -> Dask -> summary files -> exit status (0, 1, or 2 when rows failed)."""
    from resonance.batch_run import _progress_bar, run_batch  # noqa: PLC0415

    if args.workers is not None and args.workers < 1:
        _say("error: --workers: must be a whole number >= 1", sys.stderr)
        return EXIT_INPUT
    if args.max_rows is not None and args.max_rows < 0:
        _say("error: --max-rows: must be >= 0", sys.stderr)
        return EXIT_INPUT
    res = run_batch(args.inputs, args.out, scheduler=args.scheduler, workers=args.workers,
                    max_rows=args.max_rows, progress=None if args.quiet else _progress_bar, report=args.report)
    n_bank = sum(1 for r in res.summary if not r["passed"])
    _say(f"{len(res.summary)} bank rows checked ({res.skipped} case rows finished before, {res.submitted} run now): "
         f"{n_bank} with findings; {len(res.errors)} rows could not be run"
         + (f"; {res.pending} rows left for a later run" if res.pending else "") + f"; see {args.out}/summary.csv")
    for e in res.errors:
        _say(f"error: {e['file']}: {e['field']}: {e['message']}", sys.stderr)
    return res.exit_status


def _sweep(args) -> int:
    """``resonance sweep``: write a manifest sweeping one key (never over an existing file)."""
    from resonance.batch_run import sweep_manifest  # noqa: PLC0415

    target = Path(args.manifest)
    if target.exists():
        _say(f"error: --manifest: {target} exists; it is not overwritten", sys.stderr)
        return EXIT_INPUT
    if "." not in args.key:
        _say("error: --key: give table.key, e.g. supply.sc_mva", sys.stderr)
        return EXIT_INPUT
    if not Path(args.case).is_file():
        _say(f"error: {args.case}: no such case file", sys.stderr)
        return EXIT_INPUT
    text = sweep_manifest(args.case, args.key, args.lo, args.hi, args.steps, target)
    target.write_text(text, encoding="utf-8")
    _say(f"wrote {target} ({args.steps} rows of {args.key} from {args.lo:g} to {args.hi:g})")
    return EXIT_OK


def _write_outputs(args, case_path: Path, out, result) -> None:
    """Stage results.json, the scan tables, the scan plots and the report (no verdict here)."""
    from resonance.report.scan_tables import write_scan_tables  # noqa: PLC0415

    out.write_text("results.json", json.dumps(result.data, indent=2, sort_keys=False) + "\n")
    write_scan_tables(result.study, out)
    if args.no_plots:
        return
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg")  # the one place a backend is chosen: files, no screen (the edge)
    if not args.no_report:
        from resonance.report.document import write_report  # noqa: PLC0415

        write_report(result, out)  # the scan figures are among the report's files
        return
    from resonance.report.document import write_scan_figures  # noqa: PLC0415

    write_scan_figures(result, out)


def _tell(args, data: dict, out, written, rec_text) -> None:
    """The terminal summary: findings (the bank's and the site's), proposals, files."""
    from resonance.report.results_json import CAUTION  # noqa: PLC0415
    from resonance.report.text import site_lines  # noqa: PLC0415

    if not args.quiet:
        _say(_summary(data))
        _say("")
    for f in data["findings"]:
        if f.get("cause") != "site":
            _say(f"FINDING: {f['message']}")
    # the site's own distortion: one line per quantity, bank off against the bank's steps in (the
    # per-step site findings are in results.json and the report)
    n_site = sum(1 for f in data["findings"] if f.get("cause") == "site")
    for b in data["banks"]:
        for line in site_lines(b):
            _say(line)
    if n_site:
        rule = data["settings"].get("site_findings", "report")
        _say(f"{n_site} finding{'s' if n_site != 1 else ''} of the site's own distortion (not made worse by the bank): "
             + ("they fail the check ([study] site_findings = \"fail\")" if rule == "fail" else
                "reported, not failing the check ([study] site_findings = \"report\")"))
    for b in data["banks"]:
        t = b.get("time_in_step")
        if t:
            _say(f"\nbank {b['name']}: from {t['source']}: achieved PF {t['pf_achieved_period']:.3f}, "
                 f"{t['switching_ops_per_day']:g} operations/day, time in steps with findings "
                 f"{t['time_with_findings_pct']:.1f} %; time in step 0..{len(t['fraction']) - 1}: "
                 + ", ".join(f"{100 * f:.1f} %" for f in t["fraction"]))
        d = b.get("detuning") or {}
        rec = d.get("recommended")
        if rec:
            band = rec.get("tuning_band") or (float("nan"), float("nan"))
            _say(f"\nbank {b['name']}: proposed detuned design: tuning order {rec['tuning_order']:.2f} "
                 f"(p = {rec['detuning_pct']:g} %; {band[0]:.2f}-{band[1]:.2f} at the tolerance limits), "
                 f"capacitors rated {rec['rated_kv']:g} kV, nameplate stages "
                 f"{', '.join(f'{q:g}' for q in rec['steps_kvar'])} kvar")
        if d.get("reason") and (rec or d.get("status") == "proposed"):
            _say(f"  {d['reason']}")
        sw = b.get("switching") or {}
        if sw and not args.quiet:
            _say(f"\nbank {b['name']}: switching: governing step {sw['governing_step']} "
                 f"{sw['governing_peak_a'] / 1000:.2f} kA peak at {sw['governing_hz']:.0f} Hz; largest voltage step "
                 f"{max(s_.get('voltage_step_pct') or 0.0 for s_ in b['steps']):.2f} %")
        sp = b.get("switching_proposal") or {}
        if sp.get("status") in ("proposed", "none_found"):
            _say(f"bank {b['name']}: switching proposal: {sp.get('reason', '')}")
        flt = b.get("filter")
        if flt:
            from resonance.design.sizing_harmonics import ordinal  # noqa: PLC0415

            lead = (f"the recommended design: {flt.get('chosen_why', '')}" if flt.get("chosen") else
                    "offered beside the detuned design, which already clears every PCC current finding")
            _say(f"bank {b['name']}: proposed tuned filter ({lead}): " + "; ".join(
                     f"{x['name']} tuned at {x['tuning_order']:.2f} for the {ordinal(x['target_order'])}, {x['kvar']:.0f} kvar "
                     f"at the bus, capacitors {x['capacitor_rated_kv']:g} kV, reactor {x['reactor_mh']:.4g} mH"
                     for x in flt["branches"]))
            _say(f"  {flt['reason']}")
        elif b.get("filter_search", {}).get("candidates"):
            _say(f"bank {b['name']}: tuned filter: {b.get('filter_reason', '')}")
    if rec_text is not None:
        _say(f"\nthe recommended design as a case file, ready to check: {out.path / 'recommended_case.toml'}")
        if "recommended_detuned_case.toml" in {p.name for p in written}:
            _say(f"the detuned design (protects the bank, leaves the site's PCC current): "
                 f"{out.path / 'recommended_detuned_case.toml'}")
        if "recommended_filter_case.toml" in {p.name for p in written}:
            _say(f"the tuned filter offered beside it: {out.path / 'recommended_filter_case.toml'}")
    for w in data["warnings"]:
        if not args.quiet:
            _say(f"note: {w}")
    if not args.quiet:
        _say(f"\nwrote {len(written)} files to {out.path.resolve()}: " + ", ".join(p.name for p in written))
        _say(f"\n{CAUTION}")


def _recommended_case(case_path: Path, out, det: dict, switching: dict | None = None,
                      filters: dict | None = None) -> str | None:
    """Stage ``recommended_case.toml`` when a bank has a recommended design; returns its text.

    A proposed filter is the chosen design of its bank (it clears the PCC current the detuned design
    leaves); the detuned design of such a bank goes to ``recommended_detuned_case.toml``."""
    from resonance.design.recommend import RECOMMENDED_CASE, recommended_case_text  # noqa: PLC0415

    case_text = case_path.read_text(encoding="utf-8-sig")
    designs = {name: d["recommended"]["bank_table"] for name, d in det.items()
               if (d or {}).get("recommended")}
    # a switching proposal goes in where the bank keeps its design and the re-check passes it whole
    for name, d in (switching or {}).items():
        if name not in designs and d.get("recommended") and (d.get("re_check") or {}).get("bank_passes"):
            designs[name] = d["bank_table"]
    detuned_only = dict(designs)
    offered = {}
    for name, fp in (filters or {}).items():
        f = (fp or {}).get("filter")
        if f:
            first, *rest = f["bank_tables"]
            d = {**first, "extra_banks": rest, "drop_keys": tuple(f.get("drop_keys", ()))}
            if f.get("chosen"):
                designs[name] = d
            else:
                offered[name] = d
    if any(n in detuned_only and designs[n] is not detuned_only[n] for n in designs):
        alt = recommended_case_text(case_text, case_path, out.path, detuned_only, tool=f"resonance {__version__}")
        if alt is not None:
            out.write_text("recommended_detuned_case.toml", alt)
    if offered:  # filters offered beside a detuned design that already clears the PCC current
        alt = recommended_case_text(case_text, case_path, out.path, {**designs, **offered},
                                    tool=f"resonance {__version__}")
        if alt is not None:
            out.write_text("recommended_filter_case.toml", alt)
    text = recommended_case_text(case_text, case_path, out.path, designs, tool=f"resonance {__version__}")
    if text is not None:
        out.write_text(RECOMMENDED_CASE, text)
    elif designs:
        _say(f"warning: {case_path}: the recommended design could not be written into a copy of this case "
             f"file (a layout the editor does not follow); enter it by hand from results.json", sys.stderr)
    return text


def _workers() -> int | None:
    """Processes from ``RESONANCE_WORKERS`` (a whole number >= 1), else None (the default).

    The same variable sets the sparse engine's pool (:func:`resonance.harmonics.engine.default_workers`);
    here a bad value is named in a warning.
    """
    env = os.environ.get("RESONANCE_WORKERS", "").strip()
    if env.isdigit() and int(env) >= 1:
        return int(env)
    if env:
        _say(f"warning: RESONANCE_WORKERS={env!r} is not a whole number >= 1; the default is used",
             sys.stderr)
    return None


def _safe(name: str) -> str:
    from resonance.names import file_stem  # noqa: PLC0415

    return file_stem(name)


def _defect(exc: BaseException, command: str | None) -> int:
    """Report an unexpected error: one line here, the traceback in the output folder."""
    case = _STATE.get("case") or "(no case read yet)"
    tb = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
    where = None
    out_arg = _STATE.get("out_arg")
    if out_arg:
        try:
            d = Path(out_arg)
            d.mkdir(parents=True, exist_ok=True)
            where = d / DEFECT_FILE
            where.write_text(f"resonance {__version__}, command {command}, case {case}\n\n{tb}", encoding="utf-8")
        except OSError:
            where = None
    if where is None:
        import tempfile  # noqa: PLC0415

        try:
            fd, name = tempfile.mkstemp(prefix="resonance-defect-", suffix=".txt")
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(tb)
            where = Path(name)
        except OSError:
            where = None
    _say(f"error: {case}: a defect of the tool, not of your input ({type(exc).__name__}); "
         f"the traceback is in {where or 'no file (the output folder is not writable)'}; "
         "please report it with the case file", sys.stderr)
    return EXIT_DEFECT


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    Parameters
    ----------
    argv : list of str, optional
        Arguments (``sys.argv[1:]`` when None).

    Returns
    -------
    int
        0 all checks pass, 1 a finding beyond a limit, 2 bad input or usage, 3 a
        defect of the tool, 128 + n ended by signal n.
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as e:
        return int(e.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    _STATE.update(case=None, out=None, out_arg=getattr(args, "out", None))
    old = _install_signals()
    try:
        if args.command == "check":
            if not str(args.out).strip():
                _say("error: --out: an empty output folder name; give the folder for the results", sys.stderr)
                return EXIT_INPUT
            return _check(args)
        return int(args.run(args))
    except InputError as e:
        for p in e.problems:
            _say(f"error: {p}", sys.stderr)
        return EXIT_INPUT
    except ModelError as e:
        _say(f"error: the network model cannot be solved: {e}", sys.stderr)
        return EXIT_INPUT
    except ResonanceError as e:
        _say(f"error: {e}", sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        _say("interrupted (SIGINT); no partial outputs were left", sys.stderr)
        return 128 + int(signal.SIGINT)
    except _Terminated as e:
        _say(f"terminated ({signal.Signals(e.signum).name}); no partial outputs were left", sys.stderr)
        return 128 + e.signum
    except BrokenPipeError:  # the reader of our output went away (`resonance check ... | head`):
        # the outputs were committed before the summary was printed; end as a shell's SIGPIPE would
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        except (OSError, ValueError):  # pragma: no cover - no real stdout
            pass
        return 128 + int(signal.SIGPIPE)
    except OSError as e:
        if e.errno in _WRITE_ERRNOS:  # the machine, not the input nor the tool: say which folder
            _say(f"error: {getattr(args, 'out', '') or '.'}: --out: cannot write the outputs: "
                 f"{e.strerror or e}; no partial outputs were left", sys.stderr)
            return EXIT_INPUT
        return _defect(e, args.command)
    except Exception as e:  # noqa: BLE001 - a defect of the tool: exit 3, traceback to a file
        return _defect(e, args.command)
    finally:
        for sig, h in old.items():
            try:
                signal.signal(sig, h if h is not None else signal.SIG_DFL)
            except (ValueError, OSError):  # pragma: no cover
                pass

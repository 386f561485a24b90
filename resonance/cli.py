"""Command-line interface: ``resonance check CASE --out DIR``.

Exit status: 0 every check passes; 1 a finding beyond a limit; 2 bad input or usage.
Heavy libraries (pandapower, matplotlib) are imported only inside the commands.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import sys
from pathlib import Path

from . import __version__
from .errors import InputError, ModelError, ResonanceError

__all__ = ["main", "build_parser"]

EXIT_OK, EXIT_FINDING, EXIT_INPUT = 0, 1, 2


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
        epilog="Exit status: 0 all checks pass, 1 a finding beyond a limit, 2 bad input or usage.")
    p.add_argument("--version", action="version", version=f"resonance {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    c = sub.add_parser("check", help="run the full check of a case file and write results",
                       description="Run the full check of a case file: scans, penetration, duty, limits, detuning.")
    c.add_argument("case", metavar="CASE", help="case file (TOML)")
    c.add_argument("--out", metavar="DIR", required=True, help="output directory (created if missing)")
    c.add_argument("--no-plots", action="store_true", help="write results.json and tables only")
    c.add_argument("--no-report", action="store_true", help="skip the PDF report")
    c.add_argument("--quiet", action="store_true", help="print only findings")
    try:
        from .sizing_cli import add_parser as _add_size  # noqa: PLC0415
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
        for s in b["steps"]:
            ok = (s["resonance_ok"] and s.get("duty_ok", True) and s.get("pcc_voltage_ok", True)
                  and s.get("pcc_current_ok", True))
            near = f"{s['nearest_order']:>4}" if s["nearest_order"] is not None else "   -"
            lines.append(f"  {s['step']:>4} {s['kvar_nameplate']:>7.0f} {_fmt(s['h_estimate'], 2, 6)} "
                         f"{_fmt(s['h_scan'], 2, 7)} {near} {_fmt(s['margin_pct'], 1, 8)} "
                         f"{_fmt(s.get('thd_v_pct'), 2, 8)} {_fmt(s.get('thd_v_pcc_pct'), 2, 8)} "
                         f"{_fmt(s.get('cap_v_rms_pct'), 1, 6)} {_fmt(s.get('cap_v_peak_pct'), 1, 5)} "
                         f"{_fmt(s.get('cap_i_rms_pct'), 1, 6)} {_fmt(s.get('cap_kvar_pct'), 1, 6)} "
                         f"{_fmt(s.get('tdd_pct'), 1, 5)}  {'ok' if ok else 'FINDING'}")
    return "\n".join(lines)


def _check(args) -> int:
    from .case import load_case  # noqa: PLC0415
    from .study import run_study  # noqa: PLC0415
    from .results import to_dict, CAUTION  # noqa: PLC0415
    from .outputs import OutputDir  # noqa: PLC0415

    case_path = Path(args.case)
    case = load_case(case_path)
    for hint in case.hints:  # likely mistakes in a valid case: reported, not fatal
        print(f"warning: {hint}", file=sys.stderr)
    protect = [case_path]
    if case.network is not None:
        protect.append(Path(case.base_dir) / case.network.pandapower_json)
    out = OutputDir(args.out, protect=protect)
    workers = _workers()  # processes for the shared jobs and the report (None: the default)
    ahead = None
    try:
        from . import netmodel  # noqa: PLC0415
        from .detuning import accept_variant, propose_detuning  # noqa: PLC0415
        from .demand import time_in_step  # noqa: PLC0415
        from .study import with_cross_check  # noqa: PLC0415
        from .tables import write_scan_tables  # noqa: PLC0415

        model = netmodel.build_model(case)
        res = run_study(case, model=model, cross_check=False)
        # the IEC 60909 cross-check and the detuning re-checks the proposal will most likely
        # run, started in a worker now that the model's memo (load flows, bank-off scans) is
        # filled, while this process writes the tables and then takes jobs too
        ahead = _run_ahead(case, model, workers)
        tis = time_in_step(case, res)
        write_scan_tables(res, out)
        for key, r in ahead.finish().values():  # each job gives (memo key, value)
            if key[0] == "study":
                accept_variant(model, key, r)
            else:
                model.cache.setdefault(key, r)
        res = with_cross_check(res, case, model)  # from the memo where a job ran it
        det = propose_detuning(case, model, res)
        _attach_detuned_scans(case, res, det)
        sha = hashlib.sha256(case_path.read_bytes()).hexdigest()
        extra = {("bank", name): {"detuning": d} for name, d in det.items()}
        for name, t in tis.items():
            extra.setdefault(("bank", name), {})["time_in_step"] = t
            steps = {k: {"time_fraction": round(f, 5), "hours_in_step": round(hh, 3)}
                     for k, (f, hh) in enumerate(zip(t["fraction"], t["hours"])) if k > 0}
            extra[(name, "nominal")] = steps
        data = to_dict(res, sha, extra=extra)
        out.write_text("results.json", json.dumps(data, indent=2, sort_keys=False) + "\n")
        if not args.no_plots:
            from .plots import scan_figure  # noqa: PLC0415
            import matplotlib.pyplot as plt  # noqa: PLC0415

            for sc in res.scans:
                if sc.scenario != "nominal":
                    continue
                weak = res.scans_for(sc.bank.name, "weak")
                fig = scan_figure(res, sc)
                safe = _safe(sc.bank.name)
                fig.savefig(out.file(f"scan_{safe}.png"))
                fig.savefig(out.file(f"scan_{safe}.svg"))
                plt.close(fig)
                if weak is not None:
                    fig = scan_figure(res, weak)
                    fig.savefig(out.file(f"scan_{safe}_weak.png"))
                    plt.close(fig)
        if not (args.no_plots or args.no_report):
            from .report import write_report  # noqa: PLC0415

            write_report(res, data, out, workers=workers)
        written = out.commit()
    except BaseException:
        out.discard()
        raise
    finally:
        if ahead is not None:
            ahead.close()
    if not args.quiet:
        print(_summary(data))
        print()
    for f in data["findings"]:
        print(f"FINDING: {f['message']}")
    for b in data["banks"]:
        t = b.get("time_in_step")
        if t:
            print(f"\nbank {b['name']}: from {t['source']}: achieved PF {t['pf_achieved_period']:.3f}, "
                  f"{t['switching_ops_per_day']:g} operations/day, time in steps with findings "
                  f"{t['time_with_findings_pct']:.1f} %; time in step 0..{len(t['fraction']) - 1}: "
                  + ", ".join(f"{100 * f:.1f} %" for f in t["fraction"]))
        d = b.get("detuning") or {}
        rec = d.get("recommended")
        if rec:
            print(f"\nbank {b['name']}: proposed detuned design: tuning order {rec['tuning_order']:.2f} "
                  f"(p = {rec['detuning_pct']:g} %), capacitors rated {rec['rated_kv']:g} kV, nameplate stages "
                  f"{', '.join(f'{q:g}' for q in rec['steps_kvar'])} kvar")
        if d.get("reason") and (rec or d.get("status") == "proposed"):
            print(f"  {d['reason']}")
    for w in data["warnings"]:
        if not args.quiet:
            print(f"note: {w}")
    if not args.quiet:
        print(f"\nwrote {len(written)} files to {out.path.resolve()}: " + ", ".join(p.name for p in written))
        print(f"\n{CAUTION}")
    return EXIT_OK if data["passed"] else EXIT_FINDING


def _run_ahead(case, model, workers: int | None = None):
    """The IEC 60909 cross-check and the detuning re-checks the proposal will most likely
    need, as shared jobs (:class:`resonance.parallel.SharedJobs`) that start in a forked worker.

    Each job returns ``(memo key, value)``.  The results are the same wherever the jobs run
    (deterministic and memoised, see :func:`resonance.detuning.run_variant`); a worker only
    saves time.  ``workers=1`` (``RESONANCE_WORKERS=1``) keeps everything in this process.
    """
    import functools  # noqa: PLC0415

    from .detuning import planned_variants, variant_job  # noqa: PLC0415
    from .parallel import SharedJobs  # noqa: PLC0415
    from .study import iec60909_job  # noqa: PLC0415

    jobs = [functools.partial(iec60909_job, case, model)]
    jobs += [functools.partial(variant_job, v, model) for v in planned_variants(case, model)]
    return SharedJobs(jobs, workers)


def _workers() -> int | None:
    """Processes from ``RESONANCE_WORKERS`` (a whole number >= 1), else None (the default)."""
    env = os.environ.get("RESONANCE_WORKERS", "").strip()
    if env.isdigit() and int(env) >= 1:
        return int(env)
    if env:
        print(f"warning: RESONANCE_WORKERS={env!r} is not a whole number >= 1; the default is used",
              file=sys.stderr)
    return None


def _attach_detuned_scans(case, res, det: dict) -> None:
    """Scan of each recommended detuned design, for the report's side-by-side plot."""
    from .detuning import run_variant  # noqa: PLC0415

    for name, d in det.items():
        rec = (d or {}).get("recommended")
        if not rec:
            continue
        banks = [b.model_copy(update={"detuning_pct": rec["detuning_pct"], "rated_kv": rec["rated_kv"],
                                      "steps_kvar": list(rec["steps_kvar"]),
                                      "reactor_q": rec.get("reactor_q", b.reactor_q)}) if b.name == name else b
                 for b in case.bank]
        variant = case.model_copy(update={"bank": banks})
        sc = run_variant(variant, res.extras["model"]).scans_for(name)
        if sc is not None:
            res.extras[f"detuned_scan_{name}"] = sc


def _without_full_collections(fn, *a):
    """``fn(*a)`` with the garbage collector's full (oldest-generation) collections held off.

    The imported libraries leave a few hundred thousand objects on the heap; a full
    collection over them costs about 0.3 s and would fall at a random point of the check.
    Young collections still run (they free the short-lived cycles); the thresholds are
    restored afterwards, so a long-lived caller collects as before (Python documentation,
    ``gc.set_threshold``).
    """
    import gc  # noqa: PLC0415

    t0, t1, t2 = gc.get_threshold()
    gc.set_threshold(t0, t1, max(t2, 1 << 30))
    try:
        return fn(*a)
    finally:
        gc.set_threshold(t0, t1, t2)


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    Parameters
    ----------
    argv : list of str, optional
        Arguments (``sys.argv[1:]`` when None).

    Returns
    -------
    int
        0 all checks pass, 1 a finding beyond a limit, 2 bad input or usage.
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as e:
        return int(e.code or 0)
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    try:
        if args.command == "check":
            return _without_full_collections(_check, args)
        return int(args.run(args))
    except InputError as e:
        for p in e.problems:
            print(f"error: {p}", file=sys.stderr)
        return EXIT_INPUT
    except ModelError as e:
        print(f"error: the network model cannot be solved: {e}", file=sys.stderr)
        return EXIT_INPUT
    except ResonanceError as e:
        print(f"error: {e}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("interrupted; no partial outputs were left", file=sys.stderr)
        return 130

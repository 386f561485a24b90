"""Command ``resonance size CSV --bus BUS [--case CASE] [--rated-kv KV] --out DIR``: bank from demand.

Reads interval demand (:mod:`resonance.inputs.sizing_io`), sizes the bank and
simulates its controller (:mod:`resonance.design.sizing`,
:mod:`resonance.design.controller`), with ``--case`` screens the plan's stage
states against the case's harmonics (:mod:`resonance.design.sizing_harmonics`),
and writes into ``DIR``:

* ``sizing.json``: inputs, settings, demand, plan, harmonics, recommendation,
  controller figures (with and without the target offset) and the
  time-in-step table;
* ``bank_block.toml``: the ``[[bank]]`` table of the recommended design to
  paste into a case file (only when a bank is needed);
* ``demand_pf.png`` and ``time_in_step.png`` (unless ``--no-plots``).

Outputs are staged under temporary names and moved into place when all are
written; the input CSV and the case file are never overwritten.  Exit status: 0 done, 2 bad input.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import sys

import numpy as np

from resonance.errors import InputError
from resonance.outputs import OutputDir
from resonance.design.sizing import (STAGE_LAYOUTS, STANDARD_STAGES_KVAR, output_factor, power_factor,
                                     required_kvar_series, size_bank)
from resonance.design.controller import (BillingRule, ControllerResult, ControllerSettings, monthly_cost,
                                         simulate_controller, time_in_step_table)
from resonance.design.sizing_harmonics import PlanHarmonics, case_bank_on_bus, case_harmonics, ordinal, screen_plan
from resonance.inputs.sizing_io import IntervalData, bank_block_toml, read_intervals

__all__ = ["add_parser", "run"]

_CMD = "<command line>"
_PCTS = (1, 5, 25, 50, 75, 95, 99)
#: Bank name of the block when neither --name nor the case gives one (the case-file naming style).
DEFAULT_NAME = "PFC-1"
#: Default --target-offset: the controller aims 0.02 above the target power factor (project choice:
#: with the default half-stage dead band the controller otherwise rests short of the target about
#: half the time; on the bundled demo data 0.02 meets the target almost always without more
#: operations; smaller offsets leave part of that gap, larger ones over-compensate).
DEFAULT_TARGET_OFFSET = 0.02


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Add the ``size`` subcommand to an argparse subparsers object.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        From ``ArgumentParser.add_subparsers()``.

    Returns
    -------
    argparse.ArgumentParser
        The new subparser (its default ``run`` is :func:`run`).
    """
    p = subparsers.add_parser(
        "size", help="size a bank and its stages from interval demand (CSV)",
        description="Size a capacitor bank and its stage plan from 15-minute (or other) interval demand, "
                    "simulate its stage controller and write sizing.json, a [[bank]] block and plots. "
                    "With --case, screen every stage state's resonance against the case's harmonics and "
                    "propose a detuned bank where a plain one would resonate near a significant order. "
                    "CSV columns: timestamp (ISO 8601), kw, and kvar (lagging positive) or pf (lagging).")
    p.add_argument("csv", metavar="CSV", help="interval demand: timestamp,kw,kvar or timestamp,kw,pf")
    p.add_argument("--target-pf", type=float, default=0.95, help="target power factor, lagging (default 0.95)")
    p.add_argument("--stages", default=",".join(f"{s:g}" for s in STANDARD_STAGES_KVAR),
                   help="stage sizes on offer, nameplate kvar at --rated-kv, comma separated "
                        "(default %(default)s)")
    p.add_argument("--bus", required=True, help="bus name for the [[bank]] block (with --case: a bus of the case)")
    p.add_argument("--case", metavar="CASE", default=None,
                   help="case file (TOML): its supply, transformers and harmonic sources decide whether a plain "
                        "bank is credible; its bank on --bus gives the name, rated and bus kV defaults")
    p.add_argument("--rated-kv", type=float, default=None,
                   help="capacitor rated voltage [kV] (required without --case; default: the case's bank on --bus, "
                        "else the bus voltage)")
    p.add_argument("--bus-kv", type=float, default=None,
                   help="bus voltage [kV] (default: the case's bus voltage, else --rated-kv)")
    p.add_argument("--detuning-pct", type=float, default=None,
                   help="detuning p = XL/XC [%%] for a detuned bank (given: the block keeps this design)")
    p.add_argument("--name", default=None,
                   help=f"bank name for the [[bank]] block (default: the case's bank on --bus, else {DEFAULT_NAME})")
    p.add_argument("--percentile", type=float, default=95.0,
                   help="percentile of the required kvar used as design demand (default 95)")
    p.add_argument("--max-stages", type=int, default=8, help="most stages allowed (default 8)")
    p.add_argument("--layout", choices=STAGE_LAYOUTS, default="equal",
                   help="equal stages (default) or binary-weighted 1:2:4")
    p.add_argument("--switch-in", type=float, default=0.5,
                   help="controller: switch in above this deficit, fraction of the smallest stage (default 0.5)")
    p.add_argument("--switch-out", type=float, default=0.5,
                   help="controller: switch out above this surplus, fraction of the smallest stage (default 0.5)")
    p.add_argument("--min-time-min", type=float, default=5.0,
                   help="controller: least time between switching operations [min] (default 5)")
    p.add_argument("--target-offset", type=float, default=DEFAULT_TARGET_OFFSET,
                   help="controller: aim this much above --target-pf (power factor, 0 = aim at the target; "
                        "default %(default)g); results are given with and without it")
    b = p.add_argument_group("billing (optional; your tariff's figures, none is built in)")
    b.add_argument("--kvarh-rate", type=float, default=None,
                   help="price per kvarh above --tan-threshold x kWh [currency/kvarh]")
    b.add_argument("--tan-threshold", type=float, default=0.0, help="free kvarh per kWh [kvar/kW] (default 0)")
    b.add_argument("--demand-rate", type=float, default=None,
                   help="demand charge per kW of peak, scaled up by --pf-threshold / pf [currency/kW]")
    b.add_argument("--pf-threshold", type=float, default=0.9, help="pf below which the demand charge grows (default 0.9)")
    p.add_argument("--out", metavar="DIR", required=True, help="output directory (created if missing)")
    p.add_argument("--no-plots", action="store_true", help="write sizing.json and bank_block.toml only")
    p.set_defaults(run=run)
    return p


def _stage_list(text: str) -> tuple[float, ...]:
    out = []
    for part in text.split(","):
        try:
            x = float(part)
        except ValueError:
            raise InputError.single(_CMD, "--stages", f"{part.strip()!r} is not a number; give e.g. 25,50,100") from None
        if not (np.isfinite(x) and x > 0):
            raise InputError.single(_CMD, "--stages", f"{part.strip()} kvar: every stage size must be > 0")
        out.append(x)
    return tuple(out)


def _check_args(args) -> None:
    if not (0.0 < args.target_pf <= 1.0):
        raise InputError.single(_CMD, "--target-pf", f"{args.target_pf:g} must be in (0, 1]")
    if not (np.isfinite(args.target_offset) and 0.0 <= args.target_offset <= 0.2):
        raise InputError.single(_CMD, "--target-offset", f"{args.target_offset:g} must be from 0 to 0.2 "
                                "(a power factor offset, e.g. 0.02 aims at 0.97 for a 0.95 target)")
    if args.case is None and args.rated_kv is None:
        raise InputError.single(_CMD, "--rated-kv", "is required without --case (the capacitor rated voltage in kV, "
                                "e.g. 0.48)")
    if args.case is not None and not str(args.case).strip():
        raise InputError.single(_CMD, "--case", "an empty file name; give the case file (TOML)")
    for opt, v in (("--rated-kv", args.rated_kv), ("--bus-kv", args.bus_kv)):
        if v is not None and not (np.isfinite(v) and 0.05 < v <= 800.0):
            hint = f" (give kV, e.g. {v / 1000:g})" if np.isfinite(v) and 800 < v <= 800_000 else ""
            raise InputError.single(_CMD, opt, f"{v:g} kV must be between 0.05 and 800 kV{hint}")
    if args.max_stages < 1:
        raise InputError.single(_CMD, "--max-stages", f"{args.max_stages} must be >= 1")
    if not (0.0 < args.percentile <= 100.0):
        raise InputError.single(_CMD, "--percentile", f"{args.percentile:g} must be in (0, 100]")
    for opt, v in (("--switch-in", args.switch_in), ("--switch-out", args.switch_out),
                   ("--min-time-min", args.min_time_min), ("--tan-threshold", args.tan_threshold),
                   ("--kvarh-rate", args.kvarh_rate), ("--demand-rate", args.demand_rate)):
        if v is None:
            continue
        if not (np.isfinite(v) and v >= 0):
            raise InputError.single(_CMD, opt, f"{v:g} must be >= 0")
    if not (0.0 < args.pf_threshold <= 1.0):
        raise InputError.single(_CMD, "--pf-threshold", f"{args.pf_threshold:g} must be in (0, 1]")


def _billing(args, data: IntervalData, ctrl: ControllerResult) -> list[dict]:
    rules = []
    if args.kvarh_rate is not None:
        rules.append(BillingRule("kvarh_over_tan", kvarh_rate=args.kvarh_rate, tan_phi_threshold=args.tan_threshold))
    if args.demand_rate is not None:
        rules.append(BillingRule("pf_demand_adjustment", demand_rate_per_kw=args.demand_rate,
                                 pf_threshold=args.pf_threshold))
    out = []
    for r in rules:
        before = monthly_cost(data.p_kw, data.q_kvar, data.dt_h, r)
        after = monthly_cost(data.p_kw, ctrl.q_net_kvar, data.dt_h, r)
        out.append({"rule": dataclasses.asdict(r), "before": dataclasses.asdict(before),
                    "after": dataclasses.asdict(after), "monthly_saving": before.charge - after.charge})
    return out


def _stats(x: np.ndarray) -> dict:
    return {"min": float(x.min()), "mean": float(x.mean()), "max": float(x.max())}


def _pcts(x: np.ndarray) -> dict:
    return {f"p{q}": float(v) for q, v in zip(_PCTS, np.percentile(x, _PCTS))}


def _ctrl_summary(ctrl: ControllerResult) -> dict:
    return {"aim_pf": ctrl.aim_pf, "fraction_at_or_above_target": ctrl.fraction_at_or_above_target,
            "operations_per_day": ctrl.operations_per_day, "operations_total": ctrl.operations_total,
            "max_operations_24h": ctrl.max_operations_24h, "fraction_leading": ctrl.fraction_leading,
            "pf_median": float(np.median(ctrl.pf))}


def _harmonics_json(args, ph: PlanHarmonics | None, not_considered: str) -> tuple[dict, dict]:
    """The ``harmonics`` and ``recommendation`` keys of sizing.json."""
    if ph is None:
        return ({"considered": False, "reason": not_considered},
                {"kind": "unchecked", "reason": "the harmonics were not considered; whether a plain bank is possible "
                                                "depends on them: check the bank with the case (resonance size "
                                                "--case CASE, or resonance check)"})
    c = ph.case
    harm = {"considered": True, "case": args.case, "bus": c.bus, "bus_kv": c.bus_kv, "s_sc_kva": c.s_sc_kva,
            "s_sc_weak_kva": c.s_sc_weak_kva, "sources": list(c.sources), "significant_orders": list(c.orders),
            "significant_injection_pct": c.settings.significant_injection_pct,
            "significant_background_pct": c.settings.significant_background_pct, "margin_pct": c.margin_pct,
            "method": "h = sqrt(S_sc / Q_k) per stage state, Q_k the net kvar in service at the bus "
                      "(IEEE Std 1036-2010 cl. 6.2; screening estimate, resonance check decides)",
            "plain_ok": ph.plain_ok,
            "states": [{"step": s.step, "kvar": s.q_kvar, "h_estimate": s.h_estimate,
                        "h_estimate_weak": s.h_estimate_weak, "nearest_significant_order": s.nearest_order,
                        "margin_pct": s.margin_pct, "margin_supply": s.margin_supply, "ok": s.ok}
                       for s in ph.states]}
    r = ph.recommendation
    rec = {"kind": r.kind, "reason": r.reason}
    if r.kind == "detuned":
        rec.update({"tuning_order": r.tuning_order, "detuning_pct": r.detuning_pct, "rated_kv": r.rated_kv,
                    "stages_kvar": list(r.stages_kvar), "stages_net_kvar": list(r.stages_net_kvar),
                    "h_detuned": list(r.h_detuned), "construction": r.construction})
    rec["confirm"] = "run resonance check on the case with the bank block to confirm the design"
    return harm, rec


def _report(args, data: IntervalData, bus_kv: float, stages_offered, need, plan, settings, ctrl: ControllerResult,
            ctrl0: ControllerResult, block: str | None, design: dict, harm: dict, rec: dict) -> dict:
    kwh = float(data.p_kw.sum() * data.dt_h)
    return {
        "input": {"file": data.file, "intervals": data.n, "interval_min": data.dt_h * 60.0,
                  "first": data.timestamps[0].isoformat(), "last": data.timestamps[-1].isoformat(),
                  "hours": data.span_h, "missing_intervals": data.missing_intervals, "reactive_from": data.q_source,
                  "case": args.case},
        "settings": {"target_pf": args.target_pf, "stages_offered_kvar": list(stages_offered),
                     "percentile": args.percentile, "max_stages": args.max_stages, "layout": args.layout,
                     "bus": args.bus, "bus_kv": bus_kv, "rated_kv": args.rated_kv, "detuning_pct": args.detuning_pct,
                     "name": args.name,
                     "controller": {"target_pf": settings.target_pf, "switch_in_fraction": settings.switch_in_fraction,
                                    "switch_out_fraction": settings.switch_out_fraction,
                                    "min_time_between_ops_min": settings.min_time_between_ops_min,
                                    "target_offset_pf": settings.target_offset_pf, "aim_pf": settings.aim_pf}},
        "demand": {"p_kw": _stats(data.p_kw), "q_kvar": _stats(data.q_kvar), "kwh": kwh,
                   "pf_before": {**_pcts(power_factor(data.p_kw, data.q_kvar)),
                                 "period": float(power_factor(kwh, np.maximum(data.q_kvar, 0).sum() * data.dt_h))},
                   "kvar_required": {**_pcts(need), "max": float(need.max())}},
        "plan": {"stages_kvar": list(plan.stages_kvar), "stages_net_kvar": list(plan.stages_net_kvar),
                 "total_kvar": plan.total_kvar, "total_net_kvar": plan.total_net_kvar,
                 "steps_net_kvar": list(plan.steps_net_kvar), "q_design_kvar": plan.q_design_kvar,
                 "q_max_kvar": plan.q_max_kvar, "shortfall_kvar": plan.shortfall_kvar, "coverage": plan.coverage,
                 "output_factor": plan.output_factor,
                 # capacitor fundamental voltage U_C = U / (1 - p) against its rating [%] (REFERENCES.md
                 # "Detuned banks"); above 100 % the capacitors run over their rated voltage
                 "v_cap_pct_of_rated": 100.0 * bus_kv / (1.0 - (args.detuning_pct or 0.0) / 100.0) / args.rated_kv},
        "harmonics": harm,
        "recommendation": rec,
        "controller": {"pf_after": {**_pcts(ctrl.pf),
                                    "period": float(power_factor(kwh, np.maximum(ctrl.q_net_kvar, 0).sum() * data.dt_h))},
                       "fraction_at_or_above_target": ctrl.fraction_at_or_above_target,
                       "fraction_leading": ctrl.fraction_leading, "operations_total": ctrl.operations_total,
                       "operations_per_day": ctrl.operations_per_day, "max_operations_24h": ctrl.max_operations_24h,
                       "target_offset_pf": settings.target_offset_pf, "aim_pf": ctrl.aim_pf,
                       "with_offset": _ctrl_summary(ctrl), "without_offset": _ctrl_summary(ctrl0)},
        "time_in_step": time_in_step_table(ctrl, design["stages_kvar"]),
        "billing": _billing(args, data, ctrl),
        "bank_design": design,
        "bank_block": block,
    }


# --------------------------------------------------------------------------- plots (edge only)
_INK, _GRID, _P, _Q, _C, _AFTER = "#22303c", "#dde2e7", "#2f6f8f", "#c0792b", "#6a8f3a", "#2f6f8f"


def _axes_look(ax) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(colors=_INK, labelsize=8)
    ax.grid(True, color=_GRID, linewidth=0.6)
    ax.set_axisbelow(True)


def _plot_demand_pf(path, data: IntervalData, ctrl: ControllerResult, target_pf: float, title: str) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: PLC0415 - lazy: edge only
    from matplotlib.figure import Figure  # noqa: PLC0415

    fig = Figure(figsize=(8.0, 5.2), dpi=120)
    FigureCanvasAgg(fig)
    ax1, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": (3, 2)})
    t = list(data.timestamps)
    ax1.plot(t, data.p_kw, color=_P, lw=0.8, label="real power [kW]")
    ax1.plot(t, data.q_kvar, color=_Q, lw=0.8, label="reactive power, measured [kvar]")
    ax1.step(t, data.q_kvar - ctrl.q_net_kvar, where="post", color=_C, lw=0.9, label="bank in service [kvar]")
    ax1.set_ylabel("power [kW], [kvar]", color=_INK, fontsize=9)
    ax1.legend(fontsize=7, frameon=False, ncol=3, loc="upper left", bbox_to_anchor=(0, 1.13))
    ax2.plot(t, power_factor(data.p_kw, data.q_kvar), color=_Q, lw=0.8, label="before")
    ax2.plot(t, ctrl.pf, color=_AFTER, lw=0.8, label="with the bank (simulated)")
    ax2.axhline(target_pf, color=_INK, lw=0.8, ls=(0, (4, 3)), label=f"target {target_pf:g}")
    ax2.set_ylabel("power factor [-]", color=_INK, fontsize=9)
    ax2.set_xlabel("time", color=_INK, fontsize=9)
    ax2.legend(fontsize=7, frameon=False, ncol=3, loc="center left", bbox_to_anchor=(0.0, 0.62))
    for ax in (ax1, ax2):
        _axes_look(ax)
    fig.autofmt_xdate()
    fig.suptitle(title, x=0.01, ha="left", color=_INK, fontsize=10)
    fig.tight_layout(rect=(0, 0, 1, 0.97))
    fig.savefig(path, format="png")


def _plot_time_in_step(path, ctrl: ControllerResult, steps_kvar, title: str) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: PLC0415 - lazy: edge only
    from matplotlib.figure import Figure  # noqa: PLC0415

    fig = Figure(figsize=(6.4, 3.8), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.subplots()
    hours = ctrl.time_in_step_hours
    frac = ctrl.time_in_step_fraction
    k = np.arange(hours.size)
    cum = np.concatenate(([0.0], np.cumsum(steps_kvar)))
    ax.bar(k, hours, color=_C, width=0.7)
    for x, h, f in zip(k, hours, frac):
        ax.annotate(f"{100 * f:.1f} %", (x, h), xytext=(0, 2), textcoords="offset points",
                    ha="center", fontsize=7, color=_INK)
    ax.set_xticks(k, [f"{i}\n{c:g}" for i, c in zip(k, cum)], fontsize=7)
    ax.set_xlabel("step k (stages 1..k in service) / nameplate kvar in service [kvar]", color=_INK, fontsize=9)
    ax.set_ylabel("time at step [h]", color=_INK, fontsize=9)
    _axes_look(ax)
    ax.set_title(title, loc="left", color=_INK, fontsize=10)
    fig.tight_layout()
    fig.savefig(path, format="png")


# --------------------------------------------------------------------------- run
def _resolve(args):
    """Options with the case's defaults filled in, and the case's harmonics (None without --case)."""
    a = argparse.Namespace(**vars(args))
    if args.case is None:
        a.name = a.name or DEFAULT_NAME
        a.bus_kv = a.bus_kv if a.bus_kv is not None else a.rated_kv
        return a, None, "no --case given"
    from resonance.inputs.case_load import load_case  # noqa: PLC0415 - only with --case

    case = load_case(args.case)
    ch = case_harmonics(case, args.bus)
    bank = case_bank_on_bus(case, args.bus)
    a.name = a.name or (bank.name if bank is not None else DEFAULT_NAME)
    if a.bus_kv is None:
        a.bus_kv = ch.bus_kv if ch.bus_kv is not None else (a.rated_kv or (bank.rated_kv if bank else None))
    if a.rated_kv is None:
        a.rated_kv = bank.rated_kv if bank is not None else a.bus_kv
    if a.rated_kv is None or a.bus_kv is None:
        raise InputError.single(_CMD, "--rated-kv", f"the case {args.case} gives no voltage for bus {args.bus!r}; "
                                "give --rated-kv (and --bus-kv) in kV")
    _check_args(a)
    return a, (ch if ch.s_sc_kva is not None else None), ch.note


def _block_design(args, plan, ph: PlanHarmonics | None) -> dict:
    """The design the block is written for: the options', the recommended detuned one, or the plain plan."""
    if args.detuning_pct is not None or ph is None or ph.recommendation.kind == "plain" \
            or ph.recommendation.detuning_pct is None:
        source = "options (--detuning-pct)" if args.detuning_pct is not None else "plan"
        if ph is not None and ph.recommendation.kind == "detuned" and args.detuning_pct is None:
            source = "plan (no detuned design fits: see recommendation)"
        elif ph is not None and args.detuning_pct is None:
            source = "recommendation (plain)"
        return {"source": source, "rated_kv": args.rated_kv, "detuning_pct": args.detuning_pct,
                "stages_kvar": list(plan.stages_kvar), "stages_net_kvar": list(plan.stages_net_kvar)}
    r = ph.recommendation
    return {"source": "recommendation (detuned)", "rated_kv": r.rated_kv, "detuning_pct": r.detuning_pct,
            "stages_kvar": list(r.stages_kvar), "stages_net_kvar": list(r.stages_net_kvar)}


def _say_harmonics(args, ph: PlanHarmonics | None, note: str) -> None:
    if ph is None:
        print(f"harmonics not considered ({note}): whether a plain bank is possible depends on the plant's harmonic "
              "sources; check the bank with the case (--case CASE, or resonance check)")
        return
    c, r = ph.case, ph.recommendation
    hs = " ".join(f"{s.h_estimate:.2f}" for s in ph.states)
    print(f"harmonics ({args.case}, bus {c.bus}): S_sc {c.s_sc_kva:,.0f} kVA, significant orders "
          f"{', '.join(map(str, c.orders)) or 'none'}, margin {c.margin_pct:g} %; h = sqrt(S_sc/Q) at steps "
          f"1..{len(ph.states)}: {hs}"
          + (f"; weak supply S_sc {c.s_sc_weak_kva:,.0f} kVA: " + " ".join(f"{s.h_estimate_weak:.2f}" for s in ph.states)
             if c.s_sc_weak_kva else ""))
    if r.kind == "plain":
        print(f"recommendation: plain bank is credible ({r.reason})")
    elif r.detuning_pct is None:
        print(f"recommendation: a plain bank is NOT credible; {r.reason}")
    else:
        bad = ", ".join(f"step {s.step} h {s.h_nearest:.2f}{' (weak supply)' if s.margin_supply == 'weak' else ''} "
                        f"near the {ordinal(s.nearest_order)}" for s in ph.states if not s.ok)
        print(f"recommendation: a plain bank is NOT credible ({bad}); detuned bank p = {r.detuning_pct:.2f} % "
              f"(n = {r.tuning_order:g}), capacitors rated {r.rated_kv:g} kV, stages "
              f"[{', '.join(f'{q:g}' for q in r.stages_kvar)}] kvar nameplate "
              f"({', '.join(f'{q:.1f}' for q in r.stages_net_kvar)} kvar net at {c.bus_kv:g} kV)")
        if r.construction is not None:
            k = r.construction
            print(f"  construction: {k['connection'].replace('_', ' ')}, {k['series_groups']} series group(s) of "
                  f"{k['unit_kv']:g} kV units per string, {k['units_total']} units in all"
                  + ("; " + r.reason.rsplit("; ", 1)[1] if "smallest construction" in r.reason else ""))


def run(args) -> int:
    """Run ``size`` for parsed arguments.

    Parameters
    ----------
    args : argparse.Namespace
        From the parser built with :func:`add_parser`.

    Returns
    -------
    int
        0 done; 2 bad input (the problems are printed to stderr, no traceback).
    """
    try:
        _check_args(args)
        stages = _stage_list(args.stages)
        args, ch, note = _resolve(args)
        data = read_intervals(args.csv)
        bus_kv = args.bus_kv
        try:
            f = output_factor(bus_kv, args.rated_kv, args.detuning_pct)
        except InputError:
            raise InputError.single(_CMD, "--detuning-pct", f"{args.detuning_pct:g} % must be in [0, 50)") from None
        need = required_kvar_series(data.p_kw, data.q_kvar, args.target_pf)
        plan = size_bank(need, stages, args.percentile, args.max_stages, args.layout, f)
        ph = screen_plan(ch, plan.stages_net_kvar, bus_kv) if (ch is not None and plan.n_stages) else None
        harm, rec = _harmonics_json(args, ph, note if ch is None else "no bank needed")
        design = _block_design(args, plan, ph)
        settings = ControllerSettings(args.target_pf, args.switch_in, args.switch_out, args.min_time_min,
                                      target_offset_pf=args.target_offset)
        net = design["stages_net_kvar"]
        ctrl = simulate_controller(data.p_kw, data.q_kvar, data.dt_h, net, settings)
        ctrl0 = simulate_controller(data.p_kw, data.q_kvar, data.dt_h, net,
                                    dataclasses.replace(settings, target_offset_pf=0.0))
        block = None
        if plan.n_stages:
            kind = "plain" if design["detuning_pct"] is None else f"detuned p = {design['detuning_pct']:g} %"
            why = {"unchecked": "harmonics not checked", "plain": "harmonics screened with the case: plain is "
                   "credible", "detuned": "harmonics screened with the case: a plain bank would resonate near a "
                   "significant order"}[rec["kind"]]
            block = bank_block_toml(args.name, args.bus, design["rated_kv"], design["stages_kvar"],
                                    design["detuning_pct"],
                                    comment=f"proposed by `resonance size` from {data.file}: design demand "
                                            f"{plan.q_design_kvar:.0f} kvar (p{args.percentile:g}) at pf "
                                            f"{args.target_pf:g}\n{kind} ({why}); confirm with `resonance check`")
        report = _report(args, data, bus_kv, stages, need, plan, settings, ctrl, ctrl0, block, design, harm, rec)
        out = OutputDir(args.out, protect=[args.csv] + ([args.case] if args.case else []))
        try:
            out.write_text("sizing.json", json.dumps(report, indent=2) + "\n")
            if block is not None:
                out.write_text("bank_block.toml", block)
            if not args.no_plots:
                _plot_demand_pf(out.file("demand_pf.png"), data, ctrl, args.target_pf,
                                f"Demand and power factor, {data.n} intervals of {data.dt_h * 60:g} min")
                _plot_time_in_step(out.file("time_in_step.png"), ctrl, design["stages_kvar"],
                                   f"Time in each step, bank {args.name} ({plan.n_stages} x "
                                   f"{'/'.join(f'{s:g}' for s in sorted(set(design['stages_kvar'])))} kvar)")
            written = out.commit()
        except BaseException:
            out.discard()
            raise
    except InputError as e:
        for p in e.problems:
            print(f"error: {p}", file=sys.stderr)
        return 2
    tis = report["time_in_step"]
    print(f"design demand {plan.q_design_kvar:.1f} kvar (p{args.percentile:g} of the required kvar); "
          f"bank {plan.total_kvar:g} kvar nameplate = {plan.n_stages} stages "
          f"[{', '.join(f'{s:g}' for s in plan.stages_kvar)}], {plan.total_net_kvar:.1f} kvar net at {bus_kv:g} kV")
    if plan.shortfall_kvar > 0:
        print(f"note: {args.max_stages} stages of the largest size fall {plan.shortfall_kvar:.1f} kvar short of the "
              "design demand")
    if plan.n_stages:
        _say_harmonics(args, ph, note)
    print(f"simulated, aiming at pf {settings.aim_pf:g} (target {args.target_pf:g} + offset {args.target_offset:g}): "
          f"pf >= {args.target_pf:g} for {100 * ctrl.fraction_at_or_above_target:.1f} % of the time, "
          f"{ctrl.operations_per_day:.1f} operations per day; without the offset "
          f"{100 * ctrl0.fraction_at_or_above_target:.1f} % of the time, {ctrl0.operations_per_day:.1f} operations "
          f"per day; median pf {float(np.median(ctrl.pf)):.3f}; time in step k=0..n [%]: "
          + " ".join(f"{100 * x:.1f}" for x in tis["fraction"]))
    for bill in report["billing"]:
        print(f"billing ({bill['rule']['kind']}): {bill['before']['charge']:.2f} -> {bill['after']['charge']:.2f} "
              "per month (currency of the rates given)")
    print(f"bank block: {args.name}, {design['source']}")
    for pth in written:
        print(f"wrote {pth}")
    return 0

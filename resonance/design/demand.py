"""Time in each bank step from metered demand (edge layer: reads the case's interval CSV).

The stage controller of :mod:`resonance.design.sizing` is replayed against the interval
data with the bank's own stages (net output at the bus), so each step's
findings can be weighted by how often the plant sits in that step.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from resonance.assessment.verdict import bank_findings
from resonance.errors import InputError, InputProblem

__all__ = ["time_in_step"]


def _in_case_terms(err: InputError, case_file: str, given: str, path: Path) -> InputError:
    """The CSV's problems restated as problems of the case field that names the CSV.

    Parameters
    ----------
    err : InputError
        Problems found in the interval CSV (file, line and column).
    case_file : str
        The case file [unitless].
    given : str
        ``demand.intervals_csv`` as written in the case [unitless].
    path : Path
        Where the CSV was looked for (relative paths resolve against the case's folder).

    Returns
    -------
    InputError
        One problem per CSV problem, each naming the case file and ``demand.intervals_csv``,
        then the CSV (as given, and where it was looked for when that differs), its line or
        column and the problem.
    """
    where = given if str(path) == given else f"{given} ({path})"
    probs = []
    for p in err.problems:
        inner = f"{p.field}: {p.problem}" if p.field else p.problem
        probs.append(InputProblem(case_file, "demand.intervals_csv", f"{where}: {inner}"))
    return InputError(probs)


def time_in_step(case, res) -> dict:
    """Time-in-step figures per bank when the case has a ``[demand]`` table.

    Parameters
    ----------
    case : Case
        Validated case.
    res : StudyResult
        Study of the case (for the banks' net step outputs and findings).

    Returns
    -------
    dict
        Bank name -> ``{"source", "steps_kvar", "fraction", "hours", "total_hours",
        "switching_ops_per_day", "pf_achieved_period", "time_with_findings_pct"}``;
        empty without ``[demand]``.

    Raises
    ------
    InputError
        The CSV is missing or bad (line and column named), or the bank is unknown.
    """
    dm = getattr(case, "demand", None)
    if dm is None:
        return {}
    from resonance.design.controller import ControllerSettings, simulate_controller, time_in_step_table  # noqa: PLC0415
    from resonance.inputs.sizing_io import read_intervals  # noqa: PLC0415

    name = dm.bank or case.bank[0].name
    sc = res.scans_for(name)
    if sc is None:
        raise InputError.single(case.source_file, "demand.bank",
                                f"no bank named {name!r} (banks: {', '.join(b.name for b in case.bank)})")
    path = Path(dm.intervals_csv)
    if not path.is_absolute():
        path = Path(case.base_dir) / path
    try:
        data = read_intervals(path)
    except InputError as e:
        raise _in_case_terms(e, case.source_file, str(dm.intervals_csv), path) from None
    # net kvar each stage adds at the bus (nominal voltage)
    cum = np.array([s.kvar_nominal for s in sc.steps])
    stages = np.diff(np.concatenate([[0.0], cum]))
    settings = ControllerSettings(target_pf=dm.target_pf, switch_in_fraction=dm.switch_in_fraction,
                                  switch_out_fraction=dm.switch_out_fraction,
                                  min_time_between_ops_min=dm.min_time_between_ops_min)
    r = simulate_controller(data.p_kw, data.q_kvar, data.dt_h, list(stages), settings)
    table = time_in_step_table(r, list(sc.bank.stages_kvar))
    bad_steps = {f.step for f in bank_findings(res.findings, name) if f.scenario in ("nominal", "all")}
    frac = table["fraction"]
    p = np.asarray(data.p_kw, float)
    q_net = np.asarray(r.q_net_kvar, float)  # drawn from the supply after compensation
    pf_period = float(p.sum() / np.hypot(p.sum(), q_net.sum())) if p.sum() > 0 else 1.0
    return {name: {
        "source": str(dm.intervals_csv),
        **table,
        "switching_ops_per_day": round(float(r.operations_per_day), 2),
        "pf_at_or_above_target_pct": round(100.0 * float(r.fraction_at_or_above_target), 2),
        "pf_achieved_period": round(pf_period, 4),
        "time_with_findings_pct": round(100.0 * sum(frac[k] for k in bad_steps if k < len(frac)), 3),
    }}

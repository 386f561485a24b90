"""The report's section on the proposed (detuned) design: its own proof, read from its re-check.

Edge layer.  The recommended design of a bank was accepted by running the one assessment on
the variant case (:func:`resonance.design.detuning.recommended_studies`); the pipeline keeps
that re-check as a :class:`~resonance.pipeline.CheckResult` (``CheckResult.rechecks``).  This
module turns it into the same step tables, duty chart and scans the plain bank gets, plus the
detuning reactor's current per stage, so the reviewer sees the numbers the claim rests on: the
numbers ``resonance check`` prints for ``recommended_case.toml``.  Nothing is recomputed here.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from resonance.assessment.envelope import scenario_words
from resonance.report import figures as rf
from resonance.report.plots import STYLE, _style_axes
from resonance.report.tables import (DUTY_KEYS, Column, Table, _f, _has_duty, _limits, _num, _s, _safe,
                                     _summary_table, overview_table)

__all__ = ["proposed_tables", "proposed_bank", "draw_reactor", "REACTOR_FIG_SIZE"]

#: stand-alone size of the reactor current figure [in]
REACTOR_FIG_SIZE = (7.4, 2.3)


def proposed_bank(recheck, name: str) -> dict | None:
    """The bank entry (results.json layout) of bank ``name`` in its re-check, or None."""
    if recheck is None:
        return None
    return next((b for b in recheck.data["banks"] if b["name"] == name), None)


def _scenario_steps(bank: dict):
    yield "nominal", bank["steps"]
    for scen, body in (bank.get("scenarios") or {}).items():
        if body.get("steps"):
            yield scen, body["steps"]


def proposed_tables(recheck, name: str) -> list[Table]:
    """Per-step tables of the proposed design of bank ``name``, every scenario of its re-check.

    Parameters
    ----------
    recheck : CheckResult
        The re-check of the recommended design (``CheckResult.rechecks[name]``).
    name : str
        Bank name [unitless].

    Returns
    -------
    list of Table
        ``table_proposed_scenarios_<bank>.csv`` (one row per scenario), ``table_proposed_<bank>.csv``
        (nominal supply) and ``table_proposed_<bank>_<scenario>.csv``.
    """
    b = proposed_bank(recheck, name)
    if b is None:
        return []
    res, data = recheck.study, recheck.data
    out = []
    if b.get("scenarios"):
        out.append(overview_table(res, data, b, f"table_proposed_scenarios_{_safe(name)}.csv",
                                  f"Proposed design of bank {name}: every scenario of the operating envelope"))
    for i, (scen, steps) in enumerate(_scenario_steps(b)):
        t = _summary_table(b, steps, scen, _limits(res, data, b, scen), data.get("findings", ()), note=(i == 0))
        suffix = "" if scen == "nominal" else f"_{scen}"
        out.append(replace(t, name=f"table_proposed_{_safe(name)}{suffix}.csv",
                           title=f"Proposed design of bank {name}: every step, {scenario_words(scen)}"))
    return out


def reactor_rows(rec: dict) -> tuple:
    """(stage, L [mH], I_rms max [A], I_lin [A]) per stage of a recommended design [mH], [A]."""
    ls = rec.get("l_mh_per_stage") or []
    irms = rec.get("reactor_i_rms_max_a") or []
    ilin = rec.get("reactor_i_lin_a") or []
    n = max(len(ls), len(irms), len(ilin))
    pick = (lambda v, k: v[k] if k < len(v) else None)
    return tuple((k + 1, pick(ls, k), pick(irms, k), pick(ilin, k)) for k in range(n))


def reactor_table(rec: dict, name: str) -> Table | None:
    """The detuning reactor of every stage: inductance, highest rms current, linearity current."""
    rows = reactor_rows(rec)
    if not rows:
        return None
    bad = frozenset((i, 2) for i, r in enumerate(rows) if None not in (r[2], r[3]) and r[2] > r[3])
    return Table(f"table_proposed_reactor_{_safe(name)}.csv", f"Proposed design of bank {name}: detuning reactors",
                 (Column("stage", "-", _s), Column("inductance", "mH", _f(4)),
                  Column("highest rms current\n(every step, every scenario)", "A", _f(1)),
                  Column("linearity current", "A", _f(1))), rows,
                 "The reactor must stay linear up to its linearity current (the current with the design's harmonics "
                 "at their highest); red: the highest rms current exceeds it.", bad)


def duty_values(bank: dict, scen: str = "nominal") -> tuple[list, dict]:
    """Step numbers and per-quantity duty values of one scenario [unitless], [% of rating]."""
    steps = dict(_scenario_steps(bank)).get(scen) or []
    return [x["step"] for x in steps], {q: [_num(x.get(k)) for x in steps] for q, k in DUTY_KEYS.items()}


def has_duty(bank: dict) -> bool:
    """Whether the bank entry carries capacitor duty figures."""
    return _has_duty(bank)


def draw_reactor(ax, rows: tuple, title: str) -> None:
    """Highest rms current of each stage's reactor against its linearity current.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes.
    rows : tuple
        :func:`reactor_rows` output: (stage, L [mH], I_rms max [A], I_lin [A]).
    title : str
        Axes title [unitless].
    """
    _style_axes(ax)
    k = np.asarray([r[0] for r in rows], int)
    i_rms = np.asarray([np.nan if r[2] is None else r[2] for r in rows], float)
    i_lin = np.asarray([np.nan if r[3] is None else r[3] for r in rows], float)
    bad = np.nan_to_num(i_rms - i_lin, nan=-1.0) > 0
    ax.bar(k, np.nan_to_num(i_rms), width=0.6, color=np.where(bad, STYLE["injected"], STYLE["ink"]),
           label="highest rms current, every step and scenario")
    ax.plot(k, i_lin, ls="none", marker="_", ms=16, mew=2.0, color=STYLE["limit"], label="linearity current")
    top = np.nanmax(np.concatenate([i_rms, i_lin])) if rows else 1.0
    ax.set_ylim(0.0, 1.35 * top if np.isfinite(top) and top > 0 else 1.0)
    ax.set_xticks(k)
    ax.set_xlabel("stage [-]", color=STYLE["ink"])
    ax.set_ylabel("reactor current [A]", color=STYLE["ink"])
    ax.set_title(title, color=STYLE["ink"], loc="left", fontsize=9)
    ax.legend(frameon=False, loc="upper left", ncols=2)
    rf.plain_numbers(ax)

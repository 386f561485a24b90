"""The switching section of the report: a table per bank and a small waveform figure of the
governing step (edge layer, matplotlib Agg; reads the typed result and results.json only).

The table holds the nominal scenario's steps as ``results.json`` has them; the figure draws
the inrush waveform the assessment computed for the governing step
(:attr:`resonance.assessment.switching.BankSwitching.wave_a`) beside the peak of every step
against the limits, so nothing here recomputes the physics.
"""

from __future__ import annotations

import numpy as np

from resonance.assessment.envelope import scenario_words
from resonance.assessment.study import StudyResult
from resonance.report.plots import STYLE, _style_axes
from resonance.report.tables import Column, Table, _f, _s, _safe

__all__ = ["switching_table", "draw_switching", "switching_words", "SWITCH_FIG_SIZE"]

#: stand-alone size of the switching figure [in]
SWITCH_FIG_SIZE = (7.4, 2.9)

_CELL = {"inrush_peak": 4, "inrush_capacitor": 4, "inrush_frequency": 6, "voltage_step": 8,
         "energising_overvoltage": 9}


def _edge():
    from matplotlib import patheffects as pe  # noqa: PLC0415

    return [pe.Stroke(linewidth=3.0, foreground=STYLE["ink"]), pe.Normal()]


def switching_table(bank: dict, findings=()) -> Table | None:
    """Per-step switching figures of one bank, nominal scenario (None without switching keys)."""
    steps = bank.get("steps") or []
    if not steps or "inrush_peak_a" not in steps[0]:
        return None
    rows, bad = [], set()
    for i, s in enumerate(steps):
        rows.append((s["step"], s.get("inrush_kind", "").replace("_", "-"), s.get("inrush_c_eq_uf"),
                     s.get("inrush_loop_uh"), _ka(s.get("inrush_peak_a")), _ka(s.get("inrush_peak_damped_a")),
                     s.get("inrush_hz"), s.get("inrush_over_rated"), s.get("voltage_step_pct"),
                     s.get("cap_energising_overvoltage_pu")))
        for f in findings:
            if f.get("bank") == bank["name"] and f.get("step") == s["step"] and f.get("scenario") == "nominal" \
                    and f.get("check") in _CELL:
                bad.add((i, _CELL[f["check"]]))
    sw = bank.get("switching") or {}
    cols = (Column("step"), Column("switching", "", _s, "left"), Column("C charged", "uF", _f(1)),
            Column("L loop", "uH", _f(2)), Column("peak", "kA", _f(2)), Column("damped", "kA", _f(2)),
            Column("frequency", "Hz", _f(0)), Column("peak / rated", "x", _f(1)), Column("voltage step", "%", _f(2)),
            Column("cap. transient", "pu crest", _f(2)))
    dev = sw.get("device_inrush_peak_a")
    note = ("Step 1 is energised from the supply alone (isolated); each later step with the earlier ones in service "
            "(back-to-back), closing at the voltage crest. Peak: undamped (an upper bound); damped: with the "
            "resistance of the supply and the reactors. Limits: switching device "
            + (f"{dev / 1000:g} kA peak" if dev else "not given")
            + (f" and {sw['device_inrush_hz']:g} Hz" if sw.get("device_inrush_hz") else "")
            + f" ({sw.get('device_source', '-')}); capacitor units 100 x rated current peak; voltage step "
            f"{_s(sw.get('voltage_step_limit_pct'))} %; capacitor transient {_s(sw.get('capacitor_overvoltage_limit_pu'))} "
            f"x rated crest. Stage connections: {_s(sw.get('stage_connection_uh'))} uH "
            f"({sw.get('stage_connection_source', '-')}).")
    return Table(f"table_switching_{_safe(bank['name'])}.csv",
                 f"Bank {bank['name']}: switching each step, nominal supply", cols, tuple(rows), note, frozenset(bad))


def _ka(x):
    return None if x is None else float(x) / 1000.0


def switching_words(res: StudyResult, bank: dict) -> list[str]:
    """Plain sentences for the section: the governing step over every scenario and the proposal."""
    out = []
    every = [x for x in res.switching if x.bank == bank["name"]]
    if every:
        gov = max(every, key=lambda x: x.governing().peak_a)
        g = gov.governing()
        out.append(f"Governing step over every scenario: step {g.step} ({scenario_words(gov.scenario)}), "
                   f"{g.peak_a / 1000:.2f} kA peak at {g.hz:.0f} Hz ({g.peak_a / g.rated_a:.0f} x the stage's rated "
                   f"current), loop inductance {g.l_loop_uh:.1f} uH.")
    sp = bank.get("switching_proposal") or {}
    if sp.get("status") == "proposed":
        out.append(f"Proposal: {sp.get('reason')}")
    elif sp.get("status") == "none_found":
        out.append(f"No switching remedy found: {sp.get('reason')}")
    for m in sp.get("not_addressed") or []:
        out.append(f"Not cleared by a series element: {m}")
    return out


def draw_switching(ax_wave, ax_bar, bs, title: str) -> None:
    """The governing step's inrush waveform and every step's peak against the limits.

    Parameters
    ----------
    ax_wave, ax_bar : matplotlib.axes.Axes
        Target axes (waveform, bars).
    bs : resonance.assessment.switching.BankSwitching
        Switching figures of one bank in one scenario (waveform included).
    title : str
        Title of the waveform panel.
    """
    g = bs.governing()
    for ax in (ax_wave, ax_bar):
        _style_axes(ax)
    ax_wave.plot(bs.wave_ms, bs.wave_a / 1000.0, color=STYLE["ink"], lw=0.9, label=f"step {g.step} current")
    lims = [(bs.device.peak_a, "device", "--"), (bs.cap_peak_limit_a[g.step - 1], "capacitors", ":")]
    for val, lab, ls in lims:
        if val:
            for sgn in (1.0, -1.0):
                ax_wave.axhline(sgn * val / 1000.0, color=STYLE["limit"], lw=1.4, ls=ls, path_effects=_edge(),
                                label=f"{lab} limit {val / 1000:.3g} kA" if sgn > 0 else None)
    ax_wave.set_xlabel("time after closing [ms]", color=STYLE["ink"])
    ax_wave.set_ylabel("inrush current [kA]", color=STYLE["ink"])
    ax_wave.set_title(title, color=STYLE["ink"], loc="left", fontsize=8)
    ax_wave.legend(frameon=False, loc="upper right", fontsize=6.0)
    k = np.array([s.step for s in bs.steps])
    pk = np.array([s.peak_a for s in bs.steps]) / 1000.0
    lim = np.array([min(x for x in (bs.device.peak_a, c) if x) for c in bs.cap_peak_limit_a]) / 1000.0
    over = pk > lim
    ax_bar.bar(k, pk, width=0.65, color=np.where(over, STYLE["injected"], STYLE["ink"]),
               hatch=None, edgecolor="white")
    for j in np.nonzero(over)[0]:  # readable in grey print: failing bars are hatched too
        ax_bar.bar(k[j], pk[j], width=0.65, color="none", edgecolor="white", hatch="///", lw=0)
    ax_bar.step(np.r_[k - 0.5, k[-1] + 0.5], np.r_[lim, lim[-1]], where="post", color=STYLE["limit"], lw=1.6,
                ls="--", label="lower of the limits", zorder=4, path_effects=_edge())
    ax_bar.set_xticks(k)
    ax_bar.set_xlabel("step [-]", color=STYLE["ink"])
    ax_bar.set_ylabel("peak [kA]", color=STYLE["ink"])
    ax_bar.set_ylim(0.0, 1.3 * max(float(np.max(pk)), float(np.max(lim))))
    ax_bar.set_title("peak inrush per step", color=STYLE["ink"], loc="left", fontsize=8)
    ax_bar.legend(frameon=False, loc="upper left", fontsize=6.0)

"""Proposals that bring a bank's switching within its limits, each proven by a re-check.

Above 1 kV the proposal is an inrush-limiting reactor in series with every stage (the usual MV
remedy); at 1 kV and below it is a switching device with pre-insertion (damping) resistors
(a capacitor-duty contactor), because a reactor of the few microhenries an LV stage needs tunes
the stage inside the harmonic range.  The value is found with the closed forms of
:mod:`resonance.assessment.switching` over every step and scenario, rounded up to a preferred
value, and then the case with it is run through the whole study again (the one assessment):
the proposal stands only when that re-check has no switching finding of the bank left.

References
----------
IEEE Std C37.99-2012 and IEEE Std C37.012-2005 (inrush-limiting reactors, pre-insertion
resistors for capacitor switching) [from memory for the remedies; the figures are the closed
forms of :mod:`resonance.standards.switching`].
"""

from __future__ import annotations

import math

import numpy as np

from resonance.assessment.envelope import scenario_words
from resonance.assessment.switching import SWITCHING_CHECKS, bank_switching, switching_findings

__all__ = ["propose_switching", "FIXABLE_CHECKS", "preferred_value"]

#: the switching findings a series inductance or a pre-insertion resistor can clear
FIXABLE_CHECKS = ("inrush_peak", "inrush_frequency", "inrush_capacitor")

#: preferred values per decade of the proposed reactor [uH] or resistor [ohm] (common practice)
_PREFERRED = (1.0, 1.2, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0)


def preferred_value(x: float) -> float:
    """The smallest preferred value (1-1.2-1.5-2-2.5-3-4-5-6-8 per decade) not below ``x`` [unit of x]."""
    if x <= 0:
        return 0.0
    k = math.floor(math.log10(x))
    for _ in range(2):
        for m in _PREFERRED:
            v = round(m * 10.0**k, 10)
            if v >= x * (1.0 - 1e-12):
                return v
        k += 1
    return round(10.0 ** (k + 1), 10)  # pragma: no cover - the loop always returns


def _fixable(bank, pairs, f_hz: float, limit_pct: float, **update) -> list:
    """The fixable switching findings of ``bank`` with ``update`` applied, over ``pairs`` (bm, scan)."""
    b = bank.model_copy(update=update)
    out = []
    for bm, sc in pairs:
        out += [f for f in switching_findings(bank_switching(b, bm, sc, f_hz, limit_pct)) if f.check in FIXABLE_CHECKS]
    return out


def _smallest(pred, lo: float, hi: float) -> float | None:
    """Smallest x in [lo, hi] with ``pred(x)`` true, for a predicate monotone in x (None if none)."""
    if not pred(hi):
        return None
    for _ in range(60):
        mid = math.sqrt(lo * hi) if lo > 0 else hi / 2.0
        if pred(mid):
            hi = mid
        else:
            lo = mid
        if hi - lo <= 1e-4 * hi:
            break
    return hi


def _governing_pair(bank, pairs, f_hz: float, limit_pct: float):
    """The (bank model, scan) pair whose switching has the highest inrush peak."""
    return max(pairs, key=lambda p: bank_switching(bank, p[0], p[1], f_hz, limit_pct).governing().peak_a)


def _series_orders(bank, bm, f_hz: float, l_uh: float, wire_uh) -> list[float]:
    """Series tuning order of every stage with its connection and a reactor of ``l_uh`` [unitless]."""
    from resonance.standards.switching import stage_capacitance_f  # noqa: PLC0415

    out = []
    for q, lw in zip(bm.stages_kvar, wire_uh):
        c = stage_capacitance_f(float(q), bm.rated_kv, f_hz)
        out.append(1.0 / (2.0 * math.pi * f_hz * math.sqrt((l_uh + lw) * 1e-6 * c)))
    return out


def propose_switching(case, model, result) -> dict:
    """Bank name -> switching proposal (plain data), for every bank with a switching finding.

    Parameters
    ----------
    case : resonance.inputs.case.Case
        The checked case.
    model : PlantModel
        Its plant model (the re-check runs on it).
    result : StudyResult
        The study of the case (its scans and findings).

    Returns
    -------
    dict
        Bank name -> ``status`` ("proposed", "none_found" or "not_needed"), ``measure``
        ("inrush_reactor" or "pre_insertion_resistor"), ``recommended``
        (``{"inrush_reactor_uh": uH}`` or ``{"pre_insertion_ohm": ohm}``) or None, ``reason``
        (plain words), ``re_check`` (``switching_cleared``, ``bank_passes``, ``remaining``
        messages, the governing step's ``peak_a`` [A] and ``hz`` [Hz]) and
        ``not_addressed`` (switching findings a series element cannot clear).

    Notes
    -----
    The reactor is the smallest preferred value that clears every fixable finding in every
    scenario by the closed forms; it is proposed only when every stage's series tuning with it
    stays above the study's ``h_max`` (the harmonic model does not carry the reactor, so a
    lower tuning would leave the harmonic results unproven).  The resistor is the preferred
    value, in 0.01-100 ohm, that gives the lowest worst ratio of peak to limit (the insertion
    peak falls and the bypass peak rises with R).
    """
    from resonance.assessment.verdict import bank_findings, bank_passes  # noqa: PLC0415
    from resonance.design.detuning import _variant, run_variant  # noqa: PLC0415

    f_hz = float(case.frequency_hz)
    lim = case.study.voltage_step_limit_pct
    out = {}
    for bank in case.bank:
        own = [f for f in bank_findings(result.findings, bank.name) if f.check in SWITCHING_CHECKS]
        fix = [f for f in own if f.check in FIXABLE_CHECKS]
        rest = sorted({f.message for f in own if f.check not in FIXABLE_CHECKS})
        if not own:
            continue
        pairs = [(sc.bank, sc) for sc in result.scans if sc.bank.name == bank.name]
        bm = pairs[0][0]
        entry = {"status": "none_found", "measure": None, "recommended": None, "reason": "", "re_check": None,
                 "not_addressed": rest}
        if not fix:
            entry["reason"] = ("the switching findings are not of inrush current (voltage step or overvoltage): "
                               "a smaller stage, a stiffer supply or controlled closing is needed")
            out[bank.name] = entry
            continue
        if bm.bus_kv > 1.0:
            entry["measure"] = "inrush_reactor"
            base = bank.inrush_reactor_uh or 0.0
            need = _smallest(lambda x: not _fixable(bank, pairs, f_hz, lim, inrush_reactor_uh=base + x), 0.0, 1e5)
            if need is None:
                entry["reason"] = "no inrush reactor up to 100 mH brings the inrush within the limits"
                out[bank.name] = entry
                continue
            value = preferred_value(base + need)
            from resonance.assessment.switching import loop_uh  # noqa: PLC0415

            h_sr = _series_orders(bank, bm, f_hz, value, loop_uh(bank, bm.bus_kv)[0])
            if min(h_sr) <= case.study.h_max:
                entry["reason"] = (f"an inrush reactor of {value:g} uH per stage would clear the inrush, but it tunes "
                                   f"a stage at h = {min(h_sr):.1f}, inside the studied range (h_max = "
                                   f"{case.study.h_max:g}); use a detuned design or a device with a higher rating")
                out[bank.name] = entry
                continue
            update = {"inrush_reactor_uh": value}
            words = (f"an inrush-limiting reactor of {value:g} uH in series with every stage (series tuning "
                     f"h = {min(h_sr):.0f} or higher, above the studied range)")
        else:
            entry["measure"] = "pre_insertion_resistor"
            def worst_of(r: float, among=None) -> float:
                b = bank.model_copy(update={"pre_insertion_ohm": r})
                worst = 0.0
                for pbm, sc in among or pairs:
                    bs = bank_switching(b, pbm, sc, f_hz, lim)
                    for s, cap in zip(bs.steps, bs.cap_peak_limit_a):
                        worst = max(worst, s.peak_a / cap, s.peak_a / bs.device.peak_a if bs.device.peak_a else 0.0)
                return worst

            # the insertion peak falls and the bypass peak rises with R: a coarse 1-2-5 sweep, then
            # every preferred value around the best of it
            # every preferred value around the best of it; searched in the governing scenario first
            # (the one with the highest inrush), then confirmed in all of them
            coarse = [m * 10.0**k for k in range(-2, 2) for m in (1.0, 2.0, 5.0)] + [100.0]
            best, best_worst = None, math.inf
            for among in ([_governing_pair(bank, pairs, f_hz, lim)], pairs):
                scores = {r: worst_of(r, among) for r in coarse}
                r0 = min(scores, key=scores.get)
                for r in {preferred_value(x) for x in np.geomspace(r0 / 2.5, r0 * 2.5, 12)} - set(scores):
                    scores[r] = worst_of(r, among)
                best = min(scores, key=lambda r: (scores[r], r))
                best_worst = worst_of(best)
                if best_worst <= 1.0:
                    break
            if best is None or best_worst > 1.0:
                entry["reason"] = ("no pre-insertion resistor in 0.01-100 ohm brings the inrush within the limits "
                                   f"(best {best:g} ohm reaches {100 * best_worst:.0f} % of the limit)")
                out[bank.name] = entry
                continue
            update = {"pre_insertion_ohm": best}
            words = (f"a capacitor-duty switching device with pre-insertion resistors of {best:g} ohm per phase "
                     f"(peak at {100 * best_worst:.0f} % of the governing limit)")
        variant = _variant(case, bank, **update)
        re = run_variant(variant, model)
        left = [f for f in bank_findings(re.findings, bank.name) if f.check in FIXABLE_CHECKS]
        gov = max((x for x in re.switching if x.bank == bank.name), key=lambda x: x.governing().peak_a)
        g = gov.governing()
        entry.update({
            "status": "proposed" if not left else "none_found", "recommended": update if not left else None,
            "re_check": {"switching_cleared": not left, "bank_passes": bank_passes(re.findings, bank.name),
                         "remaining": [f.message for f in left], "peak_a": g.peak_a, "hz": g.hz,
                         "step": g.step, "scenario": gov.scenario},
            "bank_table": {"name": bank.name, **update} if not left else None})
        entry["reason"] = (f"{words[0].upper()}{words[1:]} keeps every step within the switching limits in every "
                           f"scenario; re-checked: governing step {g.step} ({scenario_words(gov.scenario)}) "
                           f"{g.peak_a / 1000:.2f} kA "
                           f"peak at {g.hz:.0f} Hz" if not left else
                           f"{words} did not clear the re-check: " + "; ".join(f.message for f in left[:3]))
        out[bank.name] = entry
    return out

"""The one judge: whose a finding is, and whether a bank passes.

Numeric core (plain data in, plain data out).  The assessment (:mod:`resonance.assessment.assess`) makes
the findings; this module decides, for every consumer alike (the exit status, the detuning
proposal, the report), which of them are the bank's.  Nothing else may decide "pass".

A distortion finding (PCC voltage THD, an individual PCC harmonic voltage, TDD, an individual
PCC harmonic current, a bus distortion) is the **bank's** when the quantity is within its
limit with the bank off and beyond it with the step in, or beyond in both and the step makes
it worse by more than the tolerance below; it is the **site's** when it is already beyond the
limit with the bank off and the step does not make it worse.  Resonance, capacitor-duty,
detuning-tuning and switching findings are always the bank's.
"""

from __future__ import annotations

__all__ = ["CAUSE_REL_TOL", "CAUSE_ABS_TOL_PCT", "BANK_CHECKS", "SITE_RULES", "distortion_cause", "bank_findings",
           "site_findings", "bank_passes", "check_passes", "site_effect"]

#: how the site's own distortion counts (``[study] site_findings``): "report" (apart, not failing)
#: or "fail" (it fails the check as a bank finding does)
SITE_RULES = ("report", "fail")

#: A step "makes it worse" only when it raises the quantity by more than this fraction of its
#: bank-off value [unitless] ...
CAUSE_REL_TOL = 0.01
#: ... plus this many percentage points [%] (rounding of the reported figures).  Project
#: convention (a 1 % change is inside the accuracy of a screening model: common practice).
CAUSE_ABS_TOL_PCT = 0.01

#: checks whose findings are always the bank's (they exist only because of the bank)
BANK_CHECKS = ("resonance", "duty_v_rms", "duty_v_peak", "duty_i_rms", "duty_kvar", "detuning_tuning", "filter_tuning",
               "inrush_peak", "inrush_frequency", "inrush_capacitor", "voltage_step", "energising_overvoltage")


def distortion_cause(value_pct: float, value_off_pct: float, limit_pct: float) -> str:
    """Whose a distortion excess is: ``"bank"`` or ``"site"``.

    Parameters
    ----------
    value_pct : float
        The quantity with the step in service (beyond ``limit_pct``) [%].
    value_off_pct : float
        The same quantity, same scenario, with the bank (all of its steps) out of service [%].
    limit_pct : float
        Its limit [%].

    Returns
    -------
    str
        ``"site"`` when ``value_off_pct > limit_pct`` and
        ``value_pct <= value_off_pct * (1 + CAUSE_REL_TOL) + CAUSE_ABS_TOL_PCT``; else ``"bank"``
        [unitless].

    References
    ----------
    IEEE Std 519-2014, clause 5 (limits apply to the emission of the whole installation at the
    PCC); the split into the bank's and the site's share is a project convention.
    """
    if value_off_pct > limit_pct and value_pct <= value_off_pct * (1.0 + CAUSE_REL_TOL) + CAUSE_ABS_TOL_PCT:
        return "site"
    return "bank"


def _cause(f) -> str:
    return "bank" if f.check in BANK_CHECKS else f.cause


def bank_findings(findings, bank: str | None = None) -> list:
    """The :class:`~resonance.assessment.findings.Finding` objects that are the bank's (of one
    bank when ``bank`` is given) [unitless]."""
    return [f for f in findings if _cause(f) == "bank" and (bank is None or f.bank == bank)]


def site_findings(findings) -> list:
    """The findings that are the site's own distortion [unitless]."""
    return [f for f in findings if _cause(f) == "site"]


def bank_passes(findings, bank: str) -> bool:
    """True when ``bank`` has no finding of its own in any step and scenario [unitless]."""
    return not bank_findings(findings, bank)


def check_passes(findings, site_rule: str = "report") -> bool:
    """The check's verdict, the exit status 0: no bank finding, and with ``site_rule == "fail"``
    no site finding either [unitless]."""
    if site_rule not in SITE_RULES:
        raise ValueError(f"unknown site rule {site_rule!r}")
    return not bank_findings(findings) and (site_rule == "report" or not site_findings(findings))


def site_effect(value_off: float, values_in, limit: float) -> dict | None:
    """What a bank does to a distortion quantity that the site already has beyond its limit.

    Parameters
    ----------
    value_off : float
        The quantity with the bank (all of its steps) out of service [%].
    values_in : sequence of float
        The same quantity with each step in service [%].
    limit : float
        Its limit [%].

    Returns
    -------
    dict or None
        None when ``value_off`` is within the limit; else ``{"bank_off", "with_steps_min",
        "with_steps_max", "limit", "effect"}`` with ``effect`` ``"lowers"`` (every step below the
        bank-off value), ``"raises"`` (a step above it beyond the tolerance of
        :func:`distortion_cause`: that step's finding is the bank's) or ``"no_worse"`` [%, unitless].
    """
    if not value_off > limit:
        return None
    vals = [float(v) for v in values_in]
    if not vals:
        return None
    lo, hi = min(vals), max(vals)
    worse = any(distortion_cause(v, value_off, limit) == "bank" for v in vals)
    effect = "raises" if worse else ("lowers" if hi < value_off else "no_worse")
    return {"bank_off": float(value_off), "with_steps_min": lo, "with_steps_max": hi, "limit": float(limit),
            "effect": effect}

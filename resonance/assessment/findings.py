"""The typed finding: one limit broken by one bank step in one supply scenario.

Numeric core, plain data.  The assessment (:mod:`resonance.assessment.assess`), the study stage
(:mod:`resonance.assessment.study`) and the detuned-tuning rule
(:mod:`resonance.assessment.tuning`) make :class:`Finding` objects with unrounded values; the
verdict (:mod:`resonance.assessment.verdict`) decides whose each is; rounding and the JSON layout
happen only at the edge (:meth:`Finding.to_dict`, used by the ``results.json`` writer).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["CHECKS", "CAUSES", "Finding"]

#: every check a finding can name, with what it checks (the ``check`` key of results.json)
CHECKS = {
    "resonance": "parallel resonance of a step within the screening margin of an injected order",
    "duty_v_rms": "capacitor RMS voltage against its rating",
    "duty_v_peak": "capacitor peak voltage against its rating",
    "duty_i_rms": "capacitor RMS current against its rating",
    "duty_kvar": "capacitor reactive power against its rating",
    "pcc_thd_v": "voltage THD at the PCC",
    "pcc_v_individual": "an individual harmonic voltage at the PCC",
    "pcc_tdd": "current TDD at the PCC",
    "pcc_i_individual": "an individual harmonic current at the PCC",
    "detuning_tuning": "tuning order of a detuned bank against the lowest significant order",
    "filter_tuning": "tuning order of a single-tuned filter branch against the harmonic it absorbs",
    "bus_thd_v": "voltage THD at the bank's bus against the in-plant compatibility level",
    "bus_v_individual": "an individual harmonic voltage at the bank's bus against its in-plant level",
    "inrush_peak": "peak inrush current of switching a step against the switching device's rating",
    "inrush_frequency": "inrush frequency of switching a step against the switching device's rating",
    "inrush_capacitor": "peak inrush current against the capacitor units' transient current capability",
    "voltage_step": "bus voltage step on switching a stage in against its limit",
    "energising_overvoltage": "peak capacitor voltage on energising a step against the units' transient capability",
}

#: whose a finding is: the bank's (it causes or worsens it) or the site's own emission
CAUSES = ("bank", "site")


@dataclass(frozen=True)
class Finding:
    """One limit broken by one step of one bank in one supply scenario.

    Attributes
    ----------
    check : str
        What was checked, one of :data:`CHECKS` [unitless].
    bank : str
        Bank name [unitless].
    step : int
        Step number, 1 = first stage in [unitless].
    scenario : str
        Supply scenario: ``"nominal"``, ``"weak"`` or ``"all"`` (a property of the design that
        holds in every scenario) [unitless].
    value : float
        The quantity found, unrounded, in ``unit``.
    limit : float
        Its limit, in ``unit``.
    unit : str
        Unit of ``value`` and ``limit`` [unitless].
    source : str
        The published source of the limit (standard and clause or table), or "common practice".
    message : str
        One sentence for the engineer (rounded figures) [unitless].
    cause : str
        ``"bank"`` or ``"site"`` (:func:`resonance.assessment.verdict.distortion_cause`).
    value_bank_off : float or None
        The same quantity with the bank out of service (distortion checks), in ``unit``.
    order : int or None
        Harmonic order of an individual-order check [unitless].
    """

    check: str
    bank: str
    step: int
    scenario: str
    value: float
    limit: float
    unit: str
    source: str
    message: str
    cause: str = "bank"
    value_bank_off: float | None = None
    order: int | None = None

    def __post_init__(self):
        if self.check not in CHECKS:
            raise ValueError(f"unknown check {self.check!r}")
        if self.cause not in CAUSES:
            raise ValueError(f"unknown cause {self.cause!r}")

    def to_dict(self, digits: int = 4) -> dict:
        """The results.json layout of this finding (values rounded to ``digits`` decimals)."""
        out = {"bank": self.bank, "step": int(self.step), "scenario": self.scenario, "check": self.check,
               "value": _r(self.value, digits), "limit": _r(self.limit, digits), "unit": self.unit,
               "source": self.source, "cause": self.cause, "message": self.message}
        if self.order is not None:
            out["order"] = int(self.order)
        if self.value_bank_off is not None:
            out["value_bank_off"] = _r(self.value_bank_off, digits)
        return out


def _r(x, nd: int):
    if x is None:
        return None
    v = float(x)
    return round(v, nd) if math.isfinite(v) else None

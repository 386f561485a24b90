"""The check pipeline: one case in, one typed :class:`CheckResult` out.

Reads top to bottom: case -> plant model -> scans, penetration and duty, findings (the study
stage) -> time in step -> IEC 60909 cross-check -> design proposals (each re-checked by the
same study and judged by the same verdict) -> result.  No file is written here: the command
line (:mod:`resonance.cli`) is argv -> :func:`run_check` -> writers -> exit code, and a
notebook user calls :func:`run_check` and reads the result's tables.

References
----------
The methods are those of the stages: :mod:`resonance.assessment.study` (frequency scans,
harmonic penetration, IEEE Std 18 duty, IEEE Std 519 limits), :mod:`resonance.design.detuning`
(IEEE Std 1531 detuned banks), :mod:`resonance.design.filter_search` (IEEE Std 1531 tuned filters).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any, Mapping

from resonance.assessment.study import BankScan, StudyResult
from resonance.assessment.site import site_distortion
from resonance.assessment.verdict import bank_findings, check_passes, site_findings
from resonance.inputs.case import Case
from resonance.memo import Memo

__all__ = ["CheckResult", "run_check", "LIVE_NET_LABEL"]

#: what ``[network] pandapower_json`` reads when the net is given to :func:`run_check` in Python
LIVE_NET_LABEL = "(pandapower net given to run_check)"


@dataclass(frozen=True, eq=False)
class CheckResult:
    """Everything one check found: the study, the proposals, time in step (typed, unrounded).

    Attributes
    ----------
    case : Case
        The case as checked.
    study : StudyResult
        Scans, steps, assessments and :class:`~resonance.assessment.findings.Finding` objects of
        every bank in every supply scenario.
    proposals : mapping
        Bank name -> detuning proposal (plain data; see
        :func:`resonance.design.detuning.propose_detuning`).
    time_in_step : mapping
        Bank name -> time-in-step figures from the interval demand (empty without ``[demand]``).
    detuned_scans : mapping
        Bank name -> :class:`~resonance.assessment.study.BankScan` of its recommended detuned
        design (nominal supply), for the side-by-side plot.
    case_sha256 : str
        Checksum of the case file's bytes ("" for a case built in Python) [unitless].
    """

    case: Case
    study: StudyResult
    proposals: Mapping[str, dict] = field(default_factory=dict)
    time_in_step: Mapping[str, dict] = field(default_factory=dict)
    detuned_scans: Mapping[str, BankScan] = field(default_factory=dict)
    case_sha256: str = ""
    #: bank name -> switching proposal (:func:`resonance.design.switching_fix.propose_switching`)
    switching_proposals: Mapping[str, dict] = field(default_factory=dict)
    #: bank name -> :class:`CheckResult` of the re-check that accepted its recommended design
    #: (the variant case and its study; the report's section on the proposed design reads it)
    rechecks: Mapping[str, "CheckResult"] = field(default_factory=dict)
    #: bank name -> tuned-filter search outcome (:func:`resonance.design.filter_search.propose_filters`):
    #: ``filter`` (the proposal or None), ``filter_reason``, ``filter_search``
    filter_proposals: Mapping[str, dict] = field(default_factory=dict)
    #: bank name -> :class:`CheckResult` of the detuned design's re-check where a filter took its place
    #: in ``rechecks`` (the chosen design, written to recommended_case.toml, is the filter)
    detuned_rechecks: Mapping[str, "CheckResult"] = field(default_factory=dict)
    #: bank name -> :class:`CheckResult` of a filter offered but not chosen (the detuned design clears the
    #: PCC current already); it is written to recommended_filter_case.toml
    filter_rechecks: Mapping[str, "CheckResult"] = field(default_factory=dict)
    #: the studied network as plain data for the one-line diagram
    #: (:func:`resonance.model.topology.one_line_data`), None where it could not be drawn
    one_line: Any = None

    # ------------------------------------------------------------------ the verdict
    @property
    def findings(self) -> tuple:
        """Every :class:`~resonance.assessment.findings.Finding` of the check."""
        return self.study.findings

    @property
    def bank_findings(self) -> list:
        """The findings that are the banks' (:func:`resonance.assessment.verdict.bank_findings`)."""
        return bank_findings(self.findings)

    @property
    def site_findings(self) -> list:
        """The site's own distortion, apart from the banks' [unitless]."""
        return site_findings(self.findings)

    @property
    def passed(self) -> bool:
        """The verdict, the exit status 0 of ``resonance check``: no finding is a bank's (and, with
        ``[study] site_findings = "fail"``, none is the site's either)."""
        return check_passes(self.findings, self.case.study.site_findings)

    @property
    def site_passed(self) -> bool:
        """True when the site's own distortion is within every limit with the banks off."""
        return not self.site_findings

    @property
    def site_distortion(self) -> list[dict]:
        """Every PCC quantity beyond its limit with a bank off, and what its steps do to it
        (:func:`resonance.assessment.site.site_distortion`), per bank and scenario."""
        return [e for asm in self.study.assessments for e in site_distortion(asm)]

    # ------------------------------------------------------------------ the edge views
    @cached_property
    def data(self) -> dict:
        """The ``results.json`` layout (rounded at this edge; see docs/results.md)."""
        from resonance.report.results_json import to_dict  # noqa: PLC0415

        extra: dict[Any, dict] = {("bank", name): {"detuning": d} for name, d in self.proposals.items()}
        for b in self.case.bank:
            sw = self.switching_proposals.get(b.name)
            extra.setdefault(("bank", b.name), {})["switching_proposal"] = sw if sw is not None else {
                "status": "not_needed", "reason": "every step switches within its limits in every scenario"}
        for name, fp in self.filter_proposals.items():
            e = extra.setdefault(("bank", name), {})
            e["filter"] = fp.get("filter")
            e["filter_reason"] = fp.get("filter_reason", "")
            e["filter_search"] = fp.get("filter_search")
        for name, t in self.time_in_step.items():
            extra.setdefault(("bank", name), {})["time_in_step"] = t
            extra[(name, "nominal")] = {k: {"time_fraction": round(f, 5), "hours_in_step": round(hh, 3)}
                                        for k, (f, hh) in enumerate(zip(t["fraction"], t["hours"])) if k > 0}
        return to_dict(self.study, self.case_sha256, extra=extra)

    def steps_table(self):
        """One row per bank, scenario and step: resonance, duty and PCC figures (pandas DataFrame).

        Columns: ``bank``, ``scenario``, ``step``, ``kvar_delivered`` [kvar], ``h_scan`` [unitless],
        ``margin_pct`` [%], ``cap_v_rms_pct``, ``cap_v_peak_pct``, ``cap_i_rms_pct``,
        ``cap_kvar_pct`` [% of rating], ``thd_v_pcc_pct`` [%], ``tdd_pct`` [% of I_L],
        ``bank_findings`` and ``site_findings`` (counts) [unitless].
        """
        import pandas as pd  # noqa: PLC0415  (pandapower's own dependency)

        own = bank_findings(self.findings)
        site = site_findings(self.findings)
        rows = []
        for sc in self.study.scans:
            asm = self.study.assessment_for(sc.bank.name, sc.scenario)
            duty = {d.step: d.fields for d in asm.steps} if asm is not None else {}
            for s in sc.steps:
                f = duty.get(s.step, {})

                def count(fs):
                    return sum(1 for x in fs if x.bank == sc.bank.name and x.step == s.step
                               and x.scenario in (sc.scenario, "all"))

                rows.append({"bank": sc.bank.name, "scenario": sc.scenario, "step": s.step,
                             "kvar_delivered": s.kvar_delivered, "h_scan": _nan(s.h_scan),
                             "margin_pct": _nan(s.margin_pct),
                             **{k: _nan(f.get(k)) for k in ("cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct",
                                                           "cap_kvar_pct", "thd_v_pcc_pct", "tdd_pct")},
                             "bank_findings": count(own), "site_findings": count(site)})
        return pd.DataFrame(rows)

    def findings_table(self):
        """One row per finding (pandas DataFrame; unrounded ``value``, ``limit``, ``value_bank_off``)."""
        import pandas as pd  # noqa: PLC0415

        cols = ["bank", "step", "scenario", "check", "value", "limit", "unit", "cause", "value_bank_off", "order",
                "source", "message"]
        return pd.DataFrame([{c: getattr(f, c) for c in cols} for f in self.findings], columns=cols)

    def scan_table(self, bank: str, scenario: str = "nominal"):
        """Driving-point impedance at the bank's bus per step (pandas DataFrame).

        Index ``h`` [harmonic order]; column ``bank off`` and one column ``step k`` per step
        [ohm]; raises KeyError for an unknown bank or scenario.
        """
        import pandas as pd  # noqa: PLC0415

        sc = self.study.scans_for(bank, scenario)
        if sc is None:
            raise KeyError(f"no scan of bank {bank!r} in the {scenario!r} scenario")
        cols = {"bank off": sc.z_ohm[0], **{f"step {k}": sc.z_ohm[k] for k in range(1, len(sc.steps) + 1)}}
        return pd.DataFrame(cols, index=pd.Index(sc.h, name="h"))


def _nan(x) -> float:
    return float("nan") if x is None else float(x)


def _as_case(case, net) -> tuple[Case, str]:
    """The validated :class:`Case` and the checksum of its file's bytes ("" when not a file)."""
    from resonance.inputs.case_load import load_case, parse_case  # noqa: PLC0415

    if isinstance(case, Case):
        return case, ""
    if isinstance(case, Mapping):
        raw = dict(case)
        if net is not None and "network" not in raw:
            raw["network"] = {"pandapower_json": LIVE_NET_LABEL}
        return parse_case(raw, file="<case given in Python>", base_dir=str(Path.cwd())), ""
    if isinstance(case, (str, Path)):
        c = load_case(case)
        return c, hashlib.sha256(Path(case).read_bytes()).hexdigest()
    raise TypeError(f"run_check takes a case file path, a Case or a dict of case tables, not {type(case).__name__}")


def run_check(case, *, net=None, workers: int | None = None) -> CheckResult:
    """Check a case: every step of every bank in every supply scenario, judged by one assessment.

    Parameters
    ----------
    case : str, Path, Case or dict
        A case file (TOML), a validated :class:`~resonance.inputs.case.Case`, or the case's
        tables as a dict with the keys a case file has (docs/case-file.md).
    net : pandapowerNet, optional
        A live pandapower net standing for the case's ``[network]`` (buses named by their
        unique pandapower name or ``"#<index>"``); it is copied, never modified.
    workers : int, optional
        Processes for the sparse engine's pool on large networks [unitless]; None:
        ``RESONANCE_WORKERS`` or the CPU count (:func:`resonance.harmonics.engine.default_workers`).

    Returns
    -------
    CheckResult
        The typed result; ``passed`` is the verdict, ``data`` the results.json layout and
        ``steps_table()``, ``findings_table()``, ``scan_table()`` pandas views.

    Raises
    ------
    InputError
        A case or network that cannot be used (every problem named: file, field, what).
    ModelError
        A network the model cannot solve.
    """
    from resonance.assessment.study import run_study, with_cross_check  # noqa: PLC0415
    from resonance.design.demand import time_in_step  # noqa: PLC0415
    from resonance.design.detuning import propose_detuning, recommended_studies  # noqa: PLC0415
    from resonance.design.filter_search import choose_designs, filter_studies, propose_filters  # noqa: PLC0415
    from resonance.design.switching_fix import propose_switching  # noqa: PLC0415
    from resonance.harmonics.engine import CHECK_WORKERS  # noqa: PLC0415
    from resonance.model import netmodel  # noqa: PLC0415

    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise ValueError(f"workers must be a whole number >= 1, not {workers!r}")
    token = CHECK_WORKERS.set(workers)
    try:
        with Memo().active():  # the one cache of this check, gone with it (resonance.memo)
            checked, sha = _as_case(case, net)
            model = netmodel.build_model(checked, net=net)
            study = run_study(checked, model=model, cross_check=False)
            tis = time_in_step(checked, study)
            study = with_cross_check(study, checked, model)
            proposals = propose_detuning(checked, model, study)
            studies = recommended_studies(checked, model, proposals)
            detuned = {n: r.scans_for(n) for n, (_c, r) in studies.items() if r.scans_for(n) is not None}
            rechecks = {n: CheckResult(case=c, study=r) for n, (c, r) in studies.items()}
            switching = propose_switching(checked, model, study)
            filters = propose_filters(checked, model, study)
            choose_designs(filters, studies)
            detuned_rc = {}
            for n, (c, r) in filter_studies(checked, model, filters).items():
                if n in rechecks:
                    detuned_rc[n] = rechecks[n]
                rechecks[n] = CheckResult(case=c, study=r)  # the chosen design: the filter
            #: the offered, not chosen, filters keep their own re-check for the report
            filter_rc = {n: CheckResult(case=c, study=r) for n, (c, r) in filter_studies(
                checked, model, {n: e for n, e in filters.items() if e.get("filter") and not e["filter"]["chosen"]},
                together=False).items()}
            one_line = _one_line(model, checked)
    finally:
        CHECK_WORKERS.reset(token)
    return CheckResult(case=checked, study=study, proposals=proposals, time_in_step=tis, detuned_scans=detuned,
                       case_sha256=sha, switching_proposals=switching, rechecks=rechecks, one_line=one_line,
                       filter_proposals=filters, detuned_rechecks=detuned_rc, filter_rechecks=filter_rc)


def _one_line(model, case):
    """The one-line diagram's data (:func:`resonance.model.topology.one_line_data`)."""
    from resonance.model.topology import one_line_data  # noqa: PLC0415

    return one_line_data(model, case)


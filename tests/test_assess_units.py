"""Array-level tests of the assessment's findings and of the report tables, without a network
model or the command line.

Outside references: IEEE Std 519-2014 Table 1 (PCC at 1 kV < V <= 69 kV: 3 % individual,
5 % THD) and Table 2 (I_sc/I_L 20-50, h < 11: 7 %, TDD 8 %) [published; the values are those
of resonance.standards.limits, checked in test_limits.py]; IEEE Std 18-2012 clause 5 (RMS
voltage 110 %, peak 120 %, current 135 %, kvar 135 %) [published]; THD and TDD by their
definitions (IEEE Std 519-2014 clause 3) [derived].
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from resonance.assessment.assess import duty_findings, pcc_findings, reported
from resonance.assessment.verdict import bank_findings, site_findings
from resonance.standards.duty import duty_limits
from resonance.standards.limits import ieee519_current_limits, ieee519_voltage_limits

H = np.array([5.0, 7.0, 11.0, 13.0])


def _limits():
    return ieee519_voltage_limits(13.8), ieee519_current_limits(30.0, H)


def test_ieee_519_rows_used_here():
    vlim, clim = _limits()
    assert (vlim.individual_pct, vlim.thd_pct) == (3.0, 5.0)  # IEEE 519-2014 Table 1, 1-69 kV
    assert clim.tdd_pct == 8.0 and list(clim.individual_pct[:2]) == [7.0, 7.0]  # Table 2, 20-50, h < 11


def test_duty_findings_one_per_quantity_beyond_its_limit():
    lim = duty_limits("ieee18-2012")
    got = duty_findings("B", 3, "weak", {"v_rms": 111.0, "v_peak": 119.9, "i_rms": 140.0, "kvar": 135.0}, lim)
    # IEEE 18: 110 % rms voltage and 135 % current are exceeded; 120 % peak and 135 % kvar are not
    assert [f.check for f in got] == ["duty_v_rms", "duty_i_rms"]
    assert all(f.cause == "bank" and f.unit == "% of rating" and f.step == 3 and f.scenario == "weak" for f in got)
    assert got[0].value == 111.0 and got[0].limit == pytest.approx(110.0)
    assert bank_findings(got, "B") == got


def test_pcc_findings_thd_tdd_and_worst_orders_by_definition():
    vlim, clim = _limits()
    v = np.array([0.045, 0.02, 0.01, 0.005])  # pu of nominal: 4.5 % at the 5th
    v_off = np.array([0.01, 0.01, 0.005, 0.005])
    i = np.array([9.0, 3.0, 1.0, 0.5])  # % of I_L
    i_off = np.array([2.0, 1.0, 0.5, 0.5])
    got = {f.check: f for f in pcc_findings("B", 1, "nominal", H, v, v_off, vlim, i, i_off, clim, 30.0)}
    thd = 100 * math.sqrt(float(np.sum(v**2)))  # THD = sqrt(sum V_h^2) [derived]
    tdd = math.sqrt(float(np.sum(i**2)))  # TDD = sqrt(sum I_h^2) / I_L [derived]
    assert got["pcc_thd_v"].value == pytest.approx(thd) and thd > 5.0
    assert got["pcc_thd_v"].value_bank_off == pytest.approx(100 * math.sqrt(float(np.sum(v_off**2))))
    assert got["pcc_v_individual"].order == 5 and got["pcc_v_individual"].value == pytest.approx(4.5)
    assert got["pcc_tdd"].value == pytest.approx(tdd) and tdd > 8.0
    assert got["pcc_i_individual"].order == 5 and got["pcc_i_individual"].limit == 7.0
    assert {f.cause for f in got.values()} == {"bank"}  # all within the limits with the bank off


def test_pcc_findings_of_the_site_when_the_bank_does_not_make_it_worse():
    vlim, clim = _limits()
    i_off = np.array([12.0, 3.0, 1.0, 0.5])  # the plant alone is beyond 7 % at the 5th
    i = i_off * 0.95  # the step lowers it a little
    v = np.zeros(4)
    got = pcc_findings("B", 2, "nominal", H, v, v, vlim, i, i_off, clim, 30.0)
    assert [f.check for f in got] == ["pcc_tdd", "pcc_i_individual"]
    assert site_findings(got) == got and bank_findings(got) == []
    worse = pcc_findings("B", 2, "nominal", H, v, v, vlim, i_off * 1.2, i_off, clim, 30.0)
    assert {f.cause for f in worse} == {"bank"}


def test_no_orders_no_findings():
    vlim, _ = _limits()
    clim = ieee519_current_limits(30.0, np.array([5.0]))
    e = np.zeros(0)
    assert pcc_findings("B", 1, "nominal", e, e, e, vlim, e, e, clim, 30.0) == []


def test_reported_rounds_at_the_edge_only():
    f = {"cap_v_rms_pct": 101.23456, "tdd_pct": 4.123456789, "harmonics": [{"h": 5, "v_pcc_pct": 1.000049}],
         "duty_margins_pct": {"v_rms": 8.76543}, "duty_ok": True, "x": float("nan")}
    r = reported(f)
    assert r == {"cap_v_rms_pct": 101.235, "tdd_pct": 4.1235, "harmonics": [{"h": 5, "v_pcc_pct": 1.0}],
                 "duty_margins_pct": {"v_rms": 8.765}, "duty_ok": True, "x": None}
    assert f["cap_v_rms_pct"] == 101.23456  # the figures themselves stay unrounded


def test_step_table_result_words_come_from_the_findings():
    from resonance.report.tables import _Limits, _step_rows

    steps = [{"step": k, "h_scan": 4.9, "resonance_ok": True, "tdd_pct": 20.0} for k in (1, 2, 3)]
    lim = _Limits(duty={}, duty_name="", pcc_ind=3.0, pcc_thd=5.0, pcc_src="", tdd=8.0, i_src="")
    findings = [{"check": "pcc_tdd", "step": 1, "cause": "site"},
                {"check": "pcc_tdd", "step": 2, "cause": "bank"}, {"check": "duty_v_rms", "step": 2, "cause": "bank"}]
    _cols, rows, bad = _step_rows(steps, lim, findings)
    words = [r[-1] for r in rows]
    # step 3 has the same 20 % TDD figure but no finding: the word follows the findings, not the figure
    assert words == ["pass (site I)", "FAIL I,duty", "pass"]
    assert (1, len(_cols) - 1) in bad and (0, len(_cols) - 1) not in bad


def test_report_tables_from_a_result_without_the_command_line():
    from resonance.assessment.study import run_study
    from resonance.inputs.case_load import load_case
    from resonance.pipeline import CheckResult
    from resonance.report.tables import report_tables

    from .conftest import CASES

    case = load_case(CASES / "demo_plant.toml")
    res = CheckResult(case=case, study=run_study(case))
    tables = {t.name: t for t in report_tables(res.study, res.data)}
    summary = tables["table_summary_PFC-1.csv"]
    steps = res.data["banks"][0]["steps"]
    assert len(summary.rows) == len(steps) == len(case.bank[0].steps_kvar)
    labels = [c.label for c in summary.columns]
    for row, st in zip(summary.rows, steps):
        assert row[labels.index("step")] == st["step"]
        assert row[labels.index("h_scan")] == st["h_scan"]
        own = [f for f in res.bank_findings if f.step == st["step"] and f.scenario in ("nominal", "all")]
        assert row[-1].startswith("FAIL") == bool(own)

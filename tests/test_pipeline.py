"""The one pipeline from Python: run_check on a file, a dict and a live pandapower net; the
typed result and its pandas tables; the docs example runs as written.

Outside references: pandapower's own JSON reader and IEC 60909 short-circuit module stand
behind the live-net route (the same net as the bundled network-file case); the resonance
orders are checked against the closed form h_r = sqrt(S_sc / Q) (IEEE Std 1531-2020, clause
on parallel resonance; REFERENCES.md "Resonance").
"""

from __future__ import annotations

import json
import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest

from resonance.assessment.findings import CHECKS, Finding
from resonance.errors import InputError
from resonance.pipeline import CheckResult, run_check

from .conftest import CASES, ROOT


@pytest.fixture(scope="module")
def demo() -> CheckResult:
    return run_check(CASES / "demo_plant.toml")


def test_file_and_cli_give_the_same_verdict_and_findings(demo, tmp_path):
    from resonance.cli import main

    rc = main(["check", str(CASES / "demo_plant.toml"), "--out", str(tmp_path), "--quiet", "--no-plots"])
    data = json.loads((tmp_path / "results.json").read_text())
    assert rc == (0 if demo.passed else 1)
    assert data["passed"] == demo.passed and data["site_passed"] == demo.site_passed
    assert [f["message"] for f in data["findings"]] == [f.message for f in demo.findings]
    assert data["case"]["sha256"] == demo.case_sha256 and len(demo.case_sha256) == 64


def test_findings_are_typed_and_unrounded(demo):
    assert demo.findings and all(isinstance(f, Finding) for f in demo.findings)
    assert {f.check for f in demo.findings} <= set(CHECKS)
    for f in demo.findings:
        assert f.cause in ("bank", "site") and f.unit and f.source
        assert f.to_dict()["value"] == round(f.value, 4)
    # the verdict is the one assessment's: a bank finding anywhere fails the check
    assert demo.passed == (not [f for f in demo.findings if f.cause == "bank" or f.check == "resonance"])


def test_pandas_tables_match_the_typed_result(demo):
    steps = demo.steps_table()
    n_rows = sum(len(sc.steps) for sc in demo.study.scans)
    assert len(steps) == n_rows
    assert set(steps["scenario"]) == {sc.scenario for sc in demo.study.scans}
    assert steps["bank_findings"].sum() + steps["site_findings"].sum() >= \
        len([f for f in demo.findings if f.scenario != "all"])
    ft = demo.findings_table()
    assert len(ft) == len(demo.findings) and list(ft["message"]) == [f.message for f in demo.findings]
    sc = demo.study.scans_for("PFC-1")
    scan = demo.scan_table("PFC-1")
    assert scan.shape == (sc.h.size, len(sc.steps) + 1) and list(scan.columns)[0] == "bank off"
    np.testing.assert_allclose(scan[f"step {len(sc.steps)}"].to_numpy(), sc.z_ohm[-1])
    # each step's column peaks where the study found that step's resonance
    for s in sc.steps:
        if s.h_scan is not None:
            assert scan[f"step {s.step}"].idxmax() == pytest.approx(s.h_scan, abs=0.05)
    with pytest.raises(KeyError):
        demo.scan_table("no such bank")


def test_a_case_built_in_python_equals_its_file():
    raw = tomllib.loads((CASES / "cold_store_50hz.toml").read_text(encoding="utf-8"))
    a = run_check(CASES / "cold_store_50hz.toml")
    b = run_check(raw, workers=1)
    assert a.passed == b.passed
    assert [f.message for f in a.findings] == [f.message for f in b.findings]
    for sa, sb in zip(a.study.scans, b.study.scans):
        assert [s.h_scan for s in sa.steps] == pytest.approx([s.h_scan for s in sb.steps])


def test_a_bad_dict_is_an_input_error_naming_the_field():
    raw = tomllib.loads((CASES / "cold_store_50hz.toml").read_text(encoding="utf-8"))
    raw["bank"][0]["steps_kvar"] = "lots"
    with pytest.raises(InputError) as ei:
        run_check(raw)
    assert any(p.field.startswith("bank[0].steps_kvar") for p in ei.value.problems)
    with pytest.raises(ValueError):
        run_check(raw, workers=0)
    with pytest.raises(TypeError):
        run_check(42)


def _feeder_case() -> dict:
    raw = tomllib.loads((CASES / "feeder_network_file.toml").read_text(encoding="utf-8"))
    raw.pop("network")
    return raw


def test_a_live_pandapower_net_is_used_and_never_modified():
    import pandapower as pp

    net = pp.from_json(str(CASES / "cigre_mv_network.json"))
    before = pp.to_json(net)
    live = run_check(_feeder_case(), net=net, workers=1)
    assert pp.to_json(net) == before  # the user's object is untouched
    file = run_check(CASES / "feeder_network_file.toml")
    assert [f.message for f in live.findings] == [f.message for f in file.findings]
    z_live = live.scan_table("FDR1-CAP").to_numpy()
    z_file = file.scan_table("FDR1-CAP").to_numpy()
    np.testing.assert_allclose(z_live, z_file, rtol=1e-12)
    # pandapower's IEC 60909 module gives the cross-check figures on both routes alike
    assert live.data["supply"]["sc_mva_iec60909_at_pcc"] == pytest.approx(
        file.data["supply"]["sc_mva_iec60909_at_pcc"])


def test_step_resonance_near_the_closed_form(demo):
    # h_r = sqrt(S_sc / Q_step) at the bank bus (IEEE Std 1531-2020; REFERENCES.md "Resonance"):
    # the screening estimate the study reports beside the scanned peak
    sc = demo.study.scans_for("PFC-1")
    assert sc.bank.p == 0
    for s in sc.steps:
        if s.h_scan is not None:
            est = math.sqrt(sc.sc_mva * 1000.0 / s.kvar_nominal)  # plain bank: Q at nominal voltage
            assert s.h_estimate == pytest.approx(est, rel=0.02)
            assert s.h_scan == pytest.approx(est, rel=0.15)


def test_docs_python_api_examples_run(monkeypatch, capsys):
    """docs/python-api.md: every python block runs as written, from the repository root."""
    text = (ROOT / "docs" / "python-api.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert len(blocks) >= 2
    monkeypatch.chdir(ROOT)
    for code in blocks:
        exec(compile(code, "docs/python-api.md", "exec"), {})  # noqa: S102 - our own documentation
    out = capsys.readouterr().out
    assert "findings of the banks" in out

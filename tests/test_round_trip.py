"""The proposal is proven by the one assessment: ``check`` on ``recommended_case.toml`` clears every
finding of the recommended banks that the proposal claimed to clear, in every scenario, and the
numbers the proposal printed are those of the re-check (the project's own contract, issue
"One verdict"; no outside reference applies)."""

from __future__ import annotations

import contextlib
import io
import json
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings

from resonance.cli import main

from .conftest import CASES
from .test_fuzz import radial_plants, to_toml


def _check(case: Path, out: Path) -> tuple[int, dict]:
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        rc = main(["check", str(case), "--out", str(out), "--no-plots", "--no-report"])
    assert rc in (0, 1), rc
    return rc, json.loads((out / "results.json").read_text(encoding="utf-8"))


def _bank_findings(data: dict, bank: str) -> list[dict]:
    return [f for f in data["findings"] if f["bank"] == bank and f.get("cause", "bank") == "bank"]


def _assert_round_trip(case: Path, tmp: Path) -> bool:
    """Run the case, then its recommended case; True when a proposal was made."""
    rc, first = _check(case, tmp / "first")
    rec_file = tmp / "first" / "recommended_case.toml"
    recommended = {b["name"]: b["detuning"]["recommended"] for b in first["banks"]
                   if (b.get("detuning") or {}).get("recommended")}
    assert rec_file.exists() == bool(recommended)
    if not recommended:
        return False
    doc = tomllib.loads(rec_file.read_text(encoding="utf-8"))  # valid TOML, the user's own keys
    for b in doc["bank"]:
        if b["name"] in recommended:
            r = recommended[b["name"]]
            assert b["detuning_pct"] == pytest.approx(r["detuning_pct"])
            assert b["rated_kv"] == pytest.approx(r["rated_kv"])
            assert b["steps_kvar"] == pytest.approx(r["steps_kvar"])
    rc2, second = _check(rec_file, tmp / "second")
    for name, r in recommended.items():
        left = _bank_findings(second, name)
        assert left == [], (name, [f["message"] for f in left])
        bank2 = next(b for b in second["banks"] if b["name"] == name)
        # the numbers the proposal printed are the re-check's
        assert bank2["tuning_order"] == pytest.approx(r["tuning_order"], abs=5e-3)
        assert bank2["detuning_pct"] == pytest.approx(r["detuning_pct"])
    others_before = {f["bank"] for f in first["findings"] if f.get("cause", "bank") == "bank"} - set(recommended)
    if not others_before:  # only the recommended banks had bank findings: the exit status follows
        assert rc2 == 0
    return True


@pytest.mark.parametrize("name", sorted(p.name for p in CASES.glob("*.toml")))
def test_recommended_case_of_every_bundled_case_passes_its_own_check(tmp_path, name):
    _assert_round_trip(CASES / name, tmp_path)


def test_demo_gets_a_proposal_and_it_round_trips(tmp_path):
    assert _assert_round_trip(CASES / "demo_plant.toml", tmp_path)


@settings(max_examples=4, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                 HealthCheck.function_scoped_fixture])
@given(radial_plants())
def test_recommended_case_of_generated_plants_round_trips(tmp_path_factory, doc):
    tmp = tmp_path_factory.mktemp("rt")
    case = tmp / "case.toml"
    case.write_text(to_toml(doc), encoding="utf-8")
    _assert_round_trip(case, tmp)

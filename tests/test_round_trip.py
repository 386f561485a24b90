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


def _assert_detuned(rec_file: Path, tmp: Path, recommended: dict, first: dict, label: str) -> int:
    doc = tomllib.loads(rec_file.read_text(encoding="utf-8"))  # valid TOML, the user's own keys
    for b in doc["bank"]:
        if b["name"] in recommended:
            r = recommended[b["name"]]
            assert b["detuning_pct"] == pytest.approx(r["detuning_pct"])
            assert b["rated_kv"] == pytest.approx(r["rated_kv"])
            assert b["steps_kvar"] == pytest.approx(r["steps_kvar"])
    rc2, second = _check(rec_file, tmp / label)
    for name, r in recommended.items():
        left = _bank_findings(second, name)
        assert left == [], (name, [f["message"] for f in left])
        bank2 = next(b for b in second["banks"] if b["name"] == name)
        # the numbers the proposal printed are the re-check's
        assert bank2["tuning_order"] == pytest.approx(r["tuning_order"], abs=5e-3)
        assert bank2["detuning_pct"] == pytest.approx(r["detuning_pct"])
    return rc2


def _assert_filters(rec_file: Path, tmp: Path, filters: dict) -> int:
    """The filter in recommended_case.toml clears what it claimed: no finding of any branch, no PCC
    current finding, and ``site_passed`` where it claimed to clear the site's findings (issue 16)."""
    doc = tomllib.loads(rec_file.read_text(encoding="utf-8"))
    banks = {b["name"]: b for b in doc["bank"]}
    rc2, second = _check(rec_file, tmp / ("filter" + rec_file.stem))
    for name, f in filters.items():
        for t, br in zip(f["bank_tables"], f["branches"]):
            b = banks[t["name"]]
            assert b["kind"] == "filter" and b["runs_with"] == t["runs_with"]
            assert b["rated_kv"] == pytest.approx(br["capacitor_rated_kv"])
            assert b["detuning_pct"] == pytest.approx(100.0 / br["tuning_order"] ** 2, rel=1e-3)
            left = _bank_findings(second, t["name"])
            assert left == [], (t["name"], [x["message"] for x in left])
            bank2 = next(x for x in second["banks"] if x["name"] == t["name"])
            assert bank2["tuning_order"] == pytest.approx(br["tuning_order"], abs=5e-3)
        branches = {t["name"] for t in f["bank_tables"]}
        assert not [x for x in second["findings"] if x["check"] in ("pcc_i_individual", "pcc_tdd")
                    and x["bank"] in branches]
        if f["clears_site_findings"]:
            assert second["site_passed"] is True
    return rc2


def _assert_round_trip(case: Path, tmp: Path) -> bool:
    """Run the case, then its recommended case(s); True when a proposal was made."""
    rc, first = _check(case, tmp / "first")
    rec_file = tmp / "first" / "recommended_case.toml"
    det_file = tmp / "first" / "recommended_detuned_case.toml"
    recommended = {b["name"]: b["detuning"]["recommended"] for b in first["banks"]
                   if (b.get("detuning") or {}).get("recommended")}
    filters = {b["name"]: b["filter"] for b in first["banks"] if b.get("filter") and b["filter"]["chosen"]}
    offered = {b["name"]: b["filter"] for b in first["banks"] if b.get("filter") and not b["filter"]["chosen"]}
    off_file = tmp / "first" / "recommended_filter_case.toml"
    assert off_file.exists() == bool(offered)
    if offered:  # a filter offered beside a detuned design that already clears the PCC current
        _assert_filters(off_file, tmp / "offered", offered)
    for b in first["banks"]:
        assert "filter" in b and isinstance(b["filter_reason"], str) and b["filter_reason"]
        if b["filter"] is not None:
            for br in b["filter"]["branches"]:
                assert {"tuning_order", "kvar", "reactor_mh", "capacitor_rated_kv"} <= set(br)
    assert rec_file.exists() == bool(recommended or filters)
    assert det_file.exists() == bool(set(recommended) & set(filters))
    if not (recommended or filters):
        return False
    rc_f = _assert_filters(rec_file, tmp, filters) if filters else None
    detuned_file = det_file if filters else rec_file
    rc_d = _assert_detuned(detuned_file, tmp, recommended, first, "second") if recommended else None
    others_before = ({f["bank"] for f in first["findings"] if f.get("cause", "bank") == "bank"}
                     - set(recommended) - set(filters))
    if not others_before:  # only the recommended banks had bank findings: the exit status follows
        assert (rc_f if filters else rc_d) == 0
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

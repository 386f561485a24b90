"""Results that do not depend on the process that computed them, and the scan CSV format.

Everything of a check runs in one process (the forked job runner is gone); the sparse
engine's spawn pool for large networks takes its size from ``RESONANCE_WORKERS``.
"""

import json
import os
from pathlib import Path

import pytest

from resonance.inputs.case_load import load_case
from resonance.assessment.study import run_study

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("value, expected", [("1", 1), ("3", 3), ("", None), ("zero", None), ("0", None)])
def test_resonance_workers_reaches_the_sparse_engine(monkeypatch, value, expected):
    from resonance.harmonics import engine

    monkeypatch.setenv("RESONANCE_WORKERS", value)
    got = engine.default_workers()
    if expected is None:  # unset or invalid: the CPUs this process may use
        assert got == max(1, len(os.sched_getaffinity(0)))
    else:
        assert got == expected


def test_scan_csv_is_what_csv_writer_gives():
    # the scan CSV is formatted with one %-format per row; it must be byte for byte the text
    # the standard library's csv.writer makes of the same rows (Python documentation, csv)
    import csv
    import io

    from resonance.report.scan_tables import scan_csv

    res = run_study(load_case(ROOT / "cases" / "demo_plant.toml"))
    for sc in res.scans:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["h", "z_ohm_bank_off"] + [f"z_ohm_step_{s.step}" for s in sc.steps])
        w.writerows([f"{h:.4f}"] + [f"{z:.6g}" for z in zs] for h, zs in zip(sc.h.tolist(), sc.z_ohm.T.tolist()))
        assert scan_csv(sc) == buf.getvalue()


def test_failed_cross_check_is_a_warning(tmp_path, monkeypatch):
    # when the IEC 60909 cross-check raises, the check still ends normally, with the failure
    # named in results.json
    from resonance import cli
    from resonance.model import netmodel

    def broken(*a, **k):
        raise RuntimeError("no short-circuit data")

    monkeypatch.setattr(netmodel, "iec60909_sc_mva", broken)
    out = tmp_path / "out"
    rc = cli.main(["check", str(ROOT / "cases" / "demo_plant.toml"), "--out", str(out), "--no-plots", "--quiet"])
    assert rc in (0, 1)
    data = json.loads((out / "results.json").read_text())
    assert any("IEC 60909 cross-check not available (RuntimeError)" in w for w in data["warnings"])
    assert all(b["sc_mva_iec60909"] is None for b in data["banks"])


def test_run_check_workers_reach_the_sparse_engine_and_end_with_the_check(monkeypatch):
    from resonance.assessment import study
    from resonance.harmonics import engine
    from resonance.pipeline import run_check

    monkeypatch.setenv("RESONANCE_WORKERS", "3")
    seen = []
    real = study.run_study

    def spy(*a, **k):
        seen.append(engine.default_workers())
        return real(*a, **k)

    monkeypatch.setattr(study, "run_study", spy)
    run_check(ROOT / "cases" / "cold_store_50hz.toml", workers=2)
    assert seen and set(seen) == {2}  # the call's value wins over the variable, for the whole check
    assert engine.default_workers() == 3  # and is gone with it: the variable decides again
    seen.clear()
    run_check(ROOT / "cases" / "cold_store_50hz.toml")
    assert set(seen) == {3}

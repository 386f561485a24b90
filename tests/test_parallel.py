"""Jobs shared with forked workers (resonance.parallel) and the detuning re-checks run ahead.

These check the project's own process handling: results must not depend on where a job ran.
"""

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from resonance import detuning
from resonance.case import load_case
from resonance.parallel import SharedJobs, can_fork
from resonance.study import run_study

ROOT = Path(__file__).resolve().parents[1]
fork_only = pytest.mark.skipif(not can_fork(), reason="needs fork and a single-threaded process")


def _square(k):
    return k * k


def _jobs(n):
    import functools

    return [functools.partial(_square, k) for k in range(n)]


@pytest.mark.parametrize("workers", [1, 2, 3])
def test_every_job_result_comes_back(workers):
    jobs = SharedJobs(_jobs(7), workers)
    got = jobs.finish()
    assert got == {k: k * k for k in range(7)}


def test_failed_job_is_left_out_not_raised():
    def bad():
        raise ValueError("boom")

    jobs = SharedJobs([lambda: 1, bad, lambda: 3], 2)
    assert jobs.finish() == {0: 1, 2: 3}


@fork_only
def test_worker_that_dies_only_loses_its_results():
    parent = os.getpid()

    def die_in_worker():
        if os.getpid() != parent:
            os._exit(3)
        return "here"

    # job 0 starts at once in the worker, which dies; the parent takes the rest
    jobs = SharedJobs([die_in_worker] + [lambda: "x"] * 3, 2)
    assert jobs.forked == 1
    got = jobs.finish(timeout_s=30)
    assert got.get(0, "here") == "here"  # lost with the worker, or run here
    assert [got[k] for k in range(1, 4)] == ["x"] * 3
    jobs.close()


def test_close_is_safe_twice():
    jobs = SharedJobs(_jobs(3), 2)
    jobs.close()
    jobs.close()


@pytest.mark.parametrize("name", ["demo_plant.toml", "water_plant_mv.toml"])
def test_planned_variants_are_the_ones_the_proposal_runs(name):
    case = load_case(ROOT / "cases" / name)
    res = run_study(case)
    model = res.extras["model"]
    planned = [("study", v.model_dump_json()) for v in detuning.planned_variants(case, model)]
    assert planned
    ran = []
    orig = detuning.run_variant

    def spy(variant, m):
        ran.append(("study", variant.model_dump_json()))
        return orig(variant, m)

    detuning.run_variant = spy
    try:
        detuning.propose_detuning(case, model, res)
    finally:
        detuning.run_variant = orig
    assert set(planned) <= set(ran)
    assert [k for k in ran if k in planned] == planned  # the same order


def _strip_timing(obj):
    if isinstance(obj, dict):
        return {k: _strip_timing(v) for k, v in obj.items() if k != "timing"}
    if isinstance(obj, list):
        return [_strip_timing(v) for v in obj]
    return obj


@fork_only
def test_results_are_the_same_with_and_without_a_worker(tmp_path):
    out = {}
    for w in ("1", "2"):
        env = {**os.environ, "RESONANCE_WORKERS": w}
        d = tmp_path / f"w{w}"
        r = subprocess.run([sys.executable, "-m", "resonance", "check", str(ROOT / "cases" / "demo_plant.toml"),
                            "--out", str(d), "--no-plots", "--quiet"], env=env, capture_output=True, text=True)
        assert r.returncode in (0, 1), r.stderr
        out[w] = d
    a = json.loads((out["1"] / "results.json").read_text())
    b = json.loads((out["2"] / "results.json").read_text())
    assert _strip_timing(a) == _strip_timing(b)
    for f in sorted(p.name for p in out["1"].iterdir() if p.suffix == ".csv"):
        assert (out["1"] / f).read_bytes() == (out["2"] / f).read_bytes()


def test_scan_csv_is_what_csv_writer_gives():
    # the scan CSV is formatted with one %-format per row; it must be byte for byte the text
    # the standard library's csv.writer makes of the same rows (Python documentation, csv)
    import csv
    import io

    from resonance.tables import scan_csv

    res = run_study(load_case(ROOT / "cases" / "demo_plant.toml"))
    for sc in res.scans:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["h", "z_ohm_bank_off"] + [f"z_ohm_step_{s.step}" for s in sc.steps])
        w.writerows([f"{h:.4f}"] + [f"{z:.6g}" for z in zs] for h, zs in zip(sc.h.tolist(), sc.z_ohm.T.tolist()))
        assert scan_csv(sc) == buf.getvalue()


@pytest.mark.parametrize("workers", ["1", "2"])
def test_failed_cross_check_is_a_warning_wherever_it_ran(tmp_path, monkeypatch, workers):
    # the cross-check is a shared job: when it raises (in the worker or here) the check still
    # ends normally, with the failure named in results.json
    from resonance import cli, netmodel

    def broken(*a, **k):
        raise RuntimeError("no short-circuit data")

    monkeypatch.setattr(netmodel, "iec60909_sc_mva", broken)
    monkeypatch.setenv("RESONANCE_WORKERS", workers)
    out = tmp_path / "out"
    rc = cli.main(["check", str(ROOT / "cases" / "demo_plant.toml"), "--out", str(out), "--no-plots", "--quiet"])
    assert rc in (0, 1)
    data = json.loads((out / "results.json").read_text())
    assert any("IEC 60909 cross-check not available (RuntimeError)" in w for w in data["warnings"])
    assert all(b["sc_mva_iec60909"] is None for b in data["banks"])

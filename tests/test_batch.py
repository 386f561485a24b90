"""Batch studies on Dask: the same results as `resonance check`, error rows, resume, and a real
multi-process cluster started with the standard `dask scheduler` / `dask worker` commands (the
project's own behaviour; the outside reference is `resonance check` itself and Dask's CLI)."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

from .conftest import ROOT

pytest.importorskip("distributed")

CASES = ROOT / "cases"
PY = sys.executable


def _cli(*args, cwd=None, timeout=600):
    return subprocess.run([PY, "-m", "resonance", *map(str, args)], capture_output=True, text=True, cwd=cwd,
                          timeout=timeout, check=False)


def _sorted(path: Path) -> str:
    return json.dumps(json.loads(path.read_text(encoding="utf-8")), sort_keys=True)


def test_batch_of_the_bundled_cases_equals_check(tmp_path):
    names = ["cold_store_50hz", "demo_plant", "water_plant_mv", "feeder_network_file"]
    for n in names:
        r = _cli("check", CASES / f"{n}.toml", "--out", tmp_path / "check" / n, "--no-report", "--no-plots", "--quiet")
        assert r.returncode in (0, 1), r.stderr
    b = _cli("batch", CASES, "--out", tmp_path / "batch", "--workers", "2", "--quiet")
    assert b.returncode == 1, b.stdout + b.stderr  # some banks have findings, every row ran
    for n in names:
        assert _sorted(tmp_path / "batch" / "cases" / n / "results.json") == \
            _sorted(tmp_path / "check" / n / "results.json"), n
    summary = json.loads((tmp_path / "batch" / "summary.json").read_text(encoding="utf-8"))
    assert sorted(r["id"] for r in summary) == sorted(names)
    head = (tmp_path / "batch" / "summary.csv").read_text(encoding="utf-8").splitlines()[0].split(",")
    assert head[:4] == ["id", "case", "bank", "passed"]
    cold = next(r for r in summary if r["id"] == "cold_store_50hz")
    assert cold["passed"] is True


def _manifest(tmp_path: Path, rows: list[str], header="id,case,supply.sc_mva") -> Path:
    shutil.copy(CASES / "cold_store_50hz.toml", tmp_path / "cold.toml")
    m = tmp_path / "sweep.csv"
    m.write_text(header + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return m


def test_bad_rows_become_error_rows_and_the_rest_finish(tmp_path):
    (tmp_path / "broken.toml").write_text('title = "broken"\nfrequency_hz = 55\n', encoding="utf-8")
    m = tmp_path / "m.csv"
    shutil.copy(CASES / "cold_store_50hz.toml", tmp_path / "cold.toml")
    m.write_text("id,case,supply.sc_mva,bank.NOPE.rated_kv\n"
                 "good,cold.toml,200.0,\n"
                 "no_such_bank,cold.toml,200.0,0.5\n"
                 "raises,broken.toml,,\n"
                 "negative,cold.toml,-5.0,\n", encoding="utf-8")
    r = _cli("batch", m, "--out", tmp_path / "o", "--workers", "2", "--quiet")
    assert r.returncode == 2, r.stdout + r.stderr
    import csv
    import io

    text = (tmp_path / "o" / "errors.csv").read_text(encoding="utf-8")
    errs = {e["id"]: e for e in csv.DictReader(io.StringIO(text))}
    assert set(errs) == {"no_such_bank", "raises", "negative"}
    assert errs["no_such_bank"]["field"] == "bank.NOPE.rated_kv" and "NOPE" in errs["no_such_bank"]["message"]
    assert "frequency_hz" in errs["raises"]["field"] + errs["raises"]["message"]
    assert "sc_mva" in errs["negative"]["field"]
    assert (tmp_path / "o" / "cases" / "good" / "results.json").is_file()
    assert not (tmp_path / "o" / "cases" / "raises").exists()
    assert "3 rows could not be run" in r.stdout


def test_resume_skips_finished_rows_and_ends_as_an_uninterrupted_run(tmp_path):
    from resonance.batch_run import run_batch

    m = _manifest(tmp_path, [f"r{k},cold.toml,{v}" for k, v in enumerate((120.0, 180.0, 250.0))])
    first = run_batch([m], tmp_path / "o", workers=2, max_rows=1)  # "interrupted" after one row
    assert first.submitted == 1 and first.pending == 2 and first.exit_status == 2
    again = run_batch([m], tmp_path / "o", workers=2)
    assert again.submitted == 2 and again.skipped == 1
    third = run_batch([m], tmp_path / "o", workers=2)
    assert third.submitted == 0 and third.skipped == 3
    whole = run_batch([m], tmp_path / "whole", workers=2)
    assert (tmp_path / "o" / "summary.json").read_text() == (tmp_path / "whole" / "summary.json").read_text()
    # a changed input is run again: the checksum covers the case file
    (tmp_path / "cold.toml").write_text((tmp_path / "cold.toml").read_text() + "\n# edited\n", encoding="utf-8")
    assert run_batch([m], tmp_path / "o", workers=2).submitted == 3
    # the overrides reached the case: the swept supply strength is in each row's results
    sc = [json.loads((tmp_path / "whole" / "cases" / f"r{k}" / "results.json").read_text())["supply"]["sc_mva"]
          for k in range(3)]
    assert sc == [120.0, 180.0, 250.0]
    assert whole.table().shape[0] == 3
    # a sweep gets the summary figure against the swept value
    assert (tmp_path / "whole" / "summary.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    rows = json.loads((tmp_path / "whole" / "summary.json").read_text())
    assert all(r["h_scan_at_lowest_margin"] and r["duty_margin_min_pct"] is not None for r in rows)


def test_sweep_command_writes_a_manifest_batch_reads(tmp_path):
    shutil.copy(CASES / "cold_store_50hz.toml", tmp_path / "cold.toml")
    r = _cli("sweep", tmp_path / "cold.toml", "--key", "supply.sc_mva", "--from", "100", "--to", "300", "--steps", "3",
             "--manifest", tmp_path / "m.csv")
    assert r.returncode == 0, r.stderr
    lines = (tmp_path / "m.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0] == "id,case,supply.sc_mva" and lines[2].endswith(",200.0") and len(lines) == 4
    again = _cli("sweep", tmp_path / "cold.toml", "--key", "supply.sc_mva", "--from", "1", "--to", "2", "--steps", "3",
                 "--manifest", tmp_path / "m.csv")
    assert again.returncode == 2 and "not overwritten" in again.stderr


def test_a_real_scheduler_and_two_workers(tmp_path):
    dask_cli = Path(PY).with_name("dask")
    if not dask_cli.is_file():
        pytest.skip("the dask command is not installed beside this Python")
    m = _manifest(tmp_path, [f"r{k},cold.toml,{v}" for k, v in enumerate((120.0, 250.0))])
    sched_file = tmp_path / "scheduler.json"
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    procs = [subprocess.Popen([str(dask_cli), "scheduler", "--host", "127.0.0.1", "--port", "0",
                               "--no-dashboard", "--scheduler-file", str(sched_file)],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)]
    try:
        for _ in range(120):
            if sched_file.is_file() and sched_file.stat().st_size:
                break
            time.sleep(0.25)
        address = json.loads(sched_file.read_text())["address"]
        for _ in range(2):
            procs.append(subprocess.Popen([str(dask_cli), "worker", address, "--nthreads", "1", "--nworkers", "1",
                                           "--no-dashboard"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                          env=env, cwd=str(tmp_path)))
        r = _cli("batch", m, "--out", tmp_path / "remote", "--scheduler", address, "--quiet", cwd=tmp_path)
        assert r.returncode == 0, r.stdout + r.stderr
        local = _cli("batch", m, "--out", tmp_path / "local", "--workers", "1", "--quiet", cwd=tmp_path)
        assert local.returncode == 0
        assert (tmp_path / "remote" / "summary.json").read_text() == (tmp_path / "local" / "summary.json").read_text()
    finally:
        for p in procs[::-1]:
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()


def test_report_per_row_on_request(tmp_path):
    from resonance.batch_run import run_batch

    m = _manifest(tmp_path, ["r0,cold.toml,200.0"])
    plain = run_batch([m], tmp_path / "o", workers=1)
    assert plain.submitted == 1 and not (tmp_path / "o" / "cases" / "r0" / "report").exists()
    with_report = run_batch([m], tmp_path / "o", workers=1, report=True)  # the flag is part of the checksum
    assert with_report.submitted == 1
    pdf = tmp_path / "o" / "cases" / "r0" / "report" / "report.pdf"
    assert pdf.read_bytes()[:5] == b"%PDF-"
    assert (tmp_path / "o" / "cases" / "r0" / "report" / "scan_APFC-1.csv").is_file()

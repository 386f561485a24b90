"""The report's stand-alone figure files drawn in a second process: the same files as when drawn
in the calling process, a failed child made good by the caller, no child where forking is unsafe."""

from __future__ import annotations

import os
import subprocess
import sys
import threading

import matplotlib

matplotlib.use("Agg")
import pytest  # noqa: E402

from resonance.outputs import OutputDir  # noqa: E402
from resonance.pipeline import run_check  # noqa: E402
from resonance.report.document import write_report  # noqa: E402
from resonance.report.specs import SERIAL_ENV, FileJob, render_aside  # noqa: E402

from .conftest import CASES  # noqa: E402

needs_fork = pytest.mark.skipif(not hasattr(os, "fork"), reason="os.fork is POSIX only")


@needs_fork
def test_files_from_the_second_process_equal_those_drawn_here(tmp_path, monkeypatch):
    case = CASES / "cold_store_50hz.toml"
    result = run_check(case)
    written = {}
    for mode in ("1", "0"):
        monkeypatch.setenv(SERIAL_ENV, mode)
        od = OutputDir(tmp_path / f"out{mode}", protect=[case])
        names = write_report(result, od, date="2026-01-02")
        od.commit()
        written[mode] = {n: (tmp_path / f"out{mode}" / n).read_bytes() for n in names}
    assert written["1"].keys() == written["0"].keys()
    figures = [n for n in written["1"] if n.endswith((".png", ".svg"))]
    assert len(figures) >= 10
    for n in written["1"]:
        assert written["1"][n] == written["0"][n], n


_FAILED_CHILD = """
import os, sys
from pathlib import Path
from resonance.report.specs import FileJob, render_aside
parent, target = os.getpid(), Path(sys.argv[1])
def render(paths):
    if os.getpid() != parent:
        raise RuntimeError("fails in the child only")
    paths[0].write_text("drawn by the caller", encoding="utf-8")
wait = render_aside([FileJob((target.name,), render)], [(target,)])
assert not target.exists()  # the child ran it (and failed); nothing drawn here yet
wait()
print(target.read_text(encoding="utf-8"))
"""


@needs_fork
def test_a_failed_child_is_made_good_by_the_caller(tmp_path):
    # in a fresh interpreter: one thread, so the child is forked (a test run may hold other threads)
    env = {k: v for k, v in os.environ.items() if k != SERIAL_ENV}
    run = subprocess.run([sys.executable, "-c", _FAILED_CHILD, str(tmp_path / "made_here.txt")], env=env,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert run.stdout.strip() == "drawn by the caller"
    assert "Traceback" not in run.stderr  # the child says nothing: the caller's redraw reports an error


def test_no_child_while_other_threads_run(tmp_path, monkeypatch):
    monkeypatch.delenv(SERIAL_ENV, raising=False)
    pids = []
    target = tmp_path / "f.txt"

    def render(paths):
        pids.append(os.getpid())
        paths[0].write_text("x", encoding="utf-8")

    stop = threading.Event()
    t = threading.Thread(target=stop.wait)
    t.start()
    try:
        wait = render_aside([FileJob(("f.txt",), render)], [(target,)])
        assert pids == [os.getpid()] and target.exists()  # drawn at once, in this process
        wait()
    finally:
        stop.set()
        t.join()


_STOPPED = """
import os, sys, time
from pathlib import Path
from resonance.report.specs import FileJob, render_aside
out = Path(sys.argv[1])
def render(paths):
    time.sleep(0.3)
    paths[0].write_text("x", encoding="utf-8")
jobs = [FileJob((f"f{k}.txt",), render) for k in range(40)]
wait = render_aside(jobs, [(out / f"f{k}.txt",) for k in range(40)])
t = time.perf_counter()
wait(redraw=False)  # the caller's error path: the child is ended, not waited for
print(f"{time.perf_counter() - t:.2f}")
"""


@needs_fork
def test_the_error_path_ends_the_child(tmp_path):
    env = {k: v for k, v in os.environ.items() if k != SERIAL_ENV}
    run = subprocess.run([sys.executable, "-c", _STOPPED, str(tmp_path)], env=env, capture_output=True, text=True,
                         timeout=120)
    assert run.returncode == 0, run.stderr
    assert float(run.stdout) < 2.0  # 40 files of 0.3 s each would take 12 s
    assert len(list(tmp_path.glob("f*.txt"))) < 10


def test_stacked_step_tables_keep_every_row_mark_and_limit():
    from resonance.report.stack import stack_tables
    from resonance.report.tables import Column, Table

    def part(lim, rows, bad):
        cols = (Column("step", "-"), Column(f"TDD\nPCC\nlim {lim}", "%"), Column("V peak\nlim 120", "%"))
        return Table("t.csv", "t", cols, rows, "key", frozenset(bad))

    a = part(12, ((1, 13.0, 101.0), (2, 11.0, 121.0)), {(0, 1), (1, 2)})
    b = part(15, ((1, 16.0, 99.0),), {(0, 1)})
    t = stack_tables([("weak supply", a), ("high voltage, light load", b)], "x.csv", "both")
    assert [c.label for c in t.columns] == ["scenario", "step", "TDD\nPCC\nlim 12/15", "V peak\nlim 120"]
    assert t.rows == (("weak supply", 1, 13.0, 101.0), ("", 2, 11.0, 121.0), ("high voltage, light load", 1, 16.0, 99.0))
    assert t.bad == {(0, 2), (1, 3), (2, 2)}
    assert "each scenario's limit in the order of the rows" in t.note

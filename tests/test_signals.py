"""Interrupted runs: SIGTERM and SIGHUP end a check like SIGINT, leaving no staging folder and
no process behind (the project's own process handling; no outside reference applies)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
import uuid
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "cases" / "demo_plant.toml"

pytestmark = pytest.mark.skipif(not Path("/proc/self/environ").exists(), reason="needs /proc (Linux)")


def _tagged_pids(tag: str) -> list[int]:
    """Processes whose environment carries ``RESONANCE_TEST_TAG=tag`` (children inherit it)."""
    found = []
    needle = f"RESONANCE_TEST_TAG={tag}".encode()
    for d in Path("/proc").iterdir():
        if not d.name.isdigit():
            continue
        try:
            env = (d / "environ").read_bytes()
        except OSError:
            continue
        if needle in env.split(b"\0"):
            found.append(int(d.name))
    return found


def _no_stray(tag: str) -> list[int]:
    for _ in range(50):  # a terminated child may take a moment to be reaped
        left = _tagged_pids(tag)
        if not left:
            return []
        time.sleep(0.1)
    return left


def _start(args: list[str], tag: str) -> subprocess.Popen:
    env = {**os.environ, "RESONANCE_TEST_TAG": tag}
    return subprocess.Popen([sys.executable, *args], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, cwd=ROOT)


@pytest.mark.parametrize("sig, delay_s", [(signal.SIGTERM, 0.6), (signal.SIGTERM, 1.6),
                                          (signal.SIGTERM, 3.0), (signal.SIGHUP, 2.0)])
def test_signal_mid_check_leaves_no_staging_and_no_process(tmp_path, sig, delay_s):
    tag = uuid.uuid4().hex
    out = tmp_path / "out"
    p = _start(["-m", "resonance", "check", str(DEMO), "--out", str(out)], tag)
    time.sleep(delay_s)
    p.send_signal(sig)
    try:
        stdout, stderr = p.communicate(timeout=60)
    except subprocess.TimeoutExpired:  # a hung process is the failure this test looks for
        p.kill()
        p.communicate()
        pytest.fail("the check did not end within 60 s of the signal")
    if p.returncode in (0, 1):  # finished before the signal landed: then its outputs are complete
        assert (out / "results.json").exists()
    elif p.returncode == -int(sig):  # landed before the handlers were installed (a slow start):
        assert not out.exists(), (p.returncode, stderr)  # then nothing was staged yet
    else:
        assert p.returncode == 128 + int(sig), (p.returncode, stderr)
        assert "no partial outputs were left" in stderr and "Traceback" not in stderr
        # the line names the signal
        assert signal.Signals(sig).name in stderr
    left = [e.name for e in out.iterdir()] if out.exists() else []
    assert not [n for n in left if n.startswith(".resonance-partial-")], left
    if p.returncode not in (0, 1):
        assert "results.json" not in left
    assert _no_stray(tag) == []


POOL_SCRIPT = textwrap.dedent("""
    import sys
    import numpy as np
    import pandapower.networks as pn
    from resonance import cli
    from resonance.harmonics import engine
    from resonance.model.netmodel import net_to_arrays
    from resonance.harmonics.scan import sparse_engine

    net = pn.case118()
    arr, _ = net_to_arrays(net, require_grid_data=False)
    eng = sparse_engine(arr)
    engine._POOL_MIN_WORK_S = 0.0  # always use the pool, so the signal lands while it runs
    cli._install_signals()
    h = np.linspace(1.0, 50.0, 40000)
    print("started", flush=True)
    try:
        while True:
            engine.sparse_columns(eng, h, np.array([5]), np.array([5, 0]), workers=2, chunk=64)
    except cli._Terminated as e:
        print("terminated", flush=True)
        sys.exit(128 + e.signum)
""")


def test_sigterm_during_the_sparse_pool_leaves_no_worker(tmp_path):
    tag = uuid.uuid4().hex
    script = tmp_path / "pool_run.py"
    script.write_text(POOL_SCRIPT, encoding="utf-8")
    p = _start([str(script)], tag)
    line = p.stdout.readline()
    assert line.strip() == "started", p.stderr.read()
    # wait until the pool's spawned workers exist (they carry the tag too)
    for _ in range(200):
        if len(_tagged_pids(tag)) > 1:
            break
        time.sleep(0.05)
    assert len(_tagged_pids(tag)) > 1, "the pool never started"
    p.send_signal(signal.SIGTERM)
    try:
        stdout, stderr = p.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        p.kill()
        p.communicate()
        pytest.fail("the pooled scan did not end within 60 s of SIGTERM")
    assert p.returncode == 128 + int(signal.SIGTERM), stderr
    assert _no_stray(tag) == []

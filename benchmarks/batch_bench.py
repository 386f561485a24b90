"""Batch benchmark: a sweep of the demo plant run as a serial loop of ``run_check`` in one process
and as ``resonance batch`` on the embedded Dask cluster, side by side in one run.

Usage: ``python benchmarks/batch_bench.py [--rows 200] [--workers N]``.  Prints cases per minute
for both and, last, ``speedup: <ratio>x`` (batch against the serial loop).
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--rows", type=int, default=200, help="plant variants (a sweep of the supply strength)")
    ap.add_argument("--workers", type=int, default=None, help="worker processes (default: CPUs)")
    args = ap.parse_args()
    from resonance.batch_run import read_rows, run_batch, run_row, sweep_manifest

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for name in ("demo_plant.toml", "demo_plant_intervals.csv"):
            shutil.copy(ROOT / "cases" / name, tmp / name)
        manifest = tmp / "sweep.csv"
        manifest.write_text(sweep_manifest(str(tmp / "demo_plant.toml"), "supply.sc_mva", 150.0, 500.0, args.rows,
                                           manifest), encoding="utf-8")
        rows, _ = read_rows([manifest])
        run_row(rows[0])  # imports and first-call costs out of the serial loop's timing
        t = time.perf_counter()
        serial = [run_row(r) for r in rows]
        t_serial = time.perf_counter() - t
        t = time.perf_counter()
        res = run_batch([manifest], tmp / "out", workers=args.workers)
        t_batch = time.perf_counter() - t
    n = len(rows)
    bad = sum(1 for d in serial if d["status"] != "ok") + len(res.errors)
    print(f"machine: {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f}; {n} variants of the demo plant")
    print(f"serial loop of run_check in one process: {t_serial:.1f} s, {60.0 * n / t_serial:.1f} cases/min")
    print(f"resonance batch on the embedded Dask cluster (cluster start and stop included): {t_batch:.1f} s, "
          f"{60.0 * n / t_batch:.1f} cases/min; rows in error: {bad}")
    print(f"speedup: {t_serial / t_batch:.2f}x")


if __name__ == "__main__":
    main()

"""CSV tables of the scans (edge layer)."""

from __future__ import annotations

import csv
import io

from .study import StudyResult

__all__ = ["write_scan_tables", "scan_csv"]


def scan_csv(sc) -> str:
    """CSV text of one bank scan: h, |Z| for bank off and every step [ohm]."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["h"] + ["z_ohm_bank_off"] + [f"z_ohm_step_{s.step}" for s in sc.steps])
    w.writerows([f"{h:.4f}"] + [f"{z:.6g}" for z in zs]
                for h, zs in zip(sc.h.tolist(), sc.z_ohm.T.tolist()))
    return buf.getvalue()


def write_scan_tables(res: StudyResult, out) -> None:
    """Stage one scan CSV per bank and scenario into an :class:`~resonance.outputs.OutputDir`."""
    for sc in res.scans:
        safe = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in sc.bank.name)
        suffix = "" if sc.scenario == "nominal" else f"_{sc.scenario}"
        out.write_text(f"scan_{safe}{suffix}.csv", scan_csv(sc))

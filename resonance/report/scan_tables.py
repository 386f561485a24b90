"""CSV tables of the scans (edge layer)."""

from __future__ import annotations

from resonance.names import file_stem
from resonance.assessment.study import StudyResult

__all__ = ["write_scan_tables", "scan_csv"]


def scan_csv(sc) -> str:
    """CSV text of one bank scan: h, |Z| for bank off and every step [ohm]."""
    head = ",".join(["h", "z_ohm_bank_off"] + [f"z_ohm_step_{s.step}" for s in sc.steps]) + "\n"
    z = sc.z_ohm.T.tolist()  # rows: h; columns: bank off, step 1..N
    n_col = len(z[0]) if z else 0
    # one %-format per row; the same text csv.writer gives for numbers (no quoting needed)
    row = "%.4f" + ",%.6g" * n_col + "\n"
    return head + "".join([row % (h, *zs) for h, zs in zip(sc.h.tolist(), z)])


def write_scan_tables(res: StudyResult, out) -> None:
    """Stage one scan CSV per bank and scenario into an :class:`~resonance.outputs.OutputDir`."""
    for sc in res.scans:
        safe = file_stem(sc.bank.name)
        suffix = "" if sc.scenario == "nominal" else f"_{sc.scenario}"
        out.write_text(f"scan_{safe}{suffix}.csv", scan_csv(sc))

"""Output folder hygiene: a manifest of what the tool wrote, a lock per folder, CSV cells no
spreadsheet evaluates (the project's own contracts; CSV neutralisation as advised by OWASP,
"CSV Injection")."""

from __future__ import annotations

import csv
import io
import json

import pytest

from resonance.errors import InputError
from resonance.outputs import LOCK, MANIFEST, OutputDir, csv_text_cell


def test_stale_outputs_of_the_previous_run_are_removed_user_files_kept(tmp_path):
    d = tmp_path / "o"
    out = OutputDir(d)
    out.write_text("scan_OLD.png", "old")
    out.write_text("results.json", "{}")
    out.commit()
    (d / "notes.txt").write_text("mine", encoding="utf-8")
    out = OutputDir(d)
    out.write_text("results.json", "{}")
    out.commit()
    assert not (d / "scan_OLD.png").exists()  # written by the tool before, not now: removed
    assert (d / "notes.txt").read_text(encoding="utf-8") == "mine"  # never listed: kept
    assert json.loads((d / MANIFEST).read_text(encoding="utf-8"))["files"] == ["results.json"]
    assert not (d / LOCK).exists()


def test_a_manifest_naming_paths_outside_removes_nothing(tmp_path):
    d = tmp_path / "o"
    d.mkdir()
    victim = tmp_path / "x.txt"
    victim.write_text("keep", encoding="utf-8")
    (d / MANIFEST).write_text(json.dumps({"files": ["../x.txt", str(victim), "/etc/passwd"]}), encoding="utf-8")
    out = OutputDir(d)
    out.write_text("results.json", "{}")
    out.commit()
    assert victim.read_text(encoding="utf-8") == "keep"


def test_a_protected_input_listed_in_an_old_manifest_is_never_removed(tmp_path):
    d = tmp_path / "o"
    d.mkdir()
    inp = d / "intervals.csv"
    inp.write_text("t,kw\n", encoding="utf-8")
    (d / MANIFEST).write_text(json.dumps({"files": ["intervals.csv"]}), encoding="utf-8")
    out = OutputDir(d, protect=[inp])
    out.write_text("results.json", "{}")
    out.commit()
    assert inp.exists()


def test_two_runs_on_one_folder_are_kept_apart(tmp_path):
    d = tmp_path / "o"
    first = OutputDir(d)
    with pytest.raises(InputError) as ei:
        OutputDir(d)
    p = ei.value.problems[0]
    assert p.field == "--out" and "another resonance run" in p.problem
    first.write_text("results.json", "{}")
    first.commit()
    second = OutputDir(d)  # free again
    second.discard()
    assert sorted(x.name for x in d.iterdir()) == [MANIFEST, "results.json"]


def test_a_failed_run_in_a_new_folder_leaves_no_lock_and_no_folder(tmp_path):
    d = tmp_path / "new" / "o"
    out = OutputDir(d)
    out.write_text("a.csv", "x")
    out.discard()
    assert not (tmp_path / "new").exists()


@pytest.mark.parametrize("text, cell", [("=1+2", "'=1+2"), ("+A1", "'+A1"), ("@SUM(A1)", "'@SUM(A1)"),
                                        ("-cmd", "'-cmd"), ("\tx", "'\tx"), ("PFC-1", "PFC-1"),
                                        ("-1.5", "-1.5"), (-2.0, -2.0), (3, 3)])
def test_csv_cells_that_a_spreadsheet_would_run_are_neutralised(text, cell):
    assert csv_text_cell(text) == cell


def test_report_tables_neutralise_a_bank_named_like_a_formula():
    from resonance.report.tables import Column, Table

    t = Table("x.csv", "x", [Column("bank", "-"), Column("kvar", "kvar")], [["=1+2", -5.0]])
    rows = list(csv.reader(io.StringIO(t.csv())))
    assert rows[1] == ["'=1+2", "-5.0"]

"""Faults of the command line itself: a defect of the tool (exit 3), protected inputs,
escaped terminal output (the project's own contracts; no outside reference applies)."""

from __future__ import annotations

import shutil

from resonance import cli
from resonance.cli import main

from .conftest import CASES


def test_a_defect_of_the_tool_exits_3_with_one_line_and_a_traceback_file(tmp_path, monkeypatch, capsys):
    from resonance.assessment import study

    def broken(*a, **k):
        raise ZeroDivisionError("planted defect")

    monkeypatch.setattr(study, "run_study", broken)
    out = tmp_path / "out"
    rc = main(["check", str(CASES / "demo_plant.toml"), "--out", str(out), "--no-plots"])
    err = capsys.readouterr().err
    assert rc == 3
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert "demo_plant.toml" in err and "defect of the tool" in err and "ZeroDivisionError" in err
    log = (out / cli.DEFECT_FILE).read_text(encoding="utf-8")
    assert "Traceback" in log and "planted defect" in log
    # nothing else was left: no staging folder, no results
    assert sorted(p.name for p in out.iterdir()) == [cli.DEFECT_FILE]


def test_demand_csv_named_like_an_output_is_never_overwritten(tmp_path, capsys):
    # the [demand] interval CSV is an input: an output of the same name must be refused
    src = (CASES / "demo_plant.toml").read_text(encoding="utf-8")
    work = tmp_path / "case"
    work.mkdir()
    csv_src = CASES / "demo_plant_intervals.csv"
    data = csv_src.read_bytes()
    (work / "scan_PFC-1.csv").write_bytes(data)
    text = src.replace('intervals_csv = "demo_plant_intervals.csv"', 'intervals_csv = "scan_PFC-1.csv"')
    assert text != src
    case = work / "case.toml"
    case.write_text(text, encoding="utf-8")
    rc = main(["check", str(case), "--out", str(work), "--no-plots", "--no-report"])
    err = capsys.readouterr().err
    assert rc == 2, err
    assert "scan_PFC-1.csv" in err
    assert (work / "scan_PFC-1.csv").read_bytes() == data  # the metered data are intact


def test_empty_out_is_refused(capsys):
    rc = main(["check", str(CASES / "demo_plant.toml"), "--out", ""])
    assert rc == 2
    assert "--out" in capsys.readouterr().err


def test_control_characters_in_a_title_never_reach_the_terminal_raw(tmp_path, capsys):
    src = (CASES / "demo_plant.toml").read_text(encoding="utf-8")
    lines = src.splitlines()
    k = next(i for i, ln in enumerate(lines) if ln.startswith("title"))
    lines[k] = 'title = "Plant \\u001b[31mRED\\u0007 bell"'
    case = tmp_path / "case.toml"
    case.write_text("\n".join(lines) + "\n", encoding="utf-8")
    rc = main(["check", str(case), "--out", str(tmp_path / "out"), "--no-plots", "--no-report"])
    cap = capsys.readouterr()
    assert rc in (0, 1, 2)
    assert "\x1b" not in cap.out + cap.err and "\x07" not in cap.out + cap.err
    if rc != 2:  # accepted: the title is printed with escapes
        assert "\\x1b[31mRED\\x07" in cap.out


def test_escape_keeps_printable_text_and_newlines():
    assert cli._escape("a\nb é ✓") == "a\nb é ✓"
    assert cli._escape("x\x1by\rz\x00") == "x\\x1by\\rz\\x00"


def test_full_disk_is_bad_output_not_a_defect(tmp_path, monkeypatch, capsys):
    import errno

    from resonance import outputs

    def full(self, *a, **k):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(outputs.OutputDir, "commit", full)
    out = tmp_path / "out"
    rc = main(["check", str(CASES / "demo_plant.toml"), "--out", str(out), "--no-plots", "--no-report"])
    err = capsys.readouterr().err
    assert rc == 2 and "No space left on device" in err and "--out" in err
    assert not [p for p in (out.iterdir() if out.exists() else []) if p.name.startswith(".resonance-partial-")]


def test_copy_of_demo_runs_from_another_folder(tmp_path):
    # the input-file list resolves relative names against the case's own folder
    for n in ("demo_plant.toml", "demo_plant_intervals.csv"):
        shutil.copy(CASES / n, tmp_path / n)
    from resonance.inputs.case_load import load_case

    case = cli._input_files(load_case(tmp_path / "demo_plant.toml"), tmp_path / "demo_plant.toml")
    assert [p.name for p in case] == ["demo_plant.toml", "demo_plant_intervals.csv"]

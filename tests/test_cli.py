"""The command line: exit codes, results.json contract keys, outputs, docs."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from resonance.cli import main

from .conftest import CASES, ROOT, SMALL_CASE

CONTRACT_STEP_KEYS = ("step", "kvar_nameplate", "kvar_delivered", "h_estimate", "h_scan", "thd_v_pct",
                      "cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct", "cap_kvar_pct", "duty_ok")


def _strict_json(path):
    def bad(c):
        raise ValueError(f"non-finite number {c} in {path}")
    return json.loads(path.read_text(), parse_constant=bad)


@pytest.mark.parametrize("case", sorted(p.name for p in CASES.glob("*.toml")))
def test_every_bundled_case_runs(tmp_path, case, capsys):
    out = tmp_path / "out"
    rc = main(["check", str(CASES / case), "--out", str(out), "--no-report"])
    assert rc in (0, 1)
    data = _strict_json(out / "results.json")
    assert data["banks"], case
    for b in data["banks"]:
        for key in ("name", "bus", "sc_mva"):
            assert key in b
        assert (out / f"scan_{b['name']}.png").exists()
        for s in b["steps"]:
            for key in CONTRACT_STEP_KEYS:
                assert key in s, (case, key)
    # the exit status follows the findings
    assert rc == (0 if data["passed"] else 1)
    assert any(f["cause"] == "bank" for f in data["findings"]) == (rc == 1)  # the bank's, not the site's
    assert "qualified engineer" in capsys.readouterr().out


def test_passing_case_exits_0(tmp_path, case_file):
    # a small bank far from any harmonic of concern, no sources: nothing to find
    text = SMALL_CASE.replace('[[harmonic_source]]\nname = "D1"\nbus = "LV"\nkva = 300.0\n'
                              'spectrum = {5 = 20.0, 7 = 14.0}\n', "")
    text = text.replace("steps_kvar = [100.0, 100.0, 150.0]", "steps_kvar = [80.0]")
    rc = main(["check", str(case_file(text)), "--out", str(tmp_path / "o"), "--no-report", "--no-plots"])
    data = json.loads((tmp_path / "o" / "results.json").read_text())
    assert data["banks"][0]["steps"][0]["h_scan"] == pytest.approx(14.74, rel=0.03)  # derived sqrt(17.39 MVA/80 kvar); load damping shifts it ~2 %
    assert rc == 0, data["findings"]


def test_output_dir_that_is_a_file(tmp_path, capsys):
    f = tmp_path / "file"
    f.write_text("keep")
    assert main(["check", str(CASES / "demo_plant.toml"), "--out", str(f)]) == 2
    assert "is a file" in capsys.readouterr().err
    assert f.read_text() == "keep"


def test_help_is_fast_and_light():
    # `resonance --help` must not import pandapower or matplotlib (lazy imports)
    code = ("import sys, resonance.cli as c\n"
            "try:\n    c.main(['--help'])\nexcept SystemExit:\n    pass\n"
            "bad = [m for m in ('pandapower', 'matplotlib', 'pandas') if m in sys.modules]\n"
            "print('HEAVY', bad)\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, timeout=60)
    assert "HEAVY []" in r.stdout, r.stdout + r.stderr


def test_cli_doc_is_current():
    from resonance.docgen import cli_markdown

    env_cols = os.environ.get("COLUMNS")
    os.environ["COLUMNS"] = "100"
    try:
        text = cli_markdown()
    finally:
        if env_cols is None:
            os.environ.pop("COLUMNS")
        else:
            os.environ["COLUMNS"] = env_cols
    assert (ROOT / "docs" / "cli.md").read_text() == text, "regenerate: COLUMNS=100 python -m resonance.docgen > docs/cli.md"


def test_python_dash_m(tmp_path):
    r = subprocess.run([sys.executable, "-m", "resonance", "--version"], capture_output=True, text=True, cwd=ROOT,
                       timeout=60)
    assert r.returncode == 0 and "resonance" in r.stdout


def test_demand_table_weights_steps_by_time(tmp_path, case_file):
    # constant load: the controller settles on one step (derived from the required kvar
    # Q - P tan(acos 0.95) for P = 600 kW, Q = 450 kvar -> 252.8 kvar -> step 3 of 100 kvar stages
    # with the 0.5-stage dead band), so all the time is in that step.
    csv = tmp_path / "flat.csv"
    rows = ["timestamp,kw,kvar"] + [f"2026-01-01T{h:02d}:{m:02d}:00,600,450" for h in range(6) for m in (0, 15, 30, 45)]
    csv.write_text("\n".join(rows) + "\n")
    text = SMALL_CASE.replace("steps_kvar = [100.0, 100.0, 150.0]", "steps_kvar = [100.0, 100.0, 100.0, 100.0]")
    text += '\n[demand]\nintervals_csv = "flat.csv"\n'
    out = tmp_path / "o"
    rc = main(["check", str(case_file(text)), "--out", str(out), "--no-report", "--no-plots", "--quiet"])
    assert rc in (0, 1)
    data = json.loads((out / "results.json").read_text())
    t = data["banks"][0]["time_in_step"]
    assert len(t["fraction"]) == 5
    assert t["fraction"][3] == pytest.approx(1.0, abs=1.0 / len(rows))  # the first interval may start lower
    assert data["banks"][0]["steps"][2]["time_fraction"] == pytest.approx(t["fraction"][3])


def test_demand_bad_csv_exit_2_with_line_and_column(tmp_path, case_file, capsys):
    csv = tmp_path / "bad.csv"
    csv.write_text("timestamp,kw,kvar\n2026-01-01T00:00:00,600,450\n2026-01-01T00:15:00,abc,450\n")
    text = SMALL_CASE + '\n[demand]\nintervals_csv = "bad.csv"\n'
    rc = main(["check", str(case_file(text)), "--out", str(tmp_path / "o"), "--no-report", "--no-plots"])
    err = capsys.readouterr().err
    assert rc == 2
    assert "line 3" in err and "kw" in err.lower()
    assert not (tmp_path / "o" / "results.json").exists()

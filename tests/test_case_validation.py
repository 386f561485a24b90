"""Bad case files: every validation rule gives exit status 2 and names the file and the field."""

from __future__ import annotations

import pytest

from resonance.cli import main

from .conftest import SMALL_CASE


def _run_bad(case_file, tmp_path, capsys, text):
    p = case_file(text)
    rc = main(["check", str(p), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    return rc, err, p


BAD = [
    # (description, transformation of SMALL_CASE, expected field, expected words)
    ("negative impedance", ("z_pct = 5.5", "z_pct = -5.5"), "transformer[0].z_pct", "greater than"),
    ("z in per unit", ("z_pct = 5.5", "z_pct = 0.055"), "transformer[0].z_pct", "per unit"),
    ("kV given in volts", ("lv_kv = 0.48", "lv_kv = 480.0"), "transformer[0].lv_kv", "volts"),
    ("supply kV in volts", ("kv = 13.8", "kv = 13800.0"), "supply.kv", "volts"),
    ("pf above one", ("pf = 0.85", "pf = 1.2"), "load[0].pf", "must be in (0, 1]"),
    ("pf as percent", ("pf = 0.85", "pf = 85.0"), "load[0].pf", "percentage"),
    ("zero pf", ("pf = 0.85", "pf = 0.0"), "load[0].pf", "must be in (0, 1]"),
    ("unknown key", ("x_r = 6.0", "x_r = 6.0\nxr = 6.0"), "transformer[0].xr", "unknown key"),
    ("missing key", ("kva = 1500.0\n", ""), "transformer[0].kva", "required"),
    ("bank on missing bus", ('bus = "LV"\nrated_kv', 'bus = "LV2"\nrated_kv'), "bank[0].bus", "does not exist"),
    ("negative stage", ("steps_kvar = [100.0, 100.0, 150.0]", "steps_kvar = [100.0, -100.0]"),
     "bank[0].steps_kvar", "> 0 kvar"),
    ("frequency", ("frequency_hz = 60", "frequency_hz = 55"), "frequency_hz", "50"),
    ("spectrum order 1", ("spectrum = {5 = 20.0, 7 = 14.0}", "spectrum = {1 = 20.0}"),
     "harmonic_source[0].spectrum", "order"),
    ("spectrum negative", ("spectrum = {5 = 20.0, 7 = 14.0}", "spectrum = {5 = -20.0}"),
     "harmonic_source[0].spectrum", "between 0"),
    ("unknown spectrum name", ("spectrum = {5 = 20.0, 7 = 14.0}", 'spectrum = "six-pulse-idael"'),
     "harmonic_source[0].spectrum", "six-pulse-ideal"),
    ("order above scan range", ("spectrum = {5 = 20.0, 7 = 14.0}", "spectrum = {5 = 20.0, 61 = 1.0}"),
     "harmonic_source[0].spectrum", "h_max"),
    ("transformer voltage mismatch", ("hv_kv = 13.8", "hv_kv = 4.16"), "transformer[0].hv_kv", "does not match"),
    ("bank rating unsuited", ("rated_kv = 0.48", "rated_kv = 4.16"), "bank[0].rated_kv", "does not suit"),
    ("duplicate name", ('[[bank]]\nname = "B1"', '[[bank]]\nname = "B1"\nbus = "LV"\nrated_kv = 0.48\n'
                        'steps_kvar = [50.0]\n\n[[bank]]\nname = "B1"'), "bank[1].name", "duplicate"),
    ("weak stronger than nominal", ("x_r = 10.0", "x_r = 10.0\nsc_mva_min = 90.0"), "supply", "sc_mva_min"),
    ("not toml", ("[supply]", "[supply"), "", "TOML"),
]


@pytest.mark.parametrize("desc,change,field,words", BAD, ids=[b[0] for b in BAD])
def test_bad_case_exit_2_names_field(case_file, tmp_path, capsys, desc, change, field, words):
    old, new = change
    assert old in SMALL_CASE, desc
    rc, err, p = _run_bad(case_file, tmp_path, capsys, SMALL_CASE.replace(old, new, 1))
    assert rc == 2, err
    assert str(p) in err
    if field:
        assert f": {field}:" in err or f": {field} " in err or f": {field}" in err, err
    assert words.lower() in err.lower(), err
    assert "Traceback" not in err
    assert not (tmp_path / "out" / "results.json").exists()


def test_island_not_connected(case_file, tmp_path, capsys):
    text = SMALL_CASE + """
[[transformer]]
name = "T9"
hv_bus = "ISLAND-HV"
lv_bus = "ISLAND-LV"
kva = 500.0
hv_kv = 4.16
lv_kv = 0.48
z_pct = 5.0
x_r = 5.0

[[load]]
name = "Lost"
bus = "ISLAND-LV"
kw = 10.0
pf = 0.9
"""
    rc, err, _ = _run_bad(case_file, tmp_path, capsys, text)
    assert rc == 2
    assert "load[1].bus" in err and "not connected to the supply" in err


def test_several_errors_reported_at_once(case_file, tmp_path, capsys):
    text = SMALL_CASE.replace("z_pct = 5.5", "z_pct = -1.0").replace("pf = 0.85", "pf = 3.0")
    rc, err, _ = _run_bad(case_file, tmp_path, capsys, text)
    assert rc == 2
    assert "transformer[0].z_pct" in err and "load[0].pf" in err


def test_missing_file_and_directory(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "o")]) == 2
    assert "file not found" in capsys.readouterr().err
    assert main(["check", str(tmp_path), "--out", str(tmp_path / "o")]) == 2
    assert "directory" in capsys.readouterr().err


def test_usage_error_exit_2(capsys):
    assert main(["check"]) == 2
    assert main(["frobnicate"]) == 2
    assert main([]) == 2

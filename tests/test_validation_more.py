"""Bad input, unit hints, safe outputs and numerical edge cases, all through ``main([...])``.

Every validation rule of :mod:`resonance.inputs.case` has a case here (or in
tests/test_case_validation.py): exit status 2, one line per problem naming the
file and the field, no traceback and no results written.
"""

from __future__ import annotations

import json
import math
import os
import tomllib

import pytest

from resonance.inputs.case_load import parse_case
from resonance.inputs.case_checks import case_hints
from resonance.inputs.case_checks import sc_kva_estimate
from resonance.cli import main

from .conftest import SMALL_CASE

#: [supply] table of SMALL_CASE, used as an anchor for insertions
SUPPLY_XR = "x_r = 10.0\n"
#: the bank table of SMALL_CASE
BANK = '[[bank]]\nname = "B1"\nbus = "LV"\nrated_kv = 0.48\nsteps_kvar = [100.0, 100.0, 150.0]\n'
SOURCE = 'spectrum = {5 = 20.0, 7 = 14.0}'
CABLE = ('\n[[cable]]\nname = "C1"\nfrom_bus = "LV"\nto_bus = "LV2"\nlength_m = {length}\n'
         'r_ohm_per_km = {r}\nx_ohm_per_km = {x}\n{more}\n')


def _cable(length="30.0", r="0.2", x="0.08", more=""):
    return SMALL_CASE + CABLE.format(length=length, r=r, x=x, more=more)


def _strict_json(path):
    def bad(c):
        raise ValueError(f"non-finite number {c} in {path}")
    return json.loads(path.read_text(encoding="utf-8"), parse_constant=bad)


def _run(case_file, tmp_path, capsys, text, name="case.toml", extra=("--no-plots", "--no-report"), out="out"):
    p = case_file(text, name)
    rc = main(["check", str(p), "--out", str(tmp_path / out), *extra])
    cap = capsys.readouterr()
    return rc, cap.out, cap.err, p


# (description, case text, expected field, expected words); every rule of case.py
RULES = [
    # supply
    ("supply kv too low", SMALL_CASE.replace("kv = 13.8", "kv = 0.01"), "supply.kv", "greater than"),
    ("supply sc zero", SMALL_CASE.replace("sc_mva = 48.0", "sc_mva = 0.0"), "supply.sc_mva", "greater than"),
    ("supply x_r zero", SMALL_CASE.replace(SUPPLY_XR, "x_r = 0.0\n", 1), "supply.x_r", "greater than"),
    ("supply x_r huge", SMALL_CASE.replace(SUPPLY_XR, "x_r = 500.0\n", 1), "supply.x_r", "less than or equal"),
    ("x_r_min without sc_mva_min", SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "x_r_min = 5.0\n", 1), "supply",
     "sc_mva_min"),
    ("background above 30 %", SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "background_pct = {5 = 40.0}\n", 1),
     "supply.background_pct", "between 0 and 30"),
    ("background order 1", SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "background_pct = {1 = 4.0}\n", 1),
     "supply.background_pct", ">= 2"),
    ("background above h_max", SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "background_pct = {55 = 0.5}\n", 1),
     "supply.background_pct", "h_max"),
    ("background angle order 1",
     SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "background_pct = {5 = 1.0}\nbackground_phase_deg = {1 = 3.0}\n", 1),
     "supply.background_phase_deg", ">= 2"),
    ("background angle without magnitude",
     SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "background_pct = {5 = 1.0}\nbackground_phase_deg = {7 = 3.0}\n", 1),
     "supply.background_phase_deg", "no magnitude"),
    ("no supply", SMALL_CASE.replace('[supply]\nbus = "HV"\nkv = 13.8\nsc_mva = 48.0\nx_r = 10.0\n', ""),
     "supply", "required"),
    # transformer
    ("transformer kva zero", SMALL_CASE.replace("kva = 1500.0", "kva = 0.0"), "transformer[0].kva", "greater than"),
    ("transformer z too large", SMALL_CASE.replace("z_pct = 5.5", "z_pct = 40.0"), "transformer[0].z_pct",
     "less than or equal"),
    ("transformer x_r tiny", SMALL_CASE.replace("x_r = 6.0", "x_r = 0.05"), "transformer[0].x_r", "greater than"),
    ("windings swapped", SMALL_CASE.replace("hv_kv = 13.8\nlv_kv = 0.48", "hv_kv = 0.48\nlv_kv = 13.8"),
     "transformer[0]", "swap"),
    ("transformer one bus", SMALL_CASE.replace('lv_bus = "LV"', 'lv_bus = "HV"'), "transformer[0]", "same bus"),
    ("transformer hv_kv in volts", SMALL_CASE.replace("hv_kv = 13.8", "hv_kv = 13800.0"), "transformer[0].hv_kv",
     "volts"),
    ("parallel transformer lv mismatch", SMALL_CASE.replace(BANK, "") + SMALL_CASE[SMALL_CASE.index("[[transformer]]"):
                                                                                  SMALL_CASE.index("[[load]]")]
     .replace('"T1"', '"T2"').replace("lv_kv = 0.48", "lv_kv = 0.6") + BANK, "transformer[1].lv_kv", "does not match"),
    # cable
    ("cable negative length", _cable(length="-5.0"), "cable[0].length_m", "greater than or equal"),
    ("cable r too large", _cable(r="80.0"), "cable[0].r_ohm_per_km", "less than or equal"),
    ("cable zero length", _cable(length="0.0"), "cable[0].length_m", "zero series impedance"),
    ("cable zero impedance", _cable(r="0.0", x="0.0"), "cable[0].r_ohm_per_km", "zero series impedance"),
    ("cable one bus", _cable().replace('to_bus = "LV2"', 'to_bus = "LV"'), "cable[0]", "same bus"),
    ("cable parallel zero", _cable(more="parallel = 0"), "cable[0].parallel", "greater than or equal"),
    ("cable parallel float", _cable(more="parallel = 2.0"), "cable[0].parallel", "valid integer"),
    ("cable between voltages", _cable().replace('to_bus = "LV2"', 'to_bus = "HV"'), "cable[0]", "joins bus"),
    ("cable island", SMALL_CASE + CABLE.format(length="10.0", r="0.2", x="0.08", more="")
     .replace('from_bus = "LV"', 'from_bus = "X1"').replace('to_bus = "LV2"', 'to_bus = "X2"'),
     "cable[0].from_bus", "not connected to the supply"),
    # load
    ("load kw negative", SMALL_CASE.replace("kw = 600.0", "kw = -600.0"), "load[0].kw", "greater than or equal"),
    ("load pf nan", SMALL_CASE.replace("pf = 0.85", "pf = nan"), "load[0].pf", "finite"),
    ("load bus typo", SMALL_CASE.replace('bus = "LV"\nkw', 'bus = "Lv"\nkw'), "load[0].bus", "did you mean 'LV'"),
    # harmonic source
    ("source kva zero", SMALL_CASE.replace("kva = 300.0", "kva = 0.0"), "harmonic_source[0].kva", "greater than"),
    ("spectrum above 200 %", SMALL_CASE.replace(SOURCE, "spectrum = {5 = 250.0}"), "harmonic_source[0].spectrum",
     "between 0 and 200"),
    ("spectrum empty", SMALL_CASE.replace(SOURCE, "spectrum = {}"), "harmonic_source[0].spectrum", "empty"),
    ("spectrum order not integer", SMALL_CASE.replace(SOURCE, 'spectrum = {"5.5" = 3.0}'),
     "harmonic_source[0].spectrum.5.5", "integer"),
    ("spectrum value a string", SMALL_CASE.replace(SOURCE, 'spectrum = {5 = "20"}'),
     "harmonic_source[0].spectrum.5", "valid number"),
    ("spectrum a number", SMALL_CASE.replace(SOURCE, "spectrum = 5"), "harmonic_source[0].spectrum",
     "built-in spectrum name or a table"),
    ("source angle order 1", SMALL_CASE.replace(SOURCE, SOURCE + "\nphase_deg = {1 = 10.0}"),
     "harmonic_source[0].phase_deg", ">= 2"),
    ("source angle without magnitude", SMALL_CASE.replace(SOURCE, SOURCE + "\nphase_deg = {11 = 10.0}"),
     "harmonic_source[0].phase_deg", "no magnitude"),
    ("source on missing bus", SMALL_CASE.replace('bus = "LV"\nkva = 300.0', 'bus = "MCC"\nkva = 300.0'),
     "harmonic_source[0].bus", "does not exist"),
    # bank
    ("bank kv in volts", SMALL_CASE.replace("rated_kv = 0.48", "rated_kv = 480.0"), "bank[0].rated_kv", "volts"),
    ("bank no stages", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[]"), "bank[0].steps_kvar", "at least 1"),
    ("bank 65 stages", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[" + ", ".join(["5.0"] * 65) + "]"),
     "bank[0].steps_kvar", "at most 64"),
    ("bank stage nan", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[100.0, nan]"), "bank[0].steps_kvar[1]", "finite"),
    ("detuning too large", SMALL_CASE.replace("rated_kv = 0.48\n", "rated_kv = 0.48\ndetuning_pct = 60.0\n"),
     "bank[0].detuning_pct", "less than 50"),
    ("detuning as a fraction", SMALL_CASE.replace("rated_kv = 0.48\n", "rated_kv = 0.48\ndetuning_pct = 0.07\n"),
     "bank[0].detuning_pct", "fraction"),
    ("reactor q one", SMALL_CASE.replace("rated_kv = 0.48\n", "rated_kv = 0.48\ndetuning_pct = 7.0\nreactor_q = 1.0\n"),
     "bank[0].reactor_q", "greater than"),
    ("bank beyond the supply", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[10000.0, 10000.0]"),
     "bank[0].steps_kvar", "at or below the fundamental"),
    ("bank names share a file name", SMALL_CASE + BANK.replace('"B1"', '"B 1"').replace("[100.0, 100.0, 150.0]",
                                                                                         "[50.0]")
     + BANK.replace('"B1"', '"B_1"').replace("[100.0, 100.0, 150.0]", "[50.0]"), "bank[2].name",
     "same output file names"),
    ("bank names differ in case only", SMALL_CASE + BANK.replace('"B1"', '"b1"').replace("[100.0, 100.0, 150.0]",
                                                                                           "[50.0]"),
     "bank[1].name", "same output file names"),
    ("bank name hits weak outputs", SMALL_CASE.replace(SUPPLY_XR, SUPPLY_XR + "sc_mva_min = 30.0\n", 1)
     + BANK.replace('"B1"', '"B1_weak"').replace("[100.0, 100.0, 150.0]", "[50.0]"), "bank[1].name", "weak-supply"),
    ("no bank", SMALL_CASE.replace(BANK, ""), "bank", "required"),
    # study
    ("h_max too low", SMALL_CASE + "\n[study]\nh_max = 1.0\n", "study.h_max", "greater than or equal"),
    ("h_max too high", SMALL_CASE + "\n[study]\nh_max = 500.0\n", "study.h_max", "less than or equal"),
    ("h_step too coarse", SMALL_CASE + "\n[study]\nh_step = 0.5\n", "study.h_step", "less than or equal"),
    ("margin too wide", SMALL_CASE + "\n[study]\nmargin_pct = 60.0\n", "study.margin_pct", "less than or equal"),
    ("unknown load model", SMALL_CASE + '\n[study]\nload_model = "ohmic"\n', "study.load_model", "parallel_rl"),
    ("demand given twice", SMALL_CASE + "\n[study]\nmax_demand_kw = 800.0\nmax_demand_a = 1000.0\n",
     "study.max_demand_a", "not both"),
    ("demand infinite", SMALL_CASE + "\n[study]\nmax_demand_kw = inf\n", "study.max_demand_kw", "finite"),
    ("pcc missing", SMALL_CASE + '\n[study]\npcc_bus = "PCC"\n', "study.pcc_bus", "does not exist"),
    ("pcc on an island", SMALL_CASE + CABLE.format(length="10.0", r="0.2", x="0.08", more="")
     .replace('from_bus = "LV"', 'from_bus = "X1"').replace('to_bus = "LV2"', 'to_bus = "X2"')
     + '\n[study]\npcc_bus = "X1"\n', "study.pcc_bus", "not connected to the supply"),
    ("unknown study key", SMALL_CASE + "\n[study]\nhmax = 40.0\n", "study.hmax", "unknown key"),
    # types and the document
    ("number as boolean", SMALL_CASE.replace("kv = 13.8", "kv = true"), "supply.kv", "valid number"),
    ("number as string", SMALL_CASE.replace("kva = 1500.0", 'kva = "1500"'), "transformer[0].kva", "valid number"),
    ("array of tables as a table", SMALL_CASE.replace("[[transformer]]", "[transformer]"), "transformer",
     "valid list"),
    ("empty title", SMALL_CASE.replace('title = "Test plant"', 'title = ""'), "title", "at least 1"),
    ("unknown top-level key", "colour = 3\n" + SMALL_CASE, "colour", "unknown key"),
    ("key with a newline", SMALL_CASE.replace("x_r = 6.0", 'x_r = 6.0\n"a\\nb" = 1'), "transformer[0].a\\nb",
     "unknown key"),
]


@pytest.mark.parametrize("desc,text,field,words", RULES, ids=[r[0] for r in RULES])
def test_rule_exit_2_one_line_per_problem(case_file, tmp_path, capsys, desc, text, field, words):
    assert text != SMALL_CASE, desc
    rc, out, err, p = _run(case_file, tmp_path, capsys, text)
    assert rc == 2, (desc, err, out)
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert lines, desc
    for line in lines:  # one line per problem: file, field, problem
        assert line.startswith(f"error: {p}: "), line
    hit = [ln for ln in lines if (f": {field}:" in ln if field else True) and words.lower() in ln.lower()]
    assert hit, (desc, err)
    assert not (tmp_path / "out" / "results.json").exists()


def test_schema_errors_all_at_once(case_file, tmp_path, capsys):
    text = (SMALL_CASE.replace("kv = 13.8", "kv = 13800.0").replace("z_pct = 5.5", "z_pct = 99.0")
            .replace("pf = 0.85", "pf = 85.0").replace("[100.0, 100.0, 150.0]", "[100.0, -1.0]")
            .replace("x_r = 6.0", "x_r = 6.0\nkVA = 3.0"))
    rc, _, err, _ = _run(case_file, tmp_path, capsys, text)
    assert rc == 2
    for field in ("supply.kv", "transformer[0].z_pct", "load[0].pf", "bank[0].steps_kvar", "transformer[0].kVA"):
        assert f": {field}:" in err, (field, err)


def test_consistency_errors_all_at_once(case_file, tmp_path, capsys):
    text = (SMALL_CASE.replace("hv_kv = 13.8", "hv_kv = 4.16").replace('bus = "LV"\nkw', 'bus = "LV9"\nkw')
            + BANK.replace("[100.0, 100.0, 150.0]", "[20.0]")
            + '\n[study]\npcc_bus = "NOWHERE"\n')
    rc, _, err, _ = _run(case_file, tmp_path, capsys, text)
    assert rc == 2
    for field, words in (("transformer[0].hv_kv", "does not match"), ("load[0].bus", "does not exist"),
                         ("bank[1].name", "duplicate"), ("study.pcc_bus", "does not exist")):
        assert any(f": {field}:" in ln and words in ln for ln in err.splitlines()), (field, err)


def test_garbage_files_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_bytes(b"title = \"\xff\xfe\"\n")
    assert main(["check", str(bad), "--out", str(tmp_path / "o")]) == 2
    assert "UTF-8" in capsys.readouterr().err
    bad.write_text("[[bank]\nname =", encoding="utf-8")
    assert main(["check", str(bad), "--out", str(tmp_path / "o")]) == 2
    assert "not valid TOML" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


# ---------------------------------------------------------------------------------------- hints

def _hints(text):
    return [str(h) for h in case_hints(parse_case(tomllib.loads(text), "case.toml"))]


HINTS = [
    ("supply sc in kVA", SMALL_CASE.replace("sc_mva = 48.0", "sc_mva = 48000.0"), "supply.sc_mva",
     "looks like a value in kVA"),
    ("stages in Mvar", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[0.1, 0.1]"), "bank[0].steps_kvar", "Mvar"),
    ("bank above the transformer", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[1000.0, 1000.0]"),
     "bank[0].steps_kvar", "133 % of the 1,500 kVA"),
    ("large voltage rise", SMALL_CASE.replace("[100.0, 100.0, 150.0]", "[1000.0, 1000.0]"), "bank[0].steps_kvar",
     "raises the voltage"),
    ("50 Hz with 60 Hz voltages", SMALL_CASE.replace("frequency_hz = 60", "frequency_hz = 50"), "frequency_hz",
     "typical of 60 Hz"),
    ("transformer in MVA", SMALL_CASE.replace("kva = 1500.0", "kva = 8.0").replace("[100.0, 100.0, 150.0]", "[0.5]"),
     "transformer[0].kva", "MVA"),
    ("source in MVA", SMALL_CASE.replace("kva = 300.0", "kva = 0.3"), "harmonic_source[0].kva", "MVA"),
    ("built-in spectrum beyond h_max", SMALL_CASE.replace(SOURCE, 'spectrum = "six-pulse-ideal"')
     + "\n[study]\nh_max = 20.0\n", "harmonic_source[0].spectrum", "(23 to 49); they are left out"),
]


@pytest.mark.parametrize("desc,text,field,words", HINTS, ids=[h[0] for h in HINTS])
def test_hint(desc, text, field, words):
    hits = [h for h in _hints(text) if h.startswith(f"case.toml: {field}: ") and words in h]
    assert hits, (desc, _hints(text))


def test_plain_case_has_no_hints():
    assert _hints(SMALL_CASE) == []
    sixty = SMALL_CASE.replace("kv = 13.8", "kv = 11.0").replace("hv_kv = 13.8", "hv_kv = 11.0")
    # 11 kV and 0.48 kV: voltages of both kinds, so no frequency hint
    assert not [h for h in _hints(sixty) if "frequency_hz" in h]


def test_sc_estimate_matches_published_example():
    # 1500 kVA, 5.5 %, 48 MVA utility -> S_sys = 17 391 kVA (REFERENCES.md, resonance: published example);
    # with equal X/R the complex sum equals the magnitude sum of the published formula
    text = SMALL_CASE.replace(SUPPLY_XR, "x_r = 6.0\n", 1)
    sc = sc_kva_estimate(parse_case(tomllib.loads(text), "case.toml"))
    assert sc["LV"] == pytest.approx(17391.0, rel=1e-4)
    assert sc["HV"] == pytest.approx(48000.0, rel=1e-12)  # the supply itself (derived)


# -------------------------------------------------------------------------------------- outputs

def _listing(d):
    return sorted(p.name for p in d.iterdir()) if d.exists() else None


@pytest.mark.parametrize("target,plots", [("resonance.report.scan_tables.scan_csv", False), ("resonance.report.figures.draw_scan_all", True)])
def test_failure_mid_run_leaves_nothing(case_file, tmp_path, capsys, monkeypatch, target, plots):
    module, name = target.rsplit(".", 1)
    mod = __import__(module, fromlist=[name])

    def boom(*a, **k):
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(mod, name, boom)
    p = case_file(SMALL_CASE)
    out = tmp_path / "fresh" / "out"
    args = ["check", str(p), "--out", str(out), "--no-report"] + ([] if plots else ["--no-plots"])
    # an unexpected error is a defect of the tool: exit 3, and the only file left is its traceback
    assert main(args) == 3
    assert "defect of the tool" in capsys.readouterr().err
    assert _listing(out) == ["resonance-defect.txt"]
    assert "disk on fire" in (out / "resonance-defect.txt").read_text(encoding="utf-8")
    # an existing directory with an earlier run keeps exactly what it had (plus the defect file)
    (out / "resonance-defect.txt").unlink()
    (out / "results.json").write_text("earlier run", encoding="utf-8")
    assert main(args) == 3
    assert _listing(out) == ["resonance-defect.txt", "results.json"]
    assert (out / "results.json").read_text(encoding="utf-8") == "earlier run"
    capsys.readouterr()


def test_out_is_a_file(case_file, tmp_path, capsys):
    p = case_file(SMALL_CASE)
    f = tmp_path / "notes.txt"
    f.write_text("keep me", encoding="utf-8")
    rc = main(["check", str(p), "--out", str(f), "--no-plots", "--no-report"])
    err = capsys.readouterr().err
    assert rc == 2
    assert f"error: {f}: --out: exists and is a file" in err
    assert f.read_text(encoding="utf-8") == "keep me"


def test_case_named_results_json_in_out_dir(case_file, tmp_path, capsys):
    p = case_file(SMALL_CASE, "results.json")
    before = p.read_bytes()
    rc = main(["check", str(p), "--out", str(tmp_path), "--no-plots", "--no-report"])
    err = capsys.readouterr().err
    assert rc == 2
    assert "would overwrite an input file" in err and "Traceback" not in err
    assert p.read_bytes() == before
    # no other output was moved into place and no staging directory is left
    assert _listing(tmp_path) == ["results.json"]


def test_hard_link_to_the_case_is_protected(case_file, tmp_path, capsys):
    p = case_file(SMALL_CASE)
    before = p.read_bytes()
    out = tmp_path / "out"
    out.mkdir()
    try:
        os.link(p, out / "results.json")
    except OSError:
        pytest.skip("file system without hard links")
    rc = main(["check", str(p), "--out", str(out), "--no-plots", "--no-report"])
    assert rc == 2
    assert "would overwrite an input file" in capsys.readouterr().err
    assert p.read_bytes() == before
    assert _listing(out) == ["results.json"]


def test_output_name_taken_by_a_directory(case_file, tmp_path, capsys):
    p = case_file(SMALL_CASE)
    out = tmp_path / "out"
    (out / "results.json").mkdir(parents=True)
    rc = main(["check", str(p), "--out", str(out), "--no-plots", "--no-report"])
    assert rc == 2
    assert "taken by a directory" in capsys.readouterr().err
    assert _listing(out) == ["results.json"]  # no scan CSV moved in before the refusal


def test_results_json_is_moved_last_and_reported(case_file, tmp_path, capsys):
    from resonance.outputs import OutputDir

    out = OutputDir(tmp_path / "o")
    out.write_text("results.json", "{}")
    out.write_text("b.csv", "x")
    out.write_text("a.csv", "y")
    done = out.commit()
    assert [d.name for d in done] == ["b.csv", "a.csv", "results.json"]
    assert _listing(tmp_path / "o") == [".resonance-manifest.json", "a.csv", "b.csv", "results.json"]
    with pytest.raises(ValueError):
        OutputDir(tmp_path / "o2").file("../escape.txt")
    # the CLI says what it wrote where
    p = case_file(SMALL_CASE)
    rc = main(["check", str(p), "--out", str(tmp_path / "o3"), "--no-plots", "--no-report"])
    assert rc in (0, 1)
    said = capsys.readouterr().out
    line = next(ln for ln in said.splitlines() if ln.startswith("wrote "))
    assert line.startswith(f"wrote ") and f"files to {tmp_path / 'o3'}: scan_B1.csv" in line
    assert line.endswith(", results.json")  # moved into place last


# ------------------------------------------------------------------------------ numerical edges

def _single_bus(sc_mva, steps, spectrum=None, f=60, kv=0.48, x_r=200.0, study="", detuning=None):
    src = (f'\n[[harmonic_source]]\nname = "D"\nbus = "PCC"\nkva = 50.0\nspectrum = {spectrum}\n'
           if spectrum else "")
    det = f"detuning_pct = {detuning!r}\n" if detuning is not None else ""
    return (f'title = "edge"\nfrequency_hz = {f}\n\n[supply]\nbus = "PCC"\nkv = {kv}\nsc_mva = {sc_mva!r}\n'
            f'x_r = {x_r}\n{src}\n[[bank]]\nname = "B"\nbus = "PCC"\nrated_kv = {kv}\n{det}steps_kvar = {steps}\n\n'
            f'[study]\nload_model = "none"\n{study}\n')


def _edge(case_file, tmp_path, capsys, text, out="out"):
    rc, stdout, err, _ = _run(case_file, tmp_path, capsys, text, out=out)
    assert "Traceback" not in err
    assert rc in (0, 1), err
    return rc, _strict_json(tmp_path / out / "results.json"), stdout


def test_undamped_resonance_on_a_grid_point_and_an_injected_order(case_file, tmp_path, capsys):
    # 4.9 MVA, 100 kvar: h = sqrt(S_sc/Q) = 7.00 exactly (derived), a scan point and an injected order
    rc, data, out = _edge(case_file, tmp_path, capsys, _single_bus(4.9, "[100.0]", "{5 = 20.0, 7 = 14.0}"))
    s = data["banks"][0]["steps"][0]
    assert s["h_scan"] == pytest.approx(7.0, abs=0.01)  # derived from h = sqrt(S_sc/Q)
    assert s["damping_sensitive"] is True
    assert s["z_peak_ohm"] is not None and s["z_peak_ohm"] > 0
    assert any("lightly damped" in w for w in data["warnings"])
    assert "lightly damped" in out
    assert rc == 1 and data["findings"]  # 0 % margin to an injected order is a finding


def test_detuned_bank_tuned_exactly_on_an_injected_order(case_file, tmp_path, capsys):
    # p = 1/49 tunes the series branch to n = 1/sqrt(p) = 7 (derived), right on the injected 7th
    rc, data, _ = _edge(case_file, tmp_path, capsys,
                        _single_bus(20.0, "[100.0]", "{5 = 20.0, 7 = 14.0}", detuning=100.0 / 49.0))
    s = data["banks"][0]["steps"][0]
    assert data["banks"][0]["tuning_order"] == pytest.approx(7.0, rel=1e-9)
    assert s["cap_i_rms_pct"] is not None and s["cap_i_rms_pct"] > 100.0


def test_bank_large_against_the_source(case_file, tmp_path, capsys):
    # 250 kvar on 0.5 MVA: voltage V = 1/(1 - Q/S_sc) = 2 pu, h = sqrt(2) (derived, lossless single bus)
    text = _single_bus(0.5, "[125.0, 125.0]", "{5 = 20.0}", x_r=200.0)
    assert any("raises the voltage" in h for h in _hints(text))
    rc, data, _ = _edge(case_file, tmp_path, capsys, text)
    steps = data["banks"][0]["steps"]
    assert steps[0]["v_bus_pu"] == pytest.approx(1.0 / (1.0 - 0.25), rel=2e-3)  # derived, R/X = 1/200
    assert steps[1]["v_bus_pu"] == pytest.approx(1.0 / (1.0 - 0.5), rel=2e-3)
    assert steps[1]["h_scan"] == pytest.approx(math.sqrt(2.0), rel=2e-3)
    assert rc == 1  # 2 pu on the capacitor fails every duty limit


def test_bank_beyond_the_source_is_refused(case_file, tmp_path, capsys):
    rc, _, err, _ = _run(case_file, tmp_path, capsys, _single_bus(0.5, "[2000.0, 2000.0]", "{5 = 20.0}"))
    assert rc == 2 and "bank[0].steps_kvar" in err and "at or below the fundamental" in err


def test_very_short_cable(case_file, tmp_path, capsys):
    # 1 mm of cable: a near-zero impedance branch must not upset the solves
    text = _cable(length="0.001").replace('bus = "LV"\nrated_kv', 'bus = "LV2"\nrated_kv')
    rc, data, _ = _edge(case_file, tmp_path, capsys, text)
    ref = _edge(case_file, tmp_path, capsys, _cable(length="30.0"), out="ref")[1]
    for a, b in zip(data["banks"][0]["steps"], ref["banks"][0]["steps"]):
        assert a["h_scan"] == pytest.approx(b["h_scan"], abs=0.011)  # same plant, one grid step


def test_single_bus_matches_closed_form(case_file, tmp_path, capsys):
    rc, data, _ = _edge(case_file, tmp_path, capsys, _single_bus(20.0, "[100.0, 100.0, 200.0]"))
    for s, q in zip(data["banks"][0]["steps"], (100.0, 200.0, 400.0)):
        assert s["h_scan"] == pytest.approx(math.sqrt(20000.0 / q), rel=1e-3)  # derived h = sqrt(S_sc/Q)
    assert rc in (0, 1)


def test_h_max_below_the_first_resonance(case_file, tmp_path, capsys):
    # resonance at sqrt(20 MVA / 50 kvar) = 20 (derived), scan only to 10
    rc, data, out = _edge(case_file, tmp_path, capsys, _single_bus(20.0, "[50.0]", study="h_max = 10.0"))
    s = data["banks"][0]["steps"][0]
    assert s["h_scan"] is None and s["margin_pct"] is None and s["peaks"] == []
    assert s["h_estimate"] == pytest.approx(20.0, rel=1e-3)
    assert any("no resonance below h_max = 10" in w for w in data["warnings"])
    assert rc == 0


def test_fifty_hz_case_with_sixty_hz_data(case_file, tmp_path, capsys):
    text60 = SMALL_CASE + '\n[study]\nload_model = "none"\n'
    text50 = text60.replace("frequency_hz = 60", "frequency_hz = 50")
    assert any("typical of 60 Hz" in h for h in _hints(text50))
    _, d50, _ = _edge(case_file, tmp_path, capsys, text50, out="a")
    _, d60, _ = _edge(case_file, tmp_path, capsys, text60, out="b")
    # per-unit data: the resonance order does not depend on the fundamental (derived, h = sqrt(X_C/X_L))
    for a, b in zip(d50["banks"][0]["steps"], d60["banks"][0]["steps"]):
        assert a["h_scan"] == pytest.approx(b["h_scan"], rel=1e-3)
    assert d50["case"]["frequency_hz"] == 50

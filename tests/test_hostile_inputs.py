"""Hostile and mistaken inputs: each is refused with exit 2 and a message naming file, field and problem.

Every test runs ``main(["check", CASE, "--out", DIR, "--no-plots", "--no-report"])`` (or
``load_case``) on a copy of a bundled case with one thing broken, and checks the exit status
and the words of the message.  The expected words come from the rules in ``resonance.inputs.case``
and ``resonance.model.netmodel`` (project choices, stated there with their basis).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from resonance.inputs.case_checks import DEMAND_MIN_KVA, STAGE_MIN_KVAR
from resonance.inputs.case_load import load_case
from resonance.cli import main
from resonance.errors import InputError

from .conftest import CASES

DEMO = (CASES / "demo_plant.toml").read_text(encoding="utf-8")
FEEDER = (CASES / "feeder_network_file.toml").read_text(encoding="utf-8")
DEMO_STEPS = "steps_kvar = [100.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0]"


def _demo_dir(tmp_path: Path, text: str, name: str = "case.toml") -> Path:
    """Write ``text`` as a case beside a copy of the demo's interval CSV; return its path."""
    shutil.copy(CASES / "demo_plant_intervals.csv", tmp_path / "demo_plant_intervals.csv")
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _run(tmp_path: Path, case: Path, capsys) -> tuple[int, str]:
    rc = main(["check", str(case), "--out", str(tmp_path / "out"), "--no-plots", "--no-report"])
    cap = capsys.readouterr()
    return rc, cap.err


def _replace(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


def _network_case(tmp_path: Path, edit_tables=None, case_text: str = FEEDER) -> Path:
    """The feeder case with a copy of the CIGRE network, its tables changed by ``edit_tables(obj)``."""
    doc = json.loads((CASES / "cigre_mv_network.json").read_text(encoding="utf-8"))
    if edit_tables is not None:
        edit_tables(doc["_object"])
    (tmp_path / "cigre_mv_network.json").write_text(json.dumps(doc), encoding="utf-8")
    p = tmp_path / "feeder.toml"
    p.write_text(case_text, encoding="utf-8")
    return p


def _set_bus_kv(value: float, bus: int = 9):
    def edit(obj: dict) -> None:
        table = json.loads(obj["bus"]["_object"])
        col = table["columns"].index("vn_kv")
        table["data"][bus][col] = value
        obj["bus"]["_object"] = json.dumps(table)  # json writes NaN as NaN, as pandas does
    return edit


# ------------------------------------------------------------------------------ bank stages

def test_stage_below_the_minimum_is_refused_with_the_minimum(tmp_path, capsys):
    p = _demo_dir(tmp_path, _replace(DEMO, DEMO_STEPS, "steps_kvar = [0.04, 100.0]"))
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: bank[0].steps_kvar: stage 1 is 0.04 kvar" in err
    assert f"{STAGE_MIN_KVAR:g} kvar at the bus voltage" in err
    assert "Traceback" not in err and "defect" not in err


def test_stage_minimum_applies_at_the_bus_voltage(tmp_path):
    # derived: Q = Q_R (U_n/U_R)^2 = 0.1 (0.48/0.768)^2 = 0.039 kvar < 0.05 kvar
    text = _replace(_replace(DEMO, DEMO_STEPS, "steps_kvar = [0.1, 100.0]"), "rated_kv = 0.48", "rated_kv = 0.768")
    with pytest.raises(InputError) as ei:
        load_case(_demo_dir(tmp_path, text))
    assert [p.field for p in ei.value.problems] == ["bank[0].steps_kvar"]
    assert "0.0391 kvar at the bus's 0.48 kV" in ei.value.problems[0].problem


def test_smallest_stage_runs_through_the_detuning_search(tmp_path, capsys):
    # 0.05 kvar is accepted and the detuned-bank proposal (0.1 kvar nameplate steps) completes
    p = _demo_dir(tmp_path, _replace(DEMO, DEMO_STEPS, f"steps_kvar = [{STAGE_MIN_KVAR}, 100.0]"))
    rc, err = _run(tmp_path, p, capsys)
    assert rc in (0, 1), err
    data = json.loads((tmp_path / "out" / "results.json").read_text(encoding="utf-8"))
    assert data["banks"][0]["steps"][0]["kvar_nameplate"] == pytest.approx(STAGE_MIN_KVAR)


# ------------------------------------------------------------------------------ the file itself

def test_toml_nested_far_too_deep_is_refused(tmp_path, capsys):
    p = _demo_dir(tmp_path, DEMO + "\nx = " + "[" * 500 + "]" * 500 + "\n")
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: " in err and "nested too deeply" in err


def test_byte_order_mark_is_accepted(tmp_path):
    plain = load_case(_demo_dir(tmp_path, DEMO, "plain.toml"))
    bom = tmp_path / "bom.toml"
    bom.write_bytes(b"\xef\xbb\xbf" + DEMO.encode("utf-8"))
    case = load_case(bom)
    assert case.title == plain.title and case.bank == plain.bank and case.supply == plain.supply


# ------------------------------------------------------------------------------ messages

def test_demand_csv_problems_name_the_case_field(tmp_path, capsys):
    (tmp_path / "bad.csv").write_text("timestamp,kw\n2026-01-01T00:00:00,5\n", encoding="utf-8")
    p = _demo_dir(tmp_path, _replace(DEMO, '"demo_plant_intervals.csv"', '"bad.csv"'))
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: demand.intervals_csv: bad.csv" in err and "missing column" in err
    p2 = _demo_dir(tmp_path, _replace(DEMO, '"demo_plant_intervals.csv"', '"absent.csv"'), "c2.toml")
    rc, err = _run(tmp_path, p2, capsys)
    assert rc == 2, err
    assert f"{p2}: demand.intervals_csv: absent.csv" in err and "not found" in err


@pytest.mark.parametrize("pf", ["1.5", "3.0", "-0.2"])
def test_power_factor_out_of_range_says_the_range(tmp_path, capsys, pf):
    p = _demo_dir(tmp_path, _replace(DEMO, "pf = 0.80", f"pf = {pf}"))
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: load[0].pf: {float(pf):g} is not a power factor; it must be in (0, 1]" in err
    assert "percentage" not in err


def test_percentage_power_factor_still_gets_its_hint(tmp_path):
    with pytest.raises(InputError) as ei:
        load_case(_demo_dir(tmp_path, _replace(DEMO, "pf = 0.80", "pf = 80.0")))
    assert "give the power factor as a fraction (e.g. 0.8)" in str(ei.value)


@pytest.mark.parametrize("kv", ["1e306", "1.7e308", "9e5"])
def test_voltage_hint_never_proposes_an_unusable_value(tmp_path, kv):
    with pytest.raises(InputError) as ei:
        load_case(_demo_dir(tmp_path, _replace(DEMO, "kv = 13.8", f"kv = {kv}")))
    msg = str(ei.value)
    assert "supply.kv" in msg and "looks like a value in volts" not in msg
    assert "inf" not in msg and "nan" not in msg


def test_voltage_in_volts_gets_the_kv_hint(tmp_path):
    with pytest.raises(InputError) as ei:
        load_case(_demo_dir(tmp_path, _replace(DEMO, "kv = 13.8", "kv = 13800.0")))
    assert "supply.kv: 13800 kV looks like a value in volts; give kV (e.g. 13.8)" in str(ei.value)


def test_every_spectrum_problem_is_reported(tmp_path, capsys):
    text = _replace(DEMO, 'spectrum = "six-pulse-drive-choke"', 'spectrum = "six-pulse-drive-chock"')
    text = _replace(text, "spectrum = {5 = 33.0,", "spectrum = {1 = 4.0, 5 = 330.0,")
    p = _demo_dir(tmp_path, text)
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: harmonic_source[0].spectrum: unknown spectrum 'six-pulse-drive-chock'" in err
    line = next(ln for ln in err.splitlines() if "harmonic_source[1].spectrum" in ln)
    assert "harmonic order 1 must be an integer >= 2" in line and "order 5: 330.0 %" in line
    assert "must be a built-in spectrum name or a table" not in err  # no second, vaguer line


def test_implausibly_small_demand_is_refused_with_its_basis(tmp_path, capsys):
    p = _demo_dir(tmp_path, _replace(DEMO, "margin_pct = 10.0", "margin_pct = 10.0\nmax_demand_kw = 1e-300"))
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: study.max_demand_kw: 1e-300 kW is below the smallest maximum demand" in err
    assert f"{DEMAND_MIN_KVA:g} kW" in err and "IEEE 519" in err


def test_demand_current_below_the_minimum_at_the_pcc_voltage(tmp_path):
    # derived: sqrt(3) x 13.8 kV x 0.02 A = 0.478 kVA < 1 kVA; 0.05 A gives 1.2 kVA and is taken
    with pytest.raises(InputError) as ei:
        load_case(_demo_dir(tmp_path, _replace(DEMO, "margin_pct = 10.0", "margin_pct = 10.0\nmax_demand_a = 0.02")))
    assert [p.field for p in ei.value.problems] == ["study.max_demand_a"]
    assert "0.478 kVA" in ei.value.problems[0].problem
    load_case(_demo_dir(tmp_path, _replace(DEMO, "margin_pct = 10.0", "margin_pct = 10.0\nmax_demand_a = 0.05"),
                        "ok.toml"))


def test_unknown_demand_bank_is_refused_before_the_study(tmp_path):
    with pytest.raises(InputError) as ei:
        load_case(_demo_dir(tmp_path, _replace(DEMO, "target_pf = 0.95", 'target_pf = 0.95\nbank = "PFC-9"')))
    assert [p.field for p in ei.value.problems] == ["demand.bank"]
    assert "'PFC-1'" in ei.value.problems[0].problem


@pytest.mark.parametrize("old,new,field", [
    ('title = "Northfield', 'title = "\\u001b[31mNorthfield', "title"),
    ('title = "Northfield', 'title = "North\\u0007field', "title"),
    ('name = "PFC-1"', 'name = "PFC\\t1"', "bank[0].name"),
    ('bus = "UTIL-13.8"', 'bus = "UTIL\\u202e-13.8"', "supply.bus"),
])
def test_control_characters_in_text_are_refused(tmp_path, capsys, old, new, field):
    p = _demo_dir(tmp_path, _replace(DEMO, old, new))
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: {field}: contains a" in err and "must be printable text" in err
    assert "\x1b" not in err and "\x07" not in err


def test_ordinary_unicode_in_names_is_kept(tmp_path):
    text = _replace(DEMO, 'title = "Northfield', 'title = "Usine Nord\u00a0– été, Northfield')
    case = load_case(_demo_dir(tmp_path, text))
    assert case.title.startswith("Usine Nord")


# ------------------------------------------------------------------------------ network files

def test_network_bus_table_as_a_plain_list_is_refused(tmp_path, capsys):
    def edit(obj):
        obj["bus"] = [["Bus 0", 110.0], ["Bus 1", 20.0]]
    p = _network_case(tmp_path, edit)
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    # refused by the network-file check itself, with the JSON path of the entry
    assert f"{p}: network.pandapower_json -> cigre_mv_network.json: $._object.bus: the 'bus' entry is a list, not a table" in err


@pytest.mark.parametrize("value,shown", [(float("nan"), "nan"), (0.0, "0.0"), (-20.0, "-20.0"), (1e300, "1e+300")])
def test_unusable_bus_voltage_in_a_network_file_names_bus_and_field(tmp_path, capsys, value, shown):
    p = _network_case(tmp_path, _set_bus_kv(value))
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: network.pandapower_json -> cigre_mv_network.json: bus.vn_kv: bus 'Bus 9' has vn_kv = {shown}" in err
    assert "singular" not in err


def test_network_case_gets_the_bank_voltage_check(tmp_path, capsys):
    # the table-case rule (0.85 to 1.6 times the bus voltage): a 20 kV bank on the 110 kV bus
    text = _replace(FEEDER, 'bus = "Bus 9"\nrated_kv = 20.0', 'bus = "Bus 0"\nrated_kv = 20.0')
    p = _network_case(tmp_path, case_text=text)
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: bank[0].rated_kv: 20 kV does not suit bus 'Bus 0' at 110 kV" in err
    assert not (tmp_path / "out" / "results.json").exists()


def test_network_case_gets_the_stage_minimum(tmp_path, capsys):
    text = _replace(FEEDER, "steps_kvar = [600.0, 600.0, 600.0]", "steps_kvar = [600.0, 0.01]")
    p = _network_case(tmp_path, case_text=text)
    rc, err = _run(tmp_path, p, capsys)
    assert rc == 2, err
    assert f"{p}: bank[0].steps_kvar: stage 2 is 0.01 kvar" in err

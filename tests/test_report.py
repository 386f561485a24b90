"""Tests of the submittal report (resonance.report.document): PDF, figures, tables, determinism.

The PDF text is read back with ``pdftotext`` (poppler-utils).  Values in the PDF are
compared with ``results.json`` of the same run, never with numbers copied from our output.
"""

from __future__ import annotations

import copy
import dataclasses
import csv
import hashlib
import inspect
import json
import math
import os
import re
import shutil
import subprocess
import time
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import pytest  # noqa: E402

from resonance import cli  # noqa: E402
from resonance.outputs import OutputDir  # noqa: E402
from resonance.report.document import NOT_EVALUATED, SECTIONS, write_report  # noqa: E402
from resonance.report.results_json import CAUTION  # noqa: E402

from .conftest import CASES, write_case  # noqa: E402

def _ci() -> bool:
    return os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")


@pytest.fixture(autouse=True)
def _needs_pdftotext():
    """Without pdftotext these tests are skipped, except under CI (set ``CI``): there they fail,
    as a missing ngspice does (tests/refs/spice.py)."""
    if shutil.which("pdftotext") is None:
        if _ci():
            pytest.fail("pdftotext is not installed but CI is set: install the Debian package poppler-utils")
        pytest.skip("pdftotext (poppler-utils) not installed")

CASE_FILES = sorted(CASES.glob("*.toml"))
CLI_WIRED = "write_report" in inspect.getsource(cli)


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


def _study(case_path: Path):
    """A check result with the study stage only (no proposals), and its results.json data."""
    from resonance.inputs.case_load import load_case
    from resonance.assessment.study import run_study
    from resonance.pipeline import CheckResult

    case = load_case(case_path)
    res = CheckResult(case=case, study=run_study(case), case_sha256=hashlib.sha256(case_path.read_bytes()).hexdigest())
    return res, res.data


def _with_data(res, data):
    """The same result with a results.json view edited by the test (stages left out or added)."""
    r = dataclasses.replace(res)
    r.__dict__["data"] = data  # the cached view of the result
    return r


def _report(res, data, out_dir: Path, date: str | None = None) -> list[str]:
    out = OutputDir(out_dir)
    try:
        names = write_report(res if data is res.data else _with_data(res, data), out, date=date)
        out.write_text("results.json", json.dumps(data, indent=2) + "\n")
        out.commit()
    except BaseException:
        out.discard()
        raise
    return names


def _run_case(case_path: Path, out_dir: Path) -> dict:
    """Run a case the way ``resonance check`` does; returns results.json."""
    if CLI_WIRED:
        rc = cli.main(["check", str(case_path), "--out", str(out_dir), "--quiet"])
        assert rc in (0, 1)
    else:  # until the lead calls write_report from cli._check
        res, data = _study(case_path)
        _report(res, data, out_dir)
    return json.loads((out_dir / "results.json").read_text(encoding="utf-8"))


def _pdf_text(pdf: Path, layout: bool = True) -> str:
    args = ["pdftotext"] + (["-layout"] if layout else []) + [str(pdf), "-"]
    return subprocess.run(args, check=True, capture_output=True, text=True).stdout


def _squash(s: str) -> str:
    return re.sub(r"\s+", " ", s)


@pytest.fixture(scope="module", params=CASE_FILES, ids=[p.stem for p in CASE_FILES])
def case_run(request, tmp_path_factory):
    out_dir = tmp_path_factory.mktemp(f"report_{request.param.stem}")
    data = _run_case(request.param, out_dir)
    return out_dir, data, _pdf_text(out_dir / "report.pdf")


@pytest.fixture(scope="module")
def demo():
    return _study(CASES / "demo_plant.toml")


def test_every_case_has_the_sections(case_run):
    out_dir, data, text = case_run
    flat = _squash(text)
    for head in SECTIONS:
        assert head in flat, head
    assert _squash(CAUTION) in flat
    assert "Prepared by:" in flat and "Checked by:" in flat
    assert data["case"]["sha256"] in flat
    assert data["case"]["title"].split(" - ")[0] in flat
    n_pages = len(text.split("\f")) - (1 if text.endswith("\f") else 0)
    assert f"page {n_pages} of {n_pages}" in flat
    for b in data["banks"]:
        assert f"Summary - bank {b['name']}" in flat


def test_summary_row_equals_results_json(case_run):
    out_dir, data, text = case_run
    lines = [ln.split() for ln in text.splitlines()]
    for b in data["banks"]:
        s = b["steps"][min(3, len(b["steps"])) - 1]
        # the row as the summary table formats it: step, kvar nameplate (0 dp), delivered (1 dp),
        # h_est and h_scan (2 dp); the numbers are those of results.json for the same step
        want = [str(s["step"]), f"{s['kvar_nameplate']:.0f}", f"{s['kvar_delivered']:.1f}",
                f"{s['h_estimate']:.2f}", "-" if s["h_scan"] is None else f"{s['h_scan']:.2f}"]
        assert any(ln[:5] == want for ln in lines), (b["name"], want)
        # and the CSV of the same table carries the unrounded value
        with open(out_dir / f"table_summary_{_safe(b['name'])}.csv", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        row = rows[s["step"] - 1]
        got = row["h_scan [-]"]
        if s["h_scan"] is None:
            assert got == ""
        else:
            assert math.isclose(float(got), s["h_scan"], rel_tol=0.0, abs_tol=1e-12)


def test_every_plot_file_exists(case_run):
    out_dir, data, _text = case_run
    want = []
    for b in data["banks"]:
        s = _safe(b["name"])
        want.append(f"scan_{s}")
        if b.get("weak_supply"):
            want.append(f"scan_{s}_weak")
        if any(st.get("harmonics") for st in b["steps"]):
            want.append(f"fig_spectrum_{s}")
        if any(st.get("cap_v_rms_pct") is not None for st in b["steps"]):
            want.append(f"fig_duty_{s}")
    for stem in want:
        png, svg = out_dir / f"{stem}.png", out_dir / f"{stem}.svg"
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", png
        assert b"<svg" in svg.read_bytes()[:2000], svg
    for b in data["banks"]:  # one PNG per step; the whole-bank figures are not written twice
        for st in b["steps"]:
            assert (out_dir / f"scan_{_safe(b['name'])}_step{st['step']}.png").read_bytes()[:4] == b"\x89PNG"
    assert not list(out_dir.glob("fig_scan_*")), "the scan figures have one name each"
    for b in data["banks"]:
        assert (out_dir / f"table_summary_{_safe(b['name'])}.csv").stat().st_size > 0
    assert (out_dir / "table_input_banks.csv").stat().st_size > 0


def test_sections_fill_in_or_say_not_evaluated(demo, tmp_path):
    res, data = demo
    bare = copy.deepcopy(data)
    later = ("thd_v_pct", "thd_v_pcc_pct", "cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct", "cap_kvar_pct",
             "duty_ok", "harmonics", "tdd_pct", "pcc_voltage_ok", "pcc_current_ok")
    for b in bare["banks"]:
        b.pop("limits", None)
        b.pop("detuning", None)
        for body in (b.get("scenarios") or {}).values():
            body.pop("limits", None)
        for st in b["steps"] + (b.get("weak_supply") or {}).get("steps", []) + \
                [s for body in (b.get("scenarios") or {}).values() for s in body.get("steps", [])]:
            for k in later:
                st.pop(k, None)
    names = _report(res, bare, tmp_path)
    flat = _squash(_pdf_text(tmp_path / "report.pdf"))
    assert flat.count(NOT_EVALUATED) >= 5  # penetration, duty (summary), spectra, duty, detuning
    assert not any(n.startswith(("fig_duty_", "fig_spectrum_", "fig_detuning_")) for n in names)
    # without the assessment's limits in the result the report shows none: it looks nothing up
    # (with them, IEEE Std 18-2002's 1.10 pu rms voltage [published] reads "lim 110")
    assert "lim 110" not in flat


def test_detuning_section_fills_from_results(demo, tmp_path):
    res, data = demo
    d = copy.deepcopy(data)
    bank = d["banks"][0]
    n = len(bank["steps"])
    # synthetic recommendation as the detuning stage will write it (input to the report, not a result)
    rec = {"tuning_order": 1.0 / math.sqrt(0.0567), "detuning_pct": 5.67, "rated_kv": 0.525,
           "steps_kvar": [110.0] * n, "tuning_band": [4.07, 4.39],
           "tolerance_pct": {"capacitance": [-5.0, 10.0], "inductance": [-3.0, 3.0]},
           "lowest_significant_order": 5, "order_margin_pct": 10.0,
           "parallel_resonance": {"nominal": [4.0 - 0.05 * k for k in range(n)]}}
    bank["detuning"] = {"recommended": rec,
                        "candidates": [dict(rec, score=1.0), {"tuning_order": 3.78, "detuning_pct": 7.0,
                                                              "rated_kv": 0.525, "steps_kvar": [110.0] * n}]}
    names = _report(res, d, tmp_path)
    flat = _squash(_pdf_text(tmp_path / "report.pdf"))
    assert "Recommended detuned bank: p = 5.67 %" in flat
    assert "lim 110" in flat  # the assessment's duty limits, IEEE Std 18-2002 1.10 pu rms voltage [published]
    assert "capacitors rated 0.525 kV" in flat
    assert f"table_detuning_candidates_{_safe(bank['name'])}.csv" in names
    svg = (tmp_path / f"fig_detuning_{_safe(bank['name'])}.svg").read_text(encoding="utf-8")
    # the chart draws the proposal's band, not one of its own
    assert "4.07-4.39" in svg and "capacitance -5/+10 %, inductance -3/+3 %" in svg
    assert "90 % of it: 4.50" in svg
    assert "Detuning reactor proposal" not in flat


def test_detuned_candidate_scan_beside_the_plain_bank(demo, tmp_path):
    import dataclasses

    from resonance.inputs.case_load import load_case
    from resonance.assessment.study import run_study

    res, data = demo
    case = load_case(CASES / "demo_plant.toml")
    b0 = case.bank[0]
    detuned_case = case.model_copy(update={"bank": [b0.model_copy(update={"detuning_pct": 7.0})]})
    from resonance.pipeline import CheckResult

    study = run_study(detuned_case)
    cand = study.scans_for(b0.name, "nominal")
    res2 = dataclasses.replace(res, detuned_scans={b0.name: cand},
                               rechecks={b0.name: CheckResult(case=detuned_case, study=study)})
    names = _report(res2, data, tmp_path)
    assert f"scan_{_safe(b0.name)}_proposed.png" in names
    # the title names the tuning order n = 1/sqrt(p) [derived, REFERENCES.md: p = 7 % -> n = 3.78]; the
    # plain bank as specified is drawn beside the proposal's steps
    svg = (tmp_path / f"scan_{_safe(b0.name)}_proposed.svg").read_text(encoding="utf-8")
    assert "n = 3.78" in svg and "as specified, all 8 steps in" in svg


def test_same_input_same_content_apart_from_the_date(demo, tmp_path):
    res, data = demo
    a, b = tmp_path / "a", tmp_path / "b"
    names_a = _report(res, data, a, date="2001-02-03")
    names_b = _report(res, data, b, date="2004-05-06")
    assert names_a == names_b

    def text(p, date):
        return [ln.replace(date, "DATE") for ln in _pdf_text(p / "report.pdf").splitlines()]

    assert text(a, "2001-02-03") == text(b, "2004-05-06")
    for n in names_a:
        if n.endswith(".csv"):
            assert (a / n).read_bytes() == (b / n).read_bytes(), n
        if n.endswith(".svg"):  # the date is in the figure footer, nothing else differs
            assert (a / n).read_text(encoding="utf-8").replace("2001-02-03", "D") == \
                (b / n).read_text(encoding="utf-8").replace("2004-05-06", "D"), n
    c = tmp_path / "c"
    _report(res, data, c, date="2001-02-03")
    for n in names_a:
        assert (a / n).read_bytes() == (c / n).read_bytes(), n


def test_report_leaves_no_open_figures(demo, tmp_path):
    res, data = demo
    plt.close("all")
    _report(res, data, tmp_path)
    assert plt.get_fignums() == []
    assert matplotlib.get_backend().lower() == "agg"


TWELVE_STEPS = """
title = "Twelve-step bank, three sources"
frequency_hz = 60

[supply]
bus = "HV"
kv = 13.8
sc_mva = 250.0
x_r = 10.0
sc_mva_min = 150.0
x_r_min = 8.0

[[transformer]]
name = "T1"
hv_bus = "HV"
lv_bus = "LV"
kva = 2500.0
hv_kv = 13.8
lv_kv = 0.48
z_pct = 6.0
x_r = 7.0

[[load]]
name = "L1"
bus = "LV"
kw = 1200.0
pf = 0.8

[[harmonic_source]]
name = "D1"
bus = "LV"
kva = 400.0
spectrum = "six-pulse-drive-choke"

[[harmonic_source]]
name = "D2"
bus = "LV"
kva = 300.0
spectrum = {5 = 30.0, 7 = 10.0, 11 = 6.0, 13 = 4.0}

[[harmonic_source]]
name = "D3"
bus = "LV"
kva = 200.0
spectrum = {5 = 20.0, 7 = 14.0, 11 = 9.0, 13 = 7.7}

[[bank]]
name = "B12"
bus = "LV"
rated_kv = 0.48
steps_kvar = [75.0, 75.0, 75.0, 75.0, 75.0, 75.0, 75.0, 75.0, 75.0, 75.0, 75.0, 75.0]
"""


def test_twelve_step_bank_every_step_drawn(tmp_path):
    # the time this takes is measured in benchmarks/scan_bench.py, not asserted here
    case = write_case(tmp_path, TWELVE_STEPS)
    res, data = _study(case)
    out = OutputDir(tmp_path / "w2")
    names = write_report(res, out, date="2001-02-03")
    out.commit()
    assert sum(n.startswith("scan_B12_step") for n in names) == 12
    flat = _squash(_pdf_text(tmp_path / "w2" / "report.pdf"))
    for st in data["banks"][0]["steps"]:
        # each step's own plot, on a page and in its file (the title names the step and its kvar)
        title = f"Step {st['step']}: {st['kvar_nameplate']:g} kvar nameplate"
        assert title in flat, title
        assert (tmp_path / "w2" / f"scan_B12_step{st['step']}.png").stat().st_size > 10_000



"""The submittal report as pages: every text inside its box, the caution on every page, the
numbers a reviewer checks present, the one-line diagram naming the network, and the proposed
design's tables equal to the check of ``recommended_case.toml``.

The pages are rendered with matplotlib (text extents measured after drawing) and read back
with ``pdftotext`` / ``pdfinfo`` (poppler-utils); values are compared with ``results.json`` of
the same run, never with numbers copied from our own earlier output.
"""

from __future__ import annotations

import csv
import json
import re
import shutil
import subprocess
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import pytest  # noqa: E402

from resonance import cli  # noqa: E402
from resonance.pipeline import run_check  # noqa: E402
from resonance.report.document import layout_report  # noqa: E402
from resonance.report.layout import _Doc  # noqa: E402
from resonance.report.results_json import CAUTION  # noqa: E402

from .conftest import CASES, write_case  # noqa: E402
from .test_report import _needs_pdftotext, _pdf_text, _safe, _squash  # noqa: E402,F401

CASE_FILES = sorted(CASES.glob("*.toml"))


@pytest.fixture(scope="module", params=CASE_FILES, ids=[p.stem for p in CASE_FILES])
def checked(request, tmp_path_factory):
    out_dir = tmp_path_factory.mktemp(f"pages_{request.param.stem}")
    rc = cli.main(["check", str(request.param), "--out", str(out_dir), "--quiet"])
    assert rc in (0, 1)
    data = json.loads((out_dir / "results.json").read_text(encoding="utf-8"))
    return request.param, out_dir, data


def _pages(pdf: Path) -> list[str]:
    text = _pdf_text(pdf)
    pages = text.split("\f")
    return pages[:-1] if pages and not pages[-1].strip() else pages


def test_no_text_leaves_its_box_or_the_page(checked):
    # every page of every bundled case, rendered: each text artist's window extent inside the box
    # it was placed in (table cell, shaded box, text frame) and every figure inside its region
    case, _out, _data = checked
    doc = layout_report(run_check(case))
    assert doc.overflows() == []


def test_the_overflow_check_can_fail():
    # the check above is not vacuous: a text wider than its cell, and one past the page, are caught
    doc = _Doc("t", "letter")
    doc.new_page()
    doc.text(1.0, 1.0, "a cell text far too long for its cell", box=(1.0, 1.5, 0.9, 1.3), fontsize=9)
    doc.text(doc.pw - 1.0, 2.0, "runs past the right margin of the page", fontsize=9)
    probs = doc.overflows()
    assert len(probs) == 2, probs


def test_caution_and_identity_on_every_page(checked):
    case, out, data = checked
    pages = _pages(out / "report.pdf")
    head = _squash(CAUTION)[:60]
    for i, page in enumerate(pages, start=1):
        flat = _squash(page)
        assert head in flat, f"page {i} has no caution"
        assert f"page {i} of {len(pages)}" in flat
        assert data["case"]["sha256"][:12] in flat, f"page {i} has no case checksum"


def test_paper_follows_the_system_frequency(checked):
    case, out, data = checked
    info = subprocess.run(["pdfinfo", str(out / "report.pdf")], check=True, capture_output=True, text=True).stdout
    size = re.search(r"Page size:\s+([\d.]+) x ([\d.]+) pts", info)
    w, h = float(size.group(1)), float(size.group(2))
    if data["case"]["frequency_hz"] == 60:  # US letter, 8.5 x 11 in (ANSI/ASME Y14.1)
        assert (w, h) == (612.0, 792.0)
    else:  # A4, 210 x 297 mm (ISO 216)
        assert abs(w - 595.44) < 0.5 and abs(h - 841.68) < 0.5


def test_page_count_bounds(checked):
    # short for small banks (the body, cover to the proposed design, in at most eight pages for one
    # bank), growing by appendix (a scan page per four steps), never by blank pages
    case, out, data = checked
    pages = _pages(out / "report.pdf")
    n_steps = sum(len(b["steps"]) for b in data["banks"])
    body = next(i for i, p in enumerate(pages[1:], start=2)
                if "Appendix A Frequency scan of each step" in _squash(p)) - 1  # page 1: the contents
    assert body <= 8 + 3 * (len(data["banks"]) - 1), body
    assert len(pages) <= body + -(-n_steps // 4) + 6
    frame = set(_squash(CAUTION).split()) | {"page", "of", "sha256", data["case"]["sha256"][:12]}
    for i, page in enumerate(pages, start=1):  # no nearly empty page: words beyond header, footer, caution
        lines = [ln for ln in page.splitlines() if ln.strip()][1 if i > 1 else 0:]  # the running header
        words = [w for w in " ".join(lines).split() if w not in frame]
        assert len(words) > 100, f"page {i} is nearly empty ({len(words)} words of its own)"


def test_every_step_and_the_governing_duty_in_the_text(checked):
    case, out, data = checked
    flat = _squash(_pdf_text(out / "report.pdf"))
    for b in data["banks"]:
        for s in b["steps"]:
            if s["h_scan"] is not None:
                assert f"{s['h_scan']:.2f}" in flat, (b["name"], s["step"])
        for key in ("cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct", "cap_kvar_pct"):
            top = max(s[key] for s in b["steps"] if s.get(key) is not None)
            assert f"{top:.1f}" in flat, (b["name"], key)


def test_one_line_names_every_bus_and_bank(checked):
    case, out, data = checked
    svg = (out / "one_line.svg").read_text(encoding="utf-8")
    texts = " ".join(re.findall(r">([^<>]+)</text>", svg))
    for b in data["banks"]:
        assert b["name"] in texts and b["bus"] in texts
    assert data["pcc_bus"] in texts
    res = run_check(case)
    ol = res.one_line
    names = [bus.name for bus in ol.buses]
    for n in names:
        assert n in texts, n
    assert (out / "one_line.png").read_bytes()[:4] == b"\x89PNG"


def test_figures_carry_a_footer(checked):
    case, out, data = checked
    p = out / f"scan_{_safe(data['banks'][0]['name'])}.svg"
    svg = p.read_text(encoding="utf-8")
    assert data["case"]["title"] in svg and "resonance" in svg
    assert not list(out.glob("fig_scan_*")), "one file per figure"


def _csv_rows(path: Path) -> list[dict]:
    with open(path, encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_proposed_tables_equal_the_check_of_the_recommended_case(tmp_path):
    # the proposal's own section is its re-check: the same numbers `resonance check` gives for
    # recommended_case.toml (the round-trip property, read from the tables the report prints)
    out = tmp_path / "out"
    assert cli.main(["check", str(CASES / "demo_plant.toml"), "--out", str(out), "--quiet"]) == 1
    data = json.loads((out / "results.json").read_text(encoding="utf-8"))
    name = data["banks"][0]["name"]
    assert data["banks"][0]["detuning"]["recommended"], "the demo gets a proposal"
    again = tmp_path / "again"
    rc = cli.main(["check", str(out / "recommended_case.toml"), "--out", str(again), "--quiet", "--no-report"])
    assert rc in (0, 1)
    rec = json.loads((again / "results.json").read_text(encoding="utf-8"))
    rb = next(b for b in rec["banks"] if b["name"] == name)
    pairs = [("", rb["steps"])] + [(f"_{k}", v["steps"]) for k, v in (rb.get("scenarios") or {}).items()]
    for suffix, steps in pairs:
        rows = _csv_rows(out / f"table_proposed_{_safe(name)}{suffix}.csv")
        assert len(rows) == len(steps)
        for row, s in zip(rows, steps):
            assert float(row["h_scan [-]"]) == pytest.approx(s["h_scan"], rel=1e-9)
            assert float(row["V peak\nlim 120 [%]".replace("\n", " ")]) == pytest.approx(s["cap_v_peak_pct"], rel=1e-9)
            assert float(row["kvar delivered [kvar]"]) == pytest.approx(s["kvar_delivered"], rel=1e-9)
            assert row["result"].startswith("pass")
    flat = _squash(_pdf_text(out / "report.pdf"))
    assert "Proposed design of bank" in flat
    for s in rb["steps"]:
        assert f"{s['h_scan']:.2f}" in flat


def test_paper_can_be_set_in_the_project_table(tmp_path):
    text = (CASES / "cold_store_50hz.toml").read_text(encoding="utf-8")
    base = CASES / "cold_store_50hz.toml"
    text = text.replace('frequency_hz = 50', 'frequency_hz = 50\n\n[project]\npaper = "letter"\nnumber = "T-1"', 1)
    case = write_case(tmp_path, text)
    for extra in base.parent.glob("*.csv"):
        shutil.copy(extra, tmp_path / extra.name)
    out = tmp_path / "o"
    assert cli.main(["check", str(case), "--out", str(out), "--quiet"]) in (0, 1)
    info = subprocess.run(["pdfinfo", str(out / "report.pdf")], check=True, capture_output=True, text=True).stdout
    assert "612 x 792 pts" in info
    assert "Project T-1" in _pdf_text(out / "report.pdf")

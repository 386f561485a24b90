"""One tolerance band everywhere: the proposal's tuning band is the one the terminal, the
recommended-design table, the chart and results.json show, and it is the band of the
closed form.

Reference: a series L-C branch tunes to n = 1 / (w1 sqrt(L C)) (IEEE Std 1531-2020, series
tuned branch; REFERENCES.md "Detuned (series reactor) banks"), so with the capacitance off by
c and the inductance off by l the order is n / sqrt((1 + c)(1 + l)) [derived]; the band spans
the corners of the capacitance -5/+10 % [from memory; editions differ] and inductance +-3 %
[common practice] tolerances.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import math

import pytest

from resonance.cli import main

from .conftest import CASES


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("band")
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        rc = main(["check", str(CASES / "demo_plant.toml"), "--out", str(out)])
    assert rc in (0, 1)
    return out, buf.getvalue(), json.loads((out / "results.json").read_text())


def test_the_band_is_the_closed_form_of_the_tolerances(demo_run):
    _out, _text, data = demo_run
    rec = data["banks"][0]["detuning"]["recommended"]
    n = rec["tuning_order"]
    c, ind = rec["tolerance_pct"]["capacitance"], rec["tolerance_pct"]["inductance"]
    lo = n / math.sqrt((1 + c[1] / 100) * (1 + ind[1] / 100))  # most capacitance and inductance
    hi = n / math.sqrt((1 + c[0] / 100) * (1 + ind[0] / 100))  # least of both
    assert rec["tuning_band"] == pytest.approx([lo, hi], abs=1e-4)
    assert rec["tuning_band"][1] < rec["lowest_significant_order"]  # even the top of the band stays below it


def test_terminal_table_and_chart_show_the_same_band(demo_run):
    out, text, data = demo_run
    rec = data["banks"][0]["detuning"]["recommended"]
    band = f"{rec['tuning_band'][0]:.2f}-{rec['tuning_band'][1]:.2f}"
    assert f"{band} at the tolerance limits" in text  # the terminal's proposal line
    assert f"(band {band})" in text  # the proposal's reason
    name = data["banks"][0]["name"]
    with open(out / f"table_detuning_recommended_{name}.csv", newline="", encoding="utf-8") as fh:
        rows = {r[0]: r[1] for r in csv.reader(fh) if len(r) >= 2}
    assert rows.get("tuning order band at the tolerance limits [-]") == band
    svg = (out / f"fig_detuning_{name}.svg").read_text(encoding="utf-8")
    assert f": {band}" in svg
    # the chart's margin line is the proposal's own setting
    m = rec["lowest_significant_order"] * (1 - rec["order_margin_pct"] / 100)
    assert f"{m:.2f}" in svg

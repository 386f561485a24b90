"""Shared test helpers: writing case files and running the CLI."""

from __future__ import annotations

import os
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CASES = ROOT / "cases"

os.environ.setdefault("MPLBACKEND", "Agg")


def write_case(tmp_path: Path, text: str, name: str = "case.toml") -> Path:
    """Write a dedented case file and return its path."""
    p = tmp_path / name
    p.write_text(textwrap.dedent(text).lstrip(), encoding="utf-8")
    return p


@pytest.fixture
def case_file(tmp_path):
    """Factory fixture: ``case_file(text)`` -> path of a written case file."""
    return lambda text, name="case.toml": write_case(tmp_path, text, name)


#: a small valid plant used by many tests (invented data)
SMALL_CASE = """
title = "Test plant"
frequency_hz = 60

[supply]
bus = "HV"
kv = 13.8
sc_mva = 48.0
x_r = 10.0

[[transformer]]
name = "T1"
hv_bus = "HV"
lv_bus = "LV"
kva = 1500.0
hv_kv = 13.8
lv_kv = 0.48
z_pct = 5.5
x_r = 6.0

[[load]]
name = "L1"
bus = "LV"
kw = 600.0
pf = 0.85

[[harmonic_source]]
name = "D1"
bus = "LV"
kva = 300.0
spectrum = {5 = 20.0, 7 = 14.0}

[[bank]]
name = "B1"
bus = "LV"
rated_kv = 0.48
steps_kvar = [100.0, 100.0, 150.0]
"""

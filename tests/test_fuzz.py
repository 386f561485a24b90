"""Property tests: generated case files, valid and broken, through ``main([...])``.

Invariants
----------
* No uncaught exception: ``main`` returns 0, 1 or 2 and prints no traceback,
  whatever the file holds (broken keys, wrong types, out-of-range values,
  unknown keys, garbage TOML).
* A valid radial plant runs (exit 0 or 1) and writes strict JSON (no NaN/inf).
* Closed form: one bus behind one transformer, no load damping, X/R 200: the
  scan peak is within 1 % of ``sqrt(S_sc/Q)`` (REFERENCES.md, resonance:
  published; series supply + transformer short-circuit power, published).
* Passivity: ``Re Z(h) >= 0`` at every order, bank off and every step (a
  network of positive R, L, C is passive: derived from the positive-real
  property of driving-point impedances, Brune 1931).
* More kvar never raises the resonance order: ``h_scan`` is non-increasing
  over the steps (derived: adding capacitance lowers every natural frequency,
  Foster's reactance theorem).

The example count is bounded for CI (the whole file runs in well under a
minute); ``RESONANCE_FUZZ_EXAMPLES=2000`` runs a longer search by hand.
Hypothesis runs derandomised, so CI is reproducible.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import tempfile
import tomllib
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from resonance.cli import main

_N = int(os.environ.get("RESONANCE_FUZZ_EXAMPLES", "0"))


def _settings(ci: int):
    return settings(max_examples=_N or ci, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# ------------------------------------------------------------------------------------ TOML out

def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)  # a JSON string is a TOML basic string
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(str(k))} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(doc: dict) -> str:
    """A small TOML writer: top-level scalars, tables, arrays of tables."""
    head, body = [], []
    for k, v in doc.items():
        key = json.dumps(str(k))
        if isinstance(v, dict) and k in ("supply", "study", "network"):
            body.append(f"\n[{key}]")
            body += [f"{json.dumps(str(a))} = {_toml_value(b)}" for a, b in v.items()]
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            for row in v:
                body.append(f"\n[[{key}]]")
                body += [f"{json.dumps(str(a))} = {_toml_value(b)}" for a, b in row.items()]
        else:
            head.append(f"{key} = {_toml_value(v)}")
    return "\n".join(head + body) + "\n"


# ------------------------------------------------------------------------------ case strategies

MV_KV = (4.16, 11.0, 13.8, 20.0, 33.0)
LV_KV = (0.4, 0.48, 0.69)
SPECTRA = ("six-pulse-ideal", "twelve-pulse-ideal", "six-pulse-drive", "six-pulse-drive-choke")


@st.composite
def radial_plants(draw):
    """A valid radial plant: supply, 1-3 transformer/cable chains, loads, sources, 1-2 banks."""
    f = draw(st.sampled_from((50, 60)))
    kv_s = draw(st.sampled_from(MV_KV))
    sc = draw(st.floats(20.0, 500.0))
    doc: dict = {"title": "fuzz plant", "frequency_hz": f,
                 "supply": {"bus": "S", "kv": kv_s, "sc_mva": sc, "x_r": draw(st.floats(2.0, 30.0))}}
    if draw(st.booleans()):
        doc["supply"]["sc_mva_min"] = sc * draw(st.floats(0.3, 1.0))
    buses = {"S": (kv_s, None)}  # bus -> (kV, kVA of the transformer feeding it)
    trafos, cables = [], []
    for c in range(draw(st.integers(1, 3))):
        at = "S"
        for e in range(draw(st.integers(1, 2))):
            kv_at, feed = buses[at]
            new = f"B{c}{e}"
            if kv_at > 1.0 and (e == 0 or draw(st.booleans())):
                kva = draw(st.sampled_from((300.0, 500.0, 750.0, 1000.0, 1500.0, 2500.0)))
                lv = draw(st.sampled_from(LV_KV))
                trafos.append({"name": f"T{c}{e}", "hv_bus": at, "lv_bus": new, "kva": kva, "hv_kv": kv_at,
                               "lv_kv": lv, "z_pct": draw(st.floats(3.0, 8.0)), "x_r": draw(st.floats(2.0, 15.0))})
                buses[new] = (lv, kva)
            else:
                lv_bus = kv_at < 1.0
                cables.append({"name": f"C{c}{e}", "from_bus": at, "to_bus": new,
                               "length_m": draw(st.floats(1.0, 100.0 if lv_bus else 3000.0)),
                               "r_ohm_per_km": draw(st.floats(0.02, 0.3)), "x_ohm_per_km": draw(st.floats(0.0, 0.12)),
                               "c_nf_per_km": draw(st.floats(0.0, 400.0)), "parallel": draw(st.integers(1, 3))})
                buses[new] = (kv_at, feed)
            at = new
    doc["transformer"], doc["cable"] = trafos, cables
    names = sorted(buses)
    fed = [b for b in names if buses[b][1] is not None] or ["S"]
    doc["load"] = [{"name": f"L{i}", "bus": draw(st.sampled_from(fed)), "kw": draw(st.floats(0.0, 800.0)),
                    "pf": draw(st.floats(0.6, 1.0))} for i in range(draw(st.integers(0, 3)))]
    srcs = []
    for i in range(draw(st.integers(0, 2))):
        if draw(st.booleans()):
            spec = draw(st.sampled_from(SPECTRA))
        else:
            spec = {str(h): draw(st.floats(0.0, 30.0)) for h in draw(st.sets(st.integers(2, 40), min_size=1,
                                                                             max_size=5))}
        srcs.append({"name": f"D{i}", "bus": draw(st.sampled_from(fed)), "kva": draw(st.floats(5.0, 400.0)),
                     "spectrum": spec})
    doc["harmonic_source"] = srcs
    banks = []
    for i in range(draw(st.integers(1, 2))):
        bus = draw(st.sampled_from(fed))
        kv_b, feed = buses[bus]
        # keep the whole bank a modest share of what feeds it (a realistic PFC bank)
        q_max = 0.4 * (feed if feed is not None else sc * 1000.0 * 0.05)
        n = draw(st.integers(1, 6))
        steps = [draw(st.floats(max(1.0, 0.02 * q_max / n), q_max / n)) for _ in range(n)]
        bank = {"name": f"K{i}", "bus": bus, "rated_kv": kv_b * draw(st.sampled_from((1.0, 1.0, 1.05))),
                "steps_kvar": steps}
        if draw(st.integers(0, 3)) == 0:
            bank["detuning_pct"] = draw(st.sampled_from((5.67, 7.0, 14.0)))
        banks.append(bank)
    doc["bank"] = banks
    study = {"h_step": 0.02}
    if draw(st.booleans()):
        study["load_model"] = draw(st.sampled_from(("parallel_rl", "series_rl", "cigre_c4", "none")))
    if draw(st.booleans()):
        study["resistance_model"] = draw(st.sampled_from(("constant", "sqrt_h", "breuer")))
    if draw(st.booleans()):
        study["other_banks"] = "full"
    doc["study"] = study
    return doc


def _run_main(text: str, plots: bool = False):
    """Write ``text`` as a case, run ``main``; returns (rc, stdout, stderr, results or None)."""
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "case.toml"
        if isinstance(text, bytes):
            p.write_bytes(text)
        else:
            p.write_text(text, encoding="utf-8")
        out, err = io.StringIO(), io.StringIO()
        args = ["check", str(p), "--out", str(Path(d) / "out"), "--no-report"] + ([] if plots else ["--no-plots"])
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            rc = main(args)
        res = Path(d) / "out" / "results.json"
        data = None
        if res.exists():
            def bad(c):
                raise AssertionError(f"non-finite number {c} in results.json")
            data = json.loads(res.read_text(encoding="utf-8"), parse_constant=bad)
        assert not list(Path(d).glob("out/.resonance-partial-*")), "staging directory left behind"
    return rc, out.getvalue(), err.getvalue(), data


def _check_no_crash(rc, out, err):
    assert rc in (0, 1, 2), rc
    assert "Traceback" not in err and "Traceback" not in out
    if rc == 2:
        assert err.strip(), "exit 2 must say why"
        for line in err.strip().splitlines():
            assert line.startswith(("error:", "usage:", "resonance: error:")), line


def _steps_h(data, bank=0):
    return [s["h_scan"] for s in data["banks"][bank]["steps"]]


def _assert_non_increasing(hs):
    # None: no resonance below h_max (above the scan); later steps may come down into range
    seen_number = False
    prev = math.inf
    for h in hs:
        if h is None:
            assert not seen_number, hs
            continue
        seen_number = True
        assert h <= prev + 0.021, hs  # one grid step (h_step = 0.02) of slack after refinement
        prev = h


# ------------------------------------------------------------------------------------- tests

@_settings(ci=5)
@given(radial_plants())
def test_valid_radial_plants_run_and_keep_invariants(doc):
    from resonance.inputs.case_load import parse_case
    from resonance.model.netmodel import build_model
    from resonance.harmonics.scan import ModelSettings, impedance_columns, step_update
    from resonance.assessment.study import bank_models

    text = to_toml(doc)
    rc, out, err, data = _run_main(text)
    _check_no_crash(rc, out, err)
    assert rc in (0, 1), err  # a realistic radial plant is never refused
    assert data is not None
    # more kvar never raises the bank's resonance (plain banks; single bank, others off)
    for i, b in enumerate(doc["bank"]):
        if "detuning_pct" not in b and doc["study"].get("other_banks") != "full":
            _assert_non_increasing(_steps_h(data, i))
    # passivity of the scan's complex impedance, bank off and every step
    case = parse_case(tomllib.loads(text), "fuzz.toml")
    model = build_model(case)
    s = ModelSettings(case.study.resistance_model, case.study.load_model)
    h = np.linspace(1.0, case.study.h_max, 500)
    for bm in bank_models(case, model.arrays, model.model_bus):
        k = np.array([bm.index])
        z0 = impedance_columns(model.arrays, h, k, s, rows=k)
        zs = step_update(z0, 0, 0, bm.step_admittance(h, model.arrays.base_mva))
        z = np.concatenate([z0[:, None, 0, 0], zs[:, :, 0, 0]], axis=1)
        assert np.all(np.isfinite(z))
        # Re Z >= 0 up to round-off relative to |Z|
        assert np.all(z.real >= -1e-9 * np.abs(z)), (bm.name, float(np.min(z.real / np.abs(z))))
    # the arrays load flow the study uses equals pandapower's runpp with every bank at full output
    # (Reference: pandapower runpp, Newton-Raphson)
    from resonance.errors import ModelError
    from resonance.model.pp_loadflow import LoadFlow, load_flow_session

    buses = {b.name: b.bus for b in case.bank}
    full = {bm.name: float(bm.q_cap_nominal_kvar()[-1] / (1.0 - bm.p))
            for bm in bank_models(case, model.arrays, model.model_bus)}
    for weak in (False, True):
        if weak and model.sc_mva_supply_min is None:
            continue
        fast = load_flow_session(model, buses, weak)
        ref = LoadFlow(model, buses, weak=weak)
        ref.mode = "pandapower"
        try:
            v_ref = ref.vm_pu(full)
        except ModelError:  # pandapower itself fails on some degenerate draws (denormal reactances)
            continue
        np.testing.assert_allclose(fast.vm_pu(full), v_ref, rtol=0, atol=1e-8)


@st.composite
def single_bus_behind_transformer(draw):
    kva = draw(st.sampled_from((500.0, 1000.0, 1500.0, 2000.0, 2500.0)))
    lv = draw(st.sampled_from(LV_KV))
    doc = {
        "title": "closed form", "frequency_hz": draw(st.sampled_from((50, 60))),
        "supply": {"bus": "HV", "kv": 13.8, "sc_mva": draw(st.floats(20.0, 500.0)), "x_r": 200.0},
        "transformer": [{"name": "T", "hv_bus": "HV", "lv_bus": "LV", "kva": kva, "hv_kv": 13.8, "lv_kv": lv,
                         "z_pct": draw(st.floats(3.0, 8.0)), "x_r": 200.0}],
        "load": [{"name": "L", "bus": "LV", "kw": draw(st.floats(0.0, 500.0)), "pf": 0.85}],
        "bank": [{"name": "K", "bus": "LV", "rated_kv": lv,
                  "steps_kvar": draw(st.lists(st.floats(10.0, 0.1 * kva), min_size=1, max_size=6))}],
        "study": {"load_model": "none", "h_max": 60.0},
    }
    return doc


@_settings(ci=6)
@given(single_bus_behind_transformer())
def test_closed_form_peak_within_one_percent(doc):
    rc, out, err, data = _run_main(to_toml(doc))
    _check_no_crash(rc, out, err)
    assert rc in (0, 1), err
    sup, tx = doc["supply"], doc["transformer"][0]
    # S_sys = 1 / (1/S_utility + z/S_T) (REFERENCES.md, resonance: published); equal X/R, so exact in magnitude
    s_sc_kva = 1.0 / (1.0 / (sup["sc_mva"] * 1000.0) + tx["z_pct"] / 100.0 / tx["kva"])
    q = np.cumsum(doc["bank"][0]["steps_kvar"])
    h_closed = np.sqrt(s_sc_kva / q)  # h_r = sqrt(S_sc/Q) (REFERENCES.md, resonance: published)
    for hs, hc in zip(_steps_h(data), h_closed):
        if hc > doc["study"]["h_max"] * 0.99:
            continue  # at or beyond the end of the scan
        assert hs is not None, (hc, _steps_h(data))
        assert abs(hs - hc) <= 0.01 * hc, (hs, hc)
    _assert_non_increasing(_steps_h(data))


# broken cases: mutate a valid plant

_WRONG = st.one_of(st.none(), st.booleans(), st.integers(-10**6, 10**20), st.floats(allow_nan=True, allow_infinity=True),
                   st.text(max_size=12), st.lists(st.integers(), max_size=3),
                   st.dictionaries(st.text(max_size=4), st.integers(), max_size=2))


@st.composite
def broken_plants(draw):
    doc = draw(radial_plants())
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(("delete", "wrong", "range", "unknown", "table")))
        tables = [k for k, v in doc.items() if isinstance(v, dict) or (isinstance(v, list) and v)]
        where = draw(st.sampled_from(sorted(tables) + ["<top>"]))
        if where == "<top>":
            target = doc
        elif isinstance(doc[where], list):
            rows = [r for r in doc[where] if isinstance(r, dict)]
            if not rows:
                continue  # already replaced by a wrong type
            target = rows[draw(st.integers(0, len(rows) - 1))]
        else:
            target = doc[where]
        keys = sorted(str(k) for k in target)
        if kind == "delete" and keys:
            target.pop(draw(st.sampled_from(keys)), None)
        elif kind == "wrong" and keys:
            target[draw(st.sampled_from(keys))] = draw(_WRONG)
        elif kind == "range" and keys:
            k = draw(st.sampled_from(keys))
            if isinstance(target[k], (int, float)) and not isinstance(target[k], bool):
                target[k] = draw(st.sampled_from((0.0, -1.0, 1e-12, 1e12, -target[k], target[k] * 1000.0,
                                                  target[k] / 1000.0)))
            elif isinstance(target[k], list) and target[k]:
                target[k] = [draw(st.sampled_from((0.0, -5.0, 1e9, 1e-9)))] + target[k][1:]
        elif kind == "unknown":
            target[draw(st.text(min_size=1, max_size=8))] = draw(_WRONG.filter(lambda v: v is not None))
        elif kind == "table" and where != "<top>" and where in doc:
            doc[where] = draw(_WRONG.filter(lambda v: v is not None))
    # TOML has no null: a None removes the key
    def strip(v):
        if isinstance(v, dict):
            return {k: strip(x) for k, x in v.items() if x is not None}
        if isinstance(v, list):
            return [strip(x) for x in v if x is not None]
        return v
    return strip(doc)


@_settings(ci=20)
@given(broken_plants())
def test_broken_cases_never_crash(doc):
    rc, out, err, data = _run_main(to_toml(doc))
    _check_no_crash(rc, out, err)
    if rc == 2:
        assert data is None  # refused: nothing written


@_settings(ci=40)
@given(st.one_of(
    st.text(max_size=200),
    st.binary(max_size=200),
    radial_plants().map(to_toml).flatmap(
        lambda t: st.tuples(st.integers(0, len(t)), st.integers(0, 40)).map(lambda ij: t[:ij[0]] + t[ij[0] + ij[1]:])),
))
def test_garbage_files_never_crash(text):
    rc, out, err, data = _run_main(text)
    _check_no_crash(rc, out, err)
    if rc == 2:
        assert data is None

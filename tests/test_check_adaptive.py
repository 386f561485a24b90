"""A check on a large network takes the adaptive path and finds what the uniform path finds.

On a network above ``DENSE_MAX_BUSES`` buses the study solves the bank-off columns (bank bus and
PCC) once on a coarse start shared by every detuned variant the check re-studies, and each
variant refines only where its own curves need it (resonance.assessment.curves,
resonance.harmonics.bank_curves).  The reference is the uniform path of the same code
(``ADAPTIVE_CHECK = False``: every order of the 0.01 grid solved, the peak search started there),
whose curves are exact solves and whose peaks are checked against a fine scan and against an
independent optimiser in tests/test_large_adaptive.py and tests/test_scan_engine.py.

Network: pandapower's case1354pegase (pandapower.networks) with an invented supply
(20 000 MVA, X/R 10) and an invented bank (4 x 20 Mvar at a 220 kV load bus).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import resonance.assessment.curves as curves
import resonance.assessment.study as study
from resonance.assessment.curves import OrderTable
from resonance.harmonics.bank_curves import coarse_orders, pair_step_curves
from resonance.harmonics.scan import DENSE_MAX_BUSES, ModelSettings, harmonic_grid, impedance_columns_dh
from resonance.model.admittance import bank_step_admittance, bank_step_admittance_dh
from resonance.model.netmodel import net_to_arrays

BUS = 17  # a 220 kV load bus of case1354pegase


def _net():
    import pandapower.networks as pn

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        net = pn.case1354pegase()
    net.ext_grid["s_sc_max_mva"] = 20000.0  # invented supply data (the case carries none)
    net.ext_grid["rx_max"] = 0.1
    return net


def _case():
    return {"title": "case1354pegase bank", "frequency_hz": 50,
            "bank": [{"name": "B1", "bus": f"#{BUS}", "rated_kv": 220.0, "steps_kvar": [20000.0] * 4}],
            "study": {"h_max": 25}}


def _check(monkeypatch, adaptive: bool):
    """run_check with the study's path set, and every study the check ran (main and re-checks)."""
    from resonance.pipeline import run_check

    seen, calls = [], {"adaptive": 0}
    real, real_adaptive = study._run_study, curves._adaptive

    def spy(*a, **k):
        res = real(*a, **k)
        seen.append(res)
        return res

    def spy_adaptive(*a, **k):
        calls["adaptive"] += 1
        return real_adaptive(*a, **k)

    with monkeypatch.context() as m:
        m.setattr(curves, "ADAPTIVE_CHECK", adaptive)
        m.setattr(study, "_run_study", spy)
        m.setattr(curves, "_adaptive", spy_adaptive)
        res = run_check(_case(), net=_net(), workers=1)
    return res, seen, calls["adaptive"]


def _key(f):
    return (f.bank, f.step, f.scenario, f.check, f.order, f.cause, f.unit)


def test_adaptive_check_matches_the_uniform_check_on_case1354pegase(monkeypatch):
    new, new_studies, n_adaptive = _check(monkeypatch, True)
    old, old_studies, n_old = _check(monkeypatch, False)
    assert n_old == 0 and n_adaptive == 2 * len(new_studies)  # every scan of every study took its path
    assert len(new_studies) == len(old_studies) >= 3  # the check re-studied detuned variants
    for a, b in zip(new_studies, old_studies):
        assert len(a.scans) == len(b.scans)
        for sa, sb in zip(a.scans, b.scans):
            assert (sa.bank.name, sa.scenario, sa.bank.p) == (sb.bank.name, sb.scenario, sb.bank.p)
            for x, y in zip(sa.steps, sb.steps):
                assert (x.h_scan is None) == (y.h_scan is None)
                if x.h_scan is not None:
                    assert x.h_scan == pytest.approx(y.h_scan, abs=1e-4)
                    assert x.z_peak_ohm == pytest.approx(y.z_peak_ohm, rel=1e-4)
                assert (x.nearest_order, x.resonance_ok, x.damping_sensitive) == \
                    (y.nearest_order, y.resonance_ok, y.damping_sensitive)
            # the sampled curves on the study grid against the solved ones (measured 4.6e-4 at most)
            np.testing.assert_array_equal(sa.h, sb.h)
            np.testing.assert_allclose(sa.z_ohm, sb.z_ohm, rtol=1e-3)
            np.testing.assert_allclose(sa.z_pcc_ohm, sb.z_pcc_ohm, rtol=1e-3)
        assert sorted(map(_key, a.findings)) == sorted(map(_key, b.findings))
        for fa, fb in zip(sorted(a.findings, key=_key), sorted(b.findings, key=_key)):
            assert fa.value == pytest.approx(fb.value, rel=1e-4, abs=1e-4)
    assert new.study.passed == old.study.passed
    assert [f["message"] for f in new.data["findings"]] == [f["message"] for f in old.data["findings"]]
    assert new.proposals["B1"]["recommended"] == old.proposals["B1"]["recommended"]


def _arrays():
    arr, _ = net_to_arrays(_net())
    assert arr.n_bus > DENSE_MAX_BUSES
    return arr


def test_step_curves_by_rank_one_update_equal_direct_solves_with_the_step_in():
    # Reference: the same network solved with the step's admittance on the bank bus's diagonal
    # (impedance_columns_dh, one sparse LU per order), against the Sherman-Morrison update of
    # the bank-off columns, values and dZ/dh, at the bank bus and at the supply (PCC) bus.
    arr = _arrays()
    k, p = BUS, int(arr.grid_bus[0])
    cols = np.array(sorted({k, p}))
    kc, pc = int(np.nonzero(cols == k)[0][0]), int(np.nonzero(cols == p)[0][0])
    h = np.array([1.0, 2.37, 4.1, 7.93, 13.2])
    b = np.array([0.2, 0.4])  # [pu] two steps, detuned at 7 %
    ys, dys = bank_step_admittance(h, b, 0.07, 50.0), bank_step_admittance_dh(h, b, 0.07, 50.0)
    z0, dz0 = impedance_columns_dh(arr, h, cols, ModelSettings(), rows=cols, workers=1)
    zc, dzc = pair_step_curves(z0, dz0, kc, pc, ys, dys)
    for s in range(b.size):
        de = np.zeros((h.size, arr.n_bus), complex)
        de[:, k] = ys[:, s]
        de_dh = np.zeros_like(de)
        de_dh[:, k] = dys[:, s]
        z, dz = impedance_columns_dh(arr, h, cols, ModelSettings(), de, rows=cols, diag_extra_dh=de_dh, workers=1)
        np.testing.assert_allclose(zc[s + 1], z[:, kc, kc], rtol=1e-9)
        np.testing.assert_allclose(dzc[s + 1], dz[:, kc, kc], rtol=1e-7)
        np.testing.assert_allclose(zc[b.size + 2 + s], z[:, pc, pc], rtol=1e-9)
        np.testing.assert_allclose(dzc[b.size + 2 + s], dz[:, pc, pc], rtol=1e-7)
    np.testing.assert_array_equal(zc[0], z0[:, kc, kc])
    np.testing.assert_array_equal(zc[b.size + 1], z0[:, pc, pc])


def test_order_table_solves_each_order_once_and_gives_the_direct_solve():
    arr = _arrays()
    cols = np.array([BUS])
    asked = []

    def solve(hh):
        asked.append(hh.size)
        return impedance_columns_dh(arr, hh, cols, ModelSettings(), rows=cols, workers=1)

    table = OrderTable(solve)
    h0 = coarse_orders(harmonic_grid(5.0, 0.01))
    assert h0[0] == 1.0 and h0[-1] == 5.0 and np.allclose(np.diff(h0)[:-1], 0.16)
    z0, dz0 = table(h0)
    mid = 0.5 * (h0[:-1] + h0[1:])[::3]
    z1, dz1 = table(np.concatenate([mid, h0[:4]]))  # new midpoints and known orders together
    assert asked == [h0.size, mid.size] and table.solved == h0.size + mid.size
    ref, dref = impedance_columns_dh(arr, mid, cols, ModelSettings(), rows=cols, workers=1)
    np.testing.assert_allclose(z1[: mid.size], ref, rtol=1e-12)
    np.testing.assert_allclose(dz1[: mid.size], dref, rtol=1e-10)
    np.testing.assert_array_equal(z1[mid.size:], z0[:4])
    z2, _ = table(h0[::-1])
    np.testing.assert_array_equal(z2, z0[::-1])
    assert asked == [h0.size, mid.size]


def test_small_networks_keep_the_uniform_path(monkeypatch):
    from resonance.pipeline import run_check

    from .conftest import CASES

    def boom(*a, **k):
        raise AssertionError("the adaptive path ran on a small network")

    monkeypatch.setattr(curves, "_adaptive", boom)
    res = run_check(CASES / "feeder_network_file.toml")
    assert res.study.scans and all(sc.h.size == res.study.scans[0].h.size for sc in res.study.scans)


def test_adaptive_study_with_other_banks_in_service_matches_the_uniform_study(monkeypatch):
    # [study] other_banks = "full": the other bank's admittance is on the diagonal of every solve,
    # so nothing is shared between the banks; the adaptive path still matches the uniform one
    import pandapower as pp

    from resonance.inputs.case_load import parse_case
    from resonance.model.netmodel import build_model

    net = _net()
    b2 = int(net.load.bus.iloc[40])
    raw = {"title": "two banks", "frequency_hz": 50, "network": {"pandapower_json": "<live>"},
           "bank": [{"name": "B1", "bus": f"#{BUS}", "rated_kv": 220.0, "steps_kvar": [20000.0] * 2},
                    {"name": "B2", "bus": f"#{b2}", "rated_kv": float(net.bus.vn_kv.at[b2]),
                     "steps_kvar": [10000.0] * 2, "detuning_pct": 7.0}],
           "study": {"h_max": 9, "other_banks": "full"}}
    case = parse_case(raw, file="<test>", base_dir=".")
    model = build_model(case, net=pp.from_json_string(pp.to_json(net)))
    got = {}
    for flag in (True, False):
        with monkeypatch.context() as m:
            m.setattr(curves, "ADAPTIVE_CHECK", flag)
            got[flag] = study.run_study(case, model=model, cross_check=False)
    a, b = got[True], got[False]
    assert len(a.scans) == len(b.scans) == 4  # two banks, two scenarios
    for sa, sb in zip(a.scans, b.scans):
        for x, y in zip(sa.steps, sb.steps):
            assert (x.h_scan is None) == (y.h_scan is None)
            if x.h_scan is not None:
                assert x.h_scan == pytest.approx(y.h_scan, abs=1e-4)
        np.testing.assert_allclose(sa.z_ohm, sb.z_ohm, rtol=1e-3)
        np.testing.assert_allclose(sa.z_pcc_ohm, sb.z_pcc_ohm, rtol=1e-3)
    assert sorted(map(_key, a.findings)) == sorted(map(_key, b.findings))

"""Scan engine at scale: rank-one/rank-q step updates, sparse and dense paths, adaptive grid, start-up.

References used below: the Sherman-Morrison and Woodbury identities (derived from
(A + u v^T)^-1 = A^-1 - A^-1 u v^T A^-1 / (1 + v^T A^-1 u)); scipy's own sparse solver
(``scipy.sparse.linalg.spsolve``, an independent route to Y^-1); central differences for
d/dh.  Networks: pandapower's bundled case118 and case1354pegase (pandapower.networks),
and the bundled case files in cases/.
"""

from __future__ import annotations

import dataclasses
import glob
import subprocess
import sys
import warnings

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from resonance.harmonics import engine as engine_mod
from resonance.model.admittance import YPattern, bank_step_admittance
from resonance.inputs.case_load import load_case
from resonance.harmonics.engine import SparseEngine, sparse_columns
from resonance.harmonics.grid import grid_peaks
from resonance.model.netmodel import build_model, net_to_arrays
from resonance.harmonics.scan import (
    DENSE_MAX_BUSES,
    ModelSettings,
    driving_point_steps,
    harmonic_grid,
    impedance_columns,
    impedance_columns_dh,
    step_peaks,
    step_update,
)
from resonance.assessment.study import bank_models

from .conftest import CASES, ROOT, SMALL_CASE, write_case

RNG = np.random.default_rng(20240611)


def _pp_network(name: str):
    """A bundled pandapower network as arrays, with a synthetic supply impedance at its slack bus.

    The bundled transmission cases carry no short-circuit data; a 10 000 MVA, X/R = 10
    supply is attached (invented data, like every value the scan is compared with here).
    """
    import pandapower.networks as pn

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        net = getattr(pn, name)()
    arr, pp2m = net_to_arrays(net, require_grid_data=False)
    g = np.array([pp2m[int(b)] for b in net.ext_grid.bus], int)
    z_pu = arr.base_mva / 10000.0  # |Z| = S_base / S_sc (c = 1)
    r = z_pu / np.sqrt(1.0 + 10.0**2)
    return dataclasses.replace(arr, grid_bus=g, grid_r_pu=np.full(g.size, r), grid_x_pu=np.full(g.size, 10.0 * r))


@pytest.fixture(scope="module")
def case118():
    return _pp_network("case118")


@pytest.fixture(scope="module")
def small_plant(tmp_path_factory):
    case = load_case(write_case(tmp_path_factory.mktemp("plant"), SMALL_CASE))
    model = build_model(case)
    return model.arrays, bank_models(case, model.arrays, model.model_bus)[0]


def _direct(arr, h, bus, y_add, cols, settings=ModelSettings()):
    """Z with the admittance put into the matrix and solved again (no update formula)."""
    d = np.zeros((h.size, arr.n_bus), complex)
    d[:, bus] = y_add
    return impedance_columns(arr, h, cols, settings, d, rows=cols)


# ---------------------------------------------------------------- 1. rank-one and rank-q updates
@pytest.mark.parametrize("p", [0.0, 0.07])  # plain and 7 % detuned (tuned to h = 3.78)
def test_sherman_morrison_equals_direct_solve_small_plant(small_plant, p):
    # Reference: a direct solve with the step admittance on the diagonal (Sherman-Morrison
    # identity, derived from (Y + y e_k e_k^T)^-1).
    arr, bank = small_plant
    h = np.linspace(1.0, 40.0, 157)
    cols = np.arange(arr.n_bus)
    k = bank.index
    ys = bank_step_admittance(h, bank.step_b_pu(arr.base_mva), p, 40.0)
    z0 = impedance_columns(arr, h, cols, rows=cols)
    zs = step_update(z0, k, k, ys)
    for s in range(ys.shape[1]):
        ref = _direct(arr, h, k, ys[:, s], cols)
        np.testing.assert_allclose(zs[:, s], ref, rtol=1e-9, atol=1e-9 * np.abs(ref).max())


@pytest.mark.parametrize("p", [0.0, 0.07])
def test_sherman_morrison_equals_direct_solve_case118(case118, p):
    # Same reference on pandapower's case118 (sparse path: 118 > DENSE_MAX_BUSES).
    arr = case118
    assert arr.n_bus > DENSE_MAX_BUSES
    h = np.linspace(1.0, 50.0, 97)
    k, other = 58, 11
    cols = np.array([other, k])
    b = np.cumsum(np.full(4, 20.0)) / arr.base_mva  # 4 steps of 20 Mvar
    ys = bank_step_admittance(h, b, p, 50.0)
    z0 = impedance_columns(arr, h, cols, rows=cols)
    zs = step_update(z0, 1, 1, ys)
    for s in range(b.size):
        ref = _direct(arr, h, k, ys[:, s], cols)
        np.testing.assert_allclose(zs[:, s], ref, rtol=1e-9, atol=1e-9 * np.abs(ref).max())


# ---------------------------------------------------------------- 2. sparse and dense paths
@pytest.mark.parametrize("load_model", ["parallel_rl", "series_rl", "cigre_c4", "none"])
@pytest.mark.parametrize("r_model", ["constant", "sqrt_h", "breuer"])
def test_engine_values_equal_admittance_pattern(case118, load_model, r_model):
    # Reference: resonance.model.admittance.YPattern.values (the element models' own assembly).
    arr = case118
    pat = YPattern.build(arr)
    eng = SparseEngine.build(arr, r_model, load_model, pat)
    h = np.array([1.0, 2.5, 7.3, 49.0])
    extra = RNG.normal(size=(h.size, arr.n_bus)) * 1e-2 + 1j * RNG.normal(size=(h.size, arr.n_bus)) * 1e-2
    ref = pat.values(arr, h, extra, r_model, load_model)
    ours = eng.values(h, extra)
    for i in range(h.size):
        y_ref = sp.csr_matrix((ref[i], pat.cols, pat.indptr), shape=(arr.n_bus,) * 2)[eng.perm][:, eng.perm]
        diff = abs(eng.matrix(ours[i]) - y_ref).max()
        assert diff <= 1e-12 * abs(y_ref).max()


def test_sparse_and_dense_paths_equal_scipy_spsolve(case118):
    # Reference: scipy.sparse.linalg.spsolve on YPattern's matrix (default ordering, pivoting).
    arr = case118
    pat = YPattern.build(arr)
    h = np.array([1.0, 4.9, 13.3, 33.0])
    cols = np.array([3, 58])
    d = np.zeros((h.size, arr.n_bus), complex)
    d[:, 58] = bank_step_admittance(h, np.array([0.4]))[:, 0]
    zs = impedance_columns(arr, h, cols, diag_extra=d, method="sparse", workers=1)
    zd = impedance_columns(arr, h, cols, diag_extra=d, method="dense")
    for i in range(h.size):
        y = sp.csr_matrix((pat.values(arr, h[i:i + 1], d[i:i + 1])[0], pat.cols, pat.indptr),
                          shape=(arr.n_bus,) * 2).tocsc()
        e = np.zeros((arr.n_bus, cols.size))
        e[cols, np.arange(cols.size)] = 1.0
        ref = spla.spsolve(y, e)
        np.testing.assert_allclose(zs[i], ref, rtol=1e-10, atol=1e-12 * np.abs(ref).max())
        np.testing.assert_allclose(zd[i], ref, rtol=1e-10, atol=1e-12 * np.abs(ref).max())


@pytest.mark.parametrize("method", ["sparse", "dense"])
def test_derivative_equals_central_difference(case118, method):
    # Reference: central difference of Z itself, (Z(h + d) - Z(h - d)) / 2d, d = 1e-5
    # (truncation error ~ d^2 |Z'''|, far below the tolerance away from sharp peaks).
    arr = case118
    h = np.array([1.7, 6.2, 21.0])
    cols = np.array([5, 58])
    rows = np.array([5, 11, 58])
    _, dz = impedance_columns_dh(arr, h, cols, rows=rows, method=method, workers=1)
    dd = 1e-5
    ref = (impedance_columns(arr, h + dd, cols, rows=rows, method=method, workers=1)
           - impedance_columns(arr, h - dd, cols, rows=rows, method=method, workers=1)) / (2 * dd)
    np.testing.assert_allclose(dz, ref, rtol=1e-5, atol=1e-6 * np.abs(ref).max())


def test_process_pool_equals_serial(case118, monkeypatch):
    # Reference: the serial path of the same engine (the pool must only split the work).
    monkeypatch.setattr(engine_mod, "_POOL_MIN_WORK_S", 0.0)
    eng = SparseEngine.build(case118)
    h = np.linspace(1.0, 50.0, 64)
    cols = np.array([3, 58])
    z1 = sparse_columns(eng, h, cols, cols, workers=1, chunk=8)
    z2 = sparse_columns(eng, h, cols, cols, workers=2, chunk=8)
    np.testing.assert_allclose(z2, z1, rtol=0, atol=0)


def test_zero_diagonal_and_pivoted_fallback(monkeypatch):
    # Two buses joined by X = 1 pu, each with a capacitor B = 1 pu to ground: at h = 1 both
    # diagonals of Y vanish (j h - j / h = 0) while Y = [[0, j], [j, 0]] is regular (the
    # ordering is then taken at another order, and SuperLU's threshold pivoting steps off the
    # zero diagonal).  Reference: numpy.linalg.inv of the 2 x 2 matrix, derived from the pi model.
    from resonance.model.network import NetworkArrays

    arr = NetworkArrays(
        f_hz=50.0, base_mva=1.0, bus_names=("a", "b"), bus_kv=np.array([1.0, 1.0]),
        br_from=np.array([0]), br_to=np.array([1]), br_r_pu=np.array([0.0]), br_x_pu=np.array([1.0]),
        br_g_pu=np.array([0.0]), br_b_pu=np.array([0.0]), br_tap=np.array([1.0 + 0j]),
        br_kind=np.array([0]), sh_bus=np.array([0, 1]), sh_g_pu=np.zeros(2), sh_b_pu=np.ones(2))
    eng = SparseEngine.build(arr, load_model="none")
    h = np.array([1.0, 2.0])
    buses = np.array([0, 1])
    ref = np.stack([np.linalg.inv(np.array([[1j * x - 1j / x, 1j / x], [1j / x, 1j * x - 1j / x]])) for x in h])
    z, _, n_fb = eng.solve_chunk(h, buses, buses)
    np.testing.assert_allclose(z, ref, rtol=1e-12, atol=1e-12)
    assert n_fb == 0
    # a residual test that always fails sends every order through the fully pivoted solve
    monkeypatch.setattr(engine_mod, "RESIDUAL_RTOL", -1.0)
    z_fb, _, n_fb = eng.solve_chunk(h, buses, buses)
    np.testing.assert_allclose(z_fb, ref, rtol=1e-12, atol=1e-12)
    assert n_fb == h.size


# ---------------------------------------------------------------- 3. adaptive grid finds every peak
def _match_every_fine_peak(arr, bus, step_fun, h_max, settings=ModelSettings()):
    """Peaks of the 0.001 uniform scan that the adaptive scan of the 0.01 grid does not find."""
    found = step_peaks(arr, bus, step_fun, harmonic_grid(h_max, 0.01), settings, workers=1)
    hf = harmonic_grid(h_max, 0.001)
    zf = np.abs(driving_point_steps(arr, hf, bus, step_fun, settings, workers=1))
    # reference peaks: strict local maxima of the uniform 0.001 scan (relative prominence
    # 1e-9 only drops rounding-level wiggles)
    ref = grid_peaks(hf, zf, 1e-9)
    missed, n_ref = [], 0
    for c, idx in enumerate(ref):
        n_ref += idx.size
        for x in hf[idx]:
            if not np.any(np.abs(found.h_peak[c] - x) <= 0.0011):
                missed.append((c, float(x)))
    return missed, n_ref, found


@pytest.mark.parametrize("path", sorted(glob.glob(str(CASES / "*.toml"))), ids=lambda p: p.split("/")[-1])
def test_adaptive_grid_finds_every_peak_of_fine_scan_bundled_cases(path):
    # Reference: a uniform scan at 0.001 resolution (ten times the study grid) of the same model.
    case = load_case(path)
    model = build_model(case)
    arr = model.arrays
    st = case.study
    for bank in bank_models(case, arr, model.model_bus):
        missed, n_ref, found = _match_every_fine_peak(
            arr, bank.index, lambda hh, b=bank: b.step_admittance(hh, arr.base_mva), st.h_max,
            ModelSettings(st.resistance_model, st.load_model))
        assert missed == []
        assert sum(x.size for x in found.h_peak) >= n_ref


def test_adaptive_grid_finds_every_peak_of_fine_scan_case1354pegase():
    # Reference: uniform 0.001 scan of pandapower's case1354pegase with loads left out (lightly
    # damped: many peaks per curve below h = 4.5, including shallow shoulders of relative
    # prominence ~2e-4 that a refinement without derivatives missed).
    arr = _pp_network("case1354pegase")
    k = int(np.nonzero(arr.bus_kv == 220.0)[0][0])
    b = np.cumsum(np.full(4, 25.0)) / arr.base_mva  # four 25 Mvar steps at 220 kV

    def steps(hh):
        return bank_step_admittance(hh, b)

    missed, n_ref, _ = _match_every_fine_peak(arr, k, steps, 4.5, ModelSettings("constant", "none"))
    assert n_ref >= 20
    assert missed == []


# ---------------------------------------------------------------- 4. start-up stays light
def _modules_after(code: str) -> list[str]:
    out = subprocess.run([sys.executable, "-c", code + "\nimport sys\n"
                          "print(','.join(m for m in ('pandapower', 'matplotlib') if m in sys.modules))"],
                         cwd=ROOT, capture_output=True, text=True, timeout=120, check=True)
    last = out.stdout.strip().splitlines()[-1] if out.stdout.strip() else ""
    return [m for m in last.split(",") if m]


def test_cli_help_imports_neither_pandapower_nor_matplotlib():
    code = ("import resonance.cli\n"
            "p = resonance.cli.build_parser()\n"
            "import contextlib, io\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    try:\n"
            "        p.parse_args(['--help'])\n"
            "    except SystemExit:\n"
            "        pass")
    assert _modules_after(code) == []


def test_numeric_core_imports_neither_pandapower_nor_matplotlib():
    code = ("import resonance.harmonics.scan, resonance.harmonics.engine, resonance.harmonics.grid, resonance.model.admittance, "
            "resonance.assessment.study, resonance.standards.duty, resonance.standards.limits, resonance.standards.spectra")
    assert _modules_after(code) == []

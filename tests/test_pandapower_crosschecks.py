"""Cross-checks of the harmonic model against pandapower (load flow Ybus, IEC 60909)."""

from __future__ import annotations

import copy
import math
import warnings

import numpy as np
import pytest

from resonance.model.admittance import dense_y
from resonance.inputs.case_load import load_case
from resonance.model.netmodel import build_model, iec60909_sc_mva, net_to_arrays
from resonance.assessment.study import run_study

from .conftest import SMALL_CASE, write_case


def _pp_ybus(net):
    """pandapower's own Ybus after a load flow with the pi transformer model and no angles."""
    import pandapower as pp

    work = copy.deepcopy(net)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pp.runpp(work, calculate_voltage_angles=False, trafo_model="pi", numba=False)
    ppc = work._ppc
    return ppc["internal"]["Ybus"].toarray(), ppc["internal"]["bus"], work


@pytest.mark.parametrize("name", ["example_multivoltage", "mv_oberrhein", "case118"])
def test_admittance_at_fundamental_equals_pandapower_ybus(name):
    # Reference: pandapower's own bus admittance matrix (makeYbus inside runpp) for a bundled
    # network with transformer taps, parallel lines and three-winding transformers.
    import pandapower.networks as pn

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        net = getattr(pn, name)()
    before = copy.deepcopy(net.bus)
    arr, _ = net_to_arrays(net, require_grid_data=False)
    pd_ybus, pd_bus, _ = _pp_ybus(net)
    assert net.bus.equals(before)  # the caller's net is not modified
    # our Y at h = 1 without loads or the supply impedance is the network's Ybus
    ours = dense_y(arr.without_loads().without_grid(), np.array([1.0]), load_model="none")[0]
    assert ours.shape == pd_ybus.shape
    scale = np.abs(pd_ybus).max()
    np.testing.assert_allclose(ours, pd_ybus, rtol=0, atol=1e-9 * scale)


def test_sc_mva_agrees_with_iec60909_after_c_and_kt(tmp_path):
    # Reference: pandapower's IEC 60909 module (calc_sc, case "max"); IEC 60909-0:2016
    # eq. (29) I_k'' = c U_n / (sqrt3 |Z_k|), network feeder Z_Q = c U_nQ^2 / S_kQ'' (clause 6.2),
    # transformer correction K_T = 0.95 c_max / (1 + 0.6 x_T) (clause 6.3.3), c_max = 1.10
    # for LV systems with +10 % tolerance and for MV (Table 1).
    case = load_case(write_case(tmp_path, SMALL_CASE))
    model = build_model(case)
    res = run_study(case, model)
    sc = res.scans_for("B1")
    # physical Thevenin impedance at the LV bus, by hand from the case data (ohm at 0.48 kV)
    u = 0.48
    zq = u**2 / 48.0
    xq = zq / math.sqrt(1 + 1 / 10.0**2)
    zq_c = complex(xq / 10.0, xq)
    zt = 0.055 * u**2 / 1.5
    xt = zt / math.sqrt(1 + 1 / 6.0**2)
    zt_c = complex(xt / 6.0, xt)
    s_phys = u**2 / abs(zq_c + zt_c)
    assert sc.sc_mva == pytest.approx(s_phys, rel=1e-6)  # derived: S = U^2 / |Z_Q + Z_T|
    c = 1.10
    k_t = 0.95 * c / (1 + 0.6 * xt / (u**2 / 1.5))
    s_iec_expected = c * u**2 / abs(c * zq_c + k_t * zt_c)
    s_iec = iec60909_sc_mva(model, ["LV"])["LV"]
    assert s_iec == pytest.approx(s_iec_expected, rel=2e-3)  # pandapower IEC 60909
    assert res.sc_mva_iec60909["LV"] == pytest.approx(s_iec, rel=1e-9)
    assert s_iec > sc.sc_mva  # c and K_T put IEC 60909 a few per cent above the physical value


def test_load_flow_voltage_rise_matches_closed_form(tmp_path):
    # Reference: approximate voltage rise dV/V ~= Q_C / S_sc (REFERENCES.md, from memory) against
    # pandapower's Newton-Raphson load flow; loads removed so only the bank acts.
    text = SMALL_CASE.replace('kw = 600.0\npf = 0.85', 'kw = 0.0\npf = 1.0')
    case = load_case(write_case(tmp_path, text))
    res = run_study(case)
    sc = res.scans_for("B1")
    for st in sc.steps:
        q_mvar = st.kvar_nominal / 1000.0
        rise = st.v_bus_pu - 1.0
        # with X/R of 6-10 the closed form is good to a few per cent of the rise
        assert rise == pytest.approx(q_mvar / sc.sc_mva, rel=0.05)

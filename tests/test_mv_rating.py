"""Purchasable ratings above 1 kV (resonance.design.mv_rating) and their use in the detuned-bank proposal.

Expected values are hand-worked from the unit lists of resonance.design.construction (REFERENCES.md
"Capacitor bank construction", from memory), from Q = Q_R (U/U_R)^2 (IEEE Std 18) and from the
unbalance closed forms of REFERENCES.md; the proposal is re-checked by the project's own check."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from resonance.assessment.study import run_study
from resonance.design.construction import UNIT_KV_50HZ, UNIT_KV_60HZ, UNIT_KVAR
from resonance.design.detuned_step import capacitor_rating_kv
from resonance.design.detuning import propose_detuning
from resonance.design.mv_rating import purchasable_rating, rating_ladder, stage_ratings
from resonance.inputs.case_load import load_case
from resonance.model import netmodel

from .test_round_trip import _bank_findings, _check

ROOT = Path(__file__).resolve().parents[1]
MV = ROOT / "cases" / "water_plant_mv.toml"
DEMO = ROOT / "cases" / "demo_plant.toml"
SQ3 = math.sqrt(3.0)


def _proposal(path: Path) -> dict:
    case = load_case(path)
    model = netmodel.build_model(case)
    return propose_detuning(case, model, run_study(case, model=model))


@pytest.fixture(scope="module")
def mv():
    return _proposal(MV)["C-PUMP"]


# ----------------------------------------------------------------------------- the pure function


def test_water_plant_numbers_by_hand():
    # 13.8 kV bus, p = 5.67 %: U/(1-p) = 14.6295 kV line to line, 8.4464 kV per phase (derived).
    # 60 Hz list (from memory): 2 x 4.16 = 8.32 is short, 1 x 9.54 is the least at or above (2 x 4.8 = 9.6)
    u_need = 13.8 / (1 - 0.0567)
    r = purchasable_rating(13.8, 1200.0, u_need, 60.0)
    c = r["construction"]
    assert (c["connection"], c["series_groups"], c["unit_kv"]) == ("wye_ungrounded", 1, 9.54)
    assert r["rated_kv"] == pytest.approx(SQ3 * 9.54, rel=1e-12)
    # Q_R = 1200 (16.5238/14.6295)^2 = 1530.8 kvar, 510.3 per string (IEEE Std 18 scaling, derived);
    # within 5 % above: 11 x 50 = 550 is 7.8 % over, 6 x 100 = 600 over; none: closest above is 550
    # (derived by listing P = ceil(510.3/q) for every size of the list)
    assert c["kvar_required_at_rated"] == pytest.approx(1200.0 * (SQ3 * 9.54 / u_need) ** 2, rel=1e-12)
    assert r["kvar_rated"] >= c["kvar_required_at_rated"]
    assert (c["parallel_units"], c["unit_kvar"], c["units_total"]) == (11, 50.0, 33)
    assert r["kvar_rated"] == pytest.approx(1650.0)
    # ungrounded wye, S = 1, P = 11, F = 1: 3 S P / (3 S (P-F) + 2 F) = 33/32 (REFERENCES.md closed form)
    u = c["unbalance"]
    assert u["v_unit_pu"] == pytest.approx(33 / 32, rel=1e-12)
    assert u["neutral_shift_pu"] == pytest.approx(1 / 32, rel=1e-12)  # F / (3 S (P-F) + 2 F), REFERENCES.md
    assert u["v_unit_rated_pu"] == pytest.approx(33 / 32 * (u_need / SQ3) / 9.54, rel=1e-12)
    assert u["exceeds_limit"] is False and u["limit_pu"] == pytest.approx(1.10)  # IEEE Std 18-2002 1.10 pu
    assert c["sources"]["unit_kv"] == UNIT_KV_60HZ.source and c["sources"]["unit_kvar"] == UNIT_KVAR.source


def test_unbalance_over_110_pct_moves_the_choice():
    # 11 kV, 50 Hz, need 11.7 kV: 6.755 kV per phase -> 1 x 7.2 kV (50 Hz list, from memory), 0.938 pu healthy.
    # A wye of P = 2 would leave 6/5 x 0.938 = 1.126 pu > 1.10 on one fuse (REFERENCES.md closed form);
    # the choice keeps within the limit (documented rule)
    r = purchasable_rating(11.0, 2000.0, 11.7, 50.0)
    c = r["construction"]
    assert c["unit_kv"] == 7.2 and c["unit_kv"] in UNIT_KV_50HZ.values
    assert c["unbalance"]["v_unit_rated_pu"] <= 1.10 and not c["unbalance"]["exceeds_limit"]
    assert c["parallel_units"] >= 3


@pytest.mark.parametrize("u_bus,kvar,u_need,f", [(13.8, 1200.0, 14.63, 60.0), (12.47, 1200.0, 13.2, 60.0),
                                                  (34.5, 6000.0, 36.6, 60.0), (11.0, 1500.0, 11.8, 50.0),
                                                  (20.0, 3000.0, 21.2, 50.0)])
def test_rating_follows_the_documented_rule(u_bus, kvar, u_need, f):
    r = purchasable_rating(u_bus, kvar, u_need, f)
    c = r["construction"]
    volts = (UNIT_KV_60HZ if f == 60.0 else UNIT_KV_50HZ).values
    assert c["connection"] in ("wye_ungrounded", "double_wye_ungrounded")
    assert c["unit_kv"] in volts and c["unit_kvar"] in UNIT_KVAR.values
    assert r["rated_kv"] == pytest.approx(SQ3 * c["series_groups"] * c["unit_kv"], rel=1e-12)  # wye: sqrt3 S U
    assert r["rated_kv"] >= u_need * (1 - 1e-12)
    # least overrating over S <= 16 and the listed voltages (brute force; no case here is group-limited)
    best = min(s * v for s in range(1, 17) for v in volts if s * v >= u_need / SQ3 * (1 - 1e-12))
    assert c["series_groups"] * c["unit_kv"] == pytest.approx(best, rel=1e-12)
    assert c["overrating"] == pytest.approx(r["rated_kv"] / u_need, rel=1e-12) and c["overrating"] < 1.25
    # the same capacitance at the new rating: Q_R = Q (U_R/U_need)^2 (IEEE Std 18)
    assert r["kvar_rated"] >= kvar * (r["rated_kv"] / u_need) ** 2 * (1 - 1e-12)
    assert r["kvar_rated"] == pytest.approx(c["units_total"] * c["unit_kvar"], rel=1e-12)
    assert c["units_total"] == c["strings"] * c["series_groups"] * c["parallel_units"]
    assert c["parallel_units"] >= 2  # common practice: two fused units per group at least
    assert c["unbalance"] is not None and c["unbalance"]["failed_units"] == 1


def test_stages_share_one_rating_and_each_is_a_whole_construction():
    r = stage_ratings(13.8, [600.0, 1200.0, 1200.0], 14.63, 60.0)
    assert len(r["stages"]) == 3 and [s["stage"] for s in r["stages"]] == [1, 2, 3]
    for s, q in zip(r["stages"], (600.0, 1200.0, 1200.0)):
        assert s["bank_rated_kv"] == pytest.approx(r["rated_kv"], rel=1e-12)  # one rated voltage
        assert (s["connection"], s["series_groups"], s["unit_kv"]) == (r["connection"], r["series_groups"],
                                                                        r["unit_kv"])
        assert s["bank_kvar_rated"] >= q * (r["rated_kv"] / 14.63) ** 2 * (1 - 1e-12)  # IEEE Std 18 scaling
        assert s["bank_kvar_rated"] == pytest.approx(s["units_total"] * s["unit_kvar"], rel=1e-12)
    assert r["steps_kvar"] == [s["bank_kvar_rated"] for s in r["stages"]]
    assert r["units_total"] == sum(s["units_total"] for s in r["stages"])
    # a stage so large that one group per string would pass 4650 kvar (common practice, from memory):
    # the small stage takes the large one's series groups, its overrating still against the real need
    big = stage_ratings(13.8, [15000.0, 1000.0], 14.55, 60.0, connections="wye_ungrounded")
    s0, s1 = big["stages"]
    assert s0["parallel_units"] * s0["unit_kvar"] <= 4650.0 and s0["series_groups"] >= 2
    assert (s1["series_groups"], s1["unit_kv"]) == (s0["series_groups"], s0["unit_kv"])
    assert s1["overrating"] == pytest.approx(s1["leg_rated_kv"] / (14.55 / SQ3), rel=1e-12)


def test_ladder_rises_and_keeps_the_capacitance():
    ladder = rating_ladder(13.8, [1200.0] * 3, 14.63, 60.0, 3)
    kvs = [kv for kv, _ in ladder]
    assert len(ladder) == 4 and kvs == sorted(set(kvs))  # strictly rising
    for kv, r in ladder:
        assert kv == pytest.approx(r["rated_kv"], abs=5e-5)  # rounded to 0.1 V for the case file
        leg = r["series_groups"] * r["unit_kv"]
        assert r["rated_kv"] == pytest.approx(SQ3 * leg, rel=1e-12)
        # C ~ Q_R / U_R^2 is the same on every rung (IEEE Std 18); Q_R covers it
        need = r["stages"][0]["kvar_required_at_rated"]
        assert need / r["rated_kv"] ** 2 == pytest.approx(1200.0 / 14.63 ** 2, rel=1e-12)
        assert r["steps_kvar"][0] >= need * (1 - 1e-12)


@pytest.mark.parametrize("call,name", [
    (lambda: purchasable_rating(0.48, 100.0, 0.55, 60.0), "u_bus_kv"),
    (lambda: purchasable_rating(-13.8, 100.0, 14.6, 60.0), "u_bus_kv"),
    (lambda: purchasable_rating(13.8, 0.0, 14.6, 60.0), "kvar_nameplate"),
    (lambda: purchasable_rating(13.8, float("nan"), 14.6, 60.0), "kvar_nameplate"),
    (lambda: purchasable_rating(13.8, 1200.0, 8.4, 60.0), "u_need_kv"),  # phase voltage passed by mistake
    (lambda: purchasable_rating(13.8, 1200.0, "x", 60.0), "u_need_kv"),
    (lambda: purchasable_rating(13.8, 1200.0, 14.6, 55.0), "f_hz"),
    (lambda: purchasable_rating(13.8, 1200.0, 14.6, 60.0, connections=["star"]), "connections"),
    (lambda: purchasable_rating(13.8, 1200.0, 14.6, 60.0, connections=[]), "connections"),
    (lambda: stage_ratings(13.8, [], 14.6, 60.0), "stages_kvar"),
    (lambda: stage_ratings(13.8, [1200.0, -1.0], 14.6, 60.0), r"stages_kvar\[1\]"),
    (lambda: stage_ratings(13.8, [1200.0], 14.6, 60.0, min_rated_kv=0.0), "min_rated_kv"),
    (lambda: rating_ladder(13.8, [1200.0], 14.6, 60.0, -1), "count"),
])
def test_bad_parameters_name_themselves(call, name):
    with pytest.raises(ValueError, match=name):
        call()


# ----------------------------------------------------------------------------- in the proposal


def test_water_plant_proposal_is_a_construction(mv):
    rec = mv["recommended"]
    assert rec is not None
    c = rec["construction"]
    assert c is not None and c["connection"] in ("wye_ungrounded", "double_wye_ungrounded")
    # rated kV = sqrt3 x S x unit_kv of a standard unit (60 Hz list, from memory), to the 0.1 V of the case file
    assert c["unit_kv"] in UNIT_KV_60HZ.values
    assert rec["rated_kv"] == pytest.approx(SQ3 * c["series_groups"] * c["unit_kv"], abs=5e-5)
    assert rec["bank_table"]["rated_kv"] == rec["rated_kv"]
    u_c1 = 13.8 / (1 - rec["detuning_pct"] / 100)  # U/(1-p), REFERENCES.md "Detuned banks"
    assert rec["rated_kv"] >= u_c1
    assert 1.0 <= c["overrating"] < 1.25 and c["overrating"] == pytest.approx(c["rated_kv"] / u_c1, rel=1e-9)
    # each stage a whole construction; the stage nameplates are the units'
    assert rec["steps_kvar"] == [s["bank_kvar_rated"] for s in c["stages"]]
    for s in c["stages"]:
        assert s["bank_kvar_rated"] == pytest.approx(s["units_total"] * s["unit_kvar"], rel=1e-12)
        u = s["unbalance"]
        assert set(u) >= {"v_unit_pu", "v_unit_rated_pu", "neutral_shift_pu", "exceeds_limit"}
        assert u["neutral_shift_pu"] > 0 and isinstance(u["exceeds_limit"], bool)  # ungrounded: the neutral moves
    # the net output per stage at the bus is at least the plain bank's 1200 kvar at 14.4 kV brought to 13.8 kV,
    # and within 10 %: Q_net = Q_R (U/U_R)^2 / (1 - p) (REFERENCES.md "Detuned banks")
    p = rec["detuning_pct"] / 100
    for q in rec["steps_kvar"]:
        q_net = q * (13.8 / rec["rated_kv"]) ** 2 / (1 - p)
        assert 1200.0 * (13.8 / 14.4) ** 2 * (1 - 1e-4) <= q_net <= 1.10 * 1200.0 * (13.8 / 14.4) ** 2
    # every candidate above 1 kV carries its construction; the old made-to-order rating (14.6 kV) is gone
    for cand in mv["candidates"]:
        assert cand["construction"] is not None
        assert cand["rated_kv"] == pytest.approx(SQ3 * cand["construction"]["series_groups"]
                                                 * cand["construction"]["unit_kv"], abs=5e-5)


def test_low_voltage_bank_keeps_its_listed_ratings():
    prop = _proposal(DEMO)["PFC-1"]
    rec = prop["recommended"]
    assert rec is not None and rec["construction"] is None
    from resonance.assessment.tuning import DetuningSettings  # noqa: PLC0415

    std = DetuningSettings().standard_cap_kv
    for cand in prop["candidates"]:
        assert cand["construction"] is None
        assert cand["rated_kv"] in std  # the low-voltage list, common practice (from memory)
        # the first rating tried is the listed one at or above U/(1-p), as before
        first = (cand.get("ratings_tried_kv") or [cand["rated_kv"]])[0]
        assert first == capacitor_rating_kv(cand["u_cap_fundamental_kv"], std, 0.1)


def test_water_plant_recommended_bank_passes_its_own_check(mv, tmp_path):
    # the project's own contract (tests/test_round_trip.py): the recommended bank, written into the case,
    # passes check; here the bank_table alone is pasted into the case file, the switching data kept
    rec = mv["recommended"]
    t = rec["bank_table"]
    text = MV.read_text(encoding="utf-8")
    old = 'rated_kv = 14.4\nsteps_kvar = [1200.0, 1200.0, 1200.0]\n'
    assert old in text
    steps = ", ".join(repr(float(x)) for x in t["steps_kvar"])
    new = (f"rated_kv = {t['rated_kv']!r}\nsteps_kvar = [{steps}]\ndetuning_pct = {t['detuning_pct']!r}\n"
           f"reactor_q = {t['reactor_q']!r}\n")
    path = tmp_path / "water_plant_detuned.toml"
    path.write_text(text.replace(old, new), encoding="utf-8")
    _, data = _check(path, tmp_path / "out")
    assert _bank_findings(data, "C-PUMP") == []
    bank = next(b for b in data["banks"] if b["name"] == "C-PUMP")
    assert bank["rated_kv"] == pytest.approx(SQ3 * 9.54, abs=1e-4)  # 1 x 9.54 kV units (hand-worked above)
    assert bank["detuning_pct"] == pytest.approx(t["detuning_pct"])
    # results.json of the original case carries the construction beside the contract keys, as plain JSON
    _, first = _check(MV, tmp_path / "first")
    got = next(b for b in first["banks"] if b["name"] == "C-PUMP")["detuning"]["recommended"]
    assert {"tuning_order", "detuning_pct", "rated_kv", "steps_kvar", "bank_table"} <= set(got)
    assert got["construction"]["stages"][0]["unbalance"] == rec["construction"]["stages"][0]["unbalance"]


def test_delta_fallback_rating_is_the_leg_voltage():
    # 4.16 kV, 60 Hz, need 4.41 kV: a wye needs 2.546 kV per phase -> 4.16 kV units, 7.2 kV rated, 1.73 x bus;
    # a delta leg needs 4.41 kV -> 1 x 4.8 kV (60 Hz list, from memory), rated 4.8 kV (derived)
    wye = stage_ratings(4.16, [600.0] * 3, 4.41, 60.0)
    assert wye["unit_kv"] == 4.16 and wye["rated_kv"] == pytest.approx(SQ3 * 4.16, rel=1e-12)
    d = stage_ratings(4.16, [600.0] * 3, 4.41, 60.0, connections="delta")
    assert (d["connection"], d["series_groups"], d["unit_kv"]) == ("delta", 1, 4.8)
    assert d["rated_kv"] == pytest.approx(4.8, rel=1e-12) and d["overrating"] == pytest.approx(4.8 / 4.41, rel=1e-12)
    u = d["stages"][0]["unbalance"]
    assert u["neutral_shift_pu"] is None and u["v_unit_pu"] == 1.0  # S = 1: the source holds the leg (derived)

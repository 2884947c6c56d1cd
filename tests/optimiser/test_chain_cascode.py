"""The cascode search (docs/search.md, "Cascodes"): a request the demo drawer can meet,
the pieces of every role counted together against stock, the capacitors against the
RC high-pass corner, the divider estimates against the divider rule, a request nothing
meets and one no cascode can."""

from __future__ import annotations

import math

import numpy as np
import pytest

from optimiser.request import parse_request
from optimiser.search.chain_cascode import VCE_MIN_V, VE_MIN_V, dividers
from optimiser.search.chains import check_chain_request, search_chains
from optimiser.stages import pair_form
from tests.demo_drawer import demo_snapshot

from .chain_enumeration import assert_fits_stock, enumerate_chains

#: 30 dB into 10k from 600 Ω, 12 V, f_low ≤ 50 Hz, f_high ≥ 1 MHz: checked first with
#: `drawerfit analyse examples/bench/cascode-check.toml` (22.7 dB with RC 2k2, RE 100R;
#: RC 4k7 and RE 68R bring it near 30 dB).
USER = {"topology": "cascode", "supply_v": 12, "load_ohm": "10k", "source_ohm": "600",
        "gain_db": 30, "f_low_max_hz": 50, "f_high_min_hz": 1e6}


@pytest.fixture(scope="module")
def demo():
    return demo_snapshot()


@pytest.fixture(scope="module")
def found(demo):
    req = parse_request(USER, pairs=True)
    return req, search_chains(req, demo, top=5)


def test_cascode_is_searched():
    check_chain_request(parse_request(USER, pairs=True))        # no refusal


def test_ranked_cascodes_meet_the_request(found):
    req, res = found
    assert len(res.designs) >= 3, res.search
    roles = set(pair_form("cascode").role_names)
    scores = [d.score for d in res.designs]
    assert scores == sorted(scores)
    for k, d in enumerate(res.designs, 1):
        assert d.rank == k and d.topology == "cascode" and d.coupling is None
        assert d.meets_spec and not d.violations
        assert set(d.parts) <= roles
        assert {"R1", "R2", "R3", "RC", "C_B", "C_IN", "C_OUT"} <= set(d.parts)
        assert abs(d.metrics["gain_db"] - 30.0) <= req.gain_tol_db
        assert d.metrics["f_low_hz"] <= 50.0 and d.metrics["f_high_hz"] >= 1e6
        # one current through both transistors: S2's emitter current is S1's collector
        # current (Kirchhoff's current law at the middle node)
        s1, s2 = d.stages
        assert s2["ve_v"] == pytest.approx(s1["vc_v"], rel=1e-9)
        assert s1["ic_a"] == pytest.approx(s2["ic_a"], rel=0.02)
    s = res.search
    assert s["complete"] is False
    assert s["dividers"] > 0 and s["estimated"] > 0 and s["chains_screened"] > 0
    js = res.to_json()
    assert js["designs"][0]["topology"] == "cascode" and js["designs"][0]["coupling"] is None


def test_supply_current_is_the_divider_and_the_collector_resistor(found):
    # the score's current term: what R1 and RC draw from the supply (Ohm's law on the
    # design's own node voltages), in units of CURRENT_UNIT_A
    from optimiser.score import CURRENT_UNIT_A
    req, res = found
    for d in res.designs:
        v = d.values()
        s1, s2 = d.stages
        i_r1 = (req.supply_v - s2["vb_v"]) / v["R1"]
        i_rc = (req.supply_v - s2["vc_v"]) / v["RC"]
        assert d.score_terms["current"] == pytest.approx((i_r1 + i_rc) / CURRENT_UNIT_A,
                                                         rel=1e-6)


def test_pieces_of_every_role_fit_stock_together(found, demo):
    # counted here from the snapshot's rows: every role and both transistors together
    assert_fits_stock(found[1].designs, demo)


def test_capacitors_hold_their_voltages(found):
    # each capacitor's DC voltage (the engine's node voltages) within 80 % of its
    # piece's rating (the derating of docs/model.md)
    _, res = found
    for d in res.designs:
        s1, s2 = d.stages
        volts = {"C_IN": s1["vb_v"], "C_B": s2["vb_v"], "C_OUT": s2["vc_v"],
                 "C_BYP": s1["ve_v"]}
        for role, v in volts.items():
            if role in d.parts:
                assert abs(v) <= 0.8 * d.parts[role].pieces[0].rating, (d.rank, role)


def test_divider_estimates():
    # the unloaded divider: V_B1 = V·R3/ΣR, V_B2 = V·(R2 + R3)/ΣR, R_TH = R3‖(R1 + R2)
    # (Thevenin's theorem); every triple kept leaves room for both V_CE
    values = np.array([1e3, 2.2e3, 4.7e3, 10e3, 22e3, 47e3])
    d = dividers(12.0, values, 0.65)
    assert len(d["R1"]) > 0
    s = d["R1"] + d["R2"] + d["R3"]
    assert np.allclose(d["vb1"], 12.0 * d["R3"] / s)
    assert np.allclose(d["vb2"], 12.0 * (d["R2"] + d["R3"]) / s)
    assert np.allclose(d["rth"], d["R3"] * (d["R1"] + d["R2"]) / s)
    assert np.all(d["vb1"] >= 0.65 + VE_MIN_V) and np.all(d["vb1"] <= 6.0)
    assert np.all(d["vb2"] - d["vb1"] >= VCE_MIN_V) and np.all(12.0 - d["vb2"] >= VCE_MIN_V)


def test_coupling_capacitors_pass_their_corners(found):
    # the RC high-pass corner f = 1/(2πRC) of C_OUT into RC + R_load: at or below f_low
    req, res = found
    for d in res.designs:
        v = d.values()
        assert 1.0 / (2 * math.pi * v["C_OUT"] * (v["RC"] + req.load_ohm)) <= 50.0


def test_nothing_meets_says_what_was_searched(demo):
    # a cascode's output impedance is about RC: 50 Ω with 30 dB into 10k asks
    # g_m·50 Ω ≥ 31.6, an I_C above 16 mA (g_m = I_C/V_T), beyond what is searched
    req = parse_request({**USER, "zout_max_ohm": 50}, pairs=True)
    res = search_chains(req, demo, top=3)
    assert res.designs == [] and res.nearest_misses
    assert all(any(v.startswith("zout_ohm") for v in d.violations) for d in res.nearest_misses)
    s = res.search
    assert s["complete"] is False and not s.get("proven_infeasible")
    assert s["dividers"] > 0 and s["transistor_pairs"] > 0 and s["chains_screened"] > 0


def test_beyond_the_lower_transistor_limit_is_proven_infeasible(demo):
    # the lower transistor's gain g_m·RC is below V_supply/V_T (53.4 dB from 12 V, see
    # tests/optimiser/test_chain_search.py)
    res = search_chains(parse_request({**USER, "gain_db": 60}, pairs=True), demo)
    assert res.designs == [] and res.search["proven_infeasible"] is True


def test_cascode_search_agrees_with_enumeration():
    # every cascode of a four-value drawer (tests/optimiser/chain_enumeration.py: every
    # value in every resistor role, each of the three emitter forms), ranked by the
    # engine; random tiny drawers, which may disagree, are in docs/search.md

    from .test_chain_search import _drawer

    req = parse_request({"topology": "cascode", "supply_v": 12.0, "load_ohm": 1e4,
                         "source_ohm": 600.0, "f_low_max_hz": 100, "thd_max_pct": "none",
                         "gain_db": 20.0, "gain_tol_db": 3.0}, pairs=True)
    snap = _drawer((1200.0, 5600.0, 8200.0, 56000.0), (3, 4, 3, 3))
    best, meeting = enumerate_chains(req, snap)
    res = search_chains(req, snap, top=3)
    assert best is not None and meeting > 0
    assert res.designs and res.designs[0].score == pytest.approx(best, rel=1e-9, abs=1e-9)


def test_a_tiny_time_limit_stops_the_search_and_says_what_is_left(demo, found):
    # the search stops at the limit (no transistor pair begun, no candidate judged past
    # it) and names what it left; the full search (``found``, no limit) left nothing
    from drawerfit.render.chains import searched_line

    req, full = found
    assert not full.search.get("stopped_at_limit") and full.search["pairs_searched"] == 9
    res = search_chains(req, demo, top=5, time_limit_s=1e-3, unlocks=False)
    s = res.search
    assert s["stopped_at_limit"] is True and s["complete"] is False and not s["proven"]
    # the first pair is begun before the clock is read again: every other is left
    assert s["pairs_searched"] + len(s["pairs_left"]) == s["transistor_pairs"] == 9
    assert 1 <= s["pairs_searched"] < 9
    assert s["chains_left_by_time"] > 0
    assert all(d.meets_spec for d in res.designs)
    words = " ".join(searched_line(res).split())
    assert "Stopped at the time limit" in words and "Not proven" in words
    assert f"{s['pairs_searched']} of 9 transistor pairs searched" in words
    assert ", ".join(s["pairs_left"]) in words

"""Cautions appear exactly when their condition holds (both sides of every threshold).

The thresholds are rules of thumb (common practice): capacitors at ≤ 80 % of their
voltage rating and resistor pieces at ≤ 50 % of their power rating (docs/model.md,
"Validity"), a transistor hot to the touch above 50 % of pd or 0.25 W, the
high-voltage/mains note above 30 V.  The node voltages in these hand-made designs
are chosen to sit just either side of each threshold; the expected dissipations are
Ohm's law, P = V²/R and P = I²·R.
"""

from __future__ import annotations

import pytest

from inventory.parts import Transistor
from optimiser.cautions import (
    CautionSettings,
    capacitor_bias,
    cautions,
    resistor_piece_power,
    transistor_power,
)
from optimiser.design import Design, Piece, RolePick
from optimiser.request import Request


def pick(role, value, *, kind=None, rating=None, dielectric=None, pieces=None, joined=None):
    kind = kind or ("capacitor" if role.startswith("C_") else "resistor")
    if kind == "capacitor" and dielectric is None:
        dielectric = "ceramic"                      # the stock default
    if pieces is None:
        pieces = (Piece(value, 1, 1, "A1", kind, None, rating, dielectric),)
    return RolePick(role, value, str(value), tuple(pieces), joined)


def ce_design(*, vb=2.0, ve=1.35, vc=7.0, pd_q=0.005, parts=None, topology="ce"):
    base = {
        "R1": pick("R1", 47e3), "R2": pick("R2", 10e3), "RC": pick("RC", 4.7e3),
        "RE": pick("RE", 220.0), "RE_BYP": pick("RE_BYP", 1e3),
        "C_BYP": pick("C_BYP", 47e-6), "C_IN": pick("C_IN", 1e-6), "C_OUT": pick("C_OUT", 1e-6),
    }
    base.update(parts or {})
    return Design(topology, "GP-N1", {k: v for k, v in base.items() if v is not None},
                  {"vb_v": vb, "ve_v": ve, "vc_v": vc, "pd_q_w": pd_q}, True)


def kinds(items, role=None):
    return [c.kind for c in items if role is None or c.role == role]


REQ = Request("ce", 12.0)


def test_always_the_bench_note_and_nothing_else_for_a_gentle_design():
    out = cautions(ce_design(), REQ)
    assert kinds(out) == ["verify"]
    assert out[-1].level == "note"
    assert "verify" in out[-1].text and "bench" in out[-1].text


@pytest.mark.parametrize("vc,expect", [(7.9, False), (8.1, True)])
def test_capacitor_voltage_against_80_percent_of_rating(vc, expect):
    # C_OUT sits between the collector and the load at 0 V: its DC voltage is vc.
    # A 10 V part may carry 8 V (80 %, docs/model.md, "Validity", common practice).
    d = ce_design(vc=vc, parts={"C_OUT": pick("C_OUT", 1e-6, rating=10.0)})
    out = cautions(d, REQ)
    assert ("capacitor_voltage" in kinds(out, "C_OUT")) is expect
    if expect:
        text = [c.text for c in out if c.kind == "capacitor_voltage"][0]
        assert "80%" in text and "10 V" in text


def test_capacitor_derating_is_a_setting():
    d = ce_design(vc=7.0, parts={"C_OUT": pick("C_OUT", 1e-6, rating=10.0)})
    assert "capacitor_voltage" not in kinds(cautions(d, REQ))
    strict = CautionSettings(capacitor_derating=0.6)
    assert "capacitor_voltage" in kinds(cautions(d, REQ, settings=strict))


def test_capacitor_nodes_follow_the_roles():
    d = ce_design(vb=2.0, ve=1.22, vc=7.0)
    bias = capacitor_bias(d, REQ)
    assert bias["C_IN"].volts == pytest.approx(2.0) and bias["C_IN"].plus == "base"
    assert bias["C_OUT"].volts == pytest.approx(7.0) and bias["C_OUT"].plus == "collector"
    # C_BYP across RE_BYP: the divider RE (220) over RE_BYP (1k) of the emitter voltage.
    assert bias["C_BYP"].volts == pytest.approx(1.22 * 1000 / 1220)
    cc = Design("cc", "GP-N1", {"R1": pick("R1", 10e3), "R2": pick("R2", 10e3),
                                "RE": pick("RE", 1e3), "C_IN": pick("C_IN", 1e-6),
                                "C_OUT": pick("C_OUT", 1e-6)},
                {"vb_v": 6.0, "ve_v": 5.35, "vc_v": 12.0}, True)
    b = capacitor_bias(cc, Request("cc", 12.0))
    assert b["C_OUT"].plus == "emitter" and b["C_OUT"].volts == pytest.approx(5.35)
    cb = Design("cb", "GP-N1", {"R1": pick("R1", 10e3), "R2": pick("R2", 10e3),
                                "RC": pick("RC", 2e3), "RE": pick("RE", 1e3),
                                "C_B": pick("C_B", 10e-6), "C_IN": pick("C_IN", 10e-6),
                                "C_OUT": pick("C_OUT", 1e-6)},
                {"vb_v": 6.0, "ve_v": 5.35, "vc_v": 9.0}, True)
    b = capacitor_bias(cb, Request("cb", 12.0))
    assert b["C_IN"].plus == "emitter" and b["C_B"].plus == "base"
    assert b["C_OUT"].plus == "collector"


def test_polarity_named_for_each_polarised_capacitor_and_only_those():
    d = ce_design(parts={
        "C_OUT": pick("C_OUT", 10e-6, dielectric="electrolytic"),
        "C_BYP": pick("C_BYP", 100e-6, dielectric="electrolytic"),
        "C_IN": pick("C_IN", 1e-6, dielectric="film"),
    })
    out = cautions(d, REQ)
    pol = {c.role: c.text for c in out if c.kind == "polarity"}
    assert set(pol) == {"C_OUT", "C_BYP"}
    assert "+ toward the collector" in pol["C_OUT"]
    assert "+ toward the emitter side (the RE/RE_BYP junction)" in pol["C_BYP"]


def test_polarity_faces_the_higher_node_even_when_a_node_is_below_ground():
    # A (hypothetical) negative base voltage puts + on the source side of C_IN.
    d = ce_design(vb=-1.0, parts={"C_IN": pick("C_IN", 10e-6, dielectric="tantalum")})
    pol = [c.text for c in cautions(d, REQ) if c.kind == "polarity"]
    assert len(pol) == 1 and "+ toward the source" in pol[0]


@pytest.mark.parametrize("vc,expect", [(12.0 - 0.76, False), (12.0 - 0.78, True)])
def test_resistor_power_against_half_its_rating(vc, expect):
    # RC = 4.7 Ω rated 0.25 W: 50 % is 0.125 W, reached at V = sqrt(0.125·4.7) = 0.766 V
    # across it (P = V²/R).
    d = ce_design(vc=vc, parts={"RC": pick("RC", 4.7, rating=0.25)})
    out = cautions(d, REQ)
    assert ("resistor_power" in kinds(out, "RC")) is expect


def test_resistor_pieces_share_the_power():
    # Two 2k2 in series carry the same current: each takes half of the role's power.
    series = pick("RC", 4.4e3, pieces=(Piece(2.2e3, 2, 3, "B1", "resistor", None, 0.125),),
                  joined="series")
    shares = resistor_piece_power(series, 0.2)
    assert [w for w, _ in shares] == pytest.approx([0.1, 0.1])
    # 1k ∥ 4k: the same voltage, P ∝ 1/R, so 80 % and 20 %.
    par = pick("RC", 800.0, joined="parallel", pieces=(
        Piece(1e3, 1, 4, "B2", "resistor", None, 0.25), Piece(4e3, 1, 5, "B3", "resistor", None, 0.25)))
    assert [w for w, _ in resistor_piece_power(par, 1.0)] == pytest.approx([0.8, 0.2])


def test_series_pair_stays_under_its_derating_where_one_piece_would_not():
    # RC = 100 Ω with vc = 6.5 V: P = 5.5²/100 = 0.3025 W for the role.
    one = ce_design(vc=6.5, parts={"RC": pick("RC", 100.0, rating=0.5)})
    assert "resistor_power" in kinds(cautions(one, REQ))       # 0.30 W > 0.25 W
    two = ce_design(vc=6.5, parts={"RC": pick("RC", 100.0, joined="series", pieces=(
        Piece(50.0, 2, 7, "C1", "resistor", None, 0.5),))})
    assert "resistor_power" not in kinds(cautions(two, REQ))   # 0.15 W each < 0.25 W


@pytest.mark.parametrize("p,expect_hot,expect_over", [
    (0.24, False, False), (0.26, True, False), (0.51, True, True)])
def test_transistor_heat_and_rating(p, expect_hot, expect_over):
    # pd = 0.5 W: hot above min(0.25 W, 50 % of pd) = 0.25 W; over the rating above 0.5 W.
    q = Transistor("GP-N1", 100, 300, pd=0.5)
    out = cautions(ce_design(pd_q=p), REQ, q)
    assert ("hot" in kinds(out)) is expect_hot
    assert ("transistor_power" in kinds(out)) is expect_over


@pytest.mark.parametrize("p,expect_hot", [(0.099, False), (0.101, True)])
def test_hot_at_half_of_a_small_pd(p, expect_hot):
    q = Transistor("GP-N1", 100, 300, pd=0.2)
    assert ("hot" in kinds(cautions(ce_design(pd_q=p), REQ, q))) is expect_hot


def test_transistor_power_takes_the_worst_corner():
    import numpy as np
    d = ce_design(pd_q=0.1)
    corners = {"ic_a": np.array([0.01, 0.02, 0.05, 0.01]), "vce_v": np.array([5.0, 5, 6, 5])}
    assert transistor_power(d, corners) == pytest.approx(0.3)
    out = cautions(d, REQ, Transistor("GP-N1", 100, 300, pd=0.625), corners=corners)
    assert "hot" in kinds(out)
    assert "hot" not in kinds(cautions(d, REQ, Transistor("GP-N1", 100, 300, pd=0.625)))


@pytest.mark.parametrize("vceo,expect", [(12.5, False), (11.5, True)])
def test_supply_against_vceo(vceo, expect):
    q = Transistor("GP-N1", 100, 300, vceo=vceo)
    assert ("transistor_voltage" in kinds(cautions(ce_design(), REQ, q))) is expect


@pytest.mark.parametrize("supply,mains,expect", [
    (30.0, False, False), (30.5, False, True), (12.0, True, True)])
def test_mains_note(supply, mains, expect):
    req = Request("ce", supply, mains=mains)
    out = cautions(ce_design(vb=2.0, ve=1.35, vc=supply / 2), req)
    got = [c for c in out if c.kind == "mains"]
    assert bool(got) is expect
    if expect:
        assert "qualified" in got[0].text and "local codes" in got[0].text
        assert "licensed" in got[0].text


@pytest.mark.parametrize("value,expect", [(0.99e-6, False), (1e-6, True)])
def test_unknown_dielectric_from_1uF_gets_a_polarity_note(value, expect):
    # A part whose dielectric nobody stated (a circuit file with bare values): from 1 µF
    # up such capacitors are commonly electrolytic (common practice), so name the + side.
    d = ce_design(parts={"C_OUT": RolePick("C_OUT", value, "x", ())})
    notes = [c for c in cautions(d, REQ) if c.kind == "polarity"]
    assert bool(notes) is expect
    if expect:
        assert notes[0].level == "note" and "+ toward the collector" in notes[0].text


def test_a_stated_non_polarised_dielectric_gets_no_polarity_line():
    d = ce_design(parts={"C_OUT": pick("C_OUT", 10e-6, dielectric="film")})
    assert "polarity" not in kinds(cautions(d, REQ), "C_OUT")


def test_fully_bypassed_c_byp_faces_the_emitter():
    d = ce_design(parts={"RE": None, "C_BYP": pick("C_BYP", 47e-6, dielectric="electrolytic")})
    pol = [c.text for c in cautions(d, REQ) if c.kind == "polarity"]
    assert len(pol) == 1 and "+ toward the emitter," in pol[0]
    assert capacitor_bias(d, REQ)["C_BYP"].volts == pytest.approx(1.35)

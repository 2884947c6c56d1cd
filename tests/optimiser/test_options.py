"""Stock → role options, joined pairs and the allocation of pieces against stock."""

import pytest

from inventory.parts import Capacitor, Resistor, StockSnapshot
from optimiser.options import LAST_PIECES_PENALTY, StockOptions


def snap(res=(), caps=()):
    return StockSnapshot(tuple(res), tuple(caps), ())


def test_singles_merge_rows_of_one_value_and_skip_empty_rows():
    s = snap([Resistor(4700.0, 3, id=1, location="A"), Resistor(4700.0, 2, id=2, location="B"),
              Resistor(1000.0, 0, id=3)])
    o = StockOptions(s)
    assert list(o.resistor.values) == [4700.0]
    assert len(o.resistor.recipes[0]) == 1          # one value, one way to make it


def test_series_and_parallel_values_and_dissipation_shares():
    # series 1k + 2k2 = 3k2 ; parallel = 1k·2k2/3k2 = 687.5 Ω (Ohm's law)
    s = snap([Resistor(1000.0, 5, id=1), Resistor(2200.0, 5, id=2)])
    o = StockOptions(s, allow_combos=True)
    vals = {round(v, 6) for v in o.resistor.values}
    assert {1000.0, 2200.0, 3200.0, 687.5, 2000.0, 500.0, 4400.0, 1100.0} <= vals
    rec = next(r for rs in o.resistor.recipes for r in rs if r.joined == "series"
               and r.parts == (1000.0, 2200.0))
    # in series the current is common: P_i ∝ R_i
    assert rec.shares == pytest.approx((1000 / 3200, 2200 / 3200))
    rec = next(r for rs in o.resistor.recipes for r in rs if r.joined == "parallel"
               and r.parts == (1000.0, 2200.0))
    # in parallel the voltage is common: P_i ∝ 1/R_i
    assert rec.shares == pytest.approx((2200 / 3200, 1000 / 3200))


def test_equal_pair_needs_two_pieces_per_copy():
    o = StockOptions(snap([Resistor(1000.0, 1, id=1)]), allow_combos=True)
    assert 2000.0 not in list(o.resistor.values)
    o = StockOptions(snap([Resistor(1000.0, 2, id=1)]), allow_combos=True)
    assert 2000.0 in list(o.resistor.values)
    a = o.allocate({"RC": ("resistor", 2000.0, 0.001)})
    assert a is not None and a.picks["RC"].joined == "series"
    assert [(p.id, p.count) for p in a.picks["RC"].pieces] == [(1, 2)]


@pytest.mark.parametrize("qty, ok", [(5, False), (6, True)])
def test_builds_three_with_a_value_in_two_roles_needs_six_pieces(qty, ok):
    o = StockOptions(snap([Resistor(10e3, qty, id=7, location="E2")]), builds=3)
    a = o.allocate({"R1": ("resistor", 10e3, 0.001), "R2": ("resistor", 10e3, 0.001)})
    assert (a is not None) == ok
    if ok:
        assert a.used == {0: 2}
        assert a.emptied == 1            # the bin is emptied: 2 pieces × 3 builds = 6


def test_ratings_of_the_very_pieces():
    # 0.1 W in a role: a 0.125 W piece may take 62.5 mW (50 % derating), a 0.25 W one 125 mW
    s = snap([Resistor(470.0, 10, power_w=0.125, id=1), Resistor(470.0, 1, power_w=0.25, id=2)])
    o = StockOptions(s)
    a = o.allocate({"RE": ("resistor", 470.0, 0.1)})
    assert [p.id for p in a.picks["RE"].pieces] == [2]
    # the one 0.25 W piece goes where it is needed, the 0.125 W one where it suffices
    a = o.allocate({"RE": ("resistor", 470.0, 0.05), "RC": ("resistor", 470.0, 0.1)})
    assert {r: p.pieces[0].id for r, p in a.picks.items()} == {"RE": 1, "RC": 2}
    assert o.allocate({"RE": ("resistor", 470.0, 0.2)}) is None


def test_capacitor_voltage_rating_and_last_pieces_not_scored_for_virtual_rows():
    s = snap(caps=[Capacitor(1e-6, 1, voltage_v=16.0, id=1), Capacitor(1e-6, 1, voltage_v=63.0,
                                                                         id=-5)])
    o = StockOptions(s)
    a = o.allocate({"C_OUT": ("capacitor", 1e-6, 20.0)})     # 20 V > 0.8·16 V
    assert [p.id for p in a.picks["C_OUT"].pieces] == [-5]
    assert a.emptied_caps == 0                                # virtual rows never count
    assert LAST_PIECES_PENALTY > 0


def test_pieces_carry_the_rating_they_need_where_they_sit():
    # a piece's need is its share of the role's stress over the derating (50 % for
    # resistor power, 80 % for capacitor voltage): the planner's stand-in rule reads it
    from optimiser.options import CAPACITOR_DERATING, RESISTOR_DERATING, StockOptions

    snap = StockSnapshot(
        resistors=(Resistor(4700.0, 10, power_w=0.25, id=1),),
        capacitors=(Capacitor(1e-6, 10, voltage_v=25.0, id=2),))
    opts = StockOptions(snap, 1, False)
    al = opts.allocate({"RC": ("resistor", 4700.0, 0.03), "C_IN": ("capacitor", 1e-6, 4.0)})
    assert al is not None
    (pr,) = al.picks["RC"].pieces
    (pc,) = al.picks["C_IN"].pieces
    assert pr.need == pytest.approx(0.03 / RESISTOR_DERATING)
    assert pc.need == pytest.approx(4.0 / CAPACITOR_DERATING)

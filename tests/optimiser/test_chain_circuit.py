"""A searched chain as a circuit with given values (optimiser/chain_circuit.py): what
each role carries into the sheet and the deck."""

import pytest

from inventory.errors import InputError
from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.chain_circuit import chain_circuit, picks_ratings
from optimiser.design import Piece, RolePick
from optimiser.request import parse_request
from optimiser.search.chain_answer import ChainDesign

SNAP = StockSnapshot(
    resistors=(Resistor(10e3, 10, 0.01, 0.25, "A4", id=4),
               Resistor(4.7e3, 10, 0.05, 0.125, "A3", id=3),
               Resistor(1e3, 10, 0.05, 0.5, "A1", id=1)),
    capacitors=(Capacitor(10e-6, 10, 0.2, 25.0, "electrolytic", "B2", id=7),),
    transistors=(Transistor("GP-N1", 100, 300, qty=5),),
)
REQ = parse_request({"topology": ["ce", "cc"], "supply_v": 12, "gain_db": 20}, pairs=True)


def _r(role, row, count=1):
    return Piece(row.value, count, row.id, row.location, "resistor", row.tolerance,
                 row.power_w)


def _design(parts, transistors=("GP-N1", "GP-N1")):
    picks = {}
    for role, pieces, value, joined in parts:
        picks[role] = RolePick(role, value, f"{value:g}", tuple(pieces), joined)
    return ChainDesign(("ce", "cc"), "capacitor", transistors, picks, {}, [], True, 0.0, {})


R10K, R4K7, R1K = SNAP.resistors
C10U = SNAP.capacitors[0]
CAP = Piece(C10U.value, 1, C10U.id, C10U.location, "capacitor", C10U.tolerance, C10U.voltage_v,
            C10U.dielectric)


def test_roles_keep_their_pieces_rows_and_tolerances():
    d = _design([("S1.R1", [_r("S1.R1", R10K), _r("S1.R1", R4K7)], 14.7e3, "series"),
                 ("S1.RC", [_r("S1.RC", R1K)], 1e3, None),
                 ("S2.RE", [_r("S2.RE", R1K, 2)], 2e3, "series"),
                 ("C_COUPLE", [CAP], 10e-6, None)])
    c = chain_circuit(d, REQ, SNAP)
    assert c.values == {"S1.R1": 14.7e3, "S1.RC": 1e3, "S2.RE": 2e3, "C_COUPLE": 10e-6}
    # one piece from stock: that row, as a circuit file's "#id"
    assert c.stock_ids == {"S1.RC": 1, "C_COUPLE": 7}
    assert c.stock_parts["C_COUPLE"] is C10U and c.stock_parts["S1.RC"] is R1K
    # the widest tolerance of a role's pieces
    assert c.tolerances["S1.R1"] == 0.05 and c.tolerances["S1.RC"] == 0.05
    # series pieces carry the same current, so each dissipates in proportion to its
    # value (Ohm's law): the 10k takes 10/14.7 of the role's power; the weakest rating
    assert c.ratings.power_share["S1.R1"] == pytest.approx(10 / 14.7)
    assert c.ratings.power_w["S1.R1"] == 0.125
    assert c.ratings.power_share["S2.RE"] == pytest.approx(0.5)
    assert c.ratings.voltage_v["C_COUPLE"] == 25.0 and c.ratings.polarised["C_COUPLE"]
    assert [t.label for t in c.transistors] == ["GP-N1", "GP-N1"]


def test_parallel_share_and_an_unrated_role():
    # two equal resistors in parallel share the power equally (Ohm's law)
    p = picks_ratings({"X": RolePick("X", 5e3, "5k", (_r("X", R10K, 2),), "parallel"),
                       "Y": RolePick("Y", 1.0, "", ())}, lambda r: "resistor" if r == "X"
                      else None)
    assert p.power_share["X"] == pytest.approx(0.5) and "Y" not in p.power_w


def test_a_transistor_gone_from_stock_is_refused():
    d = _design([("S1.RC", [_r("S1.RC", R1K)], 1e3, None)], ("GP-N1", "NONE-9"))
    with pytest.raises(InputError) as e:
        chain_circuit(d, REQ, SNAP)
    assert e.value.field == "transistor" and "NONE-9" in e.value.message

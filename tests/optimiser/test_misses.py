"""Nearest misses: only real designs the stock can supply, in the documented order."""

from __future__ import annotations

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.design import Design, Piece, RolePick
from optimiser.request import Request
from optimiser.search.suggestions import miss_distance, miss_order, stock_shortfall

T = Transistor("GP-N1", 100, 300, qty=2, id=9, location="Q1")
SNAP = StockSnapshot((Resistor(10e3, 3, id=1, location="A1"), Resistor(1e3, 4, id=2,
                                                                          location="A2")),
                     (Capacitor(1e-6, 4, id=3, location="B1"),), (T,))


def _design(pieces: dict[str, Piece]) -> Design:
    parts = {r: RolePick(r, p.value, "x", (p,)) for r, p in pieces.items()}
    return Design("ce", "GP-N1", parts, {}, False)


def test_a_row_used_by_two_roles_counts_twice():
    d = _design({"R1": Piece(10e3, 1, id=1), "R2": Piece(10e3, 1, id=1),
                 "RC": Piece(1e3, 1, id=2), "C_IN": Piece(1e-6, 1, id=3)})
    assert stock_shortfall(d, SNAP, 1) == []          # 2 of 3 pieces of row 1
    assert stock_shortfall(d, SNAP, 2)                # 4 of 3: not buildable twice
    assert stock_shortfall(d, SNAP, 3)                # and the transistor: 2 < 3


def test_a_placeholder_piece_is_not_a_design_from_stock():
    d = _design({"R1": Piece(10e3, 1, id=None, location="(largest in stock)"),
                 "RC": Piece(1e3, 1, id=2)})
    assert stock_shortfall(d, SNAP, 1)


def test_order_is_violations_then_distance():
    req = Request(topology="ce", supply_v=12.0, gain=10.0, gain_tol_db=1.0, f_low_max_hz=50.0)
    # gain 24 dB against 20 ± 1 dB: 3 dB outside the window, / 1 dB = 3; f_low 10 % high: 0.1
    assert abs(miss_distance(req, {"gain_db": 24.0}) - 3.0) < 1e-9
    assert abs(miss_distance(req, {"gain_db": 20.0, "f_low_hz": 55.0}) - 0.1) < 1e-12
    a = Design("ce", "GP-N1", {}, {}, False, violations=["gain"], extra={"miss_distance": 5.0})
    b = Design("ce", "GP-N1", {}, {}, False, violations=["gain", "f_low"],
               extra={"miss_distance": 0.2})
    c = Design("ce", "GP-N1", {}, {}, False, violations=["f_low"], extra={"miss_distance": 0.1})
    assert sorted([b, a, c], key=miss_order) == [c, a, b]

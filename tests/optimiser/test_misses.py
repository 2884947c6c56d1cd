"""Nearest misses: only real designs the stock can supply, in the documented order."""

from __future__ import annotations

import optimiser.search.suggestions as S
from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.design import Design, Piece, RolePick
from optimiser.request import Request
from optimiser.search import search
from optimiser.search.suggestions import (
    miss_distance,
    miss_order,
    relaxation_order,
    stock_shortfall,
)

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


def test_the_binding_target_is_relaxed_first():
    # the relaxations share one clock, so their order decides which are examined:
    # f_low goes first when the proof's f_low bounds dropped anything or the
    # drawer's floor lies above the target, else the gain, then the limits in order
    req = Request(topology="ce", supply_v=12.0, gain=10.0, gain_tol_db=1.0, f_low_max_hz=2.0,
                  thd_max_pct=5.0, ic_min_a=1e-4)
    plain = ["gain_db", "f_low_max_hz", "thd_max_pct", "ic_min_a"]
    assert relaxation_order(req, {"pruned": {}}) == plain
    assert relaxation_order(req, {"pruned": {"f_low_largest_caps": 0}}) == plain
    assert relaxation_order(req, {"pruned": {"f_low_output": 3}})[0] == "f_low_max_hz"
    assert relaxation_order(req, {"pruned": {}}, f_low_floor=True)[0] == "f_low_max_hz"
    both = relaxation_order(req, {"pruned": {"f_low_input": 1, "ic_min": 5}})
    assert both[:2] == ["f_low_max_hz", "ic_min_a"] and sorted(both) == sorted(plain)


def test_an_infeasible_f_low_is_explained_even_when_one_relaxation_fits(monkeypatch):
    # a drawer whose largest capacitor is 100 nF cannot give 2 Hz; with time for one
    # relaxation search only, the answer still names how far f_low must move, and the
    # engine confirms a stock design at that limit (_meets inside _relax_limit)
    snap = StockSnapshot(tuple(Resistor(v, 10, id=i, location=f"R{i}") for i, v in
                               enumerate((1e3, 2.2e3, 4.7e3, 10e3, 22e3, 47e3, 100e3), 1)),
                         (Capacitor(10e-9, 10, id=20, location="C1"),
                          Capacitor(100e-9, 10, id=21, location="C2")),
                         (Transistor("GP-N1", 100, 300, qty=4, id=9, location="Q1"),))
    req = Request(topology="ce", supply_v=12.0, load_ohm=10e3, source_ohm=600.0, gain=5.0,
                  gain_tol_db=3.0, f_low_max_hz=2.0)
    runs = []

    def one_search(self, own, name):
        if runs:
            self.skipped.append(name)
            return None
        runs.append(name)
        return own

    monkeypatch.setattr(S._Clock, "budget", one_search)
    res = search(req, snap, top=3, misses=3)
    assert not res.feasible and res.stats["complete"]
    assert runs == ["without f_low_max_hz"]
    change = [c for c in res.unlock_changes if c["target"] == "f_low_max_hz"]
    assert change and change[0]["to"] > 2.0

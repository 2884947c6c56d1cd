"""Nearest misses: only real designs the stock can supply, in the documented order."""

from __future__ import annotations

import pytest

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


# --- every infeasible answer names misses, and the engine agrees with each --------------
#
# Outside check: the buildability is counted here from the drawer's own rows (pieces ×
# builds against each row's quantity), not by the code under test; the verdicts are
# the engine's (optimiser/evaluate.py) on each miss as built, with its pieces' ratings.

def _seeded_drawer(seed: int, cap_max: float) -> StockSnapshot:
    """E12 resistors 100 Ω–820 kΩ with a random fifth left out, 1–20 pieces, 0.125–0.5 W;
    ceramics and electrolytics up to ``cap_max``; two transistor types (invented)."""
    import numpy as np

    from inventory.values import series_values

    rng = np.random.default_rng(seed)
    vals = [float(v) for v in series_values("E12", 100.0, 820e3) if rng.random() > 0.2]
    res = tuple(Resistor(v, int(rng.integers(1, 21)), power_w=float(rng.choice([0.125, 0.25, 0.5])),
                         id=100 + k, location=f"A{k}") for k, v in enumerate(vals))
    cvals = [(v, "ceramic" if v < 1e-6 else "electrolytic")
             for v in (100e-12, 1e-9, 10e-9, 100e-9, 1e-6, 10e-6, 100e-6) if v <= cap_max * 1.001]
    caps = tuple(Capacitor(v, int(rng.integers(2, 10)), voltage_v=25.0, dielectric=d,
                           id=300 + k, location=f"B{k}") for k, (v, d) in enumerate(cvals))
    ts = (Transistor("GP-N1", 100, 300, qty=4, ft=250e6, cob=4e-12, vceo=40, ic_max=0.1,
                     pd=0.5, vaf=80, id=901, location="T1"),
          Transistor("GP-N2", 200, 450, qty=2, ft=150e6, cob=6e-12, vceo=30, ic_max=0.1,
                     pd=0.4, vaf=50, id=902, location="T2"))
    return StockSnapshot(res, caps, ts)


def _ratings_of(d: Design):
    import numpy as np

    from optimiser.stage import PartRatings

    r = PartRatings()
    for role, p in d.parts.items():
        piece = p.pieces[0]
        if piece.kind == "resistor":
            r.power_w[role] = np.array([min(x.rating for x in p.pieces)])
            r.power_share[role] = np.array([1.0])
        else:
            r.voltage_v[role] = np.array([piece.rating])
            r.polarised[role] = np.array([piece.dielectric == "electrolytic"])
    return r


def _check_misses(res, req: Request, snap: StockSnapshot):
    from optimiser.evaluate import evaluate
    from optimiser.stage import StageBatch

    assert not res.feasible and res.stats["complete"]
    assert res.nearest_misses, "an infeasible answer names no nearest miss"
    qty = {x.id: x.qty for x in (*snap.resistors, *snap.capacitors)}
    for d in res.nearest_misses:
        need: dict[int, int] = {}
        for role, p in d.parts.items():
            assert p.pieces, role
            for piece in p.pieces:
                assert piece.id in qty, (role, piece)
                need[piece.id] = need.get(piece.id, 0) + piece.count * req.builds
        assert all(n <= qty[i] for i, n in need.items())
        assert snap.transistor(d.transistor).qty >= req.builds
        ev = evaluate(req, StageBatch.from_values(d.topology, **{r: [v] for r, v in
                                                                 d.values().items()}),
                      snap.transistor(d.transistor), _ratings_of(d))
        assert not bool(ev.meets[0])
        assert sorted(ev.violations(0)) == sorted(d.violations)
    keys = [miss_order(d) for d in res.nearest_misses]
    assert keys == sorted(keys)


_INFEASIBLE = {
    # f_low the capacitors cannot reach (1 µF at most, from 50 Ω into 1 kΩ)
    "ce f_low 2 Hz, caps ≤ 1 µF": (1, 1e-6, dict(topology="ce", supply_v=12.0, load_ohm=1e3,
                                                 source_ohm=50.0, gain=10.0, gain_tol_db=1.0,
                                                 f_low_max_hz=2.0, thd_max_pct=5.0,
                                                 ic_min_a=1e-4)),
    "cb f_low 10 mHz, caps ≤ 1 µF": (2, 1e-6, dict(topology="cb", supply_v=12.0, load_ohm=1e3,
                                                   source_ohm=50.0, f_low_max_hz=0.01,
                                                   thd_max_pct=5.0, ic_min_a=1e-4)),
    # a follower's gain no divider and load give within ±0.01 dB
    "cc gain 0.999 ± 0.01 dB": (3, 100e-6, dict(topology="cc", supply_v=12.0, load_ohm=100.0,
                                                source_ohm=10e3, gain=0.999,
                                                gain_tol_db=0.01)),
    # drift and THD beyond the drawer
    "ce drift 0.05 %": (4, 100e-6, dict(topology="ce", supply_v=12.0, load_ohm=10e3,
                                        source_ohm=600.0, gain=10.0, gain_tol_db=1.0,
                                        ic_drift_max_pct=0.05, temp_c=(0.0, 70.0))),
    # a junction driven directly (base held, 0 Ω source) distorts far above 1 % at 10 mV
    "cb THD 1 % from 0 Ω": (5, 100e-6, dict(topology="cb", supply_v=12.0, load_ohm=10e3,
                                            source_ohm=0.0, gain=10.0, gain_tol_db=3.0,
                                            thd_max_pct=1.0)),
    # beyond the physical limit (a follower's gain is below 1): no search of the request
    "cc gain 3": (6, 100e-6, dict(topology="cc", supply_v=12.0, load_ohm=1e3, gain=3.0)),
}


@pytest.mark.parametrize("name", list(_INFEASIBLE))
def test_an_infeasible_request_names_buildable_misses_the_engine_confirms(name):
    seed, cap_max, kw = _INFEASIBLE[name]
    snap = _seeded_drawer(seed, cap_max)
    req = Request(**kw)
    res = search(req, snap, top=3, misses=4)
    _check_misses(res, req, snap)


def test_misses_come_even_when_the_suggestions_clock_has_run_out(monkeypatch):
    # with no time left for suggestions, the nearest-miss search still runs until it
    # holds a design (found or rejected): the answer never stands without a miss
    monkeypatch.setattr(S, "EXPLAIN_BUDGET_S", 0.0)
    seed, cap_max, kw = _INFEASIBLE["ce f_low 2 Hz, caps ≤ 1 µF"]
    snap = _seeded_drawer(seed, cap_max)
    req = Request(**kw)
    res = search(req, snap, top=3, misses=4)
    _check_misses(res, req, snap)

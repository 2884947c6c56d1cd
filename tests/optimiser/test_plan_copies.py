"""Copies carried together, and the gap between plan and bound closed by enumeration.

References (outside the planner):

* counting: ``k`` identical copies of a design that takes ``n`` pieces of a value
  per copy need ``k·n`` pieces of that value, whichever rows give them;
* the programme over a far larger fixed list of designs (each request's best 100
  for the same copies): a plan proven optimal over every design is no worse than
  the plan over that list (to the solver's own absolute gap).
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import replace

from drawerfit.render.plan import bound_line
from inventory.parts import Capacitor, Resistor, StockSnapshot
from optimiser.buildlist import BuildList, BuildSpec
from optimiser.planning import PlanItem, gather_candidates, make_plan
from optimiser.planning.colgen import generate_columns
from optimiser.planning.copies import carried, copies_drawer, fits
from optimiser.planning.model import ABS_GAP_SHARE
from optimiser.planning.objective import cost_quantum, score_weight
from tests.optimiser.test_plan_colgen import C_VALUES, CE, R_VALUES, T, drawer, objective


def pool_need(design) -> dict[tuple, int]:
    """Pieces per copy of each value (kind, value), counted from the design's pieces."""
    need: dict[tuple, int] = defaultdict(int)
    for pick in design.parts.values():
        for p in pick.pieces:
            need[(p.kind, round(p.value, 12))] += p.count
    return need


def pool_held(snap: StockSnapshot) -> dict[tuple, int]:
    held: dict[tuple, int] = defaultdict(int)
    for r in (*snap.resistors, *snap.capacitors):
        held[(r.kind, round(r.value, 12))] += r.qty
    return held


def test_copies_drawer_pools_rows_and_drops_values_short_of_k():
    # 10k in two rows of 2 (4 pieces in all), 4k7 in one row of 2, 1k in one of 9
    snap = StockSnapshot((Resistor(10e3, 2, id=1, location="A"), Resistor(10e3, 2, id=2, location="B"),
                          Resistor(4.7e3, 2, id=3, location="C"), Resistor(1e3, 9, id=4, location="D")),
                         (), (replace(T, qty=3),))
    cut = copies_drawer(snap, 3)
    assert {r.id: r.qty for r in cut.resistors} == {1: 4, 2: 4, 4: 9}    # counting
    assert [t.qty for t in cut.transistors] == [3]
    assert copies_drawer(snap, 4).transistors == ()                      # 3 < 4
    assert copies_drawer(snap, 1) is snap
    assert carried(5, True) == 5 and carried(5, False) == 1
    # a column of two 10k per copy fits 2 copies of the pool (4 pieces), not 3
    assert fits({("resistor", 10e3): 2}, 2, {("resistor", 10e3): 4}, {})
    assert not fits({("resistor", 10e3): 2}, 3, {("resistor", 10e3): 4}, {})
    assert fits({("resistor", 10e3): 2}, 3, {("resistor", 10e3): 4}, {("resistor", 10e3): 0.1})


def test_k_copy_columns_never_take_a_value_short_for_k_copies():
    # Two pieces of every other resistor and capacitor value: the best designs for one
    # copy take some of them; a build of three identical copies must not.
    k = 3
    res = [Resistor(v, 2 if i % 2 else 20, id=i + 1, location=f"R{i}")
           for i, v in enumerate(R_VALUES)]
    caps = [Capacitor(v, 2 if i % 2 else 20, id=100 + i, location=f"C{i}")
            for i, v in enumerate(C_VALUES)]
    snap = StockSnapshot(tuple(res), tuple(caps), (replace(T, qty=10),))
    held = pool_held(snap)
    one, _, _ = gather_candidates(CE, snap, snap, top=10)
    assert any(n * k > held[p] for d in one for p, n in pool_need(d).items()), \
        "the case must tempt: some single-copy design takes a value short for three copies"
    designs, _, _ = gather_candidates(CE, snap, snap, top=10, copies=k)
    assert designs
    item = PlanItem("a", k, True, tuple(designs))
    gen = generate_columns([item], [CE], snap, None, budget_s=30)
    offered = gen.items[0].candidates
    assert len(offered) >= len(designs)
    for d in offered:
        for p, n in pool_need(d).items():
            assert n * k <= held[p], (d.parts, p, n)
    plan = make_plan(BuildList((BuildSpec("a", CE, k, True),)), snap, candidates=10,
                     pricing_time_s=30)
    assert plan.feasible and plan.cost == 0
    for d in (a.design for b in plan.builds for a in b.allocations):
        assert all(n * k <= held[p] for p, n in pool_need(d).items())


def test_identical_builds_competing_for_a_scarce_value_closed_by_enumeration(monkeypatch):
    # Two builds of two identical copies; each build's best designs (for two copies)
    # take one 220R per copy, and the drawer holds three: only one build can have
    # them.  The relaxation splits the other build's copies (one on 220R, one
    # elsewhere), so its bound stays below every plan; enumeration of the designs
    # that could beat the plan closes the gap.
    snap = drawer({220.0: 3})
    blist = BuildList((BuildSpec("a", CE, 2, True), BuildSpec("b", CE, 2, True)))
    fixed = make_plan(blist, snap, candidates=2, pricing_time_s=0)
    assert not fixed.feasible and all(not s.proven for s in fixed.infeasible)

    monkeypatch.setattr("optimiser.planning.closing.ENUM_PASSES", 0)
    unclosed = make_plan(blist, snap, candidates=2, pricing_time_s=60)
    assert unclosed.feasible and unclosed.cost == 0
    assert unclosed.bound.gap > 0 and not unclosed.bound.proven_optimal
    assert unclosed.bound.closed_by is None
    assert not bound_line(unclosed.bound).startswith("Optimal")
    monkeypatch.undo()

    plan = make_plan(blist, snap, candidates=2, pricing_time_s=60)
    assert plan.feasible and plan.cost == 0
    b = plan.bound
    assert b.proven_optimal and b.closed_by == "enumeration" and b.enumerated > 0, b.to_json()
    assert bound_line(b).startswith("Optimal over every design")
    assert plan.to_json()["bound"]["closed_by"] == "enumeration"
    # reference: the programme over each request's best 100 designs for two copies
    weight = score_weight(cost_quantum(None), 4)
    full = make_plan(blist, snap, candidates=100, pricing_time_s=0)
    assert full.feasible and full.cost == 0
    assert objective(full, weight) >= b.lp - 1e-12
    assert objective(plan, weight) <= objective(full, weight) + weight * ABS_GAP_SHARE
    assert math.isclose(objective(plan, weight), b.cost, rel_tol=1e-12)

"""Column generation for plans: designs added by the relaxation's prices, and what
the bound proves.

References (outside the planner):

* the priced search against a plain enumeration of every stage a tiny drawer
  allows (the same enumeration as tests/optimiser/test_search_complete.py, each
  stage priced by hand);
* the programme over a far larger fixed list of designs (the bound must hold
  for its plan too);
* the price bound of a node of the search tree (some roles fixed) against the
  priced value of every stage of that enumeration below the node;
* counting: a single-transistor stage takes one transistor per copy, so copies
  beyond the transistors held cannot be built by any design.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import replace
from types import SimpleNamespace

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drawerfit.render.plan import bound_line
from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.buildlist import BuildList, BuildSpec
from optimiser.planning import make_plan
from optimiser.planning.colgen import Bound
from optimiser.planning.model import ABS_GAP_SHARE
from optimiser.planning.objective import cost_quantum, score_map, score_map_inverse, score_weight
from optimiser.purchase import PurchaseOptions, augment
from optimiser.request import Request
from optimiser.search import search_designs
from optimiser.search.pricing import PiecePrices, Pricing, node_price, skeleton_price
from tests.optimiser.test_search_complete import buildable_meeting, cases, piece_counts

T = Transistor("GP-N1", 100, 300, qty=10, ft=250e6, cob=4e-12, vceo=40, ic_max=0.1, pd=0.5,
               id=900, location="Q1")
R_VALUES = [47e3, 68e3, 10e3, 4.7e3, 3.3e3, 1e3, 470.0, 220.0]
C_VALUES = [1e-6, 2.2e-6, 4.7e-6, 10e-6, 22e-6, 47e-6, 100e-6]
CE = Request(topology="ce", supply_v=12.0, load_ohm=10e3, source_ohm=600.0, gain=10.0,
             gain_tol_db=3.0, temp_c=(0.0, 50.0), builds=1)


def drawer(rqty: dict[float, int], tqty: int = 10) -> StockSnapshot:
    res = [Resistor(v, rqty.get(v, 20), id=i + 1, location=f"R{i}")
           for i, v in enumerate(R_VALUES)]
    caps = [Capacitor(v, 20, id=100 + i, location=f"C{i}") for i, v in enumerate(C_VALUES)]
    t = Transistor(T.label, T.hfe_min, T.hfe_max, qty=tqty, ft=T.ft, cob=T.cob, vceo=T.vceo,
                   ic_max=T.ic_max, pd=T.pd, id=T.id, location="Q1")
    return StockSnapshot(tuple(res), tuple(caps), (t,))


def plan_catalogue(snap, po):
    return augment(snap, po)[1]


def objective(plan, weight: float) -> float:
    return plan.cost + weight * sum(a.copies * score_map(a.design.score)
                                    for b in plan.builds for a in b.allocations)


def pieces_taken(plan) -> dict[int, int]:
    taken: dict[int, int] = defaultdict(int)
    for b in plan.builds:
        for a in b.allocations:
            for rid, n in a.pieces.items():
                taken[rid] += n
    return taken


# ---------------------------------------------------------------------------
# Plans
# ---------------------------------------------------------------------------

def test_stock_plan_among_lower_ranked_designs_is_found_and_proven():
    # Two builds of two copies each, free to differ (so each design carries one
    # copy); every design among each build's best two for one copy takes a 220R,
    # and the drawer holds two: the fixed list can only say "not enough 220R"
    # (unproven), while designs further down the ranking need none.
    snap = drawer({220.0: 2})
    blist = BuildList((BuildSpec("a", CE, 2, False), BuildSpec("b", CE, 2, False)))
    fixed = make_plan(blist, snap, candidates=2, pricing_time_s=0)
    assert not fixed.feasible and fixed.bound is None
    assert all(not s.proven for s in fixed.infeasible)

    plan = make_plan(blist, snap, candidates=2, pricing_time_s=60)
    assert plan.feasible and plan.cost == 0
    b = plan.bound
    assert b.pricing_complete and b.columns_generated > 0
    assert b.proven_cheapest and b.proven_optimal, b.to_json()
    assert b.lp <= b.cost + 1e-12
    assert bound_line(b).startswith("Optimal over every design")
    # stock respected, counted by hand from the allocations
    held = {r.id: r.qty for r in (*snap.resistors, *snap.capacitors, *snap.transistors)}
    assert all(n <= held[rid] for rid, n in pieces_taken(plan).items())
    # reference: the programme over a far larger fixed list (each request's best 100
    # designs for one copy): its objective is no lower than the bound, and ours is
    # no higher than its own (to the solver's gap), as the bound claims of every plan
    weight = score_weight(cost_quantum(None), 4)
    assert math.isclose(objective(plan, weight), b.cost, rel_tol=1e-12)
    full = make_plan(blist, snap, candidates=100, pricing_time_s=0)
    assert full.feasible and full.cost == 0
    assert objective(full, weight) >= b.lp - 1e-12
    assert b.cost <= objective(full, weight) + weight * ABS_GAP_SHARE


def test_purchases_needed_claims_only_what_the_bound_proves():
    # One piece of each resistor value and two identical copies of a stage of four
    # or five resistors: something must be bought (E3 resistors at 0.02 a piece).
    snap = drawer({v: 1 for v in R_VALUES})
    po = PurchaseOptions(series="E3", cap_series="E3", resistor_price=0.02,
                         capacitor_price=0.10, line_cost=0.0, pack=1)
    blist = BuildList((BuildSpec("a", CE, 2, True),), po)
    plan = make_plan(blist, snap, candidates=3, pricing_time_s=20)
    assert plan.feasible and plan.purchases and plan.cost > 0
    b = plan.bound
    # reference: the programme over each request's best 100 designs; the bound holds
    # for its plan as for every plan
    full = make_plan(blist, snap, candidates=100, pricing_time_s=0)
    weight = score_weight(cost_quantum(plan_catalogue(snap, po)), 2)
    assert b.lp is None or b.lp <= objective(full, weight) + 1e-9
    if b.proven_cheapest:
        assert plan.cost <= full.cost + 1e-9
    # pricing closes (the search prunes skeletons by their pieces' prices) and the
    # LP bound proves the order cheapest: no plan of the reference's list is cheaper
    assert b.pricing_complete and not b.open, b.open
    assert b.proven_cheapest and plan.cost <= full.cost + 1e-9
    if b.proven_optimal:
        assert objective(plan, weight) <= objective(full, weight) + weight * ABS_GAP_SHARE
    # purchases are truly needed (counting: a ce stage takes at least one resistor
    # piece a copy, so two identical copies take two pieces of one value, and the
    # drawer holds one of each): the planner finds no plan from stock alone either
    assert all(r.qty < 2 for r in snap.resistors)
    alone = make_plan(BuildList(blist.builds), snap, candidates=3, pricing_time_s=20)
    assert not alone.feasible


def test_not_enough_transistors_is_proven_by_counting():
    # Counting: one transistor per copy of a single-transistor stage; four copies,
    # three transistors.  No design helps, and the verdict says it is proven.
    snap = drawer({}, tqty=3)
    blist = BuildList((BuildSpec("a", CE, 2, True), BuildSpec("b", CE, 2, False)))
    plan = make_plan(blist, snap, candidates=3, pricing_time_s=60)
    assert not plan.feasible
    assert plan.bound.proven_infeasible
    assert plan.infeasible and all(s.proven for s in plan.infeasible)
    reason = plan.infeasible[0].reason
    assert "GP-N1" in reason and "at least 4" in reason and "holds 3" in reason, reason
    assert plan.to_json()["infeasible"][0]["proven"] is True


def test_unproven_plan_never_reads_optimal():
    b = Bound(lp=0.10, cost=0.25, gap=0.15, proven_cheapest=False, pricing_complete=False,
              open=["the pricing time (5 s) ran out"])
    text = bound_line(b)
    assert "Optimal" not in text and "No cheaper order" not in text
    assert "within 0.15 of the best possible" in text.lower()
    assert "the pricing time (5 s) ran out" in text


# ---------------------------------------------------------------------------
# The priced search against enumeration
# ---------------------------------------------------------------------------

def priced_exhaustive(req: Request, snap: StockSnapshot, price: dict[float, float],
                      t_price: float, weight: float):
    """Least ``weight·score_map(score) + Σ price`` over every buildable stage (None: none)."""
    best = None
    for v, sc in buildable_meeting(req, snap):
        rc, _ = piece_counts(v)
        cost = weight * score_map(sc) + t_price + sum(price[x] * n for x, n in rc.items())
        best = cost if best is None else min(best, cost)
    return best


@settings(max_examples=12, deadline=None, suppress_health_check=list(HealthCheck))
@given(cases(), st.lists(st.sampled_from([0.0, 0.0, 0.05, 0.2, 0.6]), min_size=4, max_size=4),
       st.sampled_from([0.0, 0.3]), st.sampled_from([1.0, 0.2]))
def test_priced_search_agrees_with_enumeration(case, prices, t_price, weight):
    req, snap = case
    req = replace(req, builds=1)
    price = dict(zip(sorted(r.value for r in snap.resistors), prices, strict=False))
    by_id = {r.id: price[r.value] for r in snap.resistors}
    by_id[snap.transistors[0].id] = t_price

    def design_price(d):
        return sum(by_id.get(p.id, 0.0) * p.count for pk in d.parts.values() for p in pk.pieces
                   if p.kind != "capacitor") + t_price

    pricing = Pricing(weight, score_map, score_map_inverse, design_price, math.inf)
    stats = {"pruned": {}}
    found, _ = search_designs(req, snap, 3, stats, given=[], workers=1, pricing=pricing)
    best = priced_exhaustive(req, snap, price, t_price, weight)
    assert (best is not None) == bool(found), (req, snap, best, found)
    if best is None:
        return
    assert math.isclose(pricing.value(found[0]), best, rel_tol=1e-9, abs_tol=1e-12)
    values = [pricing.value(d) for d in found]
    assert values == sorted(values)
    # with each piece's price known (the skeleton level prunes by their sum) the
    # least value is still the enumeration's
    pieces = PiecePrices.of([(r.value, by_id[r.id]) for r in snap.resistors],
                            [(t.label, t_price) for t in snap.transistors],
                            combos=req.allow_combos)
    priced = replace(pricing, pieces=pieces, _values={})
    found2, _ = search_designs(req, snap, 3, {"pruned": {}}, given=[], workers=1,
                               pricing=priced)
    assert math.isclose(priced.value(found2[0]), best, rel_tol=1e-9, abs_tol=1e-12)


#: The roles fixed at each level of the search tree (pairs, bias nodes with their
#: emitter option, the collector candidates, the skeleton), as a check of
#: node_price's claim at every level.
NODE_LEVELS = (("R1", "R2"), ("R1", "R2", "RE", "RE_BYP"), ("R1", "R2", "RC"),
               ("R1", "R2", "RC", "RE", "RE_BYP"))
ROLES = ("R1", "R2", "RC", "RE", "RE_BYP")


@settings(max_examples=12, deadline=None, suppress_health_check=list(HealthCheck))
@given(cases(), st.lists(st.sampled_from([0.0, 0.05, 0.2, 0.6, 2.5]), min_size=4, max_size=4),
       st.sampled_from([0.0, 0.3]), st.sampled_from([1.0, 0.2]))
def test_node_price_never_exceeds_a_priced_value_below_the_node(case, prices, t_price, weight):
    """Every stage the enumeration finds lies below the node fixing its own values
    in the fixed roles (the others open over the drawer's values and absence): the
    node's price bound plus the stage's mapped score never exceeds the stage's
    priced value, and with every role fixed it is the skeleton bound."""
    req, snap = case
    price = dict(zip(sorted(r.value for r in snap.resistors), prices, strict=False))
    pieces = PiecePrices.of([(r.value, price[r.value]) for r in snap.resistors],
                            [(t.label, t_price) for t in snap.transistors],
                            combos=req.allow_combos)
    pricing = Pricing(weight, score_map, score_map_inverse, lambda d: 0.0, math.inf,
                      pieces=pieces)
    label = snap.transistors[0].label
    open_all = np.array([0.0, *sorted(price)])
    for v, sc in buildable_meeting(req, snap):
        rc, _ = piece_counts(v)
        value = weight * score_map(sc) + t_price + sum(price[x] * n for x, n in rc.items())
        for fixed_roles in NODE_LEVELS:
            fixed = {r: np.array([v.get(r, 0.0)]) for r in fixed_roles}
            open_ = {r: open_all for r in ROLES if r not in fixed_roles}
            lb = node_price(pricing, label, fixed, open_)
            assert weight * score_map(sc) + lb[0] <= value + 1e-12, (v, fixed_roles, lb, value)
        sk = SimpleNamespace(**{r: np.array([v.get(r, 0.0)]) for r in ROLES})
        full = node_price(pricing, label, {r: getattr(sk, r) for r in ROLES}, {})
        assert full[0] == skeleton_price(pricing, sk, label)[0]
    # the open roles' least price is reached: the pair level's bound is exactly the
    # transistor's, the fixed pair's (each value at most two joined pieces of the
    # cheapest row) and the drawer's cheapest value for each open role
    fixed = {"R1": np.array([max(price)]), "R2": np.array([min(price)])}
    open_ = {r: np.array(sorted(price)) for r in ("RC", "RE")}
    lb = node_price(pricing, label, fixed, open_)[0]
    least = min(price.values()) if req.allow_combos else math.inf
    want = (t_price + min(price[max(price)], 2 * least) + min(price[min(price)], 2 * least)
            + min(price.values()) * 2)
    assert math.isclose(lb, want, abs_tol=1e-12)

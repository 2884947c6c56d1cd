"""The planning programme against plain enumeration of every allocation.

Instances are small and synthetic (the designs are built directly; no search):
two builds, a few candidate designs each, a tiny drawer.  The reference is a
brute force written here: every way of giving each build its copies, the stock
use it implies, and the least order that covers it.  The programme must find
the same least cost and, among the plans of that cost, the same best summed
(normalised) score.
"""

from __future__ import annotations

import itertools
import math
from collections import defaultdict

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.design import Design, Piece, RolePick
from optimiser.planning import (
    PlanItem,
    available_solvers,
    build_model,
    can_stand_in,
    plan_builds,
    stock_rows,
)
from optimiser.purchase import Catalogue, Purchasable, PurchaseOptions

VALUES = (1000.0, 2200.0, 4700.0, 10000.0)
LABELS = ("GP-N1", "GP-N2")
Q_IDS = {"GP-N1": 10, "GP-N2": 11}


def make_design(transistor: str, picks: list[tuple[str, float, int, int]],
                score: float) -> Design:
    """picks: (role, value, row id, pieces per copy)."""
    parts = {}
    for role, value, rid, count in picks:
        parts[role] = RolePick(role, value, f"{value:g}",
                               (Piece(value, count, rid, "", "resistor"),))
    return Design("ce", transistor, parts, {}, True, score=score)


def normalised(scores: list[float]) -> list[float]:
    """The mapping documented in optimiser.planning.objective: each design's own
    score s (lower is better) counts as s / (1 + s), capped at 0.999 (worst)."""
    return [min(s / (1.0 + s), 0.999) for s in scores]


def compositions(total: int, parts: int):
    """Every way of writing ``total`` as an ordered sum of ``parts`` naturals."""
    if parts == 1:
        yield (total,)
        return
    for first in range(total + 1):
        for rest in compositions(total - first, parts - 1):
            yield (first,) + rest


def brute_force(instance) -> tuple[float, float] | None:
    """Least (cost, summed normalised score) over every allocation, or None if none fits.

    Instance structure that makes this exact: one stock row per value with 5 %
    tolerance (it cannot stand in for a bought 1 % part, a bought part can
    stand in for it), purchasables at most one per value.
    """
    stock_q = instance["stock_q"]        # value index -> qty
    trans_q = instance["trans_q"]        # label -> qty
    buys = instance["buys"]              # value index -> (price, pack)
    line = instance["line"]
    builds = instance["builds"]          # list of (count, identical, candidates)
    per_build = []
    for count, identical, cands in builds:
        n = len(cands)
        if identical:
            options = [tuple(count if k == j else 0 for k in range(n)) for j in range(n)]
        else:
            options = list(compositions(count, n))
        per_build.append(options)
    best = None
    for choice in itertools.product(*per_build):
        need_stock = defaultdict(int)    # pieces naming the stock row of value i
        need_buy = defaultdict(int)      # pieces naming the bought row of value i
        need_q = defaultdict(int)
        score = 0.0
        for (_count, _identical, cands), copies in zip(builds, choice, strict=True):
            norm = normalised([c["score"] for c in cands])
            for c, n, s in zip(cands, copies, norm, strict=True):
                if n == 0:
                    continue
                score += s * n
                need_q[c["transistor"]] += n
                for vi, bought, k in c["pieces"]:
                    (need_buy if bought else need_stock)[vi] += k * n
        if any(need_q[t] > trans_q[t] for t in need_q):
            continue
        cost = 0.0
        ok = True
        for vi in set(need_stock) | set(need_buy):
            short = need_buy[vi] + max(0, need_stock[vi] - stock_q[vi])
            if short == 0:
                continue
            if vi not in buys:
                ok = False
                break
            price, pack = buys[vi]
            packs = math.ceil(short / pack)
            cost += packs * pack * price + line
        if not ok:
            continue
        key = (round(cost, 9), score)
        if best is None or key < best:
            best = key
    return best


def realise(instance):
    """The same instance as snapshot, catalogue and plan items."""
    resistors = tuple(Resistor(v, instance["stock_q"][i], tolerance=0.05, id=i + 1,
                               location=f"A{i + 1}") for i, v in enumerate(VALUES))
    transistors = tuple(Transistor(lab, 100, 300, qty=instance["trans_q"][lab],
                                   id=Q_IDS[lab]) for lab in LABELS)
    snap = StockSnapshot(resistors=resistors, transistors=transistors)
    items = {}
    for vi, (price, pack) in instance["buys"].items():
        items[-(vi + 1)] = Purchasable(-(vi + 1), "resistor", VALUES[vi], f"{VALUES[vi]:g}",
                                       price, pack, 0.01, 0.25)
    opts = PurchaseOptions(line_cost=instance["line"])
    cat = Catalogue(opts, items)
    plan_items = []
    for b, (count, identical, cands) in enumerate(instance["builds"]):
        designs = []
        for c in cands:
            picks = [(f"R{k + 1}", VALUES[vi], -(vi + 1) if bought else vi + 1, cnt)
                     for k, (vi, bought, cnt) in enumerate(c["pieces"])]
            designs.append(make_design(c["transistor"], picks, c["score"]))
        plan_items.append(PlanItem(f"build{b}", count, identical, tuple(designs)))
    return snap, cat, plan_items


@st.composite
def instances(draw):
    stock_q = [draw(st.integers(0, 6)) for _ in VALUES]
    trans_q = {lab: draw(st.integers(0, 8)) for lab in LABELS}
    buys = {}
    for vi in range(len(VALUES)):
        if draw(st.booleans()):
            buys[vi] = (draw(st.sampled_from([0.02, 0.05, 0.1])), draw(st.integers(1, 5)))
    line = draw(st.sampled_from([0.0, 0.5]))
    builds = []
    for _ in range(2):
        count = draw(st.integers(1, 4))
        identical = draw(st.booleans())
        cands = []
        for _ in range(draw(st.integers(1, 3))):
            pieces = []
            used = set()
            for _ in range(draw(st.integers(1, 2))):
                vi = draw(st.integers(0, len(VALUES) - 1))
                bought = vi in buys and draw(st.booleans())
                if (vi, bought) in used:
                    continue
                used.add((vi, bought))
                pieces.append((vi, bought, draw(st.integers(1, 2))))
            cands.append({"transistor": draw(st.sampled_from(LABELS)), "pieces": pieces,
                          "score": draw(st.floats(0, 10, allow_nan=False))})
        builds.append((count, identical, cands))
    return {"stock_q": stock_q, "trans_q": trans_q, "buys": buys, "line": line,
            "builds": builds}


def plan_score(plan, items) -> float:
    total = 0.0
    for bp, it in zip(plan.builds, items, strict=True):
        norm = normalised([d.score for d in it.candidates])
        for a in bp.allocations:
            total += norm[a.candidate] * a.copies
    return total


def check_plan_respects_stock(plan, snap, cat, items):
    """Copies add up, identical builds use one set of values, no row is overdrawn."""
    qty = {r.id: r.qty for r in snap.resistors}
    qty.update({t.id: t.qty for t in snap.transistors})
    taken = defaultdict(int)
    bought = defaultdict(int)
    for bp, it in zip(plan.builds, items, strict=True):
        assert sum(a.copies for a in bp.allocations) == it.count
        if it.identical:
            assert len({tuple(sorted(a.design.values().items())) for a in bp.allocations}) == 1
            assert len({a.candidate for a in bp.allocations}) == 1
        for a in bp.allocations:
            for rid, k in a.pieces.items():
                taken[rid] += k
            for vid, k in a.bought.items():
                bought[vid] += k
    for rid, k in taken.items():
        assert k <= qty[rid], f"row {rid}: {k} taken, {qty[rid]} held"
    ordered = {cat.items[v].value: 0 for v in cat.items}
    for p in plan.purchases:
        ordered[p.value] += p.qty
    for vid, k in bought.items():
        assert k <= ordered[cat.items[vid].value]


SETTINGS = settings(max_examples=40, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(instances())
def test_cbc_matches_enumeration(instance):
    snap, cat, items = realise(instance)
    best = brute_force(instance)
    plan = plan_builds(items, snap, cat, solver="cbc")
    if best is None:
        assert not plan.feasible
        assert plan.solver.status == "Infeasible"
        assert plan.infeasible, "an infeasible plan must say why"
        return
    assert plan.feasible, plan.to_json()
    assert plan.solver.status == "Optimal"
    assert plan.cost == pytest.approx(best[0], abs=1e-9)
    # score second: the solver's absolute gap is 1 % of one copy's score unit
    assert plan_score(plan, items) == pytest.approx(best[1], abs=0.011)
    check_plan_respects_stock(plan, snap, cat, items)


@pytest.mark.skipif("highs" not in available_solvers(), reason="highspy not installed")
@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(instances())
def test_highs_matches_enumeration(instance):
    snap, cat, items = realise(instance)
    best = brute_force(instance)
    plan = plan_builds(items, snap, cat, solver="highs")
    assert plan.solver.name == "HiGHS"
    if best is None:
        assert not plan.feasible and plan.solver.status == "Infeasible"
        return
    assert plan.feasible and plan.solver.status == "Optimal"
    assert plan.cost == pytest.approx(best[0], abs=1e-9)
    assert plan_score(plan, items) == pytest.approx(best[1], abs=0.011)
    check_plan_respects_stock(plan, snap, cat, items)


# -- hand-made instances ------------------------------------------------------

def small_drawer(q4k7=4, q10k=10, qn1=10):
    return StockSnapshot(
        resistors=(Resistor(4700.0, q4k7, id=1, location="A1"),
                   Resistor(10000.0, q10k, id=2, location="A2")),
        transistors=(Transistor("GP-N1", 100, 300, qty=qn1, id=10),))


def test_identical_on_and_off():
    # 4k7 x4 and 10k x4 in the drawer; design A needs 4k7, design B 10k.
    # Six copies: no single design can carry them (identical: infeasible),
    # but three of each can (identical = false).
    snap = small_drawer(q4k7=4, q10k=4)
    a = make_design("GP-N1", [("R1", 4700.0, 1, 1)], 0.1)
    b = make_design("GP-N1", [("R1", 10000.0, 2, 1)], 0.2)
    same = plan_builds([PlanItem("amp", 6, True, (a, b))], snap)
    assert not same.feasible
    assert same.solver.status == "Infeasible"
    spread = plan_builds([PlanItem("amp", 6, False, (a, b))], snap)
    assert spread.feasible and spread.solver.status == "Optimal"
    copies = {al.candidate: al.copies for al in spread.builds[0].allocations}
    assert sum(copies.values()) == 6
    # the better-scored design takes all the copies its stock allows
    assert copies[0] == 4 and copies[1] == 2
    # with few copies, identical takes the best design
    one = plan_builds([PlanItem("amp", 3, True, (a, b))], snap)
    assert [al.candidate for al in one.builds[0].allocations] == [0]


def test_shared_value_across_requests_is_counted_once():
    # Each request alone fits (6 of 10 pieces of 10k); together they need 12.
    snap = small_drawer(q4k7=0, q10k=10)
    d = make_design("GP-N1", [("R1", 10000.0, 2, 1)], 0.0)
    alone = plan_builds([PlanItem("pre", 6, True, (d,))], snap)
    assert alone.feasible
    both = plan_builds([PlanItem("pre", 6, True, (d,)), PlanItem("buf", 6, True, (d,))], snap)
    assert not both.feasible
    assert both.solver.status == "Infeasible"
    named = {s.request for s in both.infeasible}
    assert named == {"pre", "buf"}
    short = both.infeasible[0].shortage
    assert {"kind": "resistor", "label": "10k", "have": 10, "need": 12} in short
    assert "shared with" in both.infeasible[0].reason


def test_transistor_shortage_is_named():
    snap = small_drawer(qn1=3)
    d = make_design("GP-N1", [("R1", 10000.0, 2, 1)], 0.0)
    plan = plan_builds([PlanItem("pre", 4, True, (d,))], snap)
    assert not plan.feasible
    assert plan.infeasible[0].shortage == [{"kind": "npn", "label": "GP-N1", "have": 3,
                                            "need": 4}]


def test_cost_comes_before_score():
    # The better design needs a bought value; the worse one is in stock: stock wins.
    snap = small_drawer(q4k7=10, q10k=0)
    cat = Catalogue(PurchaseOptions(line_cost=0.5),
                    {-1: Purchasable(-1, "resistor", 10000.0, "10k", 0.02, 10, 0.01, 0.25)})
    good = make_design("GP-N1", [("R1", 10000.0, -1, 1)], 0.0)
    fair = make_design("GP-N1", [("R1", 4700.0, 1, 1)], 100.0)
    plan = plan_builds([PlanItem("amp", 4, True, (good, fair))], snap, cat)
    assert plan.feasible and plan.cost == 0.0
    assert plan.builds[0].allocations[0].candidate == 1
    assert plan.purchases == []
    # Five copies need one more 4k7 than the drawer... no: 10 are there; ask for 12.
    plan = plan_builds([PlanItem("amp", 12, True, (good, fair))], small_drawer(10, 0, 20), cat)
    assert plan.feasible
    # Buying 12 of 10k (2 packs of 10 at 0.02 + 0.50 line) is the only way.
    assert plan.cost == pytest.approx(2 * 10 * 0.02 + 0.5)
    (p,) = plan.purchases
    assert (p.label, p.packs, p.qty, p.used) == ("10k", 2, 20, 12)


def test_bought_parts_top_up_a_short_stock_row():
    # 4 pieces of 4k7 5 % in stock, 6 needed: the other 2 come from a bought 1 % pack.
    snap = small_drawer(q4k7=4)
    cat = Catalogue(PurchaseOptions(line_cost=0.0),
                    {-1: Purchasable(-1, "resistor", 4700.0, "4k7", 0.02, 5, 0.01, 0.25)})
    d = make_design("GP-N1", [("R1", 4700.0, 1, 1)], 0.0)
    plan = plan_builds([PlanItem("amp", 6, True, (d,))], snap, cat)
    assert plan.feasible
    allocs = plan.builds[0].allocations
    assert sum(a.pieces.get(1, 0) for a in allocs) == 4
    assert sum(a.bought.get(-1, 0) for a in allocs) == 2
    assert plan.cost == pytest.approx(5 * 0.02)
    # the copies on bought pieces say so in their design
    bought_copy = next(a for a in allocs if a.bought)
    (piece,) = bought_copy.design.parts["R1"].pieces
    assert piece.id is None and piece.location == "to order"


def test_no_candidates_is_reported():
    snap = small_drawer()
    d = make_design("GP-N1", [("R1", 10000.0, 2, 1)], 0.0)
    plan = plan_builds([PlanItem("pre", 1, True, (d,)),
                        PlanItem("buf", 1, True, (), note="no design meets the gain")], snap)
    assert not plan.feasible
    assert [s.request for s in plan.infeasible] == ["buf"]
    assert "gain" in plan.infeasible[0].reason


def test_constraints_are_named_after_what_they_guard():
    snap = small_drawer()
    d = make_design("GP-N1", [("R1", 4700.0, 1, 1)], 0.0)
    model = build_model([PlanItem("pre", 2, True, (d,))], stock_rows(snap))
    names = set(model.problem.constraints)
    assert "stock_R_4k7_id1" in names
    assert "stock_Q_GP_N1_id10" in names
    assert "one_design_0" in names


def test_stand_in_rules():
    snap = StockSnapshot(
        resistors=(Resistor(4700.0, 1, tolerance=0.05, power_w=0.25, id=1),
                   Resistor(4700.0, 1, tolerance=0.01, power_w=0.25, id=2),
                   Resistor(4700.0, 1, tolerance=0.01, power_w=0.125, id=3),
                   Resistor(4750.0, 1, tolerance=0.01, power_w=0.25, id=4)),
        capacitors=(Capacitor(1e-6, 1, dielectric="electrolytic", voltage_v=25.0, id=5),
                    Capacitor(1e-6, 1, dielectric="film", voltage_v=63.0, tolerance=0.1, id=6)))
    rows = stock_rows(snap)
    assert can_stand_in(rows[2], rows[1])        # tighter tolerance: yes
    assert not can_stand_in(rows[1], rows[2])    # wider tolerance: no
    assert not can_stand_in(rows[3], rows[1])    # lower power rating: no
    assert not can_stand_in(rows[4], rows[2])    # other value: no
    assert can_stand_in(rows[6], rows[5])        # non-polarised for polarised: yes
    assert not can_stand_in(rows[5], rows[6])    # polarised for non-polarised: never


def test_a_stopped_solver_is_reported_not_hidden(monkeypatch):
    import optimiser.planning.planner as plan_mod
    from optimiser.planning import SolverReport

    snap = small_drawer()
    d = make_design("GP-N1", [("R1", 10000.0, 2, 1)], 0.0)
    monkeypatch.setattr(plan_mod, "solve_model",
                        lambda model, solver="cbc", time_limit=None:
                        SolverReport("CBC", "Not Solved", 0.5))
    plan = plan_builds([PlanItem("pre", 2, True, (d,))], snap)
    assert not plan.feasible
    assert plan.solver.status == "Not Solved"
    assert plan.to_json()["solver"]["status"] == "Not Solved"
    assert "Not Solved" in plan.infeasible[0].reason


def test_status_of_a_time_limited_solution_is_feasible_not_optimal():
    # PuLP marks a solution found but not proven optimal with sol_status 2.
    import pulp

    from optimiser.planning.model import _status_text

    prob = pulp.LpProblem("x", pulp.LpMinimize)
    prob.sol_status = pulp.LpSolutionIntegerFeasible
    assert _status_text(prob, pulp.LpStatusOptimal) == "Feasible"
    prob.sol_status = pulp.LpSolutionOptimal
    assert _status_text(prob, pulp.LpStatusOptimal) == "Optimal"
    prob.sol_status = pulp.LpSolutionNoSolutionFound
    assert _status_text(prob, pulp.LpStatusNotSolved) == "Not Solved"


@pytest.mark.skipif("highs" not in available_solvers(), reason="highspy not installed")
def test_highs_banner_stays_off_stdout(tmp_path):
    # HiGHS prints a banner from C++ on its first use; `plan --json` must stay parseable.
    import json
    import subprocess
    import sys

    script = (
        "import json\n"
        "from tests.optimiser.test_plan import make_design, small_drawer\n"
        "from optimiser.planning import PlanItem, plan_builds\n"
        "d = make_design('GP-N1', [('R1', 10000.0, 2, 1)], 0.0)\n"
        "p = plan_builds([PlanItem('pre', 2, True, (d,))], small_drawer(), solver='highs')\n"
        "print(json.dumps(p.to_json()))\n")
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                         check=True, cwd=str(__import__("pathlib").Path(__file__).parents[2]))
    data = json.loads(out.stdout)
    assert data["solver"]["name"] == "HiGHS" and data["feasible"]


@pytest.mark.parametrize("need, feasible", [(0.05, True), (0.2, False), (None, False)])
def test_a_lower_rated_row_stands_in_when_the_design_needs_less(need, feasible):
    # the design names a 0.25 W row that holds 2 pieces; a 0.125 W row of the same
    # value holds 10.  Six copies fit only if the 0.125 W pieces may stand in: they
    # may when every piece naming the row needs at most 0.125 W (need 0.05 W), not
    # when one needs more (0.2 W), and not when the need is unknown (the named
    # row's own rating is kept then)
    snap = StockSnapshot(
        resistors=(Resistor(4700.0, 2, tolerance=0.05, power_w=0.25, id=1, location="A1"),
                   Resistor(4700.0, 10, tolerance=0.05, power_w=0.125, id=3, location="A3")),
        transistors=(Transistor("GP-N1", 100, 300, qty=10, id=10),))
    d = Design("ce", "GP-N1", {"R1": RolePick("R1", 4700.0, "4k7", (
        Piece(4700.0, 1, 1, "A1", "resistor", 0.05, 0.25, need=need),))}, {}, True, score=0.1)
    plan = plan_builds([PlanItem("amp", 6, True, (d,))], snap)
    assert plan.feasible is feasible
    if feasible:
        used: dict[int, int] = {}
        for al in plan.builds[0].allocations:
            for rid, k in al.pieces.items():
                used[rid] = used.get(rid, 0) + k
        assert not plan.purchases
        assert used.get(3, 0) >= 4 and used.get(1, 0) <= 2

"""Chain builds planned together with single-stage builds against one drawer.

The drawer is tiny and invented (three resistor values, one electrolytic, two NPN
types, one of them scarce), so the pieces every allocation takes can be counted by
hand from the designs' roles, and the best choice among the offered designs can be
found by trying every pair of them (the reference below), independently of the
programme.
"""

from __future__ import annotations

import itertools
from collections import Counter
from dataclasses import replace

import pytest

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.buildlist import BuildList, BuildSpec
from optimiser.planning import gather_candidates, make_plan
from optimiser.planning.chain_columns import chain_candidates
from optimiser.planning.objective import score_map
from optimiser.purchase import PurchaseOptions, augment
from optimiser.request import parse_request
from optimiser.search.chains import search_chains

# invented parts; figures of a small-signal NPN from memory
N1 = Transistor("GP-N1", 100, 300, qty=6, ft=250e6, cob=4e-12, vceo=40, ic_max=0.1, pd=0.5,
                id=900, location="Q1")
N2 = Transistor("GP-N2", 60, 200, qty=1, ft=150e6, cob=6e-12, vceo=40, ic_max=0.1, pd=0.5,
                id=901, location="Q2")
RES = tuple(Resistor(v, q, id=i, location=f"A{i}")
            for i, (v, q) in enumerate([(680.0, 12), (3300.0, 20), (33000.0, 20)], start=1))
CAP = Capacitor(100e-6, 30, voltage_v=25, dielectric="electrolytic", id=50, location="B1")
DRAWER = StockSnapshot(RES, (CAP,), (N1, N2))
QTY = {r.id: r.qty for r in (*RES, CAP, N1, N2)}

COMMON = {"supply_v": 9.0, "load_ohm": 1e3, "source_ohm": 1e3, "f_low_max_hz": 100,
          "thd_max_pct": "none"}
CHAIN = parse_request({"topology": ["ce", "cc"], "gain_db": 30.0, "gain_tol_db": 3.0,
                       **COMMON}, pairs=True)
#: the amplifier is held to the scarce type: every design of it takes the one GP-N2
AMP = parse_request({**COMMON, "topology": "ce", "gain_db": 14.0, "gain_tol_db": 3.0,
                     "load_ohm": 1e4, "transistor": "GP-N2"})
BUFFER = parse_request({**COMMON, "topology": "cc", "transistor": "GP-N1"})
#: few candidates and short searches: pricing is exercised, the chain search kept small
KW = {"candidates": 6, "search_time_s": 10.0, "pricing_time_s": 10.0}


def _spec(name, req, count):
    return BuildSpec(name, replace(req, builds=count), count)


def _pieces_by_hand(design) -> Counter:
    """Pieces per copy by stock row, from the roles as listed (both transistors are
    roles S1.Q and S2.Q of a chain; a single stage's transistor is one piece)."""
    n: Counter = Counter()
    for pick in design.parts.values():
        for p in pick.pieces:
            n[p.id] += p.count
    if not getattr(design, "transistors", ()):
        n[{t.label: t.id for t in DRAWER.transistors}[design.transistor]] += 1
    return n


@pytest.fixture(scope="module")
def mixed():
    blist = BuildList((_spec("amp", AMP, 1), _spec("buffer", BUFFER, 1),
                       _spec("chain", CHAIN, 2)))
    return make_plan(blist, DRAWER, **KW)


def test_mixed_list_is_planned_within_the_stock_counted_by_hand(mixed):
    plan = mixed
    assert plan.feasible
    total: Counter = Counter()
    for bp in plan.builds:
        assert sum(a.copies for a in bp.allocations) == bp.count
        for a in bp.allocations:
            per = _pieces_by_hand(a.design)
            assert dict(a.pieces) == {rid: k * a.copies for rid, k in per.items()}
            total.update(a.pieces)
    for rid, used in total.items():
        assert used <= QTY[rid], (rid, used)
    chain = next(bp for bp in plan.builds if bp.name == "chain")
    for a in chain.allocations:
        # both transistors of every copy come out of stock, each under its stage's role
        q = sum(n for rid, n in a.pieces.items() if rid in (N1.id, N2.id))
        assert q == 2 * a.copies
        assert {"S1.Q", "S2.Q"} <= set(a.design.parts)
        assert any(r.startswith("S1.") for r in a.design.parts)
        assert any(r.startswith("S2.") for r in a.design.parts)


def test_the_json_says_what_the_bound_does_not_cover(mixed):
    d = mixed.to_json()
    bound = d["bound"]
    assert bound["offered_only"] == ["chain"]
    assert any(o.startswith("chain: a chain build") for o in bound["open"])
    design = d["builds"][2]["allocations"][0]["design"]
    assert design["topology"] == ["ce", "cc"] and len(design["transistors"]) == 2
    assert not any(r.endswith(".Q") for r in design["parts"])


def test_plan_view_does_not_claim_every_design_for_a_chain_build(mixed):
    from drawerfit.render.plan import bound_line

    line = bound_line(mixed.bound)
    assert "every design the drawer allows" not in line
    assert "designs the chain search offered for chain" in line


def test_scarce_transistor_sends_the_chain_to_a_lower_ranked_design():
    # the precondition, from the chain search itself: its best design takes the scarce
    # GP-N2, which every amplifier design needs too (the request names it)
    offered, _, _ = chain_candidates(CHAIN, DRAWER, top=KW["candidates"],
                                     search_time_s=KW["search_time_s"])
    assert offered and "GP-N2" in offered[0].transistors
    blist = BuildList((_spec("amp", AMP, 1), _spec("chain", CHAIN, 1)))
    # the programme over the candidates alone (no pricing), so that the reference
    # below sees exactly the designs it was offered
    plan = make_plan(blist, DRAWER, **{**KW, "pricing_time_s": 0})
    assert plan.feasible
    amp, chain = plan.builds
    (ca,) = chain.allocations
    (aa,) = amp.allocations
    assert ca.design.rank > 1 and "GP-N2" not in ca.design.transistors
    assert aa.design.transistor == "GP-N2"
    # reference: every pair of offered designs that fits the drawer, counted by hand;
    # the programme's choice scores as well as the best of them
    amps, _, _ = gather_candidates(AMP, DRAWER, DRAWER, top=KW["candidates"],
                                   search_time_s=KW["search_time_s"])

    def fits(pair):
        need: Counter = Counter()
        for d in pair:
            need.update(_pieces_by_hand(d))
        return all(n <= QTY[rid] for rid, n in need.items())

    pairs = [(a, c) for a, c in itertools.product(amps, offered) if fits((a, c))]
    assert not any(c is offered[0] for _, c in pairs)      # the best chain never fits
    best = min(score_map(a.score) + score_map(c.score) for a, c in pairs)
    got = score_map(aa.design.score) + score_map(ca.design.score)
    assert got == pytest.approx(best, rel=1e-9, abs=1e-12)


def test_a_chain_build_without_designs_is_not_called_proven():
    # one transistor in the drawer: no chain (two transistors a copy) can be built, and
    # the plan says so for the chain build without claiming a proof over the drawer
    drawer = StockSnapshot(RES, (CAP,), (replace(N1, qty=1),))
    blist = BuildList((_spec("buffer", BUFFER, 1), _spec("chain", CHAIN, 1)))
    plan = make_plan(blist, drawer, **KW)
    assert not plan.feasible
    (short,) = plan.infeasible
    assert short.request == "chain" and not short.proven
    assert short.reason.startswith("no chain meets the request from this drawer")
    assert plan.to_json()["infeasible"][0]["proven"] is False


def test_no_plan_over_the_chains_offered_is_not_a_proof_of_the_drawer():
    # the buffer is held to GP-N1 (3 copies) and every chain for two identical copies
    # takes four GP-N1 (the one GP-N2 cannot serve two copies): 7 > 6 pieces, so no plan
    # exists over what was offered; pricing saw that, and the verdict stays unproven
    blist = BuildList((_spec("buffer", BUFFER, 3), _spec("chain", CHAIN, 2)))
    plan = make_plan(blist, DRAWER, **KW)
    assert not plan.feasible
    d = plan.to_json()
    assert d["bound"]["proven_infeasible"] is False
    assert any(o.startswith("no plan exists over the chain designs offered")
               for o in d["bound"]["open"])
    assert d["infeasible"] and not any(s["proven"] for s in d["infeasible"])


# --- a chain build the drawer cannot supply but purchases can ---------------------------

#: The same drawer without its capacitor: no chain can be built from it alone.
NO_CAPS = StockSnapshot(RES, (), (N1, N2))
#: E12 resistors and E6 capacitors to order, 10 a pack, 0.50 a line (invented prices).
BUY = PurchaseOptions(series="E12", cap_series="E6", pack=10, resistor_price=0.02,
                      capacitor_price=0.10, line_cost=0.50)


def _order_cost_by_hand(design, copies: int) -> float:
    """What one build of ``copies`` copies of ``design`` must order: per value of a
    piece to order, what the drawer's rows of that value (kind and value alike) do not
    hold, in whole packs, plus one line each (the [purchase] prices above)."""
    need: Counter = Counter()
    for pick in design.parts.values():
        for p in pick.pieces:
            if p.id is not None and p.id < 0:
                need[(p.kind, p.value)] += p.count * copies
    held = Counter()
    for r in RES:
        held[("resistor", r.value)] += r.qty
    cost = 0.0
    for (kind, value), n in need.items():
        short = max(n - held[(kind, value)], 0)
        if short:
            packs = -(-short // BUY.pack)
            cost += packs * BUY.pack * BUY.price(kind) + BUY.line_cost
    return cost


def test_a_chain_build_the_drawer_cannot_supply_buys_the_least_it_needs():
    # the precondition: from the drawer alone the chain search offers nothing
    alone, note, _ = chain_candidates(CHAIN, NO_CAPS, top=KW["candidates"],
                                      search_time_s=KW["search_time_s"])
    assert alone == [] and note.startswith("no chain meets the request from this drawer")
    blist = BuildList((_spec("chain", CHAIN, 1),), purchase=BUY)
    # the programme over the candidates alone (no pricing), so that the reference
    # below sees exactly the designs it was offered
    plan = make_plan(blist, NO_CAPS, **{**KW, "pricing_time_s": 0})
    assert plan.feasible and plan.purchases
    (bp,) = plan.builds
    (a,) = bp.allocations
    assert a.copies == 1 and a.design.topology == "ce-cc"
    # reference: every design offered, its order counted by hand; the plan orders the
    # least of them, and exactly what its own design needs
    augmented, _ = augment(NO_CAPS, BUY)
    offered, _, _ = chain_candidates(CHAIN, NO_CAPS, top=KW["candidates"],
                                     search_time_s=KW["search_time_s"], augmented=augmented)
    assert offered and all(any(p.id < 0 for pick in d.parts.values() for p in pick.pieces)
                           for d in offered)
    least = min(_order_cost_by_hand(d, 1) for d in offered)
    assert plan.cost == pytest.approx(least, abs=1e-9)
    assert sum(p.cost for p in plan.purchases) == pytest.approx(plan.cost, abs=1e-9)
    # every piece of the copy comes from a stock row or from the order: the pieces
    # counted by hand (both transistors included) are those the allocation takes from
    # stock plus those of the order it uses
    per_copy = sum(_pieces_by_hand(a.design).values())
    assert sum(a.pieces.values()) + sum(p.used for p in plan.purchases) == per_copy
    for rid, used in a.pieces.items():
        assert rid > 0 and used <= QTY[rid]
    # what is proven is said: the chain build is planned over the designs offered
    from drawerfit.render.plan import bound_line

    assert plan.bound is None or "chain" in plan.bound.offered_only
    if plan.bound is not None:
        assert "designs the chain search offered for chain" in bound_line(plan.bound)


def test_a_plentiful_type_is_offered_though_the_wider_drawer_hides_it():
    # The demo drawer holds 3 LN-N3 and 25 GP-N1; the best ce→cc chains of the
    # request all take two LN-N3. The chains offered must include chains on GP-N1
    # alone whenever the chain search over the drawer finds some (the reference: that
    # search itself), also when a [purchase] table widens the drawer: over the wider
    # drawer the composed search found none on GP-N1, so 6 copies could not be planned.
    from tests.demo_drawer import demo_snapshot

    snap = demo_snapshot()
    req = parse_request({"topology": ["ce", "cc"], "supply_v": 12, "load_ohm": "1k",
                         "source_ohm": "10k", "gain_db": 40, "f_low_max_hz": 20},
                        pairs=True)
    ref = search_chains(replace(req, transistor="GP-N1"), snap, top=3, time_limit_s=30,
                        unlocks=False)
    assert any(c.meets_spec for c in ref.designs)
    wider, _ = augment(snap, PurchaseOptions(series="E24", cap_series="E6"))
    designs, _, _ = chain_candidates(req, snap, top=10, search_time_s=30, copies=1,
                                     augmented=wider)
    assert any(set(d.transistors) == {"GP-N1"} for d in designs)

"""Column generation: designs added to the plan by need, and what that proves.

The relaxation of :mod:`~optimiser.planning.master` is solved over the columns so
far; each pool gets its dual price; for each build the exact search
(:mod:`optimiser.search.pricing`) looks for the design of least reduced cost
``w·score_map(score) + Σ price × pieces − μ_b``, and every design found below 0 is
added.  When a round of complete searches finds none, the relaxation is solved
over every design the search can build, so its value bounds every plan.  At any
round whose searches all completed, the Lagrangian bound
``value + Σ_b count_b · min(0, least reduced cost of b)`` is such a bound too.

Phase 1 (copies left unserved at cost 1, everything else free) runs first when
the columns so far cannot serve every copy even fractionally; if its bound stays
above 0, no plan exists at all, and the dual prices say why (a counting argument:
every copy of a build needs pieces of the priced pools worth at least μ_b, and the
drawer holds less).

Capacitors: the search chooses each network's capacitors by its own rule, not by
price; a design's value counts them at their prices all the same (its pieces are
known once it is complete).  The search's bounds below a node, which know no
capacitor yet, count them at 0: prices are ≥ 0, so those bounds stay lower
bounds of the value, and the value of a complete design is its reduced cost.

Copies carried together (:mod:`~optimiser.planning.copies`): a column of a build
carries :func:`~optimiser.planning.copies.carried` copies at once (all of an
identical build), so the search prices designs for that many copies over the
drawer pooled and cut for them, and a column that does not fit that many times
(:func:`~optimiser.planning.copies.fits`) is never offered to the relaxation: no
plan can use it, so leaving it out keeps every bound valid and tightens it.

Chain builds (:mod:`~optimiser.planning.chain_columns`) are not priced: the search
priced here designs single stages.  Their columns are the chain search's designs,
each of reduced cost ≥ 0 at the relaxation's optimum, so the bound holds over every
single-stage design and, for a chain build, over the designs offered to it
(``Bound.offered_only``); a phase 1 that finds no plan proves nothing of the drawer.
"""

from __future__ import annotations

import math
import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

from inventory.errors import InputError
from inventory.parts import StockSnapshot
from optimiser.design import Design
from optimiser.planning.candidates import PlanItem, design_key
from optimiser.planning.copies import carried, copies_drawer, fits
from optimiser.planning.master import Column, MasterSolution, Pools, solve_master
from optimiser.planning.model import ABS_GAP_SHARE
from optimiser.planning.objective import cost_quantum, score_map, score_map_inverse, score_weight
from optimiser.planning.rows import Row, Unusable, design_demand, stock_rows
from optimiser.purchase import Catalogue
from optimiser.search.priced import priced_search
from optimiser.search.pricing import Pricing

__all__ = ["PRICING_TIME_S", "MAX_ROUNDS", "RC_TOL", "Bound", "Duals", "Generated",
           "generate_columns", "finish_bound", "new_column"]

#: Seconds for all pricing searches together unless the caller gives its own
#: (0: no pricing, the candidates alone).  Longer proves more on large drawers.
PRICING_TIME_S = 60.0
#: Pricing rounds at most (each: one relaxation, one search per build).  Most
#: are quick rounds (each search stops at its first designs of negative reduced
#: cost, :attr:`~optimiser.search.pricing.Pricing.quick`); a round whose quick
#: searches add nothing is followed by one of complete searches, which alone
#: give a bound and end pricing.
MAX_ROUNDS = 60
#: Designs each pricing search returns at most (the least reduced costs): more
#: columns per round means fewer rounds, each relaxation a little larger.
COLUMNS_PER_SEARCH = 5
#: A reduced cost below -RC_TOL (in units of one copy's score weight) is negative;
#: the bound gives up count_b · RC_TOL per build for it.  Far above the LP
#: solver's tolerances, far below any score difference that matters.
RC_TOL = 1e-6
#: Phase 1's value above which the columns cannot serve every copy.
PHASE1_TOL = 1e-7


@dataclass
class Bound:
    """What column generation proved (JSON ``bound``, docs/json.md)."""

    lp: float | None = None              # lower bound of every plan's objective (proven)
    cost: float | None = None            # the plan's objective (purchase cost + score term)
    gap: float | None = None
    proven_optimal: bool = False
    proven_cheapest: bool = False
    proven_infeasible: bool = False
    pricing_complete: bool = False
    open: list[str] = field(default_factory=list)
    columns_generated: int = 0
    pricing_rounds: int = 0
    seconds: float = 0.0
    budget_s: float = 0.0
    #: How the gap was closed: "bound" (the plan meets the LP bound), "enumeration"
    #: (every design that could beat the plan was offered), or None (open).
    closed_by: str | None = None
    enumerated: int = 0                  # designs added by enumeration
    enumeration_passes: int = 0
    #: Builds planned over the designs offered to them only (chain builds: pricing
    #: searches single stages); every verdict above holds over those designs for them.
    offered_only: list[str] = field(default_factory=list)

    def to_json(self) -> dict:
        def r(x):
            return None if x is None or not math.isfinite(x) else round(x, 9)
        return {"lp": r(self.lp), "cost": r(self.cost), "gap": r(self.gap),
                "proven_optimal": self.proven_optimal, "proven_cheapest": self.proven_cheapest,
                "proven_infeasible": self.proven_infeasible,
                "pricing_complete": self.pricing_complete, "open": list(self.open),
                "columns_generated": self.columns_generated,
                "pricing_rounds": self.pricing_rounds, "seconds": round(self.seconds, 3),
                "budget_s": self.budget_s, "closed_by": self.closed_by,
                "enumerated": self.enumerated,
                "enumeration_passes": self.enumeration_passes,
                "offered_only": list(self.offered_only)}


@dataclass(frozen=True)
class Duals:
    """The relaxation's prices at the round that gave the bound, and each build's
    least reduced cost there (≤ −RC_TOL), in units of one copy's score weight."""

    mu: tuple[float, ...]
    price: dict[tuple, float]
    least: tuple[float, ...]

    def piece_price(self, pools: Pools, rows, catalogue, d: Design, k: int = 1) -> float:
        """Σ price × pieces of one copy and the purchases ``k`` copies force."""
        return _search_price(self.price, rows, catalogue, pools, d, k)

    def row_price(self, pools: Pools, rid: int, k: int = 1) -> float:
        """The price of one piece of a row for a column of ``k`` copies."""
        return _row_price(self.price, pools, rid, k)


@dataclass
class Generated:
    """The builds with every column offered, the bound so far and, when no plan
    exists, the proof's reasons per build."""

    items: list[PlanItem]
    bound: Bound
    weight: float
    quantum: float
    reasons: dict[str, str] = field(default_factory=dict)
    #: What gap closing (:mod:`~optimiser.planning.closing`) needs: the duals of the
    #: bound's round (None: no bound), the pools and rows, and whether every
    #: request's search is exact (no yield target).
    duals: Duals | None = None
    pools: Pools | None = None
    rows: dict[int, Row] = field(default_factory=dict)
    exact: bool = False


def new_column(b: int, k: int, d: Design, rows: dict[int, Row], catalogue: Catalogue,
               pools: Pools) -> Column | None:
    """The column of design ``d`` for build ``b`` carrying ``k`` copies at once, or
    None when it names an unknown row or does not fit ``k`` times."""
    c = _column(b, d, rows, catalogue, pools)
    if c is None or not fits(c.pieces, k, pools.held, pools.unit):
        return None
    return _with_forced(c, k, pools)


def _with_forced(c: Column, k: int, pools: Pools) -> Column:
    """The column with the purchases its ``k`` copies force made part of it.

    ``k`` copies of a column that need ``k·a_P > held_P`` pieces of a purchasable
    pool make any plan that uses it buy at least ``f_P = k·a_P − held_P`` of them
    (a plan gives the column none or at least ``k`` copies; several such columns
    together force at most what they buy, since ``held_P ≥ 0``).  Per copy the
    column then costs ``unit_P · f_P / k`` more and takes ``a_P − f_P / k`` pieces
    from the pool's stock row: every plan is still a solution of the relaxation
    at the same objective, so the bound stays valid, and the relaxation can no
    longer put some copies on the stock that is there and the rest elsewhere
    without buying.  Since ``σ_P ≤ unit_P``, the change only raises a reduced
    cost: the search's value (which leaves it out) stays a lower bound.
    """
    forced = {p: k * n - pools.held.get(p, 0) for p, n in c.pieces.items()
              if p in pools.unit and k * n > pools.held.get(p, 0)}
    if not forced:
        return c
    pieces = {p: n - forced.get(p, 0) / k for p, n in c.pieces.items()}
    extra = sum(pools.unit[p] * f / k for p, f in forced.items())
    return Column(c.build, pieces, c.cost + extra)


def _column(b: int, d: Design, rows: dict[int, Row], catalogue: Catalogue,
            pools: Pools) -> Column | None:
    try:
        need = design_demand(d, rows, catalogue)
    except Unusable:
        return None
    return Column(b, pools.pieces(need), score_map(d.score))


def _forced(price: dict, pools: Pools, p: tuple, n: int, k: int) -> float:
    """Per copy, what ``k`` copies taking ``n`` pieces each of pool ``p`` must buy,
    at the unit price less the pool's price (:func:`_with_forced`)."""
    if p not in pools.unit:
        return 0.0
    short = k * n - pools.held.get(p, 0)
    return max(pools.unit[p] - price.get(p, 0.0), 0.0) * short / k if short > 0 else 0.0


def _search_price(price: dict, rows, catalogue, pools, d: Design, k: int = 1) -> float:
    """Σ price × pieces of one copy and the purchases ``k`` copies force: with the
    design's score term, its reduced cost (:func:`_with_forced`)."""
    try:
        need = design_demand(d, rows, catalogue)
    except Unusable:
        return math.inf
    per: dict[tuple, int] = {}
    for rid, n in need.items():
        p = pools.of_row[rid]
        per[p] = per.get(p, 0) + n
    return sum(price.get(p, 0.0) * n + _forced(price, pools, p, n, k) for p, n in per.items())


def _row_price(price: dict, pools: Pools, rid: int, k: int) -> float:
    """One piece of a row: its pool's price and, as a lower bound of the purchases
    forced (``n·(k − held)⁺ ≤ (k·n − held)⁺``), one piece's share of them."""
    p = pools.of_row.get(rid)
    return 0.0 if p is None else price.get(p, 0.0) + _forced(price, pools, p, 1, k)


def _why_infeasible(sol: MasterSolution, items: Sequence[PlanItem], pools: Pools) -> dict[str, str]:
    """The counting argument of phase 1's dual prices, one line per build it concerns."""
    priced = {p: s for p, s in sol.price.items() if s > PHASE1_TOL}
    need = sum(it.count * max(float(m), 0.0) for it, m in zip(items, sol.mu, strict=True))
    held = sum(s * pools.held.get(p, 0) for p, s in priced.items())
    names = ", ".join(pools.label.get(p, str(p)) for p in sorted(priced, key=repr))
    levels = {round(s, 9) for s in priced.values()}
    out = {}
    for it, m in zip(items, sol.mu, strict=True):
        if m <= PHASE1_TOL:
            continue
        if len(levels) == 1:
            s = next(iter(levels))
            out[it.name] = (f"proven: not enough {names}: every design that meets the builds "
                            f"sharing it needs some, together at least {need / s:.3g} pieces; "
                            f"the drawer holds {held / s:.0f}")
        else:
            out[it.name] = (f"proven: the builds need more of {names} than the drawer holds "
                            f"(weighted by the relaxation's prices: need {need:.3g}, "
                            f"hold {held:.3g})")
    return out


def generate_columns(items: Sequence[PlanItem], requests: Sequence, augmented: StockSnapshot,
                     catalogue: Catalogue | None, *, budget_s: float = PRICING_TIME_S,
                     rounds: int = MAX_ROUNDS, search_fn=None,
                     progress=None) -> Generated:
    """Add columns to ``items`` by pricing until none has a negative reduced cost,
    the rounds run out or ``budget_s`` is spent.

    Parameters
    ----------
    items : sequence of PlanItem
        The builds with the candidates offered so far.
    requests : sequence of Request
        The request of each build (searched for one copy).
    augmented : StockSnapshot
        The drawer plus the purchasable values (:func:`optimiser.purchase.augment`).
    search_fn : callable, optional
        Stands in for :func:`optimiser.search.search_designs` (tests).
    """
    t0 = time.perf_counter()
    catalogue = catalogue or Catalogue()
    items = [replace(it, candidates=tuple(it.candidates)) for it in items]
    rows = stock_rows(augmented, catalogue)
    total = sum(max(it.count, 0) for it in items) or 1
    quantum = cost_quantum(catalogue)
    weight = score_weight(quantum, total)
    pools = Pools(rows, catalogue, total, cost_unit=weight)
    counts = [it.count for it in items]
    ks = [carried(it.count, it.identical) for it in items]
    drawers: dict[int, StockSnapshot] = {}
    bound = Bound(budget_s=budget_s)
    designs = [list(it.candidates) for it in items]
    seen = [{design_key(d) for d in ds} for ds in designs]
    columns: list[Column] = []
    col_design: list[tuple[int, Design]] = []
    for b, ds in enumerate(designs):
        for d in ds:
            c = new_column(b, ks[b], d, rows, catalogue, pools)
            if c is not None:
                columns.append(c)
                col_design.append((b, d))
    best_lagrange = -math.inf
    best_duals: Duals | None = None
    phase1 = False
    reasons: dict[str, str] = {}
    exact = True
    for it, req in zip(items, requests, strict=True):
        if getattr(req, "wants_yield", False):
            exact = False
            bound.open.append(f"{it.name}: a yield target is checked after the search, "
                              "so its pricing proves nothing")
    chained = [b for b, req in enumerate(requests) if getattr(req, "is_pair", False)]
    for b in chained:
        bound.offered_only.append(items[b].name)
        bound.open.append(f"{items[b].name}: a chain build, planned over the "
                          f"{len(items[b].candidates)} designs the chain search offered "
                          "(those needing values to order among them; pricing "
                          "searches single stages)")
    complete_round = False
    quick = True            # quick rounds first: any negative columns, nothing proven
    for rnd in range(rounds):
        sol = solve_master(columns, counts, pools, phase1=phase1)
        if sol.status != "Optimal":
            if phase1:
                bound.open.append(f"the relaxation's solver stopped ({sol.status})")
                break
            phase1 = True
            sol = solve_master(columns, counts, pools, phase1=True)
        if phase1 and sol.value <= PHASE1_TOL:
            phase1 = False
            best_lagrange = -math.inf
            best_duals = None
            sol = solve_master(columns, counts, pools)
        left = budget_s - (time.perf_counter() - t0)
        if left <= 0:
            if f"the pricing time ({budget_s:g} s) ran out" not in bound.open:
                bound.open.append(f"the pricing time ({budget_s:g} s) ran out")
            break
        bound.pricing_rounds = rnd + 1
        added = 0
        round_exact = exact
        stalled = False
        least: list[float] = []
        searched: dict[str, tuple[list[Design], bool]] = {}
        top_mu: dict[str, float] = {}
        for b, req in enumerate(requests):
            key = (repr(req), ks[b])
            top_mu[key] = max(top_mu.get(key, -math.inf), float(sol.mu[b]))
        for b, (it, req) in enumerate(zip(items, requests, strict=True)):
            left = budget_s - (time.perf_counter() - t0)
            if left <= 0:
                round_exact = False
                if f"the pricing time ({budget_s:g} s) ran out" not in bound.open:
                    bound.open.append(f"the pricing time ({budget_s:g} s) ran out")
                break
            if b in chained:
                # not priced: its columns are the designs offered, each of reduced
                # cost ≥ 0 at the relaxation's optimum, so the bound holds over them
                least.append(-RC_TOL)
                continue
            if progress is not None:
                progress(f"pricing designs for {it.name} (round {rnd + 1})")
            mu = float(sol.mu[b])
            k = ks[b]
            key = (repr(req), k)
            pricing = Pricing(0.0 if phase1 else 1.0, score_map, score_map_inverse,
                              lambda d, sol=sol, k=k: _search_price(sol.price, rows, catalogue,
                                                                    pools, d, k),
                              top_mu[key] - RC_TOL, quick=quick)
            if key not in searched:     # builds of one request share one search per round
                if k not in drawers:
                    drawers[k] = copies_drawer(augmented, k)
                try:
                    searched[key] = priced_search(
                        replace(req, builds=k), drawers[k], pricing,
                        lambda rid, sol=sol, k=k: _row_price(sol.price, pools, rid, k),
                        COLUMNS_PER_SEARCH, left, search_fn=search_fn)
                except InputError as exc:
                    searched[key] = ([], False)
                    bound.open.append(f"{it.name}: not priced ({exc})")
            found, done = searched[key]
            if not done:
                round_exact = False
            found = [d for d in found if pricing.value(d) < mu - RC_TOL]
            found = [d for d in found if d.meets_spec]
            # the least reduced cost of this build
            least.append(min([pricing.value(d) - mu for d in found] + [-RC_TOL]))
            new_here = 0
            overdrawn = 0
            for d in found:
                dk = design_key(d)
                if dk in seen[b]:
                    continue
                c = _column(b, d, rows, catalogue, pools)
                if c is not None and not fits(c.pieces, k, pools.held, pools.unit):
                    overdrawn += 1
                    continue
                c = None if c is None else _with_forced(c, k, pools)
                if c is None or sol.reduced_cost(c, phase1) >= -RC_TOL:
                    continue
                seen[b].add(dk)
                designs[b].append(d)
                columns.append(c)
                col_design.append((b, d))
                new_here += 1
            if found and not new_here:
                # what the search's value leaves out (rows overdrawn by two roles of
                # one value) keeps them from counting: the least value still bounds
                # (a lower bound), but pricing is not done
                stalled = True
                msg = (f"{it.name}: designs that take more of a value than its rows hold "
                       f"for {k} copies" if overdrawn else
                       f"{it.name}: designs the search values below their reduced cost")
                if msg not in bound.open:
                    bound.open.append(msg)
            added += new_here
        bound.columns_generated += added
        if round_exact and len(least) == len(items):
            lag = sol.value + sum(n * m for n, m in zip(counts, least, strict=True))
            if lag > best_lagrange:
                best_lagrange = lag
                best_duals = Duals(tuple(float(m) for m in sol.mu), dict(sol.price),
                                   tuple(least))
            if phase1 and best_lagrange > PHASE1_TOL and chained:
                # over the chain designs offered only: no proof for the drawer
                bound.open.append("no plan exists over the chain designs offered and every "
                                  "single-stage design; a chain the search did not offer "
                                  "may still fit")
                break
            if phase1 and best_lagrange > PHASE1_TOL:
                bound.proven_infeasible = True
                bound.pricing_complete = added == 0
                reasons = _why_infeasible(sol, items, pools)
                break
            if added == 0:
                complete_round = not stalled
                break
        elif added == 0:
            if quick:
                quick = False   # nothing found quickly: the next round searches exactly
                continue
            break
        quick = True
    else:
        bound.open.append(f"the rounds ran out ({rounds})")
    bound.pricing_complete = bound.pricing_complete or complete_round
    if not phase1 and math.isfinite(best_lagrange):
        bound.lp = best_lagrange * weight
    bound.seconds = time.perf_counter() - t0
    out = [replace(it, candidates=tuple(designs[b])) for b, it in enumerate(items)]
    return Generated(out, bound, weight, quantum, reasons,
                     best_duals if not phase1 and math.isfinite(best_lagrange) else None,
                     pools, rows, exact)


def finish_bound(gen: Generated, plan) -> Bound:
    """Fill the bound's ``cost``, ``gap`` and verdicts from the plan of the programme
    over every generated column."""
    bound = gen.bound
    if not plan.feasible or not plan.solver.has_solution:
        return bound
    obj = plan.cost + gen.weight * sum(a.copies * score_map(a.design.score)
                                       for bp in plan.builds for a in bp.allocations)
    bound.cost = obj
    if bound.lp is None:
        return bound
    bound.gap = max(obj - bound.lp, 0.0)
    optimal = plan.solver.status == "Optimal"
    # every plan's cost is a multiple of the cost step and its score term below half
    # a step: a bound above (cost − half a step) leaves no room for a cheaper order
    bound.proven_cheapest = optimal and bound.lp > plan.cost - gen.quantum / 2
    # closed: within the programme's own absolute gap and what the bound gives up
    # for reduced costs above -RC_TOL
    total = sum(it.count for it in gen.items)
    # (the bound holds whether or not pricing is complete: a Lagrangian bound of a
    # round whose searches all completed)
    bound.proven_optimal = optimal and bound.gap <= gen.weight * (ABS_GAP_SHARE + total * RC_TOL)
    if bound.proven_optimal:
        bound.closed_by = "bound"
    return bound

"""Closing the gap between a plan and the LP bound by enumeration.

Let ``LB = D + Σ_b count_b · least_b`` be the Lagrangian bound of
:mod:`~optimiser.planning.colgen` (``D`` the relaxation's value at the round of the
bound, ``least_b ≤ 0`` build ``b``'s least reduced cost there), ``UB`` the plan's
objective, and ``rc_j = c_j + Σ_P σ_P a_Pj − μ_b`` the reduced cost of a column
under that round's prices.  Every plan ``x`` (copies ``x_j`` per column) is a
solution of the relaxation, so by duality

    objective(x) ≥ D + Σ_j rc_j · x_j ≥ LB + (rc_j − least_b) · x_j

for each column ``j`` it uses (every other copy of build ``b`` costs at least
``least_b``).  A plan better than ``UB`` therefore uses only columns with
``rc_j < least_b + gap / x_j``, ``gap = UB − LB``; a column carries at least
:func:`~optimiser.planning.copies.carried` copies (all of an identical build), so
only designs of reduced cost below ``least_b + gap / carried_b`` can improve the
plan.  The priced search (its value of a design is ``rc``, its bounds below a
node lower bounds of it) lists
all of them when it runs to its end and returns fewer than :data:`ENUM_TOP`; the
programme over them then finds the best plan there is, and the gap is closed.

A chain build (``Bound.offered_only``) is not enumerated: every design offered to it
is in the programme already, so the argument holds over those designs.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import replace

from inventory.errors import InputError
from inventory.parts import StockSnapshot
from optimiser.planning.candidates import design_key
from optimiser.planning.colgen import RC_TOL, Generated, finish_bound, new_column
from optimiser.planning.copies import carried, copies_drawer
from optimiser.planning.objective import score_map, score_map_inverse
from optimiser.purchase import Catalogue
from optimiser.search.priced import priced_search
from optimiser.search.pricing import Pricing

__all__ = ["ENUM_TOP", "ENUM_PASSES", "close_gap"]

#: Designs each enumerating search lists at most per build and pass.  A search that
#: reaches it may have left some out, so the pass proves nothing for that build;
#: larger proves more gaps closed at the price of longer searches and a larger
#: programme to re-solve.
ENUM_TOP = 60
#: Enumeration passes at most (each: one search per build, then the programme
#: re-solved).  A pass that hit ENUM_TOP still improves the plan; the next pass asks
#: for fewer designs (the gap is smaller).  More passes: more chances to close,
#: each costing its searches and a re-solve.
ENUM_PASSES = 3


def close_gap(gen: Generated, plan, requests: Sequence, augmented: StockSnapshot,
              catalogue: Catalogue | None, solve: Callable, *, budget_s: float,
              search_fn: Callable | None = None, progress: Callable | None = None):
    """Enumerate the designs that could beat ``plan`` and re-solve over them.

    Parameters
    ----------
    gen : Generated
        Column generation's result (its duals, pools and bound).
    plan : Plan
        The programme's plan over ``gen.items``, its ``bound`` filled by
        :func:`~optimiser.planning.colgen.finish_bound`.
    solve : callable
        ``solve(items) -> Plan``: the programme over a list of builds.
    budget_s : float
        Seconds for the enumerating searches together.

    Returns
    -------
    (items, plan)
        The builds with every column offered, and the plan over them (its
        ``bound`` updated: ``closed_by``, ``enumerated``, ``enumeration_passes``).
    """
    t0 = time.perf_counter()
    items = list(gen.items)
    bound = plan.bound
    duals = gen.duals
    if bound is None or bound.proven_optimal or duals is None or not gen.exact:
        return items, plan
    if budget_s <= 0:
        bound.open.append("no time was left for enumeration")
        return items, plan
    catalogue = catalogue or Catalogue()
    pools, rows = gen.pools, gen.rows
    ks = [carried(it.count, it.identical) for it in items]
    drawers: dict[int, StockSnapshot] = {}
    seen = [{design_key(d) for d in it.candidates} for it in items]
    enumerated = 0
    for npass in range(ENUM_PASSES):
        if bound.gap is None or not plan.feasible or plan.solver.status != "Optimal":
            break
        gap_u = bound.gap / gen.weight          # in the relaxation's units
        # per build: designs of search value below μ_b + least_b + gap / k can help
        limit = [duals.mu[b] + duals.least[b] + gap_u / ks[b] + RC_TOL
                 for b in range(len(items))]
        cutoff: dict[tuple, float] = {}
        for b, req in enumerate(requests):
            key = (repr(req), ks[b])
            cutoff[key] = max(cutoff.get(key, -math.inf), limit[b])
        searched: dict[tuple, tuple[list, bool]] = {}
        complete = True
        short: list[str] = []           # builds whose enumeration may have left some out
        gap_before = bound.gap
        added = 0
        new_items = []
        for b, (it, req) in enumerate(zip(items, requests, strict=True)):
            if getattr(req, "is_pair", False):
                new_items.append(it)       # a chain build: planned over its designs offered
                continue
            k = ks[b]
            key = (repr(req), k)
            pricing = Pricing(1.0, score_map, score_map_inverse,
                              lambda d, k=k: duals.piece_price(pools, rows, catalogue, d, k),
                              cutoff[key])
            if key not in searched:
                left = budget_s - (time.perf_counter() - t0)
                if left <= 0:
                    searched[key] = ([], False)
                else:
                    if progress is not None:
                        progress(f"enumerating designs for {it.name} (pass {npass + 1})")
                    if k not in drawers:
                        drawers[k] = copies_drawer(augmented, k)
                    try:
                        searched[key] = priced_search(
                            replace(req, builds=k), drawers[k], pricing,
                            lambda rid, k=k: duals.row_price(pools, rid, k),
                            ENUM_TOP, left, search_fn=search_fn)
                    except InputError:
                        searched[key] = ([], False)
            found, done = searched[key]
            if not done or len(found) >= ENUM_TOP:
                complete = False
                short.append(it.name)
            extra = []
            for d in found:
                dk = design_key(d)
                if (not d.meets_spec or dk in seen[b] or pricing.value(d) >= limit[b]
                        or new_column(b, k, d, rows, catalogue, pools) is None):
                    continue
                seen[b].add(dk)
                extra.append(d)
            added += len(extra)
            new_items.append(replace(it, candidates=tuple(it.candidates) + tuple(extra)))
        items = new_items
        enumerated += added
        if added:
            if progress is not None:
                progress("solving the plan again")
            new = solve(items)
            if not (new.feasible and new.solver.has_solution):
                # the designs listed were not weighed: nothing is proven by this pass
                bound.open.append("the programme over the designs enumerated stopped without "
                                  f"a plan (status {new.solver.status})")
                bound.enumerated = enumerated
                bound.enumeration_passes = npass + 1
                break
            plan = new
        gen = replace(gen, items=items)
        plan.bound = finish_bound(gen, plan)
        bound = plan.bound
        bound.enumerated = enumerated
        bound.enumeration_passes = npass + 1
        if bound.proven_optimal:
            break
        if complete and plan.solver.status == "Optimal":
            bound.proven_optimal = bound.proven_cheapest = True
            bound.closed_by = "enumeration"
            break
        if bound.gap is None or bound.gap >= gap_before:
            # the next pass would list the same designs again
            bound.open.append(f"enumeration listed {ENUM_TOP} designs or stopped early for "
                              f"{', '.join(short)} and the plan did not improve")
            break
    else:
        if not bound.proven_optimal:
            bound.open.append(f"the enumeration passes ran out ({ENUM_PASSES})")
    if not bound.proven_optimal and time.perf_counter() - t0 >= budget_s:
        bound.open.append(f"the enumeration time ({budget_s:g} s) ran out")
    bound.seconds += time.perf_counter() - t0
    return items, plan

"""The planner's entry points: a build list to candidates, the programme built,
solved and read, and a plan, or the reasons there is none."""

from __future__ import annotations

from collections.abc import Callable, Sequence

from inventory.parts import StockSnapshot
from optimiser.planning.assemble import assemble
from optimiser.planning.candidates import (
    DEFAULT_CANDIDATES,
    SEARCH_TIME_LIMIT_S,
    PlanItem,
    gather_candidates,
)
from optimiser.planning.chain_columns import chain_candidates
from optimiser.planning.closing import close_gap
from optimiser.planning.colgen import PRICING_TIME_S, finish_bound, generate_columns
from optimiser.planning.copies import carried
from optimiser.planning.diagnosis import diagnose
from optimiser.planning.model import SOLVER_TIME_LIMIT_S, build_model, read_solution, solve_model
from optimiser.planning.results import Plan, Shortfall, SolverReport
from optimiser.planning.rows import stock_rows
from optimiser.purchase import Catalogue, augment

__all__ = ["plan_builds", "make_plan"]


def plan_builds(items: Sequence[PlanItem], snapshot: StockSnapshot,
                catalogue: Catalogue | None = None, *, solver: str = "cbc",
                time_limit: float | None = SOLVER_TIME_LIMIT_S) -> Plan:
    """Build, solve and read the programme; explain it when it has no solution.

    Parameters
    ----------
    items : sequence of PlanItem
        The builds and their candidate designs.
    snapshot : StockSnapshot
        The drawer (may already hold the catalogue's virtual rows).
    catalogue : Catalogue, optional
        What may be bought (:func:`optimiser.purchase.augment`).
    solver : {"cbc", "highs"}
    time_limit : float, optional
        Seconds; a plan found by then is reported with status ``Feasible``.
    """
    catalogue = catalogue or Catalogue()
    rows = stock_rows(snapshot, catalogue)
    items = list(items)
    if any(not it.candidates for it in items):
        report = SolverReport({"cbc": "CBC", "highs": "HiGHS"}.get(solver, solver),
                              "Infeasible", 0.0)
        return Plan(False, report, infeasible=diagnose(items, rows, catalogue, solver,
                                                       time_limit),
                    candidates=sum(len(it.candidates) for it in items))
    model = build_model(items, rows, catalogue)
    report = solve_model(model, solver, time_limit)
    if report.has_solution:
        return assemble(model, read_solution(model, report), report)
    if report.status == "Infeasible":
        why = diagnose(items, rows, catalogue, solver, time_limit)
    else:
        why = [Shortfall(it.name, f"the solver stopped without a plan (status {report.status})")
               for it in items]
    return Plan(False, report, infeasible=why, candidates=len(model.demand),
                stats=dict(model.size))


def make_plan(buildlist, snapshot: StockSnapshot, *, solver: str = "cbc", candidates: int = DEFAULT_CANDIDATES,
              time_limit: float | None = SOLVER_TIME_LIMIT_S, search_fn: Callable | None = None,
              progress: Callable[[str], None] | None = None,
              search_time_s: float | None = SEARCH_TIME_LIMIT_S,
              pricing_time_s: float | None = PRICING_TIME_S, pricing_fn: Callable | None = None
              ) -> Plan:
    """Plan a build list against ``snapshot``: candidates, programme, solution.

    Parameters
    ----------
    buildlist : optimiser.buildlist.BuildList
    snapshot : StockSnapshot
        The drawer as the store holds it (no virtual rows).
    solver : {"cbc", "highs"}
    candidates : int
        ``top`` for each search (see :func:`gather_candidates`).
    time_limit : float, optional
        Seconds for the solver.
    search_fn : callable, optional
        Stands in for :func:`optimiser.search.search` (tests).  A chain build's
        candidates come from :func:`optimiser.search.chains.search_chains`
        (:mod:`~optimiser.planning.chain_columns`); column generation and gap
        closing leave them as offered.
    search_time_s : float, optional
        Time limit of each candidate search.  A search stopped by it still
        gives valid designs; the plan is then optimal over the candidates found
        (``stats["search"]`` counts the searches that stopped early).
    progress : callable, optional
        Called with a short text before each request's search.
    pricing_time_s : float, optional
        Seconds for column generation (:mod:`optimiser.planning.colgen`) and then
        for closing the gap by enumeration (:mod:`optimiser.planning.closing`,
        what is left of them); 0 or None: the candidates alone, and no ``bound``.  Skipped when
        ``search_fn`` stands in for the search and ``pricing_fn`` is not given.
    pricing_fn : callable, optional
        Stands in for :func:`optimiser.search.search_designs` in pricing (tests).
    """
    augmented, catalogue = augment(snapshot, buildlist.purchase)
    items = []
    search_stats = []
    for b in buildlist.builds:
        if progress is not None:
            progress(f"searching designs for {b.name}")
        if b.request.is_pair:
            designs, note, st = chain_candidates(b.request, snapshot, top=candidates,
                                                 search_time_s=search_time_s,
                                                 copies=carried(b.count, b.identical),
                                                 augmented=augmented)
        else:
            designs, note, st = gather_candidates(b.request, snapshot, augmented,
                                                  top=candidates, search_fn=search_fn,
                                                  search_time_s=search_time_s,
                                                  copies=carried(b.count, b.identical))
        search_stats.append({"request": b.name, **st.to_json(), "candidates": len(designs)})
        items.append(PlanItem(b.name, b.count, b.identical, tuple(designs), note,
                              strict_tolerance=b.request.wants_yield))
    gen = None
    if pricing_time_s and all(it.candidates for it in items) and (
            search_fn is None or pricing_fn is not None):
        gen = generate_columns(items, [b.request for b in buildlist.builds], augmented, catalogue,
                               budget_s=pricing_time_s, search_fn=pricing_fn, progress=progress)
        items = gen.items
        if gen.bound.proven_infeasible:
            report = SolverReport("LP relaxation", "Infeasible", gen.bound.seconds)
            why = [Shortfall(it.name, gen.reasons[it.name], proven=True)
                   for it in items if it.name in gen.reasons]
            plan = Plan(False, report, infeasible=why,
                        candidates=sum(len(it.candidates) for it in items), bound=gen.bound)
            plan.stats["search"] = search_stats
            plan.stats["search_seconds"] = sum(s["seconds"] for s in search_stats)
            return plan
    if progress is not None:
        progress("solving the plan")
    plan = plan_builds(items, augmented, catalogue, solver=solver, time_limit=time_limit)
    if gen is not None:
        plan.bound = finish_bound(gen, plan)
        items, plan = close_gap(
            gen, plan, [b.request for b in buildlist.builds], augmented, catalogue,
            lambda its: plan_builds(its, augmented, catalogue, solver=solver,
                                    time_limit=time_limit),
            budget_s=max(pricing_time_s - gen.bound.seconds, 0.0), search_fn=pricing_fn,
            progress=progress)
    plan.stats["search"] = search_stats
    plan.stats["search_seconds"] = sum(s["seconds"] for s in search_stats)
    return plan

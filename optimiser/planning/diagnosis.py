"""Explaining an infeasible plan: the requests that cannot be met and the
shortages that bind, from an elastic version of the programme."""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence

from optimiser.planning.candidates import PlanItem
from optimiser.planning.model import SOLVER_TIME_LIMIT_S, build_model, read_solution, solve_model
from optimiser.planning.results import Shortfall
from optimiser.planning.rows import Row
from optimiser.purchase import Catalogue

__all__ = ["diagnose"]


def diagnose(items: Sequence[PlanItem], rows: dict[int, Row], catalogue: Catalogue | None,
             solver: str = "cbc", time_limit: float | None = SOLVER_TIME_LIMIT_S) -> list[Shortfall]:
    """Name the requests that cannot be met and the shortages that bind.

    A build without any candidate is reported as such.  For the others an
    elastic programme (:func:`build_model` with ``elastic=True``) finds the
    fewest pieces that would have to be added; every stock row that falls short
    there is a binding shortage, reported against each request whose chosen
    designs draw on it (``have`` the pieces in those rows, ``need`` what the
    plan would take).
    """
    catalogue = catalogue or Catalogue()
    out: list[Shortfall] = []
    usable = []
    for it in items:
        if not it.candidates:
            out.append(Shortfall(it.name, it.note or "no design meets the request from this drawer"))
        else:
            usable.append(it)
    if not usable:
        return out
    model = build_model(usable, rows, catalogue, elastic=True)
    names = [it.name for it in usable]
    for b, it in enumerate(usable):
        if not any(c[0] == b for c in model.demand):
            reasons = sorted({m for c, m in model.skipped.items() if c[0] == b})
            out.append(Shortfall(it.name, "no candidate can be built: " + "; ".join(reasons)))
    if any(s.request in names for s in out):
        return out
    report = solve_model(model, solver, time_limit)
    if not report.has_solution:
        return out + [Shortfall(n, f"the plan could not be explained (solver {report.status})")
                      for n in names]
    sol = read_solution(model, report)
    short_rows = set(sol.slack)
    if not short_rows:
        if out:        # the builds with candidates fit; those without are the reason
            return out
        return [Shortfall(n, "the solver found no plan although the stock suffices "
                          f"(status {report.status})") for n in names]
    # per pool: pieces in the short rows and pieces the plan takes from them
    # (every stock row of a short pool that the plan draws on counts)
    short_pools = {rows[s].pool for s in short_rows}
    drawn = {s for (_r, s), k in sol.flow.items()
             if k > 0 and not rows[s].virtual and rows[s].pool in short_pools}
    pool_have: dict[tuple[str, str], int] = defaultdict(int)
    pool_need: dict[tuple[str, str], int] = defaultdict(int)
    for s in drawn | short_rows:
        pool_have[rows[s].pool] += rows[s].qty
    for (_r, s), k in sol.flow.items():
        if s in drawn:
            pool_need[rows[s].pool] += k
    # which builds draw on which short pools
    users: dict[tuple[str, str], set[int]] = defaultdict(set)
    for (b, j) in sol.copies:
        for r in model.demand[(b, j)]:
            for (rr, s), k in sol.flow.items():
                if rr == r and s in drawn and k > 0:
                    users[rows[s].pool].add(b)
    for b, name in enumerate(names):
        pools = sorted(p for p, bs in users.items() if b in bs)
        if not pools:
            continue
        shortage = [{"kind": k, "label": lab, "have": pool_have[(k, lab)],
                     "need": pool_need[(k, lab)]} for k, lab in pools]
        others = sorted({names[o] for p in pools for o in users[p] if o != b})
        what = ", ".join(f"{lab} (have {pool_have[(k, lab)]}, need {pool_need[(k, lab)]})"
                         for k, lab in pools)
        # over the candidates offered only: another design of the drawer may need
        # none of these, so this is no proof that the drawer falls short
        reason = f"the designs offered for it need more {what}"
        if others:
            reason += f"; shared with {', '.join(others)}"
        if any(k in ("resistor", "capacitor") for k, _ in pools) and not catalogue.items:
            reason += "; a [purchase] table would allow ordering resistors and capacitors"
        out.append(Shortfall(name, reason, shortage))
    return out

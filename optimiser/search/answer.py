"""The public entry :func:`search`: the request's limits, the ranked designs, their
yield, and the nearest misses and unlocks when nothing meets the request."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

from inventory.parts import StockSnapshot
from optimiser.design import Design
from optimiser.request import Request
from optimiser.search.limits import check_request, physical_limits
from optimiser.search.suggestions import change_json, explain
from optimiser.search.tree import search_designs
from optimiser.yield_ import apply_yield, monte_carlo


@dataclass
class SearchResult:
    """What :func:`search` returns (docs/json.md)."""

    request: Request
    feasible: bool
    designs: list[Design]
    nearest_misses: list[Design]
    unlock: list[str]
    stats: dict = field(default_factory=dict)
    #: targets beyond the topology's (or the drawer's) reach (:func:`physical_limits`)
    limits: list[dict] = field(default_factory=list)
    #: each unlock as data: target, from, to, proof (docs/answers.md)
    unlock_changes: list[dict] = field(default_factory=list)

    def to_json(self) -> dict:
        return {
            "request": self.request.to_json(),
            "feasible": bool(self.feasible),
            "designs": [d.to_json() for d in self.designs],
            "nearest_misses": [d.to_json() for d in self.nearest_misses],
            "unlock": list(self.unlock),
            "limits": [dict(x) for x in self.limits],
            "unlock_changes": [change_json(x) for x in self.unlock_changes],
            "search": {
                "complete": bool(self.stats.get("complete", True)),
                "proven_ranks": int(self.stats.get("proven_ranks", len(self.designs))),
                "open_bound": (None if not math.isfinite(self.stats.get("open_bound", math.inf))
                               else float(self.stats["open_bound"])),
                "seconds": self.stats.get("seconds"),
            },
        }


def search(request: Request, snapshot: StockSnapshot, *, top: int = 10, misses: int = 5,
           progress=None, time_limit_s: float | None = None) -> SearchResult:
    """Find the best ``top`` stages buildable from ``snapshot`` that meet ``request``.

    Parameters
    ----------
    request : Request
    snapshot : StockSnapshot
        The drawer; rows with negative ids are virtual (to be bought) and never
        count as "last pieces of a bin".
    top : int
        How many distinct designs to return (rank 1..top).
    misses : int
        How many nearest misses to return when no design meets the request.
    progress : callable, optional
        ``progress(status)``, called between steps of the branch and bound with a
        :class:`~optimiser.search.tree.SearchStatus` (best score so far, ranks
        proven, nodes left).
    time_limit_s : float, optional
        Stop the branch and bound after this many seconds.  The result then
        says how far it got (``stats["complete"]`` False, ``stats["open_bound"]``
        the smallest score any unexamined design could have, and
        ``stats["proven_ranks"]`` how many leading ranks are proven best
        anyway).  ``None`` searches to the end: the ranking is then proven.

    Returns
    -------
    SearchResult
    """
    check_request(request, snapshot)
    t0 = time.perf_counter()
    stats: dict = {"pruned": {}}
    limits = physical_limits(request, snapshot)
    if limits:
        # proven infeasible by the bound alone: no search of this request, only the
        # nearest misses and unlocks (each from searches of its own)
        stats.update(complete=True, proven_ranks=0, searched=False)
        result = SearchResult(request, False, [], [], [], stats, limits=limits)
        if misses > 0:
            result.nearest_misses, result.unlock, result.unlock_changes = explain(
                request, snapshot, None, misses, stats, limits=limits)
        stats["seconds"] = time.perf_counter() - t0
        return result
    want = top * 3 if request.min_yield_pct is not None else top
    designs, pool = search_designs(request, snapshot, want, stats, progress,
                                   budget_s=time_limit_s)
    complete = not stats.get("stopped_at_budget", False)
    stats["complete"] = complete
    bound = stats.get("open_bound", math.inf)
    proven = 0
    for d in designs:
        if d.score is not None and d.score <= bound:
            proven += 1
        else:
            break
    stats["proven_ranks"] = proven
    if request.wants_yield and designs:
        designs = _with_yield(request, snapshot, designs, top, stats)
    result = SearchResult(request, bool(designs), designs, [], [], stats)
    if not designs and misses > 0 and complete:
        # (a search stopped at its time limit proves nothing: no misses or unlocks then)
        result.nearest_misses, result.unlock, result.unlock_changes = explain(
            request, snapshot, pool, misses, stats)
    stats["seconds"] = time.perf_counter() - t0
    return result


def _with_yield(request: Request, snapshot: StockSnapshot, designs: list[Design], top: int,
                stats: dict) -> list[Design]:
    """Monte Carlo yield of the shortlist (docs/model.md); drops designs below
    min_yield_pct.  The yield is computed after ranking, on up to 3·top designs."""
    kept = []
    for d in designs:
        tol = {r: max((x.tolerance for x in p.pieces if x.tolerance is not None), default=None)
               for r, p in d.parts.items()}
        tol = {r: v for r, v in tol.items() if v is not None}
        res = monte_carlo(request, d.values(), snapshot.transistor(d.transistor), tol,
                          samples=request.samples, seed=request.seed)
        apply_yield(d, res, request)
        if d.meets_spec:
            kept.append(d)
        else:
            stats["pruned"]["yield"] = stats["pruned"].get("yield", 0) + 1
        if len(kept) >= top:
            break
    for r, d in enumerate(kept, 1):
        d.rank = r
    return kept

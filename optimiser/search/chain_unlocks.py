"""What would unlock a chain or cascode request nothing meets (docs/answers.md, "Chains
and the cascode"): the single stage's relaxations (:mod:`.suggestions`, their one home)
run on the chain search, each change proven by the pair engine's verdict on the chain it
names, and one bought value.

Pure functions over plain objects; no I/O.
"""

from __future__ import annotations

import time

from inventory.parts import StockSnapshot
from optimiser.request import Request
from optimiser.search.chain_confirm import chain_verdict
from optimiser.search.miss_pool import TARGETS
from optimiser.search.suggestions import RELAX_TOP, Relaxer, _Clock, advice, relax_targets

__all__ = ["CHAIN_TARGETS", "CHAIN_EXPLAIN_BUDGET_S", "CHAIN_RELAX_S", "CHAIN_BUY_S",
           "chain_figure", "chain_relaxer", "explain_chain"]

#: The targets of a chain request: the single stage's, and the output impedance.
CHAIN_TARGETS = TARGETS + (("zout_max_ohm", "zout_ohm", "max"),)
#: Time (s) all the suggestions of one chain answer share (within what the request's
#: time limit leaves): a chain search of a relaxed request takes a few seconds on the
#: demo drawer, so this buys the gain's first steps and the other targets once each.
CHAIN_EXPLAIN_BUDGET_S = 16.0
#: The time limit of each relaxed chain search (its proof has at most what is left of it).
CHAIN_RELAX_S = 4.0
#: The time limit of the chain search over the drawer plus values to order.
CHAIN_BUY_S = 6.0


def chain_figure(d, metric: str) -> float | None:
    """A chain's figure for a target's metric: the whole chain's, or for the per-stage
    ones the worse stage's (the least I_C, the largest drift)."""
    if metric == "ic_a":
        return min(float(s["ic_a"]) for s in d.stages)
    if metric == "ic_drift_pct":
        return max(float(s["ic_drift_pct"]) for s in d.stages)
    return d.metrics.get(metric)


def chain_relaxer(snapshot: StockSnapshot, search_chains) -> Relaxer:
    """The chain search (``search_chains``, its own unlocks off) as a :class:`Relaxer`:
    proven that none exists only where its proof says so."""

    def run(request: Request, snap: StockSnapshot, budget: float):
        r = search_chains(request, snap, top=RELAX_TOP, time_limit_s=budget, unlocks=False)
        none = not r.designs and bool(r.search.get("proven"))
        return list(r.designs), none, False, []

    return Relaxer(snapshot, run, lambda request, d: chain_verdict(request, snapshot, d),
                   chain_figure, targets=CHAIN_TARGETS, what="a chain from stock",
                   how="the chain search", budget_s=CHAIN_RELAX_S, buy_budget_s=CHAIN_BUY_S)


def explain_chain(request: Request, snapshot: StockSnapshot, stats: dict, search_chains,
                  limits=(), seconds: float = CHAIN_EXPLAIN_BUDGET_S
                  ) -> tuple[list[str], list[dict], list]:
    """(unlock lines, unlock changes, the chains the relaxed searches found) of a chain
    request nothing meets, within ``seconds`` (the searches the clock leaves out are
    named)."""
    t0 = time.perf_counter()
    clock = _Clock(seconds)
    relaxer = chain_relaxer(snapshot, search_chains)
    found, changes = relax_targets(request, relaxer, stats, list(limits), clock)
    unlock = advice(request, relaxer, changes, list(limits), clock, stats,
                    none_found="see the nearest misses and what was searched")
    stats["unlock_seconds"] = time.perf_counter() - t0
    return unlock, changes, found

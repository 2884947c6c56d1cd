"""Proving a chain ranking: :func:`prove_chains` widens the stage lists until the bound
of :mod:`.chain_proof` shows no chain outside them can take a rank (docs/search.md,
"Chains", "What is proven").

Each round asks the single-stage search for the best ``k`` stages of each relaxed
request (:func:`.chain_proof.proof_requests`), composes every new pair of them whose
floor does not already lie above the ``top``-th chain found, and computes the least
score of a chain with a stage outside the lists.  ``k`` doubles (from
:data:`.chains.STAGE_TOP`) until that bound lies above the ``top``-th chain, both lists
hold every stage of their requests, or :data:`PROOF_TIME_S` runs out.
"""

from __future__ import annotations

import math
import time

from inventory.parts import StockSnapshot
from optimiser.request import Request
from optimiser.search.answer import search
from optimiser.search.chain_confirm import chain_key, chain_parts, confirm_with_retry
from optimiser.search.chain_proof import (
    outside_bound,
    pair_floor,
    proof_requests,
    proven_ranks,
    stage_list,
)

__all__ = ["PROOF_TIME_S", "FIRST_K", "prove_chains"]

#: Seconds the proof may widen the stage lists when the search has a time limit (the
#: command's default): a longer budget proves more rankings on larger drawers, a shorter
#: one answers sooner; without a time limit (``--time-limit 0``) the proof has none.
PROOF_TIME_S = 3.0
#: Stages of each relaxed request in the first round (doubled each round).
FIRST_K = 10


def _stage_key(d) -> tuple:
    return tuple(sorted(d.values().items())) + (d.transistor,)


def _merge(old, new, key) -> list:
    seen, out = set(), []
    for d in sorted(old + new, key=key):
        k = chain_key(d)
        if k not in seen:
            seen.add(k)
            out.append(d)
    return out


def _score_key(d) -> tuple:
    return (d.score, sorted(d.values().items()))


def _miss_key(d) -> tuple:
    return (len(d.violations), d.score)


def _clean(x: float):
    return None if not math.isfinite(x) else float(x)


def prove_chains(request: Request, snapshot: StockSnapshot, meeting: list, missing: list,
                 top: int, stats: dict, time_limit_s: float | None):
    """Widen until the best ``top`` chains are proven (module docstring).

    ``meeting`` and ``missing``: the chains already found (:func:`.chain_confirm.
    confirm_with_retry`); ``time_limit_s``: the proof's budget, None for none.
    Returns (meeting, missing, proof): the chains with those the proof found, and the
    ``search["proof"]`` record (docs/json.md)."""
    t0 = time.perf_counter()
    deadline = None if time_limit_s is None else t0 + max(0.0, time_limit_s)
    reqs = proof_requests(request)

    def left():
        return None if deadline is None else deadline - time.perf_counter()

    composed: set = set()
    rounds: list[dict] = []
    bound, k, stopped = -math.inf, FIRST_K, "time"
    rate = 0.0                          # seconds per chain composed, last round
    while True:
        if left() is not None and left() <= 0:
            break
        lists = []
        for req in reqs:
            r = search(req, snapshot, top=k, misses=0, time_limit_s=left())
            lists.append(stage_list(r.designs, k, bool(r.stats.get("complete", True)),
                                    r.stats.get("open_bound"), req))
        if left() is not None and left() <= 0:
            break                       # the lists of this round are not composed
        tau = meeting[top - 1].score if len(meeting) >= top else math.inf
        cands, pruned = [], 0
        for a in lists[0].designs:
            for b in lists[1].designs:
                key = (_stage_key(a), _stage_key(b))
                if key in composed:
                    continue
                composed.add(key)
                if pair_floor(a, b, request) > tau:
                    pruned += 1
                    continue
                cands.append((chain_parts(a, b), (a.transistor, b.transistor)))
        # a round whose composition would outrun the budget (at the last round's pace)
        # is not started: its lists would prove nothing until composed
        if left() is not None and rate * len(cands) > left():
            break
        c0 = time.perf_counter()
        m, miss = confirm_with_retry(request, snapshot, cands, stats, top)
        if cands:
            rate = (time.perf_counter() - c0) / len(cands)
        meeting = _merge(meeting, m, _score_key)
        missing = _merge(missing, miss, _miss_key)
        bound = outside_bound(*lists, request)
        rounds.append({"k": k, "first_stages": len(lists[0].designs),
                       "followers": len(lists[1].designs),
                       "exhausted": [x.exhausted for x in lists],
                       "chains_composed": len(cands), "chains_pruned_by_floor": pruned,
                       "bound": _clean(bound)})
        scores = [d.score for d in meeting[:top]]
        if math.isinf(bound):
            stopped = "exhausted"
            break
        if len(scores) >= top and proven_ranks(scores, bound) >= top:
            stopped = "bound"
            break
        k *= 2
    scores = [d.score for d in meeting[:top]]
    ranks = proven_ranks(scores, bound)
    proof = {"requests": [_describe(r) for r in reqs], "rounds": rounds,
             "widened_to": rounds[-1]["k"] if rounds else 0, "stopped": stopped,
             "time_budget_s": time_limit_s, "bound": _clean(bound),
             "every_stage_listed": bool(bound == math.inf), "proven_ranks": ranks,
             "seconds": time.perf_counter() - t0}
    return meeting, missing, proof


def _describe(req: Request) -> dict:
    """A relaxed stage request as the JSON names it."""
    return {"topology": req.topology, "load_ohm": req.load_ohm,
            "gain_db_window": (None if req.gain is None else
                               [req.gain_db - req.gain_tol_db, req.gain_db + req.gain_tol_db])}

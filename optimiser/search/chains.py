"""Two-stage chains from one drawer: :func:`search_chains` (docs/search.md, "Chains").

1. The second stage (a follower), each with its own divider bias, from the
   single-stage search (:func:`optimiser.search.search`) into the chain's load.
2. The first stage from the single-stage search into the loads the followers'
   input impedances present (per band of Z_in within a factor of 2: the
   followers' Z_in range is the first stage's load range), in the two gain
   windows of :func:`.chain_followers.first_stage_requests`.  The second stage is
   searched again from the first stages' output impedance.
3. Every first stage with every follower: both stages' pieces counted together
   against stock, the whole chain evaluated by the two-transistor engine
   (:func:`optimiser.pair_evaluate.evaluate_pair`) against the chain's targets,
   ranked exactly among these candidates by :mod:`.chain_score`
   (:func:`.chain_confirm.confirm_chains`); chains missing only f_low are tried again
   with the largest capacitors in stock.
4. The proof (:func:`.chain_exact.prove_chains`), capacitor-coupled chains only: the
   stage lists of relaxed single-stage requests widened until no chain with a stage
   outside them can take a rank, every stage is listed, or the proof's budget
   (:data:`.chain_exact.PROOF_TIME_S` under a time limit, none without) runs out.
   ``search["proven"]``: rank 1 is proven (under the assumptions of docs/search.md);
   ``search["complete"]``: every rank is.  Direct-coupled chains
   (:mod:`.chain_direct`) are ranked among the chains composed, not proven.

A cascode (``topology = "cascode"``) is searched by :mod:`.chain_cascode` and confirmed
and ranked the same way (step 3), not proven.
"""

from __future__ import annotations

import time

import numpy as np

from inventory.errors import InputError
from inventory.parts import StockSnapshot
from inventory.values import format_si
from optimiser.request import Request
from optimiser.search.answer import search
from optimiser.search.chain_answer import ChainResult
from optimiser.search.chain_cascode import search_cascode
from optimiser.search.chain_confirm import (
    chain_key,
    chain_parts,
    confirm_with_retry,
    judge_chains,
    with_swing,
)
from optimiser.search.chain_direct import search_direct
from optimiser.search.chain_exact import PROOF_TIME_S, prove_chains
from optimiser.search.chain_followers import (
    first_stage_requests,
    follower_request,
    load_bins,
    stage_request,
)
from optimiser.search.chain_unlocks import CHAIN_EXPLAIN_BUDGET_S, explain_chain
from optimiser.search.limits import physical_limits

__all__ = ["SEARCHED_CHAINS", "SEARCHED_COUPLINGS", "CASCODE", "check_chain_request",
           "search_chains", "STAGE_TOP", "FOLLOWER_TOP"]

#: The chains ``design`` searches (first stage, second stage), capacitor-coupled.
SEARCHED_CHAINS = (("ce", "cc"), ("cb", "cc"))
#: The cascode's ``topology`` (searched by :mod:`.chain_cascode`).
CASCODE = "cascode"
#: The couplings searched; "direct" only for ce→cc (the one direct form).
SEARCHED_COUPLINGS = ("capacitor", "direct")
#: How many designs of each first-stage search are composed into chains.
STAGE_TOP = 10
#: How many followers each second-stage search gives.
FOLLOWER_TOP = 30


def _names() -> str:
    return ", ".join(f'["{a}", "{b}"]' for a, b in SEARCHED_CHAINS) + f' and "{CASCODE}"'


def check_chain_request(request: Request) -> None:
    """Refuse (InputError on ``topology`` or ``coupling``) a two-transistor request the
    search does not design."""
    topo = request.topology
    if topo == CASCODE:
        return
    if isinstance(topo, str) or tuple(topo) not in SEARCHED_CHAINS:
        named = f'"{topo}"' if isinstance(topo, str) else "[" + ", ".join(f'"{t}"' for t in topo) + "]"
        raise InputError(f"design searches the chains {_names()} (capacitor-coupled); "
                         f"{named} can be checked with given values by "
                         "`drawerfit analyse`", field="topology")
    if request.coupling not in SEARCHED_COUPLINGS:
        raise InputError("design searches the couplings "
                         + ", ".join(f'"{c}"' for c in SEARCHED_COUPLINGS) + f"; a "
                         f"{request.coupling}-coupled chain with given values can be "
                         "checked by `drawerfit analyse`", field="coupling")


def search_chains(request: Request, snapshot: StockSnapshot, *, top: int = 10,
                  time_limit_s: float | None = None, unlocks: bool = True) -> ChainResult:
    """The best chains composed from the single-stage searches, then the proof (module
    docstring); ``time_limit_s`` None: no limit, the proof runs to its end.  When none
    meets the request and ``unlocks``, what would unlock it (:mod:`.chain_unlocks`,
    within what the time limit leaves)."""
    check_chain_request(request)
    t0 = time.perf_counter()
    result = _search(request, snapshot, top, time_limit_s, t0)
    if unlocks and not result.designs:
        seconds = CHAIN_EXPLAIN_BUDGET_S
        if time_limit_s is not None:
            seconds = min(seconds, max(0.0, time_limit_s - (time.perf_counter() - t0)))
        result.limits = list(result.search.get("limits", []))
        result.unlock, result.unlock_changes, found = explain_chain(
            request, snapshot, result.search, search_chains, result.limits, seconds)
        # the chains the relaxed searches found miss only the target relaxed: nearer
        # misses than most the search itself rejected
        misses = judge_chains(request, snapshot, found) + result.nearest_misses
        result.nearest_misses = sorted(
            {chain_key(d): d for d in reversed(misses)}.values(),
            key=lambda d: (len(d.violations), d.score))[:top]
    return result


def _search(request: Request, snapshot: StockSnapshot, top: int, time_limit_s, t0
            ) -> ChainResult:
    """:func:`search_chains` without the unlocks."""
    if request.topology == CASCODE:
        return _cascodes(request, snapshot, top, t0, time_limit_s)
    kind1, kind2 = request.topology
    stats: dict = {"complete": False, "method": "composed from single-stage searches",
                   "stage_top": STAGE_TOP}
    subs = []

    def budget():
        if time_limit_s is None:
            return None
        return max(0.5, (time_limit_s - (time.perf_counter() - t0)) / 4.0)

    def run(req, top):
        t = time.perf_counter()
        r = search(req, snapshot, top=top, misses=0, time_limit_s=budget())
        subs.append(bool(r.stats.get("complete", True)))
        stats["stage_search_seconds"] = (stats.get("stage_search_seconds", 0.0)
                                         + time.perf_counter() - t)
        stats["stage_searches"] = len(subs)
        return r.designs

    # the first stage's own limits bound the chain's: the follower's gain is below 1 and
    # the chain's input is the first stage's (limits.physical_limits, with an open load,
    # the first stage's most favourable)
    limits = physical_limits(stage_request(request, kind1, load_ohm=None), snapshot)
    if limits:
        stats.update(complete=True, proven=True, proven_infeasible=True, limits=limits,
                     why=[f"{x['reason']} (a follower's gain is below 1, so no {kind1}→"
                          f"{kind2} chain can)" for x in limits],
                     seconds=time.perf_counter() - t0)
        return ChainResult(request, [], [], stats)

    if request.coupling == "direct":
        stats["method"] = ("first stages from single-stage ce searches × followers from "
                           "each resistor row in stock")
        cands = search_direct(request, snapshot, run, stats, STAGE_TOP)
        meeting, missing = confirm_with_retry(request, snapshot, cands, stats, top)
        stats["stage_searches_complete"] = all(subs)
        stats["proven"] = False
        return _ranked(request, snapshot, meeting, missing, stats, top, t0)

    def key(d):
        return tuple(sorted(d.values().items())) + (d.transistor,)

    followers = {key(d): d for d in run(follower_request(request, kind2, request.source_ohm),
                                        FOLLOWER_TOP)}
    # the followers again from the first stages' output impedance (the source they see)
    f_list = list(followers.values())
    sources = [request.source_ohm]
    loads: list[float] = []
    firsts: dict = {}
    for _ in range(2):
        bins = load_bins([d.metrics["zin_ohm"] for d in f_list])
        loads.extend(b[0] for b in bins)
        for load, idx in bins:
            gains = [f_list[i].metrics["gain_db"] for i in idx]
            for req1 in first_stage_requests(request, kind1, load, gains):
                for a in run(req1, STAGE_TOP):
                    firsts.setdefault(key(a), a)
        zouts = [d.metrics["zout_ohm"] for d in firsts.values() if d.metrics.get("zout_ohm")]
        if not zouts or len(sources) > 1:
            break
        src = float(np.median(zouts))
        sources.append(src)
        more = [d for d in run(follower_request(request, kind2, src), FOLLOWER_TOP)
                if key(d) not in followers]
        if not more:
            break
        followers.update({key(d): d for d in more})
        f_list = more
    why = []
    if not followers:
        why.append(f"no {kind2} stage from the drawer meets the chain's targets into its load")
    elif not firsts:
        at = ", ".join(format_si(x, "Ω") for x in sorted(loads))
        why.append(f"no {kind1} stage from the drawer meets the chain's gain less its "
                   f"follower's into the loads searched ({at})")
    if why:
        stats["why"] = why
    stats.update(followers=len(followers), first_stage_loads_ohm=sorted(loads),
                 first_stages=len(firsts), follower_sources_ohm=sources)
    # every first stage with every follower
    cands = [(chain_parts(a, b), (a.transistor, b.transistor))
             for a in firsts.values() for b in followers.values()]
    meeting, missing = confirm_with_retry(request, snapshot, cands, stats, top)
    stats["stage_searches_complete"] = all(subs)
    # the proof: wider stage lists until no chain outside them can take a rank
    allowed = None
    if time_limit_s is not None:
        allowed = min(PROOF_TIME_S, max(0.0, time_limit_s - (time.perf_counter() - t0)))
    meeting, missing, proof = prove_chains(request, snapshot, meeting, missing, top, stats,
                                           allowed)
    stats["proof"] = proof
    everything = proof["every_stage_listed"]          # no chain lies outside the lists
    stats["proven_ranks"] = proof["proven_ranks"]
    stats["complete"] = bool(everything or (len(meeting) >= top
                                             and proof["proven_ranks"] >= top))
    stats["proven"] = bool(proof["proven_ranks"] >= 1 if meeting else everything)
    if meeting:
        stats.pop("why", None)
    return _ranked(request, snapshot, meeting, missing, stats, top, t0)


def _cascodes(request, snapshot, top, t0, time_limit_s=None) -> ChainResult:
    """The cascodes of :mod:`.chain_cascode`, confirmed and ranked as the chains.  The
    lower transistor's limits as a ce stage with an open load bound the cascode's
    (its gain is g_m·(RC‖R_L) with I_C·RC below the supply, its input a divider
    R2‖R3 and a base, as a ce stage's)."""
    stats: dict = {"complete": False, "method": "divider, emitter and collector resistors "
                   "from the drawer, ranked by closed-form estimates, confirmed by the engine"}
    limits = physical_limits(stage_request(request, "ce", load_ohm=None), snapshot)
    if limits:
        stats.update(complete=True, proven=True, proven_infeasible=True, limits=limits,
                     why=[f"{x['reason']} (the cascode's lower transistor is a ce stage, "
                          "so no cascode can)" for x in limits],
                     seconds=time.perf_counter() - t0)
        return ChainResult(request, [], [], stats)
    # the time limit: no transistor pair begun, no group screened or chunk confirmed
    # past it (what was left is in stats: pairs_left, chains_left_by_time)
    deadline = None if time_limit_s is None else t0 + time_limit_s
    cands = search_cascode(request, snapshot, stats, deadline)
    meeting, missing = confirm_with_retry(request, snapshot, cands, stats, top, deadline)
    stats["proven"] = False
    return _ranked(request, snapshot, meeting, missing, stats, top, t0)


def _ranked(request, snapshot, meeting, missing, stats, top, t0) -> ChainResult:
    """The answer: the best ``top`` chains with their swing, ranked, or the misses."""
    designs = with_swing(request, snapshot, meeting[:top])
    for k, d in enumerate(designs, 1):
        d.rank = k
    stats["seconds"] = time.perf_counter() - t0
    return ChainResult(request, designs, [] if designs else missing[:top], stats)

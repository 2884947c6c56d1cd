"""The best-first branch and bound over the levels of the jobs (docs/search.md).

Heaps per level hold nodes with a lower bound of the score of every design below
them; a node is dropped when its bound reaches the ``top``-th best score known."""

from __future__ import annotations

import heapq
import itertools
import math
import time
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from inventory.errors import InputError
from inventory.parts import StockSnapshot, Transistor
from optimiser.dc import operating_point
from optimiser.design import Design
from optimiser.device import device_from_transistor
from optimiser.evaluate import corner_points
from optimiser.options import StockOptions
from optimiser.request import Request
from optimiser.search.bounds import skeleton_bound
from optimiser.search.confirm import (
    CONFIRM_BATCH,
    _cap_free_ok,
    _confirm_group,
    _evaluate,
    _large_signal,
    backlog_mask,
    f_low_prescreen,
    pool_quick_rejects,
    prescreen_active,
    prescreen_backlog,
)
from optimiser.search.job import _Job
from optimiser.search.limits import gain_window
from optimiser.search.miss_pool import MissPool
from optimiser.search.pricing import (
    Pricing,
    node_price,
    score_to_beat,
    skeleton_price,
    skeleton_score_to_beat,
)
from optimiser.search.seeding import _seed_designs
from optimiser.search.skeletons import FORMS, Skeletons, _take_all
from optimiser.search.stock import _ratings_best
from optimiser.search.thd_floor import applies as thd_floor_applies
from optimiser.search.thd_floor import engine_keep, screen_active, screens, thd_keep
from optimiser.search.workers import split_branch_and_bound, worker_count

#: Skeletons per heap entry of the "cands" level (one operating-point and corner
#: solve each): larger batches vectorise better, smaller ones drop more by the
#: score to beat before they are solved.
QUICK_BATCH = 2000
#: Bias nodes (and blocks of pairs' emitter runs) per heap entry: the same trade at
#: the upper levels.
NODE_BLOCK = 8192
#: Aspiration levels of the score (search_designs); the last run is unbounded.
ASPIRATION = (0.5, 1.0, 2.0, 4.0)



def usable_transistors(request: Request, snapshot: StockSnapshot) -> list[Transistor]:
    """The stocked transistors the request may use: the one it names (InputError when
    it is not in stock) or every one, each with at least ``builds`` in stock and a
    V_CEO of at least the supply."""
    if request.transistor and request.transistor != "any":
        t = snapshot.transistor(request.transistor)
        if t is None:
            labels = ", ".join(sorted(x.label for x in snapshot.transistors)) or "none"
            raise InputError(f"transistor {request.transistor!r} is not in stock "
                             f"(stocked: {labels})", field="transistor")
        ts = [t]
    else:
        ts = list(snapshot.transistors)
    return [t for t in ts if t.qty >= request.builds
            and (t.vceo is None or request.supply_v <= t.vceo)]


def search_designs(request: Request, snapshot: StockSnapshot, top: int, stats: dict,
                   progress=None, budget_s: float | None = None, given=None, workers=None,
                   finish: bool = True, pricing: Pricing | None = None,
                   until_one: bool = False, keep_rejects: bool = False):
    """Steps 2–5 as a best-first branch and bound; (designs, :class:`MissPool` of the
    stock designs it evaluated and rejected, over all its rounds and processes).

    ``keep_rejects``: the caller uses that pool whatever the search finds (else only
    when it finds nothing, and once a design is found the THD cuts of a ce search
    may drop skeletons before they are evaluated and pooled: :func:`_thd_cut`).

    With ``until_one`` the budget stops the search only once it holds a design or a
    rejected stock design (the nearest-miss searches: an answer that nothing meets
    the request names a miss whenever the drawer has one); the search then runs in
    one process, so that no other process's share is left unsearched.

    The branch and bound runs first with an aspiration level: every node whose
    bound reaches ``ASPIRATION[0]`` is dropped as if ``top`` designs that good
    were already known.  If ``top`` designs at or below that level are found,
    no dropped node could hold a better one and the ranking is proven; if not,
    the search runs again with the next, higher level (the last is unbounded).
    This only makes the search faster: the designs returned are the same.

    With ``pricing`` (:mod:`optimiser.search.pricing`) the designs are ranked by
    their priced value, only those below its cutoff are returned, and there is no
    aspiration level.
    """
    t_start = time.perf_counter()
    seeds = list(given) if given is not None else _seed_designs(request, snapshot, top, stats,
                                                                search_designs, budget_s)
    opts = StockOptions(snapshot, request.builds, request.allow_combos)
    ts = usable_transistors(request, snapshot)
    cache: dict = {}            # what the jobs share (pairs, emitter options, stock)
    jobs = [_Job(request, opts, t, f, stats, cache) for t in ts for f in FORMS[request.topology]
            if opts.resistor.values.size]
    jobs = [j for j in jobs if j.live]
    found, pool = [], MissPool()
    # with top designs already in hand the score to beat is known: no aspiration
    levels = (math.inf,) if len(seeds) >= top or pricing else ASPIRATION + (math.inf,)
    if workers is None:
        n_values = np.unique([r.value for r in snapshot.resistors]).size
        workers = worker_count(n_values)
    if until_one:
        workers = 1
    for cap in levels:
        left = None if budget_s is None else max(budget_s - (time.perf_counter() - t_start), 0.0)

        def run(part, shared, st, cap=cap, left=left):
            return _branch_and_bound(request, opts, jobs, top, st,
                                     progress if part[0] == 0 else None, left, cap, seeds,
                                     part, shared, pricing, pool, until_one, keep_rejects)

        if workers > 1:
            found = _distinct(split_branch_and_bound(run, workers, stats, pool))
        else:
            found = run((0, 1), None, stats)
        if stats.get("stopped_at_budget") or (len(found) >= top and found[top - 1].score <= cap):
            break
        stats["aspiration_rounds"] = stats.get("aspiration_rounds", 0) + 1
    found = (pricing.rank(found) if pricing else found)[:top]
    if finish:              # (seed searches leave it to the search they seed)
        _large_signal(request, snapshot, found)
    for r, d in enumerate(found, 1):
        d.rank = r
    return found, pool


def _priced_kth(pricing, found, top, sk, kth):
    """The score to beat per skeleton of ``sk``: ``kth``, lowered by what its
    pieces' prices already take of the value to beat (:mod:`.pricing`)."""
    if pricing is None or pricing.pieces is None:
        return kth
    price_lb = skeleton_price(pricing, sk, sk.transistor.label)
    return np.minimum(kth, skeleton_score_to_beat(pricing, found, top, price_lb))


def _node_keep(pricing, found, top, job, P, lb, kth, E=None, cache=None):
    """Mask of the nodes (pairs ``P``, with emitter options ``E`` once fixed) of
    ``job`` whose score bound ``lb`` lies below the score to beat lowered by what
    their pieces' least prices already take of the value to beat
    (:func:`optimiser.search.pricing.node_price`); None without piece prices."""
    if pricing is None or pricing.pieces is None:
        return None
    cache = {} if cache is None else cache
    key = (id(job), "open")
    if key not in cache:        # the values each open role may take, once per job
        cache[key] = {"RC": np.unique(job.rc_vals), "RE": np.unique(job.re_a),
                      "RE_BYP": np.unique(job.byp_a)}
    fixed = {"R1": job.R1[P], "R2": job.R2[P]}
    open_ = dict(cache[key])
    if E is not None:
        fixed.update(RE=job.re_a[E], RE_BYP=job.byp_a[E])
        del open_["RE"], open_["RE_BYP"]
    price = node_price(pricing, job.t.label, fixed, open_)
    return np.asarray(lb) < np.minimum(kth, skeleton_score_to_beat(pricing, found, top, price))


def _distinct(designs: list[Design]) -> list[Design]:
    """Designs of distinct networks, best first (shares of a split search may
    both hold a seed)."""
    out, seen = [], set()
    for d in sorted(designs, key=_rank_key):
        if _design_key(d) not in seen:
            seen.add(_design_key(d))
            out.append(d)
    return out


def _design_key(d: Design) -> tuple:
    """A design's resistor/transistor network (its score does not depend on the rest)."""
    return (d.transistor, d.form, tuple(sorted((r, p.value) for r, p in d.parts.items()
                                               if not r.startswith("C"))))


def _rank_key(d: Design) -> tuple:
    """Order of the ranking: score, then the network (so that ties rank the same
    however the search was split)."""
    return (d.score, _design_key(d))


@dataclass(frozen=True)
class SearchStatus:
    """How far a running search has got: what the ``progress`` callback receives.

    In a search split over processes the figures are those of the process that
    reports, with the best score and the open bound of all of them: the count
    of proven ranks is then a lower bound of the whole search's.
    """

    found: int                  # designs meeting the request found so far
    top: int                    # how many ranks are asked for
    best_score: float | None    # the best score found so far (None: none yet)
    proven_ranks: int           # leading ranks no unexamined design can beat
    nodes_left: int             # entries still open in the heaps
    open_bound: float           # the least score any unexamined design could have

    def text(self) -> str:
        """The status as one line."""
        best = "none yet" if self.best_score is None else f"{self.best_score:.4g}"
        bound = "none" if not math.isfinite(self.open_bound) else f"{self.open_bound:.4g}"
        return (f"best score {best} · {self.proven_ranks} of {self.top} ranks proven · "
                f"{self.nodes_left} nodes left (least bound {bound})")


def _status(found: list[Design], top: int, low: float, cap: float, heaps: dict,
            shared) -> SearchStatus:
    bound = min(low, cap)
    best = found[0].score if found else math.inf
    if shared is not None:
        bound = min(bound, min(shared.low))
        best = min(best, min(shared.best))
    proven = 0
    for d in found[:top]:
        if d.score is None or d.score > bound:
            break
        proven += 1
    return SearchStatus(found=len(found), top=top,
                        best_score=best if math.isfinite(best) else None,
                        proven_ranks=proven, nodes_left=sum(len(h) for h in heaps.values()),
                        open_bound=bound)


#: The levels of the tree, top down; each has a heap of :class:`Entry`.
LEVELS = ("pairs", "blocks", "nodes", "cands", "skel")


class PairBlock(NamedTuple):
    """A block of (R1, R2) pairs shared by the forms of one transistor."""

    jobs: tuple[int, ...]       # indices of the jobs (forms) it expands into
    pairs: np.ndarray           # pair indices
    block: int                  # its number (the same in every process of a split search)


class NodeBlock(NamedTuple):
    """Pairs of one job, each with the run of its DC emitter totals still open."""

    job: int
    pairs: np.ndarray
    first: np.ndarray           # index of the run's first total
    last: np.ndarray            # ... and of its last (inclusive)


class BiasNodes(NamedTuple):
    """Bias nodes of one job: pair × DC emitter total, with the collector current
    bracket and the drift bound of each."""

    job: int
    pairs: np.ndarray
    totals: np.ndarray          # index of each node's DC emitter total
    ic_bracket: np.ndarray      # shape (2, n): bottom and top of the current bracket
    drift_lb: np.ndarray


class SkeletonPick(NamedTuple):
    """One skeleton of a batch with the engine's capacitor-free figures of it."""

    skeletons: Skeletons
    index: int
    row: dict


class Entry(NamedTuple):
    """A heap entry: the lower bound of every design below it first, then a
    sequence number (ties never compare the payloads)."""

    lb: float
    seq: int
    level: str
    payload: PairBlock | NodeBlock | BiasNodes | Skeletons | SkeletonPick


def _thd_cut(request, pricing, until_one: bool, keep_rejects: bool) -> bool:
    """Whether the THD cuts of a ce search (:func:`optimiser.search.thd_floor.screens`)
    may be taken once a design is found: the designs they drop fail the THD target, so
    the ranking is the same, but they are then not offered to the pool of rejected
    designs — which the answer reads only when nothing meets the request, unless the
    caller keeps it (``keep_rejects``, ``until_one``), a price ranks the designs
    (``pricing``: its cutoff may drop every design found) or the yield may drop them
    all (``min_yield_pct``)."""
    return (screens(request) and not until_one and not keep_rejects and pricing is None
            and request.min_yield_pct is None)


def _thd_backlog(request, picks, stats) -> np.ndarray:
    """Mask of the queued skeletons ``picks`` ((Skeletons, index) pairs) to keep by the
    engine's THD (:func:`optimiser.search.thd_floor.engine_keep`), one call per set."""

    def keep_of(part):
        b = part.batch()
        model = device_from_transistor(part.transistor)
        op = operating_point(b.topology, request.supply_v, b, model)
        return engine_keep(request, b, model, op, stats)

    return backlog_mask(picks, keep_of)


def _branch_and_bound(request, opts, jobs, top, stats, progress, budget_s, cap, seeds=(),
                      part=(0, 1), shared=None, pricing=None, pool: MissPool | None = None,
                      until_one: bool = False, keep_rejects: bool = False):
    """One run of the branch and bound, dropping nodes whose bound reaches ``cap``.

    ``seeds`` are designs of this drawer already known (they count towards the
    ``top`` to beat and are not reported twice).  Returns every design found
    (sorted by score); the stock designs it evaluates and rejects go to ``pool``
    (with ``until_one`` the budget stops it only once ``pool`` or the designs
    found hold one).

    ``part`` = (k, n): this is process k of a search split over n
    (:mod:`optimiser.search.workers`); ``shared`` (a :class:`optimiser.search.workers.Shared`)
    then says which blocks of (R1, R2) pairs another process has taken — this
    one searches only the blocks it takes itself — and holds each process's
    ``top``-th best score, slot k this one's: each is the score of ``top`` real
    designs, so any of them is a score to beat.
    """

    levels = LEVELS
    heaps: dict[str, list[Entry]] = {k: [] for k in levels}

    def push(item: Entry):
        heapq.heappush(heaps[item.level], item)

    def smallest() -> float:
        return min((h[0].lb for h in heaps.values() if h), default=math.inf)

    seq = itertools.count()
    k_part = part[0]
    block = itertools.count()       # (the same numbers in every process: same jobs)
    # the forms of one transistor share their pairs and the DC bounds of their first
    # level (_Job.span_dc_of): one heap entry per transistor and block of pairs
    groups: dict[str, list[int]] = {}
    for j, job in enumerate(jobs):
        groups.setdefault(job.t.label, []).append(j)
    for js in groups.values():
        for lb, p in jobs[js[0]].pair_blocks():
            push(Entry(lb, next(seq), "pairs", PairBlock(tuple(js), p, next(block))))
    found: list[Design] = sorted(seeds, key=_rank_key)
    known = {_design_key(d) for d in found}
    pool = MissPool() if pool is None else pool
    win = gain_window(request)
    stats.setdefault("drift_checked", 0)
    stats.setdefault("quick_evaluations", 0)
    steps = 0
    backlog_screened = False
    thd_direct = thd_floor_applies(request)
    thd_cut = _thd_cut(request, pricing, until_one, keep_rejects)
    thd_backlog = False
    price_cache: dict = {}      # per job, the values its open roles may take
    t_start = time.perf_counter()
    while any(heaps.values()):
        if budget_s is not None and time.perf_counter() - t_start > budget_s \
                and not (until_one and not found and not len(pool)):
            # stopped by the time limit: every design left unexamined scores at
            # least the smallest bound still in the heaps
            stats["stopped_at_budget"] = True
            stats["open_bound"] = min(smallest(), cap)
            break
        kth = min(found[top - 1].score if len(found) >= top else math.inf, cap)
        if pricing is not None:     # the score to beat follows from the priced values
            kth = min(score_to_beat(pricing, found, top), cap)
        if shared is not None:
            shared.kth[k_part] = kth
            kth = min(kth, min(shared.kth))
        low = smallest()
        if shared is not None:
            shared.low[k_part] = min(low, cap)
            if found:
                shared.best[k_part] = found[0].score
        if low >= kth:
            break
        if pricing is not None and pricing.quick and len(pricing.rank(found)) >= top:
            stats["stopped_quick"] = True       # enough below the cutoff; not ranked
            break
        steps += 1
        if progress and steps % 5 == 0:
            progress(_status(found, top, low, cap, heaps, shared))
        if len(found) < top:
            # dive: the deepest level first, so that a bound to beat is known early
            level = next(k for k in reversed(levels) if heaps[k])
        else:
            # best first: the level holding the smallest bound — but in a split
            # search a new block of pairs only once this process's own work is done,
            # so that blocks are taken as the processes free up (they balance)
            open_ = [k for k in levels if heaps[k] and not (shared is not None and k == "pairs")]
            level = min(open_ or ["pairs"], key=lambda k: heaps[k][0].lb)
        lb, _, kind, payload = heapq.heappop(heaps[level])
        if lb >= kth:
            continue
        if kind == "pairs":
            js, p, blk = payload.jobs, payload.pairs, payload.block
            if shared is not None and not shared.claim(blk, k_part):
                continue                # another process searches this block
            if pricing is not None and pricing.pieces is not None:
                # a pair stays while some form of it may hold a design worth keeping
                alive = np.zeros(p.size, dtype=bool)
                for j in js:
                    alive |= _node_keep(pricing, found, top, jobs[j], p, jobs[j].plb[p], kth,
                                        cache=price_cache)
                stats["pruned"]["price_pairs"] = (stats["pruned"].get("price_pairs", 0)
                                                  + int((~alive).sum()))
                p = p[alive]
                if p.size == 0:
                    continue
            dc = None
            if len(js) > 1 and len(FORMS[request.topology]) > 1:
                dc = jobs[js[0]].span_dc_of(p, kth, [jobs[j] for j in js])
            for j in js:
                P, a, b, blb = jobs[j].expand_pairs(p, kth, dc)
                keep = _node_keep(pricing, found, top, jobs[j], P, blb, kth, cache=price_cache)
                if keep is not None:
                    P, a, b, blb = P[keep], a[keep], b[keep], blb[keep]
                for s0 in range(0, P.size, NODE_BLOCK):
                    sl = slice(s0, s0 + NODE_BLOCK)
                    push(Entry(float(blb[s0]), next(seq), "blocks",
                               NodeBlock(j, P[sl], a[sl], b[sl])))
        elif kind == "blocks":
            j, P, a, b = payload.job, payload.pairs, payload.first, payload.last
            keep = _node_keep(pricing, found, top, jobs[j], P, lb, kth, cache=price_cache)
            if keep is not None:
                P, a, b = P[keep], a[keep], b[keep]
                if P.size == 0:
                    continue
            P, E, ic_lo, d_lb, nlb = jobs[j].expand_blocks(P, a, b, kth)
            keep = _node_keep(pricing, found, top, jobs[j], P, nlb, kth, E, cache=price_cache)
            if keep is not None:
                stats["pruned"]["price_nodes"] = (stats["pruned"].get("price_nodes", 0)
                                                  + int((~keep).sum()))
                P, E, ic_lo, d_lb, nlb = P[keep], E[keep], ic_lo[:, keep], d_lb[keep], nlb[keep]
            for s0 in range(0, P.size, NODE_BLOCK):
                sl = slice(s0, s0 + NODE_BLOCK)
                push(Entry(float(nlb[s0]), next(seq), "nodes",
                           BiasNodes(j, P[sl], E[sl], ic_lo[:, sl], d_lb[sl])))
        elif kind == "nodes":
            j, P, E, ic_lo, d_lb = (payload.job, payload.pairs, payload.totals, payload.ic_bracket,
                                    payload.drift_lb)
            keep = _node_keep(pricing, found, top, jobs[j], P, lb, kth, E, cache=price_cache)
            if keep is not None:
                P, E, ic_lo, d_lb = P[keep], E[keep], ic_lo[:, keep], d_lb[keep]
                if P.size == 0:
                    continue
            jobs[j].thd_cut_on = thd_cut and bool(found)
            sk = jobs[j].expand_nodes(P, E, ic_lo, d_lb, kth)
            if sk is not None:
                for s in range(0, sk.n, QUICK_BATCH):
                    sub = _take_all(sk, np.arange(s, min(s + QUICK_BATCH, sk.n)))
                    push(Entry(float(sub.lb[0]), next(seq), "cands", sub))
        elif kind == "cands":
            sk = payload
            keep = sk.lb < _priced_kth(pricing, found, top, sk, kth)
            if not keep.all():
                sk = _take_all(sk, np.flatnonzero(keep))
            if sk.n == 0:
                continue
            b = sk.batch()
            model = device_from_transistor(sk.transistor)
            op = operating_point(b.topology, request.supply_v, b, model)
            cop, _, _ = corner_points(request, b, model)
            with np.errstate(divide="ignore", invalid="ignore"):
                drift = 100.0 * np.max(np.abs(cop.ic - op.ic[:, None]), axis=1) / op.ic
            stats["drift_checked"] += sk.n
            ok = np.isfinite(drift)
            if request.ic_drift_max_pct is not None:
                ok &= drift <= request.ic_drift_max_pct
            lb15 = skeleton_bound(request, sk.gdb, drift, sk.hd2, sk.supply, op.vce, sk.stock_lb)
            live = np.flatnonzero(ok & (lb15 < _priced_kth(pricing, found, top, sk, kth)))
            live = live[f_low_prescreen(request, opts, sk.take(live), stats)]
            if thd_direct and live.size:
                live = live[thd_keep(request, sk.take(live), b.take(live), model,
                                     op.take(live), stats)]
            elif thd_cut and found and live.size and screen_active(request, stats):
                live = live[engine_keep(request, b.take(live), model, op.take(live), stats)]
            for i in live:
                push(Entry(float(lb15[i]), next(seq), "skel",
                           SkeletonPick(sk, int(i), {"drift_pct": float(drift[i]),
                                                     "gain_inf_db": float(sk.gdb[i]),
                                                     "hd2_pct": float(sk.hd2[i]),
                                                     "supply_a": float(sk.supply[i]),
                                                     "vce_v": float(op.vce[i])})))
        else:
            batch = [(lb, payload)]
            while heaps["skel"] and len(batch) < CONFIRM_BATCH and heaps["skel"][0].lb < kth:
                e = heapq.heappop(heaps["skel"])
                batch.append((e.lb, e.payload))
            groups: dict[int, list] = {}
            for lbx, (sk, i, row) in batch:
                groups.setdefault(id(sk), []).append((lbx, sk, i, row))
            for entries in groups.values():
                sk = entries[0][1]
                li = np.array([e[2] for e in entries])
                if pricing is not None and pricing.pieces is not None:
                    # the value to beat may have fallen since the skeleton was queued
                    kv = _priced_kth(pricing, found, top, sk.take(li), kth)
                    keep = np.array([e[0] for e in entries]) < kv
                    if not keep.any():
                        continue
                    entries = [e for e, k in zip(entries, keep, strict=True) if k]
                    li = li[keep]
                part = sk.take(li)
                ev = _evaluate(request, part.batch(), sk.transistor, _ratings_best(part, opts),
                               band_edges=False, large_signal=False)
                stats["quick_evaluations"] += part.n
                ok = _cap_free_ok(ev)
                if win is not None:
                    ok &= np.asarray(ev.metrics["gain"]) >= win[0]
                good = []
                for jj, e in enumerate(entries):
                    if ok[jj]:
                        row = dict(e[3])
                        row.update({k: float(v[jj]) for k, v in ev.metrics.items()
                                    if k not in row})
                        good.append((e[0], None, None, e[2], row))
                bad = np.flatnonzero(~ok)
                if bad.size:
                    pool_quick_rejects(request, opts, sk, li[bad], [entries[k][3] for k in bad],
                                       ev.take(bad), pool)
                for d in _confirm_group(request, opts, sk, good, stats, pool):
                    if _design_key(d) not in known:
                        known.add(_design_key(d))
                        found.append(d)
            if pricing is not None:
                # only the top values count (the value to beat, the answer): the
                # rest would only be sorted again and again
                found[:] = pricing.rank(found)[:top]
            found.sort(key=_rank_key)
            if thd_cut and found and not thd_backlog and screen_active(request, stats):
                # the THD check took effect: the skeletons queued before it, at once
                thd_backlog = True
                keep = _thd_backlog(request, [(e.payload.skeletons, e.payload.index)
                                              for e in heaps["skel"]], stats)
                heaps["skel"] = [e for e, k in zip(heaps["skel"], keep, strict=True) if k]
                heapq.heapify(heaps["skel"])
            if not backlog_screened and prescreen_active(request, stats):
                # the f_low screen took effect: the skeletons queued before it, at once
                backlog_screened = True
                keep = prescreen_backlog(request, opts, [(e.payload.skeletons, e.payload.index)
                                                         for e in heaps["skel"]], stats)
                heaps["skel"] = [e for e, k in zip(heaps["skel"], keep, strict=True) if k]
                heapq.heapify(heaps["skel"])
    if shared is not None:      # what this process leaves open, for the others' status
        shared.low[k_part] = min(smallest(), cap)
    stats["heap_steps"] = stats.get("heap_steps", 0) + steps
    found.sort(key=_rank_key)
    return found

"""The branch and bound split over the machine's cores.

Each of ``n`` processes runs the branch and bound over every block of
(R1, R2) pairs, best bound first, and takes a block only if no other process
has taken it yet (:meth:`Shared.claim`, under a lock): so each block is
searched exactly once, and a process that runs out of promising work takes
the next block instead of idling while the other finishes a fixed share.
Each process keeps its ``top``-th best score in a shared array; every process
prunes against the smallest of them.  That is exact: each entry is the score
of ``top`` real designs of the drawer, so a node whose bound reaches it holds
none of the ``top`` best, and the best ``top`` of the shares together are the
best of the drawer.

Processes are started by ``fork`` (the search's arrays are shared, not
copied), on Linux only; elsewhere, or when the drawer is small, the search
runs in one process.  ``DRAWERFIT_WORKERS`` caps the number of
processes (1 turns the split off).
"""

from __future__ import annotations

import math
import multiprocessing
import os
import sys
import traceback

from inventory.errors import InputError

__all__ = ["worker_count", "split_branch_and_bound", "merge_stats"]

#: Most processes the split uses unless ``DRAWERFIT_WORKERS`` says otherwise.
MAX_WORKERS = 2
#: Blocks of work :class:`Shared` keeps claims for (one byte each); blocks beyond
#: are dealt out in turn (block number modulo the number of processes).
CLAIM_SLOTS = 1 << 16
#: Drawers with more distinct resistor values than this are searched on all cores;
#: below it starting processes costs more than it saves.
PARALLEL_ABOVE = 160


class Shared:
    """What the processes of one split search share: ``kth``, each one's
    ``top``-th best score so far (inf until it has ``top`` designs), which
    blocks of work are taken, and for the status line each one's best score
    (``best``, inf until it has one) and smallest open bound (``low``, 0 until
    it reports one: nothing counts as proven before)."""

    def __init__(self, ctx, n: int, slots: int = CLAIM_SLOTS):
        self.n = n
        self.kth = ctx.RawArray("d", [math.inf] * n)
        self.best = ctx.RawArray("d", [math.inf] * n)
        self.low = ctx.RawArray("d", [0.0] * n)
        self._claims = ctx.RawArray("b", slots)
        self._lock = ctx.Lock()

    def claim(self, block: int, k: int) -> bool:
        """Whether process ``k`` takes ``block`` (True for exactly one process)."""
        if block >= len(self._claims):
            return block % self.n == k
        with self._lock:
            if self._claims[block]:
                return False
            self._claims[block] = 1
            return True


def worker_count(n_values: int, threshold: int | None = None) -> int:
    """How many processes to search a drawer of ``n_values`` resistor values with.

    One below ``threshold`` values (default :data:`PARALLEL_ABOVE`, read at the
    call; starting processes costs more than it saves on a small drawer), else
    the usable cores, at most :data:`MAX_WORKERS` or ``DRAWERFIT_WORKERS``.
    """
    if threshold is None:
        threshold = PARALLEL_ABOVE
    cap = _env_cap()
    # fork only on Linux (macOS system libraries are not safe to fork; Windows has none)
    if n_values <= threshold or not sys.platform.startswith("linux") \
            or "fork" not in multiprocessing.get_all_start_methods():
        return 1
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:          # not on Linux
        cores = os.cpu_count() or 1
    return max(1, min(cores, cap))


def _env_cap() -> int:
    """``DRAWERFIT_WORKERS`` (a whole number ≥ 1), else :data:`MAX_WORKERS`."""
    env = os.environ.get("DRAWERFIT_WORKERS", "").strip()
    if not env:
        return MAX_WORKERS
    try:
        cap = int(env)
    except ValueError:
        cap = 0
    if cap < 1:
        raise InputError(f"{env!r} is not a number of processes (a whole number, 1 or more)",
                         field="DRAWERFIT_WORKERS")
    return cap


def merge_stats(into: dict, other: dict) -> None:
    """Add the counters of ``other`` to ``into`` (in place): numbers are summed,
    ``pruned`` per key, ``stopped_at_budget`` or-ed, ``open_bound`` the least."""
    for k, v in other.items():
        if k == "pruned":
            pr = into.setdefault("pruned", {})
            for kk, vv in v.items():
                pr[kk] = pr.get(kk, 0) + vv
        elif k == "stopped_at_budget":
            into[k] = bool(into.get(k)) or bool(v)
        elif k == "open_bound":
            into[k] = min(into.get(k, math.inf), v)
        elif isinstance(v, (int, float)) and not isinstance(v, bool):
            into[k] = into.get(k, 0) + v
        else:
            into.setdefault(k, v)


def split_branch_and_bound(run, n: int, stats: dict, pool):
    """Run ``run(part, shared, stats)`` on ``n`` processes; the designs found.

    ``run`` is the branch and bound of one process, ``part`` = (k, n), ``shared``
    a :class:`Shared` (or None: the whole search in one process); process 0
    runs here (it drives the progress display), the others in forked children
    that send back their designs, counters and the rejected stock designs of
    their copy of ``pool`` (a :class:`optimiser.search.miss_pool.MissPool`,
    merged into it here).  If a child dies, the blocks it took are not known
    here, so the whole search is run again in this process: a lost process costs
    time, never a design.
    """
    ctx = multiprocessing.get_context("fork")
    shared = Shared(ctx, n)
    children = []
    for k in range(1, n):
        recv, send = ctx.Pipe(duplex=False)
        p = ctx.Process(target=_child, args=(run, (k, n), shared, send, pool), daemon=True)
        p.start()
        send.close()
        children.append((k, p, recv))
    found = list(run((0, n), shared, stats))
    for k, p, recv in children:
        try:
            got = recv.recv()
        except (EOFError, OSError):
            got = None
        p.join()
        if isinstance(got, tuple) and got[0] == "ok":
            _, designs, sub, rejected = got
            pool.merge(rejected)
        elif isinstance(got, tuple) and got[0] == "error":
            raise RuntimeError(f"search share {k} of {n} failed:\n{got[1]}")
        else:                       # the child died: search everything here
            sub = {"pruned": {}}
            designs = run((0, 1), None, sub)
        found.extend(designs)
        merge_stats(stats, sub)
    stats["workers"] = n
    return found


def _child(run, part, shared, conn, pool) -> None:
    try:
        sub: dict = {"pruned": {}}
        designs = run(part, shared, sub)
        conn.send(("ok", designs, sub, pool.items()))
    except BaseException:               # noqa: BLE001 (reported to the parent)
        conn.send(("error", traceback.format_exc()))
    finally:
        conn.close()

"""The split of the branch and bound over processes (optimiser/search/workers.py)."""

from __future__ import annotations

import math
import os
import sys

import pytest

from inventory.errors import InputError
from optimiser.design import Design, RolePick
from optimiser.search.miss_pool import MissPool
from optimiser.search.workers import merge_stats, split_branch_and_bound, worker_count


def _fake_run(pool, fail_in_child=None):
    """A stand-in for one share of the branch and bound: its 'designs' are the share
    numbers, its counters one step each, and it rejects one stock design of its own
    (RC = its share number) into ``pool``; ``fail_in_child`` makes share 1 raise or
    die when it runs in a forked child."""
    parent = os.getpid()

    def run(part, shared, stats):
        k, n = part
        if os.getpid() != parent and fail_in_child == "raise":
            raise ValueError("share failed on purpose")
        if os.getpid() != parent and fail_in_child == "die":
            os._exit(3)
        if shared is not None:
            shared.kth[k] = float(k)
        stats["heap_steps"] = stats.get("heap_steps", 0) + 1
        stats.setdefault("pruned", {})["bias"] = stats.get("pruned", {}).get("bias", 0) + 10
        pool.add((1, float(k)), Design("ce", "GP-N1", {"RC": RolePick("RC", float(k), "x")},
                                       {}, False))
        return [f"share {k} of {n}"]

    return run


def test_every_process_runs_once_and_the_counters_add_up():
    stats = {"pruned": {}}
    pool = MissPool()
    found = split_branch_and_bound(_fake_run(pool), 3, stats, pool)
    assert sorted(found) == ["share 0 of 3", "share 1 of 3", "share 2 of 3"]
    # every share's rejected design, nearest first
    assert [d.parts["RC"].value for d in pool.designs()] == [0.0, 1.0, 2.0]
    assert stats["heap_steps"] == 3 and stats["pruned"]["bias"] == 30
    assert stats["workers"] == 3


def test_a_process_that_dies_has_the_whole_search_run_again_here():
    # which blocks it had taken is not known here, so everything is searched again
    # in one process (a lost process costs time, never a design)
    stats = {"pruned": {}}
    pool = MissPool()
    found = split_branch_and_bound(_fake_run(pool, "die"), 2, stats, pool)
    assert sorted(found) == ["share 0 of 1", "share 0 of 2"]
    assert stats["heap_steps"] == 2


def test_a_share_that_raises_is_reported_with_its_traceback():
    with pytest.raises(RuntimeError, match="share failed on purpose"):
        pool = MissPool()
        split_branch_and_bound(_fake_run(pool, "raise"), 2, {"pruned": {}}, pool)


def test_merge_stats_sums_ors_and_takes_the_least_open_bound():
    a = {"pruned": {"bias": 1}, "heap_steps": 2, "open_bound": 0.5, "stopped_at_budget": False}
    merge_stats(a, {"pruned": {"bias": 2, "dc": 1}, "heap_steps": 3, "open_bound": 0.4,
                    "stopped_at_budget": True, "note": "x"})
    assert a == {"pruned": {"bias": 3, "dc": 1}, "heap_steps": 5, "open_bound": 0.4,
                 "stopped_at_budget": True, "note": "x"}
    b: dict = {}
    merge_stats(b, {"open_bound": math.inf})
    assert b["open_bound"] == math.inf


def test_worker_count_follows_the_drawer_and_the_environment(monkeypatch):
    monkeypatch.delenv("DRAWERFIT_WORKERS", raising=False)
    assert worker_count(50, 160) == 1                  # small drawer: one process
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    linux = sys.platform.startswith("linux")        # processes are forked on Linux only
    assert worker_count(481, 160) == (min(2, cores) if linux else 1)
    monkeypatch.setenv("DRAWERFIT_WORKERS", "1")
    assert worker_count(481, 160) == 1
    for bad in ("not a number", "0", "-2", "1.5"):
        monkeypatch.setenv("DRAWERFIT_WORKERS", bad)
        with pytest.raises(InputError, match="DRAWERFIT_WORKERS"):
            worker_count(50, 160)                   # said even where one process would do


def test_each_block_is_taken_by_exactly_one_process():
    import multiprocessing

    from optimiser.search.workers import Shared

    ctx = multiprocessing.get_context("fork")
    shared = Shared(ctx, 2, slots=64)
    taken = ctx.RawArray("i", 200)

    def grab(k):
        for b in range(200):
            if shared.claim(b, k):
                taken[b] += 1

    p = ctx.Process(target=grab, args=(1,))
    p.start()
    grab(0)
    p.join()
    assert list(taken) == [1] * 200          # claimed slots and dealt-out ones alike

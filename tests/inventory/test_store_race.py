"""Real processes racing for the last pieces of a value.

Workers are separate OS processes (multiprocessing, spawn start method), each
with its own store connection, released together at a barrier for every round.
Two races run in the same processes, on each database (a local SQLite file and
the loopback PostgreSQL test server):

* build race: ROUNDS rounds; in each, every worker commits a build needing both
  of the two pieces of that round's item.  Exactly one may win.
* adjust race: all workers take one piece at a time from one item of
  ADJUST_STOCK pieces until told it is short.  Together they take exactly
  ADJUST_STOCK, never more.
"""

from __future__ import annotations

import multiprocessing as mp
import os

from inventory.parts import Resistor
from inventory.store import open_store

#: Rounds of the build race per database; DRAWERFIT_RACE_ROUNDS raises it for a long hunt.
ROUNDS = int(os.environ.get("DRAWERFIT_RACE_ROUNDS", "10"))
WORKERS = 3        # processes racing
ADJUST_STOCK = 20  # pieces the adjust race takes one by one


def _worker(url: str, build_items: list[int], adjust_item: int, barrier, results) -> None:
    from inventory.errors import StockShortage

    store = open_store(url)
    try:
        for r, item_id in enumerate(build_items):
            barrier.wait(timeout=120)
            try:
                store.commit_builds([{"request": f"race-{r}", "copies": 1, "design": {},
                                      "pieces": {item_id: 2}}])
                results.put(("build", r, "ok"))
            except StockShortage:
                results.put(("build", r, "short"))
        barrier.wait(timeout=120)
        taken = 0
        for _ in range(ADJUST_STOCK + 5):
            try:
                store.adjust(adjust_item, -1, "race")
                taken += 1
            except StockShortage:
                break
        results.put(("adjust", taken, ""))
    finally:
        store.close()


def test_racing_processes_never_overdraw(store_url):
    store = open_store(store_url)
    ids = [store.add_item(Resistor(value=100.0 * (r + 1), qty=2, location=f"R{r}"))
           for r in range(ROUNDS)]
    last = store.add_item(Resistor(value=4700.0, qty=ADJUST_STOCK, location="X"))
    batches_before = len(store.history())
    store.close()

    ctx = mp.get_context("spawn")
    barrier, results = ctx.Barrier(WORKERS), ctx.Queue()
    procs = [ctx.Process(target=_worker, args=(store_url, ids, last, barrier, results))
             for _ in range(WORKERS)]
    for p in procs:
        p.start()
    got = [results.get(timeout=300) for _ in range(ROUNDS * WORKERS + WORKERS)]
    for p in procs:
        p.join(60)
        if p.is_alive():  # pragma: no cover - a hang is a failure
            p.kill()
    assert [p.exitcode for p in procs] == [0] * WORKERS

    outcomes: dict[int, list[str]] = {}
    for kind, r, what in got:
        if kind == "build":
            outcomes.setdefault(r, []).append(what)
    assert len(outcomes) == ROUNDS
    for r, o in outcomes.items():
        assert sorted(o) == ["ok"] + ["short"] * (WORKERS - 1), (r, o)
    assert sum(n for kind, n, _ in got if kind == "adjust") == ADJUST_STOCK

    store = open_store(store_url)
    try:
        assert all(p.qty == 0 for p in store.parts())
        assert len(store.list_builds()) == ROUNDS
        assert len(store.history()) == batches_before + ROUNDS + ADJUST_STOCK
        assert store.check() == []
    finally:
        store.close()

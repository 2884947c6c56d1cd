"""Kill safety: an import or a build commit killed with SIGKILL part-way leaves
the store exactly as it was.

The child is a real process (forked from the test) that opens its own store and
runs the operation; an SQLAlchemy event listener in the child tells the parent
when the transaction has written its k-th row (or is about to commit) and then
stalls, and the parent kills it with SIGKILL at that moment.  Afterwards the
store's full contents (every table) must equal what they were before, the
integrity check must pass, and the store must take new changes.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import signal
import sys
import time

import pytest
from sqlalchemy import event

from inventory.store import open_store

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs fork and SIGKILL")

CSV_HEADER = "kind,value,qty,location\n"

#: (operation, when to kill): the k-th INSERT/UPDATE of the transaction, or "commit"
#: (just before COMMIT is sent).
KILL_POINTS = [("import", 1), ("import", 3), ("import", "commit"),
               ("build", 2), ("build", "commit")]


def _child(url: str, operation: str, when, csv_path: str, pieces: dict, ready, done) -> None:
    store = open_store(url)
    writes = 0

    def stall():
        ready.set()
        time.sleep(600)

    @event.listens_for(store.engine, "after_cursor_execute")
    def _after(conn, cursor, statement, params, context, executemany):
        nonlocal writes
        if statement.lstrip().upper().startswith(("INSERT", "UPDATE")):
            writes += 1
            if writes == when:
                stall()

    @event.listens_for(store.engine, "commit")
    def _commit(conn):
        if when == "commit":
            stall()

    if operation == "import":
        store.import_csv(csv_path)
    else:
        store.commit_builds([{"request": "killed.toml", "copies": 1, "design": {"x": 1},
                              "pieces": pieces}])
    done.set()    # not reached when the kill lands
    os._exit(3)


@pytest.mark.parametrize("operation, when", KILL_POINTS)
def test_sigkill_part_way_leaves_the_store_as_before(store_url, tmp_path, operation, when):
    store = open_store(store_url)
    seed = tmp_path / "seed.csv"
    seed.write_text(CSV_HEADER + "".join(f"resistor,{v}k,10,A{v}\n" for v in range(1, 21)))
    store.import_csv(seed)
    ids = [p.id for p in store.parts()]
    big = tmp_path / "big.csv"
    # existing items gain pieces, new ones are created: both kinds of write happen
    big.write_text(CSV_HEADER + "".join(f"resistor,{v}k,5,A{v}\n" for v in range(1, 201)))
    before = store.dump()
    store.close()

    ctx = mp.get_context("fork")
    ready, done = ctx.Event(), ctx.Event()
    proc = ctx.Process(target=_child, args=(store_url, operation, when, str(big),
                                            {i: 3 for i in ids[:5]}, ready, done))
    proc.start()
    try:
        for _ in range(1200):
            if ready.wait(0.1) or done.is_set() or not proc.is_alive():
                break
        assert ready.is_set(), "the child finished without reaching the kill point"
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.join(30)
    assert proc.exitcode == -signal.SIGKILL

    store = open_store(store_url)
    try:
        assert store.dump() == before
        assert store.check() == []
        store.adjust(ids[0], -1, "after the kill")      # the store is not left locked
        assert store.item(ids[0]).qty == 9
    finally:
        store.close()

"""One bench's bookkeeping from first import to last undo, through the command line, on
SQLite and on PostgreSQL.

A drawer is imported; a plan is committed with purchases and undone; planned and
committed again; one order is cancelled; the other arrives in two parcels; the
cancelled one is re-opened and arrives with more than was ordered; a receipt and the
build are undone; at the end every batch is undone and `stock export` is what it was.
After every step each quantity, each awaited order (what has arrived of it) and the
ledger are checked: every listed quantity equals the sum of its movements in `stock
history`, and `db check` passes.

The expected numbers are counted by hand from the demo drawer and the stand-in search
of test_cli_plan.py (the planner's search is not under test here): twenty preamps on
design A take 10k, 4k7, 10u and GP-N1, one of each per copy.  The drawer holds
4k7 10 + 8 = 18 and 10u 12 + 2 = 14, so the plan buys a pack of ten of each: the
builds keep 2 of the 4k7 and 6 of the 10u, and 8 and 4 pieces go to the drawer.
"""

from __future__ import annotations

import csv
import json
from collections import defaultdict
from importlib import resources
from types import SimpleNamespace

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from tests.drawerfit.test_cli_plan import FIXED, PREAMP, TWENTY_PREAMPS_E24, fake_search

COPIES = 20
#: Bought per value (one pack of ten), kept by the builds, left for the drawer.
BOUGHT = {"4k7": (10, 2, 8), "10u": (10, 6, 4)}


@pytest.fixture
def bench(store_url, tmp_path, monkeypatch):
    monkeypatch.setattr("optimiser.search.search", fake_search)
    runner = CliRunner()

    def run(*args, ok=True):
        r = runner.invoke(cli, ["--db", store_url, *args])
        if ok:
            assert r.exit_code == 0, (args, r.output)
        return r

    def path(name):
        return str(tmp_path / name)

    return SimpleNamespace(run=run, path=path, tmp=tmp_path)


def _rows(bench):
    return {row["id"]: row for row in json.loads(bench.run("stock", "list", "--json").stdout)}


def _stock(bench):
    return {i: row["qty"] for i, row in _rows(bench).items()}


def _awaited(bench):
    """Awaited orders as (value, qty, used, arrived, due)."""
    return sorted((o["kind"] == "resistor" and "4k7" or "10u", o["qty"], o["used"],
                   o["arrived"], o["due"])
                  for o in json.loads(bench.run("stock", "orders", "--json").stdout))


def _order_ids(bench):
    return {("4k7" if o["kind"] == "resistor" else "10u"): o["id"]
            for o in json.loads(bench.run("stock", "orders", "--json").stdout)}


def _export(bench, name):
    bench.run("stock", "export", bench.path(name))
    with open(bench.path(name), "rb") as f:
        return f.read()


def _ledger(bench, expected):
    """Every quantity as expected; each listed quantity is the sum of its movements in
    the history and every row not listed sums to nothing; `db check` passes."""
    stock = _stock(bench)
    assert stock == expected
    sums: dict[int, int] = defaultdict(int)
    for batch in json.loads(bench.run("stock", "history", "--json").stdout):
        for m in batch["movements"]:
            sums[m["item_id"]] += m["change"]
    assert {i: sums.get(i, 0) for i in stock} == stock
    assert all(c == 0 for i, c in sums.items() if i not in stock)
    bench.run("db", "check")


def _words(text):
    """Terminal text with its line wrapping undone."""
    return " ".join(text.split())


def _history_head(bench):
    return json.loads(bench.run("stock", "history", "--json", "--limit", "1").stdout)[0]


def _parcel(bench, order_file, name, value, qty):
    """The order file cut to one value's row, with ``qty`` pieces arriving."""
    with open(order_file, newline="") as f:
        rows = [r for r in csv.DictReader(f) if r["value"] == value]
    assert len(rows) == 1
    rows[0]["qty"] = str(qty)
    with open(bench.path(name), "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return bench.path(name)


def _commit(bench, order_name):
    r = bench.run("plan", bench.path("list.toml"), "--json", "--commit", *FIXED, "--order",
                  bench.path(order_name))
    bid = json.loads(r.stdout)["build_id"]
    shown = json.loads(bench.run("builds", "show", str(bid), "--json").stdout)
    taken = {p["id"]: p["count"] for p in shown["pieces"]}
    return bid, taken


def _by_value(rows, ids):
    out: dict[str, int] = defaultdict(int)
    for i in ids:
        out[rows[i]["label"]] += ids[i]
    return dict(out)


def test_bench_bookkeeping_from_first_import_to_last_undo(bench):
    empty = _export(bench, "empty.csv")
    demo = resources.files("drawerfit") / "data" / "demo_stock.csv"
    bench.run("stock", "import", str(demo))
    with open(bench.path("preamp.toml"), "w") as f:
        f.write(PREAMP)
    with open(bench.path("list.toml"), "w") as f:
        f.write(TWENTY_PREAMPS_E24)
    start, start_rows = _stock(bench), _rows(bench)
    start_export = _export(bench, "start.csv")
    _ledger(bench, start)
    in_stock = {v: sum(r["qty"] for r in start_rows.values() if r["label"] == v)
                for v in BOUGHT}
    assert in_stock == {"4k7": 18, "10u": 14}

    # 1. plan and commit with purchases: one of each part per copy leaves the drawer,
    # every stock piece of 4k7 and 10u among them; the rest is ordered
    b1, taken = _commit(bench, "order1.csv")
    by_value = _by_value(start_rows, taken)
    assert by_value["4k7"] == 18 and by_value["10u"] == 14
    assert by_value["GP-N1"] == COPIES and sum(taken.values()) == 4 * COPIES - 2 - 6
    expected = {i: q - taken.get(i, 0) for i, q in start.items()}
    _ledger(bench, expected)
    assert _awaited(bench) == sorted((v, n, used, 0, due) for v, (n, used, due)
                                     in BOUGHT.items())
    with open(bench.path("order1.csv"), newline="") as f:
        assert {r["value"]: int(r["qty"]) for r in csv.DictReader(f)} == {
            v: due for v, (_, _, due) in BOUGHT.items()}

    # 2. undo the build: every piece back, nothing awaited, the export as at the start
    r = bench.run("builds", "undo", str(b1))
    assert "no longer awaited" in r.stdout
    _ledger(bench, start)
    assert _awaited(bench) == []
    assert _export(bench, "after-undo.csv") == start_export

    # 3. plan and commit again
    b2, taken = _commit(bench, "order2.csv")
    assert b2 != b1 and sum(taken.values()) == 4 * COPIES - 2 - 6
    expected = {i: q - taken.get(i, 0) for i, q in start.items()}
    _ledger(bench, expected)
    orders = _order_ids(bench)

    # 4. cancel the 10u order: only the 4k7 is awaited; the cancellation moves nothing
    bench.run("stock", "orders", "cancel", str(orders["10u"]), "--reason", "out of stock")
    cancel = _history_head(bench)
    assert cancel["kind"] == "cancel" and cancel["movements"] == []
    _ledger(bench, expected)
    assert _awaited(bench) == [("4k7", 10, 2, 0, 8)]

    # 5. a parcel with 5 of the 8 pieces: booked, the order stays awaited with 5 counted
    r = bench.run("stock", "receive", _parcel(bench, bench.path("order2.csv"), "p1.csv",
                                              "4k7", 5))
    assert "arrived 5 of 8, still awaited" in _words(r.stdout)
    part1 = _history_head(bench)["batch"]
    [new_4k7] = set(_stock(bench)) - set(expected)         # a 1 % row in the 4k7 bin
    assert _rows(bench)[new_4k7]["tolerance"] == pytest.approx(0.01)
    expected[new_4k7] = 5
    _ledger(bench, expected)
    assert _awaited(bench) == [("4k7", 10, 2, 5, 8)]
    shown = bench.run("stock", "orders").stdout
    assert "arrived" in shown and "5 of 8" in shown

    # 6. the rest, 3 pieces: the order closes
    r = bench.run("stock", "receive", _parcel(bench, bench.path("order2.csv"), "p2.csv",
                                              "4k7", 3))
    assert "arrived 8 of 8, closed" in _words(r.stdout)
    rest = _history_head(bench)["batch"]
    expected[new_4k7] = 8
    _ledger(bench, expected)
    assert _awaited(bench) == []

    # 7. the cancellation undone re-opens the 10u order; then 7 pieces arrive where 4
    # were due: all 7 are booked, the order closes
    bench.run("stock", "undo", str(cancel["batch"]))
    assert _awaited(bench) == [("10u", 10, 6, 0, 4)]
    r = bench.run("stock", "receive", _parcel(bench, bench.path("order2.csv"), "p3.csv",
                                              "10u", 7))
    assert "4 pieces counted, arrived 4 of 4, closed" in _words(r.stdout)
    surplus = _history_head(bench)["batch"]
    [new_10u] = set(_stock(bench)) - set(expected)
    expected[new_10u] = 7
    _ledger(bench, expected)
    assert _awaited(bench) == []

    # 8. undo the receipt that completed the 4k7 order: its 3 pieces leave, the order
    # is awaited again with the first parcel's 5 counted
    r = bench.run("stock", "undo", str(rest))
    assert "arrived 5 of 8, awaited again" in _words(r.stdout)
    expected[new_4k7] = 5
    _ledger(bench, expected)
    assert _awaited(bench) == [("4k7", 10, 2, 5, 8)]

    # 9. undo the build: its pieces come back; the 4k7 order it counted on is no longer
    # awaited (5 of it arrived), the received 10u order stays received
    r = bench.run("builds", "undo", str(b2))
    assert "no longer awaited" in r.stdout
    expected = {**start, new_4k7: 5, new_10u: 7}
    _ledger(bench, expected)
    assert _awaited(bench) == []
    shown = json.loads(bench.run("builds", "show", str(b2), "--json").stdout)
    assert sorted((o["state"], o["arrived"]) for o in shown["orders"]) == [
        ("cancelled", 5), ("received", 4)]

    # 10. undo the receipts: their pieces leave; the 10u order, closed by the receipt
    # undone, is awaited again — its build is gone, so all ten would go to the drawer
    bench.run("stock", "undo", str(surplus))
    del expected[new_10u]
    _ledger(bench, expected)
    assert _awaited(bench) == [("10u", 10, 6, 0, 10)]
    bench.run("stock", "orders", "cancel", str(orders["10u"]))
    bench.run("stock", "undo", str(part1))
    del expected[new_4k7]
    _ledger(bench, expected)
    assert _awaited(bench) == []
    # the rows the receipts made are gone with them: the export is as at the start
    assert _export(bench, "end.csv") == start_export

    # 11. and with the import undone, as before anything was imported
    [imp] = [b for b in json.loads(bench.run("stock", "history", "--json").stdout)
             if b["kind"] == "import"]
    bench.run("stock", "undo", str(imp["batch"]))
    _ledger(bench, {})
    assert _export(bench, "none.csv") == empty


def _refused(r, *needles):
    """Exit 2, one `drawerfit: …` line per problem, each needle in them."""
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert lines and all(ln.startswith("drawerfit: ") for ln in lines), r.stderr
    for n in needles:
        assert n in r.stderr, r.stderr
    return lines


def _partly_arrived(bench):
    """The demo drawer, the plan committed, 5 of the 8 pieces of 4k7 booked."""
    demo = resources.files("drawerfit") / "data" / "demo_stock.csv"
    bench.run("stock", "import", str(demo))
    with open(bench.path("preamp.toml"), "w") as f:
        f.write(PREAMP)
    with open(bench.path("list.toml"), "w") as f:
        f.write(TWENTY_PREAMPS_E24)
    _commit(bench, "order.csv")
    bench.run("stock", "receive", _parcel(bench, bench.path("order.csv"), "p1.csv", "4k7", 5))
    assert _awaited(bench) == [("10u", 10, 6, 0, 4), ("4k7", 10, 2, 5, 8)]


def _books(bench):
    return (_stock(bench), _awaited(bench),
            json.loads(bench.run("stock", "history", "--json").stdout))


def test_a_refused_parcel_changes_no_count(bench):
    """A parcel with a negative count and a row without a bin: one line each naming
    file, line and field, exit 2; stock, the orders' arrivals and the history as before."""
    _partly_arrived(bench)
    before = _books(bench)
    bad = bench.path("bad.csv")
    with open(bad, "w") as f:
        f.write("kind,value,qty,tolerance,location\nresistor,4k7,3,1%,D7\n"
                "resistor,4k7,-3,1%,D7\ncapacitor,10u,4,20%,\n")
    lines = _refused(bench.run("stock", "receive", bad, ok=False), "bad.csv:3: qty:")
    assert len(lines) == 1
    bad2 = bench.path("bad2.csv")
    with open(bad2, "w") as f:
        f.write("kind,value,qty,tolerance,location\nresistor,4k7,3,1%,D7\n"
                "capacitor,10u,4,20%,\n")
    lines = _refused(bench.run("stock", "receive", bad2, ok=False),
                     "bad2.csv:3: location: empty")
    assert len(lines) == 1
    assert _books(bench) == before


def test_an_undo_of_a_receipt_whose_pieces_were_used_changes_nothing(bench):
    _partly_arrived(bench)
    receipt = _history_head(bench)["batch"]
    new_row = _history_head(bench)["movements"][0]["item_id"]
    bench.run("stock", "adjust", str(new_row), "-2", "--reason", "used on the bench")
    before = _books(bench)
    lines = _refused(bench.run("stock", "undo", str(receipt), ok=False),
                     f"cannot undo batch {receipt}", "have 3, undo needs 5")
    assert len(lines) == 1
    assert _books(bench) == before


def test_a_closed_order_cannot_be_cancelled(bench):
    _partly_arrived(bench)
    ids = _order_ids(bench)
    bench.run("stock", "receive", _parcel(bench, bench.path("order.csv"), "p2.csv", "4k7", 3))
    receipt = _history_head(bench)["batch"]
    before = _books(bench)
    lines = _refused(bench.run("stock", "orders", "cancel", str(ids["4k7"]), ok=False),
                     f"order {ids['4k7']} was received (batch {receipt})")
    assert len(lines) == 1
    assert _books(bench) == before

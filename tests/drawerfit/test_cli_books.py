"""Bookkeeping through the command line, on SQLite and on PostgreSQL: builds, orders,
receiving into bins, stock-takes, transistor figures, empty bins.

Expected quantities are counted by hand from the small invented drawer below (or
from the demo drawer, as in test_cli_plan.py, whose stand-in search this file
borrows); the planner's search is not under test here.
"""

from __future__ import annotations

import csv
import json
from importlib import resources
from types import SimpleNamespace

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from tests.drawerfit.circuits import CE_PARTS
from tests.drawerfit.test_cli_plan import (
    BUFFER,
    FIXED,
    PREAMP,
    TWENTY_PREAMPS_E24,
    TWO,
    fake_search,
)

DRAWER = """\
kind,value,qty,tolerance,power,voltage,dielectric,location,min_qty,hfe_min,hfe_max,ft,cob
resistor,47k,5,5%,0.25W,,,A1,,,,,
resistor,10k,5,5%,0.25W,,,A2,,,,,
resistor,4k7,5,5%,0.25W,,,A3,,,,,
resistor,220R,5,5%,0.25W,,,A4,,,,,
resistor,820R,5,5%,0.25W,,,A5,,,,,
resistor,1k0,0,5%,0.25W,,,A6,,,,,
capacitor,47u,3,20%,,25V,electrolytic,B1,,,,,
capacitor,1u,3,20%,,50V,electrolytic,B2,,,,,
capacitor,1u,4,10%,,50V,film,B3,,,,,
npn,GP-N1,6,,,,,L1,8,100,300,250M,3p5
"""

CIRCUIT = """\
topology = "ce"
supply_v = 12.0
load_ohm = "10k"
source_ohm = "600"
transistor = "GP-N1"
""" + CE_PARTS


@pytest.fixture
def bench(store_url, tmp_path, monkeypatch):
    """The CLI against a store on each database; ``stock`` maps id -> qty, ``export``
    gives the bytes of `stock export`."""
    monkeypatch.setattr("optimiser.search.search", fake_search)
    runner = CliRunner()

    def run(*args):
        return runner.invoke(cli, ["--db", store_url, *args])

    def stock():
        r = run("stock", "list", "--json")
        assert r.exit_code == 0, r.output
        return {row["id"]: row["qty"] for row in json.loads(r.stdout)}

    def export(name="export.csv"):
        path = tmp_path / name
        r = run("stock", "export", str(path))
        assert r.exit_code == 0, r.output
        return path.read_bytes()

    def write(name, text):
        p = tmp_path / name
        p.write_text(text)
        return str(p)

    return SimpleNamespace(run=run, stock=stock, export=export, write=write, tmp=tmp_path)


def _demo(bench):
    demo = resources.files("drawerfit") / "data" / "demo_stock.csv"
    r = bench.run("stock", "import", str(demo))
    assert r.exit_code == 0, r.output
    bench.write("preamp.toml", PREAMP)
    bench.write("buffer.toml", BUFFER)


def _drawer(bench):
    r = bench.run("stock", "import", bench.write("drawer.csv", DRAWER))
    assert r.exit_code == 0, r.output


def _refused(bench, r, *needles):
    """Exit 2, one `drawerfit: …` line per problem containing every needle."""
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert lines and all(ln.startswith("drawerfit: ") for ln in lines), r.stderr
    for n in needles:
        assert n in r.stderr, r.stderr


# ------------------------------------------------------------------ builds

def test_commit_is_one_build_and_undo_gives_a_byte_identical_export(bench):
    _demo(bench)
    before = bench.export("before.csv")
    r = bench.run("plan", bench.write("list.toml", TWO), "--json", "--commit", *FIXED)
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    bid = d["build_id"]
    # 20 copies of a three-part stage and its transistor: 80 pieces, counted by hand
    shown = json.loads(bench.run("builds", "show", str(bid), "--json").stdout)
    assert shown["copies"] == 20 and sum(p["count"] for p in shown["pieces"]) == 80
    assert [ln["request"] for ln in shown["lines"]] == [
        b["request"] for b in d["builds"] for _ in b["allocations"]]
    # each line keeps its own request (for --sheet without a search)
    assert {ln["request"]: ln["design"]["request"]["topology"] for ln in shown["lines"]} == {
        "preamp.toml": "ce", "buffer.toml": "cc"}
    r = bench.run("builds", "show", str(bid))
    assert r.exit_code == 0 and "GP-N1" in r.stdout and "npn" in r.stdout
    r = bench.run("builds", "undo", str(bid))
    assert r.exit_code == 0, r.output
    assert bench.export("after.csv") == before
    r = bench.run("db", "check")
    assert r.exit_code == 0, r.output


def test_builds_add_takes_each_role_from_a_row_of_its_value(bench):
    _drawer(bench)
    ids = {(row["kind"], row["label"], row["location"]): row["id"] for row in json.loads(
        bench.run("stock", "list", "--json").stdout)}
    before, export = bench.stock(), bench.export("before.csv")
    r = bench.run("builds", "add", bench.write("stage.toml", CIRCUIT), "--copies", "2",
                  "--json")
    assert r.exit_code == 0, r.output
    build = json.loads(r.stdout)
    [line] = build["lines"]
    taken = {int(k): v for k, v in line["pieces"].items()}
    # C_IN and C_OUT are both 1u; the first 1u row (B2) holds 3, too few for both roles'
    # 4 pieces, so the second role takes the other row (B3)
    one_u = {ids[("capacitor", "1u0", "B2")], ids[("capacitor", "1u0", "B3")]}
    assert {i for i in taken if i in one_u} == one_u
    assert sum(taken.values()) == 9 * 2             # eight roles and a transistor, 2 copies
    assert taken[ids[("npn", "GP-N1", "L1")]] == 2
    after = bench.stock()
    assert all(after[i] == before[i] - taken.get(i, 0) for i in before)
    # the + lead of an electrolytic input coupling capacitor goes to the base, whose DC
    # level lies above the source's 0 V (common practice for a CE stage)
    parts = line["design"]["parts"]
    if ids[("capacitor", "1u0", "B2")] in {pc["id"] for pc in parts["C_IN"]["pieces"]}:
        assert parts["C_IN"]["plus"] == "base"
    shown = bench.run("builds", "show", str(build["id"])).stdout
    assert "+ to" in shown and "B1" in shown and "L1" in shown
    r = bench.run("builds", "undo", str(build["id"]))
    assert r.exit_code == 0
    assert bench.export("after.csv") == export


def test_builds_add_value_not_in_stock_names_the_role_and_changes_nothing(bench):
    _drawer(bench)
    before = bench.export("before.csv")
    r = bench.run("builds", "add", bench.write("stage.toml", CIRCUIT.replace('RC = "4k7"',
                                                                              'RC = "5k6"')))
    _refused(bench, r, "stage.toml: parts.RC:", "5k6")
    r = bench.run("builds", "add", bench.write("many.toml", CIRCUIT), "--copies", "6")
    _refused(bench, r, "parts.R1:")                    # 5 pieces of 47k, 6 asked
    assert bench.export("after.csv") == before
    assert json.loads(bench.run("builds", "list", "--json").stdout) == []


# ------------------------------------------------------------------ orders

def _pending(bench):
    r = bench.run("stock", "orders", "--json")
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def test_undone_build_is_no_longer_awaiting_its_orders(bench):
    _demo(bench)
    r = bench.run("plan", bench.write("list.toml", TWENTY_PREAMPS_E24), "--json", "--commit", *FIXED)
    assert r.exit_code == 0, r.output
    bid = json.loads(r.stdout)["build_id"]
    assert sorted((o["kind"], o["qty"], o["build"]) for o in _pending(bench)) == [
        ("capacitor", 10, bid), ("resistor", 10, bid)]
    r = bench.run("builds", "undo", str(bid))
    assert r.exit_code == 0 and "no longer awaited" in r.stdout
    assert _pending(bench) == []
    shown = json.loads(bench.run("builds", "show", str(bid), "--json").stdout)
    assert {o["state"] for o in shown["orders"]} == {"cancelled"}


def test_cancel_an_order_is_logged_and_undoable(bench):
    _demo(bench)
    r = bench.run("plan", bench.write("list.toml", TWENTY_PREAMPS_E24), "--json", "--commit", *FIXED)
    assert r.exit_code == 0, r.output
    first = _pending(bench)[0]["id"]
    r = bench.run("stock", "orders", "cancel", str(first), "--reason", "supplier out")
    assert r.exit_code == 0, r.output
    assert first not in {o["id"] for o in _pending(bench)}
    hist = json.loads(bench.run("stock", "history", "--json", "--limit", "1").stdout)[0]
    assert hist["kind"] == "cancel" and "supplier out" in hist["note"]
    _refused(bench, bench.run("stock", "orders", "cancel", str(first)), "already cancelled")
    _refused(bench, bench.run("stock", "orders", "cancel", "999"), "no order 999")
    r = bench.run("stock", "undo", str(hist["batch"]))
    assert r.exit_code == 0
    assert first in {o["id"] for o in _pending(bench)}


def test_receiving_more_than_ordered_books_it_all_and_closes_the_order(bench):
    _demo(bench)
    order = bench.tmp / "order.csv"
    r = bench.run("plan", bench.write("list.toml", TWENTY_PREAMPS_E24), "--json", "--commit", *FIXED,
                  "--order", str(order))
    assert r.exit_code == 0, r.output
    with open(order, newline="") as f:
        rows = list(csv.DictReader(f))
    for row in rows:                                  # two pieces more of each arrive
        row["qty"] = str(int(row["qty"]) + 2)
        row["location"] = "N1"
    with open(order, "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    before = bench.stock()
    r = bench.run("stock", "receive", str(order))
    assert r.exit_code == 0, r.output
    # the builds kept 2 of the 4k7 and 6 of the 10u; 8 + 2 and 4 + 2 reach the drawer
    assert sum(bench.stock().values()) - sum(before.values()) == (8 + 2) + (4 + 2)
    assert _pending(bench) == []


def test_receive_needs_a_bin_for_every_row(bench):
    _drawer(bench)
    arrived = bench.write("arrived.csv", "kind,value,qty,location\nresistor,2k2,10,\n"
                                         "resistor,3k3,5,C9\n")
    before = bench.export("before.csv")
    r = bench.run("stock", "receive", arrived)
    _refused(bench, r, "arrived.csv:2: location: empty")
    assert len(r.stderr.strip().splitlines()) == 1
    assert bench.export("after.csv") == before
    r = bench.run("stock", "receive", arrived, "--bin", "C8")
    assert r.exit_code == 0, r.output
    listed = {(row["label"], row["location"]): row["qty"]
              for row in json.loads(bench.run("stock", "list", "--json").stdout)}
    assert listed[("2k2", "C8")] == 10 and listed[("3k3", "C9")] == 5


# ------------------------------------------------------------------ stock-take

def test_stock_take_sets_counts_logs_differences_and_undoes(bench):
    _drawer(bench)
    before = bench.export("before.csv")
    count = bench.write("count.csv", "kind,value,qty,location\nresistor,47k,2,A1\n"
                                     "resistor,47k,1,A1\nresistor,10k,9,A2\n")
    r = bench.run("stock", "take", count)
    assert r.exit_code == 0, r.output
    listed = {(row["label"], row["location"]): row["qty"]
              for row in json.loads(bench.run("stock", "list", "--json").stdout)}
    assert listed[("47k", "A1")] == 3 and listed[("10k", "A2")] == 9
    assert listed[("4k7", "A3")] == 5                 # not in the file: untouched
    hist = json.loads(bench.run("stock", "history", "--json", "--limit", "1").stdout)[0]
    assert hist["kind"] == "take"
    assert sorted(m["change"] for m in hist["movements"]) == [-2, 4]
    # the same content again: done (the counts are already so), with a warning
    r = bench.run("stock", "take", count)
    assert r.exit_code == 0 and "warning" in r.stderr and f"batch {hist['batch']}" in r.stderr
    r = bench.run("stock", "undo", str(hist["batch"] + 1))
    assert r.exit_code == 0
    r = bench.run("stock", "undo", str(hist["batch"]))
    assert r.exit_code == 0
    assert bench.export("after.csv") == before
    r = bench.run("stock", "take", count, "--zero-missing")
    assert r.exit_code == 0
    assert sum(bench.stock().values()) == 3 + 9


def test_importing_the_same_file_twice_warns(bench):
    _drawer(bench)
    r = bench.run("stock", "import", str(bench.tmp / "drawer.csv"))
    assert r.exit_code == 0                            # a warning, not an error
    assert "warning" in r.stderr and "batch 1 (import" in r.stderr
    assert "stock undo 2" in r.stderr


def test_bad_stock_take_changes_nothing(bench):
    _drawer(bench)
    before = bench.export("before.csv")
    r = bench.run("stock", "take", bench.write("bad.csv", "kind,value,qty\nresistor,47k,-1\n"))
    _refused(bench, r, "bad.csv:2: qty:")
    assert bench.export("after.csv") == before


# ------------------------------------------------------------------ transistors, low

def test_stock_add_of_a_known_type_with_other_figures_names_the_figure(bench):
    _drawer(bench)
    before = bench.export("before.csv")
    tid = next(row["id"] for row in json.loads(bench.run("stock", "list", "--json").stdout)
               if row["label"] == "GP-N1")
    r = bench.run("stock", "add", "--kind", "npn", "--value", "GP-N1", "--qty", "2",
                  "--hfe-min", "100", "--hfe-max", "450", "--ft", "250M", "--cob", "3p5",
                  "--location", "L1")
    _refused(bench, r, "hfe_max:", f"hfe_max 450 here, 300 in stock id {tid}")
    assert bench.export("after.csv") == before
    r = bench.run("stock", "add", "--kind", "npn", "--value", "GP-N1", "--qty", "2",
                  "--hfe-min", "100", "--hfe-max", "300", "--ft", "250M", "--cob", "3.5p",
                  "--location", "L1")
    assert r.exit_code == 0, r.output


def test_low_lists_empty_bins_and_its_order_file_round_trips(bench):
    from scipy.constants import mega, pico

    _drawer(bench)
    r = bench.run("stock", "low", "--json")
    low = {row["label"]: row["to_order"] for row in json.loads(r.stdout)}
    assert low == {"1k0": 0, "GP-N1": 8 - 6}          # an empty bin, and one below its level
    order = bench.tmp / "low.csv"
    r = bench.run("stock", "low", "--order", str(order))
    assert r.exit_code == 0 and "A6" in r.stdout
    with open(order, newline="") as f:
        [row] = list(csv.DictReader(f))
    # SI prefixes M = 1e6 and p = 1e-12 (scipy.constants), written as the import reads them
    assert (row["ft"], row["cob"], row["location"], row["qty"]) == ("250M", "3p5", "L1", "2")
    r = bench.run("stock", "receive", str(order))
    assert r.exit_code == 0, r.output
    q = next(x for x in json.loads(bench.run("stock", "list", "--json").stdout)
             if x["label"] == "GP-N1")
    assert q["qty"] == 8
    assert q["ft"] == pytest.approx(250 * mega, rel=1e-12)
    assert q["cob"] == pytest.approx(3.5 * pico, rel=1e-12)
    r = bench.run("stock", "import", str(order))       # the same file through the import
    assert r.exit_code == 0, r.output

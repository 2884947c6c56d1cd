"""`drawerfit plan` through the command line: JSON shape, order file, commit and undo.

These tests check the plan command's bookkeeping (allocations, purchases,
commit, undo, refusals), not the search: the search is replaced by a small
stand-in that offers two fixed designs built from rows of the demo drawer, so
that every expected quantity below can be worked out by hand from
drawerfit/data/demo_stock.csv.
"""

from __future__ import annotations

import csv
import json
import math
from importlib import resources
from types import SimpleNamespace

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from optimiser.design import Design, Piece, RolePick

PREAMP = 'topology = "ce"\nsupply_v = 12.0\ngain_db = 20.0\n'
BUFFER = 'topology = "cc"\nsupply_v = 12.0\n'


def _row(rows, value, location):
    for r in rows:
        if math.isclose(r.value, value, rel_tol=1e-9) and r.location == location:
            return r
    raise AssertionError(f"no row {value} at {location}")


def _pick(role, row, kind):
    return RolePick(role, row.value, f"{row.value:g}",
                    (Piece(row.value, 1, row.id, row.location, kind, row.tolerance),))


def fake_search(request, snapshot, *, top=10, misses=5, progress=None, time_limit_s=None):
    """Two designs: A (10k E2, 4k7 D7, 10u K3, GP-N1; score 0.1) and B (47k F1, 2k2 D3,
    47n J6, GP-N2; score 0.5), offered to a request open to any transistor."""
    R, C = snapshot.resistors, snapshot.capacitors
    a = Design("ce", "GP-N1", {"R1": _pick("R1", _row(R, 10e3, "E2"), "resistor"),
                               "RC": _pick("RC", _row(R, 4.7e3, "D7"), "resistor"),
                               "C_IN": _pick("C_IN", _row(C, 10e-6, "K3"), "capacitor")},
               {"gain_db": 20.1}, True, score=0.1)
    b = Design("ce", "GP-N2", {"R1": _pick("R1", _row(R, 47e3, "F1"), "resistor"),
                               "RC": _pick("RC", _row(R, 2.2e3, "D3"), "resistor"),
                               "C_IN": _pick("C_IN", _row(C, 47e-9, "J6"), "capacitor")},
               {"gain_db": 19.8}, True, score=0.5)
    designs = [d for d in (a, b) if request.transistor in ("any", d.transistor)]
    return SimpleNamespace(feasible=bool(designs), designs=designs[:top], nearest_misses=[],
                           unlock=[], stats={})


@pytest.fixture
def env(tmp_path, monkeypatch):
    monkeypatch.setattr("optimiser.search.search", fake_search)
    db = tmp_path / "store.db"
    runner = CliRunner()
    demo = resources.files("drawerfit") / "data" / "demo_stock.csv"
    r = runner.invoke(cli, ["--db", str(db), "stock", "import", str(demo)])
    assert r.exit_code == 0, r.output
    (tmp_path / "preamp.toml").write_text(PREAMP)
    (tmp_path / "buffer.toml").write_text(BUFFER)

    def run(*args):
        return runner.invoke(cli, ["--db", str(db), *args])

    def stock():
        r = run("stock", "list", "--json")
        assert r.exit_code == 0, r.output
        return {row["id"]: row["qty"] for row in json.loads(r.stdout)}

    return SimpleNamespace(tmp=tmp_path, run=run, stock=stock, db=db)


def buildlist(env, text):
    p = env.tmp / "list.toml"
    p.write_text(text)
    return str(p)


#: The search is replaced by two fixed designs here, so these tests check the
#: programme over a fixed candidate list: column generation (which prices designs
#: with the real search) is switched off.
FIXED = ("--pricing-time", "0")

TWO = """
[[build]]
request = "preamp.toml"
count = 10

[[build]]
request = "buffer.toml"
count = 10
"""


def test_json_shape_and_stock_respected(env):
    r = env.run("plan", *FIXED, buildlist(env, TWO), "--json")
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["feasible"] is True
    assert set(d) >= {"feasible", "builds", "purchases", "cost", "solver"}
    assert d["solver"]["name"] == "CBC" and d["solver"]["status"] == "Optimal"
    assert d["solver"]["seconds"] >= 0
    assert [b["request"] for b in d["builds"]] == ["preamp.toml", "buffer.toml"]
    # 20 copies need 20 transistors of one kind per design; GP-N2 has 12, 4k7 has 10 + 8,
    # 10u has 12 + 2: two times design A does not fit, so one build takes B.
    trans = sorted(a["design"]["transistor"] for b in d["builds"] for a in b["allocations"])
    assert trans == ["GP-N1", "GP-N2"]
    assert d["purchases"] == [] and d["cost"] == 0
    for b in d["builds"]:
        assert sum(a["copies"] for a in b["allocations"]) == 10
        for a in b["allocations"]:
            assert {"R1", "RC", "C_IN"} <= set(a["design"]["parts"])
    before = env.stock()
    used = {}
    for b in d["builds"]:
        for a in b["allocations"]:
            for p in a["design"]["parts"].values():
                for piece in p["pieces"]:
                    used[piece["id"]] = used.get(piece["id"], 0) + piece["count"] * a["copies"]
    assert all(used[i] <= before[i] for i in used)


#: Twenty preamps of design A, buying from E24 (purchase defaults otherwise).
TWENTY_PREAMPS_E24 = """
[[build]]
request = "preamp.toml"
count = 20

[purchase]
series = "E24"
"""


def test_purchase_order_file_is_a_stock_file(env):
    # 20 copies of design A alone: 4k7 has 10 (5 %) + 8 (1 %) = 18, so 2 more; 10u has
    # 12 (25 V) + 2 (63 V) = 14, so 6 more; 10k has 12 + 15 (1 %) = 27, enough.
    # E24 resistors 0.02 each, E6 capacitors 0.10 each, packs of 10, 0.50 a line:
    # 10 × 0.02 + 0.50 + 10 × 0.10 + 0.50 = 2.20.
    text = TWENTY_PREAMPS_E24 + """pack = 10
resistor_price = 0.02
capacitor_price = 0.10
line_cost = 0.50
"""
    r = env.run("plan", *FIXED, buildlist(env, text), "--json", "--order", str(env.tmp / "order.csv"))
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["feasible"] and d["cost"] == pytest.approx(2.20)
    got = {(p["kind"], p["label"]): (p["packs"], p["qty"]) for p in d["purchases"]}
    assert got == {("resistor", "4k7"): (1, 10), ("capacitor", "10u"): (1, 10)}
    with open(env.tmp / "order.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert {r["value"] for r in rows} == {"4k7", "10u"}
    assert {"kind", "value", "qty", "tolerance", "power", "voltage", "dielectric", "location",
            "packs", "cost"} <= set(rows[0])
    # a value the drawer already holds goes to the bin holding most of it
    listed = json.loads(env.run("stock", "list", "--json").stdout)
    for row in rows:
        same = [x for x in listed if x["kind"] == row["kind"] and x["label"] == row["value"]]
        assert row["location"] == max(same, key=lambda x: x["qty"])["location"]
    before = env.stock()
    # a row without a bin is refused on receipt (nothing changes) until one is given
    blank = env.tmp / "blank.csv"
    with open(env.tmp / "order.csv", newline="") as f:
        text = f.read()
    blank.write_text(text.replace(rows[0]["location"], "", 1))
    r = env.run("stock", "receive", str(blank))
    assert r.exit_code == 2 and "blank.csv:2: location: empty" in r.stderr
    assert env.stock() == before
    r = env.run("stock", "receive", str(env.tmp / "order.csv"))
    assert r.exit_code == 0, r.output
    after = env.stock()
    assert sum(after.values()) - sum(before.values()) == 20


def test_commit_then_undo_restores_every_quantity(env):
    before = env.stock()
    r = env.run("plan", *FIXED, buildlist(env, TWO), "--json", "--commit")
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    bid = d["build_id"]
    during = env.stock()
    assert sum(before.values()) - sum(during.values()) == 20 * 4   # 3 parts + transistor
    r = env.run("builds", "list", "--json")
    listed = json.loads(r.stdout)
    assert [(b["id"], b["copies"]) for b in listed] == [(bid, 20)]   # one commit, one build
    shown = json.loads(env.run("builds", "show", str(bid), "--json").stdout)
    assert len(shown["lines"]) == sum(len(b["allocations"]) for b in d["builds"])
    assert sum(ln["copies"] for ln in shown["lines"]) == 20
    r = env.run("builds", "undo", str(bid))                         # one step undoes it all
    assert r.exit_code == 0, r.output
    assert env.stock() == before


def test_commit_refused_when_stock_changed_since_planning(env, monkeypatch):
    from inventory.store import Store

    before = env.stock()
    real = Store.snapshot

    def stale(self):
        # the drawer as it was before someone took pieces: 20 more in every row
        snap = real(self)
        from dataclasses import replace
        return replace(snap, **{kind: tuple(replace(x, qty=x.qty + 20)
                                            for x in getattr(snap, kind))
                                for kind in ("resistors", "capacitors", "transistors")})

    monkeypatch.setattr(Store, "snapshot", stale)
    # 30 copies of design A: more GP-N1 (and 4k7, 10u) than the store really holds
    text = '[[build]]\nrequest = "preamp.toml"\ncount = 30\n'
    r = env.run("plan", *FIXED, buildlist(env, text), "--json", "--commit")
    assert r.exit_code == 2
    err_lines = r.stderr.strip().splitlines()
    assert len(err_lines) == 1 and "stock changed since planning" in err_lines[0]
    assert "Traceback" not in r.output
    monkeypatch.setattr(Store, "snapshot", real)
    assert env.stock() == before
    assert json.loads(env.run("builds", "list", "--json").stdout) == []


def test_infeasible_plan_is_an_answer(env):
    text = '[[build]]\nrequest = "preamp.toml"\ncount = 60\n'
    r = env.run("plan", *FIXED, buildlist(env, text), "--json")
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["feasible"] is False
    (entry,) = d["infeasible"]
    assert entry["request"] == "preamp.toml"
    labels = {s["label"]: (s["have"], s["need"]) for s in entry["shortage"]}
    assert any(have < need for have, need in labels.values())
    # a shortage over the designs offered is no proof the drawer falls short: the
    # reason says whose need it is, never a bare "not enough"
    assert entry["reason"].startswith("the designs offered for it need more")
    # the human view names the request too, and what the verdict rests on
    r = env.run("plan", *FIXED, buildlist(env, text))
    flat = " ".join(r.stdout.split())
    assert r.exit_code == 0 and "preamp.toml" in r.stdout
    assert "not enough" not in flat and "a design it was not offered may still fit" in flat


def test_bad_build_list_exit_2_one_line(env):
    r = env.run("plan", *FIXED, buildlist(env, '[[build]]\nrequest = "preamp.toml"\ncopies = 2\n'))
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1
    assert "list.toml:3" in lines[0] and "build[1].copies" in lines[0]


def test_rich_view_lists_bins_and_total(env):
    r = env.run("plan", *FIXED, buildlist(env, TWO))
    assert r.exit_code == 0, r.output
    assert "E2" in r.stdout or "F1" in r.stdout
    assert "Total cost" in r.stdout and "Optimal" in r.stdout


def test_commit_with_purchases_records_orders_and_order_file_holds_the_rest(env):
    from inventory.store import open_store

    text = TWENTY_PREAMPS_E24
    before = env.stock()
    order = env.tmp / "order.csv"
    r = env.run("plan", *FIXED, buildlist(env, text), "--json", "--commit", "--order", str(order))
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    # as in the test above: 4k7 18 in stock + 2 bought, 10u 14 + 6 bought, 10k and GP-N1
    # from stock: 18 + 14 + 20 + 20 = 72 pieces leave the drawer now.
    assert sum(before.values()) - sum(env.stock().values()) == 72
    with open(order, newline="") as f:
        rows = {r["value"]: int(r["qty"]) for r in csv.DictReader(f)}
    assert rows == {"4k7": 10 - 2, "10u": 10 - 6}     # what is left for the drawer
    store = open_store(str(env.db))
    pending = store.pending_orders()
    assert sorted((o["kind"], o["qty"]) for o in pending) == [("capacitor", 10), ("resistor", 10)]
    store.close()
    r = env.run("stock", "receive", str(order), "--bin", "NEW1")
    assert r.exit_code == 0, r.output
    assert sum(before.values()) - sum(env.stock().values()) == 72 - 12
    store = open_store(str(env.db))
    assert store.pending_orders() == []
    store.close()
    assert isinstance(d["build_id"], int)
    assert d["build_ids"] == [d["build_id"]]      # the list form of the JSON contract

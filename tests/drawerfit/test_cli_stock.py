"""The stock, builds and db commands through Click's test runner: exit codes, key lines,
the JSON shape of docs/json.md, and bad input that changes nothing."""

from __future__ import annotations

import json
import sqlite3

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli

CSV = """kind,value,qty,tolerance,power,voltage,dielectric,location,hfe_min,hfe_max,ft,cob
resistor,4k7,10,,,,,A1,,,,
resistor,47k,4,1%,,,,A2,,,,
resistor,470k,2,,,,,A3,,,,
capacitor,100n,20,10%,,,x7r,B1,,,,
capacitor,10u,5,,,25V,electrolytic,B2,,,,
npn,GP-N1,8,,,,,C1,110,220,250M,4p
"""


@pytest.fixture
def db(tmp_path):
    return str(tmp_path / "stock.sqlite")


def run(db, *args):
    result = CliRunner().invoke(cli, ["--db", db, *args], catch_exceptions=False)
    return result


@pytest.fixture
def loaded(db, tmp_path):
    p = tmp_path / "stock.csv"
    p.write_text(CSV)
    r = run(db, "stock", "import", str(p))
    assert r.exit_code == 0, r.output
    return db


def listing(db):
    r = run(db, "stock", "list", "--json")
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def test_list_json_shape(loaded):
    rows = listing(loaded)
    assert len(rows) == 6
    for row in rows:
        for key in ("id", "kind", "value", "label", "qty", "location", "tolerance", "power",
                    "voltage", "dielectric", "hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref",
                    "vaf", "vce_sat", "vceo", "ic_max", "pd", "ft", "cob"):
            assert key in row
        assert isinstance(row["id"], int)
    npn = [r for r in rows if r["kind"] == "npn"][0]
    assert npn["value"] is None and npn["label"] == "GP-N1" and npn["ft"] == 250e6
    r47 = [r for r in rows if r["value"] == 47e3][0]
    assert (r47["label"], r47["tolerance"], r47["power"], r47["location"]) == (
        "47k", 0.01, 0.25, "A2")


def test_list_filters(loaded):
    r = run(loaded, "stock", "list", "--json", "--kind", "resistor", "--min", "10k",
            "--max", "470k")
    assert [x["value"] for x in json.loads(r.stdout)] == [47e3, 470e3]
    r = run(loaded, "stock", "list", "--kind", "capacitor")
    assert r.exit_code == 0 and "100n" in r.stdout and "4k7" not in r.stdout
    r = run(loaded, "stock", "list", "--min", "4k7k")
    assert r.exit_code == 2 and "4k7k" in r.stderr


def test_bad_row_among_50_exits_2_names_line_and_column_and_changes_nothing(loaded, tmp_path):
    before = listing(loaded)
    lines = ["kind,value,qty,location"] + [f"resistor,{v}k,{v},D{v}" for v in range(1, 51)]
    lines[21] = "resistor,2x2,3,D21"          # line 22 of the file
    bad = tmp_path / "fifty.csv"
    bad.write_text("\n".join(lines) + "\n")
    r = run(loaded, "stock", "import", str(bad))
    assert r.exit_code == 2
    err = r.stderr.strip().splitlines()
    assert len(err) == 1
    assert f"{bad}:22: value:" in err[0] and "2x2" in err[0]
    assert "Traceback" not in r.output
    assert listing(loaded) == before


def test_adjust_with_negative_number_and_refusal(loaded):
    rid = [r["id"] for r in listing(loaded) if r["label"] == "4k7"][0]
    r = run(loaded, "stock", "adjust", str(rid), "-3", "--reason", "bench 2")
    assert r.exit_code == 0, r.output
    assert [x["qty"] for x in listing(loaded) if x["id"] == rid] == [7]
    r = run(loaded, "stock", "adjust", str(rid), "+2", "--reason", "found")
    assert [x["qty"] for x in listing(loaded) if x["id"] == rid] == [9]
    r = run(loaded, "stock", "adjust", str(rid), "-10", "--reason", "too many")
    assert r.exit_code == 2 and "have 9" in r.stderr
    r = run(loaded, "stock", "adjust", str(rid), "-1")
    assert r.exit_code == 2 and "--reason" in r.stderr
    r = run(loaded, "stock", "adjust", str(rid), "0", "--min", "12")
    assert r.exit_code == 0
    r = run(loaded, "stock", "low", "--json")
    assert [(x["id"], x["to_order"]) for x in json.loads(r.stdout)] == [(rid, 3)]
    assert [x["qty"] for x in listing(loaded) if x["id"] == rid] == [9]


def test_history_and_undo(loaded, tmp_path):
    r = run(loaded, "stock", "history", "--json")
    batches = json.loads(r.stdout)
    assert [b["kind"] for b in batches] == ["import"]
    r = run(loaded, "stock", "undo", str(batches[0]["batch"]))
    assert r.exit_code == 0, r.output
    assert all(x["qty"] == 0 for x in listing(loaded))
    r = run(loaded, "stock", "undo", str(batches[0]["batch"]))
    assert r.exit_code == 2 and "already undone" in r.stderr
    r = run(loaded, "stock", "history")
    assert r.exit_code == 0 and "import" in r.stdout


def test_add_checks_like_an_import(db):
    r = run(db, "stock", "add", "--kind", "capacitor", "--value", "4n7", "--qty", "10",
            "--voltage", "100V", "--dielectric", "C0G", "--location", "G1")
    assert r.exit_code == 0, r.output
    rows = listing(db)
    assert (rows[0]["value"], rows[0]["voltage"], rows[0]["dielectric"]) == (4.7e-9, 100.0,
                                                                             "c0g")
    r = run(db, "stock", "add", "--kind", "npn", "--value", "T-2", "--qty", "1")
    assert r.exit_code == 2 and "hfe_min" in r.stderr
    r = run(db, "stock", "add", "--kind", "resistor", "--value", "1k", "--qty", "-4")
    assert r.exit_code == 2 and "negative" in r.stderr


def test_export_import_round_trip_through_the_cli(loaded, tmp_path):
    out = tmp_path / "export.csv"
    assert run(loaded, "stock", "export", str(out)).exit_code == 0
    other = str(tmp_path / "other.sqlite")
    assert run(other, "stock", "import", str(out)).exit_code == 0

    def strip(rows):
        return sorted((json.dumps({k: v for k, v in r.items() if k != "id"}, sort_keys=True)
                       for r in rows))

    assert strip(listing(other)) == strip(listing(loaded))


def test_low_order_file_and_receive(loaded, tmp_path):
    rid = [r["id"] for r in listing(loaded) if r["label"] == "470k"][0]
    run(loaded, "stock", "adjust", str(rid), "0", "--min", "10")
    order = tmp_path / "order.csv"
    r = run(loaded, "stock", "low", "--order", str(order))
    assert r.exit_code == 0 and order.exists()
    r = run(loaded, "stock", "receive", str(order))
    assert r.exit_code == 0, r.output
    assert [x["qty"] for x in listing(loaded) if x["id"] == rid] == [10]
    assert json.loads(run(loaded, "stock", "low", "--json").stdout) == []


def test_builds_commands(loaded):
    from inventory.store import open_store

    rows = listing(loaded)
    ids = {r["label"]: r["id"] for r in rows}
    store = open_store(loaded)
    bid = store.commit_builds([{"request": "preamp.toml", "copies": 2,
                                  "design": {"rank": 1}, "pieces": {ids["4k7"]: 4,
                                                                    ids["GP-N1"]: 2}}])
    store.close()
    r = run(loaded, "builds", "list", "--json")
    [b] = json.loads(r.stdout)
    assert set(b) == {"id", "request", "copies", "created", "undone"}
    assert (b["id"], b["request"], b["copies"], b["undone"]) == (bid, "preamp.toml", 2, False)
    r = run(loaded, "builds", "show", str(bid), "--json")
    shown = json.loads(r.stdout)
    assert [ln["design"] for ln in shown["lines"]] == [{"rank": 1}]
    assert sorted((p["id"], p["count"]) for p in shown["pieces"]) == sorted(
        [(ids["4k7"], 4), (ids["GP-N1"], 2)])
    assert run(loaded, "builds", "show", str(bid)).exit_code == 0
    assert run(loaded, "builds", "list").exit_code == 0
    r = run(loaded, "builds", "undo", str(bid))
    assert r.exit_code == 0
    assert {x["id"]: x["qty"] for x in listing(loaded)} == {x["id"]: x["qty"] for x in rows}
    r = run(loaded, "builds", "undo", str(bid))
    assert r.exit_code == 2 and "already undone" in r.stderr
    r = run(loaded, "builds", "show", "999")
    assert r.exit_code == 2


def test_db_check_finds_a_wrong_count(loaded):
    r = run(loaded, "db", "check")
    assert r.exit_code == 0 and "OK" in r.stdout
    con = sqlite3.connect(loaded)
    con.execute("UPDATE items SET qty = qty + 1 WHERE id = 1")
    con.commit()
    con.close()
    r = run(loaded, "db", "check")
    assert r.exit_code == 2
    assert "item 1" in r.stderr and "movements sum to 10" in r.stderr


def test_db_backup_and_restore(loaded, tmp_path):
    run(loaded, "stock", "adjust", "1", "-2", "--reason", "used")
    backup = tmp_path / "backup.sqlite"
    r = run(loaded, "db", "backup", str(backup))
    assert r.exit_code == 0, r.output
    fresh = str(tmp_path / "fresh.sqlite")
    r = run(fresh, "db", "restore", str(backup))
    assert r.exit_code == 0, r.output
    assert listing(fresh) == listing(loaded)
    assert (json.loads(run(fresh, "stock", "history", "--json").stdout)
            == json.loads(run(loaded, "stock", "history", "--json").stdout))
    r = run(loaded, "db", "restore", str(backup))
    assert r.exit_code == 2 and "not empty" in r.stderr


@pytest.mark.parametrize("args", [["stock", "frobnicate"], ["stock", "list", "--colour"],
                                  ["nosuchcommand"], ["stock", "adjust", "x", "1"]])
def test_unknown_command_or_option_exits_2(db, args):
    r = run(db, *args)
    assert r.exit_code == 2
    assert "Usage" in r.output or "Error" in r.output


def test_store_that_is_not_a_database_exits_2_in_one_line(tmp_path):
    bogus = tmp_path / "notes.txt"
    bogus.write_text("shopping list\n")
    r = run(str(bogus), "stock", "list")
    assert r.exit_code == 2
    assert r.stderr.strip().count("\n") == 0 and str(bogus) in r.stderr
    assert bogus.read_text() == "shopping list\n"


def test_missing_import_file_exits_2(db, tmp_path):
    r = run(db, "stock", "import", str(tmp_path / "nope.csv"))
    assert r.exit_code == 2 and "no such file" in r.stderr

"""`drawerfit plan` with a chain build through the command line, on SQLite and on
PostgreSQL: the plan's JSON, `--commit` as one build whose lines keep both stages'
roles, `builds undo` giving back a byte-identical `stock export`, and bad chain
entries refused with one line naming file, line and field.

The drawer is small and invented; the pieces are counted by hand from it.
"""

from __future__ import annotations

import csv
import json

from click.testing import CliRunner

from drawerfit.cli import cli

DRAWER = """\
kind,value,qty,tolerance,power,voltage,dielectric,location,min_qty,hfe_min,hfe_max,ft,cob
resistor,680R,12,5%,0.25W,,,A1,,,,,
resistor,3k3,20,5%,0.25W,,,A2,,,,,
resistor,33k,20,5%,0.25W,,,A3,,,,,
capacitor,100u,30,20%,,25V,electrolytic,B1,,,,,
npn,GP-N1,8,,,,,L1,,100,300,250M,4p
"""

CHAIN = """\
topology = ["ce", "cc"]
supply_v = 9.0
load_ohm = "1k"
source_ohm = "1k"
gain_db = 30.0
gain_tol_db = 3.0
f_low_max_hz = 100
thd_max_pct = "none"
"""

LIST = """\
[[build]]
request = "chain.toml"
count = 2

[[build]]
name = "buffer"
[build.request]
topology = "cc"
supply_v = 9.0
load_ohm = "1k"
source_ohm = "1k"
f_low_max_hz = 100
thd_max_pct = "none"
"""

#: few candidates, no pricing: the bookkeeping is under test here
QUICK = ("--pricing-time", "0", "--candidates", "4", "--search-time", "10")


def _bench(store_url, tmp_path):
    runner = CliRunner()

    def run(*args):
        return runner.invoke(cli, ["--db", store_url, *args])

    def write(name, text):
        p = tmp_path / name
        p.write_text(text)
        return str(p)

    def export(name):
        r = run("stock", "export", str(tmp_path / name))
        assert r.exit_code == 0, r.output
        return (tmp_path / name).read_bytes()

    r = run("stock", "import", write("drawer.csv", DRAWER))
    assert r.exit_code == 0, r.output
    write("chain.toml", CHAIN)
    return run, write, export


def test_chain_commit_is_one_build_and_undo_restores_the_export(store_url, tmp_path):
    run, write, export = _bench(store_url, tmp_path)
    before = export("before.csv")
    r = run("plan", write("list.toml", LIST), "--json", "--commit", *QUICK)
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["feasible"]
    chain = d["builds"][0]
    (alloc,) = chain["allocations"]                      # identical copies: one design
    design = alloc["design"]
    assert alloc["copies"] == 2 and design["topology"] == ["ce", "cc"]
    # pieces by hand: every role's pieces and both transistors, per copy
    per_copy = sum(p["count"] for pick in design["parts"].values() for p in pick["pieces"]) + 2
    buffer = d["builds"][1]["allocations"][0]["design"]
    buf_copy = sum(p["count"] for pick in buffer["parts"].values() for p in pick["pieces"]) + 1
    shown = json.loads(run("builds", "show", str(d["build_id"]), "--json").stdout)
    assert shown["copies"] == 3
    assert sum(p["count"] for p in shown["pieces"]) == 2 * per_copy + buf_copy
    transistors = sum(p["count"] for p in shown["pieces"] if p.get("kind") == "npn")
    assert transistors == 2 * 2 + 1
    r = run("builds", "show", str(d["build_id"]))
    assert r.exit_code == 0, r.output
    assert "S1.Q" in r.stdout and "S2.Q" in r.stdout and "S1.RC" in r.stdout
    # the chain line's sheet from what the build stores: both stages, both transistors
    r = run("builds", "show", str(d["build_id"]), "--sheet", str(tmp_path / "sheets"))
    assert r.exit_code == 0, r.output
    with open(tmp_path / "sheets" / "1-chain" / "parts.csv", encoding="utf-8") as f:
        rows = {row["role"]: row for row in csv.DictReader(f)}
    assert rows["S1.Q"]["pieces"] == rows["S2.Q"]["pieces"] == "2"
    assert set(design["parts"]) <= set(rows)
    assert (tmp_path / "sheets" / "1-chain" / "sheet.html").is_file()
    r = run("builds", "undo", str(d["build_id"]))
    assert r.exit_code == 0, r.output
    assert export("after.csv") == before


def test_chain_plan_view_names_each_stage_and_what_is_not_proven(store_url, tmp_path):
    run, write, _ = _bench(store_url, tmp_path)
    r = run("plan", write("list.toml", LIST), "--pricing-time", "5", "--candidates", "4",
            "--search-time", "10")
    assert r.exit_code == 0, r.output
    assert "S1 GP-N1 (npn) ← L1" in r.stdout and "S2 GP-N1 (npn) ← L1" in r.stdout
    assert "designs the chain search offered for chain.toml" in " ".join(r.stdout.split())


def _one_line(r, *needles):
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("drawerfit: "), r.stderr
    for n in needles:
        assert n in lines[0], lines[0]


def test_a_chain_the_search_does_not_design_is_refused_on_one_line(store_url, tmp_path):
    run, write, export = _bench(store_url, tmp_path)
    before = export("before.csv")
    write("cc-ce.toml", 'topology = ["cc", "ce"]\nsupply_v = 9.0\n')
    r = run("plan", write("list.toml", '[[build]]\nrequest = "cc-ce.toml"\n'))
    _one_line(r, "list.toml:2", "build[1].request.topology", '["cc", "ce"]')
    r = run("plan", write("list3.toml", '[[build]]\n[build.request]\nsupply_v = 9.0\n'
                                        'topology = ["ce", "cc"]\ncoupling = "wire"\n'))
    _one_line(r, "list3.toml:5", "build[1].request.coupling")
    assert export("after.csv") == before


CASCODE = """\
[[build]]
name = "cascode"
count = 2
[build.request]
topology = "cascode"
supply_v = 9.0
load_ohm = "10k"
source_ohm = "1k"
gain_db = 20.0
gain_tol_db = 3.0
thd_max_pct = "none"
"""


def test_a_cascode_build_commits_shows_its_sheet_and_undoes(store_url, tmp_path):
    """A cascode (one name, its own unprefixed roles) goes through the plan as a chain
    column: both transistors counted, its topology stored as the one name (not as its
    letters), the sheet drawn from the stored build, and undo giving the export back."""
    run, write, export = _bench(store_url, tmp_path)
    before = export("before.csv")
    r = run("plan", write("list.toml", CASCODE), "--json", "--commit", *QUICK)
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["feasible"]
    (alloc,) = d["builds"][0]["allocations"]
    design = alloc["design"]
    assert design["topology"] == "cascode" and {"R1", "R2", "R3", "RC"} <= set(design["parts"])
    shown = json.loads(run("builds", "show", str(d["build_id"]), "--json").stdout)
    assert sum(p["count"] for p in shown["pieces"] if p.get("kind") == "npn") == 2 * 2
    r = run("builds", "show", str(d["build_id"]), "--sheet", str(tmp_path / "sheets"))
    assert r.exit_code == 0, r.output
    assert (tmp_path / "sheets" / "sheet.html").is_file()       # one line: no sub-folder
    r = run("builds", "undo", str(d["build_id"]))
    assert r.exit_code == 0, r.output
    assert export("after.csv") == before


#: The drawer without its capacitor: a chain can be built only with capacitors bought.
NO_CAPS = "\n".join(line for line in DRAWER.splitlines() if not line.startswith("capacitor"))
BUY_LIST = """\
[[build]]
request = "chain.toml"
count = 2

[purchase]
series = "E12"
cap_series = "E6"
pack = 10
"""


def test_chain_build_with_purchases_commits_and_undoes(store_url, tmp_path):
    runner = CliRunner()

    def run(*args):
        return runner.invoke(cli, ["--db", store_url, *args])

    (tmp_path / "drawer.csv").write_text(NO_CAPS + "\n")
    assert run("stock", "import", str(tmp_path / "drawer.csv")).exit_code == 0
    (tmp_path / "chain.toml").write_text(CHAIN)
    (tmp_path / "list.toml").write_text(BUY_LIST)

    def export(name):
        r = run("stock", "export", str(tmp_path / name))
        assert r.exit_code == 0, r.output
        return (tmp_path / name).read_bytes()

    def held():
        with open(tmp_path / "now.csv", newline="", encoding="utf-8") as f:
            return sum(int(r["qty"]) for r in csv.DictReader(f))

    before = export("before.csv")
    export("now.csv")
    n0 = held()
    r = run("plan", str(tmp_path / "list.toml"), "--json", "--commit", *QUICK)
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["feasible"] and d["purchases"] and d["cost"] > 0
    (alloc,) = d["builds"][0]["allocations"]
    assert alloc["copies"] == 2 and alloc["design"]["topology"] == ["ce", "cc"]
    # pieces by hand: every role's pieces and both transistors per copy; those the order
    # supplies ("used") do not leave the drawer, the rest do
    per_copy = sum(p["count"] for pick in alloc["design"]["parts"].values()
                   for p in pick["pieces"]) + 2
    used = sum(p["used"] for p in d["purchases"])
    assert 0 < used <= 2 * per_copy
    export("now.csv")
    assert n0 - held() == 2 * per_copy - used
    r = run("builds", "undo", str(d["build_id"]))
    assert r.exit_code == 0, r.output
    assert export("after.csv") == before

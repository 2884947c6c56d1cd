"""`drawerfit design` of a chain request through the CLI runner: JSON shape (docs/json.md),
the 80-column table, exit codes of the refusals."""

import csv
import io
import json
import tomllib

import pytest
from click.testing import CliRunner
from rich.cells import cell_len
from rich.console import Console

from drawerfit import console
from drawerfit.cli import cli
from drawerfit.render.chains import show_chain_result
from inventory.store import open_store
from optimiser.request import load_request
from optimiser.search.chains import search_chains
from tests.drawerfit.circuits import SMALL_DRAWER_CSV

REQUEST = """topology = ["ce", "cc"]
supply_v = 12.0
load_ohm = "1k"
source_ohm = "1k"
gain_db = 20
gain_tol_db = 2
f_low_max_hz = 100
zout_max_ohm = 500
"""


@pytest.fixture
def store(tmp_path):
    db = tmp_path / "s.sqlite"
    csv = tmp_path / "stock.csv"
    csv.write_text(SMALL_DRAWER_CSV)
    r = CliRunner().invoke(cli, ["--db", str(db), "stock", "import", str(csv)])
    assert r.exit_code == 0, r.output
    return db


def run(store, tmp_path, text, *args):
    req = tmp_path / "req.toml"
    req.write_text(text)
    return CliRunner().invoke(cli, ["--db", str(store), "design", str(req), *args],
                              terminal_width=80)


def test_chain_json_shape(store, tmp_path):
    r = run(store, tmp_path, REQUEST, "--top", "3", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert set(out) >= {"request", "feasible", "designs", "nearest_misses", "search"}
    assert out["request"]["topology"] == ["ce", "cc"]
    assert out["feasible"] is True and 1 <= len(out["designs"]) <= 3
    # proven or not within the command's proof budget, the answer says which, and a
    # complete ranking is a proven one (docs/search.md, "What is proven")
    assert out["proven"] is out["search"]["proven"]
    assert out["search"]["proof"]["stopped"] in ("bound", "exhausted", "time")
    if out["search"]["complete"]:
        assert out["proven"] and out["search"]["proven_ranks"] >= len(out["designs"])
    if not out["proven"]:
        assert out["search"]["proof"]["stopped"] == "time"
    scores = [d["score"] for d in out["designs"]]
    assert scores == sorted(scores)
    for k, d in enumerate(out["designs"], 1):
        assert d["rank"] == k and d["meets_spec"] is True and d["coupling"] == "capacitor"
        assert {"S1.R1", "S1.RC", "S2.RE", "C_COUPLE"} <= set(d["parts"])
        assert len(d["stages"]) == 2 and len(d["transistors"]) == 2
        m = d["metrics"]
        assert abs(m["gain_db"] - 20) <= 2 and m["f_low_hz"] <= 100 and m["zout_ohm"] <= 500
        # the pieces of both stages fit the drawer (10 pieces a value, 5 transistors)
        used = {}
        for p in d["parts"].values():
            for piece in p["pieces"]:
                used[piece["id"]] = used.get(piece["id"], 0) + piece["count"]
        assert max(used.values()) <= 10


def test_chain_table_fits_80_columns(store, tmp_path):
    r = run(store, tmp_path, REQUEST, "--top", "2")
    assert r.exit_code == 0, r.output
    text = " ".join(r.output.split())
    assert "S1 (ce)" in text and "C_COUPLE" in text
    # one verdict, whichever the proof's budget allowed (docs/search.md)
    assert ("Not proven best" in text) != ("Proven best" in text)
    # the first design's cautions, as analyse prints them, end with the bench note;
    # the targets the request left out are named
    assert "#1 cautions:" in text and "verify them on the bench with a meter" in text
    assert "assumed: THD <= 5 %" in text
    # on an 80-column console no line is wider (the table folds its cells)
    req = tmp_path / "req.toml"
    result = search_chains(load_request(req, chains=True), open_store(str(store)).snapshot(),
                           top=2)
    con = Console(width=80, record=True, file=io.StringIO(), color_system=None)
    show_chain_result(con, result)
    shown = con.export_text()
    lines = shown.splitlines()
    # without a time limit the proof runs to its end: rank 1 proven, and said so
    assert result.search["proven"] and "Proven best" in " ".join(shown.split())
    assert max(cell_len(s) for s in lines) <= 80
    assert sum(1 for s in lines if s.startswith("│1 ") or s.startswith("│2 ")) == 2


@pytest.mark.parametrize("text,field", [
    ('topology = ["cc", "ce"]\nsupply_v = 12\n', "topology"),
])
def test_other_kinds_refused(store, tmp_path, text, field):
    r = run(store, tmp_path, text)
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "req.toml:" in lines[0] and field in lines[0]
    assert "analyse" in lines[0]


def _csv_rows(path):
    with open(path, newline="", encoding="utf-8") as f:
        return {row["role"]: row for row in csv.DictReader(f)}


@pytest.mark.parametrize("combos", [False, True])
def test_sheet_and_spice_of_the_chosen_chain(store, tmp_path, combos):
    # --json owns stdout: the chains as JSON there, the sheet's lines on stderr
    # (allow_combos: roles made of two pieces, each with its own bin)
    sheet, deck = tmp_path / "sheet", tmp_path / "chain.cir"
    text = REQUEST + ("allow_combos = true\n" if combos else "")
    r = run(store, tmp_path, text, "--top", "3", "--rank", "2", "--json",
            "--sheet", str(sheet), "--spice", str(deck))
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    chosen = next(d for d in out["designs"] if d["rank"] == 2)
    assert combos == any(p.get("joined") for p in chosen["parts"].values())
    svg = (sheet / "schematic.svg").read_text(encoding="utf-8")
    assert "chain #2" in r.stderr and str(deck) in r.stderr
    for name in ("sheet.html", "schematic.svg", "stage.cir", "parts.csv", "waveform.png"):
        assert (sheet / name).is_file(), name
    page = (sheet / "sheet.html").read_text(encoding="utf-8")
    assert "chain rank 2" in page
    rows = _csv_rows(sheet / "parts.csv")
    # every part of the chosen chain with its value and its bin, on the page and in the csv
    for role, pick in chosen["parts"].items():
        assert role in rows, role
        assert rows[role]["value"].startswith(pick["label"]), role
        # the page's route lists each piece, the schematic each role's value
        assert role in page and pick["label"] in svg, role
        for piece in pick["pieces"]:
            assert piece["location"] in rows[role]["location"], role
            assert f"<td>{piece['location']}</td><td>{role}</td>" in page, role
            assert f"bin {piece['location']}" in svg or f"+ {piece['location']}" in svg, role
    # both transistors, each with its bin
    for k, label in enumerate(chosen["transistors"], 1):
        assert rows[f"S{k}.Q"]["value"] == label and rows[f"S{k}.Q"]["location"] == "C1"
    # DC voltages to probe for both transistors
    for node in ("S1.base", "S1.collector", "S2.base", "S2.emitter"):
        assert node in page, node
    # the deck is the sheet's own, and names both transistors and every part by role
    text = deck.read_text(encoding="utf-8")
    assert text == (sheet / "stage.cir").read_text(encoding="utf-8")
    assert "QS1" in text and "QS2" in text
    for role in chosen["parts"]:
        assert role.replace(".", "_") in text, role


def test_sheet_of_rank_beyond_the_chains_found_is_refused(store, tmp_path):
    r = run(store, tmp_path, REQUEST, "--top", "2", "--rank", "3", "--sheet",
            str(tmp_path / "sheet"))
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "--rank" in lines[0] and "only 2" in lines[0]
    assert not (tmp_path / "sheet").exists()


def test_no_chain_meets_no_sheet(store, tmp_path):
    # 60 dB from two stages of this drawer into 1k: no chain (exit 0: that is an answer)
    text = REQUEST.replace("gain_db = 20", "gain_db = 60")
    r = run(store, tmp_path, text, "--sheet", str(tmp_path / "sheet"), "--spice",
            str(tmp_path / "c.cir"))
    assert r.exit_code == 0, r.output
    assert "no chain meets the request" in r.stderr
    assert not (tmp_path / "sheet").exists() and not (tmp_path / "c.cir").exists()


def test_spice_into_a_missing_folder_is_refused_before_the_search(store, tmp_path):
    r = run(store, tmp_path, REQUEST, "--spice", str(tmp_path / "nowhere" / "c.cir"))
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "--spice" in lines[0] and "does not exist" in lines[0]


def test_zout_max_still_refused_for_a_single_stage(store, tmp_path):
    r = run(store, tmp_path, 'topology = "ce"\nsupply_v = 12\nzout_max_ohm = 100\n')
    assert r.exit_code == 2 and "zout_max_ohm" in r.stderr


DIRECT = REQUEST + 'coupling = "direct"\n'


def test_direct_chain_json_table_sheet_and_deck(store, tmp_path):
    # the follower's base on the first collector: the direct form's roles
    # (docs/requests.md), pieces of both stages within the drawer's 10 a value
    sheet, deck = tmp_path / "sheet", tmp_path / "chain.cir"
    r = run(store, tmp_path, DIRECT, "--top", "2", "--json", "--sheet", str(sheet),
            "--spice", str(deck))
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["request"]["coupling"] == "direct" and out["feasible"] is True
    assert out["search"]["complete"] is False and out["search"]["followers"] > 0
    for k, d in enumerate(out["designs"], 1):
        assert d["rank"] == k and d["coupling"] == "direct" and d["meets_spec"] is True
        assert {"S1.R1", "S1.R2", "S1.RC", "S1.C_IN", "S2.RE", "S2.C_OUT"} <= set(d["parts"])
        assert not {"C_COUPLE", "S2.R1", "S2.R2", "S1.C_OUT"} & set(d["parts"])
        assert d["stages"][1]["vb_v"] == d["stages"][0]["vc_v"]
        used = {}
        for p in d["parts"].values():
            for piece in p["pieces"]:
                used[piece["id"]] = used.get(piece["id"], 0) + piece["count"]
        assert max(used.values()) <= 10
    page = (sheet / "sheet.html").read_text(encoding="utf-8")
    text = deck.read_text(encoding="utf-8")
    assert text == (sheet / "stage.cir").read_text(encoding="utf-8")
    for role in out["designs"][0]["parts"]:
        assert role in page and role.replace(".", "_") in text, role
    # the follower's base is the first collector: one node in the deck
    assert "QS2 supply S1_collector S2_emitter" in text
    r = run(store, tmp_path, DIRECT, "--top", "2")
    assert r.exit_code == 0, r.output
    words = " ".join(r.output.split())
    assert "ce first stages" in words and "followers on their collectors" in words
    assert "Not proven best" in words


def test_no_direct_chain_meets_says_what_was_searched(store, tmp_path):
    r = run(store, tmp_path, DIRECT.replace("zout_max_ohm = 500", "zout_max_ohm = 1"))
    assert r.exit_code == 0, r.output
    words = " ".join(r.output.split())
    assert "No ce→cc direct-coupled chain found meets the request." in words
    assert "Searched:" in words and "S2.RE:" in words
    assert "Not proven that none exists" in words


# --- a chain request nothing meets: what would unlock it (docs/answers.md) -------------

#: Proven impossible on the demo drawer (tests/optimiser/test_chain_unlocks.py).
IMPOSSIBLE = """topology = ["ce", "cc"]
supply_v = 12.0
load_ohm = "1k"
source_ohm = "10k"
gain_db = 50
gain_tol_db = 1
f_low_max_hz = 2
ic_min_a = "4m"
"""


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory):
    from importlib import resources

    db = tmp_path_factory.mktemp("demo") / "d.sqlite"
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
        r = CliRunner().invoke(cli, ["--db", str(db), "stock", "import", str(p)])
    assert r.exit_code == 0, r.output
    return db


def test_unlocks_json_and_80_columns(demo_store, tmp_path, monkeypatch):
    from optimiser.pair_evaluate import evaluate_pair
    from optimiser.request import parse_request
    from optimiser.stages import form_of
    from optimiser.stages.pair import PairBatch
    from tests.demo_drawer import demo_snapshot

    r = run(demo_store, tmp_path, IMPOSSIBLE, "--json", "--time-limit", "40")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["feasible"] is False and out["designs"] == []
    assert out["unlock"] and out["unlock_changes"], out["unlock"]
    # each change names its chain; the pair engine, given that chain's values, meets
    # the request with the change applied (the ratings left out: the values alone)
    snap = demo_snapshot()
    for c in out["unlock_changes"]:
        assert {"target", "from", "to", "unit", "proof", "design"} <= set(c)
        d = c["design"]
        assert d["topology"] == ["ce", "cc"] and d["meets_spec"] is True
        key = "gain_tol_db" if c["target"] == "gain_db" else c["target"]
        to = c["gain_tol_db_to"] if c["target"] == "gain_db" else c["to"]
        req = parse_request({**tomllib.loads(IMPOSSIBLE), key: to}, pairs=True)
        form = form_of(req.topology, req.coupling)
        vals = {role: [d["parts"][role]["value"] if role in d["parts"] else 0.0]
                for role in form.role_names}
        ev = evaluate_pair(req, PairBatch.from_values(form, **vals),
                           tuple(snap.transistor(t) for t in d["transistors"]), None)
        assert bool(ev.meets[0]), c
    text = " ".join(out["unlock"])
    assert "relax gain_db from 50.0" in text
    # the terminal at 80 columns: the same advice, no line wider (the results console
    # is 80 wide whatever this shell's COLUMNS)
    monkeypatch.setattr(console.out, "width", 80)
    r = run(demo_store, tmp_path, IMPOSSIBLE, "--time-limit", "40")
    assert r.exit_code == 0, r.output
    assert max(cell_len(s) for s in r.output.splitlines()) <= 80
    flat = " ".join(r.output.split())
    assert "What would unlock it:" in flat and "relax gain_db from 50.0" in flat

"""`drawerfit design` of a cascode request through the CLI runner on the demo drawer:
the JSON shape of docs/json.md, the 80-column table, the build sheet and SPICE deck of
the chosen cascode, and a request nothing meets."""

import io
import json
from importlib import resources

import pytest
from click.testing import CliRunner
from rich.cells import cell_len
from rich.console import Console

from drawerfit.cli import cli
from drawerfit.render.chains import show_chain_result
from inventory.store import open_store
from optimiser.request import load_request
from optimiser.search.chains import search_chains
from tests.drawerfit.test_cli_design_chain import run
from tests.optimiser.test_chain_cascode import USER

REQUEST = "".join(f"{k} = {json.dumps(v)}\n" for k, v in USER.items())


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    db = tmp_path_factory.mktemp("cascode") / "s.sqlite"
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
        r = CliRunner().invoke(cli, ["--db", str(db), "stock", "import", str(p)])
    assert r.exit_code == 0, r.output
    return db


def test_json_sheet_and_spice_of_the_chosen_cascode(store, tmp_path):
    sheet, deck = tmp_path / "sheet", tmp_path / "cascode.cir"
    r = run(store, tmp_path, REQUEST, "--top", "3", "--json", "--sheet", str(sheet),
            "--spice", str(deck))
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["request"]["topology"] == "cascode" and out["feasible"] is True
    assert out["search"]["complete"] is False           # not proven (docs/search.md)
    assert 1 <= len(out["designs"]) <= 3
    for k, d in enumerate(out["designs"], 1):
        assert d["rank"] == k and d["topology"] == "cascode" and d["coupling"] is None
        assert {"R1", "R2", "R3", "RC", "C_B", "C_IN", "C_OUT"} <= set(d["parts"])
        assert len(d["stages"]) == 2 and d["meets_spec"] is True
    assert "cascode #1" in r.stderr
    for name in ("sheet.html", "schematic.svg", "stage.cir", "parts.csv"):
        assert (sheet / name).is_file(), name
    text = deck.read_text(encoding="utf-8")
    assert text == (sheet / "stage.cir").read_text(encoding="utf-8")
    for role in out["designs"][0]["parts"]:
        assert f"\n{role} " in text, role


def test_table_fits_80_columns(store, tmp_path):
    req = tmp_path / "req.toml"
    req.write_text(REQUEST)
    result = search_chains(load_request(req, chains=True), open_store(str(store)).snapshot(),
                           top=2)
    con = Console(width=80, record=True, file=io.StringIO(), color_system=None)
    show_chain_result(con, result)
    shown = con.export_text()
    assert max(cell_len(s) for s in shown.splitlines()) <= 80
    text = " ".join(shown.split())
    assert "S1 (ce, lower)" in text and "S2 (cb, upper)" in text
    assert "Not proven best" in text and "divider triples" in text


def test_nothing_meets_says_what_was_searched(store, tmp_path):
    r = run(store, tmp_path, REQUEST + "zout_max_ohm = 50\n", "--top", "2", "--sheet",
            str(tmp_path / "sheet"))
    assert r.exit_code == 0, r.output
    text = " ".join(r.output.split())
    assert "No cascode found meets the request" in text
    assert "Searched:" in text and "Not proven that none exists" in text
    assert "no cascode meets the request" in r.stderr
    assert not (tmp_path / "sheet").exists()

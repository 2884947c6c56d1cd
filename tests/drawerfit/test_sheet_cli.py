"""``--sheet DIR`` on the commands: files written, cautions and file list printed.

Driven through Click's CliRunner against a fresh SQLite store holding the demo
drawer (invented data).
"""

from __future__ import annotations

import importlib.resources
import json
import re

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from drawerfit.sheet import SHEET_FILES, ratings_of
from drawerfit.sheet.stored import design_from_json
from optimiser.design import Design, Piece, RolePick
from optimiser.evaluate import evaluate
from optimiser.stage import StageBatch

REQUEST_TOML = """topology = "ce"
supply_v = 12
load_ohm = "10k"
source_ohm = "600"
gain_db = 20
f_low_max_hz = 50
temp_c = [0, 50]
"""


def _demo_csv() -> str:
    return str(importlib.resources.files("drawerfit") / "data" / "demo_stock.csv")


@pytest.fixture(scope="module")
def store_with_build(tmp_path_factory):
    from inventory.store import open_store
    from optimiser.request import load_request

    tmp = tmp_path_factory.mktemp("cli")
    db = str(tmp / "stock.db")
    r = CliRunner().invoke(cli, ["--db", db, "stock", "import", _demo_csv()])
    assert r.exit_code == 0, r.output
    store = open_store(db)
    parts = store.parts()

    def row(kind, value, dielectric=None, voltage=None):
        for p in parts:
            if p.kind == kind and abs(p.value - value) < 1e-9 * value and \
                    (dielectric is None or p.dielectric == dielectric) and \
                    (voltage is None or p.voltage_v == voltage):
                return p
        raise LookupError((kind, value))

    want = {"R1": ("resistor", 47e3), "R2": ("resistor", 10e3), "RC": ("resistor", 4.7e3),
            "RE": ("resistor", 220.0), "RE_BYP": ("resistor", 820.0),
            "C_IN": ("capacitor", 1e-6, "film"), "C_OUT": ("capacitor", 10e-6, "electrolytic", 25.0),
            "C_BYP": ("capacitor", 47e-6, "electrolytic", 16.0)}
    picks = {}
    for role, spec in want.items():
        p = row(*spec)
        picks[role] = RolePick(role, p.value, "", (Piece(p.value, 1, p.id, p.location, spec[0]),))
    req_file = tmp / "preamp.toml"
    req_file.write_text(REQUEST_TOML)
    req = load_request(req_file)
    q = next(p for p in parts if getattr(p, "label", None) == "GP-N1")
    d = design_from_json(Design("ce", "GP-N1", picks, {}, True).to_json(), parts)
    ev = evaluate(req, StageBatch.from_values("ce", **d.values()), q, ratings_of(d))
    d.metrics = ev.metrics_of(0)
    pieces = {pc.id: 1 for pick in d.parts.values() for pc in pick.pieces}
    pieces[q.id] = 1
    bid = store.commit_builds([{"request": "preamp.toml", "copies": 1, "design": d.to_json(),
                                "pieces": pieces}])
    return db, bid, req_file, d


def test_builds_show_writes_the_sheet(store_with_build, tmp_path):
    db, build_id, req_file, d = store_with_build
    out = tmp_path / "sheet"
    r = CliRunner().invoke(cli, ["--db", db, "builds", "show", str(build_id), "--sheet",
                                 str(out), "--request", str(req_file)])
    assert r.exit_code == 0, r.output
    assert sorted(p.name for p in out.iterdir()) == sorted(SHEET_FILES)
    assert "+ toward the collector" in r.output          # C_OUT is an electrolytic
    assert "verify" in r.output
    for name in SHEET_FILES:
        assert name in r.output
    html = (out / "sheet.html").read_text(encoding="utf-8")
    # The ratings came from the stock rows: C_BYP is a 16 V electrolytic in bin K5.
    assert "K5" in html and "16 V" in html
    vc = float(re.search(r'data-node="collector" data-volts="([^"]+)"', html)[1])
    assert vc == pytest.approx(d.metrics["vc_v"], rel=1e-5)


def test_builds_show_sheet_without_a_request_is_bad_input(store_with_build, tmp_path,
                                                          monkeypatch):
    db, build_id, _, _ = store_with_build
    monkeypatch.chdir(tmp_path)                           # no preamp.toml here
    r = CliRunner().invoke(cli, ["--db", db, "builds", "show", str(build_id), "--sheet",
                                 str(tmp_path / "s")])
    assert r.exit_code == 2
    assert "--request" in r.stderr and "Traceback" not in r.output
    assert not (tmp_path / "s" / "sheet.html").exists()


CIRCUIT_TOML = REQUEST_TOML + """f_high_min_hz = 100e3
ic_drift_max_pct = 10
yield_samples = 300

[parts]
R1 = "47k"
R2 = "10k"
RC = "4k7"
RE = "220"
RE_BYP = "820"
C_BYP = "47u"
C_IN = "1u"
C_OUT = "10u"

[transistor]
hfe_min = 100
hfe_max = 300
ft = "250M"
cob = "4p"
pd = 0.5

[tolerances]
R1 = "1%"
"""


def test_analyse_sheet_shows_the_figures_of_analyse_json(tmp_path):
    circuit = tmp_path / "stage.toml"
    circuit.write_text(CIRCUIT_TOML)
    out = tmp_path / "sheet"
    r = CliRunner().invoke(cli, ["--db", str(tmp_path / "x.db"), "analyse", str(circuit),
                                 "--json", "--sheet", str(out)])
    assert r.exit_code == 0, r.output
    metrics = json.loads(r.stdout)["design"]["metrics"]       # stdout is JSON alone
    assert "Build sheet written" in r.stderr and "verify" in r.stderr
    html = (out / "sheet.html").read_text(encoding="utf-8")
    shown = dict(re.findall(r'data-metric="(\w+)" data-value="([^"]*)"', html))
    assert len(shown) >= 11
    for key, text in shown.items():
        want = metrics[key]
        assert (text == "") if want is None else float(text) == want, key
    volts = dict(re.findall(r'data-node="(\w+)" data-volts="([^"]+)"', html))
    for node, key in (("base", "vb_v"), ("emitter", "ve_v"), ("collector", "vc_v")):
        assert float(volts[node]) == pytest.approx(metrics[key], rel=1e-5)
    # Yield was asked for: its figure, the sample percentiles of the DC voltages (which
    # must lie inside the worst-case range, the samples being drawn inside the same box).
    assert "yield_pct" in shown and "90 % of the Monte Carlo samples" in html
    worst = dict(re.findall(r'data-node="(\w+)"[^>]*>[^<]*</td><td class="range">([^<]+)</td>',
                            html))
    rng = r"(\S+ m?V to \S+ m?V)"
    mc = re.search(rf"90 % of the Monte Carlo samples lie within: B {rng}, E {rng}, C {rng}\.",
                   html)
    rows = [(n, worst[n], mc[i + 1]) for i, n in enumerate(("base", "emitter", "collector"))]

    def volts_of(text):
        return [float(x) * (1e-3 if u == "m" else 1.0)
                for x, u in re.findall(r"([-\d.]+) (m?)V", text)]

    for node, worst, mc in rows:
        lo, hi = volts_of(worst)
        p5, p95 = volts_of(mc)
        assert lo <= p5 <= p95 <= hi, node
    # The folder holds the stage as a SPICE netlist: ngspice's I_C of it is analyse's
    # (within 0.5 %, the engine's tolerance against ngspice).
    vals = _ngspice_op(out / "stage.cir", tmp_path, "@q[ic]")
    assert vals["@q[ic]"] == pytest.approx(metrics["ic_a"], rel=0.005)


SMALL_STOCK = """kind,value,qty,tolerance,power,voltage,dielectric,location,hfe_min,hfe_max,vbe,ic_ref,vaf,vce_sat,vceo,ic_max,pd,ft,cob
resistor,220R,5,5%,0.25W,,,A1,,,,,,,,,,,
resistor,820R,5,5%,0.25W,,,A2,,,,,,,,,,,
resistor,1k0,5,5%,0.25W,,,A3,,,,,,,,,,,
resistor,4k7,5,5%,0.25W,,,A4,,,,,,,,,,,
resistor,10k,5,5%,0.25W,,,A10,,,,,,,,,,,
resistor,47k,5,5%,0.25W,,,A11,,,,,,,,,,,
capacitor,1u0,5,10%,,63V,film,B1,,,,,,,,,,,
capacitor,10u,5,20%,,25V,electrolytic,B2,,,,,,,,,,,
capacitor,47u,5,20%,,16V,electrolytic,B3,,,,,,,,,,,
npn,GP-N1,5,,,,,C1,100,300,0.65,1m,100,0.2,40,0.1,0.5,250M,4p
"""

SMALL_REQUEST = """topology = "ce"
supply_v = 12
load_ohm = "10k"
source_ohm = "600"
gain_db = 20
gain_tol_db = 3
f_low_max_hz = 100
temp_c = [0, 50]
"""


def _small_store(tmp_path):
    """(runner, db) with the small invented drawer imported and req.toml beside it, so
    that a search takes a moment only."""
    (tmp_path / "stock.csv").write_text(SMALL_STOCK)
    (tmp_path / "req.toml").write_text(SMALL_REQUEST)
    db = str(tmp_path / "s.db")
    runner = CliRunner()
    assert runner.invoke(cli, ["--db", db, "stock", "import",
                               str(tmp_path / "stock.csv")]).exit_code == 0
    return runner, db


def test_design_sheet_draws_the_chosen_rank(tmp_path):
    runner, db = _small_store(tmp_path)
    out = tmp_path / "sheet"
    r = runner.invoke(cli, ["--db", db, "design", str(tmp_path / "req.toml"), "--json",
                            "--sheet", str(out), "--rank", "2"])
    assert r.exit_code == 0, r.output
    designs = json.loads(r.stdout)["designs"]
    assert len(designs) >= 2
    assert "design #2" in r.stderr and "sheet.html" in r.stderr
    html = (out / "sheet.html").read_text(encoding="utf-8")
    shown = dict(re.findall(r'data-metric="(\w+)" data-value="([^"]*)"', html))
    want = designs[1]["metrics"]
    for key, text in shown.items():
        assert (text == "") if want[key] is None else float(text) == want[key], key
    # the picking list names the bins of rank 2's pieces
    for role, part in designs[1]["parts"].items():
        for pc in part["pieces"]:
            assert f"<td>{pc['location']}</td><td>{role}</td>" in html
    r = runner.invoke(cli, ["--db", db, "design", str(tmp_path / "req.toml"), "--top", "2",
                            "--sheet", str(tmp_path / "s2"), "--rank", "3"])
    assert r.exit_code == 2 and "--rank" in r.stderr and "Traceback" not in r.output


def _ngspice_op(deck_path, tmp_path, prints: str) -> dict[str, float]:
    """ngspice's .op reading of an exported deck: ``prints`` (e.g. ``@q[ic] @r1[resistance]``).

    The deck is run as written, with a .control block appended that prints what is read.
    """
    from tests.reference.spice import _prints, require_ngspice, run_ngspice

    require_ngspice()
    deck = deck_path.read_text(encoding="utf-8").rstrip()
    assert deck.endswith(".end") and ".control" not in deck.lower()
    text = deck[: -len(".end")] + f".control\nsave all\nop\nprint {prints}\n.endc\n.end\n"
    return _prints(run_ngspice(text, tmp_path, "cli"))


def test_analyse_spice_writes_the_stage_ngspice_reads(tmp_path):
    # Reference: ngspice's operating point of the exported deck (I_C within 0.5 %, the
    # engine's tolerance against ngspice) and its reading of every part's value.
    circuit = tmp_path / "stage.toml"
    circuit.write_text(CIRCUIT_TOML.replace("yield_samples = 300\n", ""))
    cir = tmp_path / "out.cir"
    r = CliRunner().invoke(cli, ["--db", str(tmp_path / "x.db"), "analyse", str(circuit),
                                 "--json", "--spice", str(cir)])
    assert r.exit_code == 0, r.output
    design = json.loads(r.stdout)["design"]
    assert "SPICE netlist written" in r.stderr and str(cir) in r.stderr
    roles = [k for k, v in design["parts"].items() if v["value"]]
    kinds = {k: "resistance" if k.startswith("R") else "capacitance" for k in roles}
    vals = _ngspice_op(cir, tmp_path, "@q[ic] " + " ".join(f"@{k.lower()}[{kinds[k]}]"
                                                           for k in roles))
    assert vals["@q[ic]"] == pytest.approx(design["metrics"]["ic_a"], rel=0.005)
    for k in roles:
        assert vals[f"@{k.lower()}[{kinds[k]}]"] == pytest.approx(design["parts"][k]["value"],
                                                                  rel=1e-5), k
    # Without --json the line goes to stdout, after the analysis.
    r = CliRunner().invoke(cli, ["--db", str(tmp_path / "x.db"), "analyse", str(circuit),
                                 "--spice", str(tmp_path / "again.cir")])
    assert r.exit_code == 0 and "SPICE netlist written" in r.stdout
    assert (tmp_path / "again.cir").read_text() == cir.read_text()


@pytest.mark.parametrize("bad", ["missing-folder/x.cir", "."])
def test_spice_to_a_bad_path_is_one_line_and_exit_2(tmp_path, bad, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "stage.toml").write_text(CIRCUIT_TOML)
    (tmp_path / "req.toml").write_text(SMALL_REQUEST)
    for args in (["analyse", "stage.toml"], ["design", "req.toml"]):
        r = CliRunner().invoke(cli, ["--db", "x.db", *args, "--spice", bad])
        assert r.exit_code == 2, (args, r.output)
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and "--spice" in lines[0] and "Traceback" not in r.output
        assert r.stdout == ""                      # refused before any work


def test_design_spice_writes_the_chosen_rank(tmp_path):
    # Reference: ngspice's reading of the deck's part values and its .op I_C.
    runner, db = _small_store(tmp_path)
    for rank in (1, 2):
        cir = tmp_path / f"rank{rank}.cir"
        r = runner.invoke(cli, ["--db", db, "design", str(tmp_path / "req.toml"), "--json",
                                "--spice", str(cir), "--rank", str(rank)])
        assert r.exit_code == 0, r.output
        want = json.loads(r.stdout)["designs"][rank - 1]
        assert f"design #{rank}" in r.stderr
        roles = [k for k, v in want["parts"].items() if v["value"]]
        kinds = {k: "resistance" if k.startswith("R") else "capacitance" for k in roles}
        vals = _ngspice_op(cir, tmp_path, "@q[ic] " + " ".join(f"@{k.lower()}[{kinds[k]}]"
                                                               for k in roles))
        assert vals["@q[ic]"] == pytest.approx(want["metrics"]["ic_a"], rel=0.005)
        for k in roles:
            assert vals[f"@{k.lower()}[{kinds[k]}]"] == pytest.approx(
                want["parts"][k]["value"], rel=1e-5), (rank, k)
        text = cir.read_text()
        assert text.splitlines()[0].startswith(f"drawerfit ce stage, rank {rank}")

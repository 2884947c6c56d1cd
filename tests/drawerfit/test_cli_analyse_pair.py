"""`drawerfit analyse` of two-transistor circuits through the Click runner: the figures,
the JSON shape, the SPICE deck, and bad input (one line naming file, line and field,
exit 2).  The figures themselves are checked against ngspice in
tests/reference/test_ngspice_pairs.py; here, that the command shows the engine's."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from optimiser.circuit_file import load_circuit
from optimiser.pair_evaluate import evaluate_pair

EXAMPLES = Path(__file__).resolve().parents[2] / "examples" / "bench"
CHAIN = (EXAMPLES / "preamp-buffer.toml").read_text()
CASCODE = (EXAMPLES / "cascode-check.toml").read_text()


def _run(tmp_path, text, *args, name="circuit.toml"):
    p = tmp_path / name
    p.write_text(text)
    db = tmp_path / "never.db"
    r = CliRunner().invoke(cli, ["--db", str(db), "analyse", str(p), *args])
    assert not db.exists()
    return r, p


def test_chain_terminal_view(tmp_path):
    r, _ = _run(tmp_path, CHAIN)
    assert r.exit_code == 0, r.output
    for word in ("Operating points", "S1", "S2", "DC voltages to check", "gain at mid_hz",
                 "f_low", "f_high", "Zin", "Zout", "swing", "THD", "Drift corners of S1",
                 "Drift corners of S2", "C_COUPLE", "verify them on the bench"):
        assert word in r.output, word


@pytest.mark.parametrize("text", [CHAIN, CASCODE,
                                  CHAIN.replace('coupling = "capacitor"', 'coupling = "direct"')
                                  .replace('C_COUPLE = "1u"\n', "")
                                  .replace('S2.R1 = "22k"\nS2.R2 = "27k"\n', "")])
def test_json_is_the_engines(tmp_path, text):
    r, p = _run(tmp_path, text, "--json")
    assert r.exit_code == 0, r.output
    doc = json.loads(r.output)
    assert set(doc) == {"request", "design"}
    d = doc["design"]
    c = load_circuit(p)
    ev = evaluate_pair(c.request, c.batch(), c.transistors, c.ratings)
    for k in ("gain", "f_low_hz", "f_high_hz", "zin_ohm", "zout_ohm", "thd_pct", "swing_vpk"):
        assert d["metrics"][k] == pytest.approx(float(ev.metrics[k][0]), rel=1e-9), k
    for k, stage in enumerate(("S1", "S2")):
        st = d["stages"][stage]
        assert st["ic_a"] == pytest.approx(float(ev.stages[k]["ic_a"][0]), rel=1e-9)
        assert len(st["drift"]) == 8 and st["ic_drift_pct"] > 0
    assert d["nodes"] and all(isinstance(v, float) for v in d["nodes"].values())
    assert any(cn["kind"] == "verify" for cn in d["cautions"])
    assert doc["request"]["topology"] == d["topology"]


def test_zout_target_and_spice_deck(tmp_path):
    r, _ = _run(tmp_path, CHAIN.replace("zout_max_ohm = 100", "zout_max_ohm = 10"), "--json",
                "--spice", str(tmp_path / "chain.cir"))
    assert r.exit_code == 0, r.output
    d = json.JSONDecoder().raw_decode(r.output)[0]["design"]     # the deck's line on stderr
    assert d["meets_spec"] is False
    assert any(v.startswith("zout_ohm") and "> 10" in v for v in d["violations"])
    deck = (tmp_path / "chain.cir").read_text()
    assert "QS1 " in deck and "QS2 " in deck and "C_COUPLE" in deck and deck.endswith(".end\n")


@pytest.mark.parametrize("old, new, field", [
    ('S1.RC = "4k7"', 'S1.RC = "4k7"\nS1.RX = "1k"', "parts.S1.RX"),   # unknown role
    ('C_COUPLE = "1u"\n', "", "parts"),                               # missing coupling cap
    ('S2.RE = "2k2"', 'S2.RE = "2kk"', "parts.S2.RE"),                # unparseable value
    ('coupling = "capacitor"', 'coupling = "glue"', "coupling"),
    ('topology = ["ce", "cc"]', 'topology = ["ce", "xx"]', "topology"),
    ('topology = ["ce", "cc"]', 'topology = ["ce", "ce"]\ncoupling2 = 1', "coupling2"),
    ("zout_max_ohm = 100", "zout_max_ohm = -5", "zout_max_ohm"),
])
def test_bad_chain_file_one_line_exit_2(tmp_path, old, new, field):
    text = CHAIN.replace(old, new)
    assert text != CHAIN
    r, p = _run(tmp_path, text)
    assert r.exit_code == 2, r.output
    lines = [s for s in r.output.splitlines() if s.strip()]
    assert len(lines) == 1, r.output
    assert str(p) in lines[0] and f"{field}:" in lines[0], lines[0]


def test_direct_coupling_is_for_ce_cc_only(tmp_path):
    r, p = _run(tmp_path, CHAIN.replace('topology = ["ce", "cc"]', 'topology = ["cb", "cc"]')
                .replace('coupling = "capacitor"', 'coupling = "direct"'))
    assert r.exit_code == 2 and "coupling:" in r.output and "[\"ce\", \"cc\"]" in r.output


def test_cascode_without_a_transistor_for_s2(tmp_path):
    text = CASCODE.split("[S2.transistor]")[0]
    r, _ = _run(tmp_path, text)
    assert r.exit_code == 2, r.output
    assert "missing transistor for S2" in r.output


def test_sheet_for_two_transistors(tmp_path):
    r, _ = _run(tmp_path, CASCODE, "--sheet", str(tmp_path / "out"))
    assert r.exit_code == 0, r.output
    assert (tmp_path / "out" / "sheet.html").is_file() and "Build sheet written:" in r.output


@pytest.mark.parametrize("text", [CHAIN, CASCODE])
def test_yield_in_the_json_is_the_monte_carlo_of_the_circuit(tmp_path, text):
    """yield_samples, seed: the yield of monte_carlo_pair with the file's seed and samples,
    in the metrics and under "yield"; min_yield_pct above it is a violation."""
    from optimiser.yield_ import monte_carlo_pair

    # a tight f_low bound, so that part of the samples miss it
    text = text.replace("temp_c = [0, 50]", "temp_c = [0, 50]\nyield_samples = 300\nseed = 4")
    c0 = load_circuit(_run(tmp_path, text)[1])
    f_low = float(evaluate_pair(c0.request, c0.batch(), c0.transistors).metrics["f_low_hz"][0])
    text = re.sub(r"f_low_max_hz = \d+", f"f_low_max_hz = {f_low:.6g}", text)
    r, p = _run(tmp_path, text, "--json")
    assert r.exit_code == 0, r.output
    d = json.loads(r.output)["design"]
    c = load_circuit(p)
    res = monte_carlo_pair(c.request, c.form, c.values, c.transistors, c.tolerances,
                           samples=300, seed=4)
    assert d["metrics"]["yield_pct"] == pytest.approx(res.yield_pct)
    assert 5.0 < res.yield_pct < 95.0 and res.fail_share["f_low_hz"] > 0.05
    assert d["yield"]["samples"] == 300 and d["yield"]["seed"] == 4
    assert set(d["yield"]["fail_share"]) >= {"f_low_hz", "forward_active", "limits"}
    assert not any(v.startswith("yield_pct") for v in d["violations"])
    floor = res.yield_pct + 1.0
    r, _ = _run(tmp_path, text.replace("seed = 4", f"seed = 4\nmin_yield_pct = {floor:.4g}"),
                "--json")
    d = json.loads(r.output)["design"]
    assert d["meets_spec"] is False
    assert any(v.startswith("yield_pct") for v in d["violations"])
    r, _ = _run(tmp_path, text)
    assert r.exit_code == 0 and f"yield {res.yield_pct:.1f} %" in r.output, r.output


def test_design_refuses_a_chain_it_does_not_search(tmp_path):
    # ce→cc and cb→cc are searched (tests/drawerfit/test_cli_design_chain.py); the others
    # are refused, naming analyse as the way to check one with given values
    p = tmp_path / "req.toml"
    p.write_text('topology = ["ce", "ce"]\nsupply_v = 12\n')
    r = CliRunner().invoke(cli, ["--db", str(tmp_path / "s.db"), "design", str(p)])
    assert r.exit_code == 2, r.output
    assert "analyse" in r.output and "topology" in r.output

"""The build sheet of two-transistor circuits: well-formed, self-contained files carrying
the engine's figures, both transistors' DC voltages to probe, each stage's cautions.

Checks against things outside the sheet code: the XML and HTML parsers of the standard
library (well-formedness), the PNG file signature (ISO/IEC 15948, 8 bytes 89 50 4E 47
0D 0A 1A 0A), ngspice's operating point of the sheet's own stage.cir for the DC voltages
to probe (the harness tests/reference/spice.py), and the engine's evaluation
(optimiser.pair_evaluate) for the figures.
"""

from __future__ import annotations

import csv
import io
import json
import xml.etree.ElementTree as ET
from dataclasses import replace
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from drawerfit.sheet.pair_writer import PAIR_SHEET_FILES, circuit_picks, write_pair_sheet
from optimiser.circuit_file import load_circuit
from optimiser.pair_evaluate import evaluate_pair
from optimiser.pair_report import pair_cautions, pair_report, probe_nodes, probe_ranges

from .pair_forms import cascode, chain, direct

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
EXAMPLES = Path(__file__).resolve().parents[2] / "examples" / "bench"
CASES = {"ce-cc": lambda: chain("ce", "cc"), "cb-ce": lambda: chain("cb", "ce"),
         "direct": lambda: direct(rc=True), "cascode": lambda: cascode()}


def _ev(c):
    return evaluate_pair(c.request, c.batch(), c.transistors, c.ratings)


class _Page(HTMLParser):
    def __init__(self):
        super().__init__()
        self.metrics, self.nodes, self.srcs, self.hrefs, self.cautions = {}, {}, [], [], []
        self.stack = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "data-metric" in a:
            self.metrics[a["data-metric"]] = a["data-value"]
        if "data-node" in a:
            self.nodes[a["data-node"]] = float(a["data-volts"])
        if tag == "img":
            self.srcs.append(a.get("src", ""))
        if "href" in a:
            self.hrefs.append(a["href"])
        if tag == "li" and "data-kind" in a:
            self.cautions.append((a["data-kind"], a["class"]))


@pytest.fixture(scope="module", params=list(CASES))
def written(request, tmp_path_factory):
    c = CASES[request.param]()
    ev = _ev(c)
    out = tmp_path_factory.mktemp(request.param)
    paths = write_pair_sheet(out, ev, 0, c)
    return c, ev, out, paths


def test_files_are_written_and_well_formed(written):
    c, ev, out, paths = written
    assert sorted(p.name for p in paths) == sorted(PAIR_SHEET_FILES)
    ET.fromstring((out / "schematic.svg").read_bytes())
    ET.fromstring((out / "response.svg").read_bytes())
    for png in ("response.png", "waveform.png", "drift.png"):
        assert (out / png).read_bytes()[:8] == PNG_SIGNATURE
    page = _Page()
    text = (out / "sheet.html").read_text()
    page.feed(text)
    # self-contained: every image inline, nothing fetched, no scripts
    assert page.srcs and all(s.startswith("data:") for s in page.srcs)
    assert not page.hrefs and "<script" not in text and "http" not in text.replace(
        "http://www.w3.org", "")
    assert "/tmp" not in text and str(Path.home()) not in text


def test_figures_are_the_engines(written):
    c, ev, out, _ = written
    page = _Page()
    page.feed((out / "sheet.html").read_text())
    for key in ("gain", "f_low_hz", "zin_ohm", "zout_ohm", "thd_pct"):
        assert float(page.metrics[key]) == float(ev.metrics[key][0]), key
    for k, stage in enumerate(c.form.stages):
        for key in ("ic_a", "vce_v", "ic_drift_pct", "pd_q_w"):
            assert float(page.metrics[f"{stage}.{key}"]) == float(ev.stages[k][key][0])
    nodes = probe_nodes(ev, 0)
    assert set(page.nodes) == set(nodes)
    for n, v in nodes.items():
        assert page.nodes[n] == pytest.approx(v, rel=1e-5)


def test_parts_csv_has_every_role_with_its_bin_and_plus(written):
    c, ev, out, _ = written
    rows = list(csv.DictReader(io.StringIO((out / "parts.csv").read_text())))
    roles = [r for r in c.form.role_names if r in c.values]
    assert [r["role"] for r in rows] == roles + ["S1.Q", "S2.Q"]
    plus = ev.extra["plus"]
    for r in rows[:-2]:
        stock = c.stock_parts[r["role"]]
        assert r["location"] == stock.location
        if getattr(stock, "dielectric", None) == "electrolytic":
            assert r["plus"] == str(plus[r["role"]][0])
            assert r["plus"] in (a for _, a, _ in c.form.wiring) or r["plus"] in (
                b for _, _, b in c.form.wiring)


def test_dc_voltages_to_probe_agree_with_ngspice(written, tmp_path):
    """ngspice's .op of the sheet's own stage.cir: every probed node within 1 mV + 0.5 %
    (the engine's agreement with ngspice on I_C, docs/engine.md)."""
    from tests.reference.spice import _prints, require_ngspice, run_ngspice

    require_ngspice()
    c, ev, out, _ = written
    deck = (out / "stage.cir").read_text().rstrip()
    assert deck.endswith(".end")
    nodes = probe_nodes(ev, 0)
    names = {n: n.replace(".", "_").lower() for n in nodes}
    ctl = ["save all", "run", "op"] + [f"print v({s})" for s in names.values()]
    text = deck[: -len(".end")] + ".control\n" + "\n".join(ctl) + "\n.endc\n.end\n"
    vals = _prints(run_ngspice(text, tmp_path, "probe"))
    for n, v in nodes.items():
        ref = vals[f"v({names[n]})"]
        assert abs(v - ref) <= 1e-3 + 0.005 * abs(ref), (n, v, ref)


@pytest.mark.parametrize("name", list(CASES))
def test_probe_range_holds_random_circuits_inside_the_tolerance_box(name):
    """300 circuits with every resistor anywhere within its tolerance, each transistor's
    hFE anywhere in its spread and the temperature anywhere in temp_c: every probed node
    stays within the range the sheet prints (the vertices of the box at the corners)."""
    c = CASES[name]()
    ev = _ev(c)
    ranges = probe_ranges(ev, 0, c.tolerances)
    rng = np.random.default_rng(5)
    n = 300
    vals = {}
    for role, v in c.values.items():
        t = c.tolerances[role] if c.form.kind(role) == "resistor" else 0.0
        vals[role] = v * (1 + t * rng.uniform(-1, 1, n))
    from optimiser.stages.pair import PairBatch

    batch = PairBatch.from_values(c.form, **vals)
    betas = tuple(rng.uniform(t.hfe_min, t.hfe_max, n) for t in c.transistors)
    temps = rng.uniform(*c.request.temp_c, n)
    many = evaluate_pair(c.request, batch, c.transistors, band_edges=False,
                         large_signal=False, temp_c=temps, betas=betas)
    for node, (lo, hi) in ranges.items():
        v = np.asarray(many.volts[node])
        assert lo < hi
        assert v.min() >= lo - 1e-6 and v.max() <= hi + 1e-6, node


def test_cautions_of_both_stages_mains_first(tmp_path):
    """Above 30 V the mains caution leads (common practice, docs/sheet.md); each
    electrolytic gets its polarity warning; each transistor's own cautions name it."""
    c = chain("ce", "cc")
    c = replace(c, request=replace(c.request, supply_v=36.0))
    ev = _ev(c)
    written = write_pair_sheet(tmp_path, ev, 0, c)
    kinds = [n.kind for n in written.cautions]
    assert kinds[0] == "mains"
    page = _Page()
    page.feed((tmp_path / "sheet.html").read_text())
    assert [k for k, _ in page.cautions] == kinds
    polar = [r for r, p in c.stock_parts.items() if getattr(p, "dielectric", "") ==
             "electrolytic"]
    warned = {n.role for n in written.cautions if n.kind == "polarity"}
    assert set(polar) <= warned
    assert written.cautions == pair_cautions(ev, 0, c)


def _run(tmp_path, text, *args):
    p = tmp_path / "circuit.toml"
    p.write_text(text)
    return CliRunner().invoke(cli, ["--db", str(tmp_path / "never.db"), "analyse", str(p),
                                    *args]), p


@pytest.mark.parametrize("example", ["preamp-buffer.toml", "cascode-check.toml"])
def test_analyse_writes_the_sheet_with_the_yield(tmp_path, example):
    text = (EXAMPLES / example).read_text().replace(
        "temp_c = [0, 50]", "temp_c = [0, 50]\nyield_samples = 200\nseed = 3")
    out = tmp_path / "sheet"
    r, p = _run(tmp_path, text, "--json", "--sheet", str(out))
    assert r.exit_code == 0, r.output
    doc, _ = json.JSONDecoder().raw_decode(r.output)       # the file list on stderr
    d = doc["design"]
    assert sorted(x.name for x in out.iterdir()) == sorted(PAIR_SHEET_FILES)
    page = _Page()
    html = (out / "sheet.html").read_text()
    page.feed(html)
    assert float(page.metrics["yield_pct"]) == d["metrics"]["yield_pct"]
    assert float(page.metrics["gain"]) == d["metrics"]["gain"]
    assert "Monte Carlo" in html
    assert page.nodes.keys() == d["nodes"].keys()
    # the terminal view writes the same sheet
    r, _ = _run(tmp_path, text, "--sheet", str(tmp_path / "again"))
    assert r.exit_code == 0 and "Build sheet written:" in r.output
    c = load_circuit(p)
    assert pair_report(_ev(c), 0, c)["metrics"]["gain"] == d["metrics"]["gain"]


def test_sheet_picks_carry_the_engines_plus_side():
    c = cascode()
    ev = _ev(c)
    picks = circuit_picks(ev, 0, c)
    for role, (v, a, b) in ev.capacitors.items():
        if role in picks:
            assert picks[role].plus == (a if float(v[0]) >= 0 else b)

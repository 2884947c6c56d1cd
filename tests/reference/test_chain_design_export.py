"""`drawerfit design CHAIN.toml --spice FILE --sheet DIR`: the deck of the chosen chain,
run by ngspice [NGSPICE], gives the DC figures and the gain `design --json` reports.

The request is the new user's (tests/reference/test_chain_search_ngspice.py): 40 dB into
a 1k load from a 10k source, f_low ≤ 20 Hz, 12 V, on the demo drawer, capacitor-coupled
and direct-coupled (``coupling = "direct"``: the follower's base is the first
collector, so its base voltage is S1's collector voltage).  The deck is run
unchanged but for a ``.control`` block appended by this test: ``.op`` for I_C of both
transistors and the node voltages, |v(load)| at mid_hz (the source is ``AC 1``).
Tolerances as the engine against ngspice (tests/reference/test_ngspice_engine.py): I_C
and V_CE 0.5 %, the DC node voltages 0.5 % or 5 mV, midband gain 1 %.  The DC voltages
the build sheet gives to probe are checked against ngspice's ``.op`` of the sheet's own
``stage.cir`` (1 mV + 0.5 %), and the sheet's figures against those `design --json`
printed.
"""

from __future__ import annotations

import json
import re
from importlib import resources

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli

from .spice import _prints, require_ngspice, run_ngspice

pytestmark = [pytest.mark.reference]

REQUEST = """topology = ["ce", "cc"]
supply_v = 12
source_ohm = "10k"
load_ohm = "1k"
gain_db = 40
f_low_max_hz = 20
"""

#: the reported DC voltage of each stage (design --json "stages") and its deck node
NODES = {"vb_v": "base", "ve_v": "emitter", "vc_v": "collector"}
#: the probes each form's sheet must give, and the nodes one stage takes from the other
PROBES = {"capacitor": {"S1.base", "S1.collector", "S1.emitter", "S2.base", "S2.emitter"},
          "direct": {"S1.base", "S1.collector", "S1.emitter", "S2.emitter"}}
SHARED = {"capacitor": {}, "direct": {(2, "base"): (1, "collector")}}


@pytest.fixture(scope="module", params=["capacitor", "direct"])
def exported(tmp_path_factory, request):
    require_ngspice()
    coupling = request.param
    wd = tmp_path_factory.mktemp(f"chain_export_{coupling}")
    db = wd / "demo.sqlite"
    runner = CliRunner()
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
        r = runner.invoke(cli, ["--db", str(db), "stock", "import", str(p)])
    assert r.exit_code == 0, r.output
    req = wd / "chain.toml"
    req.write_text(REQUEST + f'coupling = "{coupling}"\n')
    r = runner.invoke(cli, ["--db", str(db), "design", str(req), "--top", "2", "--rank", "2",
                            "--json", "--spice", str(wd / "chain.cir"),
                            "--sheet", str(wd / "sheet")])
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    chosen = next(d for d in out["designs"] if d["rank"] == 2)
    deck = (wd / "chain.cir").read_text(encoding="utf-8").rstrip()
    assert deck.endswith(".end") and ".control" not in deck.lower()
    nodes = [f"v(s{k}_{n})" for k in (1, 2) for n in ("base", "emitter", "collector")
             if f"S{k}_{n}" in deck]
    ctl = ["save all", "op", "print @qs1[ic] @qs2[ic] " + " ".join(nodes) + " v(supply)",
           f"ac lin 1 {out['request']['mid_hz']:.12g} {out['request']['mid_hz']:.12g}",
           "let g = mag(v(load))", "print g"]
    text = deck[: -len(".end")] + ".control\n" + "\n".join(ctl) + "\n.endc\n.end\n"
    sp = _prints(run_ngspice(text, wd, "chain"))
    page = (wd / "sheet" / "sheet.html").read_text(encoding="utf-8")
    assert chosen["coupling"] == coupling
    return chosen, sp, page, wd / "sheet"


def _volts(sp, k: int, node: str, coupling: str) -> float:
    """Node voltage of stage ``k`` from ngspice; a node the deck joins to the supply (the
    follower's collector) is the supply; a node one stage takes from the other (the
    direct follower's base) is the other's."""
    k, node = SHARED[coupling].get((k, node), (k, node))
    return sp.get(f"v(s{k}_{node})", sp["v(supply)"])


def test_both_operating_points_agree_with_ngspice(exported):
    chosen, sp, _, _ = exported
    coupling = chosen["coupling"]
    for k, st in enumerate(chosen["stages"], 1):
        ic = sp[f"@qs{k}[ic]"]
        assert abs(st["ic_a"] - ic) < 0.005 * abs(ic), k
        vce = _volts(sp, k, "collector", coupling) - _volts(sp, k, "emitter", coupling)
        assert abs(st["vce_v"] - vce) < 0.005 * abs(vce), k
        for key, node in NODES.items():
            v = _volts(sp, k, node, coupling)
            assert abs(st[key] - v) < max(0.005 * abs(v), 0.005), (k, key)


def test_midband_gain_agrees_with_ngspice(exported):
    chosen, sp, _, _ = exported
    assert abs(chosen["metrics"]["gain"] - sp["g"]) < 0.01 * sp["g"]


def test_sheet_probe_voltages_agree_with_ngspice(exported, tmp_path):
    # every DC voltage the sheet gives to probe (both transistors), against ngspice's .op
    # of the sheet's own stage.cir: within 1 mV + 0.5 % (as tests/drawerfit/test_sheet_pair.py)
    chosen, _, page, sheet = exported
    probes = {n: float(v) for n, v in re.findall(r'data-node="([^"]+)" data-volts="([^"]+)"',
                                                 page)}
    assert PROBES[chosen["coupling"]] <= set(probes)
    deck = (sheet / "stage.cir").read_text(encoding="utf-8").rstrip()
    names = {n: n.replace(".", "_").lower() for n in probes}
    ctl = ["save all", "op"] + [f"print v({s})" for s in names.values()]
    text = deck[: -len(".end")] + ".control\n" + "\n".join(ctl) + "\n.endc\n.end\n"
    sp = _prints(run_ngspice(text, tmp_path, "probe"))
    for n, v in probes.items():
        ref = sp[f"v({names[n]})"]
        assert abs(v - ref) <= 1e-3 + 0.005 * abs(ref), (n, v, ref)


def test_sheet_figures_are_the_reported_ones(exported):
    # the page's figures are those `design --json` printed for the chosen chain
    chosen, _, page, _ = exported
    shown = {k: float(v) for k, v in re.findall(r'data-metric="([^"]+)" data-value="([^"]+)"',
                                                page)}
    needed = {"gain", "gain_db", "f_low_hz", "zin_ohm", "zout_ohm", "thd_pct"}
    assert needed <= set(shown) and needed <= set(chosen["metrics"])
    for k, v in shown.items():
        ref = chosen["metrics"].get(k)
        if ref is not None:
            assert abs(v - ref) <= 1e-9 * max(1.0, abs(ref)), (k, v, ref)

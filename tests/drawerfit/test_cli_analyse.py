"""`drawerfit analyse` through the Click runner: figures, JSON shape, bad input (exit 2)."""

from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from tests.drawerfit.circuits import CE_PARTS, CE_TRANSISTOR

GOOD = """\
topology = "ce"
supply_v = 12.0
load_ohm = "10k"
source_ohm = "600"
gain_db = 20.0
f_low_max_hz = 50
temp_c = [0, 50]
""" + CE_PARTS + CE_TRANSISTOR


def _run(tmp_path, text, *args):
    p = tmp_path / "circuit.toml"
    p.write_text(text)
    # a store path that must stay untouched: plain values never open the store
    db = tmp_path / "never.db"
    r = CliRunner().invoke(cli, ["--db", str(db), "analyse", str(p), *args])
    assert not db.exists()
    return r, p


def test_terminal_view_has_every_figure(tmp_path):
    r, _ = _run(tmp_path, GOOD)
    assert r.exit_code == 0, r.output
    for word in ("V_B", "V_E", "V_C", "I_C", "V_CE", "P_Q", "g_m", "r_π", "r_o", "V/V", "dB",
                 "f_low", "f_high", "Zin", "Zout", "Drift corners", "swing", "THD"):
        assert word in r.output, word
    assert "gain_db 21.7 outside 20 ± 1" in r.output


def test_json_shape(tmp_path):
    r, _ = _run(tmp_path, GOOD, "--json")
    assert r.exit_code == 0, r.output
    doc = json.loads(r.output)
    assert set(doc) == {"request", "design"}
    d = doc["design"]
    for k in ("gain", "gain_db", "f_low_hz", "f_high_hz", "ic_a", "vce_v", "zin_ohm", "zout_ohm",
              "ic_drift_pct", "swing_vpk", "thd_pct", "pd_q_w", "vb_v", "ve_v", "vc_v", "vbe_v"):
        assert k in d["metrics"], k
    assert d["meets_spec"] is False and d["violations"] == ["gain_db 21.7 outside 20 ± 1"]
    assert d["parts"]["R1"]["value"] == 47000.0 and d["parts"]["C_IN"]["plus"] == "base"
    assert doc["request"]["load_ohm"] == 10000.0


@pytest.mark.parametrize("old, new, field", [
    ('RC = "4k7"', 'RC = "4k7"\nRX = "1k"', "parts.RX"),          # unknown role
    ('RC = "4k7"\n', "", "parts"),                                  # missing required part
    ('R2 = "10k"', 'R2 = "10kk"', "parts.R2"),                      # unparseable value
    ("supply_v = 12.0", "supply_v = 12000.0", "supply_v"),          # absurd supply
    ("supply_v = 12.0", "supply_v = -9", "supply_v"),
])
def test_bad_input_one_line_exit_2(tmp_path, old, new, field):
    r, p = _run(tmp_path, GOOD.replace(old, new))
    assert r.exit_code == 2, r.output
    lines = [s for s in r.output.splitlines() if s.strip()]
    assert len(lines) == 1, r.output
    assert str(p) in lines[0] and f"{field}:" in lines[0]
    assert "Traceback" not in r.output


def test_stock_ids_and_transistor_label_from_the_store(tmp_path):
    """Parts written "#id" and transistor = "LABEL" come from the store (invented stock)."""
    csv = tmp_path / "stock.csv"
    csv.write_text("kind,value,qty,power,voltage,dielectric,location,hfe_min,hfe_max,ft,cob\n"
                   "resistor,4k7,10,10mW,,,A1,,,,\n"
                   "capacitor,47u,5,,16,electrolytic,B2,,,,\n"
                   "npn,GP-N1,4,,,,C3,100,300,250M,4p\n")
    db = tmp_path / "s.db"
    runner = CliRunner()
    r = runner.invoke(cli, ["--db", str(db), "stock", "import", str(csv)])
    assert r.exit_code == 0, r.output
    items = json.loads(runner.invoke(cli, ["--db", str(db), "stock", "list", "--json"]).output)
    rid = next(i["id"] for i in items if i["kind"] == "resistor")
    cid = next(i["id"] for i in items if i["kind"] == "capacitor")
    text = (GOOD.replace('RC = "4k7"', f'RC = "#{rid}"').replace('C_BYP = "47u"', f'C_BYP = "#{cid}"')
            .split("[transistor]")[0].replace('topology = "ce"', 'topology = "ce"\ntransistor = "GP-N1"'))
    p = tmp_path / "c.toml"
    p.write_text(text)
    r = runner.invoke(cli, ["--db", str(db), "analyse", str(p), "--json"])
    assert r.exit_code == 0, r.output
    d = json.loads(r.output)["design"]
    assert d["transistor"] == "GP-N1"
    assert d["parts"]["RC"]["value"] == 4700.0
    assert d["parts"]["RC"]["pieces"][0]["id"] == rid
    assert d["parts"]["C_BYP"]["plus"] == "emitter"
    # the stock piece is judged against its own 10 mW rating: R_C dissipates about 8 mW
    assert any(v.startswith("R_C dissipates") and "of its 0.01 W rating" in v
               for v in d["violations"]), d["violations"]

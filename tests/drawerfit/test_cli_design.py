"""`drawerfit design` through the CLI runner: exit codes, JSON shape, key lines."""

import json

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from tests.drawerfit.circuits import SMALL_DRAWER_CSV

STOCK = SMALL_DRAWER_CSV

REQUEST = """topology = "cc"
supply_v = 12.0
load_ohm = "10k"
source_ohm = "600"
gain = 0.9
gain_tol_db = 2.0
f_low_max_hz = 100
"""


@pytest.fixture
def store(tmp_path):
    db = tmp_path / "s.sqlite"
    csv = tmp_path / "stock.csv"
    csv.write_text(STOCK)
    r = CliRunner().invoke(cli, ["--db", str(db), "stock", "import", str(csv)])
    assert r.exit_code == 0, r.output
    return db


def run(store, tmp_path, text, *args):
    req = tmp_path / "req.toml"
    req.write_text(text)
    return CliRunner().invoke(cli, ["--db", str(store), "design", str(req), *args])


def check_design_shape(d, meets):
    # docs/json.md
    assert set(d) >= {"rank", "topology", "transistor", "parts", "metrics", "meets_spec", "score"}
    assert d["meets_spec"] is meets
    for _role, p in d["parts"].items():
        assert set(p) >= {"value", "label", "pieces"}
        for piece in p["pieces"]:
            assert set(piece) >= {"id", "count", "value", "location"}
            assert isinstance(piece["count"], int) and piece["count"] >= 1
    for key in ("gain_db", "f_low_hz", "f_high_hz", "ic_a", "vce_v", "zin_ohm", "zout_ohm",
                "ic_drift_pct", "swing_vpk", "thd_pct", "vb_v", "ve_v", "vc_v", "vbe_v"):
        assert key in d["metrics"]
    if not meets:
        assert d["violations"]


def test_json_shape_and_ranks(store, tmp_path):
    r = run(store, tmp_path, REQUEST, "--top", "3", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert set(out) >= {"request", "feasible", "designs", "nearest_misses", "unlock"}
    assert out["feasible"] is True
    assert [d["rank"] for d in out["designs"]] == list(range(1, len(out["designs"]) + 1))
    assert len(out["designs"]) <= 3
    scores = [d["score"] for d in out["designs"]]
    assert scores == sorted(scores)
    for d in out["designs"]:
        check_design_shape(d, True)
        assert -0.92 - 2.0 <= d["metrics"]["gain_db"] <= -0.92 + 2.0 + 0.01


def test_table_shows_bins_and_reason(store, tmp_path):
    r = run(store, tmp_path, REQUEST, "--top", "2")
    assert r.exit_code == 0, r.output
    assert "@A" in r.stdout and "operating point" in r.stdout
    assert "#1" in r.stdout


def test_infeasible_request_is_an_answer(store, tmp_path, monkeypatch):
    import optimiser.search.suggestions as misses

    monkeypatch.setattr(misses, "MISS_BUDGET_S", 5.0)     # keep the suite quick
    monkeypatch.setattr(misses, "BUY_BUDGET_S", 2.0)
    text = REQUEST.replace("f_low_max_hz = 100", "f_low_max_hz = 0.5")
    r = run(store, tmp_path, text, "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["feasible"] is False and out["designs"] == []
    assert out["nearest_misses"], out
    for d in out["nearest_misses"]:
        check_design_shape(d, False)
    assert out["unlock"]


def test_no_passband_exits_2_with_one_line(store, tmp_path):
    r = run(store, tmp_path, REQUEST + "f_high_min_hz = 50\n")
    assert r.exit_code == 2
    lines = [x for x in r.stderr.splitlines() if x.strip()]
    assert len(lines) == 1 and "req.toml" in lines[0] and "f_high_min_hz" in lines[0]

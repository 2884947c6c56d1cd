"""The demo drawer and `drawerfit demo`."""

from __future__ import annotations

import re

import pytest
from click.testing import CliRunner

from drawerfit.cli import cli
from drawerfit.commands.demo import demo_csv_path, demo_store
from inventory.tabular import read_stock_csv


@pytest.fixture(scope="module")
def demo_parts():
    with demo_csv_path() as p:
        return [row.part for row in read_stock_csv(p)]


def test_demo_runs_and_shows_the_drawer(tmp_path, monkeypatch):
    own = tmp_path / "mine.sqlite"
    result = CliRunner().invoke(cli, ["--db", str(own), "demo"], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    for words in ("Resistors", "Capacitors", "Transistors", "GP-N1", "4k7", "470u",
                  "electrolytic"):
        assert words in result.stdout
    assert not own.exists()                 # the demo never touches the user's store


def test_demo_save_csv_writes_an_importable_file(tmp_path):
    target = tmp_path / "demo.csv"
    result = CliRunner().invoke(cli, ["demo", "--save-csv", str(target)])
    assert result.exit_code == 0
    assert len(read_stock_csv(target)) > 50


def test_demo_store_is_sound():
    with demo_store() as store:
        assert store.check() == []
        assert store.low()                  # a few rows sit below their restock level


def test_demo_resistors_are_e12_values_per_iec_60063(demo_parts):
    """Every 5 % resistor of the demo is an E12 value (checked with the `eseries`
    package, an independent implementation of IEC 60063), 10 R to 1 M, with gaps."""
    from eseries import E12, erange

    e12 = {round(v, 6) for v in erange(E12, 10, 1.0e6 + 1)}
    r5 = {round(p.value, 6) for p in demo_parts if p.kind == "resistor" and p.tolerance == 0.05
          and p.power_w == 0.25}
    assert r5 <= e12
    assert min(r5) == 10 and max(r5) == 1e6
    assert len(e12 - r5) >= 3                               # some values missing
    assert any(p.qty == 1 for p in demo_parts if p.kind == "resistor")


def test_demo_capacitors_and_transistors_are_the_invented_scenario(demo_parts):
    caps = [p for p in demo_parts if p.kind == "capacitor"]
    ceramic = [p.value for p in caps if p.dielectric in ("c0g", "x7r")]
    film = [p.value for p in caps if p.dielectric == "film"]
    elec = [p for p in caps if p.dielectric == "electrolytic"]
    assert min(ceramic) == pytest.approx(10e-12) and max(ceramic) == pytest.approx(100e-9)
    assert min(film) == pytest.approx(100e-9) and max(film) == pytest.approx(1e-6)
    assert min(p.value for p in elec) == pytest.approx(1e-6)
    assert max(p.value for p in elec) == pytest.approx(470e-6)
    assert {p.voltage_v for p in elec} == {10.0, 16.0, 25.0, 63.0}
    trs = [p for p in demo_parts if p.kind == "npn"]
    assert 2 <= len(trs) <= 3
    for t in trs:
        # invented labels only: letters, a dash, a letter and digit (no real type numbers)
        assert re.fullmatch(r"[A-Z]{2}-N\d", t.label)
        # figures that make sense for a small-signal NPN (common practice) ...
        assert 100 <= t.hfe_min < t.hfe_max <= 500
        assert 50e6 <= t.ft <= 500e6 and 1e-12 <= t.cob <= 10e-12
        assert 60 <= t.vaf <= 120
        assert 20 <= t.vceo <= 60 and 0.05 <= t.ic_max <= 0.3 and 0.2 <= t.pd <= 0.6
        # ... but invented: not the hFE groups or the limit set of a widely sold type
        assert (t.hfe_min, t.hfe_max) not in {(110, 220), (200, 450), (420, 800)}
        assert (t.vceo, t.ic_max) != (40, 0.2) and (t.ft, t.cob) != (300e6, 4e-12)

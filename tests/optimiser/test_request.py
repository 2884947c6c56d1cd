"""Request and circuit files: values parsed, bad input named by file, line and key."""

from __future__ import annotations

import math

import pytest

from inventory.errors import InputError
from optimiser.circuit_file import parse_circuit
from optimiser.request import load_request, parse_request


def test_values_with_prefixes_and_defaults():
    r = parse_request({"topology": "CE", "supply_v": "12V", "load_ohm": "10k",
                       "source_ohm": "600", "f_high_min_hz": "100k", "gain_db": 20,
                       "temp_c": [0, 50]})
    assert r.topology == "ce" and r.supply_v == 12 and r.load_ohm == 10e3
    assert r.f_high_min_hz == 100e3 and math.isclose(r.gain, 10.0)
    assert r.mid_hz == 1000 and r.input_vpk == 0.01 and r.gain_tol_db == 1.0
    assert r.temp_c == (0.0, 50.0)


def test_gain_in_volts_per_volt():
    assert parse_request({"topology": "cc", "supply_v": 9, "gain": 0.9}).gain == 0.9


@pytest.mark.parametrize("mapping, field", [
    ({"topology": "ce", "supply_v": 12, "colour": 1}, "colour"),
    ({"topology": "xx", "supply_v": 12}, "topology"),
    ({"topology": "ce"}, "supply_v"),
    ({"topology": "ce", "supply_v": -5}, "supply_v"),
    ({"topology": "ce", "supply_v": 1e6}, "supply_v"),
    ({"topology": "ce", "supply_v": 12, "gain": 10, "gain_db": 20}, "gain"),
    ({"topology": "ce", "supply_v": 12, "temp_c": [50, 0]}, "temp_c"),
    ({"topology": "ce", "supply_v": 12, "load_ohm": "4x7"}, "load_ohm"),
    ({"topology": "ce", "supply_v": 12, "builds": 1.5}, "builds"),
    ({"topology": "ce", "supply_v": 12, "allow_combos": "yes"}, "allow_combos"),
])
def test_bad_requests_name_the_key(mapping, field):
    with pytest.raises(InputError) as e:
        parse_request(mapping, file="r.toml")
    assert e.value.field == field and e.value.file == "r.toml"


def test_line_numbers_from_the_file(tmp_path):
    p = tmp_path / "r.toml"
    p.write_text('topology = "ce"\nsupply_v = 12\n\nmid_hz = "fast"\n')
    with pytest.raises(InputError) as e:
        load_request(p)
    assert e.value.line == 4 and e.value.field == "mid_hz"
    assert str(e.value).startswith(f"{p}:4: mid_hz:")


def test_toml_syntax_error_has_a_line(tmp_path):
    p = tmp_path / "r.toml"
    p.write_text('topology = "ce"\nsupply_v = = 12\n')
    with pytest.raises(InputError) as e:
        load_request(p)
    assert e.value.line == 2


BASE = {"topology": "ce", "supply_v": 12,
        "parts": {"R1": "47k", "R2": "10k", "RC": "4k7", "RE": "1k", "C_IN": "1u",
                  "C_OUT": "104"},
        "transistor": {"hfe_min": 100, "hfe_max": 300, "ft": "250M", "cob": "4p"}}


def test_circuit_parts_and_inline_transistor():
    c = parse_circuit(BASE)
    assert c.values["RC"] == 4700 and c.values["C_OUT"] == pytest.approx(100e-9)
    assert c.transistor.ft == 250e6 and c.transistor.cob == pytest.approx(4e-12)
    assert c.tolerances["R1"] == 0.05 and c.tolerances["C_IN"] == 0.20


@pytest.mark.parametrize("change, field", [
    ({"parts": {**BASE["parts"], "R9": "1k"}}, "parts.R9"),
    ({"parts": {k: v for k, v in BASE["parts"].items() if k != "RC"}}, "parts"),
    ({"parts": {**BASE["parts"], "R1": "47q"}}, "parts.R1"),
    ({"transistor": {"hfe_min": 100}}, "transistor.hfe_max"),
    ({"transistor": "any"}, "transistor"),
    ({"tolerances": {"R1": "lots"}}, "tolerances.R1"),
])
def test_bad_circuits_name_the_field(change, field):
    with pytest.raises(InputError) as e:
        parse_circuit({**BASE, **change}, file="c.toml")
    assert e.value.field == field


def test_stock_references_resolved_through_the_store():
    from inventory.parts import Resistor, Transistor

    class FakeStore:
        def item(self, i):
            return Resistor(value=4700.0, qty=5, tolerance=0.01, power_w=0.5, id=i)

        def transistor(self, label):
            return Transistor(label, hfe_min=110, hfe_max=220)

    c = parse_circuit({**BASE, "parts": {**BASE["parts"], "RC": "#12"}, "transistor": "GP-N1"},
                      store=FakeStore)
    assert c.values["RC"] == 4700 and c.stock_ids["RC"] == 12
    assert c.tolerances["RC"] == 0.01 and float(c.ratings.power_w["RC"]) == 0.5
    assert c.transistor.label == "GP-N1"


def test_unstated_targets_get_the_documented_defaults():
    from optimiser.request import DEFAULTS

    r = parse_request({"topology": "cc", "supply_v": 12})
    assert r.assumed == ("thd_max_pct", "ic_min_a")
    assert r.thd_max_pct == DEFAULTS["thd_max_pct"] and r.ic_min_a == DEFAULTS["ic_min_a"]
    assert r.to_json()["assumed"] == ["thd_max_pct", "ic_min_a"]
    # a ce request also gets a gain target (DEFAULT_GAIN_DB)
    assert parse_request({"topology": "ce", "supply_v": 12}).assumed == (
        "gain_db", "thd_max_pct", "ic_min_a")
    # a value given is kept and not assumed; "none" switches a default off
    r = parse_request({"topology": "ce", "supply_v": 12, "thd_max_pct": 2, "ic_min_a": "none",
                       "gain_db": "none"})
    assert r.assumed == () and r.thd_max_pct == 2.0 and r.ic_min_a is None and r.gain is None
    assert parse_request({"topology": "cb", "supply_v": 9, "ic_min_a": "250u"}).ic_min_a \
        == pytest.approx(250e-6)
    for bad in (0, -1e-3, "abc", True):
        with pytest.raises(InputError) as e:
            parse_request({"topology": "ce", "supply_v": 12, "ic_min_a": bad})
        assert e.value.field == "ic_min_a"


def test_several_bad_keys_are_all_reported():
    from inventory.errors import InputErrors

    text = 'topology = "ce"\nsupply_v = 0\nfoo = 1\nthd_max_pct = 200\nbar = 2\n'
    import tomllib
    with pytest.raises(InputErrors) as e:
        parse_request(tomllib.loads(text), file="r.toml", text=text)
    got = [(x.line, x.field) for x in e.value.errors]
    assert got == [(2, "supply_v"), (3, "foo"), (4, "thd_max_pct"), (5, "bar")]
    assert str(e.value).splitlines()[0].startswith("r.toml:2: supply_v:")

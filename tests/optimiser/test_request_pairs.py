"""Request keys of two-transistor circuits (docs/requests.md): read for analyse,
refused with the reason in a request to design."""

from __future__ import annotations

import pytest

from inventory.errors import InputError
from optimiser.request import parse_request


def test_chain_defaults_to_capacitor_coupling_and_writes_the_list():
    r = parse_request({"topology": ["CE", "cc"], "supply_v": 12}, pairs=True)
    assert r.topology == ("ce", "cc") and r.coupling == "capacitor" and r.is_pair
    j = r.to_json()
    assert j["topology"] == ["ce", "cc"] and j["coupling"] == "capacitor"


def test_cascode_and_zout_target():
    r = parse_request({"topology": "cascode", "supply_v": 12, "zout_max_ohm": "4k7"},
                      pairs=True)
    assert r.is_pair and r.coupling is None and r.zout_max_ohm == 4700.0


def test_single_stage_json_keeps_its_keys_and_gains_zout_max():
    r = parse_request({"topology": "ce", "supply_v": 12})
    j = r.to_json()
    assert j["topology"] == "ce" and "coupling" not in j and j["zout_max_ohm"] is None


@pytest.mark.parametrize("mapping, field", [
    ({"topology": ["ce", "cc"], "supply_v": 12}, "topology"),
    ({"topology": "cascode", "supply_v": 12}, "topology"),
    ({"topology": "ce", "supply_v": 12, "zout_max_ohm": 100}, "zout_max_ohm"),
    ({"topology": "ce", "supply_v": 12, "coupling": "direct"}, "coupling"),
])
def test_a_request_to_design_refuses_what_only_analyse_reads(mapping, field):
    with pytest.raises(InputError) as e:
        parse_request(mapping)
    assert e.value.field == field


@pytest.mark.parametrize("mapping", [
    {"topology": ["ce"], "supply_v": 12},
    {"topology": ["ce", "cc", "cc"], "supply_v": 12},
    {"topology": ["cb", "cc"], "supply_v": 12, "coupling": "direct"},
    {"topology": "cascode", "supply_v": 12, "coupling": "capacitor"},
    {"topology": "ce", "supply_v": 12, "coupling": "capacitor"},
])
def test_impossible_chains(mapping):
    with pytest.raises(InputError):
        parse_request(mapping, pairs=True)

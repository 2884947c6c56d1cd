"""The build-list file: what it accepts, and one clear error for each bad key or value."""

from __future__ import annotations

import textwrap

import pytest

from inventory.errors import InputError
from optimiser.buildlist import load_buildlist

PREAMP = """\
topology = "ce"
supply_v = 12.0
gain_db = 20.0
"""


def write(tmp_path, text: str, name: str = "list.toml"):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "reqs").mkdir()
    (tmp_path / "reqs" / "preamp.toml").write_text(PREAMP, encoding="utf-8")
    return tmp_path


def test_good_list_with_file_and_inline_requests(folder):
    p = write(folder, """\
        [[build]]
        request = "reqs/preamp.toml"
        count = 4

        [[build]]
        count = 2
        identical = false
        name = "buffer"
        [build.request]
        topology = "cc"
        supply_v = 9

        [purchase]
        series = "e12"
        pack = 25
        line_cost = 0
        resistor_tolerance = "5%"
        capacitor_voltage = "25V"
        """)
    bl = load_buildlist(p)
    assert [b.name for b in bl.builds] == ["reqs/preamp.toml", "buffer"]
    assert [b.count for b in bl.builds] == [4, 2]
    assert [b.identical for b in bl.builds] == [True, False]
    assert bl.builds[0].request.topology == "ce" and bl.builds[1].request.supply_v == 9.0
    assert bl.builds[0].request.builds == 4
    assert bl.total_copies == 6
    pu = bl.purchase
    assert (pu.series, pu.cap_series, pu.pack, pu.line_cost) == ("E12", "E6", 25, 0.0)
    assert pu.resistor_tolerance == pytest.approx(0.05)
    assert pu.capacitor_voltage == pytest.approx(25.0)
    # defaults: capacitor tolerance not given means by dielectric (docs/plan.md)
    assert pu.capacitor_tolerance is None
    assert pu.resistor_power == pytest.approx(0.25)


def test_no_purchase_table_means_stock_only(folder):
    p = write(folder, """\
        [[build]]
        request = "reqs/preamp.toml"
        """)
    bl = load_buildlist(p)
    assert bl.purchase is None
    assert bl.builds[0].count == 1


@pytest.mark.parametrize("text, field, line", [
    ('[[build]]\nrequest = "reqs/preamp.toml"\ncopies = 3\n', "build[1].copies", 3),
    ('[[build]]\nrequest = "reqs/preamp.toml"\ncount = 0\n', "build[1].count", 3),
    ('[[build]]\nrequest = "reqs/preamp.toml"\ncount = "four"\n', "build[1].count", 3),
    ('[[build]]\nrequest = "reqs/preamp.toml"\nidentical = "yes"\n', "build[1].identical", 3),
    ('[[build]]\nrequest = "reqs/missing.toml"\n', "build[1].request", 2),
    ('[[build]]\ncount = 2\n', "build[1].request", 1),
    ('[[build]]\nrequest = "reqs/preamp.toml"\n\n[purchase]\nseries = "E7"\n',
     "purchase.series", 5),
    ('[[build]]\nrequest = "reqs/preamp.toml"\n\n[purchase]\npack = 0\n', "purchase.pack", 5),
    ('[[build]]\nrequest = "reqs/preamp.toml"\n\n[purchase]\nline_cost = -1\n',
     "purchase.line_cost", 5),
    ('[[build]]\nrequest = "reqs/preamp.toml"\n\n[purchase]\nshipping = 4\n',
     "purchase.shipping", 5),
    ('[[build]]\nrequest = "reqs/preamp.toml"\n\n[purchase]\nresistor_tolerance = "lots"\n',
     "purchase.resistor_tolerance", 5),
    ('[[build]]\nrequest = "reqs/preamp.toml"\n[[build]]\nrequest = "reqs/preamp.toml"\n'
     'count = 1.5\n', "build[2].count", 5),
    ('budget = 3\n[[build]]\nrequest = "reqs/preamp.toml"\n', "budget", 1),
])
def test_bad_key_or_value_names_file_line_and_key(folder, text, field, line):
    p = write(folder, text)
    with pytest.raises(InputError) as info:
        load_buildlist(p)
    e = info.value
    assert e.field == field
    assert e.file == str(p)
    assert e.line == line
    assert "\n" not in str(e)
    assert str(e).startswith(f"{p}:{line}: {field}: ")


def test_two_builds_with_one_name_are_refused(folder):
    p = write(folder, '[[build]]\nrequest = "reqs/preamp.toml"\n'
                      '[[build]]\nrequest = "reqs/preamp.toml"\n')
    with pytest.raises(InputError, match="name"):
        load_buildlist(p)


def test_not_toml_gives_the_line(folder):
    p = write(folder, '[[build]]\nrequest = "reqs/preamp.toml\n')
    with pytest.raises(InputError) as info:
        load_buildlist(p)
    assert info.value.line == 2


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        load_buildlist(tmp_path / "nope.toml")


def test_bad_inline_request_is_named_inside_the_build(folder):
    p = write(folder, """\
        [[build]]
        count = 2
        [build.request]
        topology = "ce"
        supply_v = "twelve"
        """)
    with pytest.raises(InputError) as info:
        load_buildlist(p)
    assert info.value.field.startswith("build[1].request")
    assert info.value.file == str(p)


def test_every_bad_key_of_an_inline_request_is_reported(folder):
    from inventory.errors import InputErrors

    p = write(folder, """\
        [[build]]
        count = 1
        [build.request]
        topology = "cc"
        supply_v = -9
        colour = "red"
        """)
    with pytest.raises(InputErrors) as e:
        load_buildlist(p)
    fields = {x.field for x in e.value.errors}
    assert fields == {"build[1].request.supply_v", "build[1].request.colour"}
    assert all(x.file and x.file.endswith("list.toml") and x.line for x in e.value.errors)
    # the request defaults apply to a build list's requests as to a request file
    ok = write(folder, """\
        [[build]]
        request = "reqs/preamp.toml"
        """, name="ok.toml")
    assert set(load_buildlist(ok).builds[0].request.assumed) == {"thd_max_pct", "ic_min_a"}


def test_chain_requests_are_read_in_file_and_inline_form(folder):
    (folder / "reqs" / "chain.toml").write_text(
        'topology = ["ce", "cc"]\nsupply_v = 12.0\ngain_db = 40.0\nzout_max_ohm = "100"\n',
        encoding="utf-8")
    p = write(folder, """\
        [[build]]
        request = "reqs/chain.toml"
        count = 2

        [[build]]
        name = "direct"
        [build.request]
        topology = ["CE", "cc"]
        coupling = "direct"
        supply_v = 12.0
        gain_db = 40.0
        """)
    bl = load_buildlist(p)
    a, b = bl.builds
    assert a.request.topology == ("ce", "cc") and a.request.coupling == "capacitor"
    assert a.request.zout_max_ohm == 100.0 and a.count == a.request.builds == 2
    assert b.request.topology == ("ce", "cc") and b.request.coupling == "direct"


def test_zout_target_in_a_single_stage_entry_names_its_line(folder):
    p = write(folder, """\
        [[build]]
        [build.request]
        topology = "cc"
        supply_v = 12.0
        zout_max_ohm = 50
        """)
    with pytest.raises(InputError) as e:
        load_buildlist(p)
    assert e.value.line == 5 and e.value.field == "build[1].request.zout_max_ohm"

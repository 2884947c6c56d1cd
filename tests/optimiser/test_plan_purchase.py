"""Purchasable values: which are offered, and the ratings bought parts carry."""

from __future__ import annotations

import eseries
import pytest

from inventory.parts import Capacitor, Resistor, StockSnapshot
from optimiser.purchase import (
    DEFAULT_CAPACITOR_RANGE,
    DEFAULT_RESISTOR_RANGE,
    VIRTUAL_QTY,
    PurchaseOptions,
    augment,
)


def drawer():
    return StockSnapshot(
        resistors=(Resistor(220.0, 5, id=1), Resistor(47e3, 5, id=2)),
        capacitors=(Capacitor(100e-9, 3, id=3), Capacitor(47e-6, 3, dielectric="electrolytic",
                                                           id=4)))


def test_values_follow_iec_60063_within_the_drawer_span():
    snap, cat = augment(drawer(), PurchaseOptions(series="E24", cap_series="E6"))
    bought_r = sorted(p.value for p in cat.items.values() if p.kind == "resistor")
    bought_c = sorted(p.value for p in cat.items.values() if p.kind == "capacitor")
    # IEC 60063 values as the eseries package gives them (outside reference)
    ref_r = [float(v) for v in eseries.erange(eseries.E24, 220.0, 47e3)]
    ref_c = [float(v) for v in eseries.erange(eseries.E6, 100e-9, 47e-6)]
    assert bought_r == pytest.approx(ref_r, rel=1e-9)
    assert bought_c == pytest.approx(ref_c, rel=1e-9)
    assert len(snap.resistors) == 2 + len(ref_r)
    assert len(snap.capacitors) == 2 + len(ref_c)


def test_virtual_rows_are_negative_plentiful_and_rated_as_asked():
    opts = PurchaseOptions(series="E12", resistor_tolerance=0.02, resistor_power=0.5,
                           capacitor_tolerance=0.05, capacitor_voltage=63.0)
    snap, cat = augment(drawer(), opts)
    virtual = [r for r in (*snap.resistors, *snap.capacitors) if r.id is not None and r.id < 0]
    assert virtual and all(r.qty == VIRTUAL_QTY and r.location == "to order" for r in virtual)
    assert len({r.id for r in virtual}) == len(virtual) == len(cat.items)
    for r in snap.resistors:
        if r.id < 0:
            assert (r.tolerance, r.power_w) == (0.02, 0.5)
    for c in snap.capacitors:
        if c.id < 0:
            assert (c.tolerance, c.voltage_v) == (0.05, 63.0)
            # common practice: electrolytic from 1 µF up, ceramic below
            assert c.polarised == (c.value >= 1e-6)


def test_empty_drawer_offers_the_default_ranges():
    _, cat = augment(StockSnapshot(), PurchaseOptions(series="E6", cap_series="E3"))
    r = sorted(p.value for p in cat.items.values() if p.kind == "resistor")
    c = sorted(p.value for p in cat.items.values() if p.kind == "capacitor")
    assert r[0] == pytest.approx(DEFAULT_RESISTOR_RANGE[0])
    assert r[-1] == pytest.approx(DEFAULT_RESISTOR_RANGE[1])
    assert c[0] == pytest.approx(DEFAULT_CAPACITOR_RANGE[0])
    assert c[-1] == pytest.approx(DEFAULT_CAPACITOR_RANGE[1])
    assert len(r) == len(list(eseries.erange(eseries.E6, 10.0, 1e6)))


def test_no_purchase_table_leaves_the_drawer_alone():
    d = drawer()
    snap, cat = augment(d, None)
    assert snap is d and not cat.items


def test_prices():
    opts = PurchaseOptions(resistor_price=0.02, capacitor_price=0.1, pack=10)
    _, cat = augment(drawer(), opts)
    for p in cat.items.values():
        assert p.pack_price == pytest.approx(0.2 if p.kind == "resistor" else 1.0)


def test_bought_electrolytics_default_to_20_percent_and_others_keep_10():
    """Common practice: aluminium electrolytics are sold at ±20 % (IEC 60062 letter M),
    small non-polarised capacitors at ±10 % (letter K)."""
    snap, cat = augment(drawer(), PurchaseOptions())
    bought = [c for c in snap.capacitors if c.id < 0]
    assert {c.polarised for c in bought} == {True, False}
    for c in bought:
        assert c.tolerance == pytest.approx(0.20 if c.polarised else 0.10), c
        assert cat.items[c.id].tolerance == c.tolerance


def test_a_stated_capacitor_tolerance_applies_to_every_bought_capacitor(tmp_path):
    from optimiser.buildlist import load_buildlist

    req = 'topology = "cc"\nsupply_v = 9\n'
    for extra, want_e, want_c in (("", 0.20, 0.10), ('capacitor_tolerance = "5%"\n', 0.05, 0.05)):
        p = tmp_path / "list.toml"
        p.write_text(f'[[build]]\ncount = 1\n[build.request]\n{req}\n[purchase]\n{extra}')
        snap, _ = augment(drawer(), load_buildlist(p).purchase)
        bought = [c for c in snap.capacitors if c.id < 0]
        assert [c.tolerance for c in bought if c.polarised] == \
            pytest.approx([want_e] * sum(c.polarised for c in bought))
        assert [c.tolerance for c in bought if not c.polarised] == \
            pytest.approx([want_c] * sum(not c.polarised for c in bought))

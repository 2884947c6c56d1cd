"""Backup and restore: a restore into an empty store reproduces stock,
transistor types, builds, orders and the history, ids included."""

from __future__ import annotations

import pytest

from inventory.errors import InputError
from inventory.parts import Resistor, Transistor
from inventory.store import open_store


def _fill(store, tmp_path):
    csv = tmp_path / "s.csv"
    csv.write_text("kind,value,qty,location,min_qty,hfe_min,hfe_max,ft\n"
                   "resistor,4k7,10,A1,4,,,\ncapacitor,10u,5,B1,,,,\n"
                   "npn,GP-N1,6,C1,,110,220,250M\n")
    batch = store.import_csv(csv)
    r = store.add_item(Resistor(value=47e3, qty=8, tolerance=0.01, location="=A2"))
    t = store.transistor("GP-N1").id
    store.adjust(r, -3, "bench")
    store.commit_builds([
        {"request": "a.toml", "copies": 2, "design": {"rank": 1, "v": [1.5, None]},
         "pieces": {r: 2, t: 2}, "orders": [{"kind": "resistor", "value": 2200.0, "qty": 10}]},
        {"request": "b.toml", "copies": 1, "design": {}, "pieces": {t: 1}}])
    b2 = store.commit_builds([{"request": "c.toml", "copies": 1, "design": {},
                               "pieces": {t: 1}}])
    store.undo_build(b2)
    parcel = tmp_path / "parcel.csv"                 # part of the 2k2 order arrives
    parcel.write_text("kind,value,qty,location\nresistor,2k2,4,A9\n")
    store.receive(parcel)
    return batch


def test_backup_then_restore_into_an_empty_store_reproduces_everything(store, tmp_path):
    _fill(store, tmp_path)
    backup = tmp_path / "backup.bin"
    kind = store.backup(backup)
    assert kind == ("sqlite" if store.dialect == "sqlite" else "json")
    with pytest.raises(InputError, match="already exists"):
        store.backup(backup)
    target = open_store(str(tmp_path / "restored.sqlite"))
    try:
        target.restore(backup)
        assert target.dump() == store.dump()
        assert target.dump()["order_arrivals"] != []
        assert [(o["arrived"], o["due"]) for o in target.pending_orders()] == [(4, 10)]
        assert target.check() == []
        # the restored store goes on: new ids follow the old ones
        new_batch = target.adjust(1, -1, "after restore")
        assert new_batch == max(h["batch"] for h in store.history()) + 1
        with pytest.raises(InputError, match="not empty"):
            target.restore(backup)
    finally:
        target.close()


def test_restore_into_postgresql_keeps_ids_going(pg_schema_url, tmp_path):
    src = open_store(str(tmp_path / "src.sqlite"))
    _fill(src, tmp_path)
    src.backup(tmp_path / "b.sqlite")
    dst = open_store(pg_schema_url)
    try:
        dst.restore(tmp_path / "b.sqlite")
        assert dst.dump() == src.dump()
        new_item = dst.add_item(Transistor(label="NEW-1", hfe_min=50, hfe_max=90, qty=1))
        assert new_item == max(p.id for p in src.parts()) + 1
        assert dst.check() == []
    finally:
        dst.close()
        src.close()


def test_restore_refuses_a_file_that_is_not_a_backup(store, tmp_path):
    junk = tmp_path / "junk.json"
    junk.write_text("{\"hello\": 1}")
    with pytest.raises(InputError, match="not a drawerfit backup"):
        store.restore(junk)
    with pytest.raises(InputError, match="no such backup"):
        store.restore(tmp_path / "absent")

"""The store: movements, undo, builds, orders — on SQLite and on PostgreSQL.

Every test runs twice through the ``store`` fixture (tests/conftest.py).  Each
checks the store's own invariant afterwards: every quantity equals the sum of
its movements and none is negative (``Store.check``).
"""

from __future__ import annotations

from dataclasses import replace

import pytest

from inventory.errors import InputError, StockShortage
from inventory.parts import Capacitor, Resistor, Transistor

CSV = """kind,value,qty,tolerance,power,voltage,dielectric,location,min_qty,hfe_min,hfe_max,ft,cob
resistor,4k7,10,,,,,A1,4,,,,
resistor,10k,6,1%,,,,A2,,,,,
resistor,10k,3,,0.5W,,,A3,,,,,
capacitor,100n,20,10%,,,x7r,B1,,,,,
capacitor,10u,5,,,25V,electrolytic,B2,,,,,
npn,GP-N1,8,,,,,C1,,110,220,250M,4p
"""


@pytest.fixture
def stock_csv(tmp_path):
    p = tmp_path / "stock.csv"
    p.write_text(CSV, encoding="utf-8")
    return p


def _qty(store) -> dict[int, int]:
    return {p.id: p.qty for p in store.parts()}


def _ident(part):
    """A part without its id (ids differ between stores)."""
    return replace(part, id=None)


def test_import_creates_items_with_logged_movements(store, stock_csv):
    batch = store.import_csv(stock_csv)
    snap = store.snapshot()
    assert [r.value for r in snap.resistors] == [4700.0, 10e3, 10e3]
    assert snap.resistors[0].min_qty == 4
    assert snap.capacitors[1].polarised
    assert store.transistor("GP-N1").cob == pytest.approx(4e-12)
    assert store.transistor("nope") is None
    entry = store.history()[0]
    assert entry == store.batch(batch)
    assert entry["batch"] == batch and entry["kind"] == "import"
    assert sum(m["change"] for m in entry["movements"]) == 52
    assert store.check() == []


def test_import_twice_adds_to_the_same_items(store, stock_csv):
    store.import_csv(stock_csv)
    ids = sorted(_qty(store))
    store.import_csv(stock_csv)
    assert sorted(_qty(store)) == ids
    assert sum(_qty(store).values()) == 104
    assert store.check() == []


def test_transistor_label_with_other_figures_is_refused(store, stock_csv, tmp_path):
    store.import_csv(stock_csv)
    before = store.parts()
    other = tmp_path / "other.csv"
    other.write_text("kind,value,qty,hfe_min,hfe_max\nresistor,1k,5,,\nnpn,GP-N1,2,50,90\n")
    with pytest.raises(InputError, match="other figures") as info:
        store.import_csv(other)
    assert info.value.line == 3
    assert store.parts() == before          # the good resistor row was not booked either


def test_bad_row_in_50_changes_nothing(store, stock_csv, tmp_path):
    store.import_csv(stock_csv)
    before, hist = store.parts(), store.history()
    lines = ["kind,value,qty,location"]
    lines += [f"resistor,{v}k,{i + 1},D{i}" for i, v in enumerate(range(1, 51))]
    lines[37] = "resistor,4k7,-5,D36"              # line 38 of the file
    bad = tmp_path / "fifty.csv"
    bad.write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError) as info:
        store.import_csv(bad)
    assert (info.value.line, info.value.field) == (38, "qty")
    assert store.parts() == before and store.history() == hist


def test_adjust_and_shortage(store, stock_csv):
    store.import_csv(stock_csv)
    item = store.snapshot().resistors[0]
    store.adjust(item.id, -7, "bench 3")
    assert store.item(item.id).qty == 3
    with pytest.raises(StockShortage, match="have 3"):
        store.adjust(item.id, -4, "bench 4")
    assert store.item(item.id).qty == 3
    with pytest.raises(InputError, match="no stock item"):
        store.adjust(9999, 1, "x")
    with pytest.raises(InputError):
        store.item(9999)
    assert store.check() == []


def test_undo_of_an_import(store, stock_csv):
    store.import_csv(stock_csv)
    second = store.import_csv(stock_csv)
    undo = store.undo(second)
    assert sum(_qty(store).values()) == 52
    assert store.history()[0]["batch"] == undo
    assert store.history()[1]["undone_by"] == undo
    with pytest.raises(InputError, match="already undone"):
        store.undo(second)
    with pytest.raises(InputError, match="itself an undo"):
        store.undo(undo)
    with pytest.raises(InputError, match="no batch"):
        store.undo(12345)
    assert store.check() == []


def test_undo_refused_when_it_would_go_negative(store, stock_csv):
    batch = store.import_csv(stock_csv)
    item = store.snapshot().resistors[0]
    store.adjust(item.id, -2, "used")
    before = _qty(store)
    with pytest.raises(StockShortage, match="have 8, undo needs 10"):
        store.undo(batch)
    assert _qty(store) == before
    assert store.history()[1]["undone_by"] is None
    assert store.check() == []


def _build(pieces, request="amp.toml", copies=1, **extra):
    return {"request": request, "copies": copies, "design": {"rank": 1, "parts": {}},
            "pieces": pieces, **extra}


def test_commit_builds_refusing_a_shortage_changes_nothing(store, stock_csv):
    store.import_csv(stock_csv)
    r = store.snapshot().resistors[0]          # 10 pieces
    q = store.transistor("GP-N1")              # 8 pieces
    before, hist = _qty(store), store.history()
    # each build alone fits; together they need 12 of the 10 resistors
    with pytest.raises(StockShortage) as info:
        store.commit_builds([_build({r.id: 6, q.id: 2}), _build({r.id: 6, q.id: 2})])
    assert "have 10, need 12" in str(info.value)
    assert f"id {r.id}" in str(info.value)
    assert _qty(store) == before and store.history() == hist
    assert store.list_builds() == []


def test_commit_and_undo_build_restores_exactly(store, stock_csv):
    """One commit is one build: a line per request, undone in one step."""
    store.import_csv(stock_csv)
    snap = store.snapshot()
    r, c, q = snap.resistors[0], snap.capacitors[0], snap.transistors[0]
    before = _qty(store)
    bid = store.commit_builds([
        _build({r.id: 4, c.id: 6, q.id: 2}, copies=2),
        _build({r.id: 1, q.id: 1}, request="buffer.toml",
               orders=[{"kind": "resistor", "value": 2200.0, "qty": 10, "used": 1,
                        "tolerance": 0.01, "power": 0.25}]),
    ])
    after = _qty(store)
    assert after[r.id] == before[r.id] - 5 and after[q.id] == before[q.id] - 3
    listed = store.list_builds()
    assert [(b["id"], b["request"], b["copies"], b["undone"]) for b in listed] == [
        (bid, "amp.toml, buffer.toml", 3, False)]
    shown = store.build(bid)
    assert [(ln["request"], ln["copies"], ln["pieces"]) for ln in shown["lines"]] == [
        ("amp.toml", 2, {r.id: 4, c.id: 6, q.id: 2}), ("buffer.toml", 1, {r.id: 1, q.id: 1})]
    assert shown["lines"][0]["design"] == {"rank": 1, "parts": {}}
    assert shown["pieces"] == {r.id: 5, c.id: 6, q.id: 3}
    assert [(o["value"], o["used"], o["state"]) for o in shown["orders"]] == [
        (2200.0, 1, "awaited")]
    assert [o["value"] for o in store.pending_orders()] == [2200.0]
    assert store.history(1)[0]["kind"] == "build"

    store.undo_build(bid)
    assert _qty(store) == before
    assert store.build(bid)["undone"] is True
    # the build no longer counts on its order: nothing is awaited from it
    assert store.pending_orders() == []
    assert store.build(bid)["orders"][0]["state"] == "cancelled"
    with pytest.raises(InputError, match="already undone"):
        store.undo_build(bid)
    assert store.check() == []


def test_commit_builds_unknown_item_and_bad_design(store, stock_csv):
    store.import_csv(stock_csv)
    with pytest.raises(InputError, match="no stock item"):
        store.commit_builds([_build({99999: 1})])
    with pytest.raises(InputError, match="JSON"):
        store.commit_builds([{"request": "x", "copies": 1, "design": {"f": object()},
                              "pieces": {}}])
    assert store.list_builds() == []


def test_add_item_low_and_min_qty(store):
    rid = store.add_item(Resistor(value=330.0, qty=2, location="E1", min_qty=10))
    again = store.add_item(Resistor(value=330.0, qty=3, location="E1"))
    assert again == rid and store.item(rid).qty == 5
    tid = store.add_item(Transistor(label="T-X", hfe_min=50, hfe_max=100, qty=1))
    empty = store.add_item(Resistor(value=470.0, qty=0, location="E2"))
    assert [p.id for p in store.low()] == [rid, empty]      # an empty bin is listed too
    store.set_min_qty(tid, 4)
    assert {p.id for p in store.low()} == {rid, tid, empty}
    store.set_min_qty(rid, 0)
    assert {p.id for p in store.low()} == {tid, empty}
    assert store.check() == []


def test_receive_books_pieces_and_marks_orders(store, stock_csv, tmp_path):
    store.import_csv(stock_csv)
    store.commit_builds([_build({}, orders=[
        {"kind": "resistor", "value": 2200.0, "qty": 10},
        {"kind": "capacitor", "value": 220e-9, "qty": 10, "voltage": 50.0}])])
    arrived = tmp_path / "arrived.csv"
    arrived.write_text("kind,value,qty,tolerance,location,packs,cost\n"
                       "resistor,2k2,10,1%,A9,1,0.70\n")
    batch = store.receive(arrived)
    assert [o["kind"] for o in store.pending_orders()] == ["capacitor"]
    assert any(p.value == 2200.0 and p.qty == 10 for p in store.snapshot().resistors)
    store.undo(batch)                         # undoing a receipt re-opens the order
    assert len(store.pending_orders()) == 2
    assert store.check() == []


def _parcel(tmp_path, name, rows):
    p = tmp_path / name
    p.write_text("kind,value,qty,tolerance,location,hfe_min,hfe_max,ft,cob\n" + rows)
    return p


def _awaited(store):
    return [(o["id"], o["arrived"], o["due"]) for o in store.pending_orders()]


def test_parcels_count_against_orders_oldest_first(store, stock_csv, tmp_path):
    """Two orders of 2k2 (shares 8 and 10: the first build keeps 2 of its ten) and one
    of a transistor type.  A parcel of 12 closes the older order and counts 4 against
    the newer; one of 20 completes the newer and books the surplus; transistors are
    matched by label.  Counted by hand."""
    store.import_csv(stock_csv)
    store.commit_builds([_build({}, orders=[{"kind": "resistor", "value": 2200.0,
                                             "qty": 10, "used": 2}])])
    store.commit_builds([_build({}, orders=[
        {"kind": "resistor", "value": 2200.0, "qty": 10},
        {"kind": "npn", "label": "GP-N1", "qty": 5}])])
    (a, _, _), (b, _, _), (q, _, _) = _awaited(store)
    assert _awaited(store) == [(a, 0, 8), (b, 0, 10), (q, 0, 5)]
    first = store.receive(_parcel(tmp_path, "p1.csv", "resistor,2k2,12,1%,A9,,,,\n"))
    assert _awaited(store) == [(b, 4, 10), (q, 0, 5)]
    assert [(o["id"], o["pieces"], o["state"]) for o in store.receipt_orders(first)] == [
        (a, 8, "received"), (b, 4, "awaited")]
    second = store.receive(_parcel(tmp_path, "p2.csv", "resistor,2k2,20,1%,A9,,,,\n"
                                   "npn,GP-N1,2,,C1,110,220,250M,4p\n"))
    assert _awaited(store) == [(q, 2, 5)]
    assert [(o["id"], o["pieces"]) for o in store.receipt_orders(second)] == [(b, 6), (q, 2)]
    assert sum(p.qty for p in store.snapshot().resistors if p.value == 2200.0) == 32
    assert store.check() == []
    # undoing the first parcel takes back exactly its counts: the older order is awaited
    # again with nothing, the newer keeps the second parcel's 6 of 10
    store.undo(first)
    assert _awaited(store) == [(a, 0, 8), (b, 6, 10), (q, 2, 5)]
    assert sum(p.qty for p in store.snapshot().resistors if p.value == 2200.0) == 20
    store.undo(second)
    assert _awaited(store) == [(a, 0, 8), (b, 0, 10), (q, 0, 5)]
    assert not any(p.value == 2200.0 for p in store.snapshot().resistors)
    assert store.check() == []


def test_cancelling_a_partly_arrived_order_keeps_what_arrived(store, stock_csv, tmp_path):
    store.import_csv(stock_csv)
    store.commit_builds([_build({}, orders=[{"kind": "resistor", "value": 2200.0,
                                             "qty": 10}])])
    [(o, _, _)] = _awaited(store)
    store.receive(_parcel(tmp_path, "p.csv", "resistor,2k2,3,1%,A9,,,,\n"))
    cancel = store.cancel_order(o)
    assert _awaited(store) == []
    # a later parcel of that value is stock, counted against no order
    later = store.receive(_parcel(tmp_path, "q.csv", "resistor,2k2,7,1%,A9,,,,\n"))
    assert store.receipt_orders(later) == []
    store.undo(cancel)
    assert _awaited(store) == [(o, 3, 10)]
    assert store.check() == []


def test_check_finds_an_awaited_order_whose_share_has_arrived(store, stock_csv, tmp_path):
    """The store's check is a check that can fail: an order marked awaited again by hand
    after all of it arrived is named."""
    from sqlalchemy import update

    from inventory.schema import Order

    store.import_csv(stock_csv)
    store.commit_builds([_build({}, orders=[{"kind": "resistor", "value": 2200.0,
                                             "qty": 4}])])
    [(o, _, _)] = _awaited(store)
    store.receive(_parcel(tmp_path, "p.csv", "resistor,2k2,4,1%,A9,,,,\n"))
    assert store.check() == []
    with store.engine.begin() as conn:
        conn.execute(update(Order).where(Order.id == o).values(received=False,
                                                               received_batch_id=None))
    assert store.check() == [f"order {o}: awaited, but all 4 pieces of its share have "
                             "arrived"]


def test_export_then_import_into_an_empty_store_reproduces_it(store, stock_csv, tmp_path):
    from inventory.store import open_store

    store.import_csv(stock_csv)
    store.add_item(Capacitor(value=1.234e-9, qty=3, tolerance=0.05, dielectric="c0g",
                             location="@odd"))
    store.adjust(store.snapshot().resistors[1].id, -6, "all used")    # a row at qty 0
    out = tmp_path / "export.csv"
    store.export_csv(out)
    other = open_store(str(tmp_path / "copy.sqlite"))
    try:
        other.import_csv(out)
        assert [_ident(p) for p in other.parts()] == [_ident(p) for p in store.parts()]
        out2 = tmp_path / "export2.csv"
        other.export_csv(out2)
        assert out2.read_text() == out.read_text()
    finally:
        other.close()

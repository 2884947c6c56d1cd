"""The store's schema: Alembic revisions, upgrades of real old stores, refusals."""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

import pytest
from sqlalchemy import create_engine, inspect

from inventory.errors import StoreError
from inventory.schema import Base
from inventory.store import head_revision, open_store

DATA = Path(__file__).parent / "data"


def _tables(path: Path) -> set[str]:
    engine = create_engine(f"sqlite:///{path}")
    try:
        return set(inspect(engine).get_table_names())
    finally:
        engine.dispose()


def test_empty_sqlite_file_is_migrated_to_head(tmp_path):
    path = tmp_path / "empty.sqlite"
    path.touch()                       # an empty file: a new SQLite database
    store = open_store(str(path))
    try:
        assert store.revision() == head_revision()
        assert store.snapshot().resistors == ()
        assert store.check() == []
    finally:
        store.close()
    assert {"items", "batches", "movements", "builds", "build_items", "orders",
            "alembic_version"} <= _tables(path)


def test_revisions_create_exactly_the_orm_schema(tmp_path):
    """Alembic's own comparison: the migrated database and the ORM models agree."""
    from alembic.autogenerate import compare_metadata
    from alembic.runtime.migration import MigrationContext

    path = tmp_path / "s.sqlite"
    open_store(str(path)).close()
    engine = create_engine(f"sqlite:///{path}")
    try:
        with engine.connect() as conn:
            diffs = compare_metadata(MigrationContext.configure(conn), Base.metadata)
    finally:
        engine.dispose()
    assert diffs == []


def test_store_made_at_revision_0001_opens_and_works(tmp_path):
    """A real store file written by the program at revision 0001 (migrations are
    tested on real old stores)."""
    path = tmp_path / "old.sqlite"
    shutil.copyfile(DATA / "store_0001.sqlite", path)
    store = open_store(str(path))
    try:
        assert store.revision() == head_revision()
        assert store.check() == []
        qty = {p.id: p.qty for p in store.parts()}
        assert qty == {1: 12, 2: 12, 3: 28, 4: 8, 5: 4}
        assert store.transistor("OLD-N1").ft == pytest.approx(200e6)
        builds = store.list_builds()
        assert [b["request"] for b in builds] == ["old.toml"]
        # the old build became a build of one line holding its design and pieces
        [line] = store.build(builds[0]["id"])["lines"]
        assert (line["request"], line["copies"]) == ("old.toml", 2)
        assert line["design"] == {"note": "made at 0001"}
        assert line["pieces"] == store.build(builds[0]["id"])["pieces"]
        # it still takes changes, and the old build can be undone exactly
        store.undo_build(builds[0]["id"])
        assert {p.id: p.qty for p in store.parts()} == {1: 16, 2: 12, 3: 30, 4: 8, 5: 6}
        store.adjust(2, -12, "all used")
        assert store.item(2).qty == 0
        assert store.check() == []
    finally:
        store.close()


def test_store_from_a_newer_program_is_refused(tmp_path):
    path = tmp_path / "new.sqlite"
    open_store(str(path)).close()
    con = sqlite3.connect(path)
    con.execute("UPDATE alembic_version SET version_num = '9999_from_the_future'")
    con.commit()
    con.close()
    with pytest.raises(StoreError, match="newer drawerfit"):
        open_store(str(path))


@pytest.mark.parametrize("content", [b"kind,value,qty\nresistor,4k7,1\n", b"\x00" * 100,
                                     b"SQLite format 3\x00" + b"\xff" * 200])
def test_a_file_that_is_not_a_store_is_refused_in_one_line(tmp_path, content):
    path = tmp_path / "stock.sqlite"
    path.write_bytes(content)
    with pytest.raises(StoreError) as info:
        open_store(str(path))
    msg = str(info.value)
    assert str(path) in msg and "\n" not in msg
    assert path.read_bytes() == content          # left exactly as it was


def test_a_foreign_sqlite_database_is_refused(tmp_path):
    path = tmp_path / "other.sqlite"
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE recipes (id INTEGER PRIMARY KEY, name TEXT)")
    con.commit()
    con.close()
    with pytest.raises(StoreError, match="not a drawerfit store"):
        open_store(str(path))
    assert _tables(path) == {"recipes"}


def test_missing_folder_is_a_clear_error(tmp_path):
    with pytest.raises(StoreError, match="does not exist"):
        open_store(str(tmp_path / "no" / "such" / "stock.sqlite"))


def test_postgresql_store_migrates_to_head(pg_schema_url):
    store = open_store(pg_schema_url)
    try:
        assert store.revision() == head_revision()
        assert store.dialect == "postgresql"
    finally:
        store.close()


def test_a_store_at_revision_0001_upgrades_its_builds_to_lines(store_url):
    """On each database: a store brought to revision 0001 only, holding a build, is
    upgraded on opening; the build keeps its pieces and gains one line with its design,
    and undoing it restores the stock exactly."""
    from alembic import command
    from sqlalchemy import text

    from inventory.store import _alembic_config, _resolve

    url, _ = _resolve(store_url)
    engine = create_engine(url)
    try:
        with engine.begin() as conn:
            cfg = _alembic_config()
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, "0001")
            t = "'2026-12-01 10:00:00'"
            conn.execute(text(
                "INSERT INTO items (id, kind, value, qty, min_qty, location, tolerance, power,"
                f" created) VALUES (1, 'resistor', 4700.0, 6, 0, 'A1', 0.05, 0.25, {t})"))
            conn.execute(text(f"INSERT INTO batches (id, \"when\", kind, note) VALUES "
                              f"(1, {t}, 'import', 'old'), (2, {t}, 'build', 'build 1')"))
            conn.execute(text(f"INSERT INTO movements (id, batch_id, item_id, change, reason,"
                              f" \"when\") VALUES (1, 1, 1, 10, 'old', {t}),"
                              f" (2, 2, 1, -4, 'build 1', {t})"))
            conn.execute(text(f"INSERT INTO builds (id, request, copies, created, design, "
                              f"undone, batch_id) VALUES (1, 'old.toml', 2, {t}, "
                              "'{\"rank\": 3}', false, 2)"))
            conn.execute(text("INSERT INTO build_items (build_id, item_id, qty) "
                              "VALUES (1, 1, 4)"))
            if engine.dialect.name == "postgresql":
                for name in ("items", "batches", "movements", "builds"):
                    conn.execute(text(f"SELECT setval(pg_get_serial_sequence('{name}', 'id'), "
                                      f"(SELECT MAX(id) FROM {name}))"))
    finally:
        engine.dispose()
    store = open_store(store_url)
    try:
        assert store.revision() == head_revision()
        assert store.check() == []
        shown = store.build(1)
        assert [(ln["request"], ln["copies"], ln["design"], ln["pieces"])
                for ln in shown["lines"]] == [("old.toml", 2, {"rank": 3}, {1: 4})]
        store.undo_build(1)
        assert store.item(1).qty == 10
        assert store.check() == []
    finally:
        store.close()


def _at_revision(store_url, rev, statements=()):
    """Bring a new store on ``store_url`` to revision ``rev`` only and run ``statements``
    (plain SQL) in the same transaction."""
    from alembic import command
    from sqlalchemy import text

    from inventory.store import _alembic_config, _resolve

    url, _ = _resolve(store_url)
    engine = create_engine(url)
    try:
        with engine.begin() as conn:
            cfg = _alembic_config()
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, rev)
            for sql in statements:
                conn.execute(text(sql))
            if engine.dialect.name == "postgresql":
                for name in ("items", "batches", "movements", "builds", "orders"):
                    conn.execute(text(f"SELECT setval(pg_get_serial_sequence('{name}', 'id'), "
                                      f"COALESCE((SELECT MAX(id) FROM {name}), 0) + 1, false)"))
    finally:
        engine.dispose()


T = "'2026-12-02 09:00:00'"
#: A store at 0002: 10 pieces of 4k7 imported (batch 1), a build of 2 (batch 2) that
#: ordered 10 of 10k (used 3) and 5 of 1u (used 0), and the 10k order received whole,
#: 7 pieces (batch 3).
STORE_0002 = [
    "INSERT INTO items (id, kind, value, qty, min_qty, location, tolerance, power, created) "
    f"VALUES (1, 'resistor', 4700.0, 8, 0, 'A1', 0.05, 0.25, {T}), "
    f"(2, 'resistor', 10000.0, 7, 0, 'A2', 0.01, 0.25, {T})",
    f'INSERT INTO batches (id, "when", kind, note) VALUES (1, {T}, \'import\', \'i\'), '
    f"(2, {T}, 'build', 'build 1'), (3, {T}, 'receive', 'receive order.csv')",
    f'INSERT INTO movements (id, batch_id, item_id, change, reason, "when") VALUES '
    f"(1, 1, 1, 10, 'i', {T}), (2, 2, 1, -2, 'build 1', {T}), (3, 3, 2, 7, 'r', {T})",
    "INSERT INTO builds (id, request, copies, created, design, undone, batch_id) VALUES "
    f"(1, 'a.toml', 1, {T}, '{{}}', false, 2)",
    "INSERT INTO build_items (build_id, item_id, qty) VALUES (1, 1, 2)",
    "INSERT INTO build_lines (id, build_id, position, request, copies, design, pieces) "
    "VALUES (1, 1, 1, 'a.toml', 1, '{}', '{\"1\": 2}')",
    "INSERT INTO orders (id, created, kind, value, qty, received, received_batch_id, "
    f"batch_id, used) VALUES (1, {T}, 'resistor', 10000.0, 10, true, 3, 2, 3), "
    f"(2, {T}, 'capacitor', 1e-6, 5, false, NULL, 2, 0)",
]


def test_revision_0003_counts_what_older_stores_received(store_url):
    """On each database: a store at 0002 with a received order and an awaited one is
    upgraded; the received order counts its whole share (10 ordered, 3 used by its
    standing build: 7) as arrived from the receipt that closed it, the awaited one
    nothing; each row names the batch of its first movement; undoing the receipt
    re-opens the order with nothing arrived."""
    _at_revision(store_url, "0002", STORE_0002)
    store = open_store(store_url)
    try:
        assert store.revision() == head_revision()
        assert store.check() == []
        [received] = store.receipt_orders(3)
        assert (received["id"], received["state"], received["arrived"], received["due"],
                received["pieces"]) == (1, "received", 7, 7, 7)
        [awaited] = store.pending_orders()
        assert (awaited["id"], awaited["arrived"], awaited["due"]) == (2, 0, 5)
        store.undo(3)
        assert [(o["id"], o["arrived"], o["due"]) for o in store.pending_orders()] == [
            (1, 0, 7), (2, 0, 5)]
        # the 10k row came with the receipt: undone and empty, it is no longer listed
        assert [p.id for p in store.parts()] == [1]
        assert store.check() == []
    finally:
        store.close()


def test_revision_0003_downgrades_and_upgrades_again(store_url):
    """On each database: a store at head with a partial arrival goes down to 0002 (the
    table and column of 0003 gone, the rest kept) and back up again."""
    from alembic import command
    from sqlalchemy import inspect as sa_inspect

    from inventory.store import _alembic_config, _resolve

    _at_revision(store_url, "0002", STORE_0002)
    store = open_store(store_url)
    store.close()
    url, _ = _resolve(store_url)
    engine = create_engine(url)
    try:
        with engine.begin() as conn:
            cfg = _alembic_config()
            cfg.attributes["connection"] = conn
            command.downgrade(cfg, "0002")
        insp = sa_inspect(engine)
        assert "order_arrivals" not in insp.get_table_names()
        assert "batch_id" not in {c["name"] for c in insp.get_columns("items")}
        assert "used" in {c["name"] for c in insp.get_columns("orders")}
    finally:
        engine.dispose()
    store = open_store(store_url)
    try:
        assert store.revision() == head_revision()
        assert store.check() == []
        assert {p.id: p.qty for p in store.parts()} == {1: 8, 2: 7}
    finally:
        store.close()

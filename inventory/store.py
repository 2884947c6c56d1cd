"""The parts store: sessions, queries and stock movements, one transaction each.

Open a store with :func:`open_store`; it is created and migrated to the newest
schema on first use.  Every change of a quantity is logged as a movement inside
a batch, so that for every item ``qty == sum(movements)`` holds, and any batch
can be reversed with :meth:`Store.undo`.  No quantity ever goes below zero: a
change that would do so is refused with :class:`~inventory.errors.StockShortage`
and nothing is written.

Write transactions are serialised: on SQLite every transaction starts with
``BEGIN IMMEDIATE`` (the write lock is taken before anything is read); on
PostgreSQL a transaction-scoped advisory lock is taken first and the rows to be
changed are read ``FOR UPDATE``.  Two processes that both want the last pieces
of a value therefore see each other's result: one succeeds, the other is told.

Database rows never leave this module: :func:`_to_part` turns them into the
frozen objects of :mod:`inventory.parts`, in this one place.
"""

from __future__ import annotations

import json
import math
import os
import sqlite3
import tempfile
from collections import defaultdict
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import replace as dc_replace
from datetime import datetime
from pathlib import Path
from typing import Any

from sqlalchemy import create_engine, event, func, inspect, select, text
from sqlalchemy.engine import URL, Engine, make_url
from sqlalchemy.exc import ArgumentError, OperationalError, SQLAlchemyError
from sqlalchemy.orm import Session, selectinload, sessionmaker

from inventory import tabular
from inventory.errors import DrawerfitError, InputError, StockShortage, StoreError
from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from inventory.schema import (
    Base,
    Batch,
    Build,
    BuildItem,
    BuildLine,
    Item,
    Movement,
    Order,
    OrderArrival,
)

__all__ = ["open_store", "Store", "default_store_path", "describe", "head_revision",
           "MIGRATIONS_DIR"]

Part = Resistor | Capacitor | Transistor

#: The folder holding the Alembic environment and revisions.
MIGRATIONS_DIR = Path(__file__).resolve().parent.parent / "migrations"
_SQLITE_MAGIC = b"SQLite format 3\x00"
#: Key of the PostgreSQL advisory lock that serialises writers.
_PG_LOCK_KEY = 0x64726177  # "draw"
_TABLE_ORDER = ("batches", "items", "movements", "builds", "build_items", "build_lines",
                "orders", "order_arrivals")


# ------------------------------------------------------------------ opening

def default_store_path() -> Path:
    """The default store: ``stock.sqlite`` in the user's data folder (platformdirs)."""
    from platformdirs import user_data_dir

    return Path(user_data_dir("drawerfit", appauthor=False)) / "stock.sqlite"


def _alembic_config():
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    return cfg


def head_revision() -> str:
    """The newest schema revision this program knows."""
    from alembic.script import ScriptDirectory

    return ScriptDirectory.from_config(_alembic_config()).get_current_head()


def _resolve(url_or_path: str | None) -> tuple[URL, str]:
    """The SQLAlchemy URL of a store and the name to show the user."""
    if url_or_path is None or not str(url_or_path).strip():
        path = default_store_path()
        path.parent.mkdir(parents=True, exist_ok=True)
        return _sqlite_url(path), str(path)
    spec = str(url_or_path).strip()
    if "://" in spec:
        try:
            url = make_url(spec)
        except ArgumentError:
            raise StoreError(f"{spec}: not a database URL; give a file path or a URL such as "
                             "postgresql+psycopg://user@host/dbname") from None
        shown = url.render_as_string(hide_password=True)
        if url.get_backend_name() == "sqlite" and url.database and url.database != ":memory:":
            _check_sqlite_file(Path(url.database), shown)
        return url, shown
    path = Path(spec).expanduser()
    return _sqlite_url(path), str(path)


def _sqlite_url(path: Path) -> URL:
    _check_sqlite_file(path, str(path))
    return URL.create("sqlite", database=str(path))


def _check_sqlite_file(path: Path, shown: str) -> None:
    if path.is_dir():
        raise StoreError(f"{shown}: is a folder; give the path of a store file, "
                         "e.g. stock.sqlite inside it")
    if not path.parent.exists():
        raise StoreError(f"{shown}: folder {path.parent} does not exist; create it first")
    if path.exists() and path.stat().st_size > 0:
        try:
            with path.open("rb") as fh:
                head = fh.read(16)
        except OSError as exc:
            raise StoreError(f"{shown}: cannot read the store ({exc.strerror})") from None
        if head != _SQLITE_MAGIC:
            raise StoreError(f"{shown}: not a drawerfit store (not a SQLite database); "
                             "give another path or move the file away")


def _install_sqlite_locking(engine: Engine) -> None:
    """SQLAlchemy's documented recipe: let the driver emit no BEGIN, then emit our own
    BEGIN IMMEDIATE so that every transaction holds the write lock from its start."""

    @event.listens_for(engine, "connect")
    def _connect(dbapi_connection, _record):  # pragma: no cover - exercised by every test
        dbapi_connection.isolation_level = None
        cur = dbapi_connection.cursor()
        cur.execute("PRAGMA foreign_keys=ON")
        cur.close()

    @event.listens_for(engine, "begin")
    def _begin(conn):  # pragma: no cover - exercised by every test
        conn.exec_driver_sql("BEGIN IMMEDIATE")


def _db_error(shown: str, exc: BaseException) -> StoreError:
    """A database error as one line with a remedy."""
    orig = getattr(exc, "orig", None) or exc
    msg = str(orig).strip().splitlines()[0] if str(orig).strip() else type(orig).__name__
    low = msg.lower()
    if "locked" in low or "busy" in low:
        return StoreError(f"{shown}: the store is busy (another drawerfit is writing); "
                          "try again in a moment")
    if "not a database" in low or "malformed" in low or "file is encrypted" in low:
        return StoreError(f"{shown}: the store file is damaged ({msg}); restore it from a "
                          "backup with `drawerfit db restore`")
    if "unable to open" in low or "readonly" in low or "read-only" in low:
        return StoreError(f"{shown}: cannot open the store for writing ({msg}); check the path "
                          "and its permissions")
    if isinstance(exc, OperationalError):
        return StoreError(f"{shown}: cannot use the store ({msg}); check that the database is "
                          "reachable and the URL is right")
    return StoreError(f"{shown}: database error ({msg}); run `drawerfit db check`")


def open_store(url_or_path: str | None = None) -> Store:
    """Open a store, creating and migrating it to the newest schema when needed.

    Parameters
    ----------
    url_or_path : str or None
        None: the default SQLite file in the user's data folder.  Text with
        ``://``: an SQLAlchemy URL (``sqlite:///…``, ``postgresql+psycopg://…``).
        Anything else: the path of a SQLite file.

    Raises
    ------
    StoreError
        The file is not a store, is damaged, was made by a newer drawerfit, or
        the database cannot be reached.
    """
    url, shown = _resolve(url_or_path)
    kwargs: dict[str, Any] = {}
    if url.get_backend_name() == "sqlite":
        kwargs["connect_args"] = {"timeout": 60}
    try:
        engine = create_engine(url, **kwargs)
    except (ArgumentError, ImportError) as exc:
        raise StoreError(f"{shown}: cannot use this database URL ({exc})") from None
    except SQLAlchemyError as exc:
        raise _db_error(shown, exc) from None
    if engine.dialect.name == "sqlite":
        _install_sqlite_locking(engine)
    store = Store(engine, shown)
    try:
        store._migrate()
    except BaseException:
        engine.dispose()
        raise
    return store


# --------------------------------------------------------------- conversion

def _to_part(item: Item) -> Part:
    """The one place where a database row becomes a plain value object."""
    if item.kind == "resistor":
        return Resistor(value=item.value, qty=item.qty, tolerance=item.tolerance,
                        power_w=item.power, location=item.location, id=item.id,
                        min_qty=item.min_qty)
    if item.kind == "capacitor":
        return Capacitor(value=item.value, qty=item.qty, tolerance=item.tolerance,
                         voltage_v=item.voltage, dielectric=item.dielectric or "ceramic",
                         location=item.location, id=item.id, min_qty=item.min_qty)
    return Transistor(
        label=item.label, polarity=item.kind, qty=item.qty, hfe_min=item.hfe_min,
        hfe_max=item.hfe_max, hfe_typ=item.hfe_typ, vbe=item.vbe, ic_ref=item.ic_ref,
        vaf=item.vaf, vce_sat=item.vce_sat, vceo=item.vceo, ic_max=item.ic_max, pd=item.pd,
        ft=item.ft, cob=item.cob, location=item.location, id=item.id, min_qty=item.min_qty)


def _new_item(part: Part) -> Item:
    """A new, empty (qty 0) row for ``part``; its pieces arrive as a movement."""
    if isinstance(part, Transistor):
        return Item(kind=part.polarity, label=part.label, qty=0, min_qty=0,
                    location=part.location, hfe_min=part.hfe_min, hfe_max=part.hfe_max,
                    hfe_typ=part.hfe_typ, vbe=part.vbe, ic_ref=part.ic_ref, vaf=part.vaf,
                    vce_sat=part.vce_sat, vceo=part.vceo, ic_max=part.ic_max, pd=part.pd,
                    ft=part.ft, cob=part.cob)
    if isinstance(part, Resistor):
        return Item(kind="resistor", value=part.value, qty=0, min_qty=0,
                    tolerance=part.tolerance, power=part.power_w, location=part.location)
    return Item(kind="capacitor", value=part.value, qty=0, min_qty=0, tolerance=part.tolerance,
                voltage=part.voltage_v, dielectric=part.dielectric.lower(),
                location=part.location)


def describe(part: Part) -> str:
    """A short human description: ``resistor 4k7 5% 0.25W (A3)``."""
    from inventory.values import format_value

    if isinstance(part, Transistor):
        text = f"{part.polarity} {part.label}"
    elif isinstance(part, Resistor):
        text = (f"resistor {format_value(part.value, 'resistor')} "
                f"{part.tolerance * 100:g}% {part.power_w:g}W")
    else:
        text = (f"capacitor {format_value(part.value, 'capacitor')} {part.voltage_v:g}V "
                f"{part.dielectric}")
    if part.location:
        text += f" ({part.location})"
    return text


def _iso(t: datetime | None) -> str | None:
    return None if t is None else t.isoformat(timespec="seconds") + "Z"


# -------------------------------------------------------------------- store

class Store:
    """A drawerfit parts store.  Use :func:`open_store` to make one.

    Attributes
    ----------
    url : str
        Where the store is (passwords hidden), as shown in messages.
    """

    def __init__(self, engine: Engine, url: str) -> None:
        self.engine = engine
        self.url = url
        self._sessions = sessionmaker(engine, expire_on_commit=False)

    # -- plumbing ----------------------------------------------------------

    def close(self) -> None:
        """Release the database connections."""
        self.engine.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @property
    def dialect(self) -> str:
        return self.engine.dialect.name

    @contextmanager
    def _session(self, write: bool = True) -> Iterator[Session]:
        """One transaction: commits on success, rolls back on any error, wraps
        database errors in StoreError, closes."""
        session = self._sessions()
        try:
            with session.begin():
                if write and self.dialect == "postgresql":
                    session.execute(text("SELECT pg_advisory_xact_lock(:k)"),
                                    {"k": _PG_LOCK_KEY})
                yield session
        except DrawerfitError:
            raise
        except SQLAlchemyError as exc:
            raise _db_error(self.url, exc) from None
        except sqlite3.Error as exc:  # pragma: no cover - surfaced through SQLAlchemy
            raise _db_error(self.url, exc) from None
        finally:
            session.close()

    def _migrate(self) -> None:
        """Bring the schema to the newest revision; refuse stores this program cannot read."""
        from alembic import command
        from alembic.runtime.migration import MigrationContext
        from alembic.script import ScriptDirectory

        cfg = _alembic_config()
        script = ScriptDirectory.from_config(cfg)
        head = script.get_current_head()
        try:
            with self.engine.begin() as conn:
                if self.dialect == "postgresql":
                    conn.execute(text("SELECT pg_advisory_xact_lock(:k)"), {"k": _PG_LOCK_KEY})
                current = MigrationContext.configure(conn).get_current_heads()
                for rev in current:
                    try:
                        known = script.get_revision(rev)
                    except Exception:  # alembic raises several kinds for unknown ids
                        known = None
                    if known is None:
                        raise StoreError(
                            f"{self.url}: this store was made by a newer drawerfit (schema "
                            f"revision {rev}, this program knows up to {head}); upgrade "
                            "drawerfit to use it")
                if not current:
                    tables = set(inspect(conn).get_table_names())
                    foreign = tables - set(_TABLE_ORDER) - {"alembic_version"}
                    if tables & set(_TABLE_ORDER) or foreign:
                        raise StoreError(
                            f"{self.url}: not a drawerfit store (it holds other tables: "
                            f"{', '.join(sorted(tables)[:5])}); give another path or URL")
                if tuple(current) != (head,):
                    cfg.attributes["connection"] = conn
                    command.upgrade(cfg, "head")
        except DrawerfitError:
            raise
        except SQLAlchemyError as exc:
            raise _db_error(self.url, exc) from None

    def revision(self) -> str | None:
        """The schema revision the store is at."""
        from alembic.runtime.migration import MigrationContext

        with self.engine.connect() as conn:
            heads = MigrationContext.configure(conn).get_current_heads()
        return heads[0] if heads else None

    # -- reading -----------------------------------------------------------

    def snapshot(self) -> StockSnapshot:
        """Everything in the store as plain values (rows with qty 0 included, except a
        row whose only batch was undone: it never was in the drawer)."""
        with self._session(write=False) as s:
            items = s.scalars(select(Item).order_by(Item.kind, Item.value, Item.label,
                                                    Item.id)).all()
            gone = self._undone_batches(s)
            parts = [_to_part(i) for i in items if not self._withdrawn(i, gone)]
        return StockSnapshot(
            resistors=tuple(p for p in parts if isinstance(p, Resistor)),
            capacitors=tuple(p for p in parts if isinstance(p, Capacitor)),
            transistors=tuple(p for p in parts if isinstance(p, Transistor)),
        )

    def parts(self) -> list[Part]:
        """Every item, resistors then capacitors then transistors, each by value/label."""
        snap = self.snapshot()
        return [*snap.resistors, *snap.capacitors, *snap.transistors]

    def item(self, item_id: int) -> Part:
        """One item by id.  InputError if there is none."""
        with self._session(write=False) as s:
            row = s.get(Item, int(item_id))
            if row is None:
                raise InputError(f"no stock item with id {item_id}; see `drawerfit stock list`")
            return _to_part(row)

    def transistor(self, label: str) -> Transistor | None:
        """The transistor type with this label, or None."""
        with self._session(write=False) as s:
            row = s.scalars(select(Item).where(Item.label == label)).first()
            return None if row is None else _to_part(row)  # type: ignore[return-value]

    def low(self) -> list[Part]:
        """Empty items (qty 0) and items below their restock level (qty < min_qty)."""
        return [p for p in self.parts() if p.qty == 0 or p.qty < p.min_qty]

    def batch(self, batch_id: int) -> dict:
        """One batch as in :meth:`history`.  InputError if there is none."""
        with self._session(write=False) as s:
            b = s.get(Batch, int(batch_id))
            if b is None:
                raise InputError(f"no batch {batch_id}; see `drawerfit stock history`")
            return self._batch_dict(b)

    @staticmethod
    def _batch_dict(b: Batch) -> dict:
        return {"batch": b.id, "when": _iso(b.when), "kind": b.kind, "note": b.note,
                "undone_by": b.undone_by, "digest": b.digest,
                "movements": [{"item_id": m.item_id, "item": describe(_to_part(m.item)),
                               "change": m.change, "reason": m.reason}
                              for m in b.movements]}

    def history(self, limit: int | None = None) -> list[dict]:
        """Batches, newest first, each with its movements.

        Returns
        -------
        list of dict
            ``{"batch", "when", "kind", "note", "undone_by", "movements": [{"item_id",
            "item", "change", "reason"}]}``.
        """
        with self._session(write=False) as s:
            q = select(Batch).order_by(Batch.id.desc()).options(
                selectinload(Batch.movements).selectinload(Movement.item))
            if limit is not None:
                q = q.limit(int(limit))
            return [self._batch_dict(b) for b in s.scalars(q).all()]

    # -- booking -----------------------------------------------------------

    @staticmethod
    def _undone_batches(s: Session) -> set[int]:
        return set(s.scalars(select(Batch.id).where(Batch.undone_by.is_not(None))).all())

    @staticmethod
    def _withdrawn(item: Item, undone: set[int]) -> bool:
        """A row brought in by a batch since undone, holding no pieces: as if never made."""
        return item.qty == 0 and item.batch_id is not None and item.batch_id in undone

    def _locked_items(self, s: Session, ids) -> dict[int, Item]:
        rows = s.scalars(select(Item).where(Item.id.in_(list(ids))).with_for_update()).all()
        return {r.id: r for r in rows}

    @staticmethod
    def _move(s: Session, batch: Batch, item: Item, change: int, reason: str) -> None:
        if change == 0:
            return
        if item.qty + change < 0:  # guarded by the callers; the CHECK constraint is the last line
            raise StockShortage(f"{describe(_to_part(item))} (id {item.id}): have {item.qty}, "
                                f"need {-change}")
        item.qty += change
        s.add(Movement(batch=batch, item=item, change=change, reason=reason))

    def _book(self, s: Session, rows: list[tabular.StockRow], batch: Batch, file: str | None,
              reason: str) -> list[int]:
        """Add the rows to stock: existing items gain pieces, new ones are created."""
        items = s.scalars(select(Item).with_for_update()).all()
        by_key = {tabular.part_key(_to_part(i)): i for i in items}
        undone = self._undone_batches(s)
        problems: list[InputError] = []
        plan: list[tuple[tabular.StockRow, Item]] = []
        new: list[Item] = []
        for row in tabular.merge_rows(rows):
            part = row.part
            key = tabular.part_key(part)
            item = by_key.get(key)
            if isinstance(part, Transistor) and item is not None:
                diffs = tabular.transistor_differences(part, _to_part(item))
                if diffs:
                    field, _, _ = diffs[0]
                    said = "; ".join(f"{f} {here} here, {there} in stock id {item.id}"
                                     for f, here, there in diffs)
                    problems.append(InputError(
                        f"transistor {part.label!r} is in stock with other figures: {said}; "
                        f"correct the figures, use another label, or change stock id {item.id}"
                        " first",
                        file=file, line=row.line or None, field=field))
                    continue
            if item is None:
                item = _new_item(part)
                item.batch_id = batch.id
                new.append(item)
                by_key[key] = item
            elif self._withdrawn(item, undone):
                item.batch_id = batch.id       # this batch brings the row back in
            plan.append((row, item))
        if problems:
            raise problems[0] if len(problems) == 1 else _errors(problems)
        s.add_all(new)
        s.flush()                      # one round of INSERTs gives every new item its id
        ids: list[int] = []
        for row, item in plan:
            if row.min_qty is not None:
                item.min_qty = row.min_qty
            self._move(s, batch, item, row.part.qty, reason)
            ids.append(item.id)
        return ids

    def import_csv(self, path: str | Path) -> int:
        """Import a stock file: all rows or none.  Returns the batch id.

        Rows naming an item already in stock add to its quantity; a transistor
        label already present with different figures is refused.
        """
        rows = tabular.read_stock_csv(path)
        digest = tabular.file_digest(path)
        with self._session() as s:
            batch = Batch(kind="import", note=f"import {Path(path).name}", digest=digest)
            s.add(batch)
            s.flush()
            self._book(s, rows, batch, str(path), f"import {Path(path).name}")
            return batch.id

    def read_before(self, path: str | Path) -> list[dict]:
        """Earlier imports and stock-takes of a file with the same content (SHA-256),
        oldest first, as in :meth:`history` (``undone_by`` says whether each still stands).
        A file that cannot be read gives an empty list (reading it reports the problem)."""
        try:
            digest = tabular.file_digest(path)
        except InputError:
            return []
        with self._session(write=False) as s:
            return [self._batch_dict(b) for b in s.scalars(
                select(Batch).where(Batch.digest == digest).order_by(Batch.id)).all()]

    def take(self, path: str | Path, *, zero_missing: bool = False) -> int:
        """A stock-take: *set* the quantities the file counts.  Returns the batch id.

        Each row's quantity replaces the item's (the difference is logged as a
        movement); an item not yet in stock is created.  Items the file does not
        name are left alone, or, with ``zero_missing``, set to 0.  One
        transaction; ``stock undo`` reverses it.
        """
        rows = tabular.read_stock_csv(path)
        digest = tabular.file_digest(path)
        name = Path(path).name
        with self._session() as s:
            batch = Batch(kind="take", note=f"stock-take {name}", digest=digest)
            s.add(batch)
            s.flush()
            # create the missing items with no pieces, then set every count
            merged = tabular.merge_rows(rows)
            ids = self._book(s, [dc_replace(r, part=dc_replace(r.part, qty=0)) for r in merged],
                             batch, str(path), f"stock-take {name}")
            targets = {i: r.part.qty for r, i in zip(merged, ids, strict=True)}
            items = {i.id: i for i in s.scalars(select(Item).with_for_update()).all()}
            if zero_missing:
                for i in items:
                    targets.setdefault(i, 0)
            for i, q in sorted(targets.items()):
                self._move(s, batch, items[i], q - items[i].qty, f"stock-take {name}")
            return batch.id

    def add_item(self, part: Part, note: str = "") -> int:
        """Add one item (or pieces of an existing identical one).  Returns the item id."""
        if part.qty < 0:
            raise InputError(f"qty {part.qty} is negative", field="qty")
        with self._session() as s:
            batch = Batch(kind="add", note=note or "stock add")
            s.add(batch)
            s.flush()
            row = tabular.StockRow(line=0, part=part,
                                   min_qty=part.min_qty if part.min_qty else None)
            ids = self._book(s, [row], batch, None, note or "stock add")
            return ids[0]

    def adjust(self, item_id: int, delta: int, reason: str) -> int:
        """Change one item's quantity by ``delta``.  Returns the batch id.

        Raises StockShortage (nothing changed) if the quantity would go below zero.
        """
        delta = int(delta)
        if delta == 0:
            raise InputError("an adjustment of 0 changes nothing", field="change")
        with self._session() as s:
            item = self._locked_items(s, [item_id]).get(int(item_id))
            if item is None:
                raise InputError(f"no stock item with id {item_id}; see `drawerfit stock list`")
            if item.qty + delta < 0:
                raise StockShortage(f"{describe(_to_part(item))} (id {item.id}): have "
                                    f"{item.qty}, cannot take {-delta}; nothing was changed")
            batch = Batch(kind="adjust", note=reason)
            s.add(batch)
            s.flush()
            self._move(s, batch, item, delta, reason)
            return batch.id

    def set_min_qty(self, item_id: int, min_qty: int) -> None:
        """Set an item's restock level (``stock low`` lists items below it)."""
        if int(min_qty) < 0:
            raise InputError(f"min_qty {min_qty} is negative", field="min_qty")
        with self._session() as s:
            item = self._locked_items(s, [item_id]).get(int(item_id))
            if item is None:
                raise InputError(f"no stock item with id {item_id}; see `drawerfit stock list`")
            item.min_qty = int(min_qty)

    # -- undo --------------------------------------------------------------

    def _undo_in(self, s: Session, batch_id: int) -> int:
        batch = s.get(Batch, int(batch_id))
        if batch is None:
            raise InputError(f"no batch {batch_id}; see `drawerfit stock history`")
        if batch.kind == "undo":
            raise InputError(f"batch {batch_id} is itself an undo; it cannot be undone")
        if batch.undone_by is not None:
            raise InputError(f"batch {batch_id} was already undone by batch {batch.undone_by}")
        net: dict[int, int] = defaultdict(int)
        for m in batch.movements:
            net[m.item_id] += m.change
        items = self._locked_items(s, net)
        short = [f"{describe(_to_part(items[i]))} (id {i}): have {items[i].qty}, undo needs "
                 f"{c}" for i, c in sorted(net.items()) if items[i].qty - c < 0]
        if short:
            raise StockShortage(f"cannot undo batch {batch_id}, pieces have been used since; "
                                f"nothing was changed: " + "; ".join(short))
        undo = Batch(kind="undo", note=f"undo of batch {batch_id} ({batch.kind}: {batch.note})")
        s.add(undo)
        s.flush()
        for i, c in sorted(net.items()):
            self._move(s, undo, items[i], -c, f"undo batch {batch_id}")
        batch.undone_by = undo.id
        for b in s.scalars(select(Build).where(Build.batch_id == batch.id)).all():
            b.undone = True
        # a receipt's pieces no longer count: the orders it closed, and those it made
        # complete, are awaited again (with what the other receipts booked)
        credited = set(s.scalars(select(OrderArrival.order_id).where(
            OrderArrival.batch_id == batch.id)).all())
        touched = s.scalars(select(Order).where(
            (Order.received_batch_id == batch.id) | Order.id.in_(credited))).all()
        if touched:
            s.flush()
            standing = self._standing(s)
            arrived = self._arrived(s, [o.id for o in touched])
            for o in touched:
                if o.received and (o.received_batch_id == batch.id
                                   or arrived[o.id] < self._share(o, standing)):
                    o.received = False
                    o.received_batch_id = None
        for o in s.scalars(select(Order).where(Order.cancelled_batch_id == batch.id)).all():
            o.cancelled_batch_id = None
        if batch.kind == "build":
            # the build no longer counts on its ordered parts: they are not awaited
            for o in s.scalars(select(Order).where(
                    Order.batch_id == batch.id, Order.received.is_(False),
                    Order.cancelled_batch_id.is_(None))).all():
                o.cancelled_batch_id = undo.id
        return undo.id

    def undo(self, batch_id: int) -> int:
        """Reverse a whole batch in one transaction.  Returns the new (undo) batch's id.

        Refused (StockShortage, nothing changed) where a quantity would go below zero.
        """
        with self._session() as s:
            return self._undo_in(s, batch_id)

    # -- builds ------------------------------------------------------------

    def commit_builds(self, builds: list[dict]) -> int:
        """Record one build with a line per entry and take its pieces out of stock, in one
        transaction (one batch, which ``builds undo`` reverses in one step).

        Parameters
        ----------
        builds : list of dict
            One per line: ``{"request": str, "copies": int, "design": dict,
            "pieces": {item_id: qty}, "orders": [{kind, value, qty, used, tolerance,
            power, voltage, dielectric}]}``; ``qty`` in pieces is the total over all
            copies; ``orders`` (optional) are recorded as awaited, ``used`` of their
            pieces going to the build on arrival.

        Returns
        -------
        int
            The new build's id.

        Raises
        ------
        StockShortage
            Some item has fewer pieces than all the lines together need; the
            message names each (have, need).  Nothing is changed.
        """
        specs = []
        need: dict[int, int] = defaultdict(int)
        if not builds:
            raise InputError("nothing to record: no build lines")
        for n, b in enumerate(builds, start=1):
            if not isinstance(b, Mapping):
                raise InputError(f"build {n}: expected a dict")
            try:
                design = json.dumps(b.get("design", {}), sort_keys=True, allow_nan=False)
            except (TypeError, ValueError) as exc:
                raise InputError(f"build {n}: the design cannot be stored as JSON ({exc})") from None
            copies = int(b.get("copies", 1))
            if copies < 1:
                raise InputError(f"build {n}: copies must be 1 or more, not {copies}")
            pieces = {int(k): int(v) for k, v in dict(b.get("pieces", {})).items()}
            for k, v in pieces.items():
                if v < 0:
                    raise InputError(f"build {n}: item {k} has a negative count {v}")
                need[k] += v
            specs.append((str(b.get("request", "")), copies, design, pieces,
                          list(b.get("orders", []) or [])))
        with self._session() as s:
            items = self._locked_items(s, need)
            missing = sorted(set(need) - set(items))
            if missing:
                raise InputError(f"no stock item with id {', '.join(map(str, missing))}; the "
                                 "stock changed since the design was made, run it again")
            short = [f"{describe(_to_part(items[i]))} (id {i}): have {items[i].qty}, need {q}"
                     for i, q in sorted(need.items()) if items[i].qty < q]
            if short:
                raise StockShortage("not enough stock, nothing was taken: " + "; ".join(short))
            request = ", ".join(dict.fromkeys(r for r, *_ in specs))
            if len(request) > 400:
                request = request[:399] + "…"
            copies = sum(c for _, c, *_ in specs)
            batch = Batch(kind="build", note="build")
            s.add(batch)
            s.flush()
            build = Build(request=request, copies=copies, design="{}", undone=False,
                          batch_id=batch.id)
            s.add(build)
            s.flush()
            batch.note = f"build {build.id}: {request} x{copies}"
            for pos, (req, n, design, pieces, orders) in enumerate(specs, start=1):
                s.add(BuildLine(build_id=build.id, position=pos, request=req[:400], copies=n,
                                design=design, pieces=json.dumps(
                                    {str(i): q for i, q in sorted(pieces.items()) if q})))
                for o in orders:
                    s.add(self._order(o, batch.id))
            for i, q in sorted(need.items()):
                if q:
                    s.add(BuildItem(build_id=build.id, item_id=i, qty=q))
                    self._move(s, batch, items[i], -q, f"build {build.id}")
            return build.id

    @staticmethod
    def _order(o: Mapping, batch_id: int) -> Order:
        from inventory.values import parse_value

        kind = str(o.get("kind", "")).lower()
        if kind not in ("resistor", "capacitor", "npn", "pnp"):
            raise InputError(f"order: unknown kind {o.get('kind')!r}")
        value = o.get("value")
        if isinstance(value, str) and kind in ("resistor", "capacitor"):
            value = parse_value(value, kind)
        qty = int(o.get("qty", 0))
        if qty < 1:
            raise InputError(f"order: qty must be 1 or more, not {qty}")
        used = int(o.get("used", 0) or 0)
        if not 0 <= used <= qty:
            raise InputError(f"order: used must lie in 0..{qty}, not {used}")

        def num(name):
            v = o.get(name)
            return None if v is None else float(v)

        return Order(kind=kind, value=None if value is None else float(value),
                     label=o.get("label"), qty=qty, tolerance=num("tolerance"),
                     power=num("power"), voltage=num("voltage"),
                     dielectric=o.get("dielectric"), received=False, batch_id=batch_id,
                     used=used)

    def list_builds(self) -> list[dict]:
        """Every build: ``{"id", "request", "copies", "created", "undone"}``, oldest first."""
        with self._session(write=False) as s:
            return [{"id": b.id, "request": b.request, "copies": b.copies,
                     "created": _iso(b.created), "undone": bool(b.undone)}
                    for b in s.scalars(select(Build).order_by(Build.id)).all()]

    def build(self, build_id: int) -> dict:
        """One build as stored.

        Returns
        -------
        dict
            ``{"id", "request", "copies", "created", "undone", "batch", "pieces":
            {item_id: qty} (all lines), "lines": [{"request", "copies", "design",
            "pieces": {item_id: qty}}], "orders": [as in :meth:`pending_orders`]}``.
        """
        with self._session(write=False) as s:
            b = s.get(Build, int(build_id))
            if b is None:
                raise InputError(f"no build {build_id}; see `drawerfit builds list`")
            orders = s.scalars(select(Order).where(Order.batch_id == b.batch_id)
                               .order_by(Order.id)).all()
            return {"id": b.id, "request": b.request, "copies": b.copies,
                    "created": _iso(b.created), "undone": bool(b.undone), "batch": b.batch_id,
                    "pieces": {bi.item_id: bi.qty for bi in b.items},
                    "lines": [{"request": ln.request, "copies": ln.copies,
                               "design": json.loads(ln.design or "{}"),
                               "pieces": {int(k): int(v)
                                          for k, v in json.loads(ln.pieces or "{}").items()}}
                              for ln in b.lines],
                    "orders": [self._order_dict(s, o) for o in orders]}

    def undo_build(self, build_id: int) -> int:
        """Put a build's pieces back exactly.  Returns the undo batch's id."""
        with self._session() as s:
            b = s.get(Build, int(build_id))
            if b is None:
                raise InputError(f"no build {build_id}; see `drawerfit builds list`")
            if b.undone:
                raise InputError(f"build {build_id} was already undone")
            return self._undo_in(s, b.batch_id)

    # -- orders ------------------------------------------------------------

    @staticmethod
    def _standing(s: Session) -> set[int]:
        """The batches of the builds that stand (not undone)."""
        return set(s.scalars(select(Build.batch_id).where(Build.undone.is_(False))).all())

    @staticmethod
    def _share(o: Order, standing: set[int]) -> int:
        """Pieces an order sends to the drawer: its ``qty``, less the ``used`` pieces its
        build takes on arrival while that build stands."""
        return o.qty - (o.used if o.batch_id in standing else 0)

    @staticmethod
    def _arrived(s: Session, order_ids) -> dict[int, int]:
        """Pieces booked against each order by the receipts that stand."""
        ids = list(order_ids)
        if not ids:
            return {}
        rows = s.execute(select(OrderArrival.order_id, func.sum(OrderArrival.qty))
                         .join(Batch, Batch.id == OrderArrival.batch_id)
                         .where(OrderArrival.order_id.in_(ids), Batch.undone_by.is_(None))
                         .group_by(OrderArrival.order_id)).all()
        got = {int(i): int(q) for i, q in rows}
        return {i: got.get(i, 0) for i in ids}

    def _order_dict(self, s: Session, o: Order, *, standing: set[int] | None = None) -> dict:
        build = None
        if o.batch_id is not None:
            build = s.scalar(select(Build.id).where(Build.batch_id == o.batch_id))
        state = ("cancelled" if o.cancelled_batch_id is not None
                 else "received" if o.received else "awaited")
        if standing is None:
            standing = self._standing(s)
        return {"id": o.id, "created": _iso(o.created), "kind": o.kind, "value": o.value,
                "label": o.label, "qty": o.qty, "used": o.used, "tolerance": o.tolerance,
                "power": o.power, "voltage": o.voltage, "dielectric": o.dielectric,
                "build": build, "state": state, "due": self._share(o, standing),
                "arrived": self._arrived(s, [o.id])[o.id]}

    @staticmethod
    def _pending(s: Session, *, lock: bool = False) -> list[Order]:
        q = (select(Order).where(Order.received.is_(False), Order.cancelled_batch_id.is_(None))
             .order_by(Order.id))
        return list(s.scalars(q.with_for_update() if lock else q).all())

    def pending_orders(self) -> list[dict]:
        """Ordered parts awaited (neither received nor cancelled), oldest first:
        ``{"id", "created", "kind", "value", "label", "qty", "used", "tolerance", "power",
        "voltage", "dielectric", "build", "state", "due", "arrived"}``; ``due`` is what
        the order sends to the drawer (``qty``, less ``used`` while its build stands),
        ``arrived`` how much of that the receipts that stand have booked."""
        with self._session(write=False) as s:
            standing = self._standing(s)
            return [self._order_dict(s, o, standing=standing) for o in self._pending(s)]

    def receipt_orders(self, batch_id: int) -> list[dict]:
        """The orders a receipt booked pieces against or closed, as in
        :meth:`pending_orders`, each with ``"pieces"``: what this receipt booked
        against it."""
        with self._session(write=False) as s:
            credited = dict(s.execute(select(OrderArrival.order_id, OrderArrival.qty).where(
                OrderArrival.batch_id == int(batch_id))).all())
            ids = set(credited) | set(s.scalars(select(Order.id).where(
                Order.received_batch_id == int(batch_id))).all())
            standing = self._standing(s)
            return [{**self._order_dict(s, o, standing=standing),
                     "pieces": int(credited.get(o.id, 0))}
                    for o in s.scalars(select(Order).where(Order.id.in_(ids))
                                       .order_by(Order.id)).all()]

    def cancel_order(self, order_id: int, reason: str = "") -> int:
        """Drop an awaited order: nothing is awaited from it any more.  Returns the
        batch id (a batch without movements, in the history; ``stock undo`` re-opens it)."""
        with self._session() as s:
            o = s.get(Order, int(order_id), with_for_update=True)
            if o is None:
                raise InputError(f"no order {order_id}; see `drawerfit stock orders`")
            if o.cancelled_batch_id is not None:
                raise InputError(f"order {order_id} was already cancelled (batch "
                                 f"{o.cancelled_batch_id})")
            if o.received:
                raise InputError(f"order {order_id} was received (batch {o.received_batch_id}); "
                                 "undo that batch first to cancel it")
            batch = Batch(kind="cancel", note=f"cancel order {o.id}" +
                          (f": {reason}" if reason else ""))
            s.add(batch)
            s.flush()
            o.cancelled_batch_id = batch.id
            return batch.id

    def receive(self, path: str | Path, *, bin: str | None = None) -> int:
        """Book an arrived order file into stock; count it against the awaited orders.

        The file has the stock-file format; extra columns ``packs`` and ``cost``
        are ignored.  Every row needs a bin: its ``location`` cell, or ``bin`` for
        rows whose cell is empty; a row with neither is refused (nothing is
        booked).  Every piece that arrived is booked, more than was ordered
        included.  Each row's pieces go to the awaited orders of the same kind
        and value (a transistor: label), oldest first, each taking what it still
        lacks of its share for the drawer (``qty - used`` while its build
        stands); an order whose share is complete is closed, one still short
        stays awaited with what arrived counted.  Pieces beyond every such order
        are stock like any other.  Returns the batch id (``stock undo`` reverses
        it: its counts are taken back, and every order it closed, or counted towards
        and is now short, is awaited again).
        """
        bin = (bin or "").strip()
        rows = tabular.read_stock_csv(path, ignore_columns=("packs", "cost", "label"))
        problems = []
        placed = []
        for r in rows:
            if r.part.location:
                placed.append(r)
            elif bin:
                placed.append(dc_replace(r, part=dc_replace(r.part, location=bin)))
            else:
                problems.append(InputError(
                    "empty; say which bin the pieces go to (fill in the column, or give "
                    "--bin LOC for the rows without one)", file=str(path), line=r.line,
                    field="location"))
        if problems:
            raise problems[0] if len(problems) == 1 else _errors(problems)
        with self._session() as s:
            batch = Batch(kind="receive", note=f"receive {Path(path).name}")
            s.add(batch)
            s.flush()
            self._book(s, placed, batch, str(path), f"receive {Path(path).name}")
            pending = self._pending(s, lock=True)
            standing = self._standing(s)
            arrived = self._arrived(s, [o.id for o in pending])
            for row in tabular.merge_rows(placed):
                p = row.part
                left = p.qty
                for o in pending:
                    if o.received or o.kind != p.kind:
                        continue
                    if isinstance(p, Transistor):
                        match = o.label == p.label
                    else:
                        match = o.value is not None and math.isclose(o.value, p.value,
                                                                     rel_tol=1e-9)
                    if not match:
                        continue
                    take = min(left, max(self._share(o, standing) - arrived[o.id], 0))
                    if take:
                        s.add(OrderArrival(order_id=o.id, batch_id=batch.id, qty=take))
                        arrived[o.id] += take
                        left -= take
                    if arrived[o.id] >= self._share(o, standing):
                        o.received = True
                        o.received_batch_id = batch.id
            return batch.id

    # -- files -------------------------------------------------------------

    def export_csv(self, path: str | Path) -> None:
        """Write the whole stock as a stock file (the import format)."""
        tabular.write_stock_csv(path, self.parts())

    # -- integrity, backup -------------------------------------------------

    def check(self) -> list[str]:
        """Problems found in the store (an empty list when it is sound).

        Checks the schema revision, that no quantity is negative, that every
        item's quantity equals the sum of its movements, that builds and
        batches agree, and that what has arrived of each order lies between
        nothing and its quantity (an awaited order still lacking some).
        """
        problems = []
        head = head_revision()
        rev = self.revision()
        if rev != head:
            problems.append(f"schema revision is {rev}, expected {head}")
        with self._session(write=False) as s:
            sums = dict(s.execute(select(Movement.item_id, func.coalesce(
                func.sum(Movement.change), 0)).group_by(Movement.item_id)).all())
            for item in s.scalars(select(Item).order_by(Item.id)).all():
                name = f"item {item.id} ({describe(_to_part(item))})"
                if item.qty < 0:
                    problems.append(f"{name}: negative quantity {item.qty}")
                if item.min_qty < 0:
                    problems.append(f"{name}: negative min_qty {item.min_qty}")
                logged = int(sums.pop(item.id, 0))
                if logged != item.qty:
                    problems.append(f"{name}: quantity {item.qty} but its movements sum to "
                                    f"{logged}")
            for item_id in sums:
                problems.append(f"movements refer to item {item_id}, which does not exist")
            for b in s.scalars(select(Build).order_by(Build.id)).all():
                batch = s.get(Batch, b.batch_id)
                if batch is None:
                    problems.append(f"build {b.id}: its batch {b.batch_id} is missing")
                    continue
                if bool(b.undone) != (batch.undone_by is not None):
                    problems.append(f"build {b.id}: undone flag disagrees with batch "
                                    f"{batch.id}")
                taken = defaultdict(int)
                for m in batch.movements:
                    taken[m.item_id] -= m.change
                listed = {bi.item_id: bi.qty for bi in b.items}
                if dict(taken) != listed:
                    problems.append(f"build {b.id}: its pieces differ from batch {batch.id}'s "
                                    "movements")
                by_lines: dict[int, int] = defaultdict(int)
                for ln in b.lines:
                    for k, v in json.loads(ln.pieces or "{}").items():
                        by_lines[int(k)] += int(v)
                if dict(by_lines) != listed:
                    problems.append(f"build {b.id}: its lines' pieces differ from its total")
            standing = self._standing(s)
            orders = s.scalars(select(Order).order_by(Order.id)).all()
            arrived = self._arrived(s, [o.id for o in orders])
            for o in orders:
                share = self._share(o, standing)
                if not 0 <= arrived[o.id] <= o.qty:
                    problems.append(f"order {o.id}: {arrived[o.id]} pieces arrived of "
                                    f"{o.qty} ordered")
                awaited = not o.received and o.cancelled_batch_id is None
                if awaited and share > 0 and arrived[o.id] >= share:
                    problems.append(f"order {o.id}: awaited, but all {share} pieces of its "
                                    "share have arrived")
                if o.received and o.received_batch_id is None:
                    problems.append(f"order {o.id}: received, but by no batch")
            for a in s.scalars(select(OrderArrival).order_by(OrderArrival.id)).all():
                batch = s.get(Batch, a.batch_id)
                if batch is None or batch.kind != "receive":
                    problems.append(f"order {a.order_id}: pieces counted from batch "
                                    f"{a.batch_id}, which is not a receipt")
        return problems

    def dump(self) -> dict[str, list[dict]]:
        """Every table's rows as plain dicts (times as ISO text), for backups."""
        out: dict[str, list[dict]] = {}
        with self._session(write=False) as s:
            for name in _TABLE_ORDER:
                table = Base.metadata.tables[name]
                rows = s.execute(select(table).order_by(*table.primary_key.columns)).mappings()
                out[name] = [{k: (v.isoformat() if isinstance(v, datetime) else v)
                              for k, v in r.items()} for r in rows]
        return out

    def load(self, data: Mapping[str, list[dict]]) -> None:
        """Fill an EMPTY store with the rows of :meth:`dump` (ids kept)."""
        with self._session() as s:
            count = sum(s.scalar(select(func.count()).select_from(Base.metadata.tables[n]))
                        for n in _TABLE_ORDER)
            if count:
                raise InputError(f"{self.url}: the store is not empty; restore into a new, "
                                 "empty store (give another --db)")
            for name in _TABLE_ORDER:
                table = Base.metadata.tables[name]
                rows = []
                for r in data.get(name, []):
                    row = {}
                    for col in table.columns:
                        v = r.get(col.name)
                        if isinstance(v, str) and col.type.python_type is datetime:
                            v = datetime.fromisoformat(v)
                        row[col.name] = v
                    rows.append(row)
                if rows:
                    # undone_by points at later batches: insert without it, then set it
                    if name == "batches":
                        links = [(r["id"], r["undone_by"]) for r in rows if r["undone_by"]]
                        s.execute(table.insert(), [{**r, "undone_by": None} for r in rows])
                        for bid, undone_by in links:
                            s.execute(table.update().where(table.c.id == bid)
                                      .values(undone_by=undone_by))
                    else:
                        s.execute(table.insert(), rows)
            if self.dialect == "postgresql":
                for name in ("items", "batches", "movements", "builds", "build_lines", "orders",
                             "order_arrivals"):
                    s.execute(text(f"SELECT setval(pg_get_serial_sequence('{name}', 'id'), "
                                   f"COALESCE((SELECT MAX(id) FROM {name}), 0) + 1, false)"))

    def backup(self, path: str | Path) -> str:
        """Write a consistent copy of the store.

        SQLite stores are copied with SQLite's online backup (the result is
        itself a store); any other database is written as a JSON dump of every
        table.  Returns ``"sqlite"`` or ``"json"``.
        """
        path = Path(path)
        if path.exists():
            raise InputError(f"{path}: already exists; give a new file name")
        if not path.parent.exists():
            raise InputError(f"{path}: folder {path.parent} does not exist")
        if self.dialect == "sqlite":
            raw = self.engine.raw_connection()
            try:
                dst = sqlite3.connect(str(path))
                try:
                    raw.driver_connection.backup(dst)
                finally:
                    dst.close()
            except sqlite3.Error as exc:
                raise _db_error(self.url, exc) from None
            finally:
                raw.close()
            return "sqlite"
        tmp = path.with_name(path.name + ".part")
        tmp.write_text(json.dumps({"drawerfit_backup": 1, "revision": self.revision(),
                                   "tables": self.dump()}, indent=1), encoding="utf-8")
        os.replace(tmp, path)
        return "json"

    def restore(self, path: str | Path) -> None:
        """Fill this (empty) store from a backup made by :meth:`backup`."""
        path = Path(path)
        if not path.is_file():
            raise InputError("no such backup file", file=str(path))
        with path.open("rb") as fh:
            head = fh.read(16)
        if head == _SQLITE_MAGIC:
            with tempfile.TemporaryDirectory() as tmp:
                copy = Path(tmp) / "restore.sqlite"
                copy.write_bytes(path.read_bytes())
                src = open_store(str(copy))
                try:
                    data = src.dump()
                finally:
                    src.close()
        else:
            try:
                doc = json.loads(path.read_text(encoding="utf-8"))
                data = doc["tables"]
                if doc.get("revision") not in (None, head_revision()):
                    raise InputError(f"backup is at schema revision {doc.get('revision')}, "
                                     f"this program writes {head_revision()}", file=str(path))
            except (UnicodeDecodeError, json.JSONDecodeError, KeyError, TypeError):
                raise InputError("not a drawerfit backup (neither a SQLite store nor a JSON "
                                 "dump)", file=str(path)) from None
        self.load(data)


def _errors(problems: list[InputError]) -> InputError:
    from inventory.errors import InputErrors

    return InputErrors(problems)

"""The store's tables as SQLAlchemy 2 typed ORM models.

One ``items`` table holds every stock row (resistors, capacitors and transistor
types; the columns that do not apply to a kind stay NULL).  Every change of a
quantity is a :class:`Movement` inside a :class:`Batch`, so that for every item
``qty == sum(movements.change)`` and any batch can be reversed.

Units are SI throughout: ohm, farad, volt, watt, ampere, hertz; tolerances are
fractions (0.05 for 5 %).  Times are naive UTC.

Only :mod:`inventory.store` (and the Alembic revisions, which carry their own
copy of the DDL) should import this module.
"""

from __future__ import annotations

from datetime import datetime, timezone

from sqlalchemy import (
    Boolean,
    CheckConstraint,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    Text,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

__all__ = ["Base", "Item", "Batch", "Movement", "Build", "BuildItem", "BuildLine", "Order",
           "OrderArrival", "BATCH_KINDS", "ITEM_KINDS", "utcnow"]

#: What a batch of movements was.
BATCH_KINDS = ("import", "take", "adjust", "build", "undo", "receive", "add", "restore",
               "cancel")

#: What an item is.
ITEM_KINDS = ("resistor", "capacitor", "npn", "pnp")


def utcnow() -> datetime:
    """The current time as naive UTC (what the columns store)."""
    return datetime.now(timezone.utc).replace(tzinfo=None, microsecond=0)


class Base(DeclarativeBase):
    """Declarative base of every drawerfit table."""


class Item(Base):
    """One stock row: a value and rating of resistor or capacitor, or one transistor type."""

    __tablename__ = "items"
    __table_args__ = (
        CheckConstraint("qty >= 0", name="ck_items_qty_nonnegative"),
        CheckConstraint("min_qty >= 0", name="ck_items_min_qty_nonnegative"),
        Index("ix_items_kind_value", "kind", "value"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    kind: Mapped[str] = mapped_column(String(16))
    #: Ohm or farad; NULL for transistors.
    value: Mapped[float | None] = mapped_column(Float)
    #: The owner's label of a transistor type (unique); NULL for resistors and capacitors.
    label: Mapped[str | None] = mapped_column(String(200), unique=True)
    qty: Mapped[int] = mapped_column(Integer, default=0)
    min_qty: Mapped[int] = mapped_column(Integer, default=0)
    location: Mapped[str] = mapped_column(String(200), default="")
    tolerance: Mapped[float | None] = mapped_column(Float)
    #: Resistor power rating, W.
    power: Mapped[float | None] = mapped_column(Float)
    #: Capacitor voltage rating, V.
    voltage: Mapped[float | None] = mapped_column(Float)
    dielectric: Mapped[str | None] = mapped_column(String(40))
    hfe_min: Mapped[float | None] = mapped_column(Float)
    hfe_max: Mapped[float | None] = mapped_column(Float)
    hfe_typ: Mapped[float | None] = mapped_column(Float)
    vbe: Mapped[float | None] = mapped_column(Float)
    ic_ref: Mapped[float | None] = mapped_column(Float)
    vaf: Mapped[float | None] = mapped_column(Float)
    vce_sat: Mapped[float | None] = mapped_column(Float)
    vceo: Mapped[float | None] = mapped_column(Float)
    ic_max: Mapped[float | None] = mapped_column(Float)
    pd: Mapped[float | None] = mapped_column(Float)
    ft: Mapped[float | None] = mapped_column(Float)
    cob: Mapped[float | None] = mapped_column(Float)
    created: Mapped[datetime] = mapped_column(DateTime, default=utcnow)
    #: The batch that brought the row into the drawer (NULL where no batch did).  While
    #: that batch is undone and the row holds no pieces, the row is not shown.
    batch_id: Mapped[int | None] = mapped_column(ForeignKey("batches.id"))


class Batch(Base):
    """One user action that moved stock (an import, an adjustment, a build, an undo …)."""

    __tablename__ = "batches"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    when: Mapped[datetime] = mapped_column(DateTime, default=utcnow)
    kind: Mapped[str] = mapped_column(String(16))
    note: Mapped[str] = mapped_column(Text, default="")
    #: The undo batch that reversed this one, if any.
    undone_by: Mapped[int | None] = mapped_column(ForeignKey("batches.id"))
    #: SHA-256 (hex) of the file an import or stock-take read; NULL for other batches.
    digest: Mapped[str | None] = mapped_column(String(64))

    movements: Mapped[list[Movement]] = relationship(
        back_populates="batch", order_by="Movement.id")


class Movement(Base):
    """A change of one item's quantity, inside a batch."""

    __tablename__ = "movements"
    __table_args__ = (Index("ix_movements_item", "item_id"),
                      Index("ix_movements_batch", "batch_id"))

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    batch_id: Mapped[int] = mapped_column(ForeignKey("batches.id"))
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"))
    change: Mapped[int] = mapped_column(Integer)
    reason: Mapped[str] = mapped_column(Text, default="")
    when: Mapped[datetime] = mapped_column(DateTime, default=utcnow)

    batch: Mapped[Batch] = relationship(back_populates="movements")
    item: Mapped[Item] = relationship()


class Build(Base):
    """One commit of builds (``plan --commit`` or ``builds add``): its lines, the pieces
    taken, and the batch that took them (undone in one step)."""

    __tablename__ = "builds"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    #: The requests of its lines, joined with ", ".
    request: Mapped[str] = mapped_column(String(400))
    #: Copies over all lines.
    copies: Mapped[int] = mapped_column(Integer)
    created: Mapped[datetime] = mapped_column(DateTime, default=utcnow)
    #: Unused ("{}"): each line holds its own design.  Kept so that older stores
    #: upgrade in place; their designs were moved into their builds' lines.
    design: Mapped[str] = mapped_column(Text, default="{}")
    undone: Mapped[bool] = mapped_column(Boolean, default=False)
    #: The batch whose movements took the pieces.
    batch_id: Mapped[int] = mapped_column(ForeignKey("batches.id"))

    items: Mapped[list[BuildItem]] = relationship(order_by="BuildItem.item_id")
    lines: Mapped[list[BuildLine]] = relationship(order_by="BuildLine.position")


class BuildLine(Base):
    """One request of a build: copies of one design and the pieces they took."""

    __tablename__ = "build_lines"
    __table_args__ = (Index("ix_build_lines_build", "build_id"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    build_id: Mapped[int] = mapped_column(ForeignKey("builds.id"))
    position: Mapped[int] = mapped_column(Integer)
    request: Mapped[str] = mapped_column(String(400))
    copies: Mapped[int] = mapped_column(Integer)
    #: The design as JSON text (the dict the designer printed, with its request).
    design: Mapped[str] = mapped_column(Text, default="{}")
    #: Stock pieces this line took, all copies: JSON {item id: pieces}.
    pieces: Mapped[str] = mapped_column(Text, default="{}")


class BuildItem(Base):
    """Pieces of one item used by a build (all its lines and copies together)."""

    __tablename__ = "build_items"

    build_id: Mapped[int] = mapped_column(ForeignKey("builds.id"), primary_key=True)
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"), primary_key=True)
    qty: Mapped[int] = mapped_column(Integer)


class Order(Base):
    """Parts ordered and awaiting arrival (recorded with a plan's commit)."""

    __tablename__ = "orders"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    created: Mapped[datetime] = mapped_column(DateTime, default=utcnow)
    kind: Mapped[str] = mapped_column(String(16))
    value: Mapped[float | None] = mapped_column(Float)
    label: Mapped[str | None] = mapped_column(String(200))
    qty: Mapped[int] = mapped_column(Integer)
    tolerance: Mapped[float | None] = mapped_column(Float)
    power: Mapped[float | None] = mapped_column(Float)
    voltage: Mapped[float | None] = mapped_column(Float)
    dielectric: Mapped[str | None] = mapped_column(String(40))
    #: Closed: every piece it sends to the drawer has arrived (see OrderArrival).
    received: Mapped[bool] = mapped_column(Boolean, default=False)
    #: The receive batch that closed it, if received.
    received_batch_id: Mapped[int | None] = mapped_column(ForeignKey("batches.id"))
    #: The batch of the commit that ordered it.
    batch_id: Mapped[int | None] = mapped_column(ForeignKey("batches.id"))
    #: Pieces of it that its build took when committed (they never enter the drawer
    #: while the build stands).
    used: Mapped[int] = mapped_column(Integer, default=0, server_default="0")
    #: The batch that dropped it (``stock orders cancel`` or the undo of its build).
    cancelled_batch_id: Mapped[int | None] = mapped_column(
        ForeignKey("batches.id", name="fk_orders_cancelled_batch"))


class OrderArrival(Base):
    """Pieces of an order's share for the drawer booked by one receipt.

    What has arrived of an order is the sum over the receipts that stand (whose
    batch is not undone), so undoing a receipt takes back exactly its pieces.
    """

    __tablename__ = "order_arrivals"
    __table_args__ = (CheckConstraint("qty > 0", name="ck_order_arrivals_qty_positive"),
                      Index("ix_order_arrivals_order", "order_id"),
                      Index("ix_order_arrivals_batch", "batch_id"))

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    order_id: Mapped[int] = mapped_column(ForeignKey("orders.id"))
    #: The receive batch.
    batch_id: Mapped[int] = mapped_column(ForeignKey("batches.id"))
    qty: Mapped[int] = mapped_column(Integer)

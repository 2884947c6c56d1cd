"""Partial arrivals of orders; the batch that brought each stock row.

``order_arrivals`` holds, per receipt, the pieces of an order's share for the
drawer that it booked, so an order can arrive in several parcels and undoing one
receipt takes back exactly its pieces.  Every order an older store holds as
received gains one arrival of its whole share (``qty``, less ``used`` while its
build stands) from the receipt that closed it.

``items.batch_id`` names the batch that brought a row into the drawer (an
import, stock-take, addition or receipt); older rows take the batch of their
first movement.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-04
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "order_arrivals",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("order_id", sa.Integer(), sa.ForeignKey("orders.id"), nullable=False),
        sa.Column("batch_id", sa.Integer(), sa.ForeignKey("batches.id"), nullable=False),
        sa.Column("qty", sa.Integer(), nullable=False),
        sa.CheckConstraint("qty > 0", name="ck_order_arrivals_qty_positive"),
    )
    op.create_index("ix_order_arrivals_order", "order_arrivals", ["order_id"])
    op.create_index("ix_order_arrivals_batch", "order_arrivals", ["batch_id"])
    # in place, not by copying the table (other tables refer to items)
    op.add_column("items", sa.Column("batch_id", sa.Integer(), sa.ForeignKey("batches.id"),
                                     nullable=True), inline_references=True)

    conn = op.get_bind()
    movements = sa.table("movements", sa.column("id", sa.Integer),
                         sa.column("item_id", sa.Integer), sa.column("batch_id", sa.Integer))
    items = sa.table("items", sa.column("id", sa.Integer), sa.column("batch_id", sa.Integer))
    first = {}
    for item_id, batch_id in conn.execute(sa.select(movements.c.item_id, movements.c.batch_id)
                                          .order_by(movements.c.id)):
        first.setdefault(item_id, batch_id)
    for item_id, batch_id in first.items():
        conn.execute(items.update().where(items.c.id == item_id).values(batch_id=batch_id))

    orders = sa.table("orders", sa.column("id", sa.Integer), sa.column("qty", sa.Integer),
                      sa.column("used", sa.Integer), sa.column("batch_id", sa.Integer),
                      sa.column("received", sa.Boolean),
                      sa.column("received_batch_id", sa.Integer))
    builds = sa.table("builds", sa.column("batch_id", sa.Integer),
                      sa.column("undone", sa.Boolean))
    arrivals = sa.table("order_arrivals", sa.column("order_id", sa.Integer),
                        sa.column("batch_id", sa.Integer), sa.column("qty", sa.Integer))
    standing = {b for (b,) in conn.execute(sa.select(builds.c.batch_id).where(
        builds.c.undone.is_(False)))}
    rows = []
    for o in conn.execute(sa.select(orders).where(orders.c.received.is_(True),
                                                  orders.c.received_batch_id.is_not(None))
                          .order_by(orders.c.id)):
        share = o.qty - (o.used if o.batch_id in standing else 0)
        if share > 0:
            rows.append({"order_id": o.id, "batch_id": o.received_batch_id, "qty": share})
    if rows:
        conn.execute(arrivals.insert(), rows)


def downgrade() -> None:
    op.drop_column("items", "batch_id")
    op.drop_index("ix_order_arrivals_batch", "order_arrivals")
    op.drop_index("ix_order_arrivals_order", "order_arrivals")
    op.drop_table("order_arrivals")

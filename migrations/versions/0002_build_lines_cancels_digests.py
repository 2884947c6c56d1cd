"""Build lines, cancelled orders, file digests.

A build is now the record of one commit: its lines (one per request and
design, with the copies made and the pieces each took) live in
``build_lines``.  Every build of an older store becomes a build with one line
holding its design and pieces.  Orders gain ``cancelled_batch_id`` (the batch
that dropped them) and ``used`` (the pieces their build takes on arrival), batches gain ``digest`` (the SHA-256 of the file an import
or stock-take read).

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-04
"""

from __future__ import annotations

import json
from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0002"
down_revision: str | None = "0001"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "build_lines",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("build_id", sa.Integer(), sa.ForeignKey("builds.id"), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("request", sa.String(400), nullable=False),
        sa.Column("copies", sa.Integer(), nullable=False),
        sa.Column("design", sa.Text(), nullable=False),
        sa.Column("pieces", sa.Text(), nullable=False),
    )
    op.create_index("ix_build_lines_build", "build_lines", ["build_id"])
    with op.batch_alter_table("orders") as batch:
        batch.add_column(sa.Column("cancelled_batch_id", sa.Integer(), nullable=True))
        batch.add_column(sa.Column("used", sa.Integer(), nullable=False, server_default="0"))
        batch.create_foreign_key("fk_orders_cancelled_batch", "batches",
                                 ["cancelled_batch_id"], ["id"])
    with op.batch_alter_table("batches") as batch:
        batch.add_column(sa.Column("digest", sa.String(64), nullable=True))

    conn = op.get_bind()
    builds = sa.table("builds", sa.column("id", sa.Integer), sa.column("request", sa.String),
                      sa.column("copies", sa.Integer), sa.column("design", sa.Text))
    items = sa.table("build_items", sa.column("build_id", sa.Integer),
                     sa.column("item_id", sa.Integer), sa.column("qty", sa.Integer))
    lines = sa.table("build_lines", sa.column("build_id", sa.Integer),
                     sa.column("position", sa.Integer), sa.column("request", sa.String),
                     sa.column("copies", sa.Integer), sa.column("design", sa.Text),
                     sa.column("pieces", sa.Text))
    pieces: dict[int, dict[str, int]] = {}
    for build_id, item_id, qty in conn.execute(
            sa.select(items.c.build_id, items.c.item_id, items.c.qty)):
        pieces.setdefault(build_id, {})[str(item_id)] = qty
    rows = [{"build_id": b.id, "position": 1, "request": b.request, "copies": b.copies,
             "design": b.design or "{}", "pieces": json.dumps(pieces.get(b.id, {}),
                                                              sort_keys=True)}
            for b in conn.execute(sa.select(builds).order_by(builds.c.id))]
    if rows:
        conn.execute(lines.insert(), rows)
        conn.execute(builds.update().values(design="{}"))


def downgrade() -> None:
    with op.batch_alter_table("batches") as batch:
        batch.drop_column("digest")
    with op.batch_alter_table("orders") as batch:
        batch.drop_constraint("fk_orders_cancelled_batch", type_="foreignkey")
        batch.drop_column("cancelled_batch_id")
        batch.drop_column("used")
    op.drop_index("ix_build_lines_build", "build_lines")
    op.drop_table("build_lines")

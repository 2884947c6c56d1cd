"""Initial store: items, batches, movements, builds, build items, orders.

Revision ID: 0001
Revises:
Create Date: 2026-12-01
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0001"
down_revision: str | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "items",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("kind", sa.String(16), nullable=False),
        sa.Column("value", sa.Float(), nullable=True),
        sa.Column("label", sa.String(200), nullable=True, unique=True),
        sa.Column("qty", sa.Integer(), nullable=False),
        sa.Column("min_qty", sa.Integer(), nullable=False),
        sa.Column("location", sa.String(200), nullable=False),
        sa.Column("tolerance", sa.Float(), nullable=True),
        sa.Column("power", sa.Float(), nullable=True),
        sa.Column("voltage", sa.Float(), nullable=True),
        sa.Column("dielectric", sa.String(40), nullable=True),
        *[sa.Column(name, sa.Float(), nullable=True) for name in (
            "hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref", "vaf", "vce_sat",
            "vceo", "ic_max", "pd", "ft", "cob")],
        sa.Column("created", sa.DateTime(), nullable=False),
        sa.CheckConstraint("qty >= 0", name="ck_items_qty_nonnegative"),
        sa.CheckConstraint("min_qty >= 0", name="ck_items_min_qty_nonnegative"),
    )
    op.create_index("ix_items_kind_value", "items", ["kind", "value"])
    op.create_table(
        "batches",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("when", sa.DateTime(), nullable=False),
        sa.Column("kind", sa.String(16), nullable=False),
        sa.Column("note", sa.Text(), nullable=False),
        sa.Column("undone_by", sa.Integer(), sa.ForeignKey("batches.id"), nullable=True),
    )
    op.create_table(
        "movements",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("batch_id", sa.Integer(), sa.ForeignKey("batches.id"), nullable=False),
        sa.Column("item_id", sa.Integer(), sa.ForeignKey("items.id"), nullable=False),
        sa.Column("change", sa.Integer(), nullable=False),
        sa.Column("reason", sa.Text(), nullable=False),
        sa.Column("when", sa.DateTime(), nullable=False),
    )
    op.create_index("ix_movements_item", "movements", ["item_id"])
    op.create_index("ix_movements_batch", "movements", ["batch_id"])
    op.create_table(
        "builds",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("request", sa.String(400), nullable=False),
        sa.Column("copies", sa.Integer(), nullable=False),
        sa.Column("created", sa.DateTime(), nullable=False),
        sa.Column("design", sa.Text(), nullable=False),
        sa.Column("undone", sa.Boolean(), nullable=False),
        sa.Column("batch_id", sa.Integer(), sa.ForeignKey("batches.id"), nullable=False),
    )
    op.create_table(
        "build_items",
        sa.Column("build_id", sa.Integer(), sa.ForeignKey("builds.id"), primary_key=True),
        sa.Column("item_id", sa.Integer(), sa.ForeignKey("items.id"), primary_key=True),
        sa.Column("qty", sa.Integer(), nullable=False),
    )
    op.create_table(
        "orders",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("created", sa.DateTime(), nullable=False),
        sa.Column("kind", sa.String(16), nullable=False),
        sa.Column("value", sa.Float(), nullable=True),
        sa.Column("label", sa.String(200), nullable=True),
        sa.Column("qty", sa.Integer(), nullable=False),
        sa.Column("tolerance", sa.Float(), nullable=True),
        sa.Column("power", sa.Float(), nullable=True),
        sa.Column("voltage", sa.Float(), nullable=True),
        sa.Column("dielectric", sa.String(40), nullable=True),
        sa.Column("received", sa.Boolean(), nullable=False),
        sa.Column("received_batch_id", sa.Integer(), sa.ForeignKey("batches.id"),
                  nullable=True),
        sa.Column("batch_id", sa.Integer(), sa.ForeignKey("batches.id"), nullable=True),
    )


def downgrade() -> None:
    for table in ("orders", "build_items", "builds", "movements", "batches", "items"):
        op.drop_table(table)

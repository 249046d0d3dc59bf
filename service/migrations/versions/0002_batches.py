"""Compliance batches: the batches and their items (processing state, link to the stored assessment).

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-04
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "batches",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("title", sa.String(length=200), nullable=False),
        sa.Column("item_count", sa.Integer(), nullable=False),
        sa.PrimaryKeyConstraint("id"),
    )
    op.create_index("ix_batches_created_at", "batches", ["created_at"])
    op.create_table(
        "batch_items",
        sa.Column("batch_id", sa.Uuid(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("name", sa.String(length=200), nullable=False),
        sa.Column("request_json", sa.Text(), nullable=False),
        sa.Column("status", sa.String(length=8), nullable=False),
        sa.Column("claim", sa.String(length=32), nullable=True),
        sa.Column("claimed_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("finished_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("assessment_id", sa.Uuid(), nullable=True),
        sa.Column("verdict", sa.String(length=4), nullable=True),
        sa.Column("max_e_kv_m", sa.Float(), nullable=True),
        sa.Column("max_b_ut", sa.Float(), nullable=True),
        sa.Column("worst_exposure_index", sa.Float(), nullable=True),
        sa.Column("problem_json", sa.Text(), nullable=True),
        sa.CheckConstraint("status IN ('pending', 'running', 'done', 'error')", name="ck_batch_items_status"),
        sa.ForeignKeyConstraint(["batch_id"], ["batches.id"]),
        sa.ForeignKeyConstraint(["assessment_id"], ["assessments.id"]),
        sa.PrimaryKeyConstraint("batch_id", "position"),
    )
    op.create_index("ix_batch_items_status", "batch_items", ["status"])


def downgrade() -> None:
    op.drop_index("ix_batch_items_status", table_name="batch_items")
    op.drop_table("batch_items")
    op.drop_index("ix_batches_created_at", table_name="batches")
    op.drop_table("batches")

"""Initial schema: assessments and the digest-chain head, as create_all made them before migrations.

Revision ID: 0001
Revises:
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

GENESIS_DIGEST = "0" * 64  # storage.GENESIS_DIGEST: prev_digest of the first record
SEQUENCE = sa.BigInteger().with_variant(sa.Integer(), "sqlite")  # SQLite: INTEGER, 64-bit there too


def upgrade() -> None:
    op.create_table(
        "assessments",
        sa.Column("id", sa.Uuid(), nullable=False),
        sa.Column("sequence", SEQUENCE, nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("reference", sa.String(length=200), nullable=False),
        sa.Column("title", sa.String(length=200), nullable=False),
        sa.Column("outcome", sa.String(length=4), nullable=False),
        sa.Column("request_json", sa.Text(), nullable=False),
        sa.Column("report_json", sa.Text(), nullable=False),
        sa.Column("digest", sa.String(length=64), nullable=False),
        sa.Column("prev_digest", sa.String(length=64), nullable=False),
        sa.Column("engine_version", sa.String(length=32), nullable=False),
        sa.Column("catalogue_version", sa.String(length=32), nullable=False),
        sa.CheckConstraint("outcome IN ('pass', 'fail')", name="ck_assessments_outcome"),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("digest"),
        sa.UniqueConstraint("sequence"),
    )
    op.create_index("ix_assessments_created_at", "assessments", ["created_at"])
    op.create_index("ix_assessments_outcome", "assessments", ["outcome"])
    op.create_index("ix_assessments_reference", "assessments", ["reference"])
    chain_head = op.create_table(
        "chain_head",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("sequence", SEQUENCE, nullable=False),
        sa.Column("digest", sa.String(length=64), nullable=False),
        sa.CheckConstraint("id = 1", name="ck_chain_head_single_row"),
        sa.PrimaryKeyConstraint("id"),
    )
    op.bulk_insert(chain_head, [{"id": 1, "sequence": 0, "digest": GENESIS_DIGEST}])


def downgrade() -> None:
    op.drop_table("chain_head")
    op.drop_index("ix_assessments_reference", table_name="assessments")
    op.drop_index("ix_assessments_outcome", table_name="assessments")
    op.drop_index("ix_assessments_created_at", table_name="assessments")
    op.drop_table("assessments")

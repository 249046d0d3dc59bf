"""Organisations: API keys, the tenant of assessments and batches, idempotency keys.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-04

Existing assessments and batches keep ``tenant`` NULL (stored with access control off);
their digests are unchanged (a record's tenant enters its digest only when set).
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    for table in ("assessments", "batches"):
        op.add_column(table, sa.Column("tenant", sa.String(length=100), nullable=True))
        op.create_index(f"ix_{table}_tenant", table, ["tenant"])
    op.create_table(
        "api_keys",
        sa.Column("key_id", sa.String(length=32), nullable=False),
        sa.Column("tenant", sa.String(length=100), nullable=False),
        sa.Column("role", sa.String(length=8), nullable=False),
        sa.Column("label", sa.String(length=200), nullable=False),
        sa.Column("salt", sa.String(length=64), nullable=False),
        sa.Column("secret_hash", sa.String(length=128), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("revoked_at", sa.DateTime(timezone=True), nullable=True),
        sa.CheckConstraint("role IN ('submit', 'read')", name="ck_api_keys_role"),
        sa.PrimaryKeyConstraint("key_id"),
    )
    op.create_index("ix_api_keys_tenant", "api_keys", ["tenant"])
    op.create_table(
        "idempotency_keys",
        sa.Column("tenant", sa.String(length=100), nullable=False),
        sa.Column("key", sa.String(length=255), nullable=False),
        sa.Column("body_sha256", sa.String(length=64), nullable=False),
        sa.Column("assessment_id", sa.Uuid(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(["assessment_id"], ["assessments.id"]),
        sa.PrimaryKeyConstraint("tenant", "key"),
    )


def downgrade() -> None:
    op.drop_table("idempotency_keys")
    op.drop_index("ix_api_keys_tenant", table_name="api_keys")
    op.drop_table("api_keys")
    for table in ("batches", "assessments"):
        op.drop_index(f"ix_{table}_tenant", table_name=table)
        with op.batch_alter_table(table) as batch:
            batch.drop_column("tenant")

"""idempotency keys and record versions

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0007"
down_revision: str | None = "0006"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


# Tables whose rows carry a version: bumped by every ORM UPDATE, sent as the ETag.
VERSIONED = ("sites", "areas", "fixtures", "lamp_positions", "lamp_types")


def upgrade() -> None:
    for table in VERSIONED:
        with op.batch_alter_table(table) as batch:
            batch.add_column(
                sa.Column("version", sa.Integer(), nullable=False, server_default="1")
            )
    op.create_table(
        "idempotency_keys",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("api_key_id", sa.Integer(), nullable=False),
        sa.Column("method", sa.String(length=10), nullable=False),
        sa.Column("route", sa.String(length=500), nullable=False),
        sa.Column("idem_key", sa.String(length=255), nullable=False),
        sa.Column("body_sha256", sa.String(length=64), nullable=False),
        sa.Column("status", sa.Integer(), nullable=True),
        sa.Column("headers", sa.JSON(), nullable=True),
        sa.Column("body", sa.LargeBinary(), nullable=True),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("expires_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_idempotency_keys")),
        sa.UniqueConstraint(
            "api_key_id", "method", "route", "idem_key", name=op.f("uq_idempotency_keys_api_key_id_method_route_idem_key")
        ),
    )
    op.create_index("ix_idempotency_keys_expires_at", "idempotency_keys", ["expires_at"])


def downgrade() -> None:
    op.drop_index("ix_idempotency_keys_expires_at", table_name="idempotency_keys")
    op.drop_table("idempotency_keys")
    for table in reversed(VERSIONED):
        with op.batch_alter_table(table) as batch:
            batch.drop_column("version")

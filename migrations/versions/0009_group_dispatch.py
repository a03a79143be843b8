"""work-order lines: per-position outcomes and covered spot orders

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-02
"""

from collections.abc import Sequence

revision: str = "0009"
down_revision: str | None = "0008"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    pass


def downgrade() -> None:
    pass

"""The changes table, written only by database triggers (migration 0011)."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, BigInteger, Index, Integer, String
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, UTCDateTime

# SQLite aliases only INTEGER PRIMARY KEY to the rowid (AUTOINCREMENT: never reused).
BIG_ID = BigInteger().with_variant(Integer(), "sqlite")


class Change(Base):
    """One insert, update or delete of a tracked row, with the row as it was written."""

    __tablename__ = "changes"
    __table_args__ = (
        Index("ix_changes_xact_id_id", "xact_id", "id"),
        Index("ix_changes_resource_type_resource_id", "resource_type", "resource_id"),
        {"sqlite_autoincrement": True},
    )

    id: Mapped[int] = mapped_column(BIG_ID, primary_key=True)
    # PostgreSQL: the writing transaction's 64-bit id (pg_current_xact_id); SQLite: 0.
    xact_id: Mapped[int] = mapped_column(BigInteger, server_default="0")
    changed_at: Mapped[datetime] = mapped_column(UTCDateTime(), index=True)
    resource_type: Mapped[str] = mapped_column(String(40))
    resource_id: Mapped[int] = mapped_column(BigInteger)
    kind: Mapped[str] = mapped_column(String(16))
    version: Mapped[int | None] = mapped_column(Integer, default=None)
    # The row's columns as stored at this version; NULL for a deletion (tombstone).
    body: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)

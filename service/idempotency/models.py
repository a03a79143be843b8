"""One row per (API key, method, path, Idempotency-Key): a claim, then the stored answer."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Index, Integer, LargeBinary, String, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base


class IdempotencyKey(Base):
    """A claimed key (status None while the first request runs) or its finished answer."""

    __tablename__ = "idempotency_keys"
    __table_args__ = (
        UniqueConstraint("api_key_id", "method", "route", "idem_key"),
        Index("ix_idempotency_keys_expires_at", "expires_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    # No foreign key: a revoked or deleted API key's rows simply expire.
    api_key_id: Mapped[int] = mapped_column(Integer)
    method: Mapped[str] = mapped_column(String(10))
    route: Mapped[str] = mapped_column(String(500))  # the path with its parameters filled in
    idem_key: Mapped[str] = mapped_column(String(255))
    body_sha256: Mapped[str] = mapped_column(String(64))  # hex digest of the request body
    status: Mapped[int | None] = mapped_column(Integer, default=None)
    headers: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)
    body: Mapped[bytes | None] = mapped_column(LargeBinary, default=None)
    created_at: Mapped[datetime] = mapped_column()
    expires_at: Mapped[datetime] = mapped_column()

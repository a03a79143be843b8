"""API key request and response bodies."""

from __future__ import annotations

from datetime import datetime
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

Scope = Literal["read", "write", "admin"]


class ApiKeyCreate(BaseModel):
    """A new key: a unique name and one scope."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    name: str = Field(min_length=1, max_length=120)
    scope: Scope


class ApiKeyRead(BaseModel):
    """A stored key, without its secret."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    name: str
    prefix: str
    scope: Scope
    created_at: datetime
    revoked_at: datetime | None
    last_used_at: datetime | None


class ApiKeyCreated(ApiKeyRead):
    """A key just made: the secret is shown this once and never again."""

    key: str

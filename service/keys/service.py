"""Creating, checking and revoking API keys."""

from __future__ import annotations

import hashlib
import secrets
from collections.abc import Sequence

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.config import get_settings
from service.db.base import utcnow
from service.errors import Conflict, NotFound
from service.keys.cache import ActiveKey, SessionOpener, cache
from service.keys.models import ApiKey
from service.keys.usage import recorder

SCOPE_RANK = {"read": 1, "write": 2, "admin": 3}
KEY_PREFIX = "lk_"


def digest(key: str) -> str:
    """SHA-256 hex digest of a presented key (keys are random, so no salt is needed)."""
    return hashlib.sha256(key.encode()).hexdigest()


def scope_allows(held: str, needed: str) -> bool:
    """True when a key's scope covers a needed one (admin > write > read)."""
    return SCOPE_RANK.get(held, 0) >= SCOPE_RANK[needed]


def create_key(session: Session, name: str, scope: str) -> tuple[ApiKey, str]:
    """Store a new key and return it with its secret (shown once)."""
    if scope not in SCOPE_RANK:
        raise ValueError(f"unknown scope {scope!r}")
    if session.scalar(select(ApiKey.id).where(ApiKey.name == name)) is not None:
        raise Conflict(f"An API key named '{name}' already exists.")
    secret = KEY_PREFIX + secrets.token_urlsafe(32)
    row = ApiKey(name=name, prefix=secret[:10], digest=digest(secret), scope=scope)
    session.add(row)
    session.flush()
    return row, secret


def find_active(session: Session, presented: str) -> ApiKey | None:
    """The active key matching a presented secret, or None; a read only.

    The use is noted in memory (service/keys/usage.py) and written to last_used_at later,
    in a short transaction of its own, so checking a key never makes a read a writer.
    """
    row = session.scalar(select(ApiKey).where(ApiKey.digest == digest(presented)))
    if row is None or row.revoked_at is not None:
        return None
    recorder.note(row.id)
    return row


def cached_key(presented: str) -> ActiveKey | None:
    """The key if the cache holds it as active (no database: safe on the event loop)."""
    ttl = get_settings().key_cache_s
    hit = cache.get(digest(presented), ttl) if ttl > 0 else None
    if hit is not None:
        recorder.note(hit.id)
    return hit


def active_key(opener: SessionOpener, presented: str) -> ActiveKey | None:
    """The active key for a presented secret: from the key cache, else one read."""
    hit = cached_key(presented)
    if hit is not None:
        return hit
    ttl = get_settings().key_cache_s
    d = digest(presented)
    with opener() as session:
        row = find_active(session, presented)
        if row is None:
            return None
        key = ActiveKey(id=row.id, name=row.name, scope=row.scope)
    if ttl > 0:
        cache.put(d, key)
    return key


def list_keys(session: Session) -> Sequence[ApiKey]:
    """All keys, oldest first."""
    return session.scalars(select(ApiKey).order_by(ApiKey.id)).all()


def revoke_key(session: Session, key_id: int) -> ApiKey:
    """Revoke a key; it stops working at once."""
    row = session.get(ApiKey, key_id)
    if row is None:
        raise NotFound(f"API key {key_id} does not exist.")
    if row.revoked_at is None:
        row.revoked_at = utcnow()
    session.flush()
    cache.forget(row.id)  # this process refuses it at once; others within key_cache_s
    return row

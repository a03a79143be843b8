"""Opaque feed cursors: base64url of the change's (xact id, change id, time).

Every value comes from the stored change row, so a cursor means the same on every
replica; the time lets a cursor older than the retention answer 410 without a lookup.
"""

from __future__ import annotations

import base64
import binascii
from dataclasses import dataclass

PREFIX = "c1"


@dataclass(frozen=True)
class Cursor:
    """A position in the feed: after the change (xact_id, change_id)."""

    xact_id: int
    change_id: int
    epoch_s: int  # the change's changed_at, whole seconds since 1970 (UTC)


def encode(cur: Cursor) -> str:
    """The opaque text of a cursor."""
    raw = f"{PREFIX}.{cur.xact_id}.{cur.change_id}.{cur.epoch_s}".encode()
    return base64.urlsafe_b64encode(raw).decode().rstrip("=")


def decode(text: str) -> Cursor:
    """Parse a cursor; ValueError if it is not one of ours."""
    if not text or len(text) > 200:
        raise ValueError("not a feed cursor")
    try:
        raw = base64.urlsafe_b64decode(text + "=" * (-len(text) % 4)).decode()
    except (binascii.Error, UnicodeDecodeError, ValueError) as exc:
        raise ValueError("not a feed cursor") from exc
    parts = raw.split(".")
    if len(parts) != 4 or parts[0] != PREFIX or not all(p.isdigit() for p in parts[1:]):
        raise ValueError("not a feed cursor")
    xact, cid, epoch = (int(p) for p in parts[1:])
    if max(xact, cid, epoch) >= 2**63:
        raise ValueError("not a feed cursor")
    return Cursor(xact, cid, epoch)

"""Delivery signatures: HMAC-SHA256 over "<timestamp>.<body>" with the subscription secret."""

from __future__ import annotations

import hashlib
import hmac
import secrets

SIGNATURE_HEADER = "X-LampKeeper-Signature"
TIMESTAMP_HEADER = "X-LampKeeper-Timestamp"  # unix seconds; receivers refuse old ones
EVENT_HEADER = "X-LampKeeper-Event-Id"
ATTEMPT_HEADER = "X-LampKeeper-Attempt"


def new_secret() -> str:
    """A fresh subscription secret (shown once)."""
    return "whsec_" + secrets.token_urlsafe(32)


def sign(secret: str, timestamp: int, body: bytes) -> str:
    """The signature header value: v1=<hex HMAC-SHA256 of b"<timestamp>." + body>."""
    mac = hmac.new(secret.encode(), f"{timestamp}.".encode() + body, hashlib.sha256)
    return "v1=" + mac.hexdigest()

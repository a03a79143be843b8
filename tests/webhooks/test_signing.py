"""Signatures: HMAC-SHA256 over "<timestamp>.<body>", checked with the README's snippet."""

from __future__ import annotations

import hashlib
import hmac
import re
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from service.webhooks.signing import new_secret, sign

README = Path(__file__).resolve().parents[2] / "README.md"


def readme_verify() -> Callable[..., bool]:
    """The `verify` function of the README's Integration feed section, executed as written."""
    text = README.read_text()
    section = text[text.index("## Integration feed") :]
    code = re.search(r"```python\n(.*?)```", section, re.S)
    assert code is not None
    scope: dict[str, Any] = {}
    exec(code.group(1), scope)
    return scope["verify"]  # type: ignore[no-any-return]


def test_signature_matches_an_independent_hmac() -> None:
    secret, body, ts = "whsec_test", b'{"a":1}', 1_700_000_000
    # Reference: Python's hmac module (RFC 2104) with SHA-256, computed here by hand.
    expected = hmac.new(b"whsec_test", b"1700000000." + body, hashlib.sha256).hexdigest()
    assert sign(secret, ts, body) == "v1=" + expected


def test_readme_snippet_accepts_ours_and_refuses_tampering() -> None:
    verify = readme_verify()
    secret, body = new_secret(), b'{"event_id":"7"}'
    ts = int(time.time())
    headers = {"x-lampkeeper-timestamp": str(ts), "x-lampkeeper-signature": sign(secret, ts, body)}
    assert verify(secret, headers, body)
    assert not verify(secret, headers, body + b" ")  # body changed
    assert not verify(new_secret(), headers, body)  # another secret
    old = ts - 3600
    replay = {"x-lampkeeper-timestamp": str(old), "x-lampkeeper-signature": sign(secret, old, body)}
    assert not verify(secret, replay, body)  # too old: a replay


def test_secrets_are_fresh() -> None:
    assert len({new_secret() for _ in range(50)}) == 50

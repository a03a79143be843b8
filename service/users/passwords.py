"""Password hashing with argon2id (argon2-cffi's recommended parameters)."""

from __future__ import annotations

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError

_HASHER = PasswordHasher()
MIN_LENGTH = 10  # characters; long passphrases beat composition rules


def hash_password(password: str) -> str:
    """An argon2id hash of the password, salt and parameters included."""
    return _HASHER.hash(password)


def verify_password(stored: str, password: str) -> bool:
    """True when the password matches the stored hash."""
    try:
        return _HASHER.verify(stored, password)
    except (VerificationError, InvalidHashError):
        return False


# A hash to check against when the account is unknown, so both paths cost the same time.
DUMMY_HASH = hash_password("not-a-real-password-for-timing")

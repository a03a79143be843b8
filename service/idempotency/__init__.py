"""Stored answers of POST requests sent with an Idempotency-Key header."""

"""API keys: created by an administrator, stored hashed, each with one scope."""

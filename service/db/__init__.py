"""Database plumbing: declarative base, engine, per-request session."""

"""Settings read from the environment (prefix LAMPKEEPER_) or a .env file."""

from __future__ import annotations

from functools import lru_cache

from pydantic import Field
from pydantic_settings import BaseSettings, SettingsConfigDict


class Settings(BaseSettings):
    """Runtime configuration; every field can be set as LAMPKEEPER_<NAME>."""

    model_config = SettingsConfigDict(env_prefix="LAMPKEEPER_", env_file=".env", extra="ignore")

    # SQLite file by default; PostgreSQL as postgresql+psycopg://user@host:5432/dbname
    database_url: str = "sqlite:///var/lampkeeper.sqlite3"
    host: str = "127.0.0.1"
    port: int = Field(default=8000, ge=1, le=65535)
    log_level: str = "info"
    # The weekly relamping run; off in tests and for one-off CLI commands.
    scheduler_enabled: bool = True
    # `lampkeeper serve` worker processes; None: the machine's cores on PostgreSQL, 1 on
    # SQLite (SQLite serves from one process). With more than one, the scheduler runs once,
    # in the supervising process.
    workers: int | None = Field(default=None, ge=1, le=64)
    # Where the Alembic migrations live; by default the source tree's migrations/ (set it
    # when the package is installed away from the source tree).
    migrations_dir: str | None = None
    # Rows accepted in one bulk upload before the request is refused (413).
    max_bulk_rows: int = Field(default=2_000_000, ge=1)
    # Connection pool: connections kept open, extra ones allowed under load, and seconds a
    # request waits for a free connection before it answers 503 (pool exhausted).
    db_pool_size: int = Field(default=10, ge=1, le=500)
    db_max_overflow: int = Field(default=10, ge=0, le=500)
    db_pool_timeout_s: float = Field(default=10.0, gt=0, le=600)
    # SQLite: seconds a writer waits for the write lock before the request answers 503.
    sqlite_busy_timeout_s: float = Field(default=30.0, gt=0, le=600)
    # Bytes a request body may carry before it is refused with 413 (Content-Length, or
    # counted while a chunked body streams in); a few times the largest real bulk upload.
    max_body_bytes: int = Field(default=256 * 1024 * 1024, ge=1)
    # How long a finished Idempotency-Key answer is replayed (hours).
    idempotency_ttl_h: float = Field(default=24.0, gt=0, le=24 * 365)
    # How long an unfinished claim blocks a retry before it counts as abandoned (seconds).
    idempotency_inflight_s: float = Field(default=300.0, gt=0, le=86_400)
    # Rows per statement on bulk paths (executemany batches, IN-list lookups); at most
    # 30,000 so an IN list stays inside SQLite's 32,766 bound parameters.
    bulk_chunk_rows: int = Field(default=10_000, ge=1, le=30_000)
    # Weekly-run lease (seconds): refreshed every third of it; a run not refreshed that long
    # counts as dead (its process stopped) and is reaped as failed.
    run_lease_seconds: float = Field(default=120.0, gt=0, le=86_400)
    # Seconds a key found active is trusted without asking the database again (0: ask
    # every time). A revoke clears it in the revoking process at once; other worker
    # processes may accept the revoked key for at most this long.
    key_cache_s: float = Field(default=5.0, ge=0, le=300)
    # Seconds a lamp type's field-fit curve is reused (0: refit every time). A new lamp
    # removal of that type refits at once (the cache key holds the removal counts); burn
    # hours of lamps still burning reach the fit within this bound.
    field_fit_cache_s: float = Field(default=30.0, ge=0, le=3600)


@lru_cache
def get_settings() -> Settings:
    """The process-wide settings, read once."""
    return Settings()

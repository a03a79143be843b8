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
    log_level: str = Field(default="info", pattern="^(?i:debug|info|warning|error|critical)$")
    # Log lines as JSON objects (one per line, for a log shipper) or plain text.
    log_format: str = Field(default="json", pattern="^(json|text)$")
    # /metrics without a key (for a scraper on a private network); else a read key.
    metrics_public: bool = False
    # The weekly relamping run; off in tests and for one-off CLI commands.
    scheduler_enabled: bool = True
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
    # Stock: weeks of lamp demand forecast, the cycle service level of reorder points and
    # quantiles, and lamps broken in handling as a fraction of those fitted (common practice).
    stock_horizon_weeks: int = Field(default=26, ge=1, le=104)
    stock_service_level: float = Field(default=0.95, gt=0.5, lt=1.0)
    stock_breakage_fraction: float = Field(default=0.02, ge=0.0, le=0.5)

    # Change feed (service/changes): days a change is kept; a cursor older than that is 410.
    change_retention_days: float = Field(default=30.0, gt=0, le=3650)
    # Webhooks (service/webhooks): seconds between delivery passes of the scheduler.
    webhook_poll_s: float = Field(default=5.0, gt=0, le=3600)
    # Seconds a claimed delivery is leased to one worker; longer than the HTTP timeout.
    webhook_lease_s: float = Field(default=60.0, gt=0, le=3600)
    # Seconds allowed for one POST to a receiver (connect, write, read each).
    webhook_timeout_s: float = Field(default=10.0, gt=0, le=300)
    # Retry back-off: base * 2**(attempt-1) seconds, capped, with jitter; after
    # webhook_give_up_s since the first attempt the delivery fails and the subscription pauses.
    webhook_retry_base_s: float = Field(default=30.0, gt=0, le=86_400)
    webhook_retry_cap_s: float = Field(default=3600.0, gt=0, le=86_400)
    webhook_give_up_s: float = Field(default=86_400.0, gt=0, le=30 * 86_400)
    # Deliveries claimed per pass.
    webhook_batch: int = Field(default=50, ge=1, le=10_000)
    # Targets on loopback (127.0.0.0/8, ::1) or private/link-local/reserved ranges are
    # refused unless allowed here (a receiver on the same host or network).
    webhook_allow_loopback: bool = False
    webhook_allow_private: bool = False


@lru_cache
def get_settings() -> Settings:
    """The process-wide settings, read once."""
    return Settings()

"""The P3 anchor: a bare FastAPI app answering GET /fixtures?limit=N with the same SELECTs.

No middleware, no key check, no ORM, no response model: the count, the page of fixtures
and their lamp positions in three plain statements on a SQLAlchemy Core pool of the same
size as the service's, the rows returned as dicts (FastAPI's default JSON encoding). It is
what any FastAPI service must at least do to give the same answer, so the service's
throughput over this one's is the price of everything else it does per request.

Served by bench_list.py with the same uvicorn settings as `lampkeeper serve`; reads the
database URL from LAMPKEEPER_DATABASE_URL.
"""

from __future__ import annotations

import os
from typing import Annotated, Any

from fastapi import FastAPI, Query
from sqlalchemy import create_engine, text

FIXTURE_COLUMNS = (
    "id, version, site_id, area_id, tag, location, lamp_type_id, lamps_per_fixture, "
    "ballast_kind, measured_voltage_v, installed_on, external_reference, created_at, "
    "updated_at, retired_at"
)
POSITION_COLUMNS = (
    "id, version, fixture_id, position_no, lamp_installed_at, hours_at_install, "
    "starts_at_install, burned_out_at"
)


def create_app() -> FastAPI:
    """The bare app on the database named by LAMPKEEPER_DATABASE_URL."""
    url = os.environ["LAMPKEEPER_DATABASE_URL"]
    size = int(os.environ.get("LAMPKEEPER_DB_POOL_SIZE", "10"))
    overflow = int(os.environ.get("LAMPKEEPER_DB_MAX_OVERFLOW", "10"))
    kw: dict[str, Any] = {"pool_size": size, "max_overflow": overflow}
    if url.startswith("sqlite"):
        from sqlalchemy.pool import QueuePool

        kw |= {"poolclass": QueuePool, "connect_args": {"check_same_thread": False}}
    engine = create_engine(url, **kw)
    app = FastAPI()

    @app.get("/api/v1/fixtures")
    def fixtures(limit: Annotated[int, Query(ge=1, le=1000)] = 50) -> dict[str, Any]:
        with engine.connect() as conn:
            total = conn.execute(
                text("SELECT count(*) FROM fixtures WHERE retired_at IS NULL")
            ).scalar_one()
            rows = conn.execute(
                text(
                    f"SELECT {FIXTURE_COLUMNS} FROM fixtures WHERE retired_at IS NULL "
                    "ORDER BY id LIMIT :limit"
                ),
                {"limit": limit},
            ).mappings()
            items = [dict(r) | {"positions": []} for r in rows]
            by_id = {item["id"]: item for item in items}
            if by_id:
                positions = conn.execute(
                    text(
                        f"SELECT {POSITION_COLUMNS} FROM lamp_positions "
                        f"WHERE fixture_id IN ({','.join(str(i) for i in by_id)}) "
                        "ORDER BY fixture_id, position_no"
                    )
                ).mappings()
                for p in positions:
                    by_id[p["fixture_id"]]["positions"].append(dict(p))
        return {"items": items, "total": total, "limit": limit, "offset": 0}

    return app

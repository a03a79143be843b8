"""Fixture export: the rows the fixture import takes back (by site, area, lamp type names)."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Table, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.register.models import Area, Fixture, LampPosition, Site

_FIXTURES: Table = Fixture.__table__  # type: ignore[assignment]
_POSITIONS: Table = LampPosition.__table__  # type: ignore[assignment]


def export_fixtures(
    session: Session,
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    lamp_type_id: int | None = None,
    tag_contains: str | None = None,
) -> list[dict[str, Any]]:
    """Fixtures as import rows; the lamp columns describe position 1's lamp."""
    f, p = _FIXTURES, _POSITIONS
    stmt = (
        select(
            Site.name.label("site"),
            Area.name.label("area"),
            f.c.tag,
            f.c.location,
            LampType.code.label("lamp_type"),
            f.c.lamps_per_fixture,
            f.c.ballast_kind,
            f.c.measured_voltage_v,
            f.c.installed_on,
            p.c.lamp_installed_at.label("lamps_installed_at"),
            p.c.hours_at_install.label("lamp_hours_at_install"),
            p.c.starts_at_install.label("lamp_starts_at_install"),
        )
        .select_from(f)
        .join(Site, Site.id == f.c.site_id)
        .join(Area, Area.id == f.c.area_id)
        .join(LampType, LampType.id == f.c.lamp_type_id)
        .outerjoin(p, (p.c.fixture_id == f.c.id) & (p.c.position_no == 1))
        .order_by(Site.name, f.c.tag)
    )
    if site_id is not None:
        stmt = stmt.where(f.c.site_id == site_id)
    if area_id is not None:
        stmt = stmt.where(f.c.area_id == area_id)
    if lamp_type_id is not None:
        stmt = stmt.where(f.c.lamp_type_id == lamp_type_id)
    if tag_contains:
        stmt = stmt.where(f.c.tag.ilike(f"%{tag_contains}%"))
    return [dict(r._mapping) for r in session.execute(stmt)]

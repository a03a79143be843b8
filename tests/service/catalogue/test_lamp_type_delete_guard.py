"""Deleting a lamp type: the register counts its fixtures; the database refuses a late one."""

from __future__ import annotations

import pytest
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.catalogue import service as catalogue
from service.catalogue.models import LampType
from service.register import repository as register_repo
from service.register.models import Area, Fixture, Site


def _lamp_with_fixture(db: Session) -> tuple[LampType, Fixture]:
    site = Site(
        name="Guard Works",
        time_zone="UTC",
        nominal_voltage_v=230,
        currency="EUR",
        energy_price_per_kwh=0.2,
        labour_rate_per_h=40.0,
    )
    area = Area(site=site, name="Bay", access_method="ladder")
    lamp = LampType(
        code="GUARD-T8",
        technology="linear_fluorescent",
        rated_watts=58,
        rated_volts=230,
        rated_life_h=24000,
    )
    db.add_all([site, area, lamp])
    db.flush()
    fixture = Fixture(site_id=site.id, area_id=area.id, lamp_type_id=lamp.id, tag="G-1")
    db.add(fixture)
    db.flush()
    return lamp, fixture


def test_register_counts_the_fixtures_using_a_lamp_type(db: Session) -> None:
    lamp, _ = _lamp_with_fixture(db)
    assert register_repo.fixtures_using_lamp_type(db, lamp.id) == 1
    with pytest.raises(Conflict) as err:
        catalogue.delete_lamp_type(db, lamp.id, fixtures=1)
    assert "1 fixture" in str(err.value)


def test_a_fixture_added_after_the_count_still_blocks_the_delete(db: Session) -> None:
    # Another client adds a fixture between the count (0) and the delete: the foreign key
    # refuses, the savepoint rolls back, and the lamp type and fixture both stay.
    lamp, fixture = _lamp_with_fixture(db)
    with pytest.raises(Conflict):
        catalogue.delete_lamp_type(db, lamp.id, fixtures=0)
    db.expire_all()
    assert db.get(LampType, lamp.id) is not None and db.get(Fixture, fixture.id) is not None

"""The history rows that block deleting a register record, declared to service.register.history.

Removals, readings, burnout reports, orders and runs live in domains above the register; the
register's delete checks count them through these declarations instead of importing them.
The order here is the order a 409 lists them in.
"""

from __future__ import annotations

from service.events.models import BurnoutReport, LampRemoval
from service.readings.models import BurnHourRecord, VoltageReading
from service.register.history import HistorySource, register_history_source
from service.scheduling.models import WeeklyRun
from service.workorders.models import WorkOrder, WorkOrderLine

SOURCES = (
    HistorySource(
        "removals", LampRemoval, fixture=LampRemoval.fixture_id, position=LampRemoval.position_id
    ),
    HistorySource(
        "burn-hour records",
        BurnHourRecord,
        fixture=BurnHourRecord.fixture_id,
        area=BurnHourRecord.area_id,
    ),
    HistorySource(
        "voltage readings",
        VoltageReading,
        fixture=VoltageReading.fixture_id,
        area=VoltageReading.area_id,
        site=VoltageReading.site_id,  # a site's readings include those taken at the site alone
    ),
    HistorySource(
        "burnout reports",
        BurnoutReport,
        fixture=BurnoutReport.fixture_id,
        position=BurnoutReport.position_id,
    ),
    HistorySource("work-order lines", WorkOrderLine, fixture=WorkOrderLine.fixture_id),
    HistorySource("work orders", WorkOrder, area=WorkOrder.area_id),
    HistorySource("weekly runs", WeeklyRun, site=WeeklyRun.site_id),
)

register_history_source(*SOURCES)

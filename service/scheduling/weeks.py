"""ISO weeks and the weekly schedule in a site's time zone (pure date arithmetic)."""

from __future__ import annotations

import re
from datetime import date, datetime, time, timedelta
from zoneinfo import ZoneInfo

from apscheduler.triggers.cron import CronTrigger

WEEK_PATTERN = re.compile(r"^(\d{4})-W(\d{2})$")


def iso_week_of(d: date) -> str:
    """The ISO 8601 week of a date, e.g. 2026-W49."""
    year, week, _ = d.isocalendar()
    return f"{year}-W{week:02d}"


def parse_week(text: str) -> date:
    """Monday of an ISO week written YYYY-Www (ValueError when malformed or out of range)."""
    m = WEEK_PATTERN.match(text)
    if not m:
        raise ValueError("week must be written YYYY-Www, e.g. 2026-W49")
    return date.fromisocalendar(int(m.group(1)), int(m.group(2)), 1)


def _hm(hhmm: str) -> tuple[int, int]:
    h, m = hhmm.split(":")
    return int(h), int(m)


def weekly_trigger(weekday: int, hhmm: str, time_zone: str) -> CronTrigger:
    """A cron trigger firing each week at weekday (0 = Monday) and HH:MM site-local time."""
    h, m = _hm(hhmm)
    return CronTrigger(day_of_week=weekday, hour=h, minute=m, timezone=ZoneInfo(time_zone))


def last_fire_time(weekday: int, hhmm: str, time_zone: str, now: datetime) -> datetime:
    """The latest scheduled moment at or before now (site-local wall clock, aware)."""
    tz = ZoneInfo(time_zone)
    local = now.astimezone(tz)
    h, m = _hm(hhmm)
    day = local.date() - timedelta(days=(local.weekday() - weekday) % 7)
    fire = datetime.combine(day, time(h, m), tzinfo=tz)
    if fire > now:
        fire = datetime.combine(day - timedelta(days=7), time(h, m), tzinfo=tz)
    return fire

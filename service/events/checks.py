"""Checks shared by burnout reports and removals: times, hours and removal reasons.

Times are checked against our clock with FUTURE_SKEW of client clock skew allowed and
against the time the lamp went in; burn hours must be finite and >= 0 hours.
"""

from __future__ import annotations

from datetime import datetime, timedelta

import numpy as np

from service.api.errors import Invalid
from service.db.base import utcnow
from service.events.models import REMOVAL_REASONS
from service.register.models import LampPosition

# Clock skew tolerated between a client and us before a timestamp counts as "in the future".
FUTURE_SKEW = timedelta(minutes=5)


def as_aware(ts: datetime) -> datetime:
    """A naive timestamp taken as UTC; an aware one unchanged."""
    return ts if ts.tzinfo is not None else ts.replace(tzinfo=utcnow().tzinfo)


def check_not_future(ts: datetime, field: str) -> None:
    """422 when a timestamp lies in the future."""
    if as_aware(ts) > utcnow() + FUTURE_SKEW:
        raise Invalid(
            f"{field} {ts.isoformat()} is in the future.",
            errors=[{"field": field, "in": "body", "message": "must not be in the future"}],
        )


def check_burn_hours(burn_hours: float | None) -> None:
    """422 unless burn hours are absent or a finite number >= 0."""
    if burn_hours is not None and not (np.isfinite(burn_hours) and burn_hours >= 0):
        raise Invalid(
            "burn_hours must be a non-negative number of hours.",
            errors=[{"field": "burn_hours", "in": "body", "message": "must be >= 0 hours"}],
        )


def check_after_install(position: LampPosition, ts: datetime, field: str) -> None:
    """422 when a timestamp is before the lamp now in the position went in."""
    if as_aware(ts) < position.lamp_installed_at:
        raise Invalid(
            f"{field} {ts.isoformat()} is before the lamp went in "
            f"({position.lamp_installed_at.isoformat()}).",
            errors=[{"field": field, "in": "body", "message": "before the lamp went in"}],
        )


def check_reason(reason: str) -> None:
    """422 for a removal reason outside REMOVAL_REASONS."""
    if reason not in REMOVAL_REASONS:
        raise Invalid(
            f"Unknown removal reason '{reason}'; use one of {', '.join(REMOVAL_REASONS)}.",
            errors=[{"field": "reason", "in": "body", "message": "unknown reason"}],
        )

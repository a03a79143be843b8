"""Demo people, one per role (invented names), with a demo-only password."""

from __future__ import annotations

from sqlalchemy.orm import Session

from service.users import repository
from service.users import service as users

DEMO_PASSWORD = "demo-lamps-2026"  # demo data only; never use on a real install
DEMO_USERS = [
    ("vika", "Vika Demo", "viewer"),
    ("tamo", "Tamo Demo", "technician"),
    ("pela", "Pela Demo", "planner"),
    ("ardo", "Ardo Demo", "administrator"),
]


def ensure_demo_users(session: Session) -> list[tuple[str, str]]:
    """Create the demo users that are missing; return (username, role) for each."""
    for name, display, role in DEMO_USERS:
        if repository.by_username(session, name) is None:
            users.create_user(session, name, display, role, DEMO_PASSWORD)
    return [(name, role) for name, _, role in DEMO_USERS]

"""The demo's retrofit options (seed_data/retrofit_options.json), through the planning rules."""

from __future__ import annotations

import json
from pathlib import Path

from sqlalchemy import inspect
from sqlalchemy.orm import Session

from service.planning.retrofit import RetrofitOptionCreate, create_option

RETROFIT_OPTIONS = "retrofit_options.json"


def load_retrofit_options(session: Session, root: Path, lamp_id: dict[str, int]) -> int:
    """Create the demo's retrofit options (each names its lamp type by code); options made."""
    path = root / RETROFIT_OPTIONS
    if not path.exists() or not inspect(session.get_bind()).has_table("retrofit_options"):
        return 0
    made = 0
    for doc in json.loads(path.read_text(encoding="utf-8")):
        values = {k: v for k, v in doc.items() if k != "lamp_type"}
        body = RetrofitOptionCreate.model_validate(
            values | {"lamp_type_id": lamp_id[doc["lamp_type"]]}
        )
        create_option(session, body)
        made += 1
    return made

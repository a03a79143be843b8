"""The demo's storerooms and their stock (seed_data/stock.json), through the stock service."""

from __future__ import annotations

import json
from pathlib import Path

from sqlalchemy import inspect
from sqlalchemy.orm import Session

from service.stock import ledger
from service.stock import service as stock
from service.stock.models import MovementKind
from service.stock.schemas import BalanceSettings, StoreroomCreate

STOCK = "stock.json"


def load_stock(
    session: Session, root: Path, site_id: dict[str, int], lamp_id: dict[str, int]
) -> int:
    """Create the demo storerooms, their stock lines and an opening delivery; lines made."""
    path = root / STOCK
    if not path.exists() or not inspect(session.get_bind()).has_table("storerooms"):
        return 0
    doc = json.loads(path.read_text(encoding="utf-8"))
    made = 0
    for room_doc in doc["storerooms"]:
        body = StoreroomCreate(
            name=room_doc["name"], site_ids=[site_id[s] for s in room_doc["sites"]]
        )
        room = stock.create_storeroom(session, body)
        for line in room_doc["lines"]:
            settings = BalanceSettings.model_validate(
                {k: v for k, v in line.items() if k not in ("lamp_type", "on_hand")}
            )
            bal, _ = stock.put_balance(session, room.id, lamp_id[line["lamp_type"]], settings)
            if line["on_hand"]:
                ledger.move(
                    session, bal, MovementKind.RECEIVED, int(line["on_hand"]), note="opening stock"
                )
            made += 1
    return made

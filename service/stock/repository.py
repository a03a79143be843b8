"""Queries for the stock ledger: movement lists and their sort whitelist."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select

from service.stock.models import StockMovement

MOVEMENT_SORT = {"id": StockMovement.id, "at": StockMovement.at, "kind": StockMovement.kind}


def movement_query(
    storeroom_id: int,
    lamp_type_id: int | None = None,
    kind: str | None = None,
    work_order_id: int | None = None,
) -> Select[Any]:
    """A storeroom's movements, filtered."""
    stmt = select(StockMovement).where(StockMovement.storeroom_id == storeroom_id)
    if lamp_type_id is not None:
        stmt = stmt.where(StockMovement.lamp_type_id == lamp_type_id)
    if kind is not None:
        stmt = stmt.where(StockMovement.kind == kind)
    if work_order_id is not None:
        stmt = stmt.where(StockMovement.work_order_id == work_order_id)
    return stmt

"""The demo's storerooms: one per site, stocked, and at least one line to order."""

from __future__ import annotations

from pathlib import Path

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.seed.loader import load_demo
from service.stock import ledger
from service.stock.models import StockBalance

API = "/api/v1"


def test_demo_storerooms_have_a_to_order_line(
    client: TestClient, db: Session, reader: dict[str, str], tmp_path: Path
) -> None:
    summary = load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    assert summary.counts["stock_lines"] == 5
    rooms = client.get(f"{API}/storerooms", headers=reader).json()["items"]
    demo = [r for r in rooms if r["site_ids"]]
    assert len(demo) >= 3
    lines = []
    for room in demo:
        r = client.get(f"{API}/storerooms/{room['id']}/to-order", headers=reader)
        assert r.status_code == 200, r.text
        lines += r.json()
    assert any(ln["order_quantity"] > 0 for ln in lines)
    for ln in lines:  # every quantity in whole packs; the ledger sums equal the balances
        assert ln["order_quantity"] % ln["pack_size"] == 0
    for b in db.query(StockBalance).all():
        assert ledger.ledger_sums(db, b.storeroom_id, b.lamp_type_id) == (b.on_hand, b.reserved)

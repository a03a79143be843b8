"""Reorder point and order quantity for one stocked lamp type.

- Reorder point at a service level (cycle service level: the chance of no stock-out while
  an order is on its way): the level quantile of demand over the lead time, in whole lamps
  [Silver, Pyke & Thomas, *Inventory and Production Management in Supply Chains*, 4th ed.,
  ch. 6: s = demand over the lead time at the chosen cycle service level].
- Economic order quantity: Q* = sqrt(2 D S / H), D lamps per year, S cost per order, H
  holding cost per lamp per year [Harris 1913; the same chapter's closed form].
- Or "cover through the next group relamp": enough that the expected stock covers every
  week through the week of the next planned group relamp.
Quantities round up to whole packs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

WEEKS_PER_YEAR = 365.25 / 7.0


def eoq(annual_demand: float, order_cost: float, holding_cost_per_year: float) -> float | None:
    """Economic order quantity in lamps (None when ordering or holding costs nothing)."""
    if annual_demand <= 0 or order_cost <= 0 or holding_cost_per_year <= 0:
        return None
    return math.sqrt(2.0 * annual_demand * order_cost / holding_cost_per_year)


def round_to_pack(quantity: float, pack_size: int) -> int:
    """Whole packs covering a quantity (0 stays 0)."""
    if quantity <= 0:
        return 0
    return math.ceil(quantity / pack_size - 1e-9) * pack_size


@dataclass(frozen=True)
class Reorder:
    """The reorder decision for one lamp type in one storeroom."""

    reorder_point: int
    order_quantity: int
    eoq: float | None


def decide(
    *,
    available: int,
    reorder_point: int,
    pack_size: int,
    policy: str,
    annual_demand: float,
    order_cost: float,
    holding_cost_per_year: float,
    lead_time_mean: float,
    cover_need: float | None,
) -> Reorder:
    """Order when the available stock is at or below the reorder point.

    EOQ policy: at least Q* (lead-time mean when Q* is undefined), and at least enough to
    lift the stock above the reorder point. Cover policy: the mean demand through the next
    group relamp plus the safety margin, less what is available (EOQ without a group).
    """
    q_star = eoq(annual_demand, order_cost, holding_cost_per_year)
    if available > reorder_point:
        return Reorder(reorder_point, 0, q_star)
    lift = reorder_point + 1 - available
    if policy == "cover_next_group" and cover_need is not None:
        safety = max(reorder_point - lead_time_mean, 0.0)
        want = max(cover_need + safety - available, lift)
    else:
        want = max(q_star if q_star is not None else lead_time_mean, lift)
    return Reorder(reorder_point, round_to_pack(want, pack_size), q_star)

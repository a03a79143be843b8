"""Discounted cash flow figures: net present value, internal rate of return, payback (pure).

Cash flows are yearly, flows[0] at time 0 (today), flows[k] at the end of year k; the
conventions of any engineering economics text and of numpy-financial's npv and irr
(tests/unit/planning/test_cashflow.py checks them against numpy-financial):
- NPV(r) = sum_k flows[k] / (1 + r)^k;
- IRR: the rate r with NPV(r) = 0, found by Brent's method on a bracket where NPV changes
  sign (None when there is none: a saving that never pays back, or no investment);
- simple payback: the first time the cumulative flow reaches 0, linear within the year
  (None if never within the flows); discounted payback: the same on the discounted flows.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.optimize import brentq

IRR_LOW, IRR_HIGH = -0.99, 1000.0  # bracket searched for the IRR (fractions per year)


def npv(rate: float, flows: Sequence[float] | np.ndarray) -> float:
    """Net present value at a yearly rate (fraction) of flows at years 0, 1, 2, ..."""
    f = np.asarray(flows, dtype=np.float64)
    years = np.arange(f.size, dtype=np.float64)
    return float(np.sum(f / (1.0 + rate) ** years))


def discounted(rate: float, flows: Sequence[float] | np.ndarray) -> np.ndarray:
    """Each flow in today's money."""
    f = np.asarray(flows, dtype=np.float64)
    return f / (1.0 + rate) ** np.arange(f.size, dtype=np.float64)


def irr(flows: Sequence[float] | np.ndarray) -> float | None:
    """Internal rate of return (fraction per year), or None when NPV never changes sign."""
    f = np.asarray(flows, dtype=np.float64)
    if f.size < 2 or not (np.any(f > 0) and np.any(f < 0)):
        return None
    grid = np.concatenate(
        (np.linspace(IRR_LOW, 0.0, 50, endpoint=False), np.geomspace(1e-4, IRR_HIGH, 300))
    )
    values = np.array([npv(r, f) for r in grid])
    # The sign change nearest to rate 0 (for a conventional investment there is one only).
    changes = np.nonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0)[0]
    if changes.size == 0:
        return None
    zero = int(np.argmin(np.abs(grid[:-1] - 0.0)))
    k = int(changes[np.argmin(np.abs(changes - zero))])
    return float(brentq(lambda r: npv(r, f), grid[k], grid[k + 1], xtol=1e-12))


def payback_years(flows: Sequence[float] | np.ndarray) -> float | None:
    """Years until the cumulative flow first reaches 0 (linear within a year); None: never."""
    f = np.asarray(flows, dtype=np.float64)
    if f.size == 0:
        return None
    cum = np.cumsum(f)
    if cum[0] >= 0:
        return 0.0
    for k in range(1, f.size):
        if cum[k] >= 0:
            # The year's flow falls evenly through the year: interpolate inside it.
            return float(k - 1 + (-cum[k - 1]) / f[k]) if f[k] > 0 else float(k)
    return None


def discounted_payback_years(rate: float, flows: Sequence[float] | np.ndarray) -> float | None:
    """Payback on the flows discounted at a yearly rate; None when never within the flows."""
    return payback_years(discounted(rate, flows))


def escalated(base: float, rate: float, years: int) -> np.ndarray:
    """A yearly amount for years 1..years growing by a yearly rate: base x (1 + rate)^(k-1)."""
    if not math.isfinite(base):
        raise ValueError("amount must be finite")
    return base * (1.0 + rate) ** np.arange(years, dtype=np.float64)

"""NPV, IRR and payback against numpy-financial on the same cash flows."""

from __future__ import annotations

import numpy as np
import numpy_financial as npf
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.planning import cashflow

# Conventional investments: an outlay at year 0, then yearly returns (engineering economics).
# Money in whole cents (subnormal floats are no cash flow and break numpy-financial's roots).
cents = st.integers(min_value=0, max_value=10_000_000).map(lambda c: c / 100.0)
investment = st.tuples(
    st.integers(min_value=1_000, max_value=10_000_000).map(lambda c: c / 100.0),
    st.lists(cents, min_size=1, max_size=25),
)


@settings(max_examples=200, deadline=None)
@given(investment, st.floats(min_value=-0.5, max_value=0.5))
def test_npv_matches_numpy_financial(flows: tuple[float, list[float]], rate: float) -> None:
    values = [-flows[0], *flows[1]]
    # numpy-financial's npv: values[0] at time 0, values[k] at the end of year k.
    assert cashflow.npv(rate, values) == pytest.approx(npf.npv(rate, values), rel=1e-9, abs=1e-6)


@settings(max_examples=200, deadline=None)
@given(investment)
def test_irr_matches_numpy_financial(flows: tuple[float, list[float]]) -> None:
    values = [-flows[0], *flows[1]]
    ref = npf.irr(values)
    got = cashflow.irr(values)
    if np.isnan(ref) or not (cashflow.IRR_LOW < ref < cashflow.IRR_HIGH):
        # numpy-financial finds no rate (or one outside our bracket): neither do we, or ours
        # zeroes the NPV all the same.
        assert got is None or abs(cashflow.npv(got, values)) < 1e-6 * max(map(abs, values))
        return
    assert got is not None
    assert got == pytest.approx(ref, rel=1e-6, abs=1e-9)


def test_irr_of_a_textbook_case() -> None:
    # -100 now, +60 and +60: 100 = 60/(1+r) + 60/(1+r)^2 -> r = 0.1307 (closed form of the
    # quadratic 100x^2 - 60x - 60... in x = 1 + r: x = (60 + sqrt(60^2 + 4*100*60)) / 200).
    x = (60 + (60**2 + 4 * 100 * 60) ** 0.5) / 200
    assert cashflow.irr([-100, 60, 60]) == pytest.approx(x - 1, rel=1e-10)
    assert cashflow.irr([-100, 60, 60]) == pytest.approx(npf.irr([-100, 60, 60]), rel=1e-9)


def test_no_irr_without_a_sign_change() -> None:
    assert cashflow.irr([10, 5, 5]) is None
    assert cashflow.irr([-10, -5]) is None


def test_simple_and_discounted_payback() -> None:
    flows = [-1000.0, 300.0, 300.0, 300.0, 300.0, 300.0]
    # 1000 / 300 = 3.333 years, linear within the fourth year.
    assert cashflow.payback_years(flows) == pytest.approx(1000.0 / 300.0)
    rate = 0.1
    # Discounted: cumulative of npf.pv-style terms; the year where numpy-financial's NPV of
    # the truncated flows turns positive, interpolated linearly inside it.
    cum = [npf.npv(rate, flows[: k + 1]) for k in range(len(flows))]
    k = next(i for i, c in enumerate(cum) if c >= 0)
    expected = k - 1 + -cum[k - 1] / (flows[k] / (1 + rate) ** k)
    assert cashflow.discounted_payback_years(rate, flows) == pytest.approx(expected, rel=1e-12)
    assert cashflow.payback_years([-1000.0, 10.0, 10.0]) is None


def test_escalation() -> None:
    # 100 a year growing 3 %: 100, 103, 106.09.
    assert cashflow.escalated(100.0, 0.03, 3) == pytest.approx([100.0, 103.0, 106.09])

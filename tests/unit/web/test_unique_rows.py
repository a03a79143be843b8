"""The chart's row grouping against numpy's own np.unique(axis=0, return_inverse=True)."""

from __future__ import annotations

import numpy as np

from service.web.charts import unique_rows


def test_unique_rows_matches_numpy() -> None:
    rng = np.random.default_rng(3)
    n = 20_000
    keys = np.column_stack(
        [
            rng.integers(1, 7, n),
            rng.integers(0, 9, n),
            np.round(rng.uniform(1e3, 5e4, n), -2),
            rng.integers(0, 50, n),
            rng.choice([40.0, 60.0, 84.0, 168.0], n),
        ]
    ).astype(float)
    keys[::7, 3] = -0.0  # equal to 0.0 for both
    groups, member = unique_rows(keys)
    ref_groups, ref_member = np.unique(keys, axis=0, return_inverse=True)
    assert np.array_equal(groups, ref_groups)
    assert np.array_equal(member, np.asarray(ref_member).ravel())

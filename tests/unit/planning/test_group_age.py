"""Installation-date clusters: the densest window against a brute-force count, and the rule."""

from __future__ import annotations

import numpy as np

from service.planning import group_age as ga

DAY = 86_400.0


def _brute(times: np.ndarray, window: float) -> int:
    """Most times inside any window [t_i, t_i + window], counted pair by pair (independent)."""
    return max(int(np.sum((times >= t) & (times <= t + window))) for t in times)


def test_densest_window_matches_brute_force() -> None:
    rng = np.random.default_rng(2)
    for _ in range(20):
        t = rng.uniform(0, 200 * DAY, rng.integers(1, 60))
        count, start = ga.densest_window(t, 14 * DAY)
        assert count == _brute(t, 14 * DAY)
        assert int(np.sum((t >= start) & (t <= start + 14 * DAY))) == count


def test_cluster_needs_eighty_percent_within_two_weeks() -> None:
    base = 1.7e9
    # 9 of 10 lamps put in over 10 days (a group relamp), one spot replaced months later.
    t = np.array([base + i * DAY for i in range(9)] + [base + 120 * DAY])
    cl = ga.installation_cluster(t)
    assert cl is not None and cl.inside.tolist() == [True] * 9 + [False]
    # 7 of 10 (70 %) is not a cluster at the 80 % share.
    t2 = np.array([base + i * DAY for i in range(7)] + [base + d * DAY for d in (60, 90, 150)])
    assert ga.installation_cluster(t2) is None
    # Spread over a year: none; three positions: too few to say.
    assert ga.installation_cluster(base + np.arange(10) * 40 * DAY) is None
    assert ga.installation_cluster(np.full(3, base)) is None


def test_group_ages_take_the_median_of_the_clustered_lamps() -> None:
    base = 1.7e9
    # Area 1: two lamp types (groups 0, 1), all but one put in the same week; area 2 spread.
    area = np.array([1, 1, 1, 1, 1, 1, 2, 2, 2, 2])
    group = np.array([0, 0, 0, 1, 1, 1, 2, 2, 2, 2])
    inst = np.array([base, base + DAY, base + 2 * DAY, base, base + 3 * DAY, base + 300 * DAY])
    inst = np.concatenate([inst, base + np.arange(4) * 90 * DAY])
    age = np.array([5000.0, 4900.0, 4800.0, 5100.0, 4700.0, 200.0, 1.0, 2.0, 3.0, 4.0])
    got = ga.group_ages(area, group, inst, age, 3)
    assert got[0] == np.median([5000.0, 4900.0, 4800.0])
    assert got[1] == np.median([5100.0, 4700.0])  # the young spot-replaced lamp left out
    assert np.isnan(got[2])  # area 2's dates spread: the caller uses the mean age
    assert got[1] > np.mean(age[3:6])  # the mean would have understated the group age

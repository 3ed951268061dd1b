"""Standardisation: optimal 1-D grouping of sizes, snapping down."""

import itertools

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from toolkit.voids.standardise import cluster_1d, share_types, size_candidates, snap_down


def brute_force_sse(values, k):
    """Least SSE over every split of the sorted values into k runs: the definition, by enumeration."""
    s = sorted(values)
    best = np.inf
    for cuts in itertools.combinations(range(1, len(s)), k - 1):
        parts = np.split(np.asarray(s), cuts)
        best = min(best, sum(float(((p - p.mean()) ** 2).sum()) for p in parts))
    return best


def test_known_groups():
    # The worked example of Wang & Song 2011 (The R Journal 3(2):29-33), from memory: x = (-1, 2, -1, 2, 4,
    # 5, 6, -1, 2, -1), k = 3 gives the groups {-1 x 4}, {2 x 3}, {4, 5, 6}.
    x = [-1, 2, -1, 2, 4, 5, 6, -1, 2, -1]
    labels, sse = cluster_1d(x, 3)
    assert labels.tolist() == [0, 1, 0, 1, 2, 2, 2, 0, 1, 0]
    assert sse == pytest.approx(2.0)  # only {4, 5, 6} spreads: 1 + 0 + 1


def test_void_sizes_in_three_families():
    sizes = [52, 48, 50, 101, 99, 150, 149, 151]
    labels, _ = cluster_1d(sizes, 3)
    assert labels.tolist() == [0, 0, 0, 1, 1, 2, 2, 2]


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(10, 300), min_size=1, max_size=8), st.integers(1, 4))
def test_grouping_is_optimal_against_enumeration(values, k):
    labels, sse = cluster_1d(values, k)
    k_eff = min(k, len(set(values)))
    assert len(set(labels.tolist())) <= k
    assert sse == pytest.approx(brute_force_sse(values, k_eff), rel=1e-7, abs=1e-6)


def test_snap_down_and_candidates():
    assert snap_down(87.4, 5) == 85 and snap_down(85.0, 5) == 85 and snap_down(87.4, 0) == 87.4
    # polygon groups: from the snapped median down to the smallest member, which always comes last
    assert size_candidates([81, 88, 96], "polygon", 5, (), 20) == [85, 80, 81]
    # stock sizes stay stock sizes
    assert size_candidates([40, 50, 65], "bore", 5, (32, 40, 50, 65), 20) == [50, 40]


def test_types_are_shared_where_they_help_most():
    share = share_types({"bore": [20, 20, 20], "polygon": [50, 100, 150, 200]}, 3)
    assert share == {"bore": 1, "polygon": 2}

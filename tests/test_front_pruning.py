"""The tree engine's exact dominance pruning of a front, against a brute-force pass.

A point is dropped when an earlier one, in the order by cost then requirements, needs no
more of every resource (it costs no more by that order); of exact duplicates the first
survives. Fronts of several hundred points span several of the pruning's blocks.
"""

from __future__ import annotations

import numpy as np
import pytest

from sizer.engines import tree as tree_engine


def brute_force(cost: np.ndarray, req: np.ndarray) -> np.ndarray:
    order = np.lexsort((*req.T[::-1], cost))
    r = req[order]
    keep = [i for i in range(order.size)
            if not any(np.all(r[j] <= r[i]) for j in range(i))]
    return order[keep]


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("k", [2, 3])
def test_pruning_keeps_exactly_the_undominated_points(seed, k):
    rng = np.random.default_rng(seed)
    m = int(rng.integers(2, 900))
    # coarse values: ties in cost and in every requirement, exact duplicates too
    cost = np.round(rng.uniform(0, 20, m))
    req = np.round(rng.uniform(0, 6, (m, k)), 1)
    twins = rng.integers(0, m, m // 10)
    cost[-twins.size:], req[-twins.size:] = cost[twins], req[twins]
    assert np.array_equal(tree_engine._prune_multi(cost, req), brute_force(cost, req))


def test_a_front_of_one_varying_requirement_is_a_staircase():
    # the others equal: the 1-D staircase (its points by requirement, not by cost)
    cost = np.array([5.0, 3.0, 3.0, 4.0, 1.0])
    req = np.array([[1.0, 2.0], [2.0, 2.0], [2.0, 2.0], [0.5, 2.0], [3.0, 2.0]])
    kept = tree_engine._prune_multi(cost, req)
    assert sorted(kept.tolist()) == sorted(brute_force(cost, req).tolist()) == [1, 3, 4]


@pytest.mark.parametrize("seed", range(6))
def test_staircases_by_blocks_are_the_whole_tables(seed, monkeypatch):
    # Blocks of a few segments (some with no rows) give what one padded table gives.
    rng = np.random.default_rng(seed)
    counts = rng.integers(0, 30, 200)
    x = np.round(rng.uniform(0, 5, counts.sum()), 1)
    cost = np.round(rng.uniform(0, 9, counts.sum()))
    cost[rng.random(cost.size) < 0.1] = np.inf          # rows that take no part
    whole = tree_engine._staircases(x, cost, counts)
    monkeypatch.setattr(tree_engine, "_BLOCK_CELLS", 40)
    blocks = tree_engine._staircases(x, cost, counts)
    assert all(np.array_equal(a, b) for a, b in zip(whole, blocks, strict=True))
    # and each segment's staircase by hand: by x, then cost, kept while it costs less
    at, kept = whole
    ends = np.cumsum(kept)
    starts = np.cumsum(counts) - counts
    for s in range(counts.size):
        rows = range(starts[s], starts[s] + counts[s])
        best, expect = np.inf, []
        for r in sorted(rows, key=lambda r: (x[r], cost[r], r)):
            if cost[r] < best:
                best = cost[r]
                expect.append(r)
        assert at[ends[s] - kept[s]:ends[s]].tolist() == expect

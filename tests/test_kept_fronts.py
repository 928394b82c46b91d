"""The closed loop's re-solves keep the fronts of subtrees whose limits did not move.

Specification: a solve that reuses the fronts of the last solve of the same problem with
other limits (``KeptFronts``) gives exactly the answer of a solve from nothing, whatever
limits moved; a problem that differs in anything but its limits is worked out whole.
Checked against the engine without reuse and against exhaustive enumeration.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from sizer.engines import KeptFronts, SolveStatus
from sizer.engines import tree as tree_engine
from tests.test_deep_relaxation import random_chain
from tests.test_engines import brute_force


def _tightened(p, rng, share=0.4):
    """Some finite drop limits lowered a little (as the load-flow loop does)."""
    lim = p.limit_pct.copy()
    finite = np.flatnonzero(np.isfinite(lim))
    pick = finite[rng.random(finite.size) < share]
    lim[pick] -= rng.uniform(0.0, 0.15, pick.size) * np.abs(lim[pick])
    return dataclasses.replace(p, limit_pct=lim)


@pytest.mark.parametrize("seed", range(25))
def test_reused_fronts_give_the_answer_of_a_solve_from_nothing(seed):
    rng = np.random.default_rng(seed)
    p = random_chain(300 + seed, 9 if seed % 5 else 40, 4)
    fronts = KeptFronts()
    for _ in range(3):
        fresh = tree_engine.solve_tree(p)
        again = tree_engine.solve_tree(p, reuse=fronts)
        assert again.status is fresh.status
        assert again.message == fresh.message
        if fresh.has_solution:
            assert np.array_equal(again.choice, fresh.choice)
            assert again.objective == fresh.objective
        if p.n_segments <= 9:
            expected, _ = brute_force(p)
            if np.isfinite(expected) and fresh.status is SolveStatus.OPTIMAL:
                assert fresh.objective == pytest.approx(expected, rel=1e-9)
        p = _tightened(p, rng)


def test_only_the_runs_above_a_moved_limit_are_worked_out_again(monkeypatch):
    p = random_chain(7, 60, 4)
    fronts = KeptFronts()
    first = tree_engine.solve_tree(p, reuse=fronts)
    assert first.has_solution and "2 path resources" in first.message
    leaves = np.flatnonzero(np.isfinite(p.limit_pct)
                            & (np.bincount(p.parent[1:], minlength=p.n_segments) == 0))
    lim = p.limit_pct.copy()
    lim[leaves[-1]] -= 1e-6
    moved = dataclasses.replace(p, limit_pct=lim)
    seen = []
    real = tree_engine._reduce_multi

    def counting(cost, req, thin_at, thin_to):
        seen.append(cost.size)
        return real(cost, req, thin_at, thin_to)

    monkeypatch.setattr(tree_engine, "_reduce_multi", counting)
    again = tree_engine.solve_tree(moved, reuse=fronts)
    partial = len(seen)
    seen.clear()
    fresh = tree_engine.solve_tree(moved)
    assert np.array_equal(again.choice, fresh.choice)
    assert 0 < partial < len(seen)      # fewer merges than a solve from nothing


def test_a_problem_with_other_costs_is_worked_out_whole():
    p = random_chain(11, 30, 4)
    fronts = KeptFronts()
    tree_engine.solve_tree(p, reuse=fronts)
    dearer = dataclasses.replace(p, cost=p.cost * np.linspace(1.0, 2.0, p.cost.size))
    again = tree_engine.solve_tree(dearer, reuse=fronts)
    fresh = tree_engine.solve_tree(dearer)
    assert np.array_equal(again.choice, fresh.choice)
    assert again.objective == fresh.objective


def test_a_load_that_can_never_bind_under_either_limit_is_not_worked_out_again(monkeypatch):
    # Every row of such a load needs less than the path above always leaves: its front is
    # the same whatever its limit (requirements clamped), so moving the limit redoes
    # nothing, and the answer is still that of a solve from nothing.
    p = random_chain(7, 60, 4)
    leaf = int(np.flatnonzero(np.bincount(p.parent[1:], minlength=p.n_segments) == 0)[-1])
    lim, loop = p.limit_pct.copy(), p.loop_limit_pu.copy()
    lim[leaf], loop[leaf] = 1e6, np.inf
    p = dataclasses.replace(p, limit_pct=lim, loop_limit_pu=loop)
    fronts = KeptFronts()
    tree_engine.solve_tree(p, reuse=fronts)
    lim = lim.copy()
    lim[leaf] = 2e6
    moved = dataclasses.replace(p, limit_pct=lim)
    seen = []
    real = tree_engine._reduce_multi
    monkeypatch.setattr(tree_engine, "_reduce_multi",
                        lambda *a: seen.append(1) or real(*a))
    again = tree_engine.solve_tree(moved, reuse=fronts)
    assert seen == []
    monkeypatch.setattr(tree_engine, "_reduce_multi", real)
    fresh = tree_engine.solve_tree(moved)
    assert np.array_equal(again.choice, fresh.choice) and again.message == fresh.message

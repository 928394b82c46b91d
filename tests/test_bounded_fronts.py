"""Deep trees: the tree engine bounds its fronts by ε-dominance and says so.

The guarantee (standard for ε-Pareto sets, e.g. Papadimitriou & Yannakakis 2000, and the
discrete wire-sizing literature): every point dropped has a kept point no costlier and
needing at most ε more, so the design found meets every limit exactly and costs no
more than the least-cost design with every limit tightened by the ε summed down the
path, which the solution's message states. Checked here against the exact engine and
exhaustive enumeration.
"""

from __future__ import annotations

import dataclasses
import re

import numpy as np
import pytest

from sizer.engines import SolveStatus
from sizer.engines import tree as tree_engine
from tests.test_engines import brute_force, random_tree


def _stated_drop_tolerance(message: str) -> float:
    found = re.search(r"tightened by drop ([0-9.e+-]+) %", message)
    assert found, message
    return float(found.group(1))


@pytest.mark.parametrize("seed", range(12))
def test_thinned_fronts_meet_every_limit_within_the_stated_tolerance(seed):
    p = random_tree(seed, 60, 6, shape=1)          # deep: attached near the last runs
    exact = tree_engine.solve_tree(p)
    bounded = tree_engine.solve_tree(p, thin_at=6, thin_to=3)
    if exact.status is SolveStatus.INFEASIBLE:
        assert bounded.status is SolveStatus.INFEASIBLE
        return
    assert exact.status is SolveStatus.OPTIMAL
    assert not p.violations(bounded.choice, tol_pct=1e-7)   # every limit, exactly
    assert bounded.objective >= exact.objective - 1e-9
    if bounded.status is SolveStatus.BOUNDED:
        assert not bounded.proven_optimal and bounded.gap is None
        eps = _stated_drop_tolerance(bounded.message)
        tighter = dataclasses.replace(p, limit_pct=p.limit_pct - eps)
        best_tighter = tree_engine.solve_tree(tighter)
        if best_tighter.status is SolveStatus.OPTIMAL:
            assert bounded.objective <= best_tighter.objective + 1e-9
    else:
        assert bounded.objective == pytest.approx(exact.objective, rel=1e-12)


def test_fronts_under_the_threshold_stay_exact():
    p = random_tree(3, 80, 6, shape=1)
    assert tree_engine.solve_tree(p).status is SolveStatus.OPTIMAL
    assert "fronts bounded" not in tree_engine.solve_tree(p).message


@pytest.mark.parametrize("seed", range(20))
def test_thinned_multi_resource_fronts_are_feasible_against_brute_force(seed):
    base = random_tree(seed, 7, 3, shape=1)
    rng = np.random.default_rng(seed)
    loop = base.drop_pct * rng.uniform(0.5, 1.5, base.n_candidates)
    worst = float(np.max(base.path_sum(loop, base.offsets[:-1])))
    limit = np.where(rng.random(base.n_segments) < 0.5, worst * rng.uniform(0.4, 1.0), np.inf)
    p = dataclasses.replace(base, loop_pu=loop, loop_limit_pu=limit)
    expected, _ = brute_force(p)
    sol = tree_engine.solve_tree_multi(p, thin_at=2, thin_to=1)
    if not np.isfinite(expected):
        assert sol.status is not SolveStatus.OPTIMAL
        return
    if sol.has_solution:
        assert not p.violations(sol.choice, tol_pct=1e-7)
        assert sol.objective >= expected - 1e-9
        if sol.status is SolveStatus.OPTIMAL:
            assert sol.objective == pytest.approx(expected, rel=1e-9)
        else:
            assert sol.status is SolveStatus.BOUNDED and "fronts bounded" in sol.message


@pytest.mark.parametrize("seed", range(25))
def test_wide_panels_with_an_earth_fault_limit_match_brute_force(seed):
    """Simple leaves merged at once as staircases, beside leaves with a loop limit."""
    base = random_tree(seed, 9, 3, shape=2)        # a forest of wide stars
    rng = np.random.default_rng(100 + seed)
    loop = base.drop_pct * rng.uniform(0.5, 1.5, base.n_candidates)
    worst = base.path_sum(loop, base.offsets[:-1] + np.diff(base.offsets) - 1)
    limit = np.where(rng.random(base.n_segments) < 0.3, worst * rng.uniform(0.7, 1.2),
                     np.inf)
    p = dataclasses.replace(base, loop_pu=loop, loop_limit_pu=limit)
    expected, _ = brute_force(p)
    sol = tree_engine.solve_tree(p)
    if not np.isfinite(expected):
        assert sol.status is SolveStatus.INFEASIBLE
    else:
        assert sol.status is SolveStatus.OPTIMAL
        assert sol.objective == pytest.approx(expected, rel=1e-9)

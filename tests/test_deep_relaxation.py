"""Deep trees with several path resources: the relaxed engine's design and its proven gap.

Down a riser thousands of runs deep, the tree engine relaxes the path limits with
Lagrange multipliers (``sizer.engines.relax``). The specification, checked against
exhaustive enumeration on small chains (the relaxation is forced with ``deep_at``):
the design meets every limit exactly; the stated lower bound is at most the least
possible cost (weak duality, e.g. Fisher, Management Science 27(1), 1981); the design
costs at most the stated gap more than that least cost; ``optimal`` only when the gap
is closed. Small trees stay on the exact program.
"""

from __future__ import annotations

import dataclasses
import re

import numpy as np
import pytest

from sizer.engines import Problem, SolveStatus, relax, solve
from sizer.engines import tree as tree_engine
from tests.test_engines import brute_force


def random_chain(seed: int, n: int, kmax: int, *, drop_binds: bool = True,
                 tight: bool = False) -> Problem:
    """A riser of about ``0.85 n`` runs (side leaves off it) with drop and loop limits that bind.

    Invented numbers: drop ∝ current × length / size, loop ∝ length / size (the loop
    does not depend on the load), cost ∝ length × (1 + size). Loop limits on about half
    the runs lie between the least and the cheapest path; drop limits on the leaves.
    ``tight`` allows loop limits a little below the least reachable (infeasible cases).
    """
    rng = np.random.default_rng(seed)
    parent, spine = [-1], 0
    for s in range(1, n):          # most runs continue the riser, some are side leaves
        parent.append(spine)
        if rng.random() < 0.85:
            spine = s
    k = rng.integers(1, kmax + 1, n)
    offsets = np.concatenate(([0], np.cumsum(k)))
    size = rng.uniform(0.5, 4.0, offsets[-1])
    length = np.repeat(rng.uniform(0.2, 1.0, n), k)
    current = np.repeat(rng.uniform(0.5, 2.0, n), k)
    cost = length * (1 + size) * rng.uniform(0.9, 1.1, offsets[-1])
    drop = current * length / size
    loop = length / size * rng.uniform(0.8, 1.2, offsets[-1])
    base = Problem(np.array(parent), offsets, cost, drop)
    seg = base.segment_of_row
    cheap = np.lexsort((cost, seg))[offsets[:-1]]
    least_loop = base.path_sum(loop, np.lexsort((loop, seg))[offsets[:-1]])
    cheap_loop = base.path_sum(loop, cheap)
    frac = rng.uniform(-0.05 if tight else 0.05, 0.9, n)
    loop_limit = np.where(rng.random(n) < 0.5, least_loop + frac * (cheap_loop - least_loop),
                          np.inf)
    cheap_drop = base.path_drop_pct(cheap)
    least_drop = base.path_drop_pct(np.lexsort((drop, seg))[offsets[:-1]])
    leaf = np.bincount(np.array(parent[1:]), minlength=n) == 0
    if drop_binds:
        drop_limit = np.where(leaf, least_drop + rng.uniform(0.3, 1.0, n)
                              * (cheap_drop - least_drop), np.inf)
    else:  # limits no choice can break
        worst = base.path_sum(drop, np.lexsort((-drop, seg))[offsets[:-1]])
        drop_limit = np.where(leaf, worst + 1.0, np.inf)
    return dataclasses.replace(base, limit_pct=drop_limit, loop_pu=loop,
                               loop_limit_pu=loop_limit)


def _stated_lower_bound(message: str) -> float:
    found = re.search(r"lower bound ([0-9.e+-]+)\)", message)
    assert found, message
    return float(found.group(1))


@pytest.mark.parametrize("seed", range(30))
def test_relaxed_design_is_feasible_and_within_its_gap_of_brute_force(seed):
    p = random_chain(seed, 7, 3, tight=seed % 5 == 4)
    expected, _ = brute_force(p)
    sol = tree_engine.solve_tree(p, deep_at=1)             # force the relaxation
    if not np.isfinite(expected):
        assert sol.status in (SolveStatus.INFEASIBLE, SolveStatus.ERROR)
        assert not sol.has_solution
        return
    assert sol.status in (SolveStatus.OPTIMAL, SolveStatus.BOUNDED), sol.message
    assert not p.violations(sol.choice, tol_pct=1e-9)          # every limit, exactly
    assert sol.objective >= expected - 1e-9
    assert sol.gap is not None
    assert sol.objective - expected <= sol.gap * sol.objective + 1e-9
    assert _stated_lower_bound(sol.message) <= expected * (1 + 1e-7)
    if sol.status is SolveStatus.OPTIMAL:
        assert sol.proven_optimal
        assert sol.objective == pytest.approx(expected, rel=1e-8)
    else:
        assert not sol.proven_optimal and "not proven" in sol.message


@pytest.mark.parametrize("seed", range(10))
def test_milp_and_brute_force_agree_on_the_same_chains(seed):
    p = random_chain(100 + seed, 7, 3)
    expected, _ = brute_force(p)
    sol = solve(p, engine="milp")
    if np.isfinite(expected):
        assert sol.status is SolveStatus.OPTIMAL
        assert sol.objective == pytest.approx(expected, rel=1e-9)
    else:
        assert sol.status is SolveStatus.INFEASIBLE


@pytest.mark.parametrize("seed", range(15))
def test_small_chains_stay_exact(seed):
    """Below ``DEEP_AT`` runs the exact program answers, with or without a drop that binds."""
    p = random_chain(200 + seed, 8, 3, drop_binds=seed % 2 == 0)
    expected, _ = brute_force(p)
    sol = tree_engine.solve_tree(p)
    if np.isfinite(expected):
        assert sol.status is SolveStatus.OPTIMAL, sol.message
        assert sol.objective == pytest.approx(expected, rel=1e-9)
        assert not p.violations(sol.choice, tol_pct=1e-9)
    else:
        assert sol.status is SolveStatus.INFEASIBLE


def test_a_loop_below_the_least_reachable_is_infeasible_and_says_which():
    p = random_chain(7, 30, 3)
    least = p.path_sum(p.loop_pu, np.lexsort((p.loop_pu, p.segment_of_row))[p.offsets[:-1]])
    limit = np.full(p.n_segments, np.inf)
    limit[-1] = least[-1] * 0.9
    sol = tree_engine.solve_tree(dataclasses.replace(p, loop_limit_pu=limit), deep_at=1)
    assert sol.status is SolveStatus.INFEASIBLE
    assert f"segment {p.n_segments - 1}" in sol.message and "earth-fault loop" in sol.message


def test_a_deep_riser_is_relaxed_meets_every_limit_and_states_its_gap():
    p = random_chain(11, relax.DEEP_AT + 400, 4)
    assert relax.tree_depth(p.parent) >= relax.DEEP_AT
    sol = solve(p)                                          # auto: no hand-over to the MILP
    assert sol.engine == "tree"
    assert sol.status in (SolveStatus.BOUNDED, SolveStatus.OPTIMAL)
    assert not p.violations(sol.choice, tol_pct=1e-9)
    assert sol.gap is not None and 0 <= sol.gap < 0.05
    assert "relaxed" in sol.message and f"{100 * sol.gap:.3g} %" in sol.message
    assert _stated_lower_bound(sol.message) <= sol.objective


def test_identical_runs_share_their_dominance_check():
    p = random_chain(3, 40, 5)
    own = np.column_stack([p.drop_pct, p.loop_pu])
    repeated = Problem(np.arange(-1, 79), np.concatenate((p.offsets, p.offsets[1:]
                                                         + p.offsets[-1])),
                       np.tile(p.cost, 2), np.tile(p.drop_pct, 2), 0.0, np.inf,
                       loop_pu=np.tile(p.loop_pu, 2), loop_limit_pu=1e9)
    expected = tree_engine._undominated_multi(np.tile(p.cost, 2), np.tile(own, (2, 1)),
                                              repeated.offsets)
    assert np.array_equal(relax.usable_rows(repeated), expected)


@pytest.mark.parametrize("seed", range(20))
def test_one_resource_hulls_choose_a_least_row_like_a_pass_over_every_row(seed):
    # With one priced resource the relaxed choice is read off each segment's lower convex
    # hull; a pass over every row (the general method) must find the same least price.
    rng = np.random.default_rng(seed)
    n = 60
    counts = rng.integers(1, 12, n)
    counts[n // 2:] = counts[: n - n // 2]                  # repeated segments share hulls
    starts = np.cumsum(counts) - counts
    cost = np.round(rng.uniform(1, 10, counts.sum()), 1)  # ties in cost and in value too
    value = np.round(rng.uniform(0, 3, counts.sum()), 1)
    for s in range(n // 2, n):
        a, b = starts[s - n // 2], starts[s]
        cost[b:b + counts[s]] = cost[a:a + counts[s]]
        value[b:b + counts[s]] = value[a:a + counts[s]]
    rows = np.arange(counts.sum()) + 7
    seg = np.repeat(np.arange(n), counts)
    hulls = relax._Hulls(rows, starts, counts, cost, value)
    padded = relax._Padded(rows, starts, counts, cost, [value])
    for w in (np.zeros(n), rng.exponential(2.0, n), np.full(n, 1e6), rng.uniform(0, 5, n)):
        row_h, (v_h,), total_h = hulls.choose([w], exact=True)
        row_p, _, total_p = padded.choose([w], exact=True)
        price_h = cost[row_h - 7] + w * value[row_h - 7]
        price_p = cost[row_p - 7] + w * value[row_p - 7]
        np.testing.assert_allclose(price_h, price_p, rtol=1e-12, atol=1e-12)
        assert np.array_equal(seg[row_h - 7], np.arange(n))  # a row of its own segment
        assert np.array_equal(v_h, value[row_h - 7])
        assert total_h == pytest.approx(total_p, rel=1e-12)


@pytest.mark.parametrize("seed", range(10))
@pytest.mark.parametrize("exact", [True, False])
def test_the_padded_choice_is_each_segments_first_least_row(seed, exact):
    # Segments of many widths fall in several padded blocks; each must still pick its own
    # first least row of cost + Σ price × value, and the least total sum in segment order.
    rng = np.random.default_rng(seed)
    n = 80
    counts = rng.integers(1, 40, n)
    starts = np.cumsum(counts) - counts
    cost = np.round(rng.uniform(1, 10, counts.sum()), 1)
    values = [np.round(rng.uniform(0, 3, counts.sum()), 1) for _ in range(2)]
    rows = np.arange(counts.sum()) + 5
    padded = relax._Padded(rows, starts, counts, cost, values)
    assert len(padded.blocks) > 1
    dtype = np.float64 if exact else np.float32
    for w in ([np.zeros(n)] * 2, [rng.exponential(2.0, n), rng.uniform(0, 5, n)]):
        pick, chosen, total = padded.choose(w, exact)
        least = np.empty(n, dtype=dtype)
        for s in range(n):
            span = slice(starts[s], starts[s] + counts[s])
            price = np.asarray(cost[span], dtype=dtype) + np.asarray(
                values[0][span], dtype=dtype) * dtype(w[0][s])
            price += np.asarray(values[1][span], dtype=dtype) * dtype(w[1][s])
            k = int(np.argmin(price))
            assert pick[s] == starts[s] + k + 5
            assert [c[s] for c in chosen] == [v[starts[s] + k] for v in values]
            least[s] = price[k]
        assert total == float(least.sum(dtype=np.float64))

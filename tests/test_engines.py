"""Tests of the optimisation engines: exhaustive enumeration, a hand-solved fixture,
tree program against MILP on random trees, side constraints, fronts, status mapping.

The engines are pure optimisation (costs and drops in %), so the checks here are
mathematical: the reference is exhaustive enumeration written independently below.
"""

from __future__ import annotations

import itertools

import numpy as np
import pulp
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sizer.engines import Problem, SolveStatus, solve
from sizer.engines import milp as milp_engine
from sizer.engines import tree as tree_engine
from sizer.errors import InternalError, ScenarioError, SolverError

HAS_HIGHS = milp_engine.solver_available("highs")
TOL = 1e-9


# --------------------------------------------------------------------------- helpers


def brute_force(p: Problem, tol: float = TOL) -> tuple[float, np.ndarray | None]:
    """Least cost over every combination of rows, with every constraint checked.

    Independent of the engines and of Problem.violations: all combinations at once.
    """
    n = p.n_segments
    ranges = [range(p.offsets[s], p.offsets[s + 1]) for s in range(n)]
    grid = np.array(list(itertools.product(*ranges)), dtype=np.int64)
    feasible = np.ones(len(grid), dtype=bool)

    def path(own: np.ndarray) -> np.ndarray:
        cum = own.copy()
        for s in range(n):  # parents first
            if p.parent[s] >= 0:
                cum[:, s] += cum[:, p.parent[s]]
        return cum

    feasible &= np.all(path(p.drop_pct[grid] + p.fixed_drop_pct) <= p.limit_pct + tol, axis=1)
    if p.drop2_pct is not None:
        feasible &= np.all(path(p.drop2_pct[grid]) <= p.limit2_pct + tol, axis=1)
    if p.loop_pu is not None:
        feasible &= np.all(path(p.loop_pu[grid]) <= p.loop_limit_pu + tol, axis=1)
    if p.capex_cap is not None:
        feasible &= p.capex[grid].sum(axis=1) <= p.capex_cap + tol
    if p.loss_pv_cap is not None:
        feasible &= p.loss_pv[grid].sum(axis=1) <= p.loss_pv_cap + tol
    for g in p.same_choice_groups:
        keys = p.choice_key[grid[:, g]]
        feasible &= np.all(keys == keys[:, :1], axis=1)
    if not feasible.any():
        return np.inf, None
    cost = p.cost[grid].sum(axis=1)
    cost[~feasible] = np.inf
    best = int(np.argmin(cost))
    return float(cost[best]), grid[best]


def assert_matches(sol, expected: float) -> None:
    if np.isinf(expected):
        assert sol.status is SolveStatus.INFEASIBLE, sol.message
        assert not sol.has_solution
        assert np.isnan(sol.objective)
    else:
        assert sol.status is SolveStatus.OPTIMAL, sol.message
        assert sol.proven_optimal
        assert sol.objective == pytest.approx(expected, rel=1e-9, abs=1e-12)


def eighths(lo: int, hi: int) -> st.SearchStrategy[float]:
    """Multiples of 1/8: sums are exact, so limits met with equality are tested too."""
    return st.integers(lo, hi).map(lambda k: k / 8)


@st.composite
def tiny_problems(draw, side: bool = False) -> Problem:
    """At most 5 segments × 6 candidates (≤ 7776 combinations), incl. infeasible ones."""
    n = draw(st.integers(1, 5))
    parent = [draw(st.integers(-1, s - 1)) for s in range(n)]
    counts = [draw(st.integers(1, 6)) for _ in range(n)]
    m = sum(counts)
    values = lambda lo, hi, size: draw(st.lists(eighths(lo, hi), min_size=size, max_size=size))  # noqa: E731
    kwargs: dict = dict(
        parent=np.array(parent), offsets=np.concatenate(([0], np.cumsum(counts))),
        cost=np.array(values(0, 80, m)), drop_pct=np.array(values(0, 24, m)),
        fixed_drop_pct=np.array(draw(st.lists(st.sampled_from([0.0, 0.0, 0.25, 1.0]),
                                              min_size=n, max_size=n))),
        limit_pct=np.array(draw(st.lists(st.one_of(st.just(np.inf), eighths(0, 56)),
                                         min_size=n, max_size=n))),
    )
    if side:
        kind = draw(st.sampled_from(["capex", "loss_pv", "group", "drop2", "loop", "all"]))
        if kind in ("capex", "all"):
            kwargs["capex"] = np.array(values(0, 40, m))
            kwargs["capex_cap"] = draw(eighths(0, 40 * n))
        if kind in ("loss_pv", "all"):
            kwargs["loss_pv"] = np.array(values(0, 40, m))
            kwargs["loss_pv_cap"] = draw(eighths(0, 40 * n))
        if kind in ("group", "all") and n >= 2:
            members = draw(st.lists(st.integers(0, n - 1), min_size=2, max_size=n,
                                    unique=True))
            kwargs["same_choice_groups"] = (np.array(members),)
            kwargs["choice_key"] = np.array(draw(st.lists(st.integers(0, 3), min_size=m,
                                                          max_size=m)))
        if kind in ("drop2", "all"):
            kwargs["drop2_pct"] = np.array(values(0, 24, m))
            kwargs["limit2_pct"] = np.array(draw(st.lists(
                st.one_of(st.just(np.inf), eighths(0, 56)), min_size=n, max_size=n)))
        if kind in ("loop", "all"):  # the earth-fault loop: a third path resource
            kwargs["loop_pu"] = np.array(values(0, 24, m))
            kwargs["loop_limit_pu"] = np.array(draw(st.lists(
                st.one_of(st.just(np.inf), eighths(0, 56)), min_size=n, max_size=n)))
    return Problem(**kwargs)


def random_tree(seed: int, n: int, kmax: int, shape: int, tight: bool = False) -> Problem:
    """A random tree with realistic candidate tables and limits that bind.

    Drop ∝ length / size and cost ∝ length × (1 + size), so cost falls as drop rises.
    Limits (on about a third of the segments, per segment) lie between the least
    reachable path drop and the path drop of the cheapest rows; ``tight`` allows
    limits a little below the least reachable drop (infeasible cases).
    """
    rng = np.random.default_rng(seed)
    if shape == 0:  # random recursive tree
        parent = [-1] + [int(rng.integers(0, s)) for s in range(1, n)]
    elif shape == 1:  # deep: attach near the last segments
        parent = [-1] + [int(rng.integers(max(0, s - 4), s)) for s in range(1, n)]
    else:  # a forest of wide stars
        parent = [-1] + [int(rng.integers(-1, min(s, 6))) for s in range(1, n)]
    k = rng.integers(1, kmax + 1, n)
    offsets = np.concatenate(([0], np.cumsum(k)))
    size = rng.uniform(0.5, 4.0, offsets[-1])
    length = np.repeat(rng.uniform(0.2, 1.0, n), k)
    drop = length / size
    cost = length * (1 + size) * rng.uniform(0.9, 1.1, offsets[-1])
    fixed = np.where(rng.random(n) < 0.1, rng.uniform(0, 0.3, n), 0.0)
    base = Problem(np.array(parent), offsets, cost, drop, fixed)
    seg = base.segment_of_row
    least = base.path_drop_pct(np.lexsort((drop, seg))[offsets[:-1]])
    cheapest = base.path_drop_pct(np.lexsort((cost, seg))[offsets[:-1]])
    frac = rng.uniform(-0.03 if tight else 0.0, 1.0, n)
    limit = np.where(rng.random(n) < 0.35, least + frac * (cheapest - least), np.inf)
    return Problem(np.array(parent), offsets, cost, drop, fixed, limit)


def feeder_and_two_branches(fixed_pct: float = 0.0) -> Problem:
    """A feeder F (rows 0-1) feeding branches B1 (rows 2-4) and B2 (rows 5-7).

    Limit 5 % from the source to the far end of each branch (invented demo numbers).
      F small  (cost 100, drop 3 %): each branch may drop ≤ 2 % → medium (80) each:
               100 + 80 + 80 = 260
      F large  (cost 150, drop 1 %): each branch may drop ≤ 4 % → small (50) each:
               150 + 50 + 50 = 250   ← optimum: upsizing the feeder lets both shrink.
    With a fixed 1 % at the feeder's far end (a transformer): F small leaves 1 % → large
    branches (120): 100 + 240 = 340; F large leaves 3 % → small branches, meeting 5 %
    exactly: 150 + 50 + 50 = 250 still.
    """
    return Problem(
        parent=np.array([-1, 0, 0]),
        offsets=np.array([0, 2, 5, 8]),
        cost=np.array([100.0, 150.0, 50.0, 80.0, 120.0, 50.0, 80.0, 120.0]),
        drop_pct=np.array([3.0, 1.0, 3.0, 2.0, 1.0, 3.0, 2.0, 1.0]),
        fixed_drop_pct=np.array([fixed_pct, 0.0, 0.0]),
        limit_pct=np.array([np.inf, 5.0, 5.0]),
    )


SOLVERS = ["cbc", pytest.param("highs", marks=pytest.mark.skipif(
    not HAS_HIGHS, reason="highspy not installed"))]


def fast(examples: int) -> settings:
    """Reproducible, bounded example counts (the file stays well under 20 s)."""
    return settings(max_examples=examples, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow])


# --------------------------------------------------------------------------- fixtures


@pytest.mark.parametrize("engine,solver", [("tree", "cbc"), ("milp", "cbc"),
                                           ("milp", "highs"), ("auto", "cbc")])
@pytest.mark.parametrize("fixed_pct", [0.0, 1.0])
def test_feeder_upsized_so_both_branches_shrink(engine: str, solver: str,
                                                fixed_pct: float) -> None:
    if solver == "highs" and not HAS_HIGHS:
        pytest.skip("highspy not installed")
    sol = solve(feeder_and_two_branches(fixed_pct), engine=engine, solver=solver)
    assert sol.status is SolveStatus.OPTIMAL
    assert sol.objective == 250.0
    assert sol.choice.tolist() == [1, 2, 5]
    assert sol.engine.startswith("tree" if engine in ("tree", "auto") else "milp")


def test_single_branch_keeps_the_feeder_small() -> None:
    # Same tables, one branch: F small + B medium = 180 < F large + B small = 200.
    p = feeder_and_two_branches()
    one = Problem(p.parent[:2], p.offsets[:3], p.cost[:5], p.drop_pct[:5], 0.0,
                  p.limit_pct[:2])
    for engine in ("tree", "milp"):
        sol = solve(one, engine=engine)
        assert (sol.objective, sol.choice.tolist()) == (180.0, [0, 3])


def test_infeasible_and_unconstrained_cases() -> None:
    p = feeder_and_two_branches()
    tight = Problem(p.parent, p.offsets, p.cost, p.drop_pct, 0.0, np.array([np.inf, 1.5, 5]))
    for engine in ("tree", "milp"):
        sol = solve(tight, engine=engine)
        assert sol.status is SolveStatus.INFEASIBLE
        assert sol.choice.tolist() == [-1, -1, -1] and np.isnan(sol.objective)
    # No limits, two roots: every segment takes its cheapest row.
    free = Problem(np.array([-1, -1, 1]), p.offsets, p.cost, p.drop_pct)
    for engine in ("tree", "milp"):
        assert solve(free, engine=engine).choice.tolist() == [0, 2, 5]


def test_undominated_rows() -> None:
    p = Problem(parent=np.array([-1, 0]), offsets=np.array([0, 5, 7]),
                cost=np.array([5.0, 4.0, 4.0, 6.0, 1.0, 2.0, 2.0]),
                drop_pct=np.array([1.0, 1.0, 2.0, 0.5, 3.0, 1.0, 1.0]))
    rows, offsets = tree_engine.undominated_rows(p)
    # Segment 0: row 1 beats row 0 (same drop, cheaper); row 2 loses to row 1 (same
    # cost, more drop). Segment 1: exact duplicates, the lowest row stays.
    assert rows.tolist() == [3, 1, 4, 5]
    assert offsets.tolist() == [0, 3, 4]


# --------------------------------------------------------------------------- brute force


@fast(120)
@given(tiny_problems())
def test_tree_equals_exhaustive_enumeration(p: Problem) -> None:
    expected, _ = brute_force(p)
    for max_queries in (0, 2, tree_engine.DEFAULT_MAX_QUERIES):
        assert_matches(tree_engine.solve_tree(p, max_queries=max_queries), expected)


@fast(40)
@given(tiny_problems())
def test_milp_equals_exhaustive_enumeration(p: Problem) -> None:
    expected, _ = brute_force(p)
    assert_matches(solve(p, engine="milp", solver="cbc"), expected)
    if HAS_HIGHS:
        assert_matches(solve(p, engine="milp", solver="highs"), expected)


@fast(50)
@given(tiny_problems(side=True))
def test_side_constraints_equal_exhaustive_enumeration(p: Problem) -> None:
    expected, _ = brute_force(p)
    sol = solve(p)  # auto: the MILP whenever a cap or a group is present
    if p.has_side_constraints:
        assert sol.engine.startswith("milp")
    assert_matches(sol, expected)
    if sol.has_solution:
        assert p.violations(sol.choice) == []
    if not p.has_side_constraints:  # path constraints only: the tree engine takes them
        assert_matches(tree_engine.solve_tree(p), expected)


@pytest.mark.parametrize("solver", SOLVERS)
def test_each_side_constraint_changes_the_answer(solver: str) -> None:
    base = feeder_and_two_branches()
    common = dict(parent=base.parent, offsets=base.offsets, cost=base.cost,
                  drop_pct=base.drop_pct, limit_pct=base.limit_pct)
    # Capex cap (capex = cost here) below the optimum 250: no design.
    capped = Problem(**common, capex=base.cost, capex_cap=249.0)
    assert solve(capped, solver=solver).status is SolveStatus.INFEASIBLE
    # Loss cap 55 with losses = 10 × drop: the optimum (F large, small branches) has
    # 10 + 30 + 30 = 70; F large with medium branches has 10 + 20 + 20 = 50 and costs
    # 150 + 80 + 80 = 310; every other design under the cap costs more (320, 340).
    capped = Problem(**common, loss_pv=base.drop_pct * 10.0, loss_pv_cap=55.0)
    sol = solve(capped, solver=solver)
    assert (sol.objective, sol.choice.tolist()) == (310.0, [1, 3, 6])
    assert brute_force(capped)[0] == 310.0
    # Group: B1 and B2 must use one key; B2 has no "small" key → both medium with F
    # small (260) beats F large with both at medium (310).
    key = np.array([0, 1, 10, 11, 12, 20, 11, 12])
    grouped = Problem(**common, same_choice_groups=(np.array([1, 2]),), choice_key=key)
    sol = solve(grouped, solver=solver)
    assert (sol.objective, sol.choice.tolist()) == (260.0, [0, 3, 6])
    # A second drop limit (motor start) of 4 % on B1 with drops twice the first.
    drop2 = base.drop_pct * np.array([0.5, 0.5, 2, 2, 2, 1, 1, 1])
    second = Problem(**common, drop2_pct=drop2, limit2_pct=np.array([np.inf, 4.0, np.inf]))
    sol = solve(second, solver=solver)
    # F large (0.5) + B1 medium (4.0) = 4.5 > 4 → B1 large: 150 + 120 + 50 = 320;
    # F small (1.5) + B1 large (2.0) = 3.5 with B2 medium: 100 + 120 + 80 = 300.
    assert (sol.objective, sol.choice.tolist()) == (300.0, [0, 4, 6])
    assert brute_force(second)[0] == 300.0


# --------------------------------------------------------------------------- agreement


@fast(14)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 300), kmax=st.integers(1, 8),
       shape=st.integers(0, 2), tight=st.booleans())
def test_tree_and_milp_agree_on_random_trees(seed: int, n: int, kmax: int, shape: int,
                                             tight: bool) -> None:
    p = random_tree(seed, n, kmax, shape, tight)
    a = solve(p, engine="tree")
    b = solve(p, engine="milp", solver="cbc", time_limit_s=60)
    assert a.status is b.status, (a.message, b.message)
    if a.status is SolveStatus.OPTIMAL:
        assert a.objective == pytest.approx(b.objective, rel=1e-9)
        assert p.violations(a.choice) == [] and p.violations(b.choice, 1e-6) == []
        # Same rows wherever they are not tied in cost.
        differ = a.choice != b.choice
        assert np.allclose(p.cost[a.choice[differ]].sum(), p.cost[b.choice[differ]].sum())


@fast(200)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 60), kmax=st.integers(1, 8),
       shape=st.integers(0, 2), tight=st.booleans())
def test_tree_and_milp_agree_on_hundreds_of_smaller_trees(seed: int, n: int, kmax: int,
                                                         shape: int, tight: bool) -> None:
    # Many smaller trees beside the few large ones above: two hundred more agreements
    # per CI run at a cost CBC can afford.
    test_tree_and_milp_agree_on_random_trees.hypothesis.inner_test(seed, n, kmax, shape, tight)


@fast(25)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(50, 2000), shape=st.integers(0, 2))
def test_tree_speedups_do_not_change_the_answer(seed: int, n: int, shape: int) -> None:
    # The budget sets near the root are a speed device only: any bound gives the same.
    p = random_tree(seed, n, 12, shape)
    results = [tree_engine.solve_tree(p, max_queries=q) for q in (0, 16, 1024, 100_000)]
    assert len({r.status for r in results}) == 1
    if results[0].status is SolveStatus.OPTIMAL:
        objectives = [r.objective for r in results]
        assert max(objectives) - min(objectives) <= 1e-9 * abs(objectives[0])


def test_results_are_deterministic() -> None:
    p = random_tree(7, 120, 6, 0)
    for engine in ("tree", "milp"):
        first, second = solve(p, engine=engine), solve(p, engine=engine)
        assert first.choice.tolist() == second.choice.tolist()


# --------------------------------------------------------------------------- fronts


def identical_leaves(n_leaves: int, k: int = 8) -> Problem:
    """A feeder with n identical leaves: equal costs everywhere (the worst merge)."""
    n = n_leaves + 1
    drops = np.linspace(0.5, 4.0, k)
    costs = 10.0 / drops
    return Problem(parent=np.array([-1] + [0] * n_leaves), offsets=np.arange(n + 1) * k,
                   cost=np.tile(costs, n), drop_pct=np.tile(drops, n),
                   limit_pct=np.array([np.inf] + [5.0] * n_leaves))


@pytest.mark.parametrize("n_leaves", [10, 2000])
def test_front_of_many_equal_leaves_stays_small(n_leaves: int) -> None:
    # Equal leaves share breakpoints: the merged front never grows with their number,
    # so a bound of k² points suffices at 10 leaves and at 2,000.
    sol = tree_engine.solve_tree(identical_leaves(n_leaves), max_front=64)
    assert sol.status is SolveStatus.OPTIMAL, sol.message
    # Each leaf pairs with the feeder row leaving the most budget at least total cost.
    chosen = sol.choice
    assert len(set((chosen[1:] - np.arange(1, n_leaves + 1) * 8).tolist())) == 1


def test_equal_costs_give_one_point_fronts() -> None:
    p = random_tree(3, 200, 6, 1)
    flat = Problem(p.parent, p.offsets, np.ones(p.n_candidates), p.drop_pct,
                   p.fixed_drop_pct, p.limit_pct)
    sol = tree_engine.solve_tree(flat, max_front=1)
    assert sol.status in (SolveStatus.OPTIMAL, SolveStatus.INFEASIBLE)
    assert sol.message.endswith("largest front 1 points") or not sol.has_solution


def test_front_bound_reports_and_auto_falls_back_to_milp(monkeypatch) -> None:
    p = feeder_and_two_branches()
    hit = tree_engine.solve_tree(p, max_front=1)
    assert hit.status is SolveStatus.ERROR
    assert "exceeds the bound of 1 points" in hit.message
    assert solve(p, engine="tree").status is SolveStatus.OPTIMAL
    monkeypatch.setattr(tree_engine, "DEFAULT_MAX_FRONT", 1)
    assert solve(p, engine="tree").status is SolveStatus.ERROR
    fallback = solve(p, engine="auto")
    assert fallback.status is SolveStatus.OPTIMAL and fallback.objective == 250.0
    assert fallback.engine == "milp-cbc"
    assert "fell back to the MILP" in fallback.message


# --------------------------------------------------------------------------- statuses


@pytest.mark.parametrize("status,sol_status,limited,expected", [
    (pulp.LpStatusOptimal, pulp.LpSolutionOptimal, False, (SolveStatus.OPTIMAL, True, True)),
    # CBC says "Optimal" after a time limit with only a feasible design:
    (pulp.LpStatusOptimal, pulp.LpSolutionIntegerFeasible, True,
     (SolveStatus.TIME_LIMIT, False, True)),
    (pulp.LpStatusNotSolved, pulp.LpSolutionNoSolutionFound, True,
     (SolveStatus.TIME_LIMIT, False, False)),
    (pulp.LpStatusInfeasible, pulp.LpSolutionNoSolutionFound, False,
     (SolveStatus.INFEASIBLE, True, False)),
    (pulp.LpStatusInfeasible, pulp.LpSolutionInfeasible, False,
     (SolveStatus.INFEASIBLE, True, False)),
    (pulp.LpStatusUnbounded, pulp.LpSolutionUnbounded, False,
     (SolveStatus.ERROR, False, False)),
    (pulp.LpStatusNotSolved, pulp.LpSolutionNoSolutionFound, False,
     (SolveStatus.ERROR, False, False)),
])
def test_status_mapping(status, sol_status, limited, expected) -> None:
    assert milp_engine.map_status(status, sol_status, limited) == expected


def test_time_limit_with_a_feasible_design(monkeypatch) -> None:
    real_run = milp_engine._run

    def stopped_early(prob, solver):
        real_run(prob, solver)  # a real solve, then report it as CBC does at a limit
        return pulp.LpStatusOptimal, pulp.LpSolutionIntegerFeasible

    monkeypatch.setattr(milp_engine, "_run", stopped_early)
    sol = solve(feeder_and_two_branches(), engine="milp", time_limit_s=5)
    assert sol.status is SolveStatus.TIME_LIMIT and not sol.proven_optimal
    assert sol.has_solution and sol.objective == 250.0
    assert "time limit" in sol.message


def test_time_limit_without_a_design(monkeypatch) -> None:
    monkeypatch.setattr(milp_engine, "_run", lambda prob, solver: (
        pulp.LpStatusNotSolved, pulp.LpSolutionNoSolutionFound))
    sol = solve(feeder_and_two_branches(), engine="milp", time_limit_s=5)
    assert sol.status is SolveStatus.TIME_LIMIT and not sol.has_solution


def test_a_false_infeasible_from_cbc_preprocessing_is_solved_again(monkeypatch) -> None:
    # CBC 2.10.3 on a 5,000-segment tree: "Cut generators found to be infeasible!
    # Pre-processing says infeasible or unbounded" on a model whose LP relaxation solved.
    real_run = milp_engine._run
    calls = []

    def flaky(prob, solver):
        calls.append(list(solver.options))
        if len(calls) == 1:
            with open(solver.optionsDict["logPath"], "w", encoding="utf-8") as fh:
                fh.write("Pre-processing says infeasible or unbounded\n")
            return pulp.LpStatusInfeasible, pulp.LpSolutionInfeasible
        return real_run(prob, solver)

    monkeypatch.setattr(milp_engine, "_run", flaky)
    sol = solve(feeder_and_two_branches(), engine="milp")
    assert sol.status is SolveStatus.OPTIMAL and sol.objective == 250.0
    assert "preprocess off" in calls[1] and "preprocess off" not in calls[0]


def test_missing_solver_names_the_fix(monkeypatch) -> None:
    monkeypatch.setattr(milp_engine, "_highs", lambda *args: None)
    with pytest.raises(SolverError, match=r"pip install 'sizer\[highs\]'"):
        solve(feeder_and_two_branches(), engine="milp", solver="highs")
    monkeypatch.setattr(milp_engine, "_cbc", lambda *args: None)
    with pytest.raises(SolverError, match="cbc"):
        solve(feeder_and_two_branches(), engine="milp")
    assert not milp_engine.solver_available("cbc")


# --------------------------------------------------------------------------- input


def test_bad_engine_solver_and_side_constraints_on_tree() -> None:
    p = feeder_and_two_branches()
    with pytest.raises(ScenarioError, match="unknown engine"):
        solve(p, engine="fast")
    with pytest.raises(ScenarioError, match="unknown solver"):
        solve(p, solver="gurobi")
    with pytest.raises(ScenarioError, match="time limit"):
        solve(p, engine="milp", time_limit_s=0)
    capped = Problem(p.parent, p.offsets, p.cost, p.drop_pct, capex=p.cost, capex_cap=1e9)
    with pytest.raises(ScenarioError, match="side constraints"):
        solve(capped, engine="tree")
    assert solve(capped).engine == "milp-cbc"


@pytest.mark.parametrize("change,message", [
    (dict(parent=np.array([-1, 1, 0])), "parents first"),
    (dict(parent=np.array([-1, 0])), "shape"),
    (dict(offsets=np.array([0, 2, 2, 8])), "at least one candidate"),
    (dict(offsets=np.array([1, 2, 5, 8])), "start at 0"),
    (dict(cost=np.ones(7)), "shape"),
    (dict(drop_pct=np.array([np.nan] + [1.0] * 7)), "finite"),
    (dict(cost=np.array([1.0] * 5 + [np.inf, 1.0, 1.0])), "entry 5 is inf"),
    (dict(cost=np.array([1.0] * 6 + [-np.inf, 1.0])), "entry 6 is -inf"),
    (dict(limit_pct=np.array([np.inf, np.nan, 1.0])), "entry 1 is NaN"),
    (dict(limit_pct=np.array([-np.inf, 1.0, 1.0])), "-inf"),
    (dict(parent=np.array([-1.0, 0.0, 0.0])), "integer"),
    (dict(capex_cap=5.0), "capex_cap needs capex"),
    (dict(same_choice_groups=(np.array([1, 2]),)), "choice_key"),
    (dict(same_choice_groups=(np.array([1, 3]),), choice_key=np.zeros(8, int)), "range"),
    (dict(drop2_pct=np.ones(8)), "go together"),
])
def test_problem_validation(change: dict, message: str) -> None:
    p = feeder_and_two_branches()
    fields = dict(parent=p.parent, offsets=p.offsets, cost=p.cost, drop_pct=p.drop_pct,
                  limit_pct=p.limit_pct)
    fields.update(change)
    # A malformed problem is sizer's own bug, never the user's input: exit code 3.
    with pytest.raises(InternalError, match=message):
        Problem(**fields)


def test_problem_is_read_only_and_broadcasts_scalars() -> None:
    p = Problem(np.array([-1, 0]), np.array([0, 1, 2]), [1.0, 2.0], [0.5, 0.5],
                fixed_drop_pct=0.25, limit_pct=3.0)
    assert p.fixed_drop_pct.tolist() == [0.25, 0.25] and p.limit_pct.tolist() == [3.0, 3.0]
    with pytest.raises(ValueError):
        p.cost[0] = 5.0
    assert p.path_drop_pct(np.array([0, 1])).tolist() == [0.75, 1.5]
    assert p.violations(np.array([0, 0])) == ["choice does not pick one row of each segment"]


def test_real_time_limit_is_reported_honestly() -> None:
    # A 300-segment tree with 30 rows each is rarely proven within 1 s by CBC; either
    # outcome must be labelled truthfully and never beat the tree engine's optimum.
    p = random_tree(11, 300, 30, 1)
    exact = solve(p, engine="tree")
    sol = solve(p, engine="milp", time_limit_s=1)
    assert sol.status in (SolveStatus.OPTIMAL, SolveStatus.TIME_LIMIT)
    if sol.status is SolveStatus.TIME_LIMIT and sol.has_solution:
        assert not sol.proven_optimal
        assert sol.gap is None or sol.gap >= 0
    if sol.has_solution:
        assert sol.objective >= exact.objective * (1 - 1e-9)
        assert p.violations(sol.choice, 1e-6) == []


def test_route_subproblems_keep_every_path_resource() -> None:
    # Found on merging shared routes with the earth-fault loop: the route iteration's
    # sub-problems dropped the loop resource, so the tree engine broke disconnection.
    from sizer.engines.routes import restrict

    p = feeder_and_two_branches()
    m = p.n_candidates
    full = Problem(p.parent, p.offsets, p.cost, p.drop_pct, limit_pct=p.limit_pct,
                   drop2_pct=np.ones(m), limit2_pct=np.full(3, 10.0),
                   loop_pu=np.arange(m, dtype=float), loop_limit_pu=np.full(3, 50.0),
                   route_of=np.array([-1, 0, 0]), route_count=np.full(m, 3),
                   route_top=np.full(m, np.inf))
    keep = np.ones(m, dtype=bool)
    keep[p.offsets[1]] = False
    sub, rows = restrict(full, keep)
    assert sub.route_of is None
    for name in ("cost", "drop_pct", "drop2_pct", "loop_pu"):
        np.testing.assert_array_equal(getattr(sub, name), getattr(full, name)[rows])
    np.testing.assert_array_equal(sub.loop_limit_pu, full.loop_limit_pu)


def test_a_bounded_sub_solve_proves_nothing_about_shared_routes() -> None:
    # Found with the larger-PE rows on the tile works: a sub-solve whose fronts were
    # thinned (status bounded) was taken as a lower bound, so the route iteration claimed
    # a proven optimum the MILP beat. A bounded sub-solve gives a design, no bound.
    import dataclasses

    from sizer.engines.routes import solve_tree_routes

    p = feeder_and_two_branches()
    m = p.n_candidates
    full = Problem(p.parent, p.offsets, p.cost, p.drop_pct, limit_pct=p.limit_pct,
                   route_of=np.array([-1, 0, 0]), route_count=np.full(m, 3),
                   route_top=np.full(m, np.inf))

    def exact(q):
        return tree_engine.solve_tree(q)

    def bounded(q):
        s = tree_engine.solve_tree(q)
        return dataclasses.replace(s, status=SolveStatus.BOUNDED, proven_optimal=False,
                                   gap=None)

    proven, _ = solve_tree_routes(full, exact)
    assert proven.proven_optimal
    found, bound = solve_tree_routes(full, bounded)
    assert not found.proven_optimal and bound == -np.inf
    assert found.objective == pytest.approx(proven.objective)  # the design is still good
    # (the iteration's own branch is checked on the tile works: test_determinism)


def test_auto_hands_a_small_bounded_tree_solve_to_the_milp(monkeypatch) -> None:
    # Found by the scenario fuzz with the larger-PE rows: a 15-run tree came back
    # "bounded" (fronts thinned). On a small tree the MILP proves the optimum at once.
    import dataclasses

    import sizer.engines as engines

    p = feeder_and_two_branches()
    real = tree_engine.solve_tree

    def thinned(q, **kw):
        s = real(q, **kw)
        return dataclasses.replace(s, status=SolveStatus.BOUNDED, proven_optimal=False,
                                   gap=None, message=s.message + "; fronts bounded")

    monkeypatch.setattr(engines._tree, "solve_tree", thinned)
    exact = solve(p, engine="milp")
    got = solve(p, engine="auto")
    assert got.status is SolveStatus.OPTIMAL and got.proven_optimal
    assert got.objective == pytest.approx(exact.objective, rel=1e-9)
    assert "the MILP proved the optimum" in got.message
    assert solve(p, engine="tree").status is SolveStatus.BOUNDED  # asked for: as it is

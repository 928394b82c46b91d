"""Optimisation engines: pick one candidate row per segment at least cost.

Pure optimisation that knows nothing of amperes: a :class:`Problem` holds costs and
voltage drops in percent, :func:`solve` returns a :class:`Solution`. Two engines solve
the same statement: ``tree``, an exact bottom-up dynamic program for pure tree problems,
and ``milp``, a PuLP model (CBC or HiGHS) that also takes side constraints.
"""

from __future__ import annotations

import dataclasses

from sizer.engines import tree as _tree
from sizer.engines.milp import SOLVERS, solve_milp, solver_available
from sizer.engines.problem import Problem, Solution, SolveStatus
from sizer.engines.routes import solve_tree_routes
from sizer.engines.tree import KeptFronts
from sizer.errors import ScenarioError

__all__ = ["ENGINES", "SOLVERS", "KeptFronts", "Problem", "Solution", "SolveStatus", "solve",
           "solver_available"]

ENGINES = ("auto", "tree", "milp")

EXACT_BY_MILP_UP_TO = 2_000
"""Up to this many runs ``auto`` hands a bounded tree solve (fronts thinned) to the MILP."""


def solve(problem: Problem, engine: str = "auto", solver: str = "cbc",
          time_limit_s: float | None = None, reuse: KeptFronts | None = None) -> Solution:
    """Solve ``problem`` with the named engine.

    ``auto`` runs the tree engine when the problem has no side constraints (shared
    routes aside: the tree engine bounds them and hands what it cannot prove to the
    MILP), else the MILP; when the tree engine's front bound is hit it falls back to the
    MILP and says so in the message. ``solver`` ("cbc" | "highs") and ``time_limit_s`` (wall clock,
    seconds) apply to the MILP; the tree engine has no time limit. ``reuse``: the tree
    engine's fronts from the last solve of this problem with other limits, to reuse.
    """
    if engine not in ENGINES:
        raise ScenarioError(f"unknown engine {engine!r}; choose one of {', '.join(ENGINES)}",
                            field="engine")
    if solver not in SOLVERS:
        raise ScenarioError(f"unknown solver {solver!r}; choose one of {', '.join(SOLVERS)}",
                            field="solver")
    if (engine in ("tree", "auto") and problem.has_routes
            and not _other_side_constraints(problem)):
        return _tree_with_routes(problem, solver, time_limit_s)
    if engine == "tree" and problem.has_side_constraints:
        raise ScenarioError("the tree engine takes no side constraints (motor start, budget "
                            "caps, frontier caps); use engine 'auto' or 'milp'", field="engine")
    if engine == "milp" or (engine == "auto" and problem.has_side_constraints):
        return solve_milp(problem, solver=solver, time_limit_s=time_limit_s)
    first = _tree.solve_tree(problem, max_front=_tree.DEFAULT_MAX_FRONT, reuse=reuse)
    if engine == "auto" and first.status is SolveStatus.BOUNDED and first.gap is None \
            and problem.n_segments <= EXACT_BY_MILP_UP_TO:
        # a small tree whose fronts were thinned: the MILP proves the optimum quickly
        # (a relaxed deep tree states a proven gap instead: it stays with the tree engine)
        exact = solve_milp(problem, solver=solver, time_limit_s=time_limit_s)
        if exact.status is SolveStatus.OPTIMAL:
            return dataclasses.replace(
                exact, message=f"{first.message}; the MILP proved the optimum. "
                f"{exact.message}", seconds=first.seconds + exact.seconds)
        return first
    if engine == "tree" or first.status is not SolveStatus.ERROR:
        return first
    fallback = solve_milp(problem, solver=solver, time_limit_s=time_limit_s)
    return dataclasses.replace(
        fallback,
        message=f"{first.message}; fell back to the MILP. {fallback.message}",
        seconds=first.seconds + fallback.seconds,
    )


def _other_side_constraints(problem: Problem) -> bool:
    """Side constraints beyond shared routes (the tree engine refuses those)."""
    return dataclasses.replace(problem, route_of=None, route_count=None,
                               route_top=None).has_side_constraints


def _tree_with_routes(problem: Problem, solver: str, time_limit_s: float | None) -> Solution:
    """Shared routes by the tree engine; the MILP settles what the iteration cannot prove."""
    found, _bound = solve_tree_routes(
        problem, lambda pure: _tree.solve_tree(pure, max_front=_tree.DEFAULT_MAX_FRONT))
    if found.status is SolveStatus.INFEASIBLE or found.proven_optimal:
        return found
    exact = solve_milp(problem, solver=solver, time_limit_s=time_limit_s)
    return dataclasses.replace(
        exact, message=f"tree engine, {found.message}; handed to the MILP. {exact.message}",
        seconds=found.seconds + exact.seconds)

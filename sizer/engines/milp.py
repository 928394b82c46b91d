"""Mixed-integer model of the sizing problem in PuLP (CBC bundled, HiGHS optional).

The declarative engine: slower than the tree program on pure tree problems, but it takes
the side constraints (budget caps, groups of segments forced to one choice, a second
path-drop limit). PuLP names stay inside this module; callers see Problem/Solution.

Model, with x_c ∈ {0, 1} per candidate row c, rows R(s) of segment s, parent p(s):

    minimise   Σ_c cost_c · x_c
    one row    Σ_{c ∈ R(s)} x_c = 1                                   for every s
    path drop  u_s − u_{p(s)} − Σ_{c ∈ R(s)} drop_c · x_c ≥ fixed_s   (u_{−1} ≡ 0)
               least_s ≤ u_s ≤ limit_s                                (all in %)

u_s bounds the cumulative drop at s's far end from above; it exists only for segments
with a finite limit at or below them, so the model stays sparse (one row per segment, no
per-path rows); least_s is the least cumulative drop any choice gives. The second
drop constraint (drop2/limit2) and the earth-fault loop (loop_pu/loop_limit_pu) repeat
the path rows with their own values and limits. Caps are single rows over
all x. A group G with keys K: y_{G,k} ∈ {0, 1}, Σ_k y_{G,k} = 1 and
Σ_{c ∈ R(s), key_c = k} x_c = y_{G,k} for every s ∈ G, k ∈ K.
"""

from __future__ import annotations

import contextlib
import math
import os
import re
import sys
import tempfile
import time
from collections.abc import Iterator

import numpy as np
import pulp

from sizer.engines.problem import Problem, Solution, SolveStatus
from sizer.errors import ScenarioError, SolverError

__all__ = ["SOLVERS", "solve_milp", "solver_available"]

SOLVERS = ("cbc", "highs")
_SEED = 20240611  # fixed so repeated runs explore the same search tree
_GAP_REL = 1e-9  # prove optimality to this relative gap (solver defaults stop earlier)


def _cbc(time_limit_s: float | None, log_path: str | None,
         preprocess: bool = True) -> pulp.LpSolver | None:
    """CBC: one on PATH or from PuLP's [cbc] extra, else the binary bundled in PuLP 3.x."""
    options = [f"randomCbcSeed {_SEED}", f"randomSeed {_SEED}"]
    if not preprocess:
        options.append("preprocess off")
    kwargs = dict(msg=False, timeLimit=time_limit_s, gapRel=_GAP_REL, threads=1,
                  logPath=log_path, options=options)
    solver = pulp.COIN_CMD(**kwargs)
    if solver.available():
        return solver
    # Read the bundled path from the class: instantiating PULP_CBC_CMD warns (PuLP 4).
    bundled = getattr(getattr(pulp, "PULP_CBC_CMD", None), "pulp_cbc_path", None)
    if bundled and os.access(bundled, os.X_OK):
        return pulp.COIN_CMD(path=bundled, **kwargs)
    return None


_banner_silenced = False


def _silence_highs_banner() -> None:
    """Construct one highspy.Highs with stdout closed: its first one prints a banner."""
    global _banner_silenced
    if _banner_silenced:
        return
    _banner_silenced = True
    try:
        import highspy
    except ImportError:
        return
    sys.stdout.flush()
    try:
        saved = os.dup(1)
    except OSError:  # no usable stdout: nothing to protect
        return
    try:
        with open(os.devnull, "w") as null:
            os.dup2(null.fileno(), 1)
            highspy.Highs()
    finally:
        os.dup2(saved, 1)
        os.close(saved)


def _highs(time_limit_s: float | None) -> pulp.LpSolver | None:
    """HiGHS through highspy, in process."""
    highs_class = getattr(pulp, "HiGHS", None)
    if highs_class is None:
        return None
    _silence_highs_banner()
    try:
        solver = highs_class(msg=False, timeLimit=time_limit_s, gapRel=_GAP_REL,
                             random_seed=_SEED)
    except pulp.PulpSolverError:
        return None
    return solver if solver.available() else None


def _make_solver(solver: str, time_limit_s: float | None,
                 log_path: str | None, preprocess: bool = True) -> pulp.LpSolver:
    """The PuLP solver object for a solver name; SolverError naming the fix if missing."""
    if solver == "cbc":
        made = _cbc(time_limit_s, log_path, preprocess)
        fix = ("install PuLP with its CBC solver: on Python 3.11 pip install 'pulp>=3.3,<4' "
               "(bundles CBC), on Python >= 3.12 pip install 'pulp[cbc]'; or use "
               "solver='highs' (pip install 'sizer[highs]')")
    elif solver == "highs":
        made = _highs(time_limit_s)
        fix = "pip install 'sizer[highs]' (installs highspy), or use solver='cbc'"
    else:
        raise ScenarioError(f"unknown solver {solver!r}; choose one of {', '.join(SOLVERS)}",
                            field="solver")
    if made is None:
        raise SolverError(f"the {solver} solver is not available: {fix}")
    return made


def solver_available(solver: str) -> bool:
    """True when the named solver can run here."""
    try:
        _make_solver(solver, None, None)
    except SolverError:
        return False
    return True


def _expr(pairs: Iterator[tuple[pulp.LpVariable, float]] | list) -> pulp.LpAffineExpression:
    return pulp.LpAffineExpression(pairs)


def _add(prob: pulp.LpProblem, pairs: list, sense: int, rhs: float, name: str) -> None:
    prob.addConstraint(pulp.LpConstraint(_expr(pairs), sense=sense, rhs=rhs, name=name))


def _needs_path(parent: list[int], limit: np.ndarray) -> list[bool]:
    """Segments with a finite limit at or below them (they need a cumulative variable)."""
    need = np.isfinite(limit).tolist()
    for s in range(len(parent) - 1, -1, -1):
        if need[s] and parent[s] >= 0:
            need[parent[s]] = True
    return need


def add_path_drop_constraints(prob: pulp.LpProblem, x: list[pulp.LpVariable],
                              problem: Problem, drop: np.ndarray, fixed: np.ndarray,
                              limit: np.ndarray, tag: str) -> int:
    """Add u_s ≥ u_parent + Σ drop·x + fixed_s with least_s ≤ u_s ≤ limit_s (drops in %).

    One row per segment that has a finite limit at or below it; returns how many.
    ``least_s`` (least possible cumulative drop) is a valid bound that also keeps CBC
    2.10's preprocessing from mishandling free variables (seen: a wrong "optimal").
    """
    parent = problem.parent.tolist()
    off = problem.offsets.tolist()
    need = _needs_path(parent, limit)
    neg_drop = (-drop).tolist()
    fixed_list = fixed.tolist()
    least_own = (np.minimum.reduceat(drop, problem.offsets[:-1]) + fixed).tolist()
    least = [0.0] * len(parent)
    u: list[pulp.LpVariable | None] = [None] * len(parent)
    added = 0
    for s, p in enumerate(parent):
        least[s] = least_own[s] + (least[p] if p >= 0 else 0.0)
        if not need[s]:
            continue
        ub = float(limit[s]) if math.isfinite(limit[s]) else None
        # lb > ub makes CBC fail outright; leave an impossible limit to the solver's proof.
        lb = least[s] if ub is None else min(least[s], ub)
        u[s] = prob.add_variable(f"{tag}_u{s}", lowBound=lb, upBound=ub)
        terms = [(u[s], 1.0)]
        if p >= 0:
            terms.append((u[p], -1.0))
        a, b = off[s], off[s + 1]
        terms.extend(zip(x[a:b], neg_drop[a:b], strict=True))
        _add(prob, terms, pulp.LpConstraintGE, fixed_list[s], f"{tag}_path{s}")
        added += 1
    return added


def add_group_constraints(prob: pulp.LpProblem, x: list[pulp.LpVariable],
                          problem: Problem) -> int:
    """Segments of each group choose rows with one common choice key; returns rows added."""
    assert problem.choice_key is not None or not problem.same_choice_groups
    off = problem.offsets
    added = 0
    for g, members in enumerate(problem.same_choice_groups):
        if members.size < 2:
            continue
        assert problem.choice_key is not None
        keys = np.unique(np.concatenate(
            [problem.choice_key[off[s]:off[s + 1]] for s in members.tolist()]))
        y = {int(k): prob.add_variable(f"g{g}_k{int(k)}", cat=pulp.LpBinary)
             for k in keys.tolist()}
        _add(prob, [(v, 1.0) for v in y.values()], pulp.LpConstraintEQ, 1.0, f"g{g}_one")
        added += 1
        for s in members.tolist():
            a, b = int(off[s]), int(off[s + 1])
            own_keys = problem.choice_key[a:b]
            for k, yk in y.items():
                terms = [(x[a + i], 1.0) for i in np.flatnonzero(own_keys == k).tolist()]
                terms.append((yk, -1.0))
                _add(prob, terms, pulp.LpConstraintEQ, 0.0, f"g{g}_s{s}_k{k}")
                added += 1
    return added


def add_route_constraints(prob: pulp.LpProblem, x: list[pulp.LpVariable],
                          problem: Problem) -> int:
    """Each route's conductor total within the band every chosen row's derating assumes.

    For route r and each finite band top t of its rows: z_rt ≥ Σ_{i in s, top_i = t} x_i
    for every segment s of r (one row per segment), and
    Σ_{j in r} count_j x_j ≤ t + M_rt (1 − z_rt), M_rt = most conductors r can hold − t.
    Returns the rows added.
    """
    if not problem.has_routes:
        return 0
    assert problem.route_of is not None and problem.route_count is not None
    assert problem.route_top is not None
    off = problem.offsets.tolist()
    count = problem.route_count.tolist()
    added = 0
    for r in np.unique(problem.route_of[problem.route_of >= 0]).tolist():
        members = np.flatnonzero(problem.route_of == r).tolist()
        total = [(x[i], float(count[i])) for s in members for i in range(off[s], off[s + 1])]
        most = sum(max(count[off[s]:off[s + 1]]) for s in members)
        tops = np.unique(np.concatenate([problem.route_top[off[s]:off[s + 1]]
                                         for s in members]))
        for t in tops[np.isfinite(tops)].tolist():
            if t >= most:
                continue  # the band holds anything the route can carry
            z = prob.add_variable(f"r{r}_t{t:g}", cat=pulp.LpBinary)
            for s in members:
                rows = [i for i in range(off[s], off[s + 1]) if problem.route_top[i] == t]
                if rows:
                    _add(prob, [(x[i], 1.0) for i in rows] + [(z, -1.0)],
                         pulp.LpConstraintLE, 0.0, f"r{r}_t{t:g}_s{s}")
                    added += 1
            _add(prob, [*total, (z, most - t)], pulp.LpConstraintLE, float(most),
                 f"r{r}_t{t:g}_total")
            added += 1
    return added


def build_model(problem: Problem) -> tuple[pulp.LpProblem, list[pulp.LpVariable]]:
    """The PuLP model of a Problem, built from its arrays in one pass."""
    prob = pulp.LpProblem("sizer", pulp.LpMinimize)
    m = problem.n_candidates
    x = [prob.add_variable(f"x{i}", cat=pulp.LpBinary) for i in range(m)]
    prob.setObjective(_expr(zip(x, problem.cost.tolist(), strict=True)))
    off = problem.offsets.tolist()
    for s in range(problem.n_segments):
        a, b = off[s], off[s + 1]
        _add(prob, [(v, 1.0) for v in x[a:b]], pulp.LpConstraintEQ, 1.0, f"one{s}")
    add_path_drop_constraints(prob, x, problem, problem.drop_pct, problem.fixed_drop_pct,
                              problem.limit_pct, "d1")
    for k, (own, limit) in enumerate(problem.extra_paths(), start=2):
        add_path_drop_constraints(prob, x, problem, own, np.zeros(problem.n_segments), limit,
                                  f"d{k}")
    for name, cap in (("capex", problem.capex_cap), ("loss_pv", problem.loss_pv_cap)):
        if cap is not None:
            coef = getattr(problem, name).tolist()
            _add(prob, list(zip(x, coef, strict=True)), pulp.LpConstraintLE, cap,
                 f"{name}_cap")
    add_group_constraints(prob, x, problem)
    add_route_constraints(prob, x, problem)
    return prob, x


def map_status(status: int, sol_status: int, time_limited: bool
               ) -> tuple[SolveStatus, bool, bool]:
    """(our status, proven optimal, has a solution) from PuLP's status and sol_status.

    CBC reports status Optimal when it stopped at a time limit holding only a feasible
    solution; the solution status tells them apart.
    """
    if sol_status == pulp.LpSolutionOptimal and status == pulp.LpStatusOptimal:
        return SolveStatus.OPTIMAL, True, True
    if sol_status == pulp.LpSolutionIntegerFeasible:
        return SolveStatus.TIME_LIMIT, False, True
    if status == pulp.LpStatusInfeasible or sol_status == pulp.LpSolutionInfeasible:
        return SolveStatus.INFEASIBLE, True, False
    if time_limited and sol_status == pulp.LpSolutionNoSolutionFound:
        return SolveStatus.TIME_LIMIT, False, False
    return SolveStatus.ERROR, False, False


_CBC_NUMBER = r"\s*([-+0-9.eE]+)\s*$"
_CBC_OBJECTIVE = re.compile(r"^Objective value:" + _CBC_NUMBER, re.MULTILINE)
_CBC_BOUND = re.compile(r"^Lower bound:" + _CBC_NUMBER, re.MULTILINE)
_CBC_GAP = re.compile(r"^Gap:" + _CBC_NUMBER, re.MULTILINE)


def _in_folder(solver: pulp.LpSolver, folder: str) -> pulp.LpSolver:
    """The solver, writing its temporary files into ``folder``.

    PuLP's command-line solvers name their files in ``tmpDir`` (the system temporary
    folder by default) and remove them only when the solve returns normally.
    """
    if hasattr(solver, "tmpDir"):
        solver.tmpDir = folder
    return solver


def _run(prob: pulp.LpProblem, solver: pulp.LpSolver) -> tuple[int, int]:
    """Solve, returning PuLP's (status, sol_status)."""
    prob.solve(solver)
    return prob.status, prob.sol_status


def _log_says(log_path: str | None, words: str) -> bool:
    """True when CBC's log contains ``words``."""
    if not (log_path and os.path.exists(log_path)):
        return False
    with open(log_path, encoding="utf-8", errors="replace") as fh:
        return words in fh.read()


def _read_gap(prob: pulp.LpProblem, solver_name: str, log_path: str | None) -> float | None:
    """The solver's final relative gap, when it says."""
    if solver_name == "highs":
        model = getattr(prob, "solverModel", None)
        with contextlib.suppress(Exception):  # highspy versions differ; a gap is a nicety
            return float(model.getInfo().mip_gap)  # type: ignore[union-attr]
        return None
    if not (log_path and os.path.exists(log_path)):
        return None
    with open(log_path, encoding="utf-8", errors="replace") as fh:
        log = fh.read()
    objective, bound = _CBC_OBJECTIVE.findall(log), _CBC_BOUND.findall(log)
    with contextlib.suppress(ValueError, ZeroDivisionError):
        if objective and bound:  # CBC prints its own gap with two decimals only
            obj = float(objective[-1])
            return abs(obj - float(bound[-1])) / abs(obj)
        gap = _CBC_GAP.findall(log)
        if gap:
            return float(gap[-1])
    return None


def solve_milp(problem: Problem, solver: str = "cbc",
               time_limit_s: float | None = None) -> Solution:
    """Solve with the MILP: CBC (default) or HiGHS; optional wall-clock limit in s."""
    t0 = time.perf_counter()
    if time_limit_s is not None and not time_limit_s > 0:
        raise ScenarioError("the time limit must be a positive number of seconds",
                            field="time_limit_s")
    # Every file of the solve (CBC's model, solution and log) lives in this private folder,
    # removed on every way out: a normal end, an error, Ctrl-C, and SIGTERM (which the
    # command line turns into an exception). HiGHS runs in process, without files.
    with tempfile.TemporaryDirectory(prefix="sizer-milp-") as tmp:
        log_path = os.path.join(tmp, "cbc.log") if solver == "cbc" else None
        lp_solver = _in_folder(_make_solver(solver, time_limit_s, log_path), tmp)
        prob, x = build_model(problem)
        try:
            status, sol_status = _run(prob, lp_solver)
        except (pulp.PulpSolverError, OSError) as exc:
            raise SolverError(f"the {solver} solver failed: {exc}") from exc
        ours, proven, has = map_status(status, sol_status, time_limit_s is not None)
        if ours is SolveStatus.INFEASIBLE and _log_says(log_path, "Pre-processing says"):
            # CBC 2.10.3's pre-processing can wrongly call a feasible model infeasible on
            # large instances ("Cut generators found to be infeasible"): ask again
            # without it before believing it.
            retry = _in_folder(_make_solver(solver, time_limit_s, log_path, preprocess=False),
                               tmp)
            try:
                status, sol_status = _run(prob, retry)
            except (pulp.PulpSolverError, OSError) as exc:
                raise SolverError(f"the {solver} solver failed: {exc}") from exc
            ours, proven, has = map_status(status, sol_status, time_limit_s is not None)
        if ours is SolveStatus.INFEASIBLE and _log_says(log_path, "Stopped on time"):
            # Stopped by its clock before finding a design, CBC proved nothing.
            ours, proven, has = SolveStatus.TIME_LIMIT, False, False
        gap = _read_gap(prob, solver, log_path) if ours is SolveStatus.TIME_LIMIT else None
    n = problem.n_segments
    choice = np.full(n, -1, dtype=np.int64)
    objective = float("nan")
    if has:
        value = np.array([v.varValue if v.varValue is not None else 0.0 for v in x])
        seg = problem.segment_of_row
        # Largest x per segment, lowest row on ties (lexsort is stable).
        order = np.lexsort((-value, seg))
        choice = order[problem.offsets[:-1]]
        objective = float(np.sum(problem.cost[choice]))
        broken = problem.violations(choice, tol_pct=1e-6)
        if broken:
            ours, proven = SolveStatus.ERROR, False
            msg_extra = "; rounded solution breaks: " + "; ".join(broken[:3])
        else:
            msg_extra = ""
    else:
        msg_extra = ""
    if ours is SolveStatus.OPTIMAL:
        gap = 0.0
    words = {
        SolveStatus.OPTIMAL: "proven optimal",
        SolveStatus.TIME_LIMIT: ("stopped at the time limit with a feasible design, "
                                 "optimality not proven" if has else
                                 "stopped at the time limit without a design"),
        SolveStatus.INFEASIBLE: "proven infeasible",
        SolveStatus.ERROR: f"solver status {pulp.LpStatus.get(status, status)}, solution "
                           f"status {pulp.LpSolution.get(sol_status, sol_status)}",
    }
    seconds = time.perf_counter() - t0
    return Solution(
        status=ours, choice=choice, objective=objective, proven_optimal=proven, gap=gap,
        engine=f"milp-{solver}",
        # No run times here: the message reaches the results files, which must not vary.
        message=(f"MILP ({solver}): {words[ours]}{msg_extra}; {n} segments, "
                 f"{problem.n_candidates} candidates"),
        seconds=seconds,
    )

"""Exact tree dynamic program for the path-drop sizing problem.

Bottom-up over the tree, every subtree keeps the Pareto front of

    (cost, requirement),  requirement = max over constrained segments v in the subtree of
                          (drop from the subtree's top to v's far end − limit_pct[v]),

the method of the published discrete wire-sizing and buffer-insertion algorithms (van
Ginneken's bottom-up candidate lists; Lillis, Cheng & Lin's extension to discrete wire
sizes). A subtree without a constrained segment has requirement −inf. The children's
fronts are merged as staircase functions (cost sum at every breakpoint, requirement =
max), the segment's own candidates are added to every merged point, and dominated pairs
are pruned. The problem is feasible iff some root point has requirement ≤ 0 (within
``tol_pct``); the design is rebuilt top-down from each point's candidate and the
requirement it leaves its children.

Exact reductions keep the fronts small, none of them approximate:

- a candidate worse than another of the same segment in both cost and drop is dropped,
  and so is one that breaks a limit even with the least drop everywhere else;
- a point needing more than the path above can ever leave it (−least drop above) is
  dropped; of the points needing less than the path above always leaves it (−greatest
  usable drop above), only the cheapest is kept;
- near the root, where the choices above a segment are few, the budgets they can offer
  are enumerated top-down, and a front keeps only the points that answer one of them
  (a point between two budgets is never chosen). At such a segment the points are
  computed per budget rather than by the full sum, which keeps the wide merges near the
  root cheap.

Drops are placed on the finest binary grid at which float64 sums are exact (2⁻³⁰ %
for any realistic problem, far below the tolerance), so budgets computed top-down and
requirements computed bottom-up compare exactly; there is no coarser discretisation.
"""

from __future__ import annotations

import time

import numpy as np

from sizer.errors import ScenarioError
from sizer.engines.problem import Problem, Solution, SolveStatus

__all__ = ["DEFAULT_MAX_FRONT", "DEFAULT_MAX_QUERIES", "exact_grid_pct", "solve_tree",
           "undominated_rows"]

DEFAULT_MAX_FRONT = 100_000
DEFAULT_MAX_QUERIES = 4096
_GRID_BITS = 30
_ENGINE = "tree"


def undominated_rows(problem: Problem, drop_pct: np.ndarray | None = None
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Rows no other row of the same segment beats in both cost and drop.

    Returns ``(rows, offsets)``: segment ``s`` keeps ``rows[offsets[s]:offsets[s+1]]``,
    sorted by drop ascending with cost strictly descending. Of exact duplicates the
    lowest row survives. ``drop_pct`` replaces the problem's drops when given.
    """
    drop = problem.drop_pct if drop_pct is None else drop_pct
    n = problem.n_segments
    seg = problem.segment_of_row
    rows = np.arange(problem.n_candidates)
    order = np.lexsort((rows, problem.cost, drop, seg))
    seg_sorted = seg[order]
    cost_sorted = problem.cost[order]
    pos = rows - problem.offsets[seg_sorted]
    # One padded row per segment, so the running minimum runs over all segments at once.
    width = int(np.diff(problem.offsets).max())
    pad = np.full((n, width), np.inf)
    pad[seg_sorted, pos] = cost_sorted
    best_before = np.empty_like(pad)
    best_before[:, 0] = np.inf
    np.minimum.accumulate(pad[:, :-1], axis=1, out=best_before[:, 1:])
    keep = cost_sorted < best_before[seg_sorted, pos]
    kept_offsets = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(seg_sorted[keep], minlength=n), out=kept_offsets[1:])
    return order[keep], kept_offsets


def exact_grid_pct(problem: Problem) -> float:
    """Step of the finest binary grid on which every path sum of drops is exact in float64.

    Drops, fixed drops and limits rounded to multiples of this step (2⁻³⁰ % ≈ 9.3e-10 %
    for any realistic problem) add and subtract without rounding error, so the program
    compares requirements and budgets exactly whatever the order of the sums.
    """
    bound = (float(np.sum(np.maximum.reduceat(np.abs(problem.drop_pct),
                                               problem.offsets[:-1])))
             + float(np.sum(np.abs(problem.fixed_drop_pct))))
    finite = problem.limit_pct[np.isfinite(problem.limit_pct)]
    bound += float(np.max(np.abs(finite))) if finite.size else 0.0
    bits = min(_GRID_BITS, 52 - int(np.ceil(np.log2(bound + 2.0))))
    return float(2.0 ** -bits)


def _on_grid(values: np.ndarray, step: float) -> np.ndarray:
    return np.round(values / step) * step


def _children(parent: np.ndarray) -> list[list[int]]:
    """Children of every segment, ascending."""
    n = parent.size
    order = np.argsort(parent, kind="stable")
    counts = np.bincount(parent + 1, minlength=n + 1)
    bounds = np.concatenate(([0], np.cumsum(counts))).tolist()
    order_list = order.tolist()
    return [order_list[bounds[s + 1]:bounds[s + 2]] for s in range(n)]


def _failure(problem: Problem, status: SolveStatus, message: str, t0: float) -> Solution:
    return Solution(
        status=status, choice=np.full(problem.n_segments, -1, dtype=np.int64),
        objective=float("nan"), proven_optimal=status is SolveStatus.INFEASIBLE, gap=None,
        engine=_ENGINE, message=message, seconds=time.perf_counter() - t0,
    )


def _merge_children(kids: list[int], lo: float, f_req: list[np.ndarray],
                    f_cost: list[np.ndarray], f_delta: list[np.ndarray]
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Staircase sum of the children's fronts, floored at the segment's own ``-limit``.

    Returns breakpoints ``r`` ascending and the least total cost with every child's
    requirement ≤ r.
    """
    if not kids:
        return np.array([lo]), np.zeros(1)
    if len(kids) == 1:
        r, c = f_req[kids[0]], f_cost[kids[0]]
        if r[0] >= lo:
            return r, c
        i = int(np.searchsorted(r, lo, side="right")) - 1
        return np.concatenate(([lo], r[i + 1:])), c[i:]
    start = max(lo, max(float(f_req[k][0]) for k in kids))
    reqs = np.concatenate([f_req[k] for k in kids])
    order = np.argsort(reqs, kind="stable")
    rs = reqs[order]
    # Each child's cost steps down by its deltas as r grows, so the running sum over
    # all breakpoints is Σ_children least cost at r once every child has started.
    cs = np.cumsum(np.concatenate([f_delta[k] for k in kids])[order])
    i0 = int(np.searchsorted(rs, start, side="right")) - 1
    tail_r = rs[i0 + 1:]
    if not tail_r.size:
        return np.array([start]), cs[i0:i0 + 1]
    last = np.empty(tail_r.size, dtype=bool)  # last of each run of equal breakpoints
    np.not_equal(tail_r[:-1], tail_r[1:], out=last[:-1])
    last[-1] = True
    return (np.concatenate(([start], tail_r[last])),
            np.concatenate((cs[i0:i0 + 1], cs[i0 + 1:][last])))


def _pareto(req: np.ndarray, cost: np.ndarray) -> np.ndarray:
    """Indices of the non-dominated points, by requirement ascending (cost descending)."""
    order = np.lexsort((cost, req))
    c = cost[order]
    keep = np.empty(c.size, dtype=bool)
    if c.size:
        keep[0] = True
        np.less(c[1:], np.minimum.accumulate(c)[:-1], out=keep[1:])
    return order[keep]


def _query_sets(children: list[list[int]], parent: np.ndarray, own_d: np.ndarray,
                kept_off: np.ndarray, rmin: list[float], rmax: list[float],
                tol_pct: float, max_queries: int) -> list[np.ndarray | None]:
    """Every budget (requirement allowed at a segment's top) the tree above can offer.

    Budget = tol − Σ ancestors' (drop + fixed), over all choices of the ancestors, kept
    only for segments near the root where the set stays below ``max_queries``; None
    elsewhere. Budgets above ``rmax`` collapse to it, budgets below ``rmin`` are
    infeasible and dropped.
    """
    n = parent.size
    queries: list[np.ndarray | None] = [None] * n
    for s in range(n):
        if parent[s] < 0:
            queries[s] = np.array([tol_pct])
    off = kept_off.tolist()
    for s in range(n):
        q = queries[s]
        kids = children[s]
        if q is None or not kids:
            continue
        d = own_d[off[s]:off[s + 1]]
        if q.size * d.size > 64 * max_queries:
            continue
        base = np.unique((q[:, None] - d[None, :]).ravel())
        for k in kids:
            if rmax[k] == -np.inf:
                continue
            lo = int(np.searchsorted(base, rmin[k], side="left"))
            hi = int(np.searchsorted(base, rmax[k], side="right"))
            qk = base[lo:hi]
            if hi < base.size and (not qk.size or qk[-1] < rmax[k]):
                qk = np.append(qk, rmax[k])
            if qk.size <= max_queries:
                queries[k] = qk
    return queries


def solve_tree(problem: Problem, *, max_front: int = DEFAULT_MAX_FRONT,
               tol_pct: float = 1e-9, max_queries: int = DEFAULT_MAX_QUERIES) -> Solution:
    """Solve a pure tree problem exactly by the bottom-up Pareto-front program.

    ``max_front`` bounds the points of any one front; past it the solve stops with
    status ERROR and a message saying so (use the MILP instead). ``tol_pct`` is the
    feasibility tolerance on path drops, in percent. ``max_queries`` bounds the budget
    sets kept near the root (a speed setting; the result does not depend on it).
    """
    t0 = time.perf_counter()
    if problem.has_side_constraints:
        raise ScenarioError(
            "the tree engine takes no side constraints (budget caps, groups, second drop "
            "limit); use engine='milp'", field="engine")
    n = problem.n_segments
    parent = problem.parent
    parent_list = parent.tolist()
    children = _children(parent)
    # Every drop on one binary grid: sums below are then exact in any order.
    step = exact_grid_pct(problem)
    drop = _on_grid(problem.drop_pct, step)
    tol_pct = float(np.ceil(tol_pct / step) * step)
    floor = (-_on_grid(problem.limit_pct, step)).tolist()  # own limit as a requirement
    rows, kept_off = undominated_rows(problem, drop)
    n_undominated = rows.size
    own_d_all = drop[rows] + np.repeat(_on_grid(problem.fixed_drop_pct, step),
                                       np.diff(kept_off))

    # Least requirement of every subtree (least-drop rows throughout), bottom-up, and the
    # least drop above every segment, top-down.
    least = own_d_all[kept_off[:-1]].tolist()
    below_min = list(floor)
    rmin = [0.0] * n
    for s in range(n - 1, -1, -1):
        rmin[s] = least[s] + below_min[s]
        p = parent_list[s]
        if p >= 0 and rmin[s] > below_min[p]:
            below_min[p] = rmin[s]
    above_min = [0.0] * n
    for s, p in enumerate(parent_list):
        if p >= 0:
            above_min[s] = above_min[p] + least[p]
    # A row that breaks a limit even with least drops everywhere else is never usable.
    slack = tol_pct - np.asarray(below_min) - np.asarray(above_min)
    usable = own_d_all <= np.repeat(slack, np.diff(kept_off))
    if not np.all(usable):
        counts = np.bincount(np.repeat(np.arange(n), np.diff(kept_off))[usable], minlength=n)
        if np.any(counts == 0):
            s = int(np.flatnonzero(counts == 0)[0])
            return _failure(
                problem, SolveStatus.INFEASIBLE,
                f"tree engine: segment {s} has no candidate that keeps the path-drop "
                f"limits even with the least drop everywhere else (excess "
                f"{least[s] - slack[s] + tol_pct:.6g} %)", t0)
        rows, own_d_all = rows[usable], own_d_all[usable]
        kept_off = np.concatenate(([0], np.cumsum(counts)))
    own_c_all = problem.cost[rows]
    off = kept_off.tolist()

    # Greatest requirement of every subtree (cheapest rows throughout), bottom-up, and
    # the greatest drop above every segment, top-down: every budget offered to a segment
    # is at least tol − that drop, so the cheapest point within it is all that matters.
    most = own_d_all[kept_off[1:] - 1].tolist()
    below_max = list(floor)
    rmax = [0.0] * n
    for s in range(n - 1, -1, -1):
        rmax[s] = most[s] + below_max[s]
        p = parent_list[s]
        if p >= 0 and rmax[s] > below_max[p]:
            below_max[p] = rmax[s]
    low_budget = [tol_pct] * n
    for s, p in enumerate(parent_list):
        if p >= 0:
            low_budget[s] = low_budget[p] - most[p]
    high_budget = [tol_pct - a for a in above_min]
    queries = _query_sets(children, parent, own_d_all, kept_off, rmin, rmax, tol_pct,
                          max_queries)

    f_req: list[np.ndarray] = [np.empty(0)] * n
    f_cost: list[np.ndarray] = [np.empty(0)] * n
    f_delta: list[np.ndarray] = [np.empty(0)] * n
    f_row: list[np.ndarray] = [np.empty(0, dtype=np.int64)] * n
    f_below: list[np.ndarray] = [np.empty(0)] * n
    largest = 0
    for s in range(n - 1, -1, -1):
        below_r, below_c = _merge_children(children[s], floor[s], f_req, f_cost, f_delta)
        a, b = off[s], off[s + 1]
        own_c = own_c_all[a:b]
        own_d = own_d_all[a:b]
        own_rows = rows[a:b]
        q = queries[s]
        if below_r.size == 1:
            r0 = float(below_r[0])
            if r0 == -np.inf:  # nothing constrained below: only the cheapest row matters
                req, cost, row, rb = below_r, own_c[-1:] + below_c[0], own_rows[-1:], below_r
            else:  # drop ascending, cost descending: already a front
                req = own_d + r0
                m = int(np.searchsorted(req, high_budget[s], side="right"))
                req, cost, row = req[:m], own_c[:m] + below_c[0], own_rows[:m]
                rb = np.full(m, r0)
        elif q is not None and q.size < below_r.size:
            # Answer each budget the ancestors can offer: best row and merged point.
            idx = np.searchsorted(below_r, q[:, None] - own_d[None, :], side="right") - 1
            total = np.where(idx >= 0, own_c[None, :] + below_c[np.maximum(idx, 0)], np.inf)
            best = np.argmin(total, axis=1)
            hit = np.arange(q.size)
            found = total[hit, best] < np.inf
            best, bidx = best[found], idx[hit, best][found]
            req = own_d[best] + below_r[bidx]
            cost = own_c[best] + below_c[bidx]
            keep = _pareto(req, cost)
            req, cost = req[keep], cost[keep]
            row, rb = own_rows[best[keep]], below_r[bidx[keep]]
        else:
            req = (own_d[:, None] + below_r[None, :]).ravel()
            ok = np.flatnonzero(req <= high_budget[s])
            req = req[ok]
            cost = (own_c[:, None] + below_c[None, :]).ravel()[ok]
            keep = _pareto(req, cost)
            req, cost, pick = req[keep], cost[keep], ok[keep]
            row, rb = own_rows[pick // below_r.size], below_r[pick % below_r.size]
        if req.size > 1:
            # Points below the least budget ever offered: only the cheapest can be used.
            i = int(np.searchsorted(req, low_budget[s], side="right")) - 1
            if q is not None and q.size < req.size:
                used = np.searchsorted(req, q, side="right") - 1
                sel = np.unique(used[used >= 0])
            elif i > 0:
                sel = slice(i, None)  # type: ignore[assignment]
            else:
                sel = None  # type: ignore[assignment]
            if sel is not None:
                req, cost, row, rb = req[sel], cost[sel], row[sel], rb[sel]
        if req.size == 0:
            return _failure(
                problem, SolveStatus.INFEASIBLE,
                f"tree engine: no choice at or below segment {s} meets its path-drop limits",
                t0)
        if req.size > largest:
            largest = req.size
            if largest > max_front:
                return _failure(
                    problem, SolveStatus.ERROR,
                    f"tree engine: the Pareto front at segment {s} exceeds the bound of "
                    f"{max_front} points; use the MILP engine", t0)
        f_req[s], f_cost[s], f_row[s], f_below[s] = req, cost, row, rb
        f_delta[s] = np.diff(cost, prepend=0.0)

    # Each root takes its cheapest feasible point; rebuild the design top-down.
    point = [0] * n
    choice = np.empty(n, dtype=np.int64)
    for s, p in enumerate(parent_list):
        if p < 0:
            i = int(np.searchsorted(f_req[s], tol_pct, side="right")) - 1
            if i < 0:
                return _failure(
                    problem, SolveStatus.INFEASIBLE,
                    f"tree engine: the subtree fed by segment {s} cannot meet its limits "
                    f"(least excess drop {float(f_req[s][0]):.6g} %)", t0)
            point[s] = i
        i = point[s]
        choice[s] = f_row[s][i]
        rb = f_below[s][i]
        for k in children[s]:
            point[k] = int(np.searchsorted(f_req[k], rb, side="right")) - 1

    # Rounding to the grid moves a path sum by at most half a step per segment.
    broken = problem.violations(choice, tol_pct=tol_pct + n * step)
    if broken:  # a guard against a bug, never expected
        return _failure(problem, SolveStatus.ERROR,
                        "tree engine: internal check failed: " + "; ".join(broken[:3]), t0)
    return Solution(
        status=SolveStatus.OPTIMAL, choice=choice,
        objective=float(np.sum(problem.cost[choice])), proven_optimal=True, gap=0.0,
        engine=_ENGINE,
        message=(f"tree engine: {n} segments, {problem.n_candidates} candidates "
                 f"({n_undominated} undominated, {rows.size} usable), largest front "
                 f"{largest} points"),
        seconds=time.perf_counter() - t0,
    )

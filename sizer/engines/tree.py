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

Drops are placed on the finest binary grid at which float64 sums along a path are exact
(about 1e-12 % for realistic problems, far below the tolerance), so budgets computed
top-down and requirements computed bottom-up compare exactly; the tolerance is widened
by the rounding (a step per segment of depth), so a limit met exactly is met. There is
no coarser discretisation.
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np

from sizer.engines.problem import Problem, Solution, SolveStatus, path_totals
from sizer.engines.relax import DEEP_AT, DEEP_AT_MULTI, solve_relaxed, tree_depth, usable_rows
from sizer.errors import InternalError
from sizer.topology import Topology

__all__ = ["DEFAULT_MAX_FRONT", "DEFAULT_MAX_FRONT_MULTI", "DEFAULT_MAX_QUERIES",
           "KeptFronts", "exact_grid_pct", "solve_tree", "solve_tree_multi", "undominated_rows"]

DEFAULT_MAX_FRONT = 100_000
DEFAULT_MAX_FRONT_MULTI = 4_000
DEFAULT_MAX_QUERIES = 1024
# Fronts longer than THIN_AT points are thinned to about THIN_TO by ε-dominance (a deep
# chain's exact fronts grow with its depth); the design found still meets every limit
# exactly, and the solution states the tolerance (see _thin_1d).
THIN_AT = 20_000
THIN_TO = 4_096
THIN_AT_MULTI = 4_000
THIN_TO_MULTI = 1_000
_ENGINE = "tree"


def undominated_rows(problem: Problem, drop_pct: np.ndarray | None = None
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Rows no other row of the same segment beats in both cost and drop.

    Returns ``(rows, offsets)``: segment ``s`` keeps ``rows[offsets[s]:offsets[s+1]]``,
    sorted by drop ascending with cost strictly descending. Of exact duplicates the
    lowest row survives. ``drop_pct`` replaces the problem's drops when given.
    """
    drop = problem.drop_pct if drop_pct is None else drop_pct
    rows, kept = _staircases(np.asarray(drop, dtype=float), problem.cost,
                             np.diff(problem.offsets))
    kept_offsets = np.zeros(problem.n_segments + 1, dtype=np.int64)
    np.cumsum(kept, out=kept_offsets[1:])
    return rows, kept_offsets


# Cells of one padded block of segments: small enough to stay in the cache and to reuse
# freed memory (the whole table padded at once spent more time in fresh pages than in
# sorting: 100,000 runs 1.3-1.7 s, by blocks 0.6 s).
_BLOCK_CELLS = 1 << 18


def _staircases(x: np.ndarray, cost: np.ndarray, counts: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray]:
    """Each segment's staircase in (x, cost): the rows no earlier row matches or beats.

    Segment ``s`` owns the next ``counts[s]`` entries of ``x`` and ``cost``. Rows are
    taken by x, then cost, then position; a row is kept when it costs less than every
    row before it (an infinite cost never is). Returns the kept entries' positions,
    segment by segment in that order, and how many each segment keeps.
    """
    n = counts.size
    starts = np.cumsum(counts) - counts
    kept = np.zeros(n, dtype=np.int64)
    out = []
    # padded by blocks of segments, so sorting and the running minimum run over a
    # block at once; padding (inf cost) is never kept
    step = max(1, _BLOCK_CELLS // max(1, int(counts.max(initial=0))))
    for a in range(0, n, step):
        b = min(n, a + step)
        c = counts[a:b]
        width = int(c.max())
        if width == 0:
            continue
        lo, hi = int(starts[a]), int(starts[b - 1] + c[-1])
        local = np.repeat(np.arange(b - a), c)
        pos = np.arange(hi - lo) - (starts[a:b] - lo)[local]
        pad_x = np.full((b - a, width), np.inf)
        pad_c = np.full((b - a, width), np.inf)
        pad_x[local, pos] = x[lo:hi]
        pad_c[local, pos] = cost[lo:hi]
        order, keep = _padded_staircase(pad_x, pad_c)
        kept[a:b] = keep.sum(axis=1)
        out.append((starts[a:b, None] + order)[keep])
    return (np.concatenate(out) if out else np.zeros(0, dtype=np.int64)), kept


def _padded_staircase(pad_x: np.ndarray, pad_c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The staircase of every row of a padded table (padding: inf cost, never kept).

    Returns ``order`` (per row, by x, then cost, then position) and ``keep`` (in that
    order: the points no earlier one matches or beats in cost).
    """
    order = np.lexsort((pad_c, pad_x), axis=1)
    cost_sorted = np.take_along_axis(pad_c, order, axis=1)
    best_before = np.empty_like(cost_sorted)
    best_before[:, 0] = np.inf
    np.minimum.accumulate(cost_sorted[:, :-1], axis=1, out=best_before[:, 1:])
    return order, cost_sorted < best_before


def _path_extent(problem: Problem) -> tuple[float, int]:
    """Largest Σ |drop| + |fixed| along any path (worst rows), and the deepest path."""
    own = (np.maximum.reduceat(np.abs(problem.drop_pct), problem.offsets[:-1])
           + np.abs(problem.fixed_drop_pct)).tolist()
    depth = [0] * len(own)
    for s, p in enumerate(problem.parent.tolist()):
        if p >= 0:
            own[s] += own[p]
            depth[s] = depth[p] + 1
    return max(own), max(depth) + 1


def exact_grid_pct(problem: Problem) -> float:
    """Step of the finest binary grid on which every path sum of drops is exact in float64.

    Drops, fixed drops and limits rounded to multiples of this step (2⁻⁴⁰ % ≈ 1e-12 %
    or finer for realistic problems) add and subtract without rounding error, so the
    program compares requirements and budgets exactly whatever the order of the sums.
    """
    return _grid(problem)[0]


def _grid(problem: Problem) -> tuple[float, int]:
    """(grid step in %, deepest path in segments)."""
    extent, depth = _path_extent(problem)
    finite = problem.limit_pct[np.isfinite(problem.limit_pct)]
    bound = extent + (float(np.max(np.abs(finite))) if finite.size else 0.0) + 2.0
    # Every magnitude met stays below 2**51 steps, so sums of two are exact.
    return float(2.0 ** -(51 - int(np.ceil(np.log2(bound))))), depth


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


def _bound_message(where: str, max_front: int) -> str:
    return (f"tree engine: the Pareto front at {where} exceeds the bound of {max_front} "
            "points; use the MILP engine")


def _last_of_runs(values: np.ndarray) -> np.ndarray:
    """Mask of the last element of every run of equal values."""
    last = np.empty(values.size, dtype=bool)
    if values.size:
        np.not_equal(values[:-1], values[1:], out=last[:-1])
        last[-1] = True
    return last


def _merge_children(kids: list[int], lo: float, f_req: list[np.ndarray],
                    f_cost: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Staircase sum of the children's fronts, floored at the segment's own ``-limit``.

    Returns breakpoints ``r`` ascending and the least total cost with every child's
    requirement ≤ r.
    """
    if len(kids) == 1:
        r, c = f_req[kids[0]], f_cost[kids[0]]
        if r[0] >= lo:
            return r, c
        i = int(np.searchsorted(r, lo, side="right")) - 1
        return np.concatenate(([lo], r[i + 1:])), c[i:]
    start = lo
    for k in kids:
        first = float(f_req[k][0])
        if first > start:
            start = first
    reqs = np.concatenate([f_req[k] for k in kids])
    costs = np.concatenate([f_cost[k] for k in kids])
    # Each child's least cost steps down at its breakpoints; the running sum of all
    # steps in breakpoint order is Σ_children least cost at r once every child has
    # started (r ≥ start).
    steps = np.empty_like(costs)
    steps[0] = costs[0]
    np.subtract(costs[1:], costs[:-1], out=steps[1:])
    firsts = np.cumsum([f_req[k].size for k in kids[:-1]])
    steps[firsts] = costs[firsts]
    order = np.argsort(reqs, kind="stable")
    rs = reqs[order]
    cs = np.cumsum(steps[order])
    i0 = int(np.searchsorted(rs, start, side="right")) - 1
    tail_r = rs[i0 + 1:]
    if not tail_r.size:
        return np.array([start]), cs[i0:i0 + 1]
    last = _last_of_runs(tail_r)
    return (np.concatenate(([start], tail_r[last])),
            np.concatenate((cs[i0:i0 + 1], cs[i0 + 1:][last])))


def _pareto(req: np.ndarray, cost: np.ndarray) -> np.ndarray:
    """Indices of the non-dominated points, by requirement ascending (cost descending).

    Of exact ties the lowest index survives.
    """
    order = np.argsort(req, kind="stable")  # inputs are a few sorted runs: cheap
    c = cost[order]
    keep = np.empty(c.size, dtype=bool)
    if not c.size:
        return order
    keep[0] = True
    np.less(c[1:], np.minimum.accumulate(c)[:-1], out=keep[1:])
    order = order[keep]
    return order[_last_of_runs(req[order])]  # equal requirement: the last is cheapest


def _thin_1d(req: np.ndarray, target: int) -> tuple[np.ndarray, float]:
    """Points of a staircase kept by ε-dominance, and ε (in the requirement's unit).

    ``req`` ascending with cost descending. The range is cut into ``target`` bands of
    width ε; each band keeps its last (cheapest) point, and the first point (least
    requirement) is always kept. Every dropped point q has a kept p with cost_p ≤ cost_q
    and req_p < req_q + ε: the fronts lose only choices a tolerance ε would give back.
    """
    lo, hi = float(req[0]), float(req[-1])
    eps = (hi - lo) / target
    if not eps > 0 or not np.isfinite(eps):
        return np.arange(req.size), 0.0
    band = np.floor((req - lo) / eps).astype(np.int64)
    keep = _last_of_runs(band)
    keep[0] = True
    return np.flatnonzero(keep), eps


def _thin_multi(cost: np.ndarray, req: np.ndarray, target: int
                ) -> tuple[np.ndarray, np.ndarray]:
    """Points kept by ε-dominance in several requirements, and ε per requirement.

    Each requirement's finite range is cut into bands (fewer while more than ``target``
    points remain); every cell of bands keeps its cheapest point, and the kept points are
    pruned by exact dominance. A dropped point has a kept one no costlier and needing at
    most ε more of each resource. −inf (unconstrained) is a band of its own.
    """
    k = req.shape[1]
    finite = np.isfinite(req)
    lo = np.array([req[finite[:, j], j].min() if finite[:, j].any() else 0.0
                   for j in range(k)])
    hi = np.array([req[finite[:, j], j].max() if finite[:, j].any() else 0.0
                   for j in range(k)])
    bands = max(2, round(target ** (1.0 / max(1, int(np.sum(hi > lo))))) * 2)
    while True:
        eps = np.where(hi > lo, (hi - lo) / bands, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            cell = np.where(finite & (eps > 0), np.floor((req - lo) / np.where(
                eps > 0, eps, 1.0)), -1.0).astype(np.int64)
        order = np.lexsort((cost, *cell.T[::-1]))
        c = cell[order]
        first = np.ones(order.size, dtype=bool)
        first[1:] = np.any(c[1:] != c[:-1], axis=1)
        pick = order[first]
        pick = pick[_prune_multi(cost[pick], req[pick])]
        if pick.size <= target or bands <= 2:
            return np.sort(pick), eps
        bands //= 2


def _query_sets(children: list[list[int]], parent: np.ndarray, own_d: np.ndarray,
                kept_off: list[int], rmin: list[float], rmax: list[float],
                tol_pct: float, max_queries: int) -> list[np.ndarray | None]:
    """Every budget (requirement allowed at a segment's top) the tree above can offer.

    Budget = tol − Σ ancestors' (drop + fixed), over all choices of the ancestors. Kept
    for segments near the root, where the set has at most ``max_queries`` values; None
    elsewhere. Budgets above ``rmax`` act as ``rmax``; budgets below ``rmin`` cannot be
    met and are left out.
    """
    n = parent.size
    queries: list[np.ndarray | None] = [None] * n
    for s in np.flatnonzero(parent < 0).tolist():
        queries[s] = np.array([tol_pct])
    for s in range(n):
        q = queries[s]
        kids = [k for k in children[s] if rmax[k] != -np.inf]
        if q is None or not kids:
            continue
        d = own_d[kept_off[s]:kept_off[s + 1]]
        raw = (q[:, None] - d[None, :]).ravel()
        lo = min(rmin[k] for k in kids)
        hi = max(rmax[k] for k in kids)
        raw = raw[raw >= lo]
        if raw.size > 16 * max_queries:  # would not stay small below: not worth sorting
            continue
        base = np.unique(np.minimum(raw, hi))
        for k in kids:
            a = int(np.searchsorted(base, rmin[k], side="left"))
            b = int(np.searchsorted(base, rmax[k], side="right"))
            qk = base[a:b]
            if b < base.size and (not qk.size or qk[-1] < rmax[k]):
                qk = np.append(qk, rmax[k])
            if qk.size <= max_queries:
                queries[k] = qk
    return queries


def _subtree_requirements(own: list[float], floor: list[float], parent: list[int],
                          ) -> tuple[list[float], list[float]]:
    """Bottom-up: each subtree's requirement with ``own`` drop per segment.

    Returns (requirement of the subtree topped by s, greatest requirement below s), the
    latter starting from ``floor`` (a segment's own limit term).
    """
    below = list(floor)
    req = [0.0] * len(own)
    for s in range(len(own) - 1, -1, -1):
        req[s] = own[s] + below[s]
        p = parent[s]
        if p >= 0 and req[s] > below[p]:
            below[p] = req[s]
    return req, below


def solve_tree(problem: Problem, *, max_front: int = DEFAULT_MAX_FRONT,
               tol_pct: float = 1e-9, max_queries: int = DEFAULT_MAX_QUERIES,
               thin_at: int = THIN_AT, thin_to: int = THIN_TO,
               deep_at: int | None = None, reuse: KeptFronts | None = None) -> Solution:
    """Solve a pure tree problem exactly by the bottom-up Pareto-front program.

    ``max_front`` bounds the points of any one front; past it the solve stops with
    status ERROR and a message saying so (use the MILP instead). ``tol_pct`` is the
    feasibility tolerance on path drops, in percent. ``max_queries`` bounds the budget
    sets kept near the root (a speed setting; the result does not depend on it).
    A front longer than ``thin_at`` points is thinned to about ``thin_to`` by ε-dominance
    (``_thin_1d``); the solution is then ``bounded``, and its message states the
    tolerance: the design meets every limit and costs no more than any design meeting
    the limits tightened by that tolerance.

    Further path limits (the earth-fault loop, a second drop): when no drop limit can
    bind and one such resource can, it takes the drop's place here (exact). Down a tree
    at least ``deep_at`` runs deep (default ``DEEP_AT`` for one resource,
    ``DEEP_AT_MULTI`` for several that bind) the limits are relaxed instead
    (``sizer.engines.relax``): the design meets every limit and the solution states its
    proven gap to the least cost.

    ``reuse``: fronts kept from the last solve of this problem with other limits (see
    ``solve_tree_multi``), updated by this one.
    """
    t0 = time.perf_counter()
    if problem.has_side_constraints:
        raise InternalError(
            "the tree engine takes no side constraints (budget caps, groups); use "
            "engine='milp'", field="engine")
    if problem.extra_paths():
        relaxed = _without_slack_paths(problem)
        single = _one_resource(relaxed)
        deep = (deep_at if deep_at is not None
                else DEEP_AT if single is not None else DEEP_AT_MULTI)
        if relaxed.extra_paths() and tree_depth(problem.parent) >= deep:
            # fronts down hundreds or thousands of runs: relax the limits, state the gap
            return solve_relaxed(relaxed, usable_rows(relaxed))
        if single is not None:
            relaxed = single
        elif relaxed.extra_paths():
            return solve_tree_multi(relaxed,
                                    max_front=min(max_front, DEFAULT_MAX_FRONT_MULTI),
                                    tol_pct=tol_pct, thin_at=min(thin_at, THIN_AT_MULTI),
                                    thin_to=min(thin_to, THIN_TO_MULTI), reuse=reuse)
        problem = relaxed  # every further limit holds whatever is chosen: drop alone
    if tree_depth(problem.parent) >= (DEEP_AT if deep_at is None else deep_at):
        # the drop alone down thousands of runs: its fronts too grow with the depth
        return solve_relaxed(problem, usable_rows(problem))
    n = problem.n_segments
    parent = problem.parent
    parent_list = parent.tolist()
    children = _children(parent)
    # Every drop on one binary grid: the sums below are then exact in any order. Rounding
    # moves a path sum by at most a step per segment, which the tolerance absorbs, so a
    # limit met exactly is met here too.
    step, depth = _grid(problem)
    drop = _on_grid(problem.drop_pct, step)
    tol_pct = float(np.ceil(tol_pct / step + depth + 1) * step)
    floor_arr = -_on_grid(problem.limit_pct, step)  # a segment's own limit as requirement
    floor = floor_arr.tolist()
    rows, kept = undominated_rows(problem, drop)
    n_undominated = rows.size
    own_d_all = drop[rows] + np.repeat(_on_grid(problem.fixed_drop_pct, step), np.diff(kept))

    # Least requirement of every subtree (least-drop rows throughout), bottom-up, and the
    # least drop above every segment, top-down.
    least = own_d_all[kept[:-1]].tolist()
    rmin, below_min = _subtree_requirements(least, floor, parent_list)
    above_min = [0.0] * n
    for s, p in enumerate(parent_list):
        if p >= 0:
            above_min[s] = above_min[p] + least[p]
    # A row that breaks a limit even with least drops everywhere else is never usable.
    slack = tol_pct - np.asarray(below_min) - np.asarray(above_min)
    usable = own_d_all <= np.repeat(slack, np.diff(kept))
    if not np.all(usable):
        counts = np.bincount(np.repeat(np.arange(n), np.diff(kept))[usable], minlength=n)
        if np.any(counts == 0):
            s = int(np.flatnonzero(counts == 0)[0])
            return _failure(
                problem, SolveStatus.INFEASIBLE,
                f"tree engine: segment {s} has no candidate that keeps the path-drop "
                f"limits even with the least drop everywhere else (excess "
                f"{least[s] - slack[s] + tol_pct:.6g} %)", t0)
        rows, own_d_all = rows[usable], own_d_all[usable]
        kept = np.concatenate(([0], np.cumsum(counts)))
    own_c_all = problem.cost[rows]
    off = kept.tolist()

    # Greatest requirement of every subtree (cheapest rows throughout), bottom-up, and
    # the greatest drop above every segment, top-down: every budget offered to a segment
    # is at least tol − that drop, so the cheapest point within it is all that matters.
    most = own_d_all[kept[1:] - 1].tolist()
    rmax, _ = _subtree_requirements(most, floor, parent_list)
    low_budget = [tol_pct] * n
    for s, p in enumerate(parent_list):
        if p >= 0:
            low_budget[s] = low_budget[p] - most[p]
    high_budget = [tol_pct - a for a in above_min]
    queries = _query_sets(children, parent, own_d_all, off, rmin, rmax, tol_pct,
                          max_queries)

    f_req: list[np.ndarray] = [np.empty(0)] * n
    f_cost: list[np.ndarray] = [np.empty(0)] * n
    f_row: list[np.ndarray] = [np.empty(0, dtype=np.int64)] * n
    f_below: list[np.ndarray | float] = [0.0] * n  # one value when the same for all points
    lost = [0.0] * n       # ε-dominance tolerance used at or below each segment (%)
    thinned = 0
    largest = _leaf_fronts(children, floor_arr, own_d_all, own_c_all, rows, kept,
                           np.asarray(low_budget), np.asarray(high_budget),
                           f_req, f_cost, f_row, f_below)
    if largest > max_front:
        return _failure(problem, SolveStatus.ERROR, _bound_message("a leaf", max_front), t0)
    for s in range(n - 1, -1, -1):
        kids = children[s]
        q = queries[s]
        if not kids:
            req, cost, row, rb = f_req[s], f_cost[s], f_row[s], f_below[s]
        else:
            below_r, below_c = _merge_children(kids, floor[s], f_req, f_cost)
            a, b = off[s], off[s + 1]
            own_c, own_d, own_rows = own_c_all[a:b], own_d_all[a:b], rows[a:b]
            if below_r.size == 1:
                r0 = float(below_r[0])
                rb = r0
                if r0 == -np.inf:  # nothing constrained below: only the cheapest row counts
                    req, cost, row = below_r, own_c[-1:] + below_c[0], own_rows[-1:]
                else:  # drop ascending, cost descending: already a front
                    req = own_d + r0
                    m = int(np.searchsorted(req, high_budget[s], side="right"))
                    req, cost, row = req[:m], own_c[:m] + below_c[0], own_rows[:m]
            elif q is not None and q.size < below_r.size:
                # Answer each budget the ancestors can offer: best row and merged point.
                idx = np.searchsorted(below_r, q[:, None] - own_d[None, :], side="right") - 1
                total = np.where(idx >= 0, own_c[None, :] + below_c[np.maximum(idx, 0)],
                                 np.inf)
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
                # Of the points within the least budget ever offered only the last
                # (cheapest) can be chosen.
                i = int(np.searchsorted(req, low_budget[s], side="right")) - 1
                if i > 0:
                    req, cost, row = req[i:], cost[i:], row[i:]
                    if not isinstance(rb, float):
                        rb = rb[i:]
        if q is not None and q.size < req.size:
            # Keep only the points that answer a budget the ancestors can offer.
            used = np.searchsorted(req, q, side="right") - 1
            sel = np.unique(used[used >= 0])
            req, cost, row = req[sel], cost[sel], row[sel]
            if not isinstance(rb, float):
                rb = rb[sel]
        if kids:
            lost[s] = max(lost[k] for k in kids)
        if req.size > thin_at:
            sel, eps = _thin_1d(req, thin_to)
            req, cost, row = req[sel], cost[sel], row[sel]
            if not isinstance(rb, float):
                rb = rb[sel]
            lost[s] += eps
            thinned += 1
        if req.size == 0:
            return _failure(
                problem, SolveStatus.INFEASIBLE,
                f"tree engine: no choice at or below segment {s} meets its path-drop limits",
                t0)
        if req.size > largest:
            largest = req.size
            if largest > max_front:
                return _failure(problem, SolveStatus.ERROR,
                                _bound_message(f"segment {s}", max_front), t0)
        f_req[s], f_cost[s], f_row[s], f_below[s] = req, cost, row, rb

    # Each root takes its cheapest feasible point; rebuild the design top-down.
    point = [0] * n
    choice = np.empty(n, dtype=np.int64)
    for s, p in enumerate(parent_list):
        if p < 0:
            i = int(np.searchsorted(f_req[s], tol_pct, side="right")) - 1
            if i < 0:  # pragma: no cover - fronts keep only points within the budget
                return _failure(
                    problem, SolveStatus.INFEASIBLE,
                    f"tree engine: the subtree fed by segment {s} cannot meet its limits", t0)
            point[s] = i
        i = point[s]
        choice[s] = f_row[s][i]
        fb = f_below[s]
        rb = fb if isinstance(fb, float) else float(fb[i])
        for k in children[s]:
            point[k] = int(np.searchsorted(f_req[k], rb, side="right")) - 1

    message = (f"tree engine: {n} segments, {problem.n_candidates} candidates "
               f"({n_undominated} undominated, {rows.size} usable), largest front "
               f"{largest} points")
    bound = max((lost[s] for s in range(n) if parent_list[s] < 0), default=0.0)
    return _checked(problem, choice, tol_pct + (depth + 1) * step, t0,
                    message + _bound_note(thinned, [("drop", bound, "%")]), bounded=thinned > 0)


def _bound_note(thinned: int, tolerances: list[tuple[str, float, str]]) -> str:
    """The sentence a bounded solve adds to its message ("" when nothing was thinned)."""
    if not thinned:
        return ""
    tol = ", ".join(f"{name} {value:.3g} {unit}" for name, value, unit in tolerances)
    return (f"; fronts bounded by ε-dominance at {thinned} segments: the design meets every "
            f"limit and costs no more than the least-cost design with every limit tightened "
            f"by {tol} (optimality within that tolerance, not proven)")


def _checked(problem: Problem, choice: np.ndarray, tol_pct: float, t0: float,
             message: str, *, bounded: bool = False) -> Solution:
    """The optimum found, once the problem's own check confirms it meets every limit.

    ``bounded``: fronts were thinned, so the design is the best of the bounded search
    (status BOUNDED, not proven optimal).
    """
    broken = problem.violations(choice, tol_pct=tol_pct)
    if broken:  # pragma: no cover - a guard against a bug, never expected
        return _failure(problem, SolveStatus.ERROR,
                        "tree engine: internal check failed: " + "; ".join(broken[:3]), t0)
    return Solution(
        status=SolveStatus.BOUNDED if bounded else SolveStatus.OPTIMAL, choice=choice,
        objective=float(np.sum(problem.cost[choice])), proven_optimal=not bounded,
        gap=None if bounded else 0.0,
        engine=_ENGINE, message=message, seconds=time.perf_counter() - t0,
    )


def _leaf_fronts(children: list[list[int]], floor: np.ndarray, own_d: np.ndarray,
                 own_c: np.ndarray, rows: np.ndarray, kept: np.ndarray,
                 low_budget: np.ndarray, high_budget: np.ndarray,
                 f_req: list[np.ndarray], f_cost: list[np.ndarray],
                 f_row: list[np.ndarray], f_below: list[np.ndarray | float]) -> int:
    """Fronts of all leaves at once (most segments are leaves); returns the largest size."""
    n = floor.size
    leaf = np.array([not k for k in children])
    counts = np.diff(kept)
    seg = np.repeat(np.arange(n), counts)
    free = leaf & (floor == -np.inf)  # unconstrained leaf: its cheapest row, no requirement
    for s in np.flatnonzero(free).tolist():
        b = int(kept[s + 1]) - 1
        f_req[s] = np.array([-np.inf])
        f_cost[s] = own_c[b:b + 1]
        f_row[s] = rows[b:b + 1]
        f_below[s] = -np.inf
    req = own_d + floor[seg]
    # Within each leaf the rows run drop ascending; keep those within the budget above,
    # and of those within the least budget ever offered only the last.
    ok = (leaf & ~free)[seg] & (req <= high_budget[seg])
    low = req <= low_budget[seg]
    nxt_low = np.zeros_like(ok)
    same = seg[1:] == seg[:-1]
    nxt_low[:-1] = same & low[1:] & ok[1:]
    ok &= ~(low & nxt_low)
    idx = np.flatnonzero(ok)
    sizes = np.bincount(seg[idx], minlength=n)
    bounds = np.concatenate(([0], np.cumsum(sizes))).tolist()
    req_k, cost_k, row_k = req[idx], own_c[idx], rows[idx]
    floor_list = floor.tolist()
    for s in np.flatnonzero(leaf & ~free).tolist():
        a, b = bounds[s], bounds[s + 1]
        f_req[s] = req_k[a:b]
        f_cost[s] = cost_k[a:b]
        f_row[s] = row_k[a:b]
        f_below[s] = floor_list[s]
    return int(sizes.max()) if sizes.size else 0


# --- several path resources -----------------------------------------------------------


def _without_slack_paths(problem: Problem) -> Problem:
    """The problem with every further path limit that no choice can break set to +inf.

    A limit at segment s holds for every choice when the path to s, with the largest
    value of every segment on it, stays within it; dropping it is exact. A resource left
    with no finite limit drops out of ``extra_paths()``.
    """
    changes: dict[str, np.ndarray | None] = {}
    for own, lim, names in ((problem.drop2_pct, problem.limit2_pct,
                             ("drop2_pct", "limit2_pct")),
                            (problem.loop_pu, problem.loop_limit_pu,
                             ("loop_pu", "loop_limit_pu"))):
        if own is None or lim is None:
            continue
        worst = path_totals(problem.parent, np.maximum.reduceat(own, problem.offsets[:-1]))
        binding = np.isfinite(lim) & (worst > lim)
        if not binding.any():
            changes[names[0]] = changes[names[1]] = None
        elif not np.array_equal(binding, np.isfinite(lim)):
            changes[names[1]] = np.where(binding, lim, np.inf)
    return dataclasses.replace(problem, **changes) if changes else problem  # type: ignore[arg-type]


def _one_resource(problem: Problem) -> Problem | None:
    """The problem as a drop-only one when only one further path resource can bind.

    When no choice can break a drop limit (the worst rows on every path stay within it)
    and one further resource remains, that resource alone decides: it takes the drop's
    place (exact), and the one-resource program, much faster, solves it. None otherwise.
    """
    extra = problem.extra_paths()
    if len(extra) != 1:
        return None
    worst = path_totals(problem.parent, np.maximum.reduceat(problem.drop_pct,
                                                            problem.offsets[:-1])
                        + problem.fixed_drop_pct)
    if np.any(worst > problem.limit_pct):
        return None
    own, lim = extra[0]
    return Problem(problem.parent, problem.offsets, problem.cost, own,
                   np.zeros(problem.n_segments), lim)


def _undominated_multi(cost: np.ndarray, req: np.ndarray, offsets: np.ndarray,
                       chunk_cells: int = 4_000_000) -> np.ndarray:
    """Mask of the rows no other row of the same segment beats in cost and every value.

    All segments at once, padded to the widest: a row is dropped when another row needs
    no more of anything and costs no more (of exact ties the first stays). Chunked so
    the pairwise comparison stays within ``chunk_cells`` × resources booleans.
    """
    n = offsets.size - 1
    counts = np.diff(offsets)
    width = int(counts.max())
    k = req.shape[1]
    seg = np.repeat(np.arange(n), counts)
    pos = np.arange(cost.size) - offsets[seg]
    keep = np.zeros(cost.size, dtype=bool)
    step = max(1, chunk_cells // max(1, width * width))
    for a in range(0, n, step):
        b = min(n, a + step)
        rows = slice(int(offsets[a]), int(offsets[b]))
        m = b - a
        pc = np.full((m, width), np.inf)
        pr = np.full((m, width, k), np.inf)
        pc[seg[rows] - a, pos[rows]] = cost[rows]
        pr[seg[rows] - a, pos[rows]] = req[rows]
        # beats[s, i, j]: row j of segment s is no worse than row i everywhere
        beats = pc[:, None, :] <= pc[:, :, None]
        for r in range(k):
            beats &= pr[:, None, :, r] <= pr[:, :, None, r]
        same = (pc[:, None, :] == pc[:, :, None])
        for r in range(k):
            same &= pr[:, None, :, r] == pr[:, :, None, r]
        # an exact twin beats only a later row; no row beats itself
        j_after_i = np.triu(np.ones((width, width), dtype=bool))
        beats &= ~(same & j_after_i[None, :, :])
        dominated: np.ndarray = np.any(beats, axis=2)
        keep[rows] = ~dominated[seg[rows] - a, pos[rows]]
    return keep


def _prune_multi(cost: np.ndarray, req: np.ndarray) -> np.ndarray:
    """Indices of the points no other point beats in cost and every requirement.

    Sorted by cost (then requirements), a point is dropped when an earlier one needs no
    more of every resource; of exact duplicates the first survives.
    """
    if cost.size > 1 and np.all(req[:, 1:] == req[0, 1:]):
        # one requirement varies (the others are equal): the 1-D staircase
        order = np.lexsort((cost, req[:, 0]))
        c = cost[order]
        first = np.empty(c.size, dtype=bool)
        first[0] = True
        np.less(c[1:], np.minimum.accumulate(c)[:-1], out=first[1:])
        return order[first]
    order = np.lexsort((*req.T[::-1], cost))
    r = req[order]
    keep = np.ones(order.size, dtype=bool)
    block = 256
    # Dominance is transitive, so comparing with the earlier kept points is enough.
    for start in range(0, order.size, block):
        stop = min(start + block, order.size)
        blk = r[start:stop]
        prev = r[:start][keep[:start]]
        dom = (np.any(_no_more(prev, blk), axis=1) if prev.size
               else np.zeros(stop - start, dtype=bool))
        # Within the block only the points no kept one beats can matter: one an earlier
        # beaten point beats is beaten by that kept point too.
        alive = np.flatnonzero(~dom)
        if alive.size > 1:
            b = blk[alive]
            dom[alive[np.tril(_no_more(b, b), -1).any(axis=1)]] = True
        keep[start:stop] = ~dom
    return order[keep]


def _no_more(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``[i, j]``: point ``a[j]`` needs no more than ``b[i]`` of every requirement.

    One 2-D comparison per requirement (a few), not a 3-D one reduced along them.
    """
    out = a[None, :, 0] <= b[:, None, 0]
    for r in range(1, a.shape[1]):
        out &= a[None, :, r] <= b[:, None, r]
    return out


def _reduce_multi(cost: np.ndarray, req: np.ndarray, thin_at: int, thin_to: int
                  ) -> tuple[np.ndarray, np.ndarray | None]:
    """The points of a front worth keeping, and ε per resource if it had to be thinned.

    Exact dominance pruning (it compares each point with every kept one); a set of more
    than a hundred fronts' worth of points, which only a deep tree's merges give, or a
    pruned front still over ``thin_at`` points, is thinned by ε-dominance instead
    (``_thin_multi``).
    """
    if cost.size > 100 * thin_at:
        return _thin_multi(cost, req, thin_to)
    keep = _prune_multi(cost, req)
    if keep.size > thin_at:
        sub, eps = _thin_multi(cost[keep], req[keep], thin_to)
        return keep[sub], eps
    return keep, None


def _simple_leaf_fronts(leaves: np.ndarray, seg_rows: list[np.ndarray], cost: np.ndarray,
                        own: np.ndarray, fix: np.ndarray, floor: np.ndarray,
                        cap: np.ndarray, low: np.ndarray, f_cost: list[np.ndarray],
                        f_req: list[np.ndarray], f_row: list[np.ndarray],
                        f_kid: list[np.ndarray]) -> None:
    """Fronts of leaves where only the drop varies, in one vectorised pass.

    The same points :func:`solve_tree_multi` keeps one leaf at a time: rows within the
    cap, requirements clamped at ``low``, then the staircase in (drop requirement, cost),
    cheapest first, of exact ties the lowest row; written into the ``f_`` lists.
    """
    if not leaves.size:
        return
    counts = np.array([seg_rows[s].size for s in leaves.tolist()], dtype=np.int64)
    rows = np.concatenate([seg_rows[s] for s in leaves.tolist()])
    which = np.repeat(np.arange(leaves.size), counts)
    seg = leaves[which]
    with np.errstate(invalid="ignore"):  # −inf + 0 stays −inf
        req = own[rows] + fix[seg] + floor[seg]
    ok = np.all(req <= cap[seg], axis=1)
    req = np.maximum(req, low[seg])
    # rows over the cap take no part (infinite drop and cost are never kept)
    at, kept = _staircases(np.where(ok, req[:, 0], np.inf),
                           np.where(ok, cost[rows], np.inf), counts)
    ends, sizes = np.cumsum(kept).tolist(), kept.tolist()
    for i, s in enumerate(leaves.tolist()):
        idx = at[ends[i] - sizes[i]:ends[i]][::-1]     # cheapest first
        f_cost[s] = cost[rows[idx]]
        f_req[s] = req[idx]
        f_row[s] = rows[idx]
        f_kid[s] = np.zeros((idx.size, 0), dtype=np.int64)


def _merge_staircases(kids: list[int], floor: np.ndarray, f_cost: list[np.ndarray],
                      f_req: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Merge fronts that vary in the first requirement only, as staircases.

    The points a one-by-one merge and exact pruning would keep: at every breakpoint r of
    the first requirement, each child's cheapest point needing at most r; the other
    requirements are the largest of the children's constants and the floor. Returns
    (cost, requirements, back pointer per child), cheapest first.
    """
    asc_r = [f_req[c][::-1, 0] for c in kids]      # fronts are stored cheapest first
    asc_c = [f_cost[c][::-1] for c in kids]
    local = list(range(len(kids)))
    r, c = _merge_children(local, float(floor[0]), asc_r, asc_c)
    consts = np.max(np.vstack([floor[None, 1:]] + [f_req[k][:1, 1:] for k in kids]), axis=0)
    kid = np.column_stack([
        f_req[k].shape[0] - np.searchsorted(asc_r[i], r, side="right")
        for i, k in enumerate(kids)]).astype(np.int64)
    req = np.column_stack([r, np.broadcast_to(consts, (r.size, consts.size))])
    return c[::-1].copy(), req[::-1].copy(), kid[::-1].copy()


class _MultiSetup:
    """What a solve in several resources works out before its fronts.

    It depends on the problem and on which limits are finite, not on the limits' values,
    so the closed loop's re-solves (``KeptFronts``) take it as it was.
    """

    def __init__(self, problem: Problem, values: list[np.ndarray], limits: list[np.ndarray],
                 tol_pct: float) -> None:
        n = problem.n_segments
        k = len(values)
        self.parent = parent = problem.parent.tolist()
        self.children = _children(problem.parent)
        fixed = [problem.fixed_drop_pct] + [np.zeros(n)] * (k - 1)
        seg_of = problem.segment_of_row
        # A resource matters to a segment only when its subtree holds a finite limit of
        # it; elsewhere its values never enter a constrained sum and are set to 0 (exact).
        columns = []
        for lim in limits:  # children come after their parents: one backward pass each
            col = np.isfinite(lim).tolist()
            for s in range(n - 1, -1, -1):
                if col[s] and parent[s] >= 0:
                    col[parent[s]] = True
            columns.append(col)
        relevant = np.array(columns, dtype=bool).T.reshape(n, len(limits))
        self.own = own = np.column_stack(values) * relevant[seg_of]  # [rows, k]
        multi: np.ndarray = np.any(relevant[:, 1:], axis=1)
        usable = np.zeros(problem.n_candidates, dtype=bool)
        rows_1d, _ = undominated_rows(problem)  # drop alone: the fast running minimum
        usable[rows_1d] = ~multi[seg_of[rows_1d]]
        if multi.any():
            pick = np.flatnonzero(multi[seg_of])
            sub_off = np.concatenate(([0], np.cumsum(np.diff(problem.offsets)[multi])))
            usable[pick] = _undominated_multi(problem.cost[pick], own[pick], sub_off)
        self.seg_rows = np.split(np.flatnonzero(usable),
                                 np.cumsum(np.bincount(seg_of[usable], minlength=n))[:-1])
        self.fix = fix = np.column_stack(fixed)                 # [n, k]
        # least value above each segment, per resource: requirements beyond tol − that fail
        least_own = np.column_stack([np.minimum.reduceat(v, problem.offsets[:-1])
                                     for v in values]) + fix
        most_own = np.column_stack([np.maximum.reduceat(v, problem.offsets[:-1])
                                    for v in values]) + fix
        # Σ over the strict ancestors = the parent's path sum (the same additions in order)
        topo = Topology(problem.parent)
        has = problem.parent >= 0
        above = np.zeros((n, k))
        above_most = np.zeros((n, k))
        for j in range(k):
            above[has, j] = topo.path_sum(least_own[:, j])[problem.parent[has]]
            above_most[has, j] = topo.path_sum(most_own[:, j])[problem.parent[has]]
        self.cap = tol_pct - above
        # A requirement the path above always leaves room for, whatever it chooses, is as
        # good as any lower one: clamping to it lets such points collapse (exact).
        self.low = -above_most  # (not tol − …: keeps the whole tolerance against rounding)
        self.leaf = topo.is_leaf
        self.simple = self.leaf & ~multi
        # each load's largest value of each resource, for ``KeptFronts.changed``
        kept_rows = np.flatnonzero(usable)
        has_rows = np.bincount(seg_of[kept_rows], minlength=n) > 0
        self.max_own = np.full((n, k), -np.inf)
        if kept_rows.size:
            starts = np.searchsorted(kept_rows, problem.offsets[:-1][has_rows])
            self.max_own[has_rows] = np.maximum.reduceat(own[kept_rows], starts)


class KeptFronts:
    """The fronts of one solve of several path resources, for the next with new limits.

    Holds a digest of what the fronts were worked out from and the limits themselves;
    ``changed`` says which segments a new solve must work out again: those whose limit
    moved and every run above them. None when anything but the limits differs.
    """

    def __init__(self) -> None:
        self.inputs: tuple | None = None
        self.floor = np.empty((0, 0))
        self.setup: _MultiSetup | None = None
        self.fronts: tuple[list[np.ndarray], ...] = ([], [], [], [])
        self.lost = np.empty((0, 0))
        self.thinned_at = np.empty(0, dtype=np.int64)

    def changed(self, inputs: tuple, floor: np.ndarray) -> np.ndarray | None:
        """Segments to work out again (a mask), or None when nothing can be kept."""
        if (self.setup is None or self.floor.shape != floor.shape
                or self.inputs != _digest(inputs)):
            return None
        moved = np.any(self.floor != floor, axis=1)
        # A load whose every row needs less than the path above always leaves, under its
        # old limits and its new, has every requirement clamped to that (the front's
        # ``low``): its front is the same, whatever the limits' values.
        st = self.setup
        with np.errstate(invalid="ignore"):   # −inf limits: nothing required
            quiet = (st.leaf & np.all(st.max_own + st.fix + self.floor <= st.low, axis=1)
                     & np.all(st.max_own + st.fix + floor <= st.low, axis=1))
        moved = (moved & ~quiet).tolist()
        up = st.parent
        for s in range(len(moved) - 1, -1, -1):   # a moved limit moves every front above
            if moved[s] and up[s] >= 0:
                moved[up[s]] = True
        return np.asarray(moved, dtype=bool)

    def keep(self, inputs: tuple, floor: np.ndarray, setup: _MultiSetup,
             fronts: tuple[list[np.ndarray], ...], lost: np.ndarray,
             thinned_at: np.ndarray) -> None:
        """Remember a finished solve."""
        self.inputs, self.floor, self.setup = _digest(inputs), floor.copy(), setup
        self.fronts, self.lost, self.thinned_at = fronts, lost, thinned_at


def _digest(inputs: tuple) -> tuple:
    """What a solve's fronts were worked out from, other than the limits, to compare.

    Arrays of a segment each (and plain values) whole; the candidates' costs and values
    (millions of rows) by their shape, sum and every 997th value: they come from the
    same table in every round of one closed loop, and a digest that differs only means
    working everything out again.
    """
    out: list[object] = []
    for a in inputs:
        if not isinstance(a, np.ndarray):
            out.append(a)
        elif a.size <= 1_000_000:
            out.append((a.shape, a.tobytes()))
        else:
            out.append((a.shape, float(np.sum(a)), a.ravel()[::997].tobytes()))
    return tuple(out)


def solve_tree_multi(problem: Problem, *, max_front: int = DEFAULT_MAX_FRONT_MULTI,
                     tol_pct: float = 1e-9, thin_at: int = THIN_AT_MULTI,
                     thin_to: int = THIN_TO_MULTI, reuse: KeptFronts | None = None
                     ) -> Solution:
    """Exact bottom-up program with several additive path resources.

    The same recursion as :func:`solve_tree`, with a requirement vector per point: for
    each resource (the drop with its fixed term, then each of ``problem.extra_paths()``)
    the largest excess over a limit of the path from the subtree's top down to a
    constrained segment (−inf where none). Children merge by cost sum and elementwise
    maximum; a segment's row adds its own values; points beaten in cost and every
    requirement are pruned. A point whose requirement exceeds what the least-value
    path above can leave is dropped. Past ``max_front`` points at any segment the solve
    stops with status ERROR (``solve(engine="auto")`` then falls back to the MILP).
    Past ``thin_at`` points a front is thinned by ε-dominance (``_thin_multi``) and the
    solution is ``bounded``, with the tolerance per resource in its message.

    ``reuse``: the fronts of the last solve of the same problem with other limits (the
    closed loop with the load flow tightens a few loads' limits and solves again). A
    subtree whose limits are all unchanged has the same front, so only the loads whose
    limits changed and the runs above them are worked out again; the answer is the same
    as a solve from nothing.
    """
    t0 = time.perf_counter()
    n = problem.n_segments
    values = [problem.drop_pct] + [own for own, _ in problem.extra_paths()]
    limits = [problem.limit_pct] + [lim for _, lim in problem.extra_paths()]
    k = len(values)
    floor = -np.column_stack(limits)             # [n, k]: −limit (−inf: unconstrained)
    # all a solve works out before its fronts depends on these, and on which limits are
    # finite, but not on the limits' values
    inputs = (problem.parent, problem.offsets, problem.cost, problem.fixed_drop_pct,
              *values, np.isfinite(floor), (tol_pct, thin_at, thin_to, max_front))
    todo = reuse.changed(inputs, floor) if reuse is not None else None
    if todo is not None and reuse is not None and reuse.setup is not None:
        setup = reuse.setup
        f_cost, f_req, f_row, f_kid = (list(reuse.fronts[0]), list(reuse.fronts[1]),
                                       list(reuse.fronts[2]), list(reuse.fronts[3]))
        lost, thinned_at = reuse.lost.copy(), reuse.thinned_at.copy()
        lost[todo] = 0.0
        thinned_at[todo] = 0
    else:
        setup = _MultiSetup(problem, values, limits, tol_pct)
        todo = np.ones(n, dtype=bool)
        f_cost = [np.empty(0)] * n
        f_req = [np.empty((0, k))] * n
        f_row = [np.empty(0, dtype=np.int64)] * n
        f_kid = [np.empty((0, 0), dtype=np.int64)] * n
        lost = np.zeros((n, k))  # ε-dominance tolerance used at or below each segment
        thinned_at = np.zeros(n, dtype=np.int64)  # fronts thinned at each segment
    parent, children, own, fix = setup.parent, setup.children, setup.own, setup.fix
    seg_rows, simple, cap, low = setup.seg_rows, setup.simple, setup.cap, setup.low
    # Leaves where only the drop matters (most of a large tree) all at once: their
    # fronts are staircases in the drop alone.
    _simple_leaf_fronts(np.flatnonzero(simple & todo), seg_rows, problem.cost, own, fix,
                        floor, cap, low, f_cost, f_req, f_row, f_kid)
    for s in np.flatnonzero(todo)[::-1].tolist():
        kids = children[s]
        if simple[s]:
            if f_cost[s].size == 0:
                return _failure(
                    problem, SolveStatus.INFEASIBLE,
                    f"tree engine: no choice at or below segment {s} meets its path limits",
                    t0)
            continue
        # merge the children: the simple leaves at once as staircases, then the others
        # one by one; one point (cost 0, requirement floor) to start
        flat = [c for c in kids if simple[c]]
        if len(flat) > 1:
            m_cost, m_req, m_kid = _merge_staircases(flat, floor[s], f_cost, f_req)
            for c in flat:
                np.maximum(lost[s], lost[c], out=lost[s])
            rest = [c for c in kids if not simple[c]]
        else:
            m_cost = np.zeros(1)
            m_req = floor[s][None, :].copy()
            m_kid = np.zeros((1, 0), dtype=np.int64)
            flat, rest = [], kids
        for c in rest:
            a, b = m_cost.size, f_cost[c].size
            ia = np.repeat(np.arange(a), b)
            ib = np.tile(np.arange(b), a)
            m_cost = m_cost[ia] + f_cost[c][ib]
            m_req = np.maximum(m_req[ia], f_req[c][ib])
            m_kid = np.column_stack((m_kid[ia], ib))
            np.maximum(lost[s], lost[c], out=lost[s])
            keep, eps = _reduce_multi(m_cost, m_req, thin_at, thin_to)
            m_cost, m_req, m_kid = m_cost[keep], m_req[keep], m_kid[keep]
            if eps is not None:
                lost[s] += eps
                thinned_at[s] += 1
            if m_cost.size > max_front:
                return _failure(problem, SolveStatus.ERROR,
                                _bound_message(f"segment {s}", max_front), t0)
        if flat:  # back pointers in the children's order, as the rebuild reads them
            m_kid = m_kid[:, np.argsort(np.array(flat + rest), kind="stable")]
        rows = seg_rows[s]
        ia = np.repeat(np.arange(rows.size), m_cost.size)
        ib = np.tile(np.arange(m_cost.size), rows.size)
        cost = problem.cost[rows][ia] + m_cost[ib]
        with np.errstate(invalid="ignore"):  # −inf + value stays −inf
            req = own[rows][ia] + fix[s] + m_req[ib]
        ok = np.all(req <= cap[s], axis=1)
        cost, req, row, kid = cost[ok], req[ok], rows[ia[ok]], m_kid[ib[ok]]
        req = np.maximum(req, low[s])
        keep, eps = _reduce_multi(cost, req, thin_at, thin_to)
        cost, req, row, kid = cost[keep], req[keep], row[keep], kid[keep]
        if eps is not None:
            lost[s] += eps
            thinned_at[s] += 1
        if cost.size == 0:
            return _failure(
                problem, SolveStatus.INFEASIBLE,
                f"tree engine: no choice at or below segment {s} meets its path limits", t0)
        if cost.size > max_front:
            return _failure(problem, SolveStatus.ERROR,
                            _bound_message(f"segment {s}", max_front), t0)
        f_cost[s], f_req[s], f_row[s], f_kid[s] = cost, req, row, kid
        if reuse is None:
            for c in kids:  # children's fronts are only needed through the back pointers
                f_req[c] = np.empty((0, k))
    largest = max((f.size for f in f_cost), default=0)
    thinned = int(thinned_at.sum())
    if reuse is not None:
        reuse.keep(inputs, floor, setup, (f_cost, f_req, f_row, f_kid), lost, thinned_at)

    point = [0] * n
    choice = np.empty(n, dtype=np.int64)
    for s, p in enumerate(parent):
        if p < 0:
            feasible = np.flatnonzero(np.all(f_req[s] <= tol_pct, axis=1))
            if not feasible.size:
                return _failure(problem, SolveStatus.INFEASIBLE,
                                f"tree engine: the subtree fed by segment {s} cannot meet "
                                "its path limits", t0)
            point[s] = int(feasible[np.argmin(f_cost[s][feasible])])
        i = point[s]
        choice[s] = f_row[s][i]
        for j, c in enumerate(children[s]):
            point[c] = int(f_kid[s][i, j])

    roots = [s for s in range(n) if parent[s] < 0]
    bound = lost[roots].max(axis=0) if roots else np.zeros(k)
    names = [("drop", "%")] + [(name, unit) for name, unit in problem.extra_path_names()]
    return _checked(problem, choice, tol_pct * 10, t0,
                    f"tree engine: {n} segments, {problem.n_candidates} candidates, "
                    f"{k} path resources, largest front {largest} points"
                    + _bound_note(thinned, [(nm, float(b), u) for (nm, u), b
                                            in zip(names, bound, strict=True)]),
                    bounded=thinned > 0)

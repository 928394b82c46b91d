"""Deep trees: Lagrangian relaxation of the path limits, with a proven gap.

The exact program (``sizer.engines.tree``) keeps a Pareto front per subtree; down a riser
thousands of runs deep whose limits bind at every level, those fronts stay long at every
level and the program takes minutes. This engine solves such trees without fronts.

Every path limit ``Σ_{t on path(v)} (value_t + fixed_t) ≤ limit_v`` (the drop and each
further path resource) gets a multiplier ``μ_v ≥ 0``; a segment's price for a unit of
resource is then the sum of the multipliers in its subtree, ``W_s``, and the relaxed
problem falls apart into one choice per segment (the row least in cost + W_s · value).
Its value

    L(μ) = Σ_s min_r (cost_r + Σ_j W_js · value_jr) + Σ_js W_js · fixed_js − Σ_jv μ_jv · limit_jv

is a lower bound on the least cost of every design that meets the limits (weak duality;
e.g. Fisher, "The Lagrangian relaxation method for solving integer programming
problems", Management Science 1981). The multipliers are raised by projected subgradient
steps (Polyak's step towards the best design found); designs are found by raising the
multipliers of the limits a relaxed choice breaks until it breaks none. The design
returned meets every limit exactly (checked against the problem), and its cost is within
the stated relative gap ``(cost − L) / cost`` of the least possible: a proven bound, not
a tolerance on the limits.

Exact reductions first: a limit no choice can break is dropped, and so is one implied by
a tighter limit further down the same path (values are never negative there, so the
longer path sum is the larger); only the limits left get multipliers.
"""

from __future__ import annotations

import time

import numpy as np

from sizer.engines.problem import Problem, Solution, SolveStatus

__all__ = ["DEEP_AT", "DEEP_AT_MULTI", "solve_relaxed", "tree_depth", "usable_rows"]

DEEP_AT = 1_000
"""From this many runs deep, the tree engine relaxes a further path limit that binds
(one resource: the exact program's fronts grow with depth; 70 s at 2,000 runs)."""
DEEP_AT_MULTI = 200
"""From this many runs deep, the tree engine relaxes two or more resources that bind (its
fronts in several resources take tens of seconds already at a few dozen runs)."""
_ENGINE = "tree"
_ROUNDS = 400          # subgradient steps at most
_REPAIR_ROUNDS = 200   # raises of the broken limits' multipliers when finding a design
_RAISE = 1.1          # each raise multiplies a broken limit's multiplier by this
_WARM = 0.5           # a repair starts from this share of the last one's multipliers
_TARGET_GAP = 1e-4     # stop once the proven gap is this small


def tree_depth(parent: np.ndarray) -> int:
    """Runs on the longest path from the source (parents come first)."""
    depth = [0] * parent.size
    for s, p in enumerate(parent.tolist()):
        depth[s] = depth[p] + 1 if p >= 0 else 1
    return max(depth, default=0)


class _Tree:
    """Subtree and path sums as vectorised prefix sums over a depth-first order."""

    def __init__(self, parent: np.ndarray) -> None:
        n = parent.size
        kids: list[list[int]] = [[] for _ in range(n)]
        for s, p in enumerate(parent.tolist()):
            if p >= 0:
                kids[p].append(s)
        order: list[int] = []
        stack = np.flatnonzero(parent < 0).tolist()[::-1]
        while stack:
            s = stack.pop()
            order.append(s)
            stack.extend(reversed(kids[s]))
        size = np.ones(n, dtype=np.int64)
        for s in range(n - 1, -1, -1):
            p = int(parent[s])
            if p >= 0:
                size[p] += size[s]
        self.order = np.asarray(order, dtype=np.int64)
        self.pos = np.empty(n, dtype=np.int64)
        self.pos[self.order] = np.arange(n)
        self.end = self.pos + size          # subtree of s: positions pos[s] .. end[s] - 1
        self.n = n

    def subtree_sum(self, own: np.ndarray) -> np.ndarray:
        """Σ ``own`` over each segment's subtree (itself included)."""
        c = np.concatenate(([0.0], np.cumsum(own[self.order])))
        return np.maximum(c[self.end] - c[self.pos], 0.0)  # own ≥ 0: clip rounding

    def path_sum(self, own: np.ndarray) -> np.ndarray:
        """Σ ``own`` over each segment's path from the source (itself included)."""
        diff = (np.bincount(self.pos, own, self.n + 1)
                - np.bincount(self.end, own, self.n + 1))
        return np.cumsum(diff)[:-1][self.pos]


def usable_rows(problem: Problem) -> np.ndarray:
    """Mask of the rows no other row of the same segment beats in cost and every value.

    Segments with the same candidates (a riser's runs between two taps) are compared once.
    """
    from sizer.engines.tree import _undominated_multi  # the tree engine imports this module

    own = np.column_stack([problem.drop_pct] + [v for v, _ in problem.extra_paths()])
    off = problem.offsets.tolist()
    counts = np.diff(problem.offsets)
    rep = _alike((problem.cost, own), problem.offsets[:-1], counts)
    uniq = np.unique(rep)
    sub_off = np.concatenate(([0], np.cumsum(counts[uniq])))
    pick = np.concatenate([np.arange(off[s], off[s + 1]) for s in uniq.tolist()])
    keep_u = _undominated_multi(problem.cost[pick], own[pick], sub_off)
    # a segment keeps the same positions as its representative
    where = np.searchsorted(uniq, rep)
    local = np.arange(problem.n_candidates) - np.repeat(problem.offsets[:-1], counts)
    return keep_u[np.repeat(sub_off[:-1][where], counts) + local]


def _kept_limits(problem: Problem, value: np.ndarray, fixed: np.ndarray, limit: np.ndarray,
                 tree: _Tree) -> np.ndarray:
    """Segments whose limit can bind and is not implied by a tighter one below (exact)."""
    offsets = problem.offsets[:-1]
    worst = tree.path_sum(np.maximum.reduceat(value, offsets) + fixed)
    keep = np.isfinite(limit) & (worst > limit)
    if np.all(value >= 0) and np.all(fixed >= 0):
        # least limit strictly below each segment: a path below includes this one's path
        below = np.full(problem.n_segments, np.inf)
        lim = limit.tolist()
        low = below.tolist()
        for s in range(problem.n_segments - 1, -1, -1):
            p = int(problem.parent[s])
            if p >= 0:
                low[p] = min(low[p], low[s], lim[s])
        keep &= ~(np.asarray(lim) >= np.asarray(low))
    return np.flatnonzero(keep)


def solve_relaxed(problem: Problem, usable: np.ndarray | None = None,
                  rounds: int = _ROUNDS) -> Solution:
    """Least cost within a proven gap, every path limit met (see the module docstring).

    ``usable``: a mask of the rows worth considering (others are dominated); all rows
    when None. Status OPTIMAL when the gap closes (below 1e-9), else BOUNDED with the gap
    in ``gap`` and the message; INFEASIBLE when a limit cannot be met even with the
    least value everywhere; ERROR when no design meeting every limit was found.
    """
    t0 = time.perf_counter()
    n = problem.n_segments
    tree = _Tree(problem.parent)
    rows = np.arange(problem.n_candidates) if usable is None else np.flatnonzero(usable)
    seg = problem.segment_of_row[rows]
    counts = np.bincount(seg, minlength=n)
    if np.any(counts == 0):  # pragma: no cover - every segment keeps its undominated rows
        return _stop(problem, SolveStatus.ERROR, "relaxation: a segment has no usable row", t0)
    starts = np.cumsum(counts) - counts
    names = [("drop", "%"), *problem.extra_path_names()]
    resources = [(problem.drop_pct, problem.fixed_drop_pct, problem.limit_pct)]
    resources += [(own, np.zeros(n), lim) for own, lim in problem.extra_paths()]
    values, fixes, cons, lims, scales = [], [], [], [], []
    for j, (value, fixed, limit) in enumerate(resources):
        kept = _kept_limits(problem, value, fixed, limit, tree)
        least = tree.path_sum(np.minimum.reduceat(value, problem.offsets[:-1]) + fixed)
        short = kept[least[kept] > limit[kept] + 1e-9]
        if short.size:
            s = int(short[0])
            return _stop(problem, SolveStatus.INFEASIBLE,
                         f"tree engine: segment {s} cannot meet its {names[j][0]} limit even "
                         f"with the least value on every run above it ({least[s]:.6g} > "
                         f"{limit[s]:.6g} {names[j][1]})", t0)
        if not kept.size:
            continue
        # resources in units of a typical limit, so one step size suits them all
        scale = float(np.median(np.abs(limit[kept]))) or 1.0
        values.append(value[rows] / scale)
        fixes.append(fixed / scale)
        cons.append(kept)
        lims.append(limit[kept] / scale)
        scales.append(scale)
    k = len(values)
    cost = problem.cost[rows]
    chooser: _Hulls | _Padded = (_Hulls(rows, starts, counts, cost, values[0]) if k == 1
                                 else _Padded(rows, starts, counts, cost, values))

    def relaxed(mu: list[np.ndarray], exact: bool = False
                ) -> tuple[float, np.ndarray, list[np.ndarray]]:
        """L(μ), the relaxed choice (a row per segment) and each limit's excess."""
        bound = 0.0
        prices = []
        for j in range(k):
            full = np.zeros(n)
            full[cons[j]] = mu[j]
            w = tree.subtree_sum(full)
            prices.append(w)
            bound += float(w @ fixes[j]) - float(mu[j] @ lims[j])
        pick, chosen, total = chooser.choose(prices, exact)
        excess = [tree.path_sum(chosen[j] + fixes[j])[cons[j]] - lims[j]
                  for j in range(k)]
        return bound + total, pick, excess

    # a price per unit resource at which segments start to trade cost for it
    spread_c = float(np.sum(np.maximum.reduceat(cost, starts)
                            - np.minimum.reduceat(cost, starts)))
    base = [spread_c / max(float(np.sum(np.maximum.reduceat(v, starts)
                                        - np.minimum.reduceat(v, starts))), 1e-300)
            / max(c.size, 1) for v, c in zip(values, cons, strict=True)]

    raised: list[np.ndarray] = [np.zeros(c.size) for c in cons]

    def repair(mu: list[np.ndarray]) -> np.ndarray | None:
        """A relaxed choice that breaks no limit, raising the broken limits' multipliers.

        Starts a little below the multipliers the last repair ended with.
        """
        m = [np.maximum(x, _WARM * r) for x, r in zip(mu, raised, strict=True)]
        for _ in range(_REPAIR_ROUNDS):
            _, pick, excess = relaxed(m)
            # half the tolerance the final check allows (1e-9 in the problem's units)
            broken = [e > 0.5e-9 / sc for e, sc in zip(excess, scales, strict=True)]
            if not any(b.any() for b in broken):
                raised[:] = m
                return pick
            for j in range(k):
                b = broken[j]
                m[j][b] = np.maximum(_RAISE * m[j][b], 1e-3 * base[j])
        return None

    mu = [np.zeros(c.size) for c in cons]
    best_lb, best_ub, best_mu = -np.inf, np.inf, mu
    best_pick: np.ndarray | None = None
    theta, stall, steps = 1.0, 0, 0
    for steps in range(1, rounds + 1):
        dual, _, excess = relaxed(mu)
        if dual > best_lb + 1e-12 * abs(dual):
            best_lb, best_mu, stall = dual, mu, 0
        else:
            stall += 1
            if stall >= 8:
                theta, stall = theta / 2, 0
        if steps == 1 or steps % 10 == 0 or theta < 1e-3:
            found = repair(mu)
            if found is not None:
                ub = float(problem.cost[found].sum())
                if ub < best_ub:
                    best_ub, best_pick = ub, found
        if best_pick is not None and best_ub - best_lb <= _TARGET_GAP * abs(best_ub):
            break
        if theta < 1e-3:
            break
        norm = sum(float(e @ e) for e in excess)
        if norm == 0:
            break  # the relaxed choice meets every limit with no slack to price: optimal
        target = best_ub if np.isfinite(best_ub) else dual + abs(dual) * 0.1 + 1.0
        step = theta * max(target - dual, 1e-12 * abs(target)) / norm
        mu = [np.maximum(m + step * e, 0.0) for m, e in zip(mu, excess, strict=True)]
    if best_pick is None:
        return _stop(problem, SolveStatus.ERROR,
                     "tree engine: the relaxation of the path limits found no design meeting "
                     "them all", t0)
    best_lb = relaxed(best_mu, exact=True)[0]
    choice = best_pick
    broken = problem.violations(choice, tol_pct=1e-9)
    if broken:  # pragma: no cover - a guard against a bug, never expected
        return _stop(problem, SolveStatus.ERROR,
                     "tree engine: internal check failed: " + "; ".join(broken[:3]), t0)
    objective = float(np.sum(problem.cost[choice]))
    lower = min(best_lb - 1e-9 * abs(best_lb), objective)   # margin for rounding
    gap = max(0.0, (objective - lower) / abs(objective)) if objective else 0.0
    closed = gap <= 1e-9
    message = (f"tree engine: {n} segments, {problem.n_candidates} candidates, "
               f"{rows.size} usable, {tree_depth(problem.parent)} runs deep: the path limits "
               f"relaxed with a multiplier per binding limit ({sum(c.size for c in cons)}), "
               f"{steps} steps; the design meets every limit and costs at most "
               f"{100 * gap:.3g} % more than the least possible (lower bound {lower:.8g})"
               + ("" if closed else ", optimality within that gap, not proven"))
    return Solution(status=SolveStatus.OPTIMAL if closed else SolveStatus.BOUNDED,
                    choice=choice, objective=objective, proven_optimal=closed, gap=gap,
                    engine=_ENGINE, message=message, seconds=time.perf_counter() - t0)


class _Padded:
    """The relaxed choice in any number of resources, by one pass over every row.

    Segments of like candidate count (rounded up to ``_WIDTH_STEP``) share a padded table
    (``_Block``), so a choice is one argmin along its rows; a run with few candidates
    does not carry the padding of the run with most (a riser's taps: a fifth of the
    cells).
    """

    def __init__(self, rows: np.ndarray, starts: np.ndarray, counts: np.ndarray,
                 cost: np.ndarray, values: list[np.ndarray]) -> None:
        self.n = counts.size
        width_class = -(-counts // _WIDTH_STEP)
        self.blocks = [_Block(np.flatnonzero(width_class == c), rows, starts, counts, cost,
                              values) for c in np.unique(width_class).tolist()]

    def choose(self, prices: list[np.ndarray], exact: bool
               ) -> tuple[np.ndarray, list[np.ndarray], float]:
        """Each segment's row least in cost + Σ price × value; its values; Σ that least."""
        pick = np.empty(self.n, dtype=np.int64)
        chosen = [np.empty(self.n) for _ in prices]
        least = np.empty(self.n, dtype=np.float64 if exact else np.float32)
        for b in self.blocks:
            b.choose([w[b.segs] for w in prices], exact, pick, chosen, least)
        # one sum over the segments in order, whatever their blocks
        return pick, chosen, float(least.sum(dtype=np.float64))


_WIDTH_STEP = 8   # candidate counts padded to the next multiple of this


class _Block:
    """One padded table of candidates, a row per segment.

    Padding repeats the segment's last candidate at infinite cost, never chosen.
    """

    def __init__(self, segs: np.ndarray, rows: np.ndarray, starts: np.ndarray,
                 counts: np.ndarray, cost: np.ndarray, values: list[np.ndarray]) -> None:
        self.segs = segs
        k = counts[segs]
        n, width = segs.size, int(k.max())
        self.width = width
        first = np.repeat(np.cumsum(k) - k, k)            # each taken row's segment start
        pos = np.arange(first.size) - first               # its place in the segment
        take = np.repeat(starts[segs], k) + pos           # its index in ``rows``
        local = np.repeat(np.arange(n), k)
        last = starts[segs] + k - 1
        self.row = np.empty((n, width), dtype=np.int64)
        self.row[:] = rows[last][:, None]
        self.row[local, pos] = rows[take]
        self.cost = np.full((n, width), np.inf)
        self.cost[local, pos] = cost[take]
        self.values = []
        for v in values:
            pad = np.empty((n, width))
            pad[:] = v[last][:, None]
            pad[local, pos] = v[take]
            self.values.append(pad)
        # the steps price in float32 (half the memory traffic); the bound stated is L(μ)
        # evaluated again in float64 at the best multipliers
        self.cost32 = self.cost.astype(np.float32)
        self.values32 = [v.astype(np.float32) for v in self.values]

    def choose(self, prices: list[np.ndarray], exact: bool, pick: np.ndarray,
               chosen: list[np.ndarray], least: np.ndarray) -> None:
        """Its segments' least rows, their values and least prices, written in place."""
        cost = self.cost if exact else self.cost32
        values = self.values if exact else self.values32
        # price = Σ w·value + cost, summed in the order cost, then each value's term
        # (IEEE addition commutes: the same numbers as cost + term₀ + term₁ …)
        price = np.multiply(values[0], prices[0][:, None].astype(cost.dtype))
        price += cost
        if len(prices) > 1:
            term = np.empty_like(price)
            for j in range(1, len(prices)):
                np.multiply(values[j], prices[j][:, None].astype(cost.dtype), out=term)
                price += term
        # flat positions: one gather per column instead of a pair of index arrays
        at = np.argmin(price, axis=1) + self.width * np.arange(self.segs.size)
        pick[self.segs] = self.row.ravel()[at]
        for out, v in zip(chosen, self.values, strict=True):
            out[self.segs] = v.ravel()[at]
        least[self.segs] = price.ravel()[at]


class _Hulls:
    """The relaxed choice in one resource, from each segment's lower convex hull.

    With one price ``w ≥ 0`` a segment's least ``cost + w · value`` is a vertex of the
    lower convex hull of its (value, cost) points, the one whose two edges' slopes
    bracket ``−w``: from the cheapest row at ``w = 0`` to the least value as ``w`` grows.
    So a choice is a count of breakpoints below ``w``, not a pass over every row; runs
    with the same candidates (a riser's runs between two taps) share one hull.
    """

    def __init__(self, rows: np.ndarray, starts: np.ndarray, counts: np.ndarray,
                 cost: np.ndarray, value: np.ndarray) -> None:
        n = counts.size
        firsts, of_seg = np.unique(_alike((cost, value), starts, counts),
                                   return_inverse=True)
        local: list[np.ndarray] = []
        breaks: list[np.ndarray] = []
        for a, m in zip(starts[firsts].tolist(), counts[firsts].tolist(), strict=True):
            vertices, at = _lower_hull(cost[a:a + m], value[a:a + m])
            local.append(vertices)
            breaks.append(at)
        # each segment's vertices and breaks, gathered from its group's hull
        n_vert = np.array([x.size for x in local])
        vert_off = np.concatenate(([0], np.cumsum(n_vert)))
        nv = n_vert[of_seg]
        self.seg_vert = np.cumsum(nv) - nv          # each segment's first vertex
        at = np.repeat(vert_off[:-1][of_seg] - self.seg_vert, nv) + np.arange(nv.sum())
        at_vertex = np.repeat(starts, nv) + np.concatenate(local)[at]
        self.row, self.cost, self.value = rows[at_vertex], cost[at_vertex], value[at_vertex]
        nb = nv - 1                                  # one break fewer than vertices
        brk_off = vert_off[:-1] - np.arange(n_vert.size)
        first_b = np.cumsum(nb) - nb
        self.owner = np.repeat(np.arange(n), nb)
        at = np.repeat(brk_off[of_seg] - first_b, nb) + np.arange(nb.sum())
        self.breaks = np.concatenate(breaks)[at]
        self.n = n

    def choose(self, prices: list[np.ndarray], exact: bool
               ) -> tuple[np.ndarray, list[np.ndarray], float]:
        """Each segment's row least in cost + price × value; its value; Σ that least.

        In float64 whether or not ``exact``: counting breaks costs the same in any width.
        """
        w = prices[0]
        below = np.bincount(self.owner, weights=self.breaks < w[self.owner],
                            minlength=self.n).astype(np.int64)
        at = self.seg_vert + below
        value = self.value[at]
        return self.row[at], [value], float(np.sum(self.cost[at] + w * value))


def _alike(columns: tuple[np.ndarray, ...], starts: np.ndarray,
           counts: np.ndarray) -> np.ndarray:
    """For each segment, the first segment whose rows are the same in every column.

    Segment ``s`` has rows ``starts[s] : starts[s] + counts[s]``. A riser's runs between
    two taps have the same candidates: their work is done once.
    """
    first: dict[bytes, int] = {}
    rep = np.empty(counts.size, dtype=np.int64)
    for s, (a, m) in enumerate(zip(starts.tolist(), counts.tolist(), strict=True)):
        rep[s] = first.setdefault(b"".join(c[a:a + m].tobytes() for c in columns), s)
    return rep


def _lower_hull(cost: np.ndarray, value: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The lower convex hull of (value, cost), cheapest vertex first, and its breaks.

    A break is the price ``w`` at which the least ``cost + w · value`` passes from one
    vertex to the next: vertex ``i`` is least for ``w`` between breaks ``i − 1`` and
    ``i`` (ascending). Positions are into the arrays given.
    """
    order = np.lexsort((cost, value)).tolist()      # value ascending, then cost
    c, v = cost.tolist(), value.tolist()
    hull: list[int] = []
    cheapest = np.inf
    for i in order:
        if c[i] >= cheapest:
            continue    # no cheaper than a row of less value: never least for any w ≥ 0
        cheapest = c[i]
        while len(hull) >= 2:
            a, b = hull[-2], hull[-1]
            # b on or above the line from a to i: never strictly least
            if (v[b] - v[a]) * (c[i] - c[b]) - (c[b] - c[a]) * (v[i] - v[b]) <= 0:
                hull.pop()
            else:
                break
        hull.append(i)
    hull.reverse()                                   # cheapest first
    at = [(c[hull[j + 1]] - c[hull[j]]) / (v[hull[j]] - v[hull[j + 1]])
          for j in range(len(hull) - 1)]
    return np.asarray(hull, dtype=np.int64), np.asarray(at, dtype=np.float64)


def _stop(problem: Problem, status: SolveStatus, message: str, t0: float) -> Solution:
    return Solution(status=status, choice=np.full(problem.n_segments, -1, dtype=np.int64),
                    objective=float("nan"), proven_optimal=status is SolveStatus.INFEASIBLE,
                    gap=None, engine=_ENGINE, message=message,
                    seconds=time.perf_counter() - t0)

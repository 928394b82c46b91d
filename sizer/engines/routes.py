"""Shared routes for the tree engine: a bound from below, then a fixed point from the safe side.

The derating of every run in a route depends on the conductors the whole route holds
(``Problem.route_*``), which couples segments that the tree program treats apart. The
tree engine handles it in two steps, both exact tree solves of route-free problems:

1. **Bound.** Drop the coupling: each row keeps only its own limit (its count within its
   own band, which the candidate table already ensures). The optimum of this relaxation
   is a lower bound; when it happens to be consistent, it is the optimum.
2. **Safe side.** Fix each route's band, keep only rows that assume that band, solve;
   start from the most severe band (it holds any count, so the first design is always
   consistent) and move each route to the band of its actual total, keeping the
   cheapest consistent design. Derating falls monotonically with the count, so the
   iteration only ever relaxes toward the route's real content.

The result is proven optimal when its cost meets the bound; otherwise the caller hands
the problem to the MILP and reports the gap the iteration left.
"""

from __future__ import annotations

import dataclasses
import time

import numpy as np

from sizer.engines.problem import ROW_ARRAYS, Problem, Solution, SolveStatus

MAX_ROUNDS = 20
MAX_COMBINATIONS = 64   # routes' band combinations the bound visits
LAGRANGE_STEPS = 12


def restrict(problem: Problem, keep: np.ndarray) -> tuple[Problem, np.ndarray] | None:
    """The route-free problem on the rows ``keep`` (bool per row) and their original rows.

    None when some segment keeps no row.
    """
    seg = problem.segment_of_row
    counts = np.bincount(seg[keep], minlength=problem.n_segments)
    if np.any(counts == 0):
        return None
    rows = np.flatnonzero(keep)
    offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)

    def take(a: np.ndarray | None) -> np.ndarray | None:
        return None if a is None else a[rows]

    # Every per-row array is sliced (so no further resource is forgotten); routes go.
    sub = dataclasses.replace(
        problem, offsets=offsets, route_of=None, route_count=None, route_top=None,
        **{name: take(getattr(problem, name)) for name in ROW_ARRAYS  # type: ignore[arg-type]
           if name not in ("route_count", "route_top")})
    return sub, rows


def band_of(tops: np.ndarray, total: float) -> float:
    """The least band top that holds ``total`` conductors (``tops`` ascending, last inf)."""
    return float(tops[np.searchsorted(tops, total - 1e-9, side="left")])


def solve_tree_routes(problem: Problem, solve_pure) -> tuple[Solution, float]:
    """Best route-consistent design by the two steps above, and the lower bound.

    ``solve_pure`` solves a route-free Problem with the tree engine. The Solution is
    OPTIMAL and proven when the design meets the bound; otherwise it carries the best
    consistent design found (status OPTIMAL, ``proven_optimal`` False, ``gap`` set) for
    the caller to hand on. ``choice`` rows refer to ``problem``.
    """
    t0 = time.perf_counter()
    assert problem.route_of is not None and problem.route_top is not None
    seg = problem.segment_of_row
    route_of_row = problem.route_of[seg]
    in_route = route_of_row >= 0
    everything = restrict(problem, np.ones(problem.n_candidates, dtype=bool))
    assert everything is not None
    relaxed = solve_pure(everything[0])
    if not relaxed.has_solution:
        return dataclasses.replace(relaxed, seconds=time.perf_counter() - t0), np.inf
    # A sub-solve that is not proven (a front thinned by ε-dominance: status bounded)
    # gives a design but no lower bound, and nothing built on it is proven either.
    exact = relaxed.proven_optimal
    bound = relaxed.objective if exact else -np.inf
    choice = everything[1][relaxed.choice]
    if problem.route_consistent(choice):
        return dataclasses.replace(
            relaxed, choice=choice, proven_optimal=exact, gap=0.0 if exact else None,
            message=f"{relaxed.message}; shared routes: the relaxation is consistent",
            seconds=time.perf_counter() - t0), bound

    tops = np.unique(problem.route_top[in_route])
    n_routes = int(problem.route_of.max()) + 1
    best: np.ndarray | None = None
    best_cost = np.inf
    rounds = 0

    def consider(pick: np.ndarray) -> None:
        nonlocal best, best_cost
        cost = float(problem.cost[pick].sum())
        if problem.route_consistent(pick) and cost < best_cost:
            best, best_cost = pick, cost

    def at_bands(band: np.ndarray, weight: np.ndarray | None = None
                 ) -> tuple[np.ndarray, float] | None:
        """Optimum with each route's rows at ``band`` (cost + weight × count when given)."""
        nonlocal rounds
        rounds += 1
        keep = ~in_route | (problem.route_top == band[np.maximum(route_of_row, 0)])
        sub = restrict(problem, keep)
        if sub is None:
            return None
        pure = sub[0]
        if weight is not None:
            extra = np.where(in_route, weight[np.maximum(route_of_row, 0)]
                             * problem.route_count, 0.0)[sub[1]]
            pure = dataclasses.replace(pure, cost=pure.cost + extra)
        got = solve_pure(pure)
        if not got.has_solution:
            return None
        if not got.proven_optimal:
            nonlocal exact
            exact = False
        pick = sub[1][got.choice]
        consider(pick)
        return pick, got.objective

    # 1. The safe side: from the most severe band, move each route to its content's band.
    band = np.full(n_routes, np.inf)
    seen: set[tuple[float, ...]] = set()
    while len(seen) < MAX_ROUNDS and tuple(band.tolist()) not in seen:
        seen.add(tuple(band.tolist()))
        found = at_bands(band)
        if found is None:
            break
        band = np.array([band_of(tops, float(t)) for t in problem.route_totals(found[0])])

    # 2. A tighter bound, band by band (when the routes' band combinations are few): the
    #    optimum over designs whose routes sit in bands b is at least the optimum at b
    #    with the count coupling priced by a multiplier λ ≥ 0 (Lagrangian relaxation):
    #    min Σ cost + λ·(count − top) ≤ the least consistent cost at b.
    combos = len(tops) ** n_routes
    if combos <= MAX_COMBINATIONS:
        by_band = np.inf
        for combo in np.array(np.meshgrid(*[tops] * n_routes, indexing="ij")
                              ).reshape(n_routes, -1).T:
            by_band = min(by_band, _band_bound(problem, combo, at_bands, best_cost))
        bound = max(bound, by_band)
    seconds = time.perf_counter() - t0
    if best is None:
        return Solution(SolveStatus.ERROR, np.full(problem.n_segments, -1), np.nan, False,
                        None, "tree", "shared routes: no consistent design from the safe "
                        "side", seconds), bound
    if not exact:
        bound = -np.inf
    gap = max(0.0, (best_cost - bound) / abs(best_cost)) if best_cost else 0.0
    proven = exact and gap <= 1e-9
    said = (f"gap to the bound {100 * gap:.3g} %" if exact
            else "no proven bound (a sub-solve's fronts were bounded)")
    return Solution(SolveStatus.OPTIMAL, best, best_cost, proven, gap if exact else None,
                    "tree", f"shared routes: {rounds} tree solve(s) (safe side, then a bound "
                    f"per band), {said}", seconds), bound


def _band_bound(problem: Problem, band: np.ndarray, at_bands, incumbent: float) -> float:
    """Lower bound on consistent designs with the routes at ``band`` (inf: none exists).

    Bisection on one multiplier per route (all routes together when there are several)
    for the count constraint Σ count ≤ top; every consistent design met on the way is
    offered to the incumbent by ``at_bands``.
    """
    plain = at_bands(band)
    if plain is None:
        return np.inf
    pick, value = plain
    totals = problem.route_totals(pick)
    if np.all(totals <= band + 1e-9) or value >= incumbent:
        return value
    finite = np.isfinite(band)
    if not finite.any():
        return value
    top = np.where(finite, band, 0.0)
    bound = value
    low, high = 0.0, float(np.max(np.abs(problem.cost))) + 1.0
    for _ in range(LAGRANGE_STEPS):
        lam = 0.5 * (low + high)
        weight = np.where(finite, lam, 0.0)
        got = at_bands(band, weight)
        if got is None:
            break
        pick, value = got
        bound = max(bound, value - float(np.sum(weight * top)))
        if np.all(problem.route_totals(pick) <= band + 1e-9):
            high = lam
        else:
            low = lam
        if bound >= incumbent:
            break
    return bound

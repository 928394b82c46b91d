"""The optimisation problem both engines solve, and the answer they return.

Pure data: costs and voltage drops in percent, no amperes. A *segment* is one run of
the tree; its *candidates* are rows ``offsets[s]:offsets[s + 1]`` of the per-candidate
arrays. Exactly one candidate is chosen per segment, minimising the summed cost, such
that for every segment ``s`` with a finite ``limit_pct[s]``

    Σ_{t on the path source → s, s included} (drop_pct[chosen t] + fixed_drop_pct[t])
        ≤ limit_pct[s].

Segments are ordered parents first (``parent[s] < s``; ``-1`` = fed from the source).

Further path constraints of the same additive form may be given: ``drop2_pct`` with
``limit2_pct`` (motor-start dip) and ``loop_pu`` with ``loop_limit_pu`` (earth-fault loop
impedance for disconnection). Both engines honour them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import StrEnum

import numpy as np

from sizer.errors import InternalError
from sizer.topology import Topology

__all__ = ["Problem", "Solution", "SolveStatus"]


class SolveStatus(StrEnum):
    """Outcome of a solve, as written in results."""

    OPTIMAL = "optimal"
    BOUNDED = "bounded"        # tree engine, fronts thinned: within a stated tolerance
    INFEASIBLE = "infeasible"
    TIME_LIMIT = "time_limit"
    ERROR = "error"


def _frozen(array: np.ndarray) -> np.ndarray:
    """A read-only view: an engine cannot change a Problem's arrays.

    A view, not a copy: a problem's rows are the candidate table's columns (millions of
    rows on a large tree), which nothing changes once prepared; a caller that built an
    array for the problem passes it over.
    """
    out = array.view()
    out.setflags(write=False)
    return out


def _as_float(name: str, value: object, size: int, *, finite: bool = True) -> np.ndarray:
    """Read a float array of length ``size`` (a scalar is broadcast)."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InternalError(f"must be numbers ({exc})", field=name) from exc
    if arr.ndim == 0:
        arr = np.full(size, float(arr))
    if arr.shape != (size,):
        raise InternalError(f"must have shape ({size},), got {arr.shape}", field=name)
    # The least and the largest say it all (NaN propagates, ±inf shows at an end): two
    # fast passes over millions of rows, no temporary mask unless an entry is bad.
    ends = (float(arr.min()), float(arr.max())) if arr.size else (0.0, 0.0)
    if finite and not all(math.isfinite(e) for e in ends):
        bad = int(np.flatnonzero(~np.isfinite(arr))[0])
        raise InternalError(f"must be finite; entry {bad} is {arr[bad]}", field=name)
    if any(math.isnan(e) for e in ends):
        bad = int(np.flatnonzero(np.isnan(arr))[0])
        raise InternalError(f"entry {bad} is NaN", field=name)
    return _frozen(arr)


def _as_int(name: str, value: object, size: int | None = None) -> np.ndarray:
    """Read a 1-D int64 array (of length ``size`` when given)."""
    arr = np.asarray(value)
    if arr.ndim != 1 or not (arr.size == 0 or np.issubdtype(arr.dtype, np.integer)):
        raise InternalError(f"must be a 1-D integer array, got {arr.dtype} {arr.shape}",
                            field=name)
    if size is not None and arr.shape != (size,):
        raise InternalError(f"must have shape ({size},), got {arr.shape}", field=name)
    return _frozen(arr.astype(np.int64))


def path_totals(parent: np.ndarray, own: np.ndarray) -> np.ndarray:
    """Sum of ``own`` over the path source → s, for every segment (parents come first)."""
    return Topology(parent).path_sum(own)


# The fields of a Problem that hold one value per candidate row.
ROW_ARRAYS = ("cost", "drop_pct", "capex", "loss_pv", "choice_key", "drop2_pct", "loop_pu",
              "route_count", "route_top")


@dataclass(frozen=True, eq=False)  # arrays inside: compare by identity
class Problem:
    """One candidate per segment, least cost, path voltage-drop limits.

    ``fixed_drop_pct`` (a transformer's regulation at the segment's far end) and
    ``limit_pct`` (max cumulative drop source → far end, ``np.inf`` = none) may be given
    as scalars and are broadcast. Arrays are taken as read-only views (not copied).

    Side constraints (the MILP engine only; the tree engine refuses them):
    ``capex ≤ capex_cap`` and ``loss_pv ≤ loss_pv_cap`` summed over chosen rows;
    ``same_choice_groups``: each group's segments choose rows with equal
    ``choice_key``.

    Further path constraints (both engines): ``drop2_pct``/``limit2_pct``, a second
    path-drop constraint of the same form (no fixed term: fold a constant into every
    row of that segment or into the limits), and ``loop_pu``/``loop_limit_pu``, the
    earth-fault loop impedance (per unit, see ``sizer.faults``) summed along the path
    within each segment's limit.

    Shared routes (the MILP directly; the tree engine by iteration, see
    ``sizer.engines.routes``): ``route_of[s]`` names the route of segment ``s`` (-1
    none); a row adds ``route_count`` conductors to its route and is valid only while
    its route's total stays within ``route_top`` (the grouping band its derating
    assumes; inf for the last band):

        for every route r and chosen row i of a segment in r:
            Σ_{chosen j in r} route_count[j] ≤ route_top[i].
    """

    parent: np.ndarray
    offsets: np.ndarray
    cost: np.ndarray
    drop_pct: np.ndarray
    fixed_drop_pct: np.ndarray = 0.0  # type: ignore[assignment]
    limit_pct: np.ndarray = np.inf  # type: ignore[assignment]
    capex: np.ndarray | None = None
    loss_pv: np.ndarray | None = None
    capex_cap: float | None = None
    loss_pv_cap: float | None = None
    same_choice_groups: tuple[np.ndarray, ...] = ()
    choice_key: np.ndarray | None = None
    drop2_pct: np.ndarray | None = None
    limit2_pct: np.ndarray | None = None
    route_of: np.ndarray | None = None
    route_count: np.ndarray | None = None
    route_top: np.ndarray | None = None
    loop_pu: np.ndarray | None = None
    loop_limit_pu: np.ndarray | None = None

    def __post_init__(self) -> None:
        put = object.__setattr__
        parent = _as_int("parent", self.parent)
        n = parent.size
        if n == 0:
            raise InternalError("the problem has no segments", field="parent")
        idx = np.arange(n)
        bad = np.flatnonzero((parent >= idx) | (parent < -1))
        if bad.size:
            s = int(bad[0])
            raise InternalError(
                f"segment {s} has parent {int(parent[s])}; segments must be ordered "
                "parents first (-1 <= parent[s] < s)", field="parent")
        put(self, "parent", parent)

        offsets = _as_int("offsets", self.offsets, n + 1)
        counts = np.diff(offsets)
        if offsets[0] != 0 or np.any(counts < 1):
            s = int(np.flatnonzero(counts < 1)[0]) if np.any(counts < 1) else 0
            raise InternalError(
                f"offsets must start at 0 and give every segment at least one candidate "
                f"(segment {s} has none)", field="offsets")
        put(self, "offsets", offsets)
        m = int(offsets[-1])

        put(self, "cost", _as_float("cost", self.cost, m))
        put(self, "drop_pct", _as_float("drop_pct", self.drop_pct, m))
        put(self, "fixed_drop_pct", _as_float("fixed_drop_pct", self.fixed_drop_pct, n))
        limit = _as_float("limit_pct", self.limit_pct, n, finite=False)
        if np.any(limit == -np.inf):
            raise InternalError("must be a number or +inf, not -inf", field="limit_pct")
        put(self, "limit_pct", limit)

        for name, cap_name in (("capex", "capex_cap"), ("loss_pv", "loss_pv_cap")):
            arr, cap = getattr(self, name), getattr(self, cap_name)
            if arr is not None:
                put(self, name, _as_float(name, arr, m))
            if cap is not None:
                if arr is None:
                    raise InternalError(f"{cap_name} needs {name} per candidate",
                                        field=cap_name)
                if not np.isfinite(cap):
                    raise InternalError("must be a finite number", field=cap_name)
                put(self, cap_name, float(cap))

        groups = tuple(_as_int("same_choice_groups", g) for g in self.same_choice_groups)
        for g in groups:
            if g.size and (g.min() < 0 or g.max() >= n):
                raise InternalError(f"segment index out of range 0..{n - 1}",
                                    field="same_choice_groups")
            if np.unique(g).size != g.size:
                raise InternalError("a group names a segment twice", field="same_choice_groups")
        put(self, "same_choice_groups", groups)
        if self.choice_key is not None:
            put(self, "choice_key", _as_int("choice_key", self.choice_key, m))
        elif any(g.size > 1 for g in groups):
            raise InternalError("same_choice_groups needs choice_key per candidate",
                                field="choice_key")

        for own, lim in (("drop2_pct", "limit2_pct"), ("loop_pu", "loop_limit_pu")):
            if (getattr(self, own) is None) != (getattr(self, lim) is None):
                raise InternalError(f"{own} and {lim} go together", field=own)
            if getattr(self, own) is not None:
                put(self, own, _as_float(own, getattr(self, own), m))
                limit = _as_float(lim, getattr(self, lim), n, finite=False)
                if np.any(limit == -np.inf):
                    raise InternalError("must be a number or +inf, not -inf", field=lim)
                put(self, lim, limit)

        given = [a is not None for a in (self.route_of, self.route_count, self.route_top)]
        if any(given) and not all(given):
            raise InternalError("route_of, route_count and route_top go together",
                                field="route_of")
        if all(given):
            put(self, "route_of", _as_int("route_of", self.route_of, n))
            put(self, "route_count", _as_int("route_count", self.route_count, m))
            top = _as_float("route_top", self.route_top, m, finite=False)
            if np.any(top < 0) or np.any(self.route_count < 0):  # type: ignore[operator]
                raise InternalError("route counts and tops must not be negative",
                                    field="route_top")
            put(self, "route_top", top)

    @property
    def has_routes(self) -> bool:
        """True when some segments share a route (their derating couples them)."""
        return self.route_of is not None and bool(np.any(self.route_of >= 0))

    def route_totals(self, choice: np.ndarray) -> np.ndarray:
        """Conductors in each route for a choice of rows (index = route)."""
        assert self.route_of is not None and self.route_count is not None
        n_routes = int(self.route_of.max(initial=-1)) + 1
        inside = self.route_of >= 0
        return np.bincount(self.route_of[inside], weights=self.route_count[choice[inside]],
                           minlength=n_routes)

    def route_consistent(self, choice: np.ndarray) -> bool:
        """True when every chosen row's derating covers its route's actual total."""
        if not self.has_routes:
            return True
        assert self.route_of is not None and self.route_top is not None
        totals = self.route_totals(choice)
        inside = np.flatnonzero(self.route_of >= 0)
        return bool(np.all(totals[self.route_of[inside]]
                           <= self.route_top[choice[inside]] + 1e-9))

    @property
    def n_segments(self) -> int:
        """Number of segments."""
        return int(self.parent.size)

    @property
    def n_candidates(self) -> int:
        """Number of candidate rows over all segments."""
        return int(self.offsets[-1])

    @property
    def segment_of_row(self) -> np.ndarray:
        """Segment index of every candidate row."""
        return np.repeat(np.arange(self.n_segments), np.diff(self.offsets))

    @property
    def has_side_constraints(self) -> bool:
        """True when anything but path constraints constrains the choice (caps, groups)."""
        return (
            self.capex_cap is not None
            or self.loss_pv_cap is not None
            or any(g.size > 1 for g in self.same_choice_groups)
            or self.has_routes
        )

    def _extra_path_specs(self) -> list[tuple[np.ndarray, np.ndarray, str, str]]:
        """Each further path constraint with a finite limit: (values, limits, name, unit).

        Values per row, limits per segment.
        """
        return [(own, lim, name, unit) for own, lim, name, unit in (
            (self.drop2_pct, self.limit2_pct, "starting dip", "%"),
            (self.loop_pu, self.loop_limit_pu, "earth-fault loop", "pu"))
            if own is not None and lim is not None and bool(np.any(np.isfinite(lim)))]

    def extra_paths(self) -> list[tuple[np.ndarray, np.ndarray]]:
        """The path constraints beyond the first drop: (value per row, limit per segment).

        Only those with at least one finite limit.
        """
        return [(own, lim) for own, lim, _, _ in self._extra_path_specs()]

    def extra_path_names(self) -> list[tuple[str, str]]:
        """(name, unit) of each of ``extra_paths()``, in the same order."""
        return [(name, unit) for _, _, name, unit in self._extra_path_specs()]

    def path_sum(self, per_row: np.ndarray, choice: np.ndarray,
                 per_segment: np.ndarray | None = None) -> np.ndarray:
        """Sum of ``per_row[choice[t]] (+ per_segment[t])`` over the path source → s, per s."""
        own = np.asarray(per_row, dtype=np.float64)[choice]
        if per_segment is not None:
            own = own + per_segment
        return path_totals(self.parent, own)

    def path_drop_pct(self, choice: np.ndarray) -> np.ndarray:
        """Cumulative drop (%) at every segment's far end for a choice of rows."""
        return self.path_sum(self.drop_pct, choice, self.fixed_drop_pct)

    def violations(self, choice: np.ndarray, tol_pct: float = 1e-9) -> list[str]:
        """Describe every constraint a choice of rows breaks (empty when feasible)."""
        choice = np.asarray(choice, dtype=np.int64)
        out: list[str] = []
        seg = np.arange(self.n_segments)
        if choice.shape != (self.n_segments,) or np.any(
            (choice < self.offsets[:-1]) | (choice >= self.offsets[1:])
        ):
            return ["choice does not pick one row of each segment"]
        drop = self.path_drop_pct(choice)
        for s in seg[drop > self.limit_pct + tol_pct]:
            out.append(f"segment {s}: path drop {drop[s]:.6g} % > {self.limit_pct[s]:.6g} %")
        for name, own, lim in (("second path drop", self.drop2_pct, self.limit2_pct),
                               ("earth-fault loop", self.loop_pu, self.loop_limit_pu)):
            if own is not None and lim is not None:
                along = self.path_sum(own, choice)
                for s in seg[along > lim + tol_pct]:
                    out.append(f"segment {s}: {name} {along[s]:.6g} > {lim[s]:.6g}")
        for name, cap in (("capex", self.capex_cap), ("loss_pv", self.loss_pv_cap)):
            if cap is not None:
                total = float(np.sum(getattr(self, name)[choice]))
                if total > cap + tol_pct * max(1.0, abs(cap)):
                    out.append(f"{name} {total:.6g} > cap {cap:.6g}")
        if self.has_routes and not self.route_consistent(choice):
            out.append("a route holds more conductors than a chosen row's derating allows")
        if self.choice_key is not None:
            for g in self.same_choice_groups:
                keys = np.unique(self.choice_key[choice[g]])
                if keys.size > 1:
                    out.append(f"group {g.tolist()} chooses different keys {keys.tolist()}")
        return out


@dataclass(frozen=True, eq=False)  # arrays inside: compare by identity
class Solution:
    """What an engine found.

    ``choice`` holds the absolute candidate row per segment (``-1`` everywhere when no
    solution is known); ``objective`` is Σ cost of the chosen rows (NaN without one);
    ``gap`` the proven relative optimality gap when known; ``seconds`` wall time.
    """

    status: SolveStatus
    choice: np.ndarray
    objective: float
    proven_optimal: bool
    gap: float | None
    engine: str
    message: str
    seconds: float

    @property
    def has_solution(self) -> bool:
        """True when ``choice`` holds a usable design."""
        return bool(self.choice.size) and bool(np.all(self.choice >= 0))

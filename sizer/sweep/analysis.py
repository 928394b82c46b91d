"""What the points show: design changes, break-even values and the tornado."""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable

import numpy as np

from sizer.optimize import Objective, Prepared, path_drops_pct
from sizer.sweep.executors import _Worker
from sizer.sweep.points import prepared_at
from sizer.sweep.result import Breakeven, Change, SweepResult, TornadoBar
from sizer.sweep.vary import _with


def _kind(base: Prepared, row_a: int, row_b: int) -> str:
    t = base.table
    if t.material[row_a] != t.material[row_b]:
        return "material"
    area = base.catalogue.area_mm2
    a = area[int(t.size_index[row_a])] * int(t.sets[row_a])
    b = area[int(t.size_index[row_b])] * int(t.sets[row_b])
    if t.size_index[row_a] != t.size_index[row_b]:
        return "size up" if b > a else "size down"
    return "sets up" if t.sets[row_b] > t.sets[row_a] else "sets down"


def _drops_ok(base: Prepared, choice: np.ndarray) -> bool:
    path = path_drops_pct(base.parent, base.table.vd_pct[choice], base.fixed_drop_pct)
    return bool(np.all(path <= base.leaf_limit_pct + 1e-9))


def _changes_and_breakevens(result: SweepResult, worker: _Worker,
                            pairs: Iterable[tuple[int, int, int]]
                            ) -> tuple[tuple[Change, ...], tuple[Breakeven, ...]]:
    base = worker.base
    by_index = {p.index: p for p in result.points}
    names = result.names
    changes: list[Change] = []
    evens: list[Breakeven] = []
    for k, i, j in pairs:
        a, b = by_index.get(i), by_index.get(j)
        if a is None or b is None or not (a.ok and b.ok):
            continue
        ca = np.asarray(a.choice, dtype=np.int64)
        cb = np.asarray(b.choice, dtype=np.int64)
        moved = np.flatnonzero(ca != cb)
        if moved.size == 0:
            continue
        name = names[k]
        changes.append(Change(name, i, j, tuple(result.segment_ids[s] for s in moved)))
        lo, hi = a.values[k], b.values[k]
        at = tuple((n, a.values[m]) for m, n in enumerate(names) if m != k)

        def delta(rows_a: np.ndarray, rows_b: np.ndarray, a=a, k=k) -> Callable[[float], float]:
            def f(x: float) -> float:
                prep = prepared_at(base, names, _with(a.values, k, x))
                t = prep.table
                cost = t.capex if result.objective == Objective.CAPEX.value else (
                    t.capex + t.loss_pv)
                return float(cost[rows_a].sum() - cost[rows_b].sum())
            return f

        design_root: float | None = None
        for s in moved.tolist():
            ra, rb = int(ca[s]), int(cb[s])
            swap_a = ca.copy()
            swap_a[s] = rb
            swap_b = cb.copy()
            swap_b[s] = ra
            value = None
            basis = "segment"
            if _drops_ok(base, swap_a) and _drops_ok(base, swap_b):
                value = _root(delta(np.array([ra]), np.array([rb])), lo, hi)
            if value is None:
                basis = "design"
                if design_root is None:
                    design_root = _root(delta(ca, cb), lo, hi)
                    if design_root is None:
                        design_root = math.nan
                value = design_root
                if math.isnan(value):
                    value, basis = 0.5 * (lo + hi), "midpoint"
            seg_a = a.segments[s]
            seg_b = b.segments[s]
            evens.append(Breakeven(result.segment_ids[s], name, value, lo, hi, at, seg_a,
                                   seg_b, _kind(base, ra, rb), basis, i, j))
    return tuple(changes), tuple(evens)


def _root(f: Callable[[float], float], lo: float, hi: float) -> float | None:
    """Where f crosses zero in [lo, hi] (f(lo) ≤ 0 ≤ f(hi) or the reverse), else None.

    False position with the Illinois modification: exact in one step when f is linear in
    the field (energy price, demand charge, hours, metal prices), a few steps otherwise.
    """
    f_lo, f_hi = f(lo), f(hi)
    scale = abs(f_lo) + abs(f_hi)
    if f_lo == 0.0:
        return lo
    if f_hi == 0.0:
        return hi
    if (f_lo > 0) == (f_hi > 0):
        return None
    a, b, fa, fb = lo, hi, f_lo, f_hi
    side = 0
    x = a
    for _ in range(100):
        x = (a * fb - b * fa) / (fb - fa)
        fx = f(x)
        if abs(fx) <= 1e-12 * scale or abs(b - a) <= 1e-12 * max(1.0, abs(x)):
            break
        if (fx > 0) == (fb > 0):
            b, fb = x, fx
            if side == -1:
                fa /= 2.0
            side = -1
        else:
            a, fa = x, fx
            if side == 1:
                fb /= 2.0
            side = 1
    return min(max(x, lo), hi)


def _tornado(result: SweepResult) -> tuple[TornadoBar, ...]:
    bars = []
    for k, f in enumerate(result.fields):
        low = result.ends.get(_with(result.base_values, k, f.values[0]))
        high = result.ends.get(_with(result.base_values, k, f.values[-1]))
        if low is None or high is None or not (low.ok and high.ok):
            continue
        bars.append(TornadoBar(
            f.name, f.values[0], f.values[-1], result.base_values[k],
            result.optimum_cost(low), result.optimum_cost(high),
            result.fixed_cost(low, "today"), result.fixed_cost(high, "today")))
    return tuple(sorted(bars, key=lambda t: -t.swing))

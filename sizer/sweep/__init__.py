"""How the best design moves with energy and metal prices: the sensitivity sweep.

A sweep varies one or more numeric economics or price fields of a scenario over ranges
(``energy_price=0.06:0.30:9``), as a full grid or one field at a time around the
scenario's own values, and solves the whole tree at every point. Only costs change
between points, so the candidate table is built once and re-priced per point
(``sizer.candidates.reprice``); every point is then a full solve with the load-flow
check of ``sizer solve``.

From the points it derives what a client asks of a value-engineering decision:

- **changes**: which segments choose differently between neighbouring points;
- **break-evens**: the field value at which each such segment's choice flips, where the
  two fixed designs' costs are equal (solved from their costs, not the grid midpoint);
- **tornado**: the optimum's cost at each field's low and high end, the others at the
  scenario's values;
- **regret**: what today's design (the optimum at the scenario's values) costs at each
  point over that point's optimum; zero where it is still the optimum, never negative.

Costs are the objective's: capex + loss PV for ``lifecycle`` (the default), capex for
``capex``. Points run serially, in a local process pool (``jobs``) or on a Dask
distributed cluster (``scheduler``); all three give identical results, ordered by
point index. Ctrl-C keeps the points done and marks the result interrupted.
"""

from __future__ import annotations

import itertools
import math
import os
import sys
import types
import uuid
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Literal

import numpy as np

from sizer.errors import InfeasibleError, ScenarioError
from sizer.model import Scenario
from sizer.optimize import Objective, Prepared, prepare
from sizer.sweep.analysis import _changes_and_breakevens, _tornado
from sizer.sweep.executors import (
    POOL_MIN_SECONDS,
    Outcome,
    Progress,
    _chunks,
    _Payload,
    _price_state,
    _Run,
    _run_dask,
    _run_pool,
    _run_serial,
    _Worker,
)
from sizer.sweep.points import base_value, prepared_at
from sizer.sweep.result import Breakeven, Change, SweepPoint, SweepResult, TornadoBar
from sizer.sweep.vary import (
    FIELDS,
    VaryRange,
    _field_error,
    _with,
    field_names,
    nearest,
    parse_vary,
)
from sizer.units import MATERIALS

__all__ = ["FIELDS", "Breakeven", "Change", "SweepPoint", "SweepResult", "TornadoBar",
           "VaryRange", "base_value", "field_names", "nearest", "parse_vary", "prepared_at",
           "sweep"]

Mode = Literal["grid", "oat"]

# A grid larger than this is almost certainly a typo in a count.
MAX_POINTS = 1_000_000


# --- the sweep -----------------------------------------------------------------------------


def sweep(
    scenario: Scenario | str | Path,
    vary: Sequence[str | VaryRange],
    *,
    mode: Mode = "grid",
    objective: Objective | str = Objective.LIFECYCLE,
    jobs: int | None = None,
    scheduler: str | None = None,
    progress: Progress | None = None,
    engine: str = "auto",
    solver: str = "cbc",
    time_limit_s: float | None = None,
    verify: bool = True,
) -> SweepResult:
    """Solve the scenario at every point of the ranges and summarise how the optimum moves.

    ``vary``: ``"name=start:stop:count"`` texts (see ``parse_vary``) or VaryRange.
    ``mode``: ``"grid"`` (every combination) or ``"oat"`` (each field alone, the others at
    the scenario's values). ``jobs``: local worker processes (default the core count,
    or this process alone when the sweep would take under POOL_MIN_SECONDS serially;
    1 runs in this process). ``scheduler``: a Dask scheduler address (``tcp://host:8786``)
    to run the points on instead. ``progress(done, total)`` is called as points finish.
    Raises ScenarioError on bad ranges, InfeasibleError when the scenario has no design
    at its own values.
    """
    import time

    started = time.perf_counter()
    if not isinstance(scenario, Scenario):
        from sizer.scenario import load_scenario

        scenario = load_scenario(scenario)
    if mode not in ("grid", "oat"):
        raise ScenarioError(f"must be grid or oat, got {mode!r}", field="--mode")
    try:
        obj = Objective(objective)
    except ValueError:
        raise ScenarioError(f"must be one of {', '.join(o.value for o in Objective)}, got "
                            f"{objective!r}", field="--objective") from None
    auto_jobs = jobs is None
    if jobs is None:
        jobs = os.cpu_count() or 1
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise ScenarioError(f"must be a whole number of at least 1, got {jobs!r}", field="--jobs")
    say = progress or (lambda done, total: None)

    fields = _fields(vary, scenario.currency)
    names = tuple(f.name for f in fields)
    base = prepare(scenario)
    base_values = tuple(base_value(base, n) for n in names)
    _check_values(base, fields, base_values)

    payload = _Payload(uuid.uuid4().hex, scenario, _price_state(base.prices), names, obj.value,
                       engine, solver, time_limit_s, verify)
    main_worker = _Worker(payload, base)
    solve_started = time.perf_counter()
    today, baseline_results = main_worker.solve_full(base_values)
    point_seconds = time.perf_counter() - solve_started
    if not today.choice:
        raise InfeasibleError(f"{scenario.file or scenario.title}: no design at the scenario's "
                              f"own values ({today.status}); nothing to sweep",
                              [d for d in today.message.split("; ") if d])
    if obj is Objective.CAPEX:
        code_min = today
    else:
        solve_started = time.perf_counter()
        code_min = main_worker.solve(base_values, Objective.CAPEX.value)
        # The first solve pays one-off costs; the second is the better estimate.
        point_seconds = min(point_seconds, time.perf_counter() - solve_started)
    payload = replace(payload, fixed=(("today", today.choice),
                                      ("code_minimum", code_min.choice)))
    main_worker.payload = payload
    fixed_base = main_worker.fixed_costs_at(base_values)
    today = replace(today, fixed=fixed_base)
    code_min = replace(code_min, fixed=fixed_base)

    point_values = _point_values(fields, base_values, mode)
    if len(point_values) > MAX_POINTS:
        raise ScenarioError(f"{len(point_values):,} points is more than {MAX_POINTS:,}; "
                            f"use fewer values per field", field="--vary")
    ends = [_with(base_values, k, v) for k, f in enumerate(fields)
            for v in (f.values[0], f.values[-1])]
    unique: dict[tuple[float, ...], int] = {}
    for values in itertools.chain(point_values, ends):
        unique.setdefault(values, len(unique))
    tasks = [(i, v) for v, i in unique.items() if v != base_values]
    total = len(tasks)
    say(0, total)
    if not tasks:
        run, runner = _Run(), "serial"
    elif scheduler:
        run, runner = _run_dask(scheduler, payload, tasks, say, total), "dask"
    elif jobs == 1 or total == 1 or (auto_jobs and total * point_seconds < POOL_MIN_SECONDS):
        run, runner = _run_serial(main_worker, _chunks(tasks, 1), say, total), "serial"
    else:
        jobs = min(jobs, total)
        run = _run_pool(payload, _chunks(tasks, jobs), jobs, say, total)
        runner = f"{jobs} processes"
    if base_values in unique:
        run.results[unique[base_values]] = today

    def point(index: int, values: tuple[float, ...], out: Outcome) -> SweepPoint:
        return _point(base, index, values, out)

    points = tuple(point(i, v, run.results[unique[v]]) for i, v in enumerate(point_values)
                   if unique[v] in run.results)
    ends_done = {v: point(-1, v, run.results[unique[v]]) for v in ends
                 if unique[v] in run.results}
    baseline = point(-1, base_values, today)
    notes = []
    result = SweepResult(
        title=scenario.title, currency=scenario.currency, objective=obj.value, mode=mode,
        fields=fields, base_values=base_values, segment_ids=tuple(s.id for s in base.segments),
        points=points, points_total=len(point_values), baseline=baseline,
        code_minimum=point(-1, base_values, code_min), ends=ends_done, changes=(),
        breakevens=(), tornado=(), interrupted=run.interrupted,
        baseline_results=baseline_results,
    )
    for p in points:
        if p.ok and result.fixed_cost(p, "today") < result.optimum_cost(p) - 1e-6 * max(
                1.0, abs(result.optimum_cost(p))):
            notes.append(f"point {p.index}: today's design costs less than the point's solved "
                         f"design (its load-flow check tightened the drop budget); regret "
                         f"shown as 0")
    if run.interrupted:
        notes.append(f"interrupted: {len(points)} of {len(point_values)} points done")
    pairs = _neighbours(fields, mode, len(point_values))
    changes, breakevens = _changes_and_breakevens(result, main_worker, pairs)
    return replace(result, changes=changes, breakevens=breakevens,
                   tornado=_tornado(result), notes=tuple(notes), runner=runner,
                   seconds=time.perf_counter() - started)


def _fields(vary: Sequence[str | VaryRange], currency: str) -> tuple[VaryRange, ...]:
    if isinstance(vary, str | VaryRange):
        vary = [vary]
    fields = tuple(v if isinstance(v, VaryRange) else parse_vary(v, currency) for v in vary)
    if not fields:
        raise ScenarioError("name at least one field to vary, e.g. energy_price=0.06:0.30:9",
                            field="--vary")
    seen: set[str] = set()
    for f in fields:
        if f.name not in FIELDS:
            raise ScenarioError(f"unknown field {f.name!r}", field="--vary")
        if f.name in seen:
            raise _field_error(f.name, "is given twice; give each field once")
        if not f.values or any(not math.isfinite(v) for v in f.values):
            raise _field_error(f.name, "needs finite values")
        seen.add(f.name)
    return fields


def _check_values(base: Prepared, fields: Sequence[VaryRange],
                  base_values: tuple[float, ...]) -> None:
    """Every value of every field, the others at the scenario's, must make a valid scenario."""
    names = tuple(f.name for f in fields)
    for k, f in enumerate(fields):
        if FIELDS[f.name].metal and not math.isfinite(base_values[k]):
            raise _field_error(f.name, f"the price list ({base.prices.source}) does not say "
                                       f"the metal price it stands at, so it cannot be "
                                       f"re-indexed")
        for v in f.values:
            prepared_at(base, names, _with(base_values, k, v))


def _point_values(fields: Sequence[VaryRange], base_values: tuple[float, ...],
                  mode: str) -> list[tuple[float, ...]]:
    if mode == "grid":
        return [tuple(v) for v in itertools.product(*(f.values for f in fields))]
    return [_with(base_values, k, v) for k, f in enumerate(fields) for v in f.values]


def _point(base: Prepared, index: int, values: tuple[float, ...], out: Outcome) -> SweepPoint:
    t = base.table
    sizes = base.catalogue.sizes
    segments = tuple((MATERIALS[int(t.material[r])], sizes[int(t.size_index[r])], int(t.sets[r]))
                     for r in out.choice)
    return SweepPoint(index, values, out.status, out.capex, out.loss_pv, out.loss_kwh_per_year,
                      out.co2_kg_per_year, segments, out.choice,
                      MappingProxyType({name: (c, lp) for name, c, lp in out.fixed}),
                      out.message)


def _neighbours(fields: Sequence[VaryRange], mode: str, n_points: int
                ) -> list[tuple[int, int, int]]:
    """(field position, point, next point along that field) for every neighbouring pair."""
    pairs = []
    if mode == "grid":
        shape = tuple(len(f.values) for f in fields)
        for idx in range(n_points):
            multi = np.unravel_index(idx, shape)
            for k in range(len(fields)):
                if multi[k] + 1 < shape[k]:
                    nxt = list(multi)
                    nxt[k] += 1
                    pairs.append((k, idx, int(np.ravel_multi_index(nxt, shape))))
    else:
        start = 0
        for k, f in enumerate(fields):
            pairs.extend((k, start + j, start + j + 1) for j in range(len(f.values) - 1))
            start += len(f.values)
    return sorted(pairs, key=lambda p: (p[0], p[1]))


class _CallablePackage(types.ModuleType):
    """``sizer.sweep(...)``: the package itself runs a sweep and returns a DataFrame.

    The package and the library function share the name ``sizer.sweep``; Python sets
    the package as that attribute once it is imported, so the package is made callable
    instead of being shadowed by (or shadowing) a function.
    """

    def __call__(self, scenario: Scenario | str | Path, vary: Sequence[str | VaryRange],
                 **options: Any) -> Any:
        from sizer.api import sweep as sweep_frame

        return sweep_frame(scenario, vary, **options)


sys.modules[__name__].__class__ = _CallablePackage

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
import signal
import threading
import uuid
from collections import OrderedDict
from collections.abc import Callable, Iterable, Mapping, Sequence
from concurrent.futures import Future, ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Literal

import numpy as np

from sizer import fields
from sizer.candidates import MATERIALS, reprice
from sizer.catalogue.prices import PriceList
from sizer.errors import InfeasibleError, ScenarioError, SizerError, UnitError
from sizer.fields import Field
from sizer.model import Design, DesignStatus, Scenario
from sizer.optimize import Objective, Prepared, economic_params, optimise, path_drops_pct, prepare
from sizer.results import Results
from sizer.units import parse_money, parse_percent, parse_quantity, quantity
from sizer.validation import suggest
from sizer.workflow import solve_verified

Mode = Literal["grid", "oat"]
Progress = Callable[[int, int], None]

# A grid larger than this is almost certainly a typo in a count.
MAX_POINTS = 1_000_000
MAX_COUNT = 10_000
# Spawned workers import sizer afresh: safe beside threads (a progress bar) and the same
# on every platform, at the price of ~1.5 s of start-up per worker (measured).
_MP_CONTEXT = "spawn"
# With jobs left to the default, a sweep expected to take less than this serially runs
# in this process: starting the pool would cost more than it saves.
POOL_MIN_SECONDS = 4.0


# --- the fields a sweep can vary ---------------------------------------------------------


# The fields a sweep varies, from the one field registry; numbers are in ``Field.unit``.
FIELDS: Mapping[str, Field] = MappingProxyType({f.name: f for f in fields.sweep_fields()})
_ALIASES = {alias.split(".", 1)[1]: name for alias, name in fields.ALIASES.items()}
# A range to show in messages, per field.
_EXAMPLES = MappingProxyType({
    "energy_price": "0.06:0.30:9", "demand_charge": "8:20:4", "escalation": "0:4:5",
    "discount_rate": "4:10:4", "load_growth": "0:3:4", "lifetime": "15:40:6",
    "load_factor": "0.3:0.9:7", "loss_load_factor": "0.2:0.8:7", "hours": "4000:8760:5",
    "emission_factor": "0.2:0.8:4", "copper": "6:14:5", "aluminium": "2:4:5"})


def _field_error(name: str, message: str) -> ScenarioError:
    return ScenarioError(message, field=f"--vary {name}")


@dataclass(frozen=True)
class VaryRange:
    """One varied field and its values, in the field's unit (``Field.unit``)."""

    name: str
    values: tuple[float, ...]

    @property
    def spec(self) -> Field:
        """The field's specification."""
        return FIELDS[self.name]


def field_names() -> tuple[str, ...]:
    """Names a sweep can vary."""
    return tuple(FIELDS)


def parse_value(name: str, text: str, currency: str) -> float:
    """One value of a field in the field's unit; a bare number is taken in that unit.

    ``"0.12"`` and ``"0.12 USD/kWh"`` both read 0.12 for energy_price; ``"7"`` and
    ``"7 %"`` both read 7 for discount_rate; ``"25"`` and ``"300 month"`` read 25 years.
    The value must pass the scenario reader's own bounds for the field.
    """
    spec = FIELDS[name]
    t = text.strip()
    try:
        value = float(t)
    except ValueError:
        value = _with_unit(spec, t, currency)
    if not math.isfinite(value):
        raise _field_error(name, f"{text!r} is not a finite number")
    # The scenario's reader decides what is allowed, so a sweep never goes where a
    # scenario file could not.
    unit = spec.unit_in(currency)
    raw: object = value if not unit else f"{value!r} {unit}"
    try:
        spec.reader(currency)(raw, False)
    except ScenarioError as exc:
        raise _field_error(name, f"{text!r}: {exc.message}") from None
    return value


def _with_unit(spec: Field, text: str, currency: str) -> float:
    unit = spec.unit_in(currency)
    try:
        if spec.money_per:
            try:
                return parse_money(text, currency, spec.money_per)
            except UnitError:
                if not spec.alt_per:
                    raise
                return parse_money(text, currency, spec.alt_per)
        if spec.unit == "%":
            return parse_percent(text)
        if spec.unit == "":
            q = quantity(text)
            if not q.dimensionless:
                raise UnitError(f"{text!r} is a plain fraction such as 0.55 (or \"55 %\")")
            return float(q.to("").magnitude)
        return parse_quantity(text, unit)
    except UnitError as exc:
        shown = f"{unit}" if unit else "a plain number"
        raise _field_error(spec.name, f"{exc.message} (give {shown}, e.g. "
                                      f"{_example(spec)})") from None


def _example(spec: Field) -> str:
    return f"{spec.name}={_EXAMPLES[spec.name]}"


def parse_vary(text: str, currency: str) -> VaryRange:
    """Read ``name=start:stop:count`` (or ``name=v1,v2,...`` or ``name=value``).

    Values take units like the scenario (``"0.06 USD/kWh:0.30 USD/kWh:9"``) or are bare
    numbers in the field's unit. Raises ScenarioError naming ``--vary NAME``.
    """
    if not isinstance(text, str) or "=" not in text:
        raise ScenarioError(f"write NAME=START:STOP:COUNT, e.g. energy_price=0.06:0.30:9, "
                            f"got {text!r}", field="--vary")
    raw_name, _, body = text.partition("=")
    name = raw_name.strip().lower().replace("-", "_")
    name = _ALIASES.get(name, name)
    if name not in FIELDS:
        raise ScenarioError(f"unknown field {raw_name.strip()!r}{suggest(name, FIELDS)} "
                            f"(vary one of {', '.join(FIELDS)})", field="--vary")
    body = body.strip()
    if not body:
        raise _field_error(name, f"no values (write e.g. {_example(FIELDS[name])})")
    if ":" in body:
        parts = body.split(":")
        if len(parts) != 3:
            raise _field_error(name, f"a range is START:STOP:COUNT, got {body!r}")
        start = parse_value(name, parts[0], currency)
        stop = parse_value(name, parts[1], currency)
        try:
            count = float(parts[2].strip())
        except ValueError:
            raise _field_error(name, f"the count must be a whole number, got "
                                     f"{parts[2].strip()!r}") from None
        if not (count.is_integer() and 1 <= count <= MAX_COUNT):
            raise _field_error(name, f"the count must be a whole number from 1 to {MAX_COUNT}, "
                                     f"got {parts[2].strip()!r}")
        n = int(count)
        if n == 1:
            if start != stop:
                raise _field_error(name, "one point needs START equal to STOP (or write "
                                         "NAME=VALUE)")
            values: tuple[float, ...] = (start,)
        else:
            if not start < stop:
                raise _field_error(name, f"START must be below STOP, got {parts[0].strip()} "
                                         f"and {parts[1].strip()}")
            values = tuple(float(v) for v in np.linspace(start, stop, n))
    else:
        values = tuple(parse_value(name, v, currency) for v in body.split(",") if v.strip())
        if not values:
            raise _field_error(name, "no values")
        if any(b <= a for a, b in itertools.pairwise(values)):
            raise _field_error(name, "list the values in ascending order, each once")
    return VaryRange(name, values)


# --- one point's inputs ------------------------------------------------------------------


def base_value(prep: Prepared, name: str) -> float:
    """The scenario's own value of a field, in the field's unit."""
    spec = FIELDS[name]
    if spec.metal:
        return float(prep.prices.metal_per_kg[spec.metal])
    if spec.name == "loss_load_factor":
        return float(prep.economics.theta)
    value = float(getattr(prep.scenario.economics, spec.attr))
    # 0.07 → 7 %, rounded so that 7 / 100 gives back the scenario's 0.07 exactly.
    return float(f"{value * 100.0:.12g}") if spec.percent else value


def reindex_prices(prices: PriceList, metal_per_kg: Mapping[str, float]) -> PriceList:
    """The price list with the metal part of each conductor price moved to new prices.

    The same re-indexing as ``load_price_list`` (price += (new − now) × metal mass per
    metre), done on the arrays in memory. Raises ScenarioError for an impossible price.
    """
    conductor = dict(prices.conductor_per_m)
    now = dict(prices.metal_per_kg)
    for mat, new in metal_per_kg.items():
        listed = ~np.isnan(prices.conductor_per_m[mat])
        if not listed.any() or new == now[mat]:
            continue
        name = "copper" if mat == "Cu" else "aluminium"
        if not math.isfinite(now[mat]):
            raise _field_error(name, f"the price list ({prices.source}) does not say the "
                                     f"metal price its {mat} prices stand at, so they cannot be "
                                     f"re-indexed")
        if not (math.isfinite(new) and new > 0):
            raise _field_error(name, f"a metal price must be positive, got {new:g}")
        arr = prices.conductor_per_m[mat] + (new - now[mat]) * prices.metal_kg_per_m[mat]
        low = listed & ~(arr > 0)
        if low.any():
            size = prices.sizes[int(np.flatnonzero(low)[0])]
            raise _field_error(name, f"{mat} at {new:g} {prices.currency}/kg makes the {size} "
                                     f"price not positive")
        arr.setflags(write=False)
        conductor[mat] = arr
        now[mat] = float(new)
    return replace(prices, conductor_per_m=MappingProxyType(conductor),
                   metal_per_kg=MappingProxyType(now))


def prepared_at(base: Prepared, names: Sequence[str], values: Sequence[float]) -> Prepared:
    """The base problem at other field values: same rows, re-priced (no rebuild)."""
    econ_changes: dict[str, float] = {}
    metal: dict[str, float] = {}
    price_changes: dict[str, Any] = {}
    for name, value in zip(names, values, strict=True):
        spec = FIELDS[name]
        if spec.metal:
            metal[spec.metal] = float(value)
            price_changes[spec.attr] = float(value)
        else:
            # As the scenario reader does: "7 %" → 7 / 100.
            econ_changes[spec.attr] = float(value) / 100.0 if spec.percent else float(value)
    scenario = base.scenario
    try:
        if econ_changes:
            scenario = replace(scenario, economics=replace(scenario.economics, **econ_changes))
        if price_changes:
            scenario = replace(scenario, prices=replace(scenario.prices, **price_changes))
        econ = economic_params(scenario) if econ_changes else base.economics
    except ScenarioError as exc:
        where = _vary_name(exc.field, names)
        shown = ", ".join(f"{n}={v:g}" for n, v in zip(names, values, strict=True))
        raise _field_error(where, f"at {shown}: {exc.message}") from None
    prices = reindex_prices(base.prices, metal) if metal else base.prices
    table = reprice(base.table, base.segments, base.catalogue, prices, econ.loss_pv_per_w)
    return replace(base, scenario=scenario, prices=prices, economics=econ, table=table)


def nearest(values: Sequence[float], target: float) -> float:
    """The value closest to ``target`` (the first of two equally close)."""
    return min(values, key=lambda v: abs(v - target))


def _vary_name(model_field: str | None, names: Sequence[str]) -> str:
    """The varied field an economics validation error is about."""
    for name in names:
        if model_field and model_field.split(".")[-1] == name:
            return name
    return names[0]


# --- the work of one point (runs in workers) ------------------------------------------


@dataclass(frozen=True)
class _Payload:
    """Everything a worker needs, picklable: the scenario and its prices as plain arrays."""

    token: str
    scenario: Scenario
    prices: dict[str, Any]
    names: tuple[str, ...]
    objective: str
    engine: str
    solver: str
    time_limit_s: float | None
    verify: bool
    fixed: tuple[tuple[str, tuple[int, ...]], ...] = ()


def _price_state(prices: PriceList) -> dict[str, Any]:
    return {
        "currency": prices.currency, "source": prices.source, "catalogue": prices.catalogue,
        "sizes": tuple(prices.sizes),
        "conductor_per_m": {k: np.array(v) for k, v in prices.conductor_per_m.items()},
        "labour_per_m": {k: np.array(v) for k, v in prices.labour_per_m.items()},
        "metal_kg_per_m": {k: np.array(v) for k, v in prices.metal_kg_per_m.items()},
        "metal_per_kg": dict(prices.metal_per_kg),
    }


def _price_list(state: Mapping[str, Any]) -> PriceList:
    def frozen(arrays: Mapping[str, np.ndarray]) -> Mapping[str, np.ndarray]:
        out = {}
        for k, v in arrays.items():
            a = np.array(v, dtype=float)
            a.setflags(write=False)
            out[k] = a
        return MappingProxyType(out)

    return PriceList(
        currency=state["currency"], source=state["source"], catalogue=state["catalogue"],
        sizes=tuple(state["sizes"]), conductor_per_m=frozen(state["conductor_per_m"]),
        labour_per_m=frozen(state["labour_per_m"]),
        metal_kg_per_m=frozen(state["metal_kg_per_m"]),
        metal_per_kg=MappingProxyType(dict(state["metal_per_kg"])),
    )


@dataclass(frozen=True)
class Outcome:
    """What one solved point reports back (small, picklable)."""

    status: str
    choice: tuple[int, ...]
    capex: float
    loss_pv: float
    loss_kwh_per_year: float
    co2_kg_per_year: float
    fixed: tuple[tuple[str, float, float], ...]   # (design, capex, loss_pv) per fixed design
    message: str = ""


class _Worker:
    """The prepared base problem of a payload, solving points of it."""

    def __init__(self, payload: _Payload, base: Prepared | None = None) -> None:
        self.payload = payload
        self.base = base if base is not None else prepare(payload.scenario,
                                                          prices=_price_list(payload.prices))

    def solve(self, values: Sequence[float], objective: str | None = None) -> Outcome:
        """A full solve at the field values (load-flow checked unless ``verify`` is off)."""
        return self.solve_full(values, objective)[0]

    def solve_full(self, values: Sequence[float], objective: str | None = None
                   ) -> tuple[Outcome, Results | None]:
        """The solve's outcome and, when it could be prepared, its full results."""
        p = self.payload
        try:
            prep = prepared_at(self.base, p.names, values)
        except ScenarioError as exc:
            return Outcome(DesignStatus.NO_DESIGN, (), math.nan, math.nan, math.nan, math.nan,
                           (), str(exc)), None
        obj = Objective(objective or p.objective)
        ver = None
        if p.verify:
            design, ver = solve_verified(prep, obj, engine=p.engine, solver=p.solver,
                                         time_limit_s=p.time_limit_s)
        else:
            design = optimise(prep, obj, engine=p.engine, solver=p.solver,
                              time_limit_s=p.time_limit_s)
        return self._outcome(prep, design), Results(prep, design, ver)

    def _outcome(self, prep: Prepared, design: Design) -> Outcome:
        if not design.segments:
            return Outcome(design.status, (), math.nan, math.nan, math.nan, math.nan, (),
                           "; ".join(design.diagnosis))
        t = design.totals
        co2 = t.loss_kwh_per_year * prep.scenario.economics.emission_kg_per_kwh
        return Outcome(design.status, tuple(design.choice), t.capex, t.loss_pv,
                       t.loss_kwh_per_year, co2, self._fixed_costs(prep))

    def _fixed_costs(self, prep: Prepared) -> tuple[tuple[str, float, float], ...]:
        t = prep.table
        out = []
        for name, choice in self.payload.fixed:
            rows = np.asarray(choice, dtype=np.int64)
            out.append((name, float(t.capex[rows].sum()), float(t.loss_pv[rows].sum())))
        return tuple(out)

    def fixed_costs_at(self, values: Sequence[float]) -> tuple[tuple[str, float, float], ...]:
        """Costs of the fixed designs at the field values."""
        return self._fixed_costs(prepared_at(self.base, self.payload.names, values))

    def run(self, chunk: Sequence[tuple[int, tuple[float, ...]]]) -> list[tuple[int, Outcome]]:
        """Solve a chunk of (task index, values)."""
        return [(i, self.solve(values)) for i, values in chunk]


_WORKERS: OrderedDict[str, _Worker] = OrderedDict()
_WORKERS_LOCK = threading.Lock()
_WORKERS_KEPT = 4


def _worker_for(payload: _Payload) -> _Worker:
    """The worker of a payload in this process, prepared once (Dask tasks share a process)."""
    with _WORKERS_LOCK:
        worker = _WORKERS.get(payload.token)
        if worker is None:
            worker = _Worker(payload)
            _WORKERS[payload.token] = worker
            while len(_WORKERS) > _WORKERS_KEPT:
                _WORKERS.popitem(last=False)
        return worker


def _pool_init(payload: _Payload) -> None:
    """Process-pool initializer: prepare the problem once; leave Ctrl-C to the parent."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _worker_for(payload)


def _pool_chunk(token: str, chunk: list[tuple[int, tuple[float, ...]]]
                ) -> list[tuple[int, Outcome]]:
    """Process-pool task: solve a chunk with the worker the initializer prepared."""
    return _WORKERS[token].run(chunk)


def _dask_chunk(payload: _Payload, chunk: list[tuple[int, tuple[float, ...]]]
                ) -> list[tuple[int, Outcome]]:
    """Dask task: solve a chunk, preparing the problem once per worker process."""
    return _worker_for(payload).run(chunk)


# --- running the points: serial, process pool, Dask -------------------------------------

Chunk = list[tuple[int, tuple[float, ...]]]


@dataclass
class _Run:
    results: dict[int, Outcome] = field(default_factory=dict)
    interrupted: bool = False


def _chunks(tasks: Sequence[tuple[int, tuple[float, ...]]], workers: int) -> list[Chunk]:
    # About eight chunks per worker: even load, a live progress bar, a quick Ctrl-C.
    size = max(1, min(256, math.ceil(len(tasks) / max(1, 8 * workers))))
    return [list(tasks[i:i + size]) for i in range(0, len(tasks), size)]


def _run_serial(worker: _Worker, chunks: list[Chunk], progress: Progress, total: int) -> _Run:
    run = _Run()
    try:
        for chunk in chunks:
            run.results.update(worker.run(chunk))
            progress(len(run.results), total)
    except KeyboardInterrupt:
        run.interrupted = True
    return run


def _run_pool(payload: _Payload, chunks: list[Chunk], jobs: int, progress: Progress,
              total: int) -> _Run:
    import multiprocessing

    run = _Run()
    executor = ProcessPoolExecutor(max_workers=jobs,
                                   mp_context=multiprocessing.get_context(_MP_CONTEXT),
                                   initializer=_pool_init, initargs=(payload,))
    futures: list[Future[list[tuple[int, Outcome]]]] = []
    try:
        futures = [executor.submit(_pool_chunk, payload.token, c) for c in chunks]
        for fut in as_completed(futures):
            run.results.update(fut.result())
            progress(len(run.results), total)
    except KeyboardInterrupt:
        run.interrupted = True
        # Running chunks finish (workers ignore SIGINT); queued ones are dropped.
        executor.shutdown(wait=True, cancel_futures=True)
        for fut in futures:
            if fut.done() and not fut.cancelled() and fut.exception() is None:
                run.results.update(fut.result())
    except BrokenProcessPool as exc:
        raise SizerError(f"a sweep worker process stopped unexpectedly ({exc}); try --jobs 1"
                         ) from None
    finally:
        executor.shutdown(wait=True, cancel_futures=True)
    return run


def _run_dask(address: str, payload: _Payload, tasks: Sequence[tuple[int, tuple[float, ...]]],
              progress: Progress, total: int) -> _Run:
    try:
        from dask.distributed import Client
        from dask.distributed import as_completed as dask_completed
    except ImportError:
        raise SizerError("--scheduler needs Dask distributed: pip install 'sizer[dask]'"
                         ) from None
    try:
        client = Client(address, timeout="20s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise SizerError(f"cannot reach the Dask scheduler at {address}: {exc}") from None
    run = _Run()
    futures: list[Any] = []
    try:
        threads = sum(client.nthreads().values()) or 1
        [shared] = client.scatter([payload], broadcast=True, hash=False)
        futures = [client.submit(_dask_chunk, shared, chunk, pure=False)
                   for chunk in _chunks(tasks, threads)]
        try:
            for fut in dask_completed(futures, loop=client.loop):
                run.results.update(fut.result())
                progress(len(run.results), total)
        except KeyboardInterrupt:
            run.interrupted = True
            pending = [f for f in futures if not f.done()]
            client.cancel(pending)
            for fut in futures:
                if fut.status == "finished":
                    run.results.update(fut.result())
    finally:
        client.close()
    return run


# --- results -------------------------------------------------------------------------------


@dataclass(frozen=True)
class SweepPoint:
    """One solved point: the field values (fields' units), the optimum and fixed designs."""

    index: int
    values: tuple[float, ...]
    status: str
    capex: float
    loss_pv: float
    loss_kwh_per_year: float
    co2_kg_per_year: float
    segments: tuple[tuple[str, str, int], ...]   # (material, size, sets) per segment
    choice: tuple[int, ...]                       # candidate rows (same table at every point)
    fixed: Mapping[str, tuple[float, float]]      # design -> (capex, loss_pv) here
    message: str = ""

    @property
    def ok(self) -> bool:
        """True when the point has a design."""
        return bool(self.choice)

    @property
    def lifecycle(self) -> float:
        """Capex plus loss PV of the point's optimum."""
        return self.capex + self.loss_pv


@dataclass(frozen=True)
class Change:
    """Segments that choose differently between two neighbouring points along a field."""

    field: str
    from_point: int
    to_point: int
    segments: tuple[str, ...]


@dataclass(frozen=True)
class Breakeven:
    """Where one segment's choice flips along a field, between two neighbouring points.

    ``value`` is where the costs of the two fixed choices are equal: the segment's own
    two rows (``basis="segment"``) when swapping that segment alone keeps every drop
    limit and the crossing lies between the points, else the two whole designs
    (``basis="design"``: the segment moves together with others); ``"midpoint"`` only
    when neither crosses (never for an exactly solved sweep).
    """

    segment: str
    field: str
    value: float
    low: float
    high: float
    at: tuple[tuple[str, float], ...]     # the other fields' values
    before: tuple[str, str, int]          # (material, size, sets) below the value
    after: tuple[str, str, int]
    kind: str                             # material | size up | size down | sets up | sets down
    basis: str
    from_point: int
    to_point: int


@dataclass(frozen=True)
class TornadoBar:
    """The optimum's cost at a field's two ends, the other fields at the scenario's values."""

    field: str
    low: float
    high: float
    base: float
    optimum_low: float
    optimum_high: float
    today_low: float
    today_high: float

    @property
    def swing(self) -> float:
        """How far the optimum's cost moves across the field's range."""
        return abs(self.optimum_high - self.optimum_low)


@dataclass(frozen=True)
class SweepResult:
    """A finished (or interrupted) sweep: points in index order and what they show."""

    title: str
    currency: str
    objective: str
    mode: str
    fields: tuple[VaryRange, ...]
    base_values: tuple[float, ...]
    segment_ids: tuple[str, ...]
    points: tuple[SweepPoint, ...]          # done points only, by index
    points_total: int
    baseline: SweepPoint                    # today's optimum, at the scenario's values
    code_minimum: SweepPoint                # least capex, at the scenario's values
    ends: Mapping[tuple[float, ...], SweepPoint]   # solved one-at-a-time range ends
    changes: tuple[Change, ...]
    breakevens: tuple[Breakeven, ...]
    tornado: tuple[TornadoBar, ...]
    interrupted: bool = False
    notes: tuple[str, ...] = ()
    # How it ran; not part of the JSON document (serial, pool and Dask give the same).
    runner: str = "serial"
    seconds: float = 0.0
    # The full design at the scenario's own values, for a report (not in the document).
    baseline_results: Results | None = field(default=None, repr=False, compare=False)

    @property
    def names(self) -> tuple[str, ...]:
        """The varied fields' names."""
        return tuple(f.name for f in self.fields)

    def unit(self, name: str) -> str:
        """A field's unit in this project's currency."""
        return FIELDS[name].unit_in(self.currency)

    def cost(self, capex: float, loss_pv: float) -> float:
        """The objective's cost from capex and loss PV."""
        return capex if self.objective == Objective.CAPEX.value else capex + loss_pv

    def optimum_cost(self, p: SweepPoint) -> float:
        """The objective cost of a point's optimum."""
        return self.cost(p.capex, p.loss_pv)

    def fixed_cost(self, p: SweepPoint, design: str) -> float:
        """The objective cost of a fixed design ("today", "code_minimum") at a point."""
        capex, loss_pv = p.fixed.get(design, (math.nan, math.nan))
        return self.cost(capex, loss_pv)

    def regret(self, p: SweepPoint) -> float:
        """Today's design's cost at the point minus the point's optimum (≥ 0)."""
        return max(0.0, self.fixed_cost(p, "today") - self.optimum_cost(p))

    def line(self, name: str) -> tuple[list[SweepPoint], dict[str, float]]:
        """Points along one field, in order, the other fields fixed; and those fixed values.

        One-at-a-time: that field's points. Grid: the slice through the grid values
        nearest the scenario's own values.
        """
        k = self.names.index(name)
        fixed = {}
        for j, f in enumerate(self.fields):
            if j == k:
                continue
            if self.mode == "oat":
                fixed[f.name] = self.base_values[j]
            else:
                fixed[f.name] = nearest(f.values, self.base_values[j])
        pts = [p for p in self.points if p.ok and self._on_line(p, k, fixed)]
        if self.mode == "oat":
            # Each field's line holds its own points, in range order.
            start = sum(len(f.values) for f in self.fields[:k])
            pts = [p for p in pts if start <= p.index < start + len(self.fields[k].values)]
        return sorted(pts, key=lambda p: p.values[k]), fixed

    def _on_line(self, p: SweepPoint, k: int, fixed: Mapping[str, float]) -> bool:
        return all(p.values[j] == fixed[n] for j, n in enumerate(self.names) if j != k)

    def document(self) -> dict[str, Any]:
        """The JSON document (plain data; floats rounded when written with json_text)."""
        names = self.names

        def seg_list(p: SweepPoint) -> list[dict[str, Any]]:
            return [{"id": sid, "material": m, "size": s, "sets": n}
                    for sid, (m, s, n) in zip(self.segment_ids, p.segments, strict=True)]

        def point_doc(p: SweepPoint, with_index: bool = True) -> dict[str, Any]:
            doc: dict[str, Any] = {
                "values": dict(zip(names, p.values, strict=True)),
                "status": p.status,
                "totals": {"capex": p.capex, "loss_pv": p.loss_pv,
                           "lifecycle": p.lifecycle, "loss_kwh_per_year": p.loss_kwh_per_year,
                           "co2_kg_per_year": p.co2_kg_per_year},
                "segments": seg_list(p) if p.ok else [],
            }
            if p.ok:
                doc["fixed"] = {d: self.fixed_cost(p, d) for d in sorted(p.fixed)}
            if with_index:
                doc["index"] = p.index
            if p.message:
                doc["message"] = p.message
            return doc

        return {
            "title": self.title,
            "currency": self.currency,
            "objective": self.objective,
            "mode": self.mode,
            "fields": list(names),
            "units": {n: self.unit(n) for n in names},
            "ranges": {f.name: list(f.values) for f in self.fields},
            "base_values": dict(zip(names, self.base_values, strict=True)),
            "baseline": point_doc(self.baseline, with_index=False),
            "code_minimum": point_doc(self.code_minimum, with_index=False),
            "points": [point_doc(p) for p in self.points],
            "changes": [{"field": c.field, "from_point": c.from_point,
                         "to_point": c.to_point, "segments": list(c.segments)}
                        for c in self.changes],
            "breakevens": [{
                "segment": b.segment, "field": b.field, "value": b.value,
                "between": [b.low, b.high], "at": dict(b.at),
                "from": {"material": b.before[0], "size": b.before[1], "sets": b.before[2]},
                "to": {"material": b.after[0], "size": b.after[1], "sets": b.after[2]},
                "kind": b.kind, "basis": b.basis,
                "from_point": b.from_point, "to_point": b.to_point,
            } for b in self.breakevens],
            "tornado": [{
                "field": t.field, "low": t.low, "high": t.high, "base": t.base,
                "optimum": {"low": t.optimum_low, "base": self.optimum_cost(self.baseline),
                            "high": t.optimum_high},
                "today": {"low": t.today_low, "high": t.today_high},
                "swing": t.swing,
            } for t in self.tornado],
            "regret": [{"point": p.index, "today": self.fixed_cost(p, "today"),
                        "optimum": self.optimum_cost(p), "regret": self.regret(p)}
                       for p in self.points if p.ok],
            "interrupted": self.interrupted,
            "points_done": len(self.points),
            "points_total": self.points_total,
            "notes": list(self.notes),
        }


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


def _with(values: tuple[float, ...], k: int, v: float) -> tuple[float, ...]:
    return (*values[:k], v, *values[k + 1:])


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

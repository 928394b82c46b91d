"""Running the points of a sweep: in this process, a process pool or a Dask cluster."""

from __future__ import annotations

import math
import os
import signal
import threading
from collections import OrderedDict
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import Future, ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from sizer.catalogue.prices import PriceList, RacewayPrices
from sizer.errors import ScenarioError, SizerError
from sizer.model import Design, DesignStatus, Scenario
from sizer.optimize import Objective, Prepared, optimise, prepare
from sizer.parallel import WORKERS_ENV
from sizer.results import Results
from sizer.sweep.points import prepared_at
from sizer.workflow import solve_verified

Progress = Callable[[int, int], None]

# Spawned workers import sizer afresh: safe beside threads (a progress bar) and the same
# on every platform, at the price of ~1.5 s of start-up per worker (measured).
_MP_CONTEXT = "spawn"
# With jobs left to the default, a sweep expected to take less than this serially runs
# in this process: starting the pool would cost more than it saves.
POOL_MIN_SECONDS = 4.0


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
        "splice_each": {k: np.array(v) for k, v in prices.splice_each.items()},
        "terminals_path": prices.terminals_path,
        "raceways": (None if prices.raceways is None else
                     (dict(prices.raceways.per_m), prices.raceways.trench_per_m,
                      prices.raceways.source)),
        "insulation_type": dict(prices.insulation_type),
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
        splice_each=frozen(state["splice_each"]),
        terminals_path=state["terminals_path"],
        raceways=(None if state["raceways"] is None else
                  RacewayPrices(MappingProxyType(state["raceways"][0]), state["raceways"][1],
                                state["raceways"][2])),
        insulation_type=MappingProxyType(dict(state["insulation_type"])),
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
    # A forked worker inherits the command line's SIGTERM handler; the pool stops its
    # workers with SIGTERM, which should simply end them.
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    # the sweep's workers already fill the cores: their own solves run one at a time
    os.environ[WORKERS_ENV] = "1"
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

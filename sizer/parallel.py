"""Independent solves side by side on the machine's cores, results in the order asked.

The frontier's weights and the report's options are separate solves of one prepared
scenario. Where the platform forks, worker processes inherit the prepared scenario
without copying or pickling it, and each returns its small answer; elsewhere, or with
``SIZER_WORKERS=1``, the same calls run one after another. Either way the answers, and
their order, are the same.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
from collections.abc import Callable, Sequence
from typing import TypeVar

from threadpoolctl import threadpool_limits

__all__ = ["WORKERS_ENV", "ordered_map", "workers"]

WORKERS_ENV = "SIZER_WORKERS"

T = TypeVar("T")
R = TypeVar("R")

_task: Callable[[object], object] | None = None


def workers() -> int:
    """Processes to use: ``SIZER_WORKERS`` if set (at least 1), else the usable cores."""
    given = os.environ.get(WORKERS_ENV, "").strip()
    if given.isdigit() and int(given) >= 1:
        return int(given)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _run(item: object) -> object:
    assert _task is not None
    return _task(item)


def _worker_start() -> None:
    """Leave Ctrl-C to the parent; end quietly when the pool stops this worker; one thread.

    A forked worker inherits the command line's own signal handlers. Each worker is one
    of the cores already, so its linear-algebra library gets one thread: a thread pool
    per worker spins against the other workers (a 20,000-deep riser's frontier took 76 s
    on two workers, 39 s on one, and 19 s on two with one thread each).
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    threadpool_limits(limits=1)


def ordered_map(func: Callable[[T], R], items: Sequence[T]) -> list[R]:
    """``[func(x) for x in items]``, on forked worker processes when that can help.

    ``func`` may close over large read-only data (a prepared scenario): the workers see
    it by forking. Its answers must pickle. An exception in a worker is raised here.
    """
    n = min(workers(), len(items))
    # a pool's own workers may not start processes: they run the calls themselves
    if (n <= 1 or multiprocessing.current_process().daemon
            or "fork" not in multiprocessing.get_all_start_methods()):
        return [func(x) for x in items]
    global _task
    _task = func  # type: ignore[assignment]
    pool = multiprocessing.get_context("fork").Pool(n, initializer=_worker_start)
    try:
        answers: list[R] = pool.map(_run, items, chunksize=1)  # type: ignore[arg-type]
        pool.close()
        return answers
    except BaseException:
        pool.terminate()
        raise
    finally:
        pool.join()
        _task = None

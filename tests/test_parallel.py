"""Independent solves side by side: the same answers, in the same order, as one by one."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest

from sizer import parallel
from sizer.optimize import prepare
from sizer.scenario import load_scenario
from sizer.workflow import compare_options, frontier, frontier_designs

SCENARIOS = Path(__file__).parents[1] / "scenarios"


def _pid_and_square(x: int) -> tuple[int, int]:
    return os.getpid(), x * x


def test_answers_come_in_the_order_asked(monkeypatch):
    monkeypatch.setenv(parallel.WORKERS_ENV, "2")
    data = np.arange(10) * 3            # closed over: the workers see it by forking
    answers = parallel.ordered_map(lambda k: (os.getpid(), int(data[k]) ** 2), list(range(10)))
    assert [a for _, a in answers] == [(3 * k) ** 2 for k in range(10)]
    assert any(pid != os.getpid() for pid, _ in answers)


def _blas_threads(_: int) -> tuple[int, int]:
    from threadpoolctl import threadpool_info
    return os.getpid(), max((p["num_threads"] for p in threadpool_info()), default=1)


def test_each_worker_computes_on_one_thread(monkeypatch):
    # Two workers on two cores, each with a linear-algebra pool of two spinning threads,
    # took four times as long as they should (a deep riser's frontier: 76 s, not 19 s).
    monkeypatch.setenv(parallel.WORKERS_ENV, "2")
    np.ones(8) @ np.ones(8)             # the library is loaded before the fork
    answers = parallel.ordered_map(_blas_threads, list(range(4)))
    assert any(pid != os.getpid() for pid, _ in answers)
    assert all(threads == 1 for _, threads in answers)


def test_one_worker_runs_here(monkeypatch):
    monkeypatch.setenv(parallel.WORKERS_ENV, "1")
    assert parallel.workers() == 1
    answers = parallel.ordered_map(_pid_and_square, [1, 2, 3])
    assert answers == [(os.getpid(), 1), (os.getpid(), 4), (os.getpid(), 9)]


@pytest.mark.parametrize("value", ["", "0", "many", "-2"])
def test_a_missing_or_odd_setting_means_the_cores(monkeypatch, value):
    monkeypatch.setenv(parallel.WORKERS_ENV, value)
    assert parallel.workers() >= 1


def _fails(x: int) -> int:
    if x == 2:
        raise ValueError("two")
    return x


def test_a_worker_error_is_raised_here(monkeypatch):
    monkeypatch.setenv(parallel.WORKERS_ENV, "2")
    with pytest.raises(ValueError, match="two"):
        parallel.ordered_map(_fails, [1, 2, 3])


@pytest.fixture(scope="module")
def kiln():
    return prepare(load_scenario(SCENARIOS / "kiln-hall.toml"))


def test_the_frontier_is_the_same_on_one_or_two_workers(kiln, monkeypatch):
    monkeypatch.setenv(parallel.WORKERS_ENV, "1")
    alone = frontier(kiln, 6, fill=False)
    alone_designs = frontier_designs(kiln, alone)
    monkeypatch.setenv(parallel.WORKERS_ENV, "2")
    side = frontier(kiln, 6, fill=False)
    side_designs = frontier_designs(kiln, side)
    assert side == alone and len(alone) >= 2
    assert [d.totals for d in side_designs] == [d.totals for d in alone_designs]
    assert [d.violations for d in side_designs] == [d.violations for d in alone_designs]


def test_the_options_are_the_same_on_one_or_two_workers(kiln, monkeypatch):
    monkeypatch.setenv(parallel.WORKERS_ENV, "1")
    alone = compare_options(kiln)
    monkeypatch.setenv(parallel.WORKERS_ENV, "2")
    side = compare_options(kiln)
    assert [o.key for o in side] == [o.key for o in alone]
    assert [o.design.choice for o in side] == [o.design.choice for o in alone]
    assert [o.design.totals for o in side] == [o.design.totals for o in alone]


def test_the_command_line_with_workers_says_nothing_from_them(tmp_path, monkeypatch, capfd):
    # workers inherit the command line's signal handlers by forking; stopping the pool
    # must not print their tracebacks
    from sizer.cli import main

    monkeypatch.setenv(parallel.WORKERS_ENV, "2")
    report = tmp_path / "report.html"
    assert main(["solve", str(SCENARIOS / "kiln-hall.toml"), "--report", str(report),
                 "--quiet"]) == 0
    err = capfd.readouterr().err
    assert "Traceback" not in err and "ForkPoolWorker" not in err
    assert report.exists()

"""sizer as a library: ``sizer.solve`` and ``sizer.sweep`` for people who script studies.

Thin doors onto the workflow: each reads the scenario, runs what the command line runs
and returns what it computed, never printing. ``solve`` returns the one results object
(``sizer.results.Results``): ``result.schedule`` and ``result.frontier`` are pandas
DataFrames, ``result.totals`` the totals, ``result.report(path)`` writes the HTML
report. ``sweep`` returns one DataFrame row per point.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

    from sizer.model import Scenario
    from sizer.results import Results
    from sizer.sweep import SweepResult
    from sizer.sweep.vary import VaryRange


def _scenario(scenario: Scenario | str | Path) -> Scenario:
    from sizer.model import Scenario
    from sizer.scenario import load_scenario

    return scenario if isinstance(scenario, Scenario) else load_scenario(scenario)


def solve(scenario: Scenario | str | Path, objective: str = "lifecycle", *,
          engine: str = "auto", solver: str = "cbc", time_limit_s: float | None = None,
          motor_start: bool = False, compare: bool = True,
          frontier_points: int | None = None) -> Results:
    """Size every run of a scenario, verified by load flow, as ``sizer solve`` does.

    ``objective``: ``"lifecycle"`` (upfront + losses) or ``"capex"`` (code minimum).
    By default the options side by side and the frontier are computed too, so
    ``result.frontier`` is filled and ``result.report(path)`` writes the full report;
    ``compare=False, frontier_points=0`` is quicker when only the design is wanted.
    Raises ``sizer.errors.ScenarioError`` (a ValueError) on bad input; an impossible
    design is not an error: ``result.status`` says so and ``result.design.diagnosis``
    why.
    """
    from sizer.errors import ScenarioError
    from sizer.optimize import Objective, prepare
    from sizer.results import REPORT_FRONTIER_POINTS, solve_results

    try:
        goal = Objective(objective)
    except ValueError:
        raise ScenarioError(f"must be one of {', '.join(o.value for o in Objective)}, got "
                            f"{objective!r}", field="objective") from None
    points = REPORT_FRONTIER_POINTS if frontier_points is None else frontier_points
    prep = prepare(_scenario(scenario))
    return solve_results(prep, goal, engine=engine, solver=solver, time_limit_s=time_limit_s,
                         motor_start=motor_start, compare=compare, frontier_points=points)


def sweep_result(scenario: Scenario | str | Path, vary: Sequence[str | VaryRange],
                 **options: Any) -> SweepResult:
    """The whole sweep result (changes, break-evens, tornado, regret); see sizer.sweep."""
    from sizer.sweep import sweep as run

    return run(scenario, vary, **options)


def sweep(scenario: Scenario | str | Path, vary: Sequence[str | VaryRange],
          **options: Any) -> pd.DataFrame:
    """One row per point of a sweep, as ``sizer sweep`` solves them.

    ``vary``: texts like ``"energy_price=0.06:0.30:9"`` (units as in the scenario);
    ``options`` as ``sizer.sweep.sweep`` (mode, objective, jobs, engine, ...). Columns:
    the varied values with their unit in the name, status, capex, loss_pv, lifecycle,
    loss_kwh_per_year, today_cost and regret (money in the scenario's currency).
    """
    return sweep_result(scenario, vary, **options).points_frame

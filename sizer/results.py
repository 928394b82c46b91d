"""One results object per run: computed once by the workflow, only read afterwards.

The command line, ``sizer demo``, the HTML report, the files and the Python API all read
a :class:`Results`; none of them solves or verifies anything of its own. People who
script sizer get the schedule and the frontier as pandas DataFrames.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sizer.model import Design, DesignStatus, KeyFigures, Totals
from sizer.optimize import Objective, Prepared
from sizer.stages import stage
from sizer.workflow import (
    CheckedPoint,
    DisconnectionDriver,
    FrontierPoint,
    Option,
    Plan,
    Progress,
    Verification,
    check_frontier,
    check_verified,
    drivers_plan,
    frontier_plan,
    options_plan,
    quiet,
    run_plans,
    solve_verified,
)

if TYPE_CHECKING:
    import pandas as pd

# Over this many runs a report sums the schedule by panel and shows a frontier point's
# key figures only, so the results keep no whole design of one.
LARGE_TREE_RUNS = 2000

# Frontier points computed when a report asks for them: enough for the curve's shape,
# few enough to keep a report quick.
REPORT_FRONTIER_POINTS = 10
REPORT_FRONTIER_TIME_LIMIT_S = 20.0


@dataclass(frozen=True)
class Results:
    """A design, its verification, the options side by side, the frontier, and notes.

    ``options`` and ``frontier_points`` are empty unless the run asked for them (a
    report does); ``verification`` is None when there is no design. ``frontier_figures``
    are the frontier points' key figures, verified by load flow, and ``frontier_designs``
    the points as whole verified designs (both in the points' order) for the report's
    explorer; a tree of more than LARGE_TREE_RUNS runs keeps the figures only.
    """

    prep: Prepared
    design: Design
    verification: Verification | None
    options: tuple[Option, ...] = ()
    frontier_points: tuple[FrontierPoint, ...] = ()
    notes: tuple[str, ...] = field(default=())
    frontier_designs: tuple[Design, ...] = ()
    disconnection_drivers: tuple[DisconnectionDriver, ...] = ()
    frontier_figures: tuple[KeyFigures, ...] = ()

    @property
    def title(self) -> str:
        """The project's title."""
        return self.prep.scenario.title

    @property
    def status(self) -> DesignStatus:
        """The design's status."""
        return DesignStatus(self.design.status)

    @property
    def totals(self) -> Totals:
        """Upfront cost, loss PV and loss energy of the design."""
        return self.design.totals

    def document(self, extra: dict[str, Any] | None = None) -> dict[str, Any]:
        """The JSON results document (the keys other tools read)."""
        from sizer.loads import circuit_notes
        from sizer.report.export import design_document
        from sizer.rules.profile import table_status

        # Which tables are stand-ins or from memory, and what was assumed per run.
        more = {"table_status": table_status(self.prep.profile),
                "circuit_notes": list(circuit_notes(self.prep.segments))}
        return design_document(self.design, {**more, **(extra or {})})

    @cached_property
    def schedule(self) -> pd.DataFrame:
        """One row per run, units in the column names, as the CSV schedule."""
        from sizer.report.export import schedule_frame

        return schedule_frame(self.design)

    @cached_property
    def frontier(self) -> pd.DataFrame:
        """The frontier of upfront cost against loss PV, one row per point."""
        import pandas as pd

        return pd.DataFrame(
            [{"capex": p.capex, "loss_pv": p.loss_pv, "lifecycle": p.lifecycle,
              "method": p.method, "parameter": p.parameter,
              "proven_optimal": p.proven_optimal} for p in self.frontier_points],
            columns=["capex", "loss_pv", "lifecycle", "method", "parameter",
                     "proven_optimal"])

    def report(self, path: str | Path, *, protect: Sequence[Path] = (),
               extra_sections: Sequence[str] = (), progress: Progress = quiet) -> Path:
        """Write the self-contained HTML report; returns its path."""
        from sizer.report.html import write_report

        return write_report(path, self, protect=protect, extra_sections=extra_sections,
                            progress=progress)


def solve_results(prep: Prepared, objective: Objective = Objective.LIFECYCLE, *,
                  engine: str = "auto", solver: str = "cbc",
                  time_limit_s: float | None = None, motor_start: bool = False,
                  compare: bool = False, frontier_points: int = 0,
                  progress: Progress = quiet, design: Design | None = None,
                  verification: Verification | None = None) -> Results:
    """Solve and verify; with ``compare`` the options side by side, and the frontier.

    A report needs ``compare=True`` and ``frontier_points`` (REPORT_FRONTIER_POINTS).
    ``design``/``verification`` reuse a solve already made (a sweep's baseline).
    """
    if design is None:
        design, verification = solve_verified(prep, objective, engine=engine, solver=solver,
                                              time_limit_s=time_limit_s,
                                              motor_start=motor_start)
    plans: dict[str, Plan[Any]] = {}
    if compare and design.segments:
        plans["options"] = options_plan(prep, engine=engine, solver=solver,
                                        time_limit_s=time_limit_s, progress=progress,
                                        solved=[design])
        progress("runs sized by disconnection rather than drop")
        plans["drivers"] = drivers_plan(prep, design)
    if frontier_points and design.segments:
        progress("frontier of upfront cost against losses")
        plans["frontier"] = frontier_plan(
            prep, frontier_points, engine=engine, solver=solver,
            time_limit_s=REPORT_FRONTIER_TIME_LIMIT_S if time_limit_s is None
            else min(time_limit_s, REPORT_FRONTIER_TIME_LIMIT_S), progress=progress)
    # the options, the drivers' solve and the frontier's weights side by side, so that
    # no core waits for the longest of one of them
    done: dict[str, Any] = {}
    if plans:
        with stage("alternatives"):
            done = dict(zip(plans, run_plans(*plans.values()), strict=True))
    options: tuple[Option, ...] = tuple(done.get("options", ()))
    drivers: tuple[DisconnectionDriver, ...] = done.get("drivers", ())
    points: tuple[FrontierPoint, ...] = tuple(done.get("frontier", ()))
    checked: list[CheckedPoint] = []
    if points:   # a plain solve has no frontier: no stage to mark
        progress("verifying the frontier's designs")
        with stage("frontier_verify"):
            checked = check_frontier(prep, points,
                                     designs=len(prep.segments) <= LARGE_TREE_RUNS)
    # The frontier's points keep the linear drop estimate within its limits; one the load
    # flow finds over a total limit is not a compliant design, so it is not offered.
    kept = [c for c in checked if not c.over_limit]
    return Results(prep, design, verification, options, tuple(c.point for c in kept),
                   frontier_designs=tuple(c.design for c in kept if c.design is not None),
                   disconnection_drivers=drivers,
                   frontier_figures=tuple(c.figures for c in kept))


def check_results(prep: Prepared, *, engine: str = "auto", solver: str = "cbc",
                  time_limit_s: float | None = None) -> Results:
    """The design as pinned, checked and verified (``prep`` keeps its pins)."""
    design, verification = check_verified(prep, engine=engine, solver=solver,
                                          time_limit_s=time_limit_s)
    return Results(prep, design, verification)

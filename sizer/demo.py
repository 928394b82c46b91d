"""`sizer demo`: the bundled kiln-hall scenario end to end, report included.

Copies the scenario into a folder of its own, solves it for the lifecycle optimum with
load-flow verification, and writes the HTML report, the CSV (and, with openpyxl, XLSX)
schedule and the JSON results beside it. Existing files are never overwritten unless
asked.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path

from sizer.bundled import bundled_folder
from sizer.errors import ScenarioError, SizerError
from sizer.model import Design
from sizer.workflow import Progress, quiet

DEMO_SCENARIO = "kiln-hall.toml"
REPORT_NAME = "report.html"
CSV_NAME = "schedule.csv"
JSON_NAME = "results.json"
XLSX_NAME = "schedule.xlsx"




@dataclass(frozen=True)
class DemoResult:
    """What the demo wrote and the design it found."""

    folder: Path
    scenario: Path
    report: Path
    schedule_csv: Path
    results_json: Path
    schedule_xlsx: Path | None      # None when openpyxl is not installed
    design: Design
    title: str
    seconds: float

    @property
    def files(self) -> tuple[Path, ...]:
        """Every file written, scenario first."""
        out = (self.scenario, self.report, self.schedule_csv, self.results_json)
        return out + ((self.schedule_xlsx,) if self.schedule_xlsx else ())


def bundled_scenario(name: str = DEMO_SCENARIO) -> Path:
    """Path of a demo scenario shipped in ``scenarios/`` beside the package."""
    path = bundled_folder("scenarios") / name
    if not path.is_file():
        raise SizerError(f"the bundled demo scenario is missing: {path} "
                         "(reinstall sizer: the wheel carries its demo scenarios)")
    return path


def run_demo(folder: Path = Path("sizer-demo"), *, force: bool = False,
             progress: Progress = quiet) -> DemoResult:
    """Copy the demo scenario into ``folder``, solve it and write every output there."""
    from sizer.optimize import Objective, prepare
    from sizer.report.export import (
        atomic_write,
        json_text,
        schedule_csv,
        xlsx_available,
        xlsx_bytes,
    )
    from sizer.results import REPORT_FRONTIER_POINTS, solve_results
    from sizer.scenario import load_scenario

    start = time.perf_counter()
    source = bundled_scenario()
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise ScenarioError("exists and is not a folder", file=str(folder))
    with_xlsx = xlsx_available()
    targets = [folder / DEMO_SCENARIO, folder / REPORT_NAME, folder / CSV_NAME,
               folder / JSON_NAME] + ([folder / XLSX_NAME] if with_xlsx else [])
    if not force:
        for path in targets:
            if path.exists():
                raise ScenarioError("already exists; run with --force to overwrite it",
                                    file=str(path))
    folder.mkdir(parents=True, exist_ok=True)

    progress(f"copying {source.name} into {folder}")
    scenario_path = atomic_write(folder / DEMO_SCENARIO, source.read_bytes())
    progress("reading the scenario and building candidates")
    prep = prepare(load_scenario(scenario_path))
    progress(f"solving {len(prep.segments)} runs for the lifecycle optimum")
    results = solve_results(prep, Objective.LIFECYCLE, compare=True,
                            frontier_points=REPORT_FRONTIER_POINTS, progress=progress)
    design = results.design
    if not design.segments:
        raise SizerError("the demo scenario has no design: " + "; ".join(design.diagnosis))
    from sizer.outputs import Staged
    from sizer.report.html import render_report

    progress("writing the results, the schedule and the report")
    with Staged([scenario_path]) as stage:   # all appear together, or none
        json_path = stage.add(folder / JSON_NAME, json_text(results.document()))
        csv_path = stage.add(folder / CSV_NAME, schedule_csv(design))
        xlsx_path = stage.add(folder / XLSX_NAME, xlsx_bytes(design)) if with_xlsx else None
        report = stage.add(folder / REPORT_NAME, render_report(results, progress=progress))
    return DemoResult(folder=folder, scenario=scenario_path, report=report,
                      schedule_csv=csv_path, results_json=json_path, schedule_xlsx=xlsx_path,
                      design=design, title=prep.scenario.title,
                      seconds=time.perf_counter() - start)

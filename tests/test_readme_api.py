"""The README's Python example runs as written, and the library API keeps its promises."""

from __future__ import annotations

import contextlib
import io
import re
import shutil
from pathlib import Path

import pandas as pd
import pytest

import sizer
from sizer.errors import ScenarioError
from sizer.report.export import schedule_csv

ROOT = Path(__file__).resolve().parents[1]


def readme_python() -> str:
    """The first python block of the README."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = re.search(r"```python\n(.*?)```", text, re.S)
    assert block, "the README has no python example"
    return block.group(1)


@pytest.fixture(scope="module")
def example(tmp_path_factory):
    """The README example run in a folder laid out like the repository."""
    folder = tmp_path_factory.mktemp("readme")
    for name in ("scenarios", "costdata"):
        shutil.copytree(ROOT / name, folder / name)
    names: dict[str, object] = {}
    out = io.StringIO()
    with pytest.MonkeyPatch.context() as mp, contextlib.redirect_stdout(out):
        mp.chdir(folder)
        exec(compile(readme_python(), "README.md", "exec"), names)
    return folder, names, out.getvalue()


def test_the_readme_example_runs(example):
    folder, names, printed = example
    result = names["result"]
    assert isinstance(result, sizer.Results)
    assert (folder / "report.html").is_file()
    assert "USD upfront" in printed
    assert isinstance(names["points"], pd.DataFrame) and len(names["points"]) == 5


def test_schedule_is_one_row_per_run_as_the_csv(example):
    _, names, _ = example
    result = names["result"]
    frame = result.schedule
    assert isinstance(frame, pd.DataFrame)
    assert len(frame) == len(result.design.segments) == 45
    assert {"length_m", "current_a", "ampacity_a", "path_vd_pct", "loadflow_drop_pct",
            "capex", "loss_pv"} <= set(frame.columns)
    # The CSV is written from that frame: the same header and run order.
    header, *rows = schedule_csv(result.design).splitlines()
    assert header.split(",") == list(frame.columns)
    assert [r.split(",")[0] for r in rows] == list(frame["id"])
    assert result.totals.capex == pytest.approx(frame["capex"].sum())


def test_frontier_is_a_frame_of_non_dominated_points(example):
    _, names, _ = example
    front = names["result"].frontier
    assert len(front) >= 2
    ordered = front.sort_values("capex")
    # more upfront cost buys fewer losses along the frontier (non-dominated)
    assert ordered["loss_pv"].is_monotonic_decreasing


def test_sweep_frame_has_the_varied_values_and_costs(example):
    _, names, _ = example
    points = names["points"]
    assert list(points["energy_price [USD/kWh]"]) == pytest.approx([0.06, 0.12, 0.18, 0.24,
                                                                     0.30])
    assert (points["regret"] >= -1e-6).all()  # today's design never beats the optimum


def test_sweep_means_the_same_before_and_after_the_package_is_imported():
    import sizer.sweep as package

    assert sizer.sweep is package and callable(sizer.sweep)
    assert callable(package.sweep)  # the full SweepResult stays one import away


def test_a_bad_objective_is_a_scenario_error():
    with pytest.raises(ScenarioError, match="objective"):
        sizer.solve(ROOT / "scenarios" / "kiln-hall.toml", objective="cheapest")


def test_unknown_attribute():
    with pytest.raises(AttributeError):
        _ = sizer.no_such_thing

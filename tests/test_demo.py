"""`sizer demo`: an empty folder gets the scenario, report, schedules and results."""

from __future__ import annotations

import json

import pytest

from sizer import CAUTION
from sizer.demo import DEMO_SCENARIO, bundled_scenario, run_demo
from sizer.errors import ScenarioError
from sizer.report.export import xlsx_available


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo") / "sizer-demo"   # does not exist yet
    return run_demo(folder)


def test_writes_every_file(demo):
    names = sorted(p.name for p in demo.folder.iterdir())
    expected = [DEMO_SCENARIO, "report.html", "results.json", "schedule.csv"]
    if xlsx_available():
        expected.append("schedule.xlsx")
    assert names == sorted(expected)
    assert all(p.is_file() and p.stat().st_size > 0 for p in demo.files)
    assert demo.scenario.read_bytes() == bundled_scenario().read_bytes()


def test_results_match_the_design(demo):
    doc = json.loads(demo.results_json.read_text(encoding="utf-8"))
    assert doc["status"] == "optimal" and doc["objective"] == "lifecycle"
    assert len(doc["segments"]) == len(demo.design.segments) > 40
    assert doc["totals"]["capex"] == pytest.approx(demo.design.totals.capex, rel=1e-6)
    assert all(s["loadflow_drop_pct"] is not None for s in doc["segments"])
    csv_lines = demo.schedule_csv.read_text(encoding="utf-8").splitlines()
    assert len(csv_lines) == len(doc["segments"]) + 1
    # Data files carry no run date; the report does.
    assert "generated" not in demo.results_json.read_text(encoding="utf-8").lower()


def test_report_is_complete(demo):
    text = demo.report.read_text(encoding="utf-8")
    assert CAUTION in text
    assert "Ridgeback Tile Works" in text and "KILN-2" in text
    assert text.count("<img ") == 3  # profile, cost, cash flow; the frontier is inline SVG
    assert text.count("<svg") >= 3  # the frontier chart, the tree key and the tree


def test_refuses_to_overwrite_without_force(demo):
    before = demo.report.read_bytes()
    with pytest.raises(ScenarioError, match=r"already exists.*--force") as err:
        run_demo(demo.folder)
    assert err.value.file == str(demo.folder / DEMO_SCENARIO)
    assert demo.report.read_bytes() == before


def test_refuses_when_only_one_output_exists(tmp_path):
    (tmp_path / "schedule.csv").write_text("mine\n", encoding="utf-8")
    with pytest.raises(ScenarioError, match=r"schedule\.csv"):
        run_demo(tmp_path)
    assert (tmp_path / "schedule.csv").read_text(encoding="utf-8") == "mine\n"
    assert not (tmp_path / DEMO_SCENARIO).exists()  # nothing written before the check


def test_force_overwrites(demo):
    again = run_demo(demo.folder, force=True)
    assert again.results_json.read_bytes() == demo.results_json.read_bytes()  # deterministic


def test_folder_that_is_a_file(tmp_path):
    target = tmp_path / "taken"
    target.write_text("x", encoding="utf-8")
    with pytest.raises(ScenarioError, match="not a folder"):
        run_demo(target)

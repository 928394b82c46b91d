"""The report of a large tree stays a light page; the tree picture never recurses.

Over ``html.SUMMARY_OVER`` runs (2,000) the page sums the schedule by panel and points
to the CSV for every run, says how large it is, and embeds no per-run data. The tests
lower the threshold to summarise a small scenario, so they stay quick; the tree tests draw
chains thousands of levels deep (the recursive drawing failed at about 1,000).
"""

from __future__ import annotations

import html
import json
import re
import shutil

import pytest
from builders import write_scenario
from test_report_html import ALLOWED_TAGS, NODES, Page
from test_report_tree import SVG, drawn_runs, pictures, runs_of

from sizer.optimize import prepare
from sizer.report import html as report_html
from sizer.report import tree as tr
from sizer.report.html import render_report
from sizer.results import REPORT_FRONTIER_POINTS, solve_results
from sizer.scenario import load_scenario


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    """A small scenario with every section filled (the HTML report tests' own)."""
    path = write_scenario(tmp_path_factory.mktemp("scale"), NODES,
                          materials='["Cu", "Al"]', energy_price="0.15 USD/kWh")
    prep = prepare(load_scenario(path))
    return solve_results(prep, compare=True, frontier_points=REPORT_FRONTIER_POINTS)


@pytest.fixture(scope="module")
def light(results):
    """The page as a large tree gets it (the threshold lowered to 1 run)."""
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(report_html, "SUMMARY_OVER", 1)
        return render_report(results)


def embedded(text: str) -> dict:
    m = re.search(r'<script type="application/json" id="sizer-data">(.*?)</script>', text, re.S)
    assert m
    return json.loads(m.group(1))


def test_small_trees_keep_the_full_schedule(results):
    text = render_report(results)
    assert 'id="schedule-table"' in text and "schedule-summary" not in text
    assert "runs" in embedded(text)


def test_a_large_tree_sums_its_schedule_by_panel(results, light):
    design = results.design
    assert 'id="schedule-table"' not in light   # no row per run
    body = re.search(r'<table class="schedule-summary">.*?<tbody>(.*?)</tbody>', light, re.S)
    assert body
    rows = re.findall(r"<tr>(.*?)</tr>", body.group(1), re.S)
    panels = {s.parent for s in design.segments}
    assert len(rows) == len(panels)
    cells = [re.findall(r"<td[^>]*>(.*?)</td>", r) for r in rows]
    assert {html.unescape(c[0]) for c in cells} == panels
    assert sum(int(c[1].replace(",", "")) for c in cells) == len(design.segments)
    assert sum(int(c[8].replace(",", "")) for c in cells) == len(design.violations)
    upfront = sum(float(c[3].replace(",", "")) for c in cells)
    assert upfront == pytest.approx(design.totals.capex, abs=len(cells))   # rounded cells
    assert "in the CSV file" in light


def test_a_large_page_states_its_own_size(light):
    note = re.search(r'id="schedule-summary-note">(.*?)</p>', light, re.S)
    assert note
    stated = re.search(r"this page stays light \((\d+(?:\.\d)?) (kB|MB)\)", note.group(1))
    assert stated
    size = float(stated.group(1)) * (1e3 if stated.group(2) == "kB" else 1e6)
    assert size == pytest.approx(len(light.encode("utf-8")), abs=1e3 if size < 1e5 else 1e5)
    assert "\x00" not in light


def test_a_large_page_embeds_totals_only(results, light):
    data = embedded(light)
    assert "runs" not in data
    for point in data["points"]:
        assert "pick" not in point and "est" not in point
        assert point["changed"] >= 0
    assert data["points"][data["reference"]]["changed"] == 0
    page = Page(light)
    assert set(page.tags) <= ALLOWED_TAGS
    # every link on the page leads somewhere on the page
    ids = set(re.findall(r'\bid="([^"]+)"', light))
    assert {h for h in re.findall(r'href="#([^"]+)"', light)} <= ids


# --- the tree picture, deep and wide -------------------------------------------------------


def widest_levels(svg) -> int:
    """Tree levels a picture spans (from its width)."""
    width = float(svg.attrib["width"])
    return round((width - 2 * tr.MARGIN - tr.BOX_W - 40) / tr.COLUMN) + 1


def test_a_chain_below_the_large_size_is_drawn_whole_in_pictures_of_bounded_depth():
    n = tr.LARGE_TREE_RUNS - 100
    page = tr.tree_html("SRC", runs_of([i - 1 for i in range(n)]), drop_basis="x")
    assert sorted(set(drawn_runs(page))) == list(range(n))
    for svg in pictures(page):
        assert widest_levels(svg) <= tr.MAX_DEPTH + 1
    ids = set(re.findall(r'\bid="([^"]+)"', page))
    assert set(re.findall(r'href="#([^"]+)"', page)) <= ids


@pytest.mark.parametrize("depth", [3000, 20000])
def test_a_very_deep_chain_draws_without_recursion_and_stays_light(depth):
    page = tr.tree_html("SRC", runs_of([i - 1 for i in range(depth)]), drop_basis="x")
    overview, *details = pictures(page)
    assert widest_levels(overview) <= tr.MAX_DEPTH + 1
    boxes = sum(1 for svg in details for el in svg.iter(f"{SVG}rect"))
    assert boxes <= 3 * tr.DETAIL_BOX_BUDGET   # at most three rects to a box
    assert "have no picture of their own" in page
    ids = set(re.findall(r'\bid="([^"]+)"', page))
    assert set(re.findall(r'href="#([^"]+)"', page)) <= ids


def test_a_wide_large_tree_draws_no_picture_per_circuit():
    parents: list[int] = []
    for _board in range(8):
        board = len(parents)
        parents.append(-1)
        for _panel in range(10):
            panel = len(parents)
            parents.append(board)
            parents += [panel] * 30
    assert len(parents) > tr.LARGE_TREE_RUNS
    page = tr.tree_html("SRC", runs_of(parents), drop_basis="x")
    assert "circuits (listed in the schedule)" in page
    assert not re.search(r'id="tree-g', page)   # no picture of single circuits
    assert len(page) < 1_000_000


# --- the light page in a browser ----------------------------------------------------------


@pytest.mark.skipif(shutil.which("chromium") is None or shutil.which("chromedriver") is None,
                    reason="chromium and chromium-driver not installed")
def test_the_light_page_switches_designs_in_a_browser(light, tmp_path):
    from test_report_webdriver import make_driver

    path = tmp_path / "light.html"
    path.write_text(light, encoding="utf-8")
    driver = make_driver(tmp_path)
    try:
        driver.get(path.resolve().as_uri())
        data = driver.execute_script("return window.sizerReport.data;")
        seen = set()
        for i in range(len(data["points"])):
            driver.execute_script("window.sizerReport.show(arguments[0]);", i)
            capex = driver.execute_script(
                "return document.querySelector('[data-card=capex] .value').textContent;")
            words = driver.execute_script(
                "return document.getElementById('explore-diff').textContent;")
            assert words.startswith("Showing ")
            seen.add(capex)
        assert len(seen) > 1   # the key figures follow the design shown
        errors = [e for e in driver.get_log("browser") if e["level"] == "SEVERE"]
        assert not errors, errors
    finally:
        driver.quit()

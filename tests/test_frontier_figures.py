"""A frontier point's key figures: the same from the table's columns as from its design.

A large tree's results keep each frontier point as key figures only (no record per run);
the light page they make must be the page the whole designs make.
"""

from __future__ import annotations

import json
import re

import pytest

from sizer import results as results_module
from sizer.demo import bundled_scenario
from sizer.optimize import prepare
from sizer.report import html as report_html
from sizer.report.html import render_report
from sizer.results import REPORT_FRONTIER_POINTS, solve_results
from sizer.scenario import load_scenario
from sizer.workflow import check_frontier, frontier

# kestrel-arena has a shared route: a frontier point's rows move to their route's actual
# derating before the load flow, so its design's choice differs from the solver's.
SCENARIOS = ("kiln-hall.toml", "kestrel-arena.toml")


@pytest.fixture(scope="module", params=SCENARIOS)
def prepared(request):
    return prepare(load_scenario(bundled_scenario(request.param)))


def test_figures_from_columns_equal_the_designs(prepared):
    points = frontier(prepared, 6)
    whole = check_frontier(prepared, points, designs=True)
    light = check_frontier(prepared, points, designs=False)
    assert len(points) >= 3
    for w, f in zip(whole, light, strict=True):
        assert f.design is None and w.design is not None
        assert f.figures == w.figures            # exactly: same sums in the same order
        assert f.over_limit == w.over_limit
        assert w.figures.findings == len(w.design.violations)
        assert w.figures.drop_basis == "AC load flow"


def embedded(text: str) -> dict:
    m = re.search(r'<script type="application/json" id="sizer-data">(.*?)</script>', text, re.S)
    assert m
    return json.loads(m.group(1))


@pytest.fixture(scope="module")
def both():
    """kestrel-arena's results whole, and as a tree over the large-tree size keeps them."""
    prep = prepare(load_scenario(bundled_scenario("kestrel-arena.toml")))
    whole = solve_results(prep, compare=True, frontier_points=REPORT_FRONTIER_POINTS)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(results_module, "LARGE_TREE_RUNS", 1)
        light = solve_results(prep, compare=True, frontier_points=REPORT_FRONTIER_POINTS,
                              design=whole.design, verification=whole.verification)
    return whole, light


def test_a_large_tree_keeps_figures_not_designs(both):
    whole, light = both
    assert len(whole.frontier_designs) == len(whole.frontier_points) >= 3
    assert light.frontier_designs == ()
    assert light.frontier_points == whole.frontier_points
    assert light.frontier_figures == whole.frontier_figures
    assert [d.key_figures() for d in whole.frontier_designs] == list(whole.frontier_figures)


def test_the_light_page_is_the_same_from_figures_as_from_designs(both):
    whole, light = both
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(report_html, "SUMMARY_OVER", 1)
        from_designs = render_report(whole)
        from_figures = render_report(light)
    assert from_figures == from_designs
    assert "changed" in embedded(from_figures)["points"][0]


def test_each_point_keeps_its_method_on_the_page(both):
    """An ε-constraint point stays hollow even when its rows moved to the route's band.

    (The page once looked the method up by the design's rows, found nothing for such a
    point and called it a weighted sum.)
    """
    whole, _ = both
    data = embedded(render_report(whole))
    by_capex = {round(p["capex"], 2): p["method"] for p in data["points"] if p["method"]}
    methods = {p.method for p in whole.frontier_points}
    assert "epsilon constraint" in methods
    for point, figures in zip(whole.frontier_points, whole.frontier_figures, strict=True):
        assert by_capex.get(round(figures.totals.capex, 2), point.method) == point.method

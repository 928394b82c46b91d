"""The explorer's embedded designs: each frontier point reproduced from its compact form."""

from __future__ import annotations

import json
import math
import re

import pytest

from sizer.demo import bundled_scenario
from sizer.optimize import prepare
from sizer.report import explore as ex
from sizer.report.html import render_report
from sizer.results import REPORT_FRONTIER_POINTS, solve_results
from sizer.scenario import load_scenario


@pytest.fixture(scope="module")
def page():
    prep = prepare(load_scenario(bundled_scenario("kiln-hall.toml")))
    results = solve_results(prep, compare=True, frontier_points=REPORT_FRONTIER_POINTS)
    text = render_report(results)
    m = re.search(r'<script type="application/json" id="sizer-data">(.*?)</script>', text, re.S)
    assert m
    return results, json.loads(m.group(1)), text


def test_every_frontier_design_is_embedded(page):
    results, data, _ = page
    embedded = {round(p["capex"], 2) for p in data["points"]}
    for d in results.frontier_designs:
        assert round(d.totals.capex, 2) in embedded
    assert data["points"][data["shown"]]["capex"] == pytest.approx(results.design.totals.capex)


def test_the_chosen_rows_rebuild_each_design(page):
    results, data, _ = page
    designs = {round(d.totals.capex, 2): d for d in (*results.frontier_designs, results.design)}
    for p in data["points"]:
        d = designs.get(round(p["capex"], 2))
        if d is None:
            continue  # an option (code minimum) not among the frontier's points
        conductors = [data["runs"][i]["alts"][k][0] for i, k in enumerate(p["pick"])]
        assert conductors == [ex.conductor(s) for s in d.segments]
        # columns: conductor, EGC, ampacity, own drop, capex, loss kW, loss PV, use %
        capex = math.fsum(data["runs"][i]["alts"][k][4] for i, k in enumerate(p["pick"]))
        assert capex == pytest.approx(d.totals.capex, abs=0.01 * len(d.segments))
        assert [v / 100 for v in p["est"]] == pytest.approx(
            [s.path_vd_pct for s in d.segments], abs=0.006)
        assert [v / 100 for v in p["lf"]] == pytest.approx(
            [s.loadflow_drop_pct for s in d.segments], abs=0.006)


def test_points_run_from_least_upfront_to_least_losses(page):
    _, data, _ = page
    capex = [p["capex"] for p in data["points"]]
    assert capex == sorted(capex)
    assert data["points"][data["reference"]]["label"].startswith("lifecycle optimum")
    cm = data["points"][data["codeMinimum"]]
    # The frontier's weighted sums hold the linear drop estimate to its limit; the code
    # minimum is also held to the load flow (the closed loop tightens its budget), so a
    # frontier point may be cheaper only by failing the load flow: it carries those
    # findings. Among points without extra findings, the code minimum is the cheapest.
    clean = [p["capex"] for p in data["points"] if p["findings"] <= cm["findings"]]
    assert cm["capex"] == min(clean) and cm["up"] == []  # nothing is upsized from itself


def test_the_lifecycle_optimum_has_the_least_lifetime_total(page):
    _, data, _ = page
    ref = data["points"][data["reference"]]
    for p in data["points"]:
        assert ref["capex"] + ref["losspv"] <= p["capex"] + p["losspv"] + 1e-6


def test_no_text_can_close_the_data_element():
    text = ex.data_script({"id": "</script><script>alert(1)</script> & <!--"})
    inner = text[text.index(">") + 1: text.rindex("</script>")]
    assert "<" not in inner and ">" not in inner and "&" not in inner
    assert json.loads(inner) == {"id": "</script><script>alert(1)</script> & <!--"}


@pytest.mark.parametrize(("own", "path", "limits", "expected"), [
    (1.0, 4.96, ex.RunLimits(3.0, 5.0), True),     # path within 0.05 of 5 %
    (1.0, 4.90, ex.RunLimits(3.0, 5.0), False),
    (2.97, 3.5, ex.RunLimits(3.0, math.inf), True),  # own drop at its 3 % limit
])
def test_binding_is_within_the_tolerance_of_a_limit(page, own, path, limits, expected):
    results, _, _ = page
    from dataclasses import replace

    s = replace(results.design.segments[0], vd_pct=own, path_vd_pct=path,
                loadflow_drop_pct=None)
    assert ex.binds(s, limits) is expected
    # the load flow's drop counts too: it is what the closed loop holds to the limit
    flow = replace(s, loadflow_drop_pct=limits.path_pct - 0.01)
    assert ex.binds(flow, limits) is (True if math.isfinite(limits.path_pct) else expected)

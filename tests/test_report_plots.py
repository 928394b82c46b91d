"""Report figures: each draws the expected series from its table, with labelled axes."""

from __future__ import annotations

import io
import re

import matplotlib.image as mpimg
import pytest
from matplotlib.figure import Figure

from sizer.report import plots
from sizer.report import tables as tb

UNIT = re.compile(r"\((?:USD|m|year|% of nominal voltage)\)$")


def axes_of(fig: Figure):
    (ax,) = fig.axes
    return ax


def assert_labelled(ax) -> None:
    for label in (ax.get_xlabel(), ax.get_ylabel()):
        assert label, "every axis is labelled"
        assert UNIT.search(label), f"axis label without a unit: {label!r}"


def assert_renders(fig: Figure) -> None:
    png = plots.png_bytes(fig, dpi=40)
    image = mpimg.imread(io.BytesIO(png), format="png")
    assert image.shape[0] > 50 and image.shape[1] > 50
    assert image.reshape(-1, image.shape[-1]).std(axis=0).max() > 0.05  # not blank


FRONTIER = (
    tb.FrontierRow(100.0, 900.0, 1000.0, "weighted sum", True),
    tb.FrontierRow(150.0, 600.0, 750.0, "epsilon constraint", True),
    tb.FrontierRow(200.0, 450.0, 650.0, "weighted sum", True),
    tb.FrontierRow(400.0, 350.0, 750.0, "weighted sum", True),
)


def option(key: str, capex: float, loss_pv: float, feasible: bool = True) -> tb.OptionRow:
    nan = float("nan")
    if not feasible:
        capex = loss_pv = nan
    return tb.OptionRow(key, key.replace("_", " "), "optimal" if feasible else "infeasible",
                        capex, loss_pv, capex + loss_pv, 1.0, 1.0, 3.0, 3.1, 0.4, 4.0)


def test_frontier_series():
    options = [option("code_minimum", 100, 900), option("lifecycle", 200, 450),
               option("all_copper", 300, 600), option("as_pinned", 0, 0, feasible=False)]
    fig = plots.frontier_figure(FRONTIER, options, "USD", 25)
    ax = axes_of(fig)
    labels = [line.get_label() for line in ax.get_lines()]
    # frontier curve + 2 methods + 3 feasible options + equal-lifetime-total line = 7
    assert len(labels) == 7
    assert "weighted-sum point" in labels and "ε-constraint point" in labels
    # The methods differ by marker and fill, not colour alone.
    ws = next(li for li in ax.get_lines() if li.get_label() == "weighted-sum point")
    eps = next(li for li in ax.get_lines() if li.get_label() == "ε-constraint point")
    assert (ws.get_marker(), ws.get_fillstyle()) != (eps.get_marker(), eps.get_fillstyle())
    assert list(ws.get_xdata()) == [100.0, 200.0, 400.0]
    assert_labelled(ax)
    assert "over 25 years" in ax.get_ylabel()
    assert_renders(fig)


def test_frontier_with_one_method_only():
    fig = plots.frontier_figure(FRONTIER[:1], [option("code_minimum", 100, 900)], "USD", 10)
    assert len(axes_of(fig).get_lines()) == 3  # curve, weighted-sum points, one option


PROFILE = tb.VoltageProfile("LOAD$1", (
    tb.ProfilePoint("SRC", 0.0, 0.0, 0.0),
    tb.ProfilePoint("MAIN", 20.0, 0.5, 0.52),
    tb.ProfilePoint("LOAD$1", 90.0, 3.0, 3.1),
), True)


def test_voltage_profile_series_and_limits():
    fig = plots.voltage_profile_figure(PROFILE, 3.0, 5.0)
    ax = axes_of(fig)
    lines = ax.get_lines()
    # estimate, load flow, 5 % total limit, 3 % per-run limit
    assert len(lines) == 4
    assert [li.get_ydata()[0] for li in lines[2:]] == [5.0, 3.0]
    # Told apart without colour: style, marker and width differ for every series.
    looks = {(li.get_linestyle(), li.get_marker(), li.get_linewidth()) for li in lines}
    assert len(looks) == 4
    assert list(lines[1].get_ydata()) == [0.0, 0.52, 3.1]
    assert_labelled(ax)
    # A "$" from the scenario is shown as text, not taken for mathematics.
    assert "LOAD\\$1" in ax.get_title(loc="left")
    assert_renders(fig)


def test_voltage_profile_without_load_flow():
    est_only = tb.VoltageProfile("L", tuple(tb.ProfilePoint(p.node, p.distance_m, p.drop_pct,
                                                            None) for p in PROFILE.points),
                                 False)
    assert len(axes_of(plots.voltage_profile_figure(est_only, 3.0, 5.0)).get_lines()) == 3


def cash_flow(added: float, saving: float, years: int = 10) -> tb.CashFlow:
    rows = [tb.CashFlowRow(0, -added, -added, -added)]
    for n in range(1, years + 1):
        rows.append(tb.CashFlowRow(n, saving, -added + n * saving,
                                   -added + sum(saving / 1.05**k for k in range(1, n + 1))))
    return tb.CashFlow(tuple(rows), added, saving, added / saving,
                       rows[-1].cumulative_discounted)


def test_cash_flow_series_and_crossing():
    fig = plots.cash_flow_figure(cash_flow(750.0, 500.0), "USD", 0.05)
    ax = axes_of(fig)
    lines = ax.get_lines()
    # undiscounted, discounted, zero line, and the one payback figure the page uses: simple
    assert len(lines) == 4
    simple = next(li for li in lines if li.get_label().startswith("simple payback"))
    assert simple.get_xdata()[0] == pytest.approx(1.5)  # 750 / 500
    assert "1.5 years" in simple.get_label()
    assert not any("discounted" in li.get_label() and "payback" in li.get_label()
                   for li in lines)
    assert_labelled(ax)
    assert_renders(fig)


def test_cash_flow_that_never_pays_back_has_no_marker():
    fig = plots.cash_flow_figure(cash_flow(10_000.0, 100.0), "USD", 0.05)
    assert len(axes_of(fig).get_lines()) == 3


def test_cost_breakdown_bars():
    rows = (tb.CostRow("A", 500.0, 800.0), tb.CostRow("B<&>", 300.0, 100.0),
            tb.CostRow("other 3 runs", 50.0, 20.0, 3))
    fig = plots.cost_breakdown_figure(rows, "USD", 25)
    ax = axes_of(fig)
    assert len(ax.containers) == 2  # upfront, loss PV
    upfront, loss = ax.containers
    assert [b.get_width() for b in upfront] == [500.0, 300.0, 50.0]
    assert [b.get_x() for b in loss] == [500.0, 300.0, 50.0]  # stacked after the upfront
    assert any(b.get_hatch() for b in loss)  # hatched: readable in greyscale
    assert [t.get_text() for t in ax.get_yticklabels()] == ["A", "B<&>", "other 3 runs"]
    assert ax.get_xlabel() == "Cost (USD)" and ax.get_ylabel()
    assert_renders(fig)


def test_voltage_profile_of_a_riser_thousands_of_runs_long_names_a_dozen():
    # A 20,000-run chain: one annotation per node would be 20,000 text artists.
    points = [tb.ProfilePoint("SRC", 0.0, 0.0, 0.0)] + [
        tb.ProfilePoint(f"F{i}", 3.0 * i, 0.0002 * i, 0.0002 * i) for i in range(1, 20001)]
    fig = plots.voltage_profile_figure(tb.VoltageProfile("F20000", tuple(points), True),
                                       3.0, 5.0)
    ax = axes_of(fig)
    names = [t.get_text() for t in ax.texts]
    assert len(names) <= plots.MAX_PROFILE_LABELS
    assert names[0] == "SRC" and names[-1] == "F20000"   # the source and the worst load
    assert all(li.get_marker() in ("", "None", None) for li in ax.get_lines()[:2])
    assert len(ax.get_lines()[0].get_xdata()) == len(points)   # the whole path is drawn

"""The sensitivity sweep: break-evens against the IEC 60287-3-2 closed form, regret,
sweeps against separate solves, and serial / process pool / Dask runs agreeing."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from builders import write_scenario
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sizer.candidates import reprice
from sizer.errors import ScenarioError, SizerError
from sizer.optimize import Objective, prepare
from sizer.report.sweep_plots import (
    sweep_json_text,
    sweep_section_html,
    sweep_summary_text,
    unique_breakevens,
    write_sweep_json,
)
from sizer.scenario import load_scenario
from sizer.sweep import (
    FIELDS,
    base_value,
    parse_vary,
    prepared_at,
    sweep,
)
from sizer.workflow import solve_verified

# One 3-phase 480 V run of 400 ft carrying 150 A, copper only, one set: the textbook case
# of IEC 60287-3-2 (one circuit, its size chosen by cost over life alone).
ONE_RUN = """
[[node]]
id = "PUMP-7"
parent = "SRC"
length = "400 ft"
load = "150 A"
"""

# A panel and three branches, copper or aluminium (invented demo data).
TREE = """
[[node]]
id = "PANEL-A"
parent = "SRC"
length = "150 ft"
ocpd = "400 A"

[[node]]
id = "OVEN-1"
parent = "PANEL-A"
length = "220 ft"
load = "90 kW"
power_factor = 1.0
continuous = true

[[node]]
id = "COMP-2"
parent = "PANEL-A"
length = "180 ft"
load = "60 A"
power_factor = 0.85

[[node]]
id = "LTG-3"
parent = "PANEL-A"
length = "260 ft"
phases = 1
voltage = "277 V"
load = "3 kW"
ocpd = "20 A"
"""


@pytest.fixture(scope="module")
def one_run(tmp_path_factory):
    return write_scenario(tmp_path_factory.mktemp("one"), ONE_RUN, max_sets=1)


@pytest.fixture(scope="module")
def tree(tmp_path_factory):
    return write_scenario(tmp_path_factory.mktemp("tree"), TREE, materials='["Cu", "Al"]')


def _row(prep, size: str, material: int = 0, sets: int = 1) -> int:
    t = prep.table
    k = prep.catalogue.index(size)
    hits = np.flatnonzero((t.material == material) & (t.size_index == k) & (t.sets == sets))
    assert hits.size == 1
    return int(hits[0])


# --- the break-even against the closed form -----------------------------------------------


def test_break_even_energy_price_matches_iec_60287_3_2_closed_form(one_run, tmp_path):
    """IEC 60287-3-2:2012 clause 4, the cost of a size over its life:

        CT = CI + CJ,   CJ = I²·R·l·F,   F = Np·Nc·(T·P + D)·Q/(1 + i)
        Q = (1 − r^N)/(1 − r),   r = (1 + a)²·(1 + b)/(1 + i),   T = 8760·ϑ

    Sizes S and S+1 cost the same over life where
        CI_S + I²·R_S·l·F = CI_S+1 + I²·R_S+1·l·F   ⇔   ΔCI = ΔR·I²·l·F
    with ΔCI = CI_S+1 − CI_S and ΔR = R_S − R_S+1 (Ω/m), so
        F* = ΔCI/(ΔR·I²·l)   and, with D = 0,   P* = F*·(1 + i)/(Np·Nc·T·Q).
    """
    prep = prepare(load_scenario(one_run))
    seg = prep.segments[0]
    i_a = seg.current_a
    assert i_a == pytest.approx(150.0)
    length_m = seg.length_m                    # 400 ft = 121.92 m
    s, s1 = _row(prep, "4/0 AWG"), _row(prep, "250 kcmil")
    t = prep.table
    delta_ci = t.capex[s1] - t.capex[s]        # installed cost of the run, USD
    # R per metre of one conductor at its operating temperature (the table's run value / l).
    delta_r = (t.r_ohm[s] - t.r_ohm[s1]) / length_m
    n_p, n_c = 3, 1                            # three phase conductors, one circuit
    i, a, b, n_years = 0.07, 0.0, 0.0, 25      # builders.HEAD: 7 %, escalation 0 %, 25 year
    lf = 0.6                                   # builders.HEAD load factor
    theta = 0.3 * lf + 0.7 * lf**2             # loss load factor, Buller–Woodrow (common practice)
    t_h = 8760.0 * theta
    r = (1 + a) ** 2 * (1 + b) / (1 + i)
    q = (1 - r**n_years) / (1 - r)
    f_star = delta_ci / (delta_r * i_a**2 * length_m)
    p_star_per_kwh = f_star * (1 + i) / (n_p * n_c * t_h * q) * 1000.0   # USD/Wh → USD/kWh
    # ΔCI is the whole installed difference: phase metal, and whatever raceway and splices
    # the larger size needs (the run is fed from the source, so it carries a supply-side
    # bonding jumper, NEC Table 250.102(C)(1), not an EGC).
    assert 0.03 < p_star_per_kwh < 0.30        # a price a sweep would look at
    # A grid whose first cell holds the break-even: the sweep must find it there.
    lo = math.floor(p_star_per_kwh * 100) / 100
    result = sweep(one_run, [f"energy_price={lo:.2f}:{lo + 0.02:.2f}:3"], jobs=1)
    sizes = [p.segments[0][1] for p in result.points]
    assert sizes == ["4/0 AWG", "250 kcmil", "250 kcmil"]
    [even] = result.breakevens
    assert (even.before, even.after) == (("Cu", "4/0 AWG", 1), ("Cu", "250 kcmil", 1))
    assert even.kind == "size up" and even.basis == "segment"
    assert (even.low, even.high) == pytest.approx((lo, lo + 0.01))
    assert even.value == pytest.approx(p_star_per_kwh, rel=1e-9)

    # And the optimiser itself flips there: just below S, just above S+1.
    for factor, size in ((1 - 1e-6, "4/0 AWG"), (1 + 1e-6, "250 kcmil")):
        path = write_scenario(tmp_path, ONE_RUN, name=f"at-{factor}.toml", max_sets=1,
                              energy_price=f"{p_star_per_kwh * factor:.12f} USD/kWh")
        design, _ = solve_verified(prepare(load_scenario(path)), Objective.LIFECYCLE)
        assert design.segments[0].size == size


def test_break_even_on_a_nonlinear_field_is_where_the_costs_cross(tree):
    # The discount rate enters F through Q and 1/(1 + i): no straight line. At the value
    # found, the two fixed choices must cost the same to solver precision.
    result = sweep(tree, ["discount_rate=2:14:5"], jobs=1)
    assert result.breakevens
    base = prepare(load_scenario(tree))
    for even in result.breakevens:
        a = next(p for p in result.points if p.index == even.from_point)
        b = next(p for p in result.points if p.index == even.to_point)
        assert even.low < even.value < even.high
        prep = prepared_at(base, ("discount_rate",), (even.value,))
        cost = prep.table.capex + prep.table.loss_pv
        if even.basis == "segment":
            s = result.segment_ids.index(even.segment)
            rows_a, rows_b = [a.choice[s]], [b.choice[s]]
        else:
            rows_a, rows_b = list(a.choice), list(b.choice)
        gap = cost[rows_a].sum() - cost[rows_b].sum()
        assert abs(gap) <= 1e-7 * cost[rows_a].sum()


# --- regret ------------------------------------------------------------------------------


def test_regret_is_zero_where_chosen_and_never_negative(tree):
    base_cu = base_value(prepare(load_scenario(tree)), "copper")
    assert base_cu == pytest.approx(9.5)       # costdata/demo-us.csv copper_price_basis
    result = sweep(tree, ["energy_price=0.06:0.18:5", "copper=6,9.5,13"], jobs=1)
    at_home = [p for p in result.points if p.values == (0.12, 9.5)]
    assert len(at_home) == 1 and result.base_values == (0.12, 9.5)
    assert result.regret(at_home[0]) == 0.0
    assert at_home[0].choice == result.baseline.choice
    for p in result.points:
        raw = result.fixed_cost(p, "today") - result.optimum_cost(p)
        assert raw >= -1e-9 * result.optimum_cost(p)   # not hidden by the clamp
        assert result.regret(p) >= 0.0
        if p.choice == result.baseline.choice:
            assert result.regret(p) == pytest.approx(0.0, abs=1e-9)
    assert max(result.regret(p) for p in result.points) > 0.0
    regret_doc = result.document()["regret"]
    assert [r["point"] for r in regret_doc] == [p.index for p in result.points]


@settings(max_examples=8, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(lo=st.floats(0.01, 0.2), span=st.floats(0.01, 0.4), rate=st.floats(1.0, 12.0))
def test_regret_never_negative_property(tree, lo, span, rate):
    result = sweep(tree, [f"energy_price={lo}:{lo + span}:3", f"discount_rate={rate}"], jobs=1)
    for p in result.points:
        assert result.fixed_cost(p, "today") >= result.optimum_cost(p) * (1 - 1e-9)
        assert result.fixed_cost(p, "code_minimum") >= result.optimum_cost(p) * (1 - 1e-9)


# --- a sweep is a set of solves ---------------------------------------------------------------


def test_two_point_sweep_equals_two_separate_solves(tree, tmp_path):
    result = sweep(tree, ["energy_price=0.2", "aluminium=3.5,9"], jobs=1)
    assert len(result.points) == 2
    for point, al in zip(result.points, ("3.5", "9"), strict=True):
        path = write_scenario(tmp_path, f'[prices]\naluminium = "{al} USD/kg"\n' + TREE,
                              name=f"al-{al}.toml", materials='["Cu", "Al"]',
                              energy_price="0.2 USD/kWh")
        design, _ = solve_verified(prepare(load_scenario(path)), Objective.LIFECYCLE)
        assert point.status == design.status == "optimal"
        assert point.segments == tuple((s.material, s.size, s.sets) for s in design.segments)
        assert point.choice == design.choice
        assert point.capex == pytest.approx(design.totals.capex, rel=1e-12)
        assert point.loss_pv == pytest.approx(design.totals.loss_pv, rel=1e-12)
        assert point.loss_kwh_per_year == pytest.approx(design.totals.loss_kwh_per_year,
                                                        rel=1e-12)
    # The two metal prices give different designs here (a real test of re-pricing).
    assert result.points[0].segments != result.points[1].segments


def test_reprice_equals_a_rebuilt_table(tree, tmp_path):
    base = prepare(load_scenario(tree))
    path = write_scenario(tmp_path, '[prices]\ncopper = "13 USD/kg"\n' + TREE,
                          materials='["Cu", "Al"]', energy_price="0.21 USD/kWh")
    rebuilt = prepare(load_scenario(path))
    again = reprice(base.table, base.segments, base.catalogue, rebuilt.prices,
                    rebuilt.runs.loss_pv_per_w(rebuilt.economics))
    np.testing.assert_array_equal(again.capex, rebuilt.table.capex)
    np.testing.assert_array_equal(again.loss_pv, rebuilt.table.loss_pv)
    moved = prepared_at(base, ("energy_price", "copper"), (0.21, 13.0))
    np.testing.assert_allclose(moved.table.capex, rebuilt.table.capex, rtol=1e-12)
    np.testing.assert_allclose(moved.table.loss_pv, rebuilt.table.loss_pv, rtol=1e-12)
    for name in ("offsets", "segment", "material", "size_index", "sets", "r_ohm", "vd_pct",
                 "loss_w", "egc_size_index"):
        np.testing.assert_array_equal(getattr(moved.table, name), getattr(base.table, name))
    assert moved.table.capex is not base.table.capex


# --- serial, process pool and Dask agree ----------------------------------------------------

SPEC = ["aluminium=2:12:4", "energy_price=0.06:0.18:3"]


@pytest.fixture(scope="module")
def serial_text(tree):
    return sweep_json_text(sweep(tree, SPEC, jobs=1))


def test_process_pool_gives_the_serial_result(tree, serial_text):
    seen = []
    result = sweep(tree, SPEC, jobs=2, progress=lambda done, total: seen.append((done, total)))
    assert result.runner == "2 processes"
    assert sweep_json_text(result) == serial_text
    assert seen[0][0] == 0 and seen[-1][0] == seen[-1][1]


def test_dask_local_cluster_gives_the_serial_result(tree, serial_text):
    distributed = pytest.importorskip("dask.distributed")
    with distributed.LocalCluster(processes=False, n_workers=1, threads_per_worker=1,
                                  dashboard_address=None) as cluster:
        result = sweep(tree, SPEC, scheduler=cluster.scheduler_address)
    assert result.runner == "dask"
    assert sweep_json_text(result) == serial_text


def test_without_dask_the_error_names_the_extra(tree, monkeypatch):
    monkeypatch.setitem(sys.modules, "dask.distributed", None)
    with pytest.raises(SizerError, match=r"pip install 'sizer\[dask\]'"):
        sweep(tree, ["energy_price=0.06:0.18:3"], scheduler="tcp://127.0.0.1:8786")


@pytest.mark.parametrize("jobs", [1, 2])
def test_ctrl_c_keeps_the_points_done(tree, jobs):
    def progress(done: int, total: int) -> None:
        if done > 0:
            raise KeyboardInterrupt

    result = sweep(tree, ["aluminium=2:12:6", "energy_price=0.06:0.18:4"], jobs=jobs,
                   progress=progress)
    doc = result.document()
    assert result.interrupted and doc["interrupted"] is True
    assert 0 < len(result.points) < result.points_total == 24
    assert doc["points_done"] == len(result.points)
    assert [p.index for p in result.points] == sorted(p.index for p in result.points)
    assert any("interrupted" in n for n in result.notes)


# --- modes, documents, report ---------------------------------------------------------------


def test_one_at_a_time_and_its_tornado(tree):
    result = sweep(tree, ["energy_price=0.06:0.18:3", "discount_rate=4:10:3"], mode="oat",
                   jobs=1)
    assert [p.values for p in result.points] == [
        (0.06, 7.0), (0.12, 7.0), (0.18, 7.0), (0.12, 4.0), (0.12, 7.0), (0.12, 10.0)]
    assert {t.field for t in result.tornado} == {"energy_price", "discount_rate"}
    assert [t.swing for t in result.tornado] == sorted((t.swing for t in result.tornado),
                                                       reverse=True)
    by_values = {p.values: p for p in result.points}
    energy = next(t for t in result.tornado if t.field == "energy_price")
    assert energy.optimum_low == pytest.approx(result.optimum_cost(by_values[0.06, 7.0]))
    assert energy.optimum_high == pytest.approx(result.optimum_cost(by_values[0.18, 7.0]))
    # Dearer energy, dearer life; a higher discount rate makes future losses cheaper.
    assert energy.optimum_high > energy.optimum_low
    rate = next(t for t in result.tornado if t.field == "discount_rate")
    assert rate.optimum_high < rate.optimum_low


def test_json_document_shape_and_atomic_file(tree, tmp_path):
    result = sweep(tree, ["energy_price=0.06:0.18:3", "copper=6:12:2"], jobs=1)
    doc = result.document()
    assert doc["fields"] == ["energy_price", "copper"]
    assert doc["units"] == {"energy_price": "USD/kWh", "copper": "USD/kg"}
    point = doc["points"][0]
    assert set(point) >= {"index", "values", "status", "totals", "segments"}
    assert set(point["totals"]) >= {"capex", "loss_pv", "lifecycle", "loss_kwh_per_year"}
    assert set(point["segments"][0]) == {"id", "material", "size", "sets"}
    assert [s["id"] for s in point["segments"]] == ["PANEL-A", "OVEN-1", "COMP-2", "LTG-3"]
    for key in ("breakevens", "tornado", "regret", "changes"):
        assert isinstance(doc[key], list)
    out = write_sweep_json(result, tmp_path / "sweep.json", protect=[tree])
    assert out.read_text(encoding="utf-8") == sweep_json_text(result)
    with pytest.raises(ScenarioError, match="overwrite"):
        write_sweep_json(result, tree, protect=[tree])


def test_report_section_is_escaped_and_self_contained(tmp_path):
    nodes = TREE.replace('id = "OVEN-1"', 'id = "OVEN<script>&1"').replace(
        'parent = "OVEN-1"', 'parent = "OVEN<script>&1"')
    path = write_scenario(tmp_path, nodes, materials='["Cu", "Al"]',
                          title="Kiln <b>hall</b> & yard")
    result = sweep(path, ["energy_price=0.04:0.30:3", "aluminium=2:8:2"], jobs=1)
    html = sweep_section_html(result)
    assert "<script>" not in html and "<b>hall" not in html
    assert "Kiln &lt;b&gt;hall&lt;/b&gt; &amp; yard" in html
    assert "OVEN&lt;script&gt;&amp;1" in html
    assert html.count("data:image/png;base64,") >= 3      # two lines, tornado, heat map
    assert "http://" not in html and "https://" not in html
    assert "licensed professional" in html


# --- bad input -------------------------------------------------------------------------------


@pytest.mark.parametrize(("text", "field", "words"), [
    ("energy_price=0.30:0.06:9", "--vary energy_price", "below"),
    ("energy_price=0.06:0.30:0", "--vary energy_price", "count"),
    ("energy_price=0.06:0.30:2.5", "--vary energy_price", "count"),
    ("energy_price=0.06:0.30", "--vary energy_price", "START:STOP:COUNT"),
    ("energy_price=0.06 EUR/kWh:0.3 EUR/kWh:3", "--vary energy_price", "USD"),
    ("energy_price=0.06 kg:0.3:3", "--vary energy_price", "USD/kWh"),
    ("energy_price=nan:1:3", "--vary energy_price", "finite"),
    ("energy_price=", "--vary energy_price", "no values"),
    ("energy_price=0.3,0.1", "--vary energy_price", "ascending"),
    ("enrgy_price=0.1", "--vary", "did you mean 'energy_price'"),
    ("energy_price", "--vary", "NAME=START:STOP:COUNT"),
])
def test_bad_ranges_name_the_field(text, field, words):
    with pytest.raises(ScenarioError) as err:
        parse_vary(text, "USD")
    assert err.value.field == field
    assert words in err.value.message
    assert err.value.exit_code == 2


@pytest.mark.parametrize(("vary", "field"), [
    (["discount_rate=-80:10:3"], "--vary discount_rate"),
    (["lifetime=0:30:4"], "--vary lifetime"),
    (["load_factor=0.5:1.5:3"], "--vary load_factor"),
    (["copper=-5:10:4"], "--vary copper"),
    (["energy_price=0.1", "energy_price=0.2"], "--vary energy_price"),
])
def test_values_the_scenario_cannot_take_name_the_field(tree, vary, field):
    with pytest.raises(ScenarioError) as err:
        sweep(tree, vary, jobs=1)
    assert err.value.field == field


def test_bad_mode_objective_and_jobs(tree):
    with pytest.raises(ScenarioError, match="grid or oat"):
        sweep(tree, ["energy_price=0.1"], mode="random")  # type: ignore[arg-type]
    with pytest.raises(ScenarioError) as err:
        sweep(tree, ["energy_price=0.1"], objective="cheapest")
    assert err.value.field == "--objective"
    with pytest.raises(ScenarioError) as err:
        sweep(tree, ["energy_price=0.1"], jobs=0)
    assert err.value.field == "--jobs"


@pytest.mark.parametrize(("text", "values"), [
    ("energy_price=0.06:0.30:9", tuple(np.linspace(0.06, 0.30, 9))),
    ("energy_price=0.06 USD/kWh:0.30 USD/kWh:9", tuple(np.linspace(0.06, 0.30, 9))),
    ("energy_price=6 USD/MWh:12 USD/MWh:2", (0.006, 0.012)),
    ("discount_rate=5:9:3", (5.0, 7.0, 9.0)),
    ("discount_rate=5 %:9 %:3", (5.0, 7.0, 9.0)),
    ("lifetime=240 month:360 month:2", (20.0, 30.0)),
    ("load_factor=0.4,55 %", (0.4, 0.55)),
    ("copper=6:14:5", (6.0, 8.0, 10.0, 12.0, 14.0)),
    ("Aluminum=2.7", (2.7,)),
    ("demand_charge=8 USD/kW:14 USD/kW:2", (8.0, 14.0)),
])
def test_ranges_take_units_like_the_scenario(text, values):
    got = parse_vary(text, "USD")
    assert got.values == pytest.approx(values, rel=1e-12)
    assert got.name in FIELDS


def test_the_scenario_own_values_round_trip(tree):
    # "7 %" read by the scenario and 7 given to a sweep are the same number exactly, so
    # the baseline point is today's design to the last bit.
    base = prepare(load_scenario(tree))
    names = ("discount_rate", "escalation", "energy_price", "lifetime", "load_factor")
    values = tuple(base_value(base, n) for n in names)
    assert values == (7.0, 0.0, 0.12, 25.0, 0.6)
    again = prepared_at(base, names, values)
    assert again.economics == base.economics
    assert math.isclose(again.economics.loss_pv_per_w, base.economics.loss_pv_per_w,
                        rel_tol=0, abs_tol=0)


def test_scenario_path_objects_and_text_both_work(tree):
    assert isinstance(tree, Path)
    a = sweep(tree, "energy_price=0.1", jobs=1)
    b = sweep(load_scenario(tree), ["energy_price=0.1"], jobs=1, objective="capex")
    assert a.objective == "lifecycle" and b.objective == "capex"
    assert b.code_minimum.choice == b.baseline.choice


def test_terminal_summary_names_the_break_evens(tree):
    result = sweep(tree, ["aluminium=2:12:3"], jobs=1)
    text = sweep_summary_text(result)
    assert "aluminium" in text and "break-evens" in text and "licensed professional" in text
    first = unique_breakevens(result)[0][0]
    assert first.segment in text


def test_points_are_a_dataframe_for_scripts(tmp_path: Path) -> None:
    # People who script their studies get the points as a pandas DataFrame.
    site = write_scenario(tmp_path, ONE_RUN)
    result = sweep(site, ["energy_price=0.06:0.30:3"], jobs=1)
    frame = result.points_frame
    assert list(frame.columns[:2]) == ["energy_price [USD/kWh]", "status"]
    assert len(frame) == 3 and (frame["regret"] >= -1e-9).all()
    assert frame["lifecycle"].tolist() == [p.lifecycle for p in result.points]

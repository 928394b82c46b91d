"""Operating currents and loss profiles (sizer.operating) against hand calculations.

Sizing currents stay the code's; losses come from how loads run. Every expected value is
worked by hand beside it. Formulas: IEC 60287-3-2:2012 clause 4 (F = (T·P + D)·Q/(1 + i),
T = μ·hours, Q = Σ r^(n−1), r = (1 + a)²(1 + b)/(1 + i)); Buller-Woodrow
μ = 0.3·LF + 0.7·LF² (the classical empirical relation, from memory); complex power
S = P + jQ adds as phasors (Kirchhoff's current law at one voltage).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
from builders import write_scenario
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sizer.cli import main
from sizer.economics import EconomicParams
from sizer.operating import RunProfiles, load_profiles
from sizer.optimize import Objective, optimise, prepare
from sizer.scenario import load_scenario

SQRT3 = math.sqrt(3.0)


def runs_of(path):
    prep = prepare(load_scenario(path))
    return prep, {s.id: i for i, s in enumerate(prep.segments)}


# --- IEC 60287-3-2 money per run ------------------------------------------------------


def test_each_run_prices_its_loss_with_its_own_t_and_peak_coincidence():
    # P = 0.10 USD/kWh = 0.0001 USD/Wh; D = 10 USD/kW per month = 0.12 USD/W a year;
    # 8760 h; i = 5 %, b = 0, N = 10 years.
    econ = EconomicParams(energy_price_per_wh=0.0001, demand_per_w_year=0.12, discount=0.05,
                          years=10.0, load_factor=0.5)
    runs = RunProfiles(
        operating_a=np.array([100.0, 50.0]), operating_va=np.zeros(2, dtype=complex),
        load_factor=np.array([0.5, 0.2]), loss_load_factor=np.array([0.3, 0.1]),
        peak_coincidence=np.array([0.5, 1.0]), load_growth=np.array([0.0, 0.02]),
        category=("general", "general"), method="moments")
    # Run 0: T = 0.3 × 8760 = 2628 h; T·P + D·k² = 2628 × 0.0001 + 0.12 × 0.5² = 0.2628 +
    # 0.03 = 0.2928 USD per W; Q/(1 + i) with r = 1/1.05 is the 10-year annuity at 5 %,
    # (1 − 1.05^−10)/0.05 = 7.721735; F = 0.2928 × 7.721735 = 2.260924 USD per W.
    # Run 1: T = 876 h; 0.0876 + 0.12 = 0.2076 USD per W; growth 2 % a year: the loss
    # grows by 1.02² a year, F = 0.2076 × Σ_{n=1..10} 1.02^(2(n−1)) / 1.05^n.
    annuity = (1 - 1.05**-10) / 0.05
    grown = sum(1.02 ** (2 * (n - 1)) / 1.05**n for n in range(1, 11))
    np.testing.assert_allclose(runs.annual_cost_per_w(econ), [0.2928, 0.2076])
    np.testing.assert_allclose(runs.loss_pv_per_w(econ), [0.2928 * annuity, 0.2076 * grown])
    assert runs.loss_pv_per_w(econ)[0] == pytest.approx(2.260924, rel=1e-6)
    # Energy: 1 W of peak loss for T hours: 2.628 kWh and 0.876 kWh a year.
    np.testing.assert_allclose(runs.kwh_per_w(econ), [2.628, 0.876])


# --- operating peaks: utilisation, phasor sums, coincidence ---------------------------

PHASOR_TREE = """
[[node]]
id = "P"
parent = "SRC"
length = "50 ft"

[[node]]
id = "HEAT"
parent = "P"
length = "100 ft"
load = "100 kW"
power_factor = 1.0

[[node]]
id = "MOTOR"
parent = "P"
length = "100 ft"
load = "100 kVA"
power_factor = 0.6
category = "general"
"""


def test_feeder_operating_current_is_the_phasor_sum(tmp_path):
    prep, ix = runs_of(write_scenario(tmp_path, PHASOR_TREE))
    p = ix["P"]
    # HEAT: 100 kW at pf 1 = 100 + j0 kVA; MOTOR: 100 kVA at pf 0.6 = 60 + j80 kVA.
    # Phasor sum 160 + j80 kVA, |S| = √(160² + 80²) = 178.885 kVA;
    # I = 178,885 / (√3 × 480) = 215.166 A.
    assert prep.runs.operating_a[p] == pytest.approx(178885.438 / (SQRT3 * 480), rel=1e-6)
    assert prep.runs.operating_a[p] == pytest.approx(215.166, abs=1e-3)
    # The sizing current keeps the code's arithmetic sum: 200 kVA → 240.563 A.
    assert prep.segments[p].current_a == pytest.approx(200e3 / (SQRT3 * 480), rel=1e-9)


def test_unknown_load_runs_at_the_declared_utilisation_of_its_device(tmp_path):
    nodes = """
[[node]]
id = "DOCK-REC"
parent = "SRC"
length = "175 ft"
phases = 1
voltage = "277 V"
ocpd = "20 A"
"""
    prep, ix = runs_of(write_scenario(tmp_path, nodes))
    i = ix["DOCK-REC"]
    unknown = load_profiles()["unknown"]
    assert prep.runs.category[i] == "unknown"
    # Sizing: 80 % of the 20 A device (nec profile) = 16 A; operating: 50 % of it = 10 A.
    assert prep.segments[i].current_a == pytest.approx(16.0)
    assert unknown.utilisation == 0.5
    assert prep.runs.operating_a[i] == pytest.approx(10.0)
    assert prep.runs.load_factor[i] == pytest.approx(unknown.load_factor)


def test_motor_defaults_to_the_motor_profile_and_node_overrides_win(tmp_path):
    nodes = """
[[node]]
id = "FAN"
parent = "SRC"
length = "100 ft"
load = "40 A"
motor = { hp = 30 }

[[node]]
id = "PUMP"
parent = "SRC"
length = "100 ft"
load = "40 A"
motor = { hp = 30 }
utilisation = 0.9
full_load_hours = "4380 h"
"""
    prep, ix = runs_of(write_scenario(tmp_path, nodes))
    motors = load_profiles()["motors"]
    fan, pump = ix["FAN"], ix["PUMP"]
    assert prep.runs.category[fan] == prep.runs.category[pump] == "motors"
    assert prep.runs.operating_a[fan] == pytest.approx(40.0 * motors.utilisation)
    assert prep.runs.operating_a[pump] == pytest.approx(36.0)
    # 4380 full-load hours of 8760: load factor 0.5, μ = 0.3 × 0.5 + 0.7 × 0.25 = 0.325.
    assert prep.runs.load_factor[pump] == pytest.approx(0.5)
    assert prep.runs.loss_load_factor[pump] == pytest.approx(0.325)
    # Sizing is untouched by the profile: 40 A each, 125 % for a motor's conductors.
    assert prep.segments[fan].current_a == prep.segments[pump].current_a == 40.0
    assert prep.segments[pump].required_ampacity_a == pytest.approx(50.0)


# --- a run's own loss-load factor ------------------------------------------------------

TWO_LOADS = """
[[node]]
id = "P"
parent = "SRC"
length = "50 ft"
{panel}

[[node]]
id = "A"
parent = "P"
length = "100 ft"
load = "100 A"
power_factor = 1.0
load_factor = 0.5

[[node]]
id = "B"
parent = "P"
length = "100 ft"
load = "100 A"
power_factor = 1.0
load_factor = 0.2
peak_coincidence = 0.5
"""


def test_feeder_loss_load_factor_by_moments_by_hand(tmp_path):
    prep, ix = runs_of(write_scenario(tmp_path, TWO_LOADS.format(panel="")))
    p, a, b = ix["P"], ix["A"], ix["B"]
    # Loads: μ_A = 0.3·0.5 + 0.7·0.25 = 0.325, μ_B = 0.3·0.2 + 0.7·0.04 = 0.088.
    assert prep.runs.loss_load_factor[a] == pytest.approx(0.325)
    assert prep.runs.loss_load_factor[b] == pytest.approx(0.088)
    # Feeder: peak 200 A, mean 50 + 20 = 70 A (LF 0.35); spreads σ = I·√(μ − LF²):
    # σ_A = 100·√0.075 = 27.386 A, σ_B = 100·√0.048 = 21.909 A, added (fully
    # correlated): 49.295 A; μ = (70² + 49.295²)/200² = (4900 + 2430.0)/40000 = 0.18325.
    sigma = 100 * math.sqrt(0.075) + 100 * math.sqrt(0.048)
    assert prep.runs.load_factor[p] == pytest.approx(0.35)
    assert prep.runs.loss_load_factor[p] == pytest.approx((70**2 + sigma**2) / 200**2)
    assert prep.runs.loss_load_factor[p] == pytest.approx(0.18325, abs=1e-5)
    # Peak coincidence: (1.0 × 100 + 0.5 × 100)/200 = 0.75 of the feeder's peak.
    assert prep.runs.peak_coincidence[p] == pytest.approx(0.75)


def test_feeder_loss_load_factor_by_buller_woodrow_on_its_own_load_factor(tmp_path):
    path = write_scenario(tmp_path, TWO_LOADS.format(panel=""))
    text = path.read_text().replace("load_factor = 0.6\n",
                                    'load_factor = 0.6\nloss_load_method = "buller-woodrow"\n')
    path.write_text(text)
    prep, ix = runs_of(path)
    # LF = 0.35: μ = 0.3 × 0.35 + 0.7 × 0.35² = 0.105 + 0.08575 = 0.19075.
    assert prep.runs.loss_load_factor[ix["P"]] == pytest.approx(0.19075)


def test_coincidence_lowers_the_peak_not_the_energy(tmp_path):
    prep, ix = runs_of(write_scenario(tmp_path, TWO_LOADS.format(panel="coincidence = 0.5")))
    p = ix["P"]
    # Peak 0.5 × 200 = 100 A at 480 V; the mean stays 70 A → LF 0.7; by moments
    # μ = (4900 + 2430)/100² = 0.733, beyond LF: clipped to 0.7 (μ ≤ LF for any curve).
    assert prep.runs.operating_a[p] == pytest.approx(100.0)
    assert prep.runs.load_factor[p] == pytest.approx(0.7)
    assert prep.runs.loss_load_factor[p] == pytest.approx(0.7)


def test_a_node_growth_holds_for_the_loads_below_it(tmp_path):
    prep, ix = runs_of(write_scenario(tmp_path, TWO_LOADS.format(panel='load_growth = "3 %"')))
    for name in ("P", "A", "B"):
        assert prep.runs.load_growth[ix[name]] == pytest.approx(0.03)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.floats(0.05, 1.0), st.floats(0.3, 1.0), st.floats(1, 200)),
                min_size=1, max_size=5),
       st.floats(0.3, 1.0))
def test_every_run_profile_is_a_possible_load_curve(tmp_path, loads, coincidence):
    body = f'[[node]]\nid = "P"\nparent = "SRC"\nlength = "50 ft"\ncoincidence = {coincidence}\n'
    for k, (lf, pf, amps) in enumerate(loads):
        body += (f'\n[[node]]\nid = "L{k}"\nparent = "P"\nlength = "80 ft"\nload = "{amps} A"\n'
                 f"power_factor = {pf}\nload_factor = {lf}\n")
    prep, _ = runs_of(write_scenario(tmp_path, body))
    r = prep.runs
    # Any load curve with values in [0, peak] has LF² ≤ μ ≤ LF, and 0 ≤ k ≤ 1.
    assert np.all(r.loss_load_factor >= r.load_factor**2 - 1e-12)
    assert np.all(r.loss_load_factor <= r.load_factor + 1e-12)
    assert np.all((r.peak_coincidence >= 0) & (r.peak_coincidence <= 1 + 1e-12))
    # The phasor sum never exceeds the arithmetic sum (triangle inequality).
    assert r.operating_a[0] <= coincidence * sum(a for _, _, a in loads) + 1e-9


# --- the candidate table: losses from operating currents, drop from sizing currents -----


def test_loss_columns_use_the_operating_current_and_drop_the_sizing_current(tmp_path):
    one = '[[node]]\nid = "L"\nparent = "SRC"\nlength = "300 ft"\nload = "100 A"\n'
    full, _ = runs_of(write_scenario(tmp_path, one, name="a.toml"))
    half, _ = runs_of(write_scenario(tmp_path, one + "utilisation = 0.5\n", name="b.toml"))
    # Same rows; the peak loss 3·I²·R at half the current is a quarter; drop unchanged.
    np.testing.assert_array_equal(full.table.vd_pct, half.table.vd_pct)
    np.testing.assert_array_equal(full.table.ampacity_a, half.table.ampacity_a)
    np.testing.assert_allclose(half.table.loss_w, 0.25 * full.table.loss_w)
    np.testing.assert_allclose(half.table.loss_w, 3 * 50.0**2 * half.table.r_ohm)


def test_lower_utilisation_never_buys_a_costlier_design(tmp_path):
    nodes = ('[[node]]\nid = "L"\nparent = "SRC"\nlength = "900 ft"\nload = "150 A"\n'
             'category = "{cat}"\n')
    designs = {}
    for cat in ("general", "receptacles"):
        prep = prepare(load_scenario(write_scenario(tmp_path, nodes.format(cat=cat),
                                                    name=f"{cat}.toml")))
        designs[cat] = optimise(prep, Objective.LIFECYCLE)
    full, light = designs["general"].segments[0], designs["receptacles"].segments[0]
    assert light.current_a == full.current_a == 150.0
    assert light.operating_a == pytest.approx(150.0 * 0.3)
    # Less weight on losses never raises the optimum's upfront cost (the parametric
    # argument: both designs are feasible for both weights). Its ampacity may still be
    # higher: two small parallel sets can cost less than one larger conductor.
    assert designs["receptacles"].totals.capex <= designs["general"].totals.capex + 1e-6
    assert designs["receptacles"].totals.loss_pv < designs["general"].totals.loss_pv


# --- JSON contract -----------------------------------------------------------------------


def test_json_segments_carry_sizing_and_operating_currents(tmp_path):
    path = write_scenario(tmp_path, TWO_LOADS.format(panel=""))
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out), "--quiet"]) == 0
    doc = json.loads(out.read_text())
    segs = {s["id"]: s for s in doc["segments"]}
    assert segs["A"]["current_a"] == pytest.approx(100.0)
    assert segs["A"]["operating_a"] == pytest.approx(100.0)
    assert segs["P"]["current_a"] == pytest.approx(200.0)
    for s in doc["segments"]:
        # kWh a year = peak loss × hours × the run's own μ.
        assert s["loss_kwh_per_year"] > 0
    assert doc["totals"]["loss_kwh_per_year"] == pytest.approx(
        sum(s["loss_kwh_per_year"] for s in doc["segments"]), rel=1e-6)
    # The feeder's kWh: loss_kw × 8760 h × μ_P (0.18325).
    p = segs["P"]
    assert p["loss_kwh_per_year"] == pytest.approx(p["loss_kw"] * 8760 * 0.18325, rel=1e-4)


def test_sweep_reprices_with_each_runs_own_factors(tmp_path):
    from sizer.sweep import prepared_at

    prep = prepare(load_scenario(write_scenario(tmp_path, TWO_LOADS.format(panel=""))))
    moved = prepared_at(prep, ["energy_price"], [0.24])
    rebuilt = prepare(replace(prep.scenario, economics=replace(
        prep.scenario.economics, energy_price_per_kwh=0.24)))
    np.testing.assert_allclose(moved.table.loss_pv, rebuilt.table.loss_pv, rtol=1e-12)


# --- spare capacity: sizes the run, not its losses -----------------------------------------

SPARE = """
[[node]]
id = "P"
parent = "SRC"
length = "400 ft"
{spare}

[[node]]
id = "L"
parent = "P"
length = "100 ft"
load = "100 A"
"""


def test_spare_sizes_the_run_but_not_its_losses(tmp_path):
    bare, _ = runs_of(write_scenario(tmp_path, SPARE.format(spare=""), name="a.toml"))
    spare, _ = runs_of(write_scenario(tmp_path, SPARE.format(spare='spare = "25 %"'),
                                      name="b.toml"))
    # Sizing: 100 A → 125 A of required ampacity; sizer's device at or above it.
    assert spare.segments[0].required_ampacity_a == pytest.approx(125.0)
    assert spare.segments[0].ocpd_a >= 125.0
    assert spare.segments[0].current_a == pytest.approx(125.0)   # drop with the spare used
    # Losses: the same operating current, so the same peak loss on the same conductor.
    assert spare.runs.operating_a[0] == bare.runs.operating_a[0] == pytest.approx(100.0)
    assert min(spare.table.ampacity_a[:int(spare.table.offsets[1])]) >= 125.0


def test_report_options_price_the_spare(tmp_path):
    from sizer.workflow import compare_options

    prep = prepare(load_scenario(write_scenario(tmp_path, SPARE.format(
        spare='spare = "25 %"'))))
    options = {o.key: o.design for o in compare_options(prep)}
    assert "without_spare" in options
    # Both are lifecycle optima; only the one with the spare must carry 125 A on P. (The
    # one without may still cost more: NEC 250.122(B) grows the EGC of a conductor
    # upsized over the minimum for a smaller device, so no ordering is asserted.)
    with_, bare = options["lifecycle"].segments[0], options["without_spare"].segments[0]
    assert with_.ampacity_a >= 125.0 and bare.ampacity_a >= 100.0
    assert with_.operating_a == bare.operating_a == pytest.approx(100.0)


# --- both engines see the operating losses and the neutral's own price ----------------------


@pytest.mark.parametrize("engine", ["tree", "milp"])
def test_engines_match_brute_force_with_operating_losses_and_own_neutral(tmp_path, engine):
    from test_engines import assert_matches, brute_force

    from sizer.engines import solve
    from sizer.optimize import build_problem

    nodes = """
[[node]]
id = "P"
parent = "SRC"
length = "300 ft"
neutral_size = "reduced"
spare = "20 %"
max_sets = 1

[[node]]
id = "LTG"
parent = "P"
length = "250 ft"
phases = 1
voltage = "277 V"
load = "4 kW"
category = "lighting"
max_sets = 1

[[node]]
id = "REC"
parent = "P"
length = "200 ft"
phases = 1
voltage = "277 V"
ocpd = "20 A"
max_sets = 1

[[node]]
id = "PUMP"
parent = "P"
length = "150 ft"
load = "30 A"
motor = { hp = 25 }
max_sets = 1
"""
    prep = prepare(load_scenario(write_scenario(tmp_path, nodes)))
    problem = build_problem(prep, Objective.LIFECYCLE)
    expected, _ = brute_force(problem)
    assert_matches(solve(problem, engine=engine), expected)
    # The objective is capex + loss PV, the loss PV from operating currents.
    np.testing.assert_allclose(problem.cost, prep.table.capex + prep.table.loss_pv)


def test_operating_peak_never_exceeds_the_sizing_current_of_an_unknown_load(tmp_path):
    nodes = """
[[node]]
id = "SIGN"
parent = "SRC"
length = "200 ft"
phases = 1
voltage = "277 V"
ocpd = "20 A"
category = "lighting"
"""
    prep, ix = runs_of(write_scenario(tmp_path, nodes))
    i = ix["SIGN"]
    # Lighting runs at 100 % of its load, but with no load given the basis is the 20 A
    # device, capped at the sizing current: 80 % of it (nec profile) = 16 A.
    assert prep.segments[i].current_a == pytest.approx(16.0)
    assert prep.runs.operating_a[i] == pytest.approx(16.0)


def test_defaults_give_a_profile_that_nodes_override(tmp_path):
    nodes = """
[[node]]
id = "A"
parent = "SRC"
length = "100 ft"
load = "40 A"

[[node]]
id = "B"
parent = "SRC"
length = "100 ft"
load = "40 A"
category = "it"
utilisation = 0.5
"""
    path = write_scenario(tmp_path, nodes)
    path.write_text(path.read_text().replace(
        "[defaults]\n", '[defaults]\ncategory = "hvac"\npeak_coincidence = 0.6\n'))
    prep, ix = runs_of(path)
    hvac = load_profiles()["hvac"]
    a, b = ix["A"], ix["B"]
    assert prep.runs.category[a] == "hvac" and prep.runs.category[b] == "it"
    assert prep.runs.operating_a[a] == pytest.approx(40.0 * hvac.utilisation)
    assert prep.runs.operating_a[b] == pytest.approx(20.0)
    assert prep.runs.peak_coincidence[a] == prep.runs.peak_coincidence[b] == 0.6

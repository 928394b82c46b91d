"""Buildable designs: terminal ranges, reducing splices, raceway fill and price, grouping.

Fill checks use NEC Chapter 9 Tables 1, 4 and 5 and the Annex C conduit-fill tables that
follow from them (values from memory, marked [M]); terminal ranges are common practice.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from pathlib import Path

import numpy as np
import pytest
from builders import write_scenario
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sizer.candidates import build_candidates
from sizer.engines import solve
from sizer.optimize import Objective, build_problem, prepare
from sizer.rules import load_profile
from sizer.rules.raceway import (
    MM2_PER_IN2,
    fill_fraction,
    grouped_conductors,
    raceway_size_index,
    tray_width_index,
)
from sizer.rules.terminations import (
    NO_TERMINAL,
    lands,
    most_per_terminal,
    splice_ends,
    terminal_range,
)
from sizer.scenario import load_scenario

NEC = load_profile("nec")
SCENARIOS = Path(__file__).parents[1] / "scenarios"


def thhn_in2(size: str) -> float:
    return float(NEC.raceway.conductor_area_mm2["Cu"][NEC.size_index(size)]) / MM2_PER_IN2


def emt(trade: str) -> int:
    labels = NEC.raceway.types["EMT"].labels
    return next(k for k, lab in enumerate(labels) if f"({trade} in)" in lab)


# --- fill: NEC Chapter 9 ------------------------------------------------------------------


@pytest.mark.parametrize(("conductors", "fraction"), [
    (1, 0.53), (2, 0.31), (3, 0.40), (4, 0.40), (40, 0.40),   # NEC Chapter 9 Table 1
])
def test_fill_fraction_of_table_1(conductors: int, fraction: float) -> None:
    assert fill_fraction(NEC.raceway.fill, conductors) == pytest.approx(fraction)


@pytest.mark.parametrize(("kind", "trade", "forty_pct_in2"), [
    # NEC Chapter 9 Table 4, "Over 2 Wires 40%" column [M]
    ("EMT", "1/2", 0.122), ("EMT", "2", 1.342), ("EMT", "4", 5.901),
    ("PVC", "2", 1.316), ("RMC", "2", 1.363),
])
def test_forty_percent_column_of_table_4(kind: str, trade: str, forty_pct_in2: float) -> None:
    rtype = NEC.raceway.types[kind]
    k = next(i for i, lab in enumerate(rtype.labels) if f"({trade} in)" in lab)
    assert 0.4 * rtype.area_mm2[k] / MM2_PER_IN2 == pytest.approx(forty_pct_in2, abs=0.0015)


@pytest.mark.parametrize(("size", "most"), [
    # NEC Annex C Table C.1 (EMT), THHN in 1/2 in (16) [M]: 14 AWG 12, 12 AWG 9, 10 AWG 5,
    # 8 AWG 3 — the counts that follow from Table 4 at 40 % and Table 5 areas
    ("14 AWG", 12), ("12 AWG", 9), ("10 AWG", 5), ("8 AWG", 3),
])
def test_half_inch_emt_holds_the_annex_c_count(size: str, most: int) -> None:
    area = NEC.raceway.conductor_area_mm2["Cu"][NEC.size_index(size)]
    areas = NEC.raceway.types["EMT"].area_mm2
    assert raceway_size_index(areas, NEC.raceway.fill, most * area, most) == emt("1/2")
    assert raceway_size_index(areas, NEC.raceway.fill, (most + 1) * area, most + 1) > emt("1/2")


def test_four_500_kcmil_with_their_egc_need_3_in_emt() -> None:
    # 4 x 500 kcmil THHN (0.7073 in2 each, Table 5 [M]) + 3 AWG EGC (0.0973 in2) = 2.926 in2:
    # over the 2.343 in2 of 2-1/2 in EMT at 40 %, within the 3.538 in2 of 3 in (Table 4 [M])
    total_mm2 = (4 * thhn_in2("500 kcmil") + thhn_in2("3 AWG")) * MM2_PER_IN2
    k = raceway_size_index(NEC.raceway.types["EMT"].area_mm2, NEC.raceway.fill, total_mm2, 5)
    assert k == emt("3")


def test_nothing_fits_gives_no_raceway() -> None:
    areas = NEC.raceway.types["EMT"].area_mm2
    assert raceway_size_index(areas, NEC.raceway.fill, 1e6, 4) == -1
    assert tray_width_index(NEC.raceway.tray_widths_mm, 1e5) == -1
    # one layer, summed diameters within the width (NEC 392.22(B)(1) [M])
    assert tray_width_index(NEC.raceway.tray_widths_mm, 152.4) == 0


@pytest.mark.parametrize(("per_set", "sets", "together", "expected"), [
    (3, 1, True, 3), (3, 2, False, 3), (3, 2, True, 6), (4, 3, True, 12),
])
def test_sets_together_count_as_one_group(per_set, sets, together, expected) -> None:
    # NEC 310.15(C)(1): each conductor of a parallel set counts toward the adjustment
    assert grouped_conductors(per_set, sets, together) == expected


# --- terminal ranges (common practice, from memory) ------------------------------------


@pytest.mark.parametrize(("ocpd", "sets", "low", "high"), [
    (20, 1, "14 AWG", "8 AWG"),          # small branch breaker: up to 8 AWG
    (225, 1, "4 AWG", "300 kcmil"),      # 225 A frame: 4 AWG - 300 kcmil
    (400, 1, "1/0 AWG", "600 kcmil"),    # 400 A frame: one up to 600 kcmil ...
    (400, 2, "1/0 AWG", "250 kcmil"),    # ... or two up to 250 kcmil
])
def test_nec_terminal_ranges(ocpd: float, sets: int, low: str, high: str) -> None:
    lo, hi = terminal_range(NEC.terminals, ocpd, sets)
    assert (NEC.sizes[int(lo)], NEC.sizes[int(hi)]) == (low, high)


def test_too_many_sets_for_the_terminal_has_no_range() -> None:
    lo, hi = terminal_range(NEC.terminals, 400.0, 3)
    assert int(lo) == int(hi) == NO_TERMINAL
    assert not lands(NEC.size_index("4/0 AWG"), lo, hi, "splice")


def test_more_sets_than_the_terminal_takes_land_through_splices(tmp_path: Path) -> None:
    nodes = """
[[node]]
id = "FEED"
parent = "SRC"
length = "100 ft"
ocpd = "400 A"
"""
    t = prepare(load_scenario(write_scenario(tmp_path, nodes))).table
    three = t.sets == 3          # a 400 A frame takes one or two conductors per terminal
    assert three.any() and np.all(t.splice_ends[three] == 2)
    assert np.all(t.terminal_max[three] == NEC.size_index("250 kcmil"))


def test_oversize_lands_by_splice_or_is_refused() -> None:
    lo, hi = terminal_range(NEC.terminals, 20.0, 1)
    big, fits, small = (NEC.size_index(s) for s in ("4 AWG", "8 AWG", "14 AWG"))
    assert lands(big, lo, hi, "splice") and not lands(big, lo, hi, "refuse")
    assert lands(fits, lo, hi, "refuse") and lands(small, lo, hi, "refuse")
    assert splice_ends(big, hi, hi) == 2 and splice_ends(fits, hi, hi) == 0


# --- the candidate table and the designs ------------------------------------------------


LONG_BRANCH = """
[[node]]
id = "PNL"
parent = "SRC"
length = "30 ft"
ocpd = "100 A"

[[node]]
id = "REC"
parent = "PNL"
length = "260 ft"
phases = 1
voltage = "120 V"
load = "1.9 kVA"
ocpd = "20 A"
"""


def test_upsized_branch_lands_by_priced_splice(tmp_path: Path) -> None:
    prep = prepare(load_scenario(write_scenario(tmp_path, LONG_BRANCH, max_sets=1,
                                                voltage="208 V")))
    design = _solve(prep, Objective.CAPEX)
    rec = next(s for s in design.segments if s.id == "REC")
    # 260 ft at 15.8 A and 120 V needs more than 8 AWG for 3 %: spliced at both ends
    assert NEC.size_index(rec.size) > NEC.size_index("8 AWG")
    assert (rec.terminal_max, rec.termination) == ("8 AWG", "reducing splice")
    price = prep.prices.splice("Cu")[NEC.size_index(rec.size)]
    assert rec.termination_capex == pytest.approx(2 * 2 * price)   # 2 ends x 2 conductors
    assert rec.capex == pytest.approx(rec.conductor_capex + rec.termination_capex
                                      + rec.raceway_capex)
    assert rec.raceway.startswith("1 x ") and rec.raceway.endswith(" EMT")


def test_refuse_keeps_only_sizes_the_terminal_takes(tmp_path: Path) -> None:
    prep = prepare(load_scenario(write_scenario(tmp_path, LONG_BRANCH, max_sets=1,
                                                voltage="208 V")))
    refuse = dataclasses.replace(NEC, terminals=dataclasses.replace(NEC.terminals,
                                                                    oversize="refuse"))
    table, local = build_candidates(prep.segments, refuse, prep.catalogue, prep.prices,
                                    prep.economics.loss_pv_per_w)
    rec = 1
    rows = slice(table.offsets[rec], table.offsets[rec + 1])
    assert np.all(table.size_index[rows] <= NEC.size_index("8 AWG"))
    assert local.build_limits[rec].startswith("terminal limit: the 20 A device takes at most "
                                              "8 AWG")


def test_buried_parallel_sets_derate_together(tmp_path: Path) -> None:
    nodes = """
[[node]]
id = "FAR"
parent = "SRC"
length = "100 ft"
ocpd = "300 A"
installation = "buried"
"""
    prep = prepare(load_scenario(write_scenario(tmp_path, nodes, materials='["Al"]')))
    t = prep.table
    two = t.ampacity_a[(t.size_index == NEC.size_index("3/0 AWG")) & (t.sets == 2)]
    # NEC Table 310.16, 3/0 AWG Al: 175 A at 90 degC, 155 A at 75 degC. Two sets in one
    # trench are 6 current-carrying conductors: 310.15(C)(1) factor 0.80 -> 140 A per set
    # (below the 155 A terminal limit), 280 A in all — not the 2 x 155 A of separate runs.
    assert two.size == 1 and float(two[0]) == pytest.approx(2 * 0.8 * 175)


def test_iec_never_parallels_small_cables() -> None:
    prep = prepare(load_scenario(SCENARIOS / "hollinmoor-campus.toml"))
    small = prep.catalogue.sizes.index("50 mm2")
    t = prep.table
    # common practice: parallel sets from 50 mm2 (IEC 60364-5-52 523.7 sets no minimum [M])
    assert not np.any((t.sets > 1) & (t.size_index < small))


# --- both engines against brute force with terminations and raceways --------------------


SMALL_TREE = """
[[node]]
id = "P1"
parent = "SRC"
length = "120 ft"
ocpd = "100 A"

[[node]]
id = "L1"
parent = "P1"
length = "240 ft"
phases = 1
voltage = "277 V"
load = "3.6 kW"
ocpd = "20 A"

[[node]]
id = "L2"
parent = "P1"
length = "150 ft"
load = "20 kW"
ocpd = "40 A"
installation = "buried"
"""


def _solve(prep, objective):
    from sizer.optimize import optimise
    return optimise(prep, objective, engine="tree")


@pytest.mark.parametrize("objective", [Objective.CAPEX, Objective.LIFECYCLE])
def test_engines_agree_with_brute_force_on_buildable_costs(tmp_path: Path,
                                                           objective: Objective) -> None:
    prep = prepare(load_scenario(write_scenario(tmp_path, SMALL_TREE, max_sets=1,
                                                materials='["Cu", "Al"]')))
    assert prep.table.termination_capex is not None and np.any(prep.table.splice_ends > 0)
    p = build_problem(prep, objective)
    ranges = [range(p.offsets[s], p.offsets[s + 1]) for s in range(p.n_segments)]
    best = math.inf
    for combo in itertools.product(*ranges):
        choice = np.array(combo)
        if not p.violations(choice):
            best = min(best, float(p.cost[choice].sum()))
    for engine in ("tree", "milp"):
        got = solve(p, engine=engine)
        assert got.objective == pytest.approx(best, rel=1e-7), engine


# --- the demos: every conductor lands, every run has a raceway ---------------------------


@pytest.mark.parametrize("demo", sorted(p.stem for p in SCENARIOS.glob("*.toml")))
def test_demo_optima_land_on_their_terminals(demo: str) -> None:
    prep = prepare(load_scenario(SCENARIOS / f"{demo}.toml"))
    for objective in (Objective.CAPEX, Objective.LIFECYCLE):
        design = _solve(prep, objective)
        assert design.segments
        for s in design.segments:
            top = prep.catalogue.sizes.index(s.terminal_max)
            here = prep.catalogue.sizes.index(s.size)
            most = int(most_per_terminal(prep.profile.terminals, s.ocpd_a))
            # direct on the terminal, or through priced splices: larger than the terminal
            # takes, or more sets than it has room for
            spliced = here > top or s.sets > most
            assert s.termination == ("reducing splice" if spliced else "direct"), s.id
            assert (s.termination_capex > 0) == spliced, s.id
            assert s.raceway and s.raceway_capex > 0, s.id
            assert s.capex == pytest.approx(s.conductor_capex + s.termination_capex
                                            + s.raceway_capex)
        # every shared route derates from what it holds: the band of its actual content
        content: dict[str, int] = {}
        for s in design.segments:
            if s.route:
                content[s.route] = content.get(s.route, 0) + s.sets * (2 if s.phases == 1
                                                                      else 3)
        assert content, demo
        tops = np.asarray([b[0] * prep.profile.grouping_conductors_per_group
                           for b in prep.profile.grouping_bands])
        for s in design.segments:
            if s.route:
                band = tops[np.searchsorted(tops, content[s.route], side="left")]
                assert s.route_conductors == min(band, 10**6), s.id


# --- shared routes: derating from the route's own content --------------------------------


ROUTE_TREE = """
[[node]]
id = "PNL"
parent = "SRC"
length = "40 ft"
ocpd = "400 A"
conductor = "2x 250 kcmil Cu"

[[node]]
id = "M1"
parent = "PNL"
length = "{l1} ft"
load = "{a1} A"
ocpd = "{o1} A"

[[node]]
id = "M2"
parent = "PNL"
length = "{l2} ft"
load = "{a2} A"
ocpd = "{o2} A"

[[node]]
id = "M3"
parent = "PNL"
length = "{l3} ft"
load = "{a3} A"
ocpd = "{o3} A"
"""


def _route_prep(tmp_path: Path, loads=((60, 70, 250), (45, 50, 180), (30, 35, 320)),
                name: str = "site.toml"):
    values = {}
    for k, (amps, ocpd, length) in enumerate(loads, start=1):
        values |= {f"a{k}": amps, f"o{k}": ocpd, f"l{k}": length}
    scenario = load_scenario(write_scenario(tmp_path, ROUTE_TREE.format(**values), name=name,
                                            max_sets=2))
    nodes = tuple(dataclasses.replace(n, route="TRAY-NORTH") if n.id.startswith("M") else n
                  for n in scenario.nodes)
    return prepare(dataclasses.replace(scenario, nodes=nodes))


def _route_brute_force(p) -> float:
    """Least cost over every combination of rows, route content checked row by row."""
    ranges = [np.arange(p.offsets[s], p.offsets[s + 1]) for s in range(p.n_segments)]
    grid = np.array(np.meshgrid(*ranges, indexing="ij")).reshape(p.n_segments, -1).T
    ok = np.ones(len(grid), dtype=bool)
    cum = p.drop_pct[grid] + p.fixed_drop_pct
    for s in range(p.n_segments):
        if p.parent[s] >= 0:
            cum[:, s] += cum[:, p.parent[s]]
    ok &= np.all(cum <= p.limit_pct + 1e-9, axis=1)
    members = np.flatnonzero(p.route_of >= 0)
    total = p.route_count[grid[:, members]].sum(axis=1)
    ok &= np.all(p.route_top[grid[:, members]] >= total[:, None], axis=1)
    cost = p.cost[grid].sum(axis=1)
    return float(cost[ok].min()) if ok.any() else math.inf


@pytest.mark.parametrize("objective", [Objective.CAPEX, Objective.LIFECYCLE])
def test_route_coupled_tree_brute_force_and_both_engines_agree(tmp_path: Path,
                                                               objective: Objective) -> None:
    prep = _route_prep(tmp_path)
    p = build_problem(prep, objective)
    assert p.has_routes
    best = _route_brute_force(p)
    assert math.isfinite(best)
    for engine in ("milp", "tree"):
        got = solve(p, engine=engine)
        assert got.proven_optimal, engine
        assert got.objective == pytest.approx(best, rel=1e-7), engine
        assert not p.violations(got.choice), engine


def _assert_route_derating_matches(prep, design) -> None:
    from sizer.rules.ampacity import ampacity_a
    routes: dict[str, int] = {}
    for s in design.segments:
        if s.route:
            per_set = 2 if s.phases == 1 else 3
            routes[s.route] = routes.get(s.route, 0) + s.sets * per_set
    for s in design.segments:
        if not s.route:
            continue
        total = routes[s.route]
        # the band the derating uses holds the route's content, and no less severe band does
        tops = np.asarray([b[0] for b in prep.profile.grouping_bands])   # NEC: conductors
        band = int(np.searchsorted(tops, total, side="left"))
        assert s.route_conductors == min(tops[band], 10**6), s.id
        k = prep.catalogue.sizes.index(s.size)
        expected = s.sets * float(ampacity_a(prep.profile, s.material, k, 90.0, 75.0, 30.0,
                                             total, "conduit"))
        assert s.ampacity_a == pytest.approx(expected), s.id


def test_reported_route_derating_matches_its_content(tmp_path: Path) -> None:
    from sizer.optimize import optimise
    prep = _route_prep(tmp_path)
    for engine in ("auto", "tree", "milp"):
        for objective in (Objective.CAPEX, Objective.LIFECYCLE):
            design = optimise(prep, objective, engine=engine)
            assert design.segments
            _assert_route_derating_matches(prep, design)


@settings(max_examples=12, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.integers(8, 90), st.integers(60, 400)), min_size=3, max_size=3))
def test_every_solved_route_design_derates_from_its_content(tmp_path: Path, runs) -> None:
    from sizer.optimize import optimise
    from sizer.rules.protection import next_standard_rating_a
    loads = tuple((amps, int(next_standard_rating_a(NEC, amps * 1.25)), length)
                  for amps, length in runs)
    prep = _route_prep(tmp_path, loads, name="r" + "-".join(f"{a}_{b}" for a, b in runs) + ".toml")
    for engine in ("tree", "milp"):
        design = optimise(prep, Objective.LIFECYCLE, engine=engine)
        if design.segments:
            _assert_route_derating_matches(prep, design)


# --- the scenario's own choices --------------------------------------------------------


def test_scenario_refuses_oversize_and_names_load_end_terminals(tmp_path: Path) -> None:
    refused = LONG_BRANCH.replace('ocpd = "20 A"\n', 'ocpd = "20 A"\noversize_termination = '
                                  '"refuse"\n')
    prep = prepare(load_scenario(write_scenario(tmp_path, refused, max_sets=1,
                                                voltage="208 V")))
    rows = slice(prep.table.offsets[1], prep.table.offsets[2])
    assert np.all(prep.table.size_index[rows] <= NEC.size_index("8 AWG"))
    # a receptacle that takes 10 AWG at most, on a breaker that takes 8 AWG
    own = LONG_BRANCH.replace('ocpd = "20 A"\n', 'ocpd = "20 A"\nload_terminal_max = '
                              '"10 AWG"\n')
    prep = prepare(load_scenario(write_scenario(tmp_path, own, name="own.toml", max_sets=1,
                                                voltage="208 V")))
    t = prep.table
    rows = np.flatnonzero(t.segment == 1)
    k = t.size_index[rows]
    # one splice at each end whose terminal is smaller than the conductor
    assert np.array_equal(t.splice_ends[rows], (k > NEC.size_index("8 AWG")).astype(int)
                          + (k > NEC.size_index("10 AWG")))


def test_bad_terminal_size_is_one_clear_line(tmp_path: Path) -> None:
    from sizer.errors import ScenarioError
    bad = LONG_BRANCH.replace('ocpd = "20 A"\n', 'ocpd = "20 A"\nload_terminal_max = '
                              '"95 mm2"\n')
    with pytest.raises(ScenarioError, match="node 'REC', field 'load_terminal_max'"):
        load_scenario(write_scenario(tmp_path, bad, voltage="208 V"))


def test_route_field_reads_and_couples(tmp_path: Path) -> None:
    text = ROUTE_TREE.format(a1=60, o1=70, l1=250, a2=45, o2=50, l2=180, a3=30, o3=35, l3=320)
    text = text.replace('load = "60 A"', 'load = "60 A"\nroute = "TRAY-NORTH"').replace(
        'load = "45 A"', 'load = "45 A"\nroute = "TRAY-NORTH"')
    scenario = load_scenario(write_scenario(tmp_path, text, max_sets=2))
    assert [n.route for n in scenario.nodes] == ["", "TRAY-NORTH", "TRAY-NORTH", ""]
    p = build_problem(prepare(scenario), Objective.CAPEX)
    assert p.has_routes and set(p.route_of.tolist()) == {-1, 0}


@pytest.mark.parametrize(("rules", "given", "smallest"), [
    ("iec", None, "50 mm2"),         # common practice: parallel sets from 50 mm2
    ("iec", "16 mm2", "16 mm2"),     # a practice minimum may be lowered
    ("nec", None, "1/0 AWG"),        # NEC 310.10(G)(1): 1/0 AWG and larger
    ("nec", "4 AWG", "1/0 AWG"),     # never below the code's minimum
    ("nec", "4/0 AWG", "4/0 AWG"),   # but raised
])
def test_min_parallel_size_override(rules: str, given: str | None, smallest: str) -> None:
    from sizer.candidates import _min_parallel
    profile = load_profile(rules)
    assert profile.sizes[_min_parallel(profile, given)] == smallest


def test_min_parallel_size_reaches_the_table(tmp_path: Path) -> None:
    nodes = """
[[node]]
id = "FEED"
parent = "SRC"
length = "100 ft"
ocpd = "400 A"
min_parallel_size = "300 kcmil"
"""
    t = prepare(load_scenario(write_scenario(tmp_path, nodes))).table
    assert t.sets.max() > 1 and t.size_index[t.sets > 1].min() == NEC.size_index("300 kcmil")


def test_terminal_table_beside_the_price_list_replaces_the_profiles(tmp_path: Path) -> None:
    import shutil

    from sizer.catalogue.prices import bundled_price_list_path
    src = bundled_price_list_path("demo-us.csv")
    for suffix in (".csv", ".raceways.csv"):
        shutil.copy(src.with_name(f"demo-us{suffix}"), tmp_path / f"mine{suffix}")
    (tmp_path / "mine.terminals.csv").write_text(
        "# source: test table: every device takes 14 AWG - 12 AWG\n"
        "ocpd_max_a,conductors_per_terminal,min_size,max_size\n"
        "6000,4,14 AWG,12 AWG\n", encoding="utf-8")
    path = write_scenario(tmp_path, LONG_BRANCH, max_sets=1, voltage="208 V")
    path.write_text(path.read_text(encoding="utf-8").replace(
        "[defaults]", '[prices]\ncatalogue = "mine.csv"\n\n[defaults]'), encoding="utf-8")
    prep = prepare(load_scenario(path))
    t = prep.table
    assert np.all(t.terminal_max == NEC.size_index("12 AWG"))


# --- the report: installed cost, its breakdown, and the limits that refused upsizing ----


def test_report_prices_the_whole_installation_and_names_refusals(tmp_path: Path) -> None:
    from sizer.report.html import landing_text, render_report
    from sizer.report.tables import option_row
    from sizer.results import solve_results
    refused = LONG_BRANCH.replace('ocpd = "20 A"\n', 'ocpd = "20 A"\noversize_termination = '
                                  '"refuse"\n').replace('"260 ft"', '"130 ft"')
    prep = prepare(load_scenario(write_scenario(tmp_path, refused, max_sets=1,
                                                voltage="208 V")))
    results = solve_results(prep, Objective.LIFECYCLE, compare=True)
    text = render_report(results)
    for header in ("Conductors USD", "Splices USD", "Raceways USD", "Lands", "Raceway"):
        assert header in text, header
    # the landing cell names the terminal's largest size when a splice is needed
    assert landing_text("reducing splice", "8 AWG") == "splice to 8 AWG"
    assert landing_text("direct", "8 AWG") == "direct"
    assert "REC: terminal limit: the 20 A device takes at most 8 AWG per terminal" in text
    row = option_row("lifecycle", "x", results.design, prep.economics, 0.4)
    assert row.capex == pytest.approx(row.conductor_capex + row.termination_capex
                                      + row.raceway_capex)
    assert row.raceway_capex > 0


def test_refused_everywhere_is_diagnosed_with_the_limit(tmp_path: Path) -> None:
    from sizer.optimize import optimise
    refused = LONG_BRANCH.replace('ocpd = "20 A"\n', 'ocpd = "20 A"\noversize_termination = '
                                  '"refuse"\n')
    prep = prepare(load_scenario(write_scenario(tmp_path, refused, max_sets=1,
                                                voltage="208 V")))
    design = optimise(prep, Objective.CAPEX)
    assert design.status == "infeasible"
    assert any("refused by a terminal limit: the 20 A device takes at most 8 AWG" in line
               for line in design.diagnosis), design.diagnosis


# --- direct burial: soil and depth -------------------------------------------------------


@pytest.mark.parametrize(("installation", "rho", "depth", "factor"), [
    # IEC 60364-5-52 Table B.52.16 [M] (reference 2.5 K.m/W), depth 0.7 m reference
    ("direct_buried", 2.5, 0.7, 1.00),
    ("direct_buried", 1.0, None, 1.50),
    ("direct_buried", 1.2, None, 1.28),      # between rows: the more severe row (1.5)
    ("buried", 1.0, None, 1.18),             # in ducts (D1)
    ("direct_buried", None, 1.0, 0.97),      # depth, common practice [M]
    ("conduit", 1.0, 1.0, 1.00),             # not in the ground
])
def test_iec_soil_and_depth_factors(installation, rho, depth, factor) -> None:
    from sizer.rules.ampacity import soil_factor
    assert soil_factor(load_profile("iec"), installation, rho, depth) == pytest.approx(factor)


def test_nec_does_not_correct_for_soil() -> None:
    from sizer.rules.ampacity import soil_factor
    assert soil_factor(NEC, "direct_buried", 0.6, 1.5) == 1.0
    assert any("soil thermal resistivity" in note for note in NEC.notes)


def test_direct_burial_pays_its_trench_and_derates_with_the_soil(tmp_path: Path) -> None:
    base = """
[[node]]
id = "FAR"
parent = "SRC"
length = "200 m"
ocpd = "160 A"
installation = "direct_buried"
"""
    head = {"rules": "iec", "currency": "EUR", "voltage": "400 V",
            "energy_price": "0.2 EUR/kWh"}

    def table(extra: str, name: str):
        path = write_scenario(tmp_path, base + extra, name=name, **head)
        path.write_text(path.read_text(encoding="utf-8").replace('terminals = "75 degC"',
                                                                 'terminals = "auto"'),
                        encoding="utf-8")
        return prepare(load_scenario(path))

    reference = table("", "a.toml")
    moist = table('soil_resistivity = "1 K*m/W"\n', "b.toml")
    t, u = reference.table, moist.table
    one = (t.sets == 1) & (t.size_index == reference.catalogue.sizes.index("120 mm2"))
    two = (u.sets == 1) & (u.size_index == moist.catalogue.sizes.index("120 mm2"))
    assert float(u.ampacity_a[two][0]) == pytest.approx(1.5 * float(t.ampacity_a[one][0]))
    design = _solve(reference, Objective.CAPEX)
    far = design.segments[0]
    assert far.raceway == "direct buried in trench"
    trench = reference.prices.raceways.trench_per_m * 200
    assert far.raceway_capex == pytest.approx(trench)


def test_sets_in_one_raceway_share_it_and_derate_together(tmp_path: Path) -> None:
    nodes = """
[[node]]
id = "FEED"
parent = "SRC"
length = "100 ft"
ocpd = "400 A"
sets_in_one_raceway = true
"""
    prep = prepare(load_scenario(write_scenario(tmp_path, nodes)))
    t = prep.table
    two = (t.sets == 2) & (t.size_index == NEC.size_index("250 kcmil"))
    # 250 kcmil Cu: 290 A at 90 degC, 255 A at 75 degC (NEC Table 310.16). Two sets in one
    # raceway are 6 current-carrying conductors: factor 0.80 -> 232 A per set, 464 A.
    assert two.any() and float(t.ampacity_a[two][0]) == pytest.approx(2 * 0.8 * 290)
    design = _solve(prep, Objective.CAPEX)
    assert design.segments[0].raceway.startswith("1 x ")
    # one raceway holds 2 x 3 phase conductors and one EGC (NEC 250.122(F) [M]) at 40 %
    k = raceway_size_index(NEC.raceway.types["EMT"].area_mm2, NEC.raceway.fill,
                           6 * NEC.raceway.conductor_area_mm2["Cu"][NEC.size_index("250 kcmil")]
                           + NEC.raceway.conductor_area_mm2["Cu"][NEC.size_index("3 AWG")], 7)
    assert k >= 0


def test_check_reports_a_pinned_conductor_that_cannot_land(tmp_path: Path) -> None:
    from sizer.optimize import check
    pinned = LONG_BRANCH.replace('ocpd = "20 A"\n', 'ocpd = "20 A"\noversize_termination = '
                                 '"refuse"\nconductor = "4 AWG Cu"\n')
    prep = prepare(load_scenario(write_scenario(tmp_path, pinned, voltage="208 V")),
                   keep_pins=True)
    design = check(prep)
    assert design.status == "violations"
    assert any(v.segment == "REC" and v.rule == "termination" for v in design.violations)


def test_buried_runs_of_one_route_share_their_trench(tmp_path: Path) -> None:
    nodes = "".join(f"""
[[node]]
id = "F{k}"
parent = "SRC"
length = "100 ft"
ocpd = "100 A"
installation = "buried"
{'route = "TRENCH-1"' if k < 3 else ''}
""" for k in range(1, 4))
    prep = prepare(load_scenario(write_scenario(tmp_path, nodes, max_sets=1)))
    design = _solve(prep, Objective.CAPEX)
    trench = prep.prices.raceways.trench_per_m * 100 * 0.3048
    ducts = {s.id: s.raceway_capex for s in design.segments}
    # F1 and F2 share one trench (half each); F3 pays its own
    alone = ducts["F3"] - trench
    assert ducts["F1"] - trench / 2 == pytest.approx(alone, rel=1e-9)
    assert ducts["F2"] - trench / 2 == pytest.approx(alone, rel=1e-9)

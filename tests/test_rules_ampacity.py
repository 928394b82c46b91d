"""Ampacity rules against NEC 310.16, Table 310.15(B)(1), 310.15(C)(1) and worked examples."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from reference_tables import awg_name, read_reference

from sizer.errors import ScenarioError, UnitError
from sizer.rules import (
    INSTALLATIONS,
    PROFILES,
    ambient_factor,
    ampacity_a,
    ampacity_ok,
    grouping_factor,
    load_profile,
    table_ampacity_a,
    terminal_temperature_c,
    unadjusted_ampacity_a,
)

REFERENCE = Path(__file__).parent / "reference"


# --- NEC Table 310.16 ------------------------------------------------------------------------

NEC_310_16 = read_reference("nec_310_16_ampacity_2014_to_2023.csv")  # 2014-2023 [C]/[M]


@pytest.mark.parametrize("name", ["nec", "cec"])  # cec: NEC values as a declared stand-in
@pytest.mark.parametrize("installation", INSTALLATIONS)
def test_every_cell_of_nec_310_16(name: str, installation: str) -> None:
    # NFPA 70 Table 310.16, editions 2014-2023: [C] to 600 kcmil, [M] 700-1000 kcmil
    p = load_profile(name)
    idx = np.array([p.size_index(awg_name(r["size"])) for r in NEC_310_16])
    assert len(idx) == len(p.sizes)
    for material in ("Cu", "Al"):
        for column in (60, 75, 90):
            expected = np.array([float(r[f"{material.lower()}_{column}C"] or "nan")
                                 for r in NEC_310_16])
            got = table_ampacity_a(p, material, idx, column, installation)
            np.testing.assert_array_equal(got, expected)


def test_common_practice_90c_copper() -> None:
    # common practice (no published source needed): 90 degC Cu 4 AWG = 95 A, 6 AWG = 75 A
    p = load_profile("nec")
    got = table_ampacity_a(p, "Cu", [p.size_index("4 AWG"), p.size_index("6 AWG")], 90,
                           "conduit")
    assert got.tolist() == [95.0, 75.0]


def test_invalid_indices_give_nan() -> None:
    p = load_profile("nec")
    got = table_ampacity_a(p, "Cu", np.array([-1, 0, len(p.sizes)]), 75, "conduit")
    assert math.isnan(got[0]) and got[1] == 20.0 and math.isnan(got[2])
    # NEC 310.16 has no 14 AWG aluminium
    assert math.isnan(float(table_ampacity_a(p, "Al", 0, 75, "conduit")))


def test_bad_arguments_are_named() -> None:
    p = load_profile("nec")
    with pytest.raises(UnitError, match="Fe"):
        table_ampacity_a(p, "Fe", 0, 75, "conduit")
    with pytest.raises(ScenarioError, match="80 degC is not an ampacity column"):
        table_ampacity_a(p, "Cu", 0, 80, "conduit")
    with pytest.raises(ScenarioError, match="unknown installation"):
        table_ampacity_a(p, "Cu", 0, 75, "attic")
    with pytest.raises(ScenarioError, match="insulation rated 70 degC"):
        ampacity_a(p, "Cu", 0, 70, None, 30, 3, "conduit")
    with pytest.raises(ScenarioError, match="grouping"):
        grouping_factor(p, 0)
    with pytest.raises(ScenarioError, match="ambient"):
        ambient_factor(p, 90, math.nan)
    with pytest.raises(TypeError):
        table_ampacity_a(p, "Cu", 1.5, 75, "conduit")


# --- ambient correction ----------------------------------------------------------------------

NEC_AMBIENT = read_reference("nec_310_15_B_1_ambient_correction_30C.csv")  # 2020/2023 [C]


@pytest.mark.parametrize("row", NEC_AMBIENT, ids=lambda r: r["ambient_C"])
@pytest.mark.parametrize("column", [60, 75, 90])
def test_ambient_formula_reproduces_nec_table_310_15_b_1(row: dict, column: int) -> None:
    # NEC Table 310.15(B)(1) (2020/2023) [C]: every printed factor is NEC Equation 310.15(B)
    # at the band's upper temperature, 2 decimals; a blank cell means the conductor
    # cannot be used at that ambient (factor 0 here).
    at_c = float(row["formula_eval_at_C"])
    printed = row[f"f_{column}C"]
    got = ambient_factor(load_profile("nec"), column, at_c)
    assert got == (float(printed) if printed else 0.0)


@given(st.sampled_from(NEC_AMBIENT[1:]), st.sampled_from([60, 75, 90]), st.floats(0, 1))
def test_formula_never_below_the_printed_band_factor(row: dict, column: int, u: float) -> None:
    # NEC 310.15(B) permits the equation instead of the table; within a band the equation
    # is never below the table's factor, which is taken at the band's warmest temperature.
    top = float(row["formula_eval_at_C"])
    printed = row[f"f_{column}C"]
    ambient = top - 4.999 * u
    assert ambient_factor(load_profile("nec"), column, ambient) >= (
        float(printed) if printed else 0.0)


def test_no_credit_below_10c_and_zero_at_rating() -> None:
    p = load_profile("nec")
    # Table 310.15(B)(1): "10 degC or less" -> 1.15 for 90 degC [C]
    assert ambient_factor(p, 90, -40.0) == 1.15
    assert ambient_factor(p, 90, 90.0) == 0.0
    assert ambient_factor(p, 75, 120.0) == 0.0
    np.testing.assert_array_equal(ambient_factor(p, 90, np.array([30.0, 40.0])), [1.0, 0.91])


# IEC 60364-5-52 Table B.52.14 (air, 30 degC) and B.52.15 (ground, 20 degC): values [M]
IEC_AIR = {70: {10: 1.22, 15: 1.17, 20: 1.12, 25: 1.06, 35: 0.94, 40: 0.87, 45: 0.79, 50: 0.71,
                55: 0.61, 60: 0.50},
           90: {10: 1.15, 15: 1.12, 20: 1.08, 25: 1.04, 35: 0.96, 40: 0.91, 45: 0.87, 50: 0.82,
                55: 0.76, 60: 0.71, 65: 0.65, 70: 0.58, 75: 0.50, 80: 0.41}}
IEC_GROUND = {70: {10: 1.10, 15: 1.05, 25: 0.95, 30: 0.89, 35: 0.84, 40: 0.77, 45: 0.71,
                   50: 0.63, 55: 0.55, 60: 0.45},
              90: {10: 1.07, 15: 1.04, 25: 0.96, 30: 0.93, 35: 0.89, 40: 0.85, 45: 0.80,
                   50: 0.76, 55: 0.71, 60: 0.65, 65: 0.60, 70: 0.53, 75: 0.46, 80: 0.38}}


@pytest.mark.parametrize(("table", "installation"), [(IEC_AIR, "conduit"), (IEC_AIR, "tray"),
                                                     (IEC_AIR, "free_air"),
                                                     (IEC_GROUND, "buried")])
def test_iec_ambient_factors(table: dict, installation: str) -> None:
    p = load_profile("iec")
    for insulation, factors in table.items():
        for ambient, factor in factors.items():
            assert ambient_factor(p, insulation, ambient, installation) == factor, (
                insulation, ambient)


# --- grouping --------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("conductors", "factor"),
    # NEC 310.15(C)(1) [C]: 4-6 80 %, 7-9 70 %, 10-20 50 %, 21-30 45 %, 31-40 40 %, 41+ 35 %
    [(1, 1.0), (3, 1.0), (4, 0.8), (6, 0.8), (7, 0.7), (9, 0.7), (10, 0.5), (20, 0.5),
     (21, 0.45), (30, 0.45), (31, 0.4), (40, 0.4), (41, 0.35), (200, 0.35)],
)
def test_nec_grouping_bands(conductors: int, factor: float) -> None:
    assert grouping_factor(load_profile("nec"), conductors) == factor


@pytest.mark.parametrize(
    ("conductors", "factor"),
    # CSA C22.1 Table 5C [M]: 4-6 80 %, 7-24 70 %, 25-42 60 %, 43+ 50 %
    [(3, 1.0), (4, 0.8), (6, 0.8), (7, 0.7), (24, 0.7), (25, 0.6), (42, 0.6), (43, 0.5)],
)
def test_cec_grouping_bands(conductors: int, factor: float) -> None:
    assert grouping_factor(load_profile("cec"), conductors) == factor


@pytest.mark.parametrize(
    ("conductors", "factor"),
    # IEC 60364-5-52 Table B.52.17 item 1 [M], circuits = ceil(conductors / 3):
    # 1 -> 1.00, 2 -> 0.80, 3 -> 0.70, 9 -> 0.50, 10-12 -> 0.45, 13-16 -> 0.41, 17+ -> 0.38
    [(3, 1.0), (4, 0.8), (6, 0.8), (9, 0.7), (27, 0.5), (30, 0.45), (36, 0.45), (37, 0.41),
     (60, 0.38), (300, 0.38)],
)
def test_iec_grouping_counts_circuits(conductors: int, factor: float) -> None:
    assert grouping_factor(load_profile("iec"), conductors) == factor


def test_grouping_is_vectorised() -> None:
    got = grouping_factor(load_profile("nec"), np.array([3, 4, 41]))
    np.testing.assert_array_equal(got, [1.0, 0.8, 0.35])


# --- corrected ampacity ----------------------------------------------------------------------


def test_worked_example_four_conductors() -> None:
    # NEC 310.15(C)(1) worked example [C]: 10 AWG 90 degC (40 A) with four current-carrying
    # conductors -> 40 x 0.80 = 32 A
    p = load_profile("nec")
    got = ampacity_a(p, "Cu", p.size_index("10 AWG"), 90, None, 30, 4, "conduit")
    assert float(got) == pytest.approx(32.0)


def test_terminal_column_limits_the_corrected_value() -> None:
    # NEC 110.14(C)(1) [C]: the lesser of the derated 90 degC value and the terminal column.
    p = load_profile("nec")
    i = p.size_index("10 AWG")
    assert float(ampacity_a(p, "Cu", i, 90, 60, 30, 3, "conduit")) == 30.0  # min(40, 30)
    assert float(ampacity_a(p, "Cu", i, 90, 60, 30, 4, "conduit")) == 30.0  # min(32, 30)
    # 40 degC ambient: 40 x 0.91 = 36.4, so the 75 degC terminal column (35 A) governs
    assert float(ampacity_a(p, "Cu", i, 90, 75, 40, 3, "conduit")) == 35.0
    # 50 degC ambient: 40 x 0.82 = 32.8 governs over 35
    assert float(ampacity_a(p, "Cu", i, 90, 75, 50, 3, "conduit")) == pytest.approx(32.8)
    # no terminal limit (None or NaN)
    assert float(ampacity_a(p, "Cu", i, 90, np.nan, 30, 3, "conduit")) == 40.0


def test_default_terminal_rule_feeds_ampacity() -> None:
    p = load_profile("nec")
    idx = np.array([p.size_index("1 AWG"), p.size_index("1/0 AWG")])
    term = terminal_temperature_c(p, 125.0, idx)  # 110.14(C)(1): 1 AWG -> 60, 1/0 -> 75
    got = ampacity_a(p, "Cu", idx, 90, term, 30, 3, "conduit")
    assert got.tolist() == [110.0, 150.0]


def test_continuous_load_and_correction_apply_separately() -> None:
    # NEC 210.19(A)(1)(a)/(b) [M]: 125 % of the continuous load against the unadjusted
    # (terminal-limited) value; the corrected value against the load itself.
    # 8 AWG Cu THHN, 75 degC terminals: 75 degC column 50 A; 90 degC column 55 A.
    p = load_profile("nec")
    i = p.size_index("8 AWG")
    args = dict(insulation_c=90, terminal_c=75, ambient_c=30, installation="conduit")
    assert float(unadjusted_ampacity_a(p, "Cu", i, 90, 75, "conduit")) == 50.0
    # 40 A continuous: 50 >= 1.25 x 40 and, with four conductors, 55 x 0.8 = 44 >= 40
    assert ampacity_ok(p, "Cu", i, grouping=4, current_a=40, continuous_a=40, **args)
    # 41 A continuous: 51.25 > 50 fails (a) although 44 >= 41 passes (b)
    assert not ampacity_ok(p, "Cu", i, grouping=4, current_a=41, continuous_a=41, **args)
    # 45 A noncontinuous with four conductors: (a) 45 <= 50 passes, (b) 44 < 45 fails
    assert not ampacity_ok(p, "Cu", i, grouping=4, current_a=45, **args)
    assert ampacity_ok(p, "Cu", i, grouping=3, current_a=45, **args)
    # two sets carry twice
    assert ampacity_ok(p, "Cu", i, grouping=3, current_a=80, continuous_a=80, sets=2, **args)
    with pytest.raises(ScenarioError, match="continuous part"):
        ampacity_ok(p, "Cu", i, grouping=3, current_a=10, continuous_a=20, **args)


def test_iec_lookups_and_buried_reference() -> None:
    # IEC 60364-5-52:2009 [M]: B.52.4 B1 Cu PVC 2.5 mm2 = 21 A; B.52.12 E Cu XLPE 630 mm2 =
    # 995 A (as in the NBR 5410 derivative [M]); D1 reference ground 20 degC.
    p = load_profile("iec")
    assert float(table_ampacity_a(p, "Cu", p.size_index("2.5 mm2"), 70, "conduit")) == 21.0
    assert float(table_ampacity_a(p, "Cu", p.size_index("630 mm2"), 90, "free_air")) == 995.0
    assert math.isnan(float(table_ampacity_a(p, "Cu", p.size_index("400 mm2"), 70, "conduit")))
    assert math.isnan(float(table_ampacity_a(p, "Al", p.size_index("6 mm2"), 70, "tray")))
    i = p.size_index("95 mm2")
    assert float(ampacity_a(p, "Cu", i, 70, None, 20, 3, "buried")) == 169.0
    assert float(ampacity_a(p, "Cu", i, 70, None, 30, 3, "buried")) == pytest.approx(169 * 0.89)
    # XLPE cable on 70 degC terminals (declared in the scenario) takes the PVC column
    assert float(ampacity_a(p, "Cu", i, 90, 70, 30, 3, "conduit")) == 207.0


# --- invariants ------------------------------------------------------------------------------


@pytest.mark.parametrize("name", PROFILES)
def test_tables_are_monotone_and_consistent(name: str) -> None:
    p = load_profile(name)
    for (method, material), table in p.ampacity_tables_a.items():
        for row in table:
            defined = row[~np.isnan(row)]
            assert np.all(np.diff(defined) > 0), (method, material)
            # NaN only at the ends of the size range (no holes)
            where = np.flatnonzero(~np.isnan(row))
            assert where.size == 0 or where[-1] - where[0] + 1 == where.size
        # a hotter column never carries less
        with np.errstate(invalid="ignore"):
            assert not np.any(np.diff(table, axis=0) < 0), (method, material)
        other = p.ampacity_tables_a.get((method, "Cu"))
        if material == "Al" and other is not None:
            both = ~np.isnan(table) & ~np.isnan(other)
            assert np.all(other[both] > table[both]), method  # copper carries more


cases = st.sampled_from(PROFILES).flatmap(lambda name: st.tuples(
    st.just(name),
    st.sampled_from(["Cu", "Al"]),
    st.sampled_from(INSTALLATIONS),
    st.sampled_from(load_profile(name).insulation_temps_c),
    st.sampled_from((None, *load_profile(name).column_temps_c)),
))


@settings(max_examples=150, deadline=None)
@given(cases, st.floats(-30, 100), st.floats(0, 30), st.integers(1, 60), st.integers(1, 60))
def test_ampacity_invariants(case: tuple, ambient: float, warmer: float, grouping: int,
                             more: int) -> None:
    name, material, installation, insulation, terminal = case
    p = load_profile(name)
    idx = np.arange(len(p.sizes))
    got = ampacity_a(p, material, idx, insulation, terminal, ambient, grouping, installation)
    table = table_ampacity_a(p, material, idx, insulation, installation)
    defined = ~np.isnan(got)
    np.testing.assert_array_equal(defined, ~np.isnan(table) & (
        True if terminal is None else ~np.isnan(
            table_ampacity_a(p, material, idx, terminal, installation))))
    assert np.all(got[defined] >= 0)
    # non-decreasing with size
    assert np.all(np.diff(got[defined]) >= -1e-9)
    # never above the uncorrected insulation column when at or above the table's ambient
    if ambient >= p.reference_ambient_c[p.method(installation)]:
        assert np.all(got[defined] <= table[defined] + 1e-9)
    # never above the terminal column
    if terminal is not None:
        limit = table_ampacity_a(p, material, idx, terminal, installation)
        assert np.all(got[defined] <= limit[defined] + 1e-9)
    # warmer or more crowded never carries more
    hotter = ampacity_a(p, material, idx, insulation, terminal, ambient + warmer, grouping,
                        installation)
    crowded = ampacity_a(p, material, idx, insulation, terminal, ambient, grouping + more,
                         installation)
    assert np.all(hotter[defined] <= got[defined] + 1e-9)
    assert np.all(crowded[defined] <= got[defined] + 1e-9)


@settings(max_examples=60, deadline=None)
@given(cases, st.floats(0, 2000), st.integers(1, 6))
def test_more_sets_never_fail_what_fewer_pass(case: tuple, current: float, sets: int) -> None:
    name, material, installation, insulation, terminal = case
    p = load_profile(name)
    idx = np.arange(len(p.sizes))
    kw = dict(insulation_c=insulation, terminal_c=terminal, ambient_c=35.0, grouping=3,
              installation=installation, current_a=current, continuous_a=current / 2)
    fewer = ampacity_ok(p, material, idx, sets=sets, **kw)
    assert np.all(ampacity_ok(p, material, idx, sets=sets + 1, **kw)[fewer])
    # and a larger size never fails what a smaller one passes (where both have values)
    table = table_ampacity_a(p, material, idx, insulation, installation)
    ok_defined = fewer[~np.isnan(table)]
    assert np.all(np.diff(ok_defined.astype(int)) >= 0)


# --- IEC: two loaded conductors (single-phase) against three (three-phase) -------------------

# IEC 60364-5-52:2009 [M] (from memory): Table B.52.2 (PVC, two loaded conductors) and
# B.52.4 (PVC, three loaded); B.52.3 / B.52.5 for XLPE; B.52.10 / B.52.12 method E.
IEC_TWO_AGAINST_THREE = [
    # (material, size, insulation degC, installation, two loaded A, three loaded A)
    ("Cu", "2.5 mm2", 70, "tray", 27.0, 24.0),      # method C, B.52.2 / B.52.4 [M]
    ("Cu", "2.5 mm2", 70, "conduit", 24.0, 21.0),   # method B1 [M]
    ("Cu", "2.5 mm2", 90, "tray", 33.0, 30.0),      # method C, B.52.3 / B.52.5 [M]
    ("Cu", "16 mm2", 70, "free_air", 94.0, 80.0),   # method E, B.52.10 [M]
    ("Cu", "95 mm2", 70, "buried", 204.0, 169.0),   # method D1, 2009 edition [M]
    ("Al", "50 mm2", 90, "tray", 154.0, 136.0),     # method C, Al, B.52.3 / B.52.5 [M]
]


@pytest.mark.parametrize(("material", "size", "insulation", "installation", "two", "three"),
                         IEC_TWO_AGAINST_THREE)
def test_iec_single_phase_takes_the_two_loaded_column(material, size, insulation, installation,
                                                      two, three) -> None:
    p = load_profile("iec")
    k = p.size_index(size)
    assert float(table_ampacity_a(p, material, k, insulation, installation, 2)) == two
    assert float(table_ampacity_a(p, material, k, insulation, installation, 3)) == three
    assert float(table_ampacity_a(p, material, k, insulation, installation)) == three
    # vectorised over the count, through the corrected value as well
    both = ampacity_a(p, material, np.array([k, k]), insulation, None, 30 if installation !=
                      "buried" else 20, 2, installation, loaded=np.array([2, 3]))
    assert both.tolist() == [two, three]


def test_iec_two_loaded_falls_back_to_three_and_nec_ignores_the_count() -> None:
    p = load_profile("iec")
    # D1 aluminium has no two-loaded value kept: the three-loaded one (lower, safe side)
    k = p.size_index("95 mm2")
    assert float(table_ampacity_a(p, "Al", k, 70, "buried", 2)) == 132.0
    # 630 mm2 E: only three loaded kept
    assert float(table_ampacity_a(p, "Cu", p.size_index("630 mm2"), 90, "free_air", 2)) == 995.0
    # NEC 310.16 is per conductor: the count enters by 310.15(C)(1) adjustment only
    n = load_profile("nec")
    i = n.size_index("12 AWG")
    assert (float(table_ampacity_a(n, "Cu", i, 90, "conduit", 2))
            == float(table_ampacity_a(n, "Cu", i, 90, "conduit", 3)) == 30.0)
    assert not n.ampacity_two_loaded_a and not load_profile("cec").ampacity_two_loaded_a


def test_iec_two_loaded_tables_are_monotone_and_above_three() -> None:
    p = load_profile("iec")
    assert p.ampacity_two_loaded_a
    for key, two in p.ampacity_two_loaded_a.items():
        three = p.ampacity_tables_a[key]
        both = ~np.isnan(two) & ~np.isnan(three)
        # fewer loaded conductors heat less: always more current, by at most 30 %
        assert np.all(two[both] > three[both]) and np.all(two[both] < 1.3 * three[both]), key
        for row in two:
            defined = row[~np.isnan(row)]
            assert np.all(np.diff(defined) > 0), key


ONE_AND_THREE_PHASE = """
[[node]]
id = "ONE"
parent = "SRC"
length = "20 m"
phases = 1
voltage = "230 V"
load = "1 kW"
power_factor = 1.0
ocpd = "16 A"
installation = "tray"
conductor = "2.5 mm2 Cu"

[[node]]
id = "THREE"
parent = "SRC"
length = "20 m"
load = "3 kW"
power_factor = 1.0
ocpd = "16 A"
installation = "tray"
conductor = "2.5 mm2 Cu"
"""


def test_candidate_table_gives_single_phase_iec_runs_the_two_loaded_column(tmp_path) -> None:
    # IEC 60364-5-52:2009 [M]: 2.5 mm2 Cu PVC, method C (clipped / unperforated tray), 30
    # degC: 27 A with two loaded conductors (Table B.52.2), 24 A with three (B.52.4). The
    # candidate table feeds both engines, so both see these values.
    from builders import write_scenario

    from sizer.optimize import prepare
    from sizer.scenario import load_scenario

    path = write_scenario(tmp_path, ONE_AND_THREE_PHASE, rules="iec", currency="EUR",
                          energy_price="0.2 EUR/kWh", voltage="400 V", insulation="70 degC",
                          max_sets=1)
    path.write_text(path.read_text().replace('terminals = "75 degC"\n', ""))
    prep = prepare(load_scenario(path), keep_pins=True)
    k = prep.catalogue.index("2.5 mm2")
    got = {}
    for s, seg in enumerate(prep.segments):
        rows = np.flatnonzero((prep.table.segment == s) & (prep.table.size_index == k)
                              & (prep.table.material == 0) & (prep.table.sets == 1))
        got[seg.node.id] = float(prep.table.ampacity_a[rows[0]])
    assert got == {"ONE": 27.0, "THREE": 24.0}

"""Rule profiles load from their TOML/CSV data, check themselves, and say where values come from."""

from __future__ import annotations

import dataclasses
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
from reference_tables import read_reference

from sizer.errors import ScenarioError, UnitError
from sizer.rules import INSTALLATIONS, PROFILES, RuleProfile, load_profile, read_profile
from sizer.rules.profile import MM2_PER_CMIL

RULES_DIR = Path(__file__).parent.parent / "sizer" / "rules"
REFERENCE = Path(__file__).parent / "reference"

# The canonical size names and their order, as fixed by the module contract (CONTRACT.md).
AWG_SIZES = ("14 AWG", "12 AWG", "10 AWG", "8 AWG", "6 AWG", "4 AWG", "3 AWG", "2 AWG", "1 AWG",
             "1/0 AWG", "2/0 AWG", "3/0 AWG", "4/0 AWG", "250 kcmil", "300 kcmil", "350 kcmil",
             "400 kcmil", "500 kcmil", "600 kcmil", "700 kcmil", "750 kcmil", "800 kcmil",
             "900 kcmil", "1000 kcmil")
METRIC_SIZES = ("1.5 mm2", "2.5 mm2", "4 mm2", "6 mm2", "10 mm2", "16 mm2", "25 mm2", "35 mm2",
                "50 mm2", "70 mm2", "95 mm2", "120 mm2", "150 mm2", "185 mm2", "240 mm2",
                "300 mm2", "400 mm2", "500 mm2", "630 mm2")


@pytest.mark.parametrize("name", PROFILES)
def test_bundled_profiles_load_and_are_cached(name: str) -> None:
    p = load_profile(name)
    assert isinstance(p, RuleProfile)
    assert p.name == name
    assert load_profile(name) is p
    assert p.title and p.edition
    assert set(p.installation_methods) == set(INSTALLATIONS)
    assert p.sizes == (AWG_SIZES if p.catalogue == "awg" else METRIC_SIZES)


@pytest.mark.parametrize("name", PROFILES)
def test_profiles_are_frozen(name: str) -> None:
    p = load_profile(name)
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.drop_total_pct = 10.0  # type: ignore[misc]
    with pytest.raises(ValueError, match="read-only"):
        p.size_area_mm2[0] = 1.0
    table = next(iter(p.ampacity_tables_a.values()))
    with pytest.raises(ValueError, match="read-only"):
        table[0, 0] = 1.0
    with pytest.raises(TypeError):
        p.sources["voltage_drop"] = "x"  # type: ignore[index]


@pytest.mark.parametrize("name", PROFILES)
def test_every_topic_names_its_source(name: str) -> None:
    p = load_profile(name)
    for topic in ("voltage_drop", "unknown_load", "continuous", "sizes", "ampacity_table",
                  "ampacity", "ambient", "grouping", "standard_ratings", "next_size_up",
                  "egc", "short_circuit", "motor_start"):
        assert p.sources[topic].strip(), topic


def test_every_rule_table_opens_with_its_source() -> None:
    for path in sorted(RULES_DIR.glob("*.csv")):
        comments = [ln for ln in path.read_text(encoding="utf-8").splitlines()
                    if ln.startswith("#")]
        assert any(ln.lstrip("# ").lower().startswith("source:") for ln in comments), path.name


def test_unknown_profile_is_a_scenario_error() -> None:
    with pytest.raises(ScenarioError, match="unknown rule profile 'bs7671'"):
        load_profile("bs7671")


def test_nec_values() -> None:
    p = load_profile("nec")
    # NEC 210.19 / 215.2 informational notes [C/M]: 3 % branch, 3 % feeder, 5 % total
    assert (p.drop_branch_pct, p.drop_feeder_pct, p.drop_total_pct) == (3.0, 3.0, 5.0)
    assert p.drop_limit_pct("feeder") == 3.0
    # common practice (the NEC has none): 80 % of the device when the load is unknown
    assert p.unknown_load_factor == 0.8
    # NEC 210.19(A)(1)(a) [M]: 125 % of continuous load
    assert p.continuous_factor == 1.25
    # NEC 240.6(A) [C], without the fuse-only 1, 3, 6, 10, 601 A
    assert p.standard_ratings_a == (15, 20, 25, 30, 35, 40, 45, 50, 60, 70, 80, 90, 100, 110,
                                    125, 150, 175, 200, 225, 250, 300, 350, 400, 450, 500, 600,
                                    700, 800, 1000, 1200, 1600, 2000, 2500, 3000, 4000, 5000,
                                    6000)
    assert p.next_size_up_max_a == 800.0  # NEC 240.4(B) [M]
    assert p.min_parallel_size == "1/0 AWG"  # NEC 310.10(G) [C/M]
    assert p.insulation_temps_c == (60.0, 75.0, 90.0)
    # thermoplastic 75 -> 150 degC, XLPE 90 -> 250 degC (ICEA practice) [M]
    assert p.final_temperature_c(75) == 150.0
    assert p.final_temperature_c(90) == 250.0
    assert p.default_clearing_time_s == pytest.approx(1 / p.frequency_hz, rel=0.01)  # one cycle
    assert p.motor_start_dip_pct == 15.0
    assert p.frequency_hz == 60.0
    assert p.terminal_rule is not None and (p.terminal_rule.low_c, p.terminal_rule.high_c) == (
        60.0, 75.0)


def test_cec_values() -> None:
    p = load_profile("cec")
    # CSA C22.1 Rule 8-102 [C]: 3 % feeder or branch, 5 % total;
    # 80 % of the device rating when the load is unknown (common practice, Canadian rule)
    assert (p.drop_branch_pct, p.drop_feeder_pct, p.drop_total_pct) == (3.0, 3.0, 5.0)
    assert p.unknown_load_factor == 0.8
    assert p.continuous_factor == 1.25
    assert p.catalogue == "awg"
    # NEC values stand in for the CEC tables, and the profile says so
    assert "STAND-IN" in p.sources["ampacity"]
    assert any("STAND-IN" in note for note in p.notes)
    # its own rules, from memory and marked so: bonding conductors by CEC Table 16 (by the
    # conductor's ampacity), secondary conductors at 125 % (Rule 26-256), the continuous
    # 80 % on the ampacity as installed (Rule 8-104), motor Tables 44 and 45
    assert p.egc_rule == "conductor_ampacity" and "[M]" in p.sources["egc"]
    assert p.egc_table[5] == (200.0, "6 AWG", "4 AWG")   # CEC Table 16 [M]
    assert (p.secondary_rule, p.secondary_factor) == ("rated_current", 1.25)
    assert p.continuous_after_adjustment
    assert p.motors is not None and p.motors.three_phase.name == "CEC Table 44"


def test_iec_values() -> None:
    p = load_profile("iec")
    assert p.catalogue == "metric"
    assert p.frequency_hz == 50.0
    # IEC 60364-5-52 Annex G [C]: 5 % other uses (3 % lighting) from the origin
    assert p.drop_total_pct == 5.0 and p.drop_branch_pct == p.drop_feeder_pct == 3.0
    assert p.unknown_load_factor == 1.0  # Ib = In, no IEC unknown-load rule
    assert p.continuous_factor == 1.0
    assert p.next_size_up_max_a is None  # IEC 60364-4-43 433.1: In <= Iz
    assert p.terminal_rule is None
    # common practice (IEC 60364-5-52 523.7 sets no minimum [M]): parallel sets from 50 mm2
    assert p.min_parallel_size == "50 mm2"
    assert p.insulation_temps_c == (70.0, 90.0)
    assert p.final_temperature_c(70) == 160.0  # IEC 60364-4-43 Table 43A [M]
    assert {p.method(i) for i in INSTALLATIONS} == {"B1", "C", "E", "D1"}
    assert p.method("buried") == "D1" and p.reference_ambient_c["D1"] == 20.0


def test_awg_areas_are_nec_table_8_circular_mils() -> None:
    # NEC Chapter 9 Table 8 [C]: the areas that 250.122(B) ratios use
    p = load_profile("nec")
    for row in read_reference("nec_ch9_table8.csv"):
        size = row["size_awg_kcmil"]
        name = f"{size} AWG" if "/" in size or int(size) < 250 else f"{size} kcmil"
        area = p.size_area_mm2[p.size_index(name)]
        assert area / MM2_PER_CMIL == pytest.approx(float(row["area_cmil"]), rel=1e-12)


@pytest.mark.parametrize("name", PROFILES)
def test_size_order_matches_the_catalogue(name: str) -> None:
    from sizer.catalogue import load_catalogue

    cat = load_catalogue(load_profile(name).catalogue)
    assert tuple(cat.sizes) == load_profile(name).sizes
    # nominal names agree with the catalogue's areas (Table 8 rounds to 4 figures)
    np.testing.assert_allclose(cat.area_mm2, load_profile(name).size_area_mm2, rtol=2e-3)


def test_size_index_and_method_errors() -> None:
    p = load_profile("nec")
    assert p.size_index("4/0 AWG") == 12
    with pytest.raises(UnitError, match="95 mm2"):
        p.size_index("95 mm2")
    with pytest.raises(ScenarioError, match="unknown installation 'ceiling'"):
        p.method("ceiling")
    with pytest.raises(ScenarioError, match="105 degC"):
        p.check_insulation(105)
    with pytest.raises(ScenarioError, match="voltage-drop kind"):
        p.drop_limit_pct("service")


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"drop_total_pct": 2.0}, "exceeds the total"),
        ({"unknown_load_factor": 0.0}, "unknown_load_factor"),
        ({"continuous_factor": 0.8}, "continuous_factor"),
        ({"standard_ratings_a": (20.0, 15.0)}, "ascending"),
        ({"grouping_bands": ((3.0, 1.0), (6.0, 0.8))}, "end with inf"),
        ({"grouping_bands": ((3.0, 0.8), (math.inf, 0.9))}, "never rise"),
        ({"min_parallel_size": "50 mm2"}, "min_parallel_size"),
        ({"insulation_temps_c": (60.0, 105.0)}, "no ampacity column"),
        ({"default_clearing_time_s": 0.0}, "clearing"),
        ({"motor_start_dip_pct": 150.0}, "motor_start_dip_pct"),
        ({"short_circuit_final_c": ((60.0, 150.0), (75.0, 70.0), (90.0, 250.0))}, "final"),
        ({"next_size_up_max_a": -1.0}, "next_size_up_max_a"),
        ({"catalogue": "imperial"}, "catalogue"),
    ],
)
def test_profile_checks_itself(change: dict, message: str) -> None:
    with pytest.raises(ScenarioError, match=message) as info:
        dataclasses.replace(load_profile("nec"), **change)
    assert info.value.file is not None and info.value.file.endswith("nec.toml")


def _copy_profile(tmp_path: Path, name: str = "nec") -> Path:
    for path in RULES_DIR.glob("*.csv"):
        shutil.copy(path, tmp_path / path.name)
    target = tmp_path / f"custom_{name}.toml"
    shutil.copy(RULES_DIR / f"{name}.toml", target)
    return target


def test_custom_profile_file_loads(tmp_path: Path) -> None:
    path = _copy_profile(tmp_path)
    text = path.read_text(encoding="utf-8").replace('name = "nec"', 'name = "site"')
    path.write_text(text.replace("total_pct = 5.0", "total_pct = 4.0"), encoding="utf-8")
    p = load_profile(str(path))
    assert p.name == "site" and p.drop_total_pct == 4.0


def test_typo_in_profile_is_named(tmp_path: Path) -> None:
    path = _copy_profile(tmp_path)
    text = path.read_text(encoding="utf-8").replace("branch_pct = 3.0", "brnch_pct = 3.0")
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        read_profile(path)
    assert info.value.field in {"voltage_drop.branch_pct", "voltage_drop.brnch_pct"}


def test_bad_toml_and_missing_source_line(tmp_path: Path) -> None:
    path = _copy_profile(tmp_path)
    path.write_text("name = ", encoding="utf-8")
    with pytest.raises(ScenarioError, match="not valid TOML"):
        read_profile(path)
    path = _copy_profile(tmp_path)
    table = tmp_path / "nec_310_16.csv"
    lines = table.read_text(encoding="utf-8").splitlines()
    table.write_text("\n".join(ln for ln in lines if not ln.startswith("#")), encoding="utf-8")
    with pytest.raises(ScenarioError, match="source"):
        read_profile(path)


def test_ampacity_rows_must_follow_the_size_order(tmp_path: Path) -> None:
    path = _copy_profile(tmp_path)
    table = tmp_path / "nec_310_16.csv"
    lines = table.read_text(encoding="utf-8").splitlines()
    i = lines.index(next(ln for ln in lines if ln.startswith("12 AWG")))
    lines[i], lines[i + 1] = lines[i + 1], lines[i]
    table.write_text("\n".join(lines), encoding="utf-8")
    with pytest.raises(ScenarioError, match="in order"):
        read_profile(path)

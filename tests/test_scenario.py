"""Reading scenario files into the model: fields, units, inheritance, order, the demos."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from sizer.errors import ScenarioError, ScenarioErrors
from sizer.loads import design_segments
from sizer.model import CableSettings, Motor, Node
from sizer.rules import load_profile
from sizer.scenario import load_scenario
from sizer.units import M_PER_FT, ConductorSpec, LoadSpec

REPO = Path(__file__).resolve().parents[1]
DEMOS = {
    # file: (rules, currency, catalogue of prices, node count range)
    "kiln-hall.toml": ("nec", "USD", "costdata/demo-us.csv", (25, 60)),
    "hollinmoor-campus.toml": ("iec", "EUR", "costdata/demo-metric.csv", (30, 80)),
    "kestrel-arena.toml": ("cec", "CAD", "costdata/demo-ca.csv", (25, 80)),
}

FULL = """\
[project]
title = "Ridgeback Tile Works — kiln hall"
rules = "nec"
currency = "USD"

[economics]
energy_price = "0.12 USD/kWh"
demand_charge = "14 USD/kW"
escalation = "2 %"
discount_rate = "7 %"
load_growth = "0 %"
lifetime = "25 year"
load_factor = 0.55
hours = "8760 h"

[prices]
catalogue = "costdata/demo-us.csv"
copper = "10.5 USD/kg"
aluminium = "2.7 USD/kg"

[defaults]
ambient = "30 degC"
materials = ["Cu", "Al"]
insulation = "90 degC"
terminals = "75 degC"
installation = "conduit"
power_factor = 0.9
max_sets = 4

[source]
id = "SERVICE"
voltage = "480 V"
phases = 3
fault_current = "35 kA"

[[node]]
id = "SWBD"
parent = "SERVICE"
length = "25 ft"
ocpd = "1200 A"

[[node]]
id = "KILN-2"
parent = "SWBD"
length = "310 ft"
load = "180 kW"
power_factor = 0.95
continuous = true

[[node]]
id = "XFMR-L"
parent = "SWBD"
length = "60 ft"
transformer = { rating = "75 kVA", secondary = "208 V", impedance = "5.2 %", x_r = 4 }

[[node]]
id = "LTG-4"
parent = "XFMR-L"
length = "95 ft"
phases = 1
voltage = "120 V"
ocpd = "20 A"
conductor = "10 AWG Cu"
"""


def write(tmp_path: Path, text: str, name: str = "s.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_the_design_example_reads_as_written(tmp_path):
    sc = load_scenario(write(tmp_path, FULL))
    assert (sc.title, sc.rules, sc.currency) == ("Ridgeback Tile Works — kiln hall", "nec",
                                                  "USD")
    e = sc.economics
    assert e.energy_price_per_kwh == pytest.approx(0.12)
    assert e.demand_charge_per_kw_month == pytest.approx(14.0)
    assert (e.escalation, e.discount_rate, e.load_growth) == pytest.approx((0.02, 0.07, 0.0))
    assert (e.lifetime_years, e.load_factor, e.hours_per_year) == pytest.approx((25, 0.55, 8760))
    assert sc.prices.catalogue == Path("costdata/demo-us.csv")
    assert (sc.prices.copper_per_kg, sc.prices.aluminium_per_kg) == pytest.approx((10.5, 2.7))
    assert (sc.source.id, sc.source.voltage_v, sc.source.phases) == ("SERVICE", 480.0, 3)
    assert sc.source.fault_current_a == pytest.approx(35000.0)
    ids = [n.id for n in sc.nodes]
    assert ids == ["SWBD", "KILN-2", "XFMR-L", "LTG-4"]
    swbd, kiln, xfmr, ltg = sc.nodes
    # 25 ft = 25 × 0.3048 m = 7.62 m (exact by definition of the foot)
    assert swbd.length_m == pytest.approx(25 * M_PER_FT)
    assert swbd.ocpd_a == 1200.0
    assert kiln.load == LoadSpec("real", 180000.0)
    assert (kiln.power_factor, kiln.continuous) == (0.95, True)
    assert xfmr.transformer is not None
    t = xfmr.transformer
    assert (t.rating_va, t.secondary_v, t.impedance_pct, t.x_r) == (75000.0, 208.0, 5.2, 4.0)
    assert t.secondary_phases == 3 and t.core_loss_pct == 0.5
    # R% = Z%/√(1 + (X/R)²) = 5.2/√17 = 1.26118 %
    assert t.r_pct == pytest.approx(1.26118, abs=1e-5)
    assert ltg.pin == ConductorSpec(1, "10 AWG", "Cu")
    assert (ltg.voltage_v, ltg.phases) == (120.0, 1)
    # defaults inherited
    c = kiln.cable
    assert (c.materials, c.insulation_c, c.terminals_c, c.ambient_c, c.installation,
            c.max_sets, c.grouping) == (("Cu", "Al"), 90.0, 75.0, 30.0, "conduit", 4, None)
    assert swbd.power_factor == 0.9


def test_voltage_and_phases_inherit_from_the_bus(tmp_path):
    sc = load_scenario(write(tmp_path, FULL))
    swbd, _, xfmr, _ = sc.nodes
    assert (swbd.voltage_v, swbd.phases) == (480.0, 3)
    assert (xfmr.voltage_v, xfmr.phases) == (480.0, 3)       # primary side
    text = FULL.replace('phases = 1\nvoltage = "120 V"\n', "")
    sc = load_scenario(write(tmp_path, text))
    assert (sc.nodes[3].voltage_v, sc.nodes[3].phases) == (208.0, 3)   # the secondary bus


def test_single_phase_node_without_voltage_takes_line_to_line(tmp_path):
    sc = load_scenario(write(tmp_path, FULL.replace('voltage = "120 V"\n', "")))
    assert (sc.nodes[3].voltage_v, sc.nodes[3].phases) == (208.0, 1)


def test_line_to_neutral_within_two_percent(tmp_path):
    # 208/√3 = 120.09 V; 277 V for 480/√3 = 277.13 V: both the trade's round numbers
    sc = load_scenario(write(tmp_path, FULL.replace('"120 V"', '"118 V"')))
    assert sc.nodes[3].voltage_v == 118.0
    with pytest.raises(ScenarioError, match="line to neutral"):
        load_scenario(write(tmp_path, FULL.replace('"120 V"', '"115 V"')))


def test_one_phase_transformer_secondary_follows_its_primary(tmp_path):
    text = FULL.replace('length = "60 ft"\n', 'length = "60 ft"\nphases = 1\n').replace(
        'secondary = "208 V"', 'secondary = "240 V"')
    sc = load_scenario(write(tmp_path, text))
    assert sc.nodes[2].transformer.secondary_phases == 1
    assert sc.nodes[3].voltage_v == 120.0     # half of 240 V: the centre-tapped secondary


def test_node_settings_override_defaults(tmp_path):
    text = FULL.replace('conductor = "10 AWG Cu"\n',
                        'conductor = "10 AWG Cu"\nmaterials = "Cu"\nambient = "104 degF"\n'
                        'installation = "steel_conduit"\ngrouping = 6\nmax_sets = 1\n'
                        'terminals = "auto"\ninsulation = "75 degC"\n'
                        'clearing_time = "0.05 s"\nneutral = true\n'
                        'description = "Dock lighting"\n')
    ltg = load_scenario(write(tmp_path, text)).nodes[3]
    c = ltg.cable
    assert c.materials == ("Cu",)
    assert c.ambient_c == pytest.approx(40.0)     # (104 − 32) × 5/9 = 40 degC
    assert (c.installation, c.grouping, c.max_sets) == ("steel_conduit", 6, 1)
    assert (c.terminals_c, c.insulation_c) == (None, 75.0)
    assert ltg.clearing_time_s == 0.05 and ltg.neutral is True
    assert ltg.description == "Dock lighting"


def test_terminals_left_to_the_profile_when_not_given(tmp_path):
    sc = load_scenario(write(tmp_path, FULL.replace('terminals = "75 degC"\n', "")))
    assert all(n.cable.terminals_c is None for n in sc.nodes)


def test_motor_ratings_and_continuity(tmp_path):
    base = FULL.replace('load = "180 kW"\n', "")
    motors = [
        ("motor = { kw = 15 }", Motor(15000.0, 6.0, 0.3), True),
        # 20 hp × 745.6999 W = 14914.0 W (mechanical horsepower)
        ("motor = { hp = 20, start_multiple = 5, start_pf = 0.25 }",
         Motor(20 * 745.6998715822702, 5.0, 0.25), True),
        ('motor = { power = "7.5 kW" }\ncontinuous = false', Motor(7500.0), False),
    ]
    for line, expected, continuous in motors:
        text = base.replace("continuous = true\n", "").replace(
            "power_factor = 0.95\n", f"power_factor = 0.95\n{line}\n")
        kiln = load_scenario(write(tmp_path, text)).nodes[1]
        assert kiln.motor.power_w == pytest.approx(expected.power_w)
        assert (kiln.motor.start_multiple, kiln.motor.start_pf) == (
            expected.start_multiple, expected.start_pf)
        assert kiln.continuous is continuous
        assert kiln.load is None


def test_nodes_are_ordered_parents_first_and_stable(tmp_path):
    # LTG-4 and XFMR-L listed before their parents: moved after them; the rest keeps
    # file order.
    blocks = FULL.split("[[node]]")
    head, swbd, kiln, xfmr, ltg = blocks
    text = head + "[[node]]".join(["", ltg, kiln, xfmr, swbd])
    sc = load_scenario(write(tmp_path, text))
    assert [n.id for n in sc.nodes] == ["SWBD", "KILN-2", "XFMR-L", "LTG-4"]
    index = sc.index()
    for n in sc.nodes:
        if n.parent != sc.source.id:
            assert index[n.parent] < index[n.id]


def test_all_errors_are_collected(tmp_path):
    text = (FULL.replace('"310 ft"', '"-3 ft"').replace("power_factor = 0.95",
                                                         "power_factor = 7")
            .replace('parent = "XFMR-L"', 'parent = "XFMR"'))
    with pytest.raises(ScenarioErrors) as err:
        load_scenario(write(tmp_path, text))
    fields = [(e.node, e.field) for e in err.value.errors]
    assert fields == [("KILN-2", "length"), ("KILN-2", "power_factor"), ("LTG-4", "parent")]
    assert all(e.file == str(tmp_path / "s.toml") for e in err.value.errors)


def test_prices_path_beside_the_scenario_wins(tmp_path):
    (tmp_path / "costdata").mkdir()
    (tmp_path / "costdata" / "demo-us.csv").write_text("# x\n", encoding="utf-8")
    sc = load_scenario(write(tmp_path, FULL))
    assert sc.prices.catalogue == tmp_path / "costdata" / "demo-us.csv"


def test_model_checks_its_own_fields():
    # the first validation layer: a dataclass refuses bad values whoever builds it
    sc_node = dict(id="A", parent="S", length_m=10.0, voltage_v=480.0, phases=3,
                   cable=CableSettings())
    Node(**sc_node)
    for field, value in [("length_m", -1.0), ("length_m", math.nan), ("phases", 2),
                         ("power_factor", 1.5), ("demand_factor", 0.0), ("ocpd_a", -5.0)]:
        with pytest.raises(ScenarioError):
            Node(**{**sc_node, field: value})


# --- the demo scenarios ---------------------------------------------------------------------


@pytest.mark.parametrize("name", sorted(DEMOS))
def test_demo_loads_and_gets_design_currents(name):
    rules, currency, prices, (lo, hi) = DEMOS[name]
    path = REPO / "scenarios" / name
    assert "invented demo data" in path.read_text(encoding="utf-8").splitlines()[0]
    sc = load_scenario(path)
    assert (sc.rules, sc.currency) == (rules, currency)
    assert sc.prices.catalogue == Path(prices)
    assert lo <= len(sc.nodes) <= hi
    profile = load_profile(sc.rules)
    segs = design_segments(sc, profile)
    assert len(segs) == len(sc.nodes)
    for s in segs:
        assert math.isfinite(s.current_a) and s.current_a >= 0
        assert s.ocpd_a in profile.standard_ratings_a
        if s.is_leaf:
            assert s.current_a > 0
    # every transformer loaded 30-60 % so its regulation leaves room in the 5 % budget
    for s in segs:
        t = s.node.transformer
        if t is not None:
            below = [c for c in segs if c.parent_index == s.index]
            secondary_va = s.node.demand_factor * sum(abs(c.demand_va) for c in below)
            assert 0.25 <= secondary_va / t.rating_va <= 0.6, s.id


def test_demos_cover_their_brief():
    kiln = load_scenario(REPO / "scenarios" / "kiln-hall.toml")
    assert kiln.source.voltage_v == 480.0 and kiln.source.phases == 3
    assert sum(n.motor is not None for n in kiln.nodes) >= 5
    xf = [n for n in kiln.nodes if n.transformer]
    assert [(t.transformer.secondary_v, t.transformer.secondary_phases) for t in xf] == [
        (208.0, 3)]
    assert max(n.length_m for n in kiln.nodes) > 200          # a long feeder
    campus = load_scenario(REPO / "scenarios" / "hollinmoor-campus.toml")
    assert campus.source.voltage_v == 400.0
    assert {n.voltage_v for n in campus.nodes} == {400.0, 230.0}
    arena = load_scenario(REPO / "scenarios" / "kestrel-arena.toml")
    assert arena.source.voltage_v == 600.0
    unknown = [n for n in arena.nodes if n.load is None and n.motor is None
               and n.transformer is None and n.ocpd_a is not None
               and not any(c.parent == n.id for c in arena.nodes)]
    assert len(unknown) >= 5
    assert 347.0 in {n.voltage_v for n in arena.nodes}


def test_node_limit_is_two_hundred_thousand():
    from sizer.validation import Report, check_node_count

    check_node_count(200_000, Report("f.toml"))
    with pytest.raises(ScenarioError, match="at most 200,000"):
        check_node_count(200_001, Report("f.toml"))

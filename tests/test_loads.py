"""Design currents (sizer.loads) against hand calculations, per rule profile.

Every expected value is worked by hand in the comment beside it: I = S / V for 1-phase,
I = S / (√3 · V_LL) for 3-phase, S = P / pf (textbook power relations).
"""

from __future__ import annotations

import math
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sizer.errors import ScenarioError
from sizer.loads import design_segments
from sizer.rules import load_profile
from sizer.scenario import load_scenario

SQRT3 = math.sqrt(3)

HEAD = """
[project]
title = "loads test"
rules = "{rules}"
currency = "USD"

[economics]
energy_price = "0.12 USD/kWh"
discount_rate = "7 %"
lifetime = "25 year"
load_factor = 0.5

[source]
id = "SRC"
voltage = "{volts}"
phases = {phases}
"""


def scenario_from(tmp_path: Path, nodes: str, *, rules: str = "nec", volts: str = "480 V",
                  phases: int = 3, name: str = "s.toml"):
    path = tmp_path / name
    path.write_text(HEAD.format(rules=rules, volts=volts, phases=phases) + nodes,
                    encoding="utf-8")
    return load_scenario(path)


def segments(tmp_path: Path, nodes: str, **kw):
    sc = scenario_from(tmp_path, nodes, **kw)
    segs = design_segments(sc, load_profile(sc.rules))
    return {s.id: s for s in segs}


def leaf(load: str, *, pf: float | None = None, extra: str = "") -> str:
    pf_line = f"power_factor = {pf}\n" if pf is not None else ""
    return (f'[[node]]\nid = "L"\nparent = "SRC"\nlength = "100 ft"\nload = "{load}"\n'
            f"{pf_line}{extra}\n")


# --- one load, one conversion ---------------------------------------------------------------

CONVERSIONS = [
    # 180 kW, 480 V 3-phase, pf 0.95: I = 180000 / (√3·480·0.95) = 180000 / 789.815 = 227.90 A
    pytest.param("480 V", 3, leaf("180 kW", pf=0.95), 227.90, id="kW-3ph-480V"),
    # 75 kVA, 208 V 3-phase: I = 75000 / (√3·208) = 75000 / 360.267 = 208.18 A
    pytest.param("208 V", 3, leaf("75 kVA"), 208.18, id="kVA-3ph-208V"),
    # 42 A as written stays 42 A
    pytest.param("480 V", 3, leaf("42 A"), 42.0, id="A-3ph"),
    # 1.5 kW at 120 V line to neutral (208Y/120 V bus), pf 0.9: I = 1500 / (120·0.9) = 13.889 A
    pytest.param("208 V", 3, leaf("1.5 kW", pf=0.9, extra='phases = 1\nvoltage = "120 V"\n'),
                 13.889, id="kW-1ph-LN-120V"),
    # 2.9 kW at 277 V line to neutral (480Y/277 V bus), pf 0.95: 2900 / (277·0.95) = 11.020 A
    pytest.param("480 V", 3, leaf("2.9 kW", pf=0.95, extra='phases = 1\nvoltage = "277 V"\n'),
                 11.020, id="kW-1ph-LN-277V"),
    # 7.2 kW at 208 V line to line, pf 1: I = 7200 / 208 = 34.615 A
    pytest.param("208 V", 3, leaf("7.2 kW", pf=1.0, extra="phases = 1\n"), 34.615,
                 id="kW-1ph-LL-208V"),
    # 5 kW at 240 V on a 120/240 V 1-phase service, pf 1: I = 5000 / 240 = 20.833 A
    pytest.param("240 V", 1, leaf("5 kW", pf=1.0), 20.833, id="kW-1ph-240V"),
    # 1.2 kVA at 120 V, line to neutral of a 120/240 V service: I = 1200 / 120 = 10.0 A
    pytest.param("240 V", 1, leaf("1.2 kVA", extra='voltage = "120 V"\n'), 10.0,
                 id="kVA-1ph-120-of-240V"),
    # 10 hp as a load = 10 × 745.70 W = 7457.0 W; 480 V 3-phase pf 0.8:
    # I = 7457.0 / (√3·480·0.8) = 7457.0 / 665.11 = 11.212 A
    pytest.param("480 V", 3, leaf("10 hp", pf=0.8), 11.212, id="hp-load-3ph"),
]


@pytest.mark.parametrize(("volts", "phases", "nodes", "expected_a"), CONVERSIONS)
def test_load_conversion(tmp_path, volts, phases, nodes, expected_a):
    seg = segments(tmp_path, nodes, volts=volts, phases=phases)["L"]
    assert seg.current_a == pytest.approx(expected_a, abs=0.005)   # as rounded above
    assert seg.kind == "branch" and seg.is_leaf


def test_motor_sized_from_the_full_load_current_table(tmp_path):
    # NEC 430.6(A)(1): 20 hp three-phase on 480 V uses the 460 V column of NEC Table
    # 430.250: 27 A (from memory); 430.22: conductors >= 1.25 × 27 = 33.75 A, before and
    # after adjustment; 430.52 / Table 430.52: inverse-time breaker up to 250 % = 67.5 A,
    # not a standard rating, so the next one, 70 A (240.6(A)).
    nodes = ('[[node]]\nid = "M"\nparent = "SRC"\nlength = "100 ft"\npower_factor = 0.85\n'
             'motor = { hp = 20, start_multiple = 6, start_pf = 0.3 }\n')
    seg = segments(tmp_path, nodes)["M"]
    assert seg.current_a == pytest.approx(27.0)
    assert seg.required_ampacity_a == pytest.approx(33.75)
    assert seg.required_adjusted_a == pytest.approx(33.75)
    assert (seg.ocpd_a, seg.ocpd_chosen) == (70.0, True)
    assert seg.motor_branch and "NEC Table 430.250, 20 hp at 460 V" in seg.motor_basis
    assert seg.node.continuous


def test_motor_in_kw_iec(tmp_path):
    # iec: no full-load current table; typical values (iec_motor_typical.csv, from memory):
    # 15 kW, IE3 four-pole efficiency 92.1 %, power factor 0.85;
    # I = 15000 / (√3 · 400 · 0.921 · 0.85) = 15000 / 542.37 = 27.656 A; IEC 60364-4-43
    # has no motor factor: required = 27.656 A; device: next IEC 60898-1 rating, 32 A.
    nodes = ('[[node]]\nid = "M"\nparent = "SRC"\nlength = "50 m"\npower_factor = 0.86\n'
             'motor = { kw = 15 }\n')
    seg = segments(tmp_path, nodes, rules="iec", volts="400 V")["M"]
    assert seg.current_a == pytest.approx(27.656, abs=0.001)
    assert seg.required_ampacity_a == pytest.approx(27.656, abs=0.001)
    assert seg.ocpd_a == 32.0


def test_iec_motor_uses_its_nameplate_current(tmp_path):
    # iec: no full-load current table; a nameplate (rated) current given as the load is
    # the motor's current (without it, the typical values of test_motor_in_kw_iec).
    nodes = ('[[node]]\nid = "M"\nparent = "SRC"\nlength = "50 m"\nload = "29 A"\n'
             'motor = { kw = 15 }\n')
    seg = segments(tmp_path, nodes, rules="iec", volts="400 V")["M"]
    assert seg.current_a == 29.0 and "nameplate" in seg.motor_basis


def test_motor_nameplate_current_does_not_size_the_circuit(tmp_path):
    # NEC 430.6(A)(1): the table current sizes conductors and devices; a nameplate current
    # (given as the load) is for the overload relay only. 100 hp at 460 V: 124 A (NEC Table
    # 430.250, from memory), whatever the nameplate says.
    nodes = ('[[node]]\nid = "M"\nparent = "SRC"\nlength = "100 ft"\nload = "118 A"\n'
             'motor = { hp = 100 }\n')
    seg = segments(tmp_path, nodes)["M"]
    assert seg.current_a == 124.0
    assert seg.required_ampacity_a == pytest.approx(155.0)   # 1.25 × 124


def test_motor_power_alone_is_enough(tmp_path):
    # `motor = { power = "10 hp" }` with no load: NEC Table 430.250, 10 hp at 460 V: 14 A
    # (corroborated by the worked case); device 2.5 × 14 = 35 A, a standard rating.
    nodes = '[[node]]\nid = "M"\nparent = "SRC"\nlength = "100 ft"\nmotor = { power = "10 hp" }\n'
    seg = segments(tmp_path, nodes)["M"]
    assert (seg.current_a, seg.ocpd_a) == (14.0, 35.0)


def test_feeder_of_several_motors_430_24(tmp_path):
    # NEC 430.24: 125 % of the largest motor's full-load current + the others at 100 % +
    # the other loads. 480 V: 50 hp 65 A, two 10 hp 14 A each (NEC Table 430.250), and a
    # 20 A noncontinuous heater: 1.25 × 65 + 14 + 14 + 20 = 129.25 A, for both tests;
    # the load itself 65 + 14 + 14 + 20 = 113 A.
    def motor(name: str, hp: int) -> str:
        return (f'[[node]]\nid = "{name}"\nparent = "MCC"\nlength = "50 ft"\n'
                f"motor = {{ hp = {hp} }}\n")
    nodes = ('[[node]]\nid = "MCC"\nparent = "SRC"\nlength = "100 ft"\n'
             + motor("M50", 50) + motor("M10A", 10) + motor("M10B", 10)
             + '[[node]]\nid = "H"\nparent = "MCC"\nlength = "50 ft"\nload = "20 A"\n')
    seg = segments(tmp_path, nodes)
    assert seg["MCC"].current_a == pytest.approx(113.0)
    assert seg["MCC"].required_ampacity_a == pytest.approx(129.25)
    assert seg["MCC"].required_adjusted_a == pytest.approx(129.25)
    assert seg["M50"].ocpd_a == 175.0   # 2.5 × 65 = 162.5 A -> next standard rating 175 A


def test_continuous_load_two_separate_tests(tmp_path):
    # NEC 210.19(A)(1): (a) before adjustment: noncontinuous + 125 % of continuous;
    # (b) after adjustment: the load itself. 48 A continuous: (a) 60 A, (b) 48 A.
    seg = segments(tmp_path, leaf("48 A", extra="continuous = true"))["L"]
    assert seg.required_ampacity_a == pytest.approx(60.0)
    assert seg.required_adjusted_a == pytest.approx(48.0)


# --- unknown loads and continuous loads, per profile --------------------------------------

UNKNOWN = [
    # cec: CSA C22.1 Rule 8-102(2), 80 % of the device rating: 0.8 × 20 A = 16 A
    pytest.param("cec", 16.0, id="cec-80pct"),
    # nec: no NEC rule; common practice 80 % (the continuous loading of a standard
    # breaker, 210.20(A)): 0.8 × 20 A = 16 A
    pytest.param("nec", 16.0, id="nec-80pct-common-practice"),
    # iec: no unknown-load rule, Ib = In: 20 A
    pytest.param("iec", 20.0, id="iec-equal-to-rating"),
]


@pytest.mark.parametrize(("rules", "expected_a"), UNKNOWN)
def test_unknown_load_from_device_rating(tmp_path, rules, expected_a):
    volts = "400 V" if rules == "iec" else "480 V"
    nodes = '[[node]]\nid = "U"\nparent = "SRC"\nlength = "30 m"\nocpd = "20 A"\n'
    seg = segments(tmp_path, nodes, rules=rules, volts=volts)["U"]
    assert seg.current_a == pytest.approx(expected_a)
    assert seg.required_ampacity_a == pytest.approx(expected_a)   # not continuous
    assert (seg.ocpd_a, seg.ocpd_chosen) == (20.0, False)
    # its demand is that current at the node's voltage: S = √3·V·I
    v = 400.0 if rules == "iec" else 480.0
    assert abs(seg.demand_va) == pytest.approx(SQRT3 * v * expected_a)


CONTINUOUS = [
    # NEC 210.19(A)(1)(a): noncontinuous + 125 % of continuous: 1.25 × 100 A = 125 A
    pytest.param("nec", 125.0, id="nec-125pct"),
    # CSA C22.1 Rule 8-104 (from memory): continuous load ≤ 80 % of the rating, 1/0.8 = 1.25
    pytest.param("cec", 125.0, id="cec-125pct"),
    # IEC 60364-5-52: ratings are continuous ratings, no factor
    pytest.param("iec", 100.0, id="iec-none"),
]


@pytest.mark.parametrize(("rules", "required_a"), CONTINUOUS)
def test_continuous_factor_on_ampacity_only(tmp_path, rules, required_a):
    volts = "400 V" if rules == "iec" else "480 V"
    nodes = ('[[node]]\nid = "C"\nparent = "SRC"\nlength = "30 m"\nload = "100 A"\n'
             "continuous = true\n")
    seg = segments(tmp_path, nodes, rules=rules, volts=volts)["C"]
    assert seg.current_a == 100.0            # drop and losses: the load itself
    assert seg.required_ampacity_a == pytest.approx(required_a)


def test_profiles_carry_the_published_factors():
    # CSA C22.1 Rule 8-102(2): 80 %; NEC 210.19(A)(1): 125 %; common practice 80 % in nec.
    assert load_profile("cec").unknown_load_factor == 0.8
    assert load_profile("nec").unknown_load_factor == 0.8
    assert load_profile("nec").continuous_factor == 1.25
    assert load_profile("cec").continuous_factor == 1.25


def test_chosen_device_is_next_standard_rating(tmp_path):
    # 227.90 A × 1.25 = 284.88 A → next NEC 240.6(A) standard rating 300 A
    seg = segments(tmp_path, leaf("180 kW", pf=0.95, extra="continuous = true\n"))["L"]
    assert seg.required_ampacity_a == pytest.approx(284.877, abs=0.001)
    assert (seg.ocpd_a, seg.ocpd_chosen) == (300.0, True)


# --- a small tree with demand factors and a transformer -------------------------------------

TREE = """
[[node]]
id = "SWBD"
parent = "SRC"
length = "25 ft"
demand_factor = 0.8

[[node]]
id = "KILN"
parent = "SWBD"
length = "300 ft"
load = "180 kW"
power_factor = 0.95
continuous = true

[[node]]
id = "FAN"
parent = "SWBD"
length = "150 ft"
load = "40 A"
power_factor = 0.8

[[node]]
id = "XFMR"
parent = "SWBD"
length = "60 ft"
transformer = { rating = "45 kVA", secondary = "208 V", impedance = "4.5 %", x_r = 3 }

[[node]]
id = "LTG"
parent = "XFMR"
length = "90 ft"
phases = 1
voltage = "120 V"
load = "1.8 kW"
power_factor = 1.0
continuous = true

[[node]]
id = "HEAT"
parent = "XFMR"
length = "70 ft"
load = "12 kW"
power_factor = 1.0
"""


def test_aggregation_with_demand_factor_and_transformer(tmp_path):
    s = segments(tmp_path, TREE)
    kv = SQRT3 * 480   # 831.38 V: S = kv · I at 480 V 3-phase

    # Leaves. KILN: S = 180/0.95 = 189.474 kVA, I = 227.90 A, continuous → need 284.88 A.
    # FAN: S = √3·480·40 = 33.255 kVA at pf 0.8. LTG: 1800 / 120 = 15.0 A.
    # HEAT: 12000 / (√3·208) = 33.309 A.
    assert s["KILN"].current_a == pytest.approx(227.901, abs=1e-3)
    assert abs(s["FAN"].demand_va) == pytest.approx(33255.38, abs=0.01)
    assert s["LTG"].current_a == pytest.approx(15.0)
    assert s["LTG"].required_ampacity_a == pytest.approx(18.75)      # 1.25 × 15
    assert s["HEAT"].current_a == pytest.approx(33.309, abs=1e-3)

    # Transformer, secondary demand 1800 + 12000 = 13800 VA at pf 1, load n = 13800/45000
    # = 0.30667. R% = 4.5/√(1+3²) = 1.42302, X% = 3·R% = 4.26907.
    # copper loss n²·R%·45 kVA = 0.094044·0.0142302·45000 = 60.22 W; core 0.5 % = 225 W;
    # reactive n²·X%·45 kVA = 180.67 var. |S_pri| = |13800 + 285.22 + j180.67| = 14086.38 VA;
    # I_pri = 14086.38 / 831.38 = 16.943 A.
    xf = s["XFMR"]
    assert abs(xf.demand_va) == pytest.approx(14086.38, abs=0.01)
    assert xf.current_a == pytest.approx(16.943, abs=1e-3)
    assert xf.current_a == pytest.approx(abs(xf.demand_va) / kv)
    # required: the nameplate primary current 45000 / 831.38 = 54.127 A governs (the load
    # gives only (1.25·1800 + 12000 + 286.38) / 831.38 = 17.485 A);
    # device: 125 % × 54.127 = 67.66 A → 70 A (NEC 450.3(B), next size up).
    assert xf.required_ampacity_a == pytest.approx(54.127, abs=1e-3)
    assert (xf.ocpd_a, xf.ocpd_chosen) == (70.0, True)
    assert xf.kind == "feeder" and not xf.is_leaf

    # Switchboard, demand factor 0.8: Σ|S| = 189473.68 + 33255.38 + 14086.38 = 236815.44 VA;
    # × 0.8 = 189452.35 VA; I = 189452.35 / 831.38 = 227.876 A.
    sw = s["SWBD"]
    assert abs(sw.demand_va) == pytest.approx(189452.35, abs=0.01)
    assert sw.current_a == pytest.approx(227.876, abs=1e-3)
    # pf of the vector sum: P = 180000 + 26604.30 + 14085.22, Q = 59163.14 + 19953.23
    # + 180.67 → P/|S| = 0.94109
    assert sw.power_factor == pytest.approx(0.94109, abs=1e-5)
    # required: 0.8 × (1.25·189473.68 + 33255.38 + 14536.38) / 831.38 = 273.889 A
    assert sw.required_ampacity_a == pytest.approx(273.889, abs=1e-3)
    # never less than the largest child × demand factor: 0.8 × 227.90 = 182.3 A ≤ 227.876 A
    assert sw.current_a >= 0.8 * s["KILN"].current_a

    # Kinds and neutrals: the 480 V level below SWBD has no line-to-neutral load (LTG is
    # below the transformer, on the 208Y/120 V level).
    assert [s[k].kind for k in ("SWBD", "KILN", "XFMR", "LTG")] == [
        "feeder", "branch", "feeder", "branch"]
    assert not sw.neutral and not xf.neutral and not s["KILN"].neutral
    assert s["LTG"].neutral and not s["HEAT"].neutral
    assert s["LTG"].line_to_neutral
    assert not any(s[k].line_to_neutral for k in ("SWBD", "KILN", "FAN", "XFMR", "HEAT"))
    # parent indices follow the node order
    sc_ids = list(s)
    assert s["LTG"].parent_index == sc_ids.index("XFMR")
    assert s["SWBD"].parent_index == -1


def test_single_phase_child_sets_a_floor_on_its_feeder(tmp_path):
    # One 16 A 120 V load on a 3-phase 208Y/120 V panel: the balanced sum would give
    # 1920 / (√3·208) = 5.33 A, but the line feeding the load carries all 16 A.
    nodes = ('[[node]]\nid = "P"\nparent = "SRC"\nlength = "20 m"\n\n'
             '[[node]]\nid = "R"\nparent = "P"\nlength = "20 m"\nphases = 1\n'
             'voltage = "120 V"\nocpd = "20 A"\n')
    s = segments(tmp_path, nodes, volts="208 V", rules="cec")
    assert s["R"].current_a == pytest.approx(16.0)
    assert s["P"].current_a == pytest.approx(16.0)
    assert s["P"].neutral            # a line-to-neutral load below it


NEUTRALS = [
    # 3-phase panel with a 277 V lighting circuit below it: neutral
    pytest.param("480 V", 3, 'phases = 1\nvoltage = "277 V"\n', "", True, id="3ph-with-LN"),
    # 3-phase panel with only a 1-phase 480 V (line to line) load: no neutral
    pytest.param("480 V", 3, "phases = 1\n", "", False, id="3ph-with-LL"),
    # 120/240 V: a 240 V panel feeding a 120 V load runs a neutral (3-wire)
    pytest.param("240 V", 1, 'voltage = "120 V"\n', "", True, id="1ph-3wire"),
    # 120/240 V: a 240 V panel with only 240 V loads: 2 wires
    pytest.param("240 V", 1, "", "", False, id="1ph-2wire"),
    # the node's own word wins
    pytest.param("480 V", 3, 'phases = 1\nvoltage = "277 V"\n', "neutral = false\n", False,
                 id="override"),
]


@pytest.mark.parametrize(("volts", "phases", "child", "panel", "expected"), NEUTRALS)
def test_neutral(tmp_path, volts, phases, child, panel, expected):
    nodes = (f'[[node]]\nid = "P"\nparent = "SRC"\nlength = "20 m"\n{panel}\n'
             f'[[node]]\nid = "C"\nparent = "P"\nlength = "20 m"\nload = "1 kW"\n{child}')
    s = segments(tmp_path, nodes, volts=volts, phases=phases)
    assert s["P"].neutral is expected
    assert s["C"].line_to_neutral is ('voltage = "' in child)


def test_device_below_design_current_is_an_error(tmp_path):
    nodes = leaf("30 A", extra='ocpd = "20 A"\n')
    sc = scenario_from(tmp_path, nodes)
    with pytest.raises(ScenarioError) as err:
        design_segments(sc, load_profile("nec"))
    assert err.value.node == "L" and err.value.field == "ocpd"


def test_overloaded_transformer_is_an_error(tmp_path):
    nodes = ('[[node]]\nid = "T"\nparent = "SRC"\nlength = "20 m"\n'
             'transformer = { rating = "15 kVA", secondary = "208 V", impedance = "3 %", '
             "x_r = 2 }\n\n"
             '[[node]]\nid = "H"\nparent = "T"\nlength = "20 m"\nload = "20 kW"\n'
             "power_factor = 1.0\n")
    sc = scenario_from(tmp_path, nodes)
    with pytest.raises(ScenarioError) as err:
        design_segments(sc, load_profile("nec"))
    assert err.value.node == "T" and err.value.field == "transformer.rating"
    assert "133 %" in str(err.value)      # 20 kVA / 15 kVA


# --- random trees ---------------------------------------------------------------------------


@st.composite
def random_trees(draw):
    """A random valid scenario body: panels, transformers (480 → 208Y/120 V) and loads.

    1000 kVA: its 208 V secondary conductors need 1.25 × 2776 A in the cec profile
    (Rule 26-256), within the largest standard device.
    """
    n = draw(st.integers(1, 14))
    parents = [draw(st.integers(-1, i - 1)) for i in range(n)]
    has_child = {p for p in parents if p >= 0}
    level = []          # bus voltage of each node's far end (480 or 208)
    text = []
    for i, p in enumerate(parents):
        bus = 480 if p < 0 else level[p]
        lines = [f'id = "N{i}"', f'parent = "{"SRC" if p < 0 else f"N{p}"}"',
                 f'length = "{draw(st.integers(3, 300))} m"']
        own = bus
        if i in has_child:
            if bus == 480 and draw(st.booleans()):
                lines.append('transformer = { rating = "1000 kVA", secondary = "208 V", '
                             f'impedance = "{draw(st.sampled_from([3.5, 4.5, 5.5]))} %", '
                             f"x_r = {draw(st.sampled_from([2, 4, 6]))} }}")
                own = 208
            if draw(st.booleans()):
                lines.append(f"demand_factor = {draw(st.sampled_from([0.5, 0.8, 1.0]))}")
        else:
            shape = draw(st.sampled_from(["3ph", "ln", "ll"]))
            if shape != "3ph":
                lines.append("phases = 1")
            if shape == "ln":
                lines.append(f'voltage = "{277 if bus == 480 else 120} V"')
            what = draw(st.sampled_from(["kW", "kVA", "A", "motor", "ocpd"]))
            amount = draw(st.integers(0, 50))
            if what == "motor":
                lines.append(f"motor = {{ kw = {amount + 1} }}")
            elif what == "ocpd":
                lines.append(f'ocpd = "{draw(st.sampled_from([15, 20, 30, 60]))} A"')
            else:
                lines.append(f'load = "{amount} {what}"')
            lines.append(f"power_factor = {draw(st.sampled_from([0.7, 0.85, 0.95, 1.0]))}")
            if draw(st.booleans()):
                lines.append("continuous = true")
        level.append(own)
        text.append("[[node]]\n" + "\n".join(lines) + "\n")
    return "\n".join(text), draw(st.sampled_from(["nec", "cec"]))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(random_trees())
def test_random_trees_give_sound_currents(tree):
    body, rules = tree
    with tempfile.TemporaryDirectory() as tmp:
        sc = scenario_from(Path(tmp), body, rules=rules)
    segs = design_segments(sc, load_profile(rules))
    assert len(segs) == len(sc.nodes)
    by_parent: dict[int, list] = {}
    for s in segs:
        assert s.node is sc.nodes[s.index]
        assert s.parent_index < s.index                      # parents first
        assert math.isfinite(s.current_a) and s.current_a >= 0
        assert s.required_ampacity_a >= s.current_a * (1 - 1e-12)
        assert s.ocpd_a > 0
        if s.ocpd_chosen:
            assert s.ocpd_a >= s.required_ampacity_a * (1 - 1e-9)
        assert 0 < s.power_factor <= 1 + 1e-12
        by_parent.setdefault(s.parent_index, []).append(s)
    for f, children in by_parent.items():
        if f < 0:
            continue
        feeder = segs[f]
        assert feeder.kind == "feeder" and not feeder.is_leaf
        df = feeder.node.demand_factor
        biggest_va = max(abs(c.demand_va) for c in children)
        assert abs(feeder.demand_va) >= df * biggest_va * (1 - 1e-9)
        if feeder.node.transformer is None:     # same voltage level: compare currents
            assert feeder.current_a >= df * max(c.current_a for c in children) * (1 - 1e-9)
            assert feeder.required_ampacity_a >= df * max(
                c.required_ampacity_a for c in children) * (1 - 1e-9)
    for s in segs:
        assert (s.kind == "branch") == (s.index not in by_parent)


def test_errors_carry_the_scenario_file(tmp_path):
    sc = scenario_from(tmp_path, leaf("30 A", extra='ocpd = "20 A"\n'), name="x.toml")
    with pytest.raises(ScenarioError) as err:
        design_segments(sc, load_profile("nec"))
    assert str(err.value).startswith(str(tmp_path / "x.toml"))

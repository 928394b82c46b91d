"""Circuit rules the optimiser must not escape: motors, continuous loads, transformer
secondaries, service conductors, EGC growth on pinned runs, neutral counting.

Each check value names its source beside it; "from memory" marks a table value recalled
rather than copied from the published table.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from builders import write_scenario

from sizer.cli import main
from sizer.optimize import Objective, check, optimise, prepare
from sizer.rules import ampacity_ok, load_profile
from sizer.rules.motors import HP_W, branch_device_a, full_load_current
from sizer.rules.protection import bonding_jumper_size_index
from sizer.scenario import load_scenario

NEC = load_profile("nec")


# --- motor full-load currents -------------------------------------------------------------

FLC = [
    # (profile, hp, system V, phases, A, source)
    ("nec", 10, 480, 3, 14.0),     # NEC Table 430.250, 460 V column (issue's worked case)
    ("nec", 50, 480, 3, 65.0),     # NEC Table 430.250, 460 V column (issue's worked case)
    ("nec", 100, 480, 3, 124.0),   # NEC Table 430.250, 460 V (from memory)
    ("nec", 20, 480, 3, 27.0),     # NEC Table 430.250, 460 V (from memory)
    ("nec", 10, 208, 3, 30.8),     # NEC Table 430.250, 208 V (from memory)
    ("nec", 10, 240, 3, 28.0),     # NEC Table 430.250, 230 V column for 240 V (from memory)
    ("nec", 5, 200, 3, 17.5),      # NEC Table 430.250, 200 V (from memory)
    ("nec", 2, 120, 1, 24.0),      # NEC Table 430.248, 115 V column for 120 V (from memory)
    ("nec", 5, 240, 1, 28.0),      # NEC Table 430.248, 230 V column for 240 V (from memory)
    ("cec", 75, 600, 3, 77.0),     # CEC Table 44, 575 V column for 600 V (from memory)
    ("cec", 10, 600, 3, 11.0),     # CEC Table 44, 575 V column for 600 V (from memory)
]


@pytest.mark.parametrize(("rules", "hp", "volts", "phases", "expected_a"), FLC)
def test_full_load_current_tables(rules, hp, volts, phases, expected_a):
    got = full_load_current(load_profile(rules).motors, hp * HP_W, volts, phases)
    assert got.from_table
    assert got.current_a == pytest.approx(expected_a)


def test_a_motor_between_rows_takes_the_next_larger_row():
    # 3.7 kW = 4.96 hp: the 5 hp row, 7.6 A at 460 V (NEC Table 430.250, from memory).
    got = full_load_current(NEC.motors, 3700.0, 480.0, 3)
    assert got.current_a == pytest.approx(7.6) and "5 hp at 460 V" in got.basis


def test_a_voltage_without_a_column_falls_back_to_typical_values_and_says_so():
    # 277 V single-phase has no column in NEC Table 430.248: output / (η · pf), with the
    # typical 3 kW row (iec_motor_typical.csv, from memory): 87.7 %, 0.81 at 3.73 kW.
    got = full_load_current(NEC.motors, 5 * HP_W, 277.0, 1)
    assert not got.from_table and "no column for 277 V" in got.basis
    assert got.current_a == pytest.approx(5 * HP_W / (277.0 * 0.877 * 0.81))


@pytest.mark.parametrize(("flc_a", "device_a"), [
    (14.0, 35.0),    # 10 hp 460 V: 2.5 × 14 = 35 A, a standard rating (NEC 430.52, 240.6(A))
    (65.0, 175.0),   # 50 hp 460 V: 2.5 × 65 = 162.5 A -> next standard 175 A (430.52(C)(1) Ex. 1)
    (124.0, 350.0),  # 100 hp 460 V: 2.5 × 124 = 310 A -> 350 A
])
def test_motor_branch_device_430_52(flc_a, device_a):
    assert branch_device_a(NEC.motors, NEC.standard_ratings_a, flc_a) == device_a


def test_motor_branch_conductors_at_125_percent_and_not_limited_by_the_device(tmp_path):
    # 10 hp at 480 V: 14 A (NEC Table 430.250); conductors >= 1.25 × 14 = 17.5 A
    # (430.22): 14 AWG Cu (20 A at 60 degC, NEC Table 310.16) although the 430.52 breaker
    # is 35 A: 240.4(G) lets Article 430 protect motor conductors (240.4(D) does not apply).
    nodes = ('[[node]]\nid = "MCC"\nparent = "SRC"\nlength = "10 ft"\nocpd = "100 A"\n'
             '[[node]]\nid = "M"\nparent = "MCC"\nlength = "40 ft"\n'
             'motor = { power = "10 hp" }\n')
    prep = prepare(load_scenario(write_scenario(tmp_path, nodes)))
    design = optimise(prep, Objective.CAPEX)
    seg = design.segments[1]
    assert (seg.size, seg.material, seg.ocpd_a) == ("14 AWG", "Cu", 35.0)
    # EGC by the 35 A motor-circuit device, NEC 250.122(D)(1) / Table 250.122: 10 AWG,
    # capped at the phase conductor (250.122(A)): 14 AWG.
    assert seg.egc == "14 AWG"


# --- continuous loads: the two tests apart ------------------------------------------------

CONTINUOUS_48A = """
[[node]]
id = "L"
parent = "SRC"
length = "30 ft"
load = "48 A"
continuous = true
grouping = 6
ambient = "40 degC"
{pin}
"""


def test_continuous_48_a_six_conductors_40_degc_6_awg_is_legal(tmp_path):
    # NEC 210.19(A)(1): (a) 6 AWG Cu at the 75 degC terminal column: 65 A >= 48 + 0.25 × 48
    # = 60 A; (b) 90 degC column 75 A × 0.91 (40 degC, Table 310.15(B)(1)) × 0.8 (six
    # conductors, 310.15(C)(1)) = 54.6 A >= 48 A. The worked case.
    path = write_scenario(tmp_path, CONTINUOUS_48A.format(pin='conductor = "6 AWG Cu"'))
    design = check(prepare(load_scenario(path), keep_pins=True))
    assert design.status == "compliant", design.violations
    assert design.segments[0].ampacity_a == pytest.approx(54.6)
    # and solve picks it: 8 AWG Cu fails (a) (50 A at 75 degC < 60 A).
    path = write_scenario(tmp_path, CONTINUOUS_48A.format(pin=""), name="free.toml")
    best = optimise(prepare(load_scenario(path)), Objective.CAPEX)
    assert (best.segments[0].size, best.segments[0].material) == ("6 AWG", "Cu")


@pytest.mark.parametrize("size", ["10 AWG", "8 AWG", "6 AWG", "4 AWG", "3 AWG"])
def test_the_tested_rule_is_the_rule_that_sizes(tmp_path, size):
    # sizer.rules.ampacity_ok (reference-tested) and the candidate table agree row by row.
    path = write_scenario(tmp_path, CONTINUOUS_48A.format(pin=f'conductor = "{size} Cu"'))
    prep = prepare(load_scenario(path), keep_pins=True)
    design = check(prep)
    flagged = any(v.rule == "ampacity" for v in design.violations)
    ok = ampacity_ok(NEC, "Cu", NEC.size_index(size), insulation_c=90.0, terminal_c=75.0,
                     ambient_c=40.0, grouping=6, installation="conduit", current_a=48.0,
                     continuous_a=48.0)
    assert flagged == (not bool(ok))


# --- transformer secondaries ----------------------------------------------------------------

SECONDARY = """
[[node]]
id = "XF"
parent = "SRC"
length = "20 ft"
ocpd = "125 A"
transformer = { rating = "75 kVA", secondary = "208 V", impedance = "4 %", x_r = 3 }

[[node]]
id = "PNL"
parent = "XF"
length = "10 ft"
voltage = "208 V"
ocpd = "225 A"

[[node]]
id = "LOAD"
parent = "PNL"
length = "20 ft"
voltage = "208 V"
load = "150 A"
"""


def test_transformer_secondary_has_no_next_size_up(tmp_path):
    # NEC 240.21(C): secondary conductors ending in a 225 A device need 225 A of ampacity.
    # Al at 75 degC (NEC Table 310.16): 250 kcmil 205 A would take a 225 A device by
    # 240.4(B) on any other run; a secondary needs 300 kcmil (230 A).
    path = write_scenario(tmp_path, SECONDARY, materials='["Al"]')
    design = optimise(prepare(load_scenario(path)), Objective.CAPEX)
    pnl = next(s for s in design.segments if s.id == "PNL")
    assert (pnl.size, pnl.material, pnl.ampacity_a) == ("300 kcmil", "Al", 230.0)


def test_cec_secondary_at_125_percent_of_rated_current(tmp_path):
    # CSA C22.1 Rule 26-256 (from memory): 125 % of the rated secondary current,
    # 75 000 / (√3 · 208) = 208.2 A -> 260.2 A.
    path = write_scenario(tmp_path, SECONDARY.replace('"225 A"', '"300 A"'), rules="cec")
    prep = prepare(load_scenario(path))
    pnl = next(s for s in prep.segments if s.id == "PNL")
    assert pnl.required_ampacity_a == pytest.approx(1.25 * 75_000 / (3 ** 0.5 * 208), rel=1e-9)


# --- service conductors: bonding jumper, no EGC -------------------------------------------

SERVICE = """
[[node]]
id = "SWBD"
parent = "SRC"
length = "25 ft"
ocpd = "400 A"

[[node]]
id = "LOAD"
parent = "SWBD"
length = "50 ft"
load = "300 A"
"""


def test_service_conductors_get_a_bonding_jumper_not_an_egc(tmp_path):
    path = write_scenario(tmp_path, SERVICE)
    out = tmp_path / "out.json"
    assert main(["solve", str(path), "--objective", "capex", "--json", str(out)]) == 0
    doc = json.loads(out.read_text())
    svc = next(s for s in doc["segments"] if s["id"] == "SWBD")
    assert svc["egc"] is None
    # NEC Table 250.102(C)(1) (from memory): Cu over 350 through 600 kcmil -> 1/0 AWG Cu,
    # over 3/0 through 350 kcmil -> 2 AWG Cu.
    size = NEC.size_index(svc["size"])
    expected = NEC.sizes[bonding_jumper_size_index(NEC, "Cu", np.array([size]))[0]]
    assert svc["bonding_jumper"] == expected
    # least upfront with raceways priced: one set of 500 kcmil Cu in one raceway (380 A at
    # 75 degC, NEC Table 310.16) rather than two sets in two; its jumper by the 500 kcmil
    # conductor: 1/0 AWG Cu (one jumper per raceway, 250.102(C)(2))
    assert (svc["sets"], svc["size"], expected) == (1, "500 kcmil", "1/0 AWG")
    load = next(s for s in doc["segments"] if s["id"] == "LOAD")
    assert load["egc"] is not None and load["bonding_jumper"] is None


@pytest.mark.parametrize(("material", "phase", "jumper"), [
    # NEC Table 250.102(C)(1) (from memory)
    ("Cu", "2 AWG", "8 AWG"), ("Cu", "1/0 AWG", "6 AWG"), ("Cu", "3/0 AWG", "4 AWG"),
    ("Cu", "350 kcmil", "2 AWG"), ("Cu", "600 kcmil", "1/0 AWG"), ("Cu", "1000 kcmil", "2/0 AWG"),
    ("Al", "1/0 AWG", "6 AWG"), ("Al", "250 kcmil", "2 AWG"), ("Al", "500 kcmil", "1/0 AWG"),
    ("Al", "750 kcmil", "3/0 AWG"), ("Al", "1000 kcmil", "4/0 AWG"),
])
def test_bonding_jumper_table(material, phase, jumper):
    got = bonding_jumper_size_index(NEC, material, np.array([NEC.size_index(phase)]))[0]
    assert NEC.sizes[got] == jumper


# --- EGC growth on pinned runs --------------------------------------------------------------


def test_check_grows_the_egc_of_a_pinned_upsized_conductor(tmp_path):
    # NEC 250.122(B): 8 AWG Cu on a 20 A circuit where 12 AWG would do: the 12 AWG EGC
    # (Table 250.122, 20 A) grows by 16,510 / 6,530 cmil (Chapter 9 Table 8) to 16,510
    # cmil: 8 AWG. The worked case.
    nodes = ('[[node]]\nid = "P"\nparent = "SRC"\nlength = "10 ft"\nocpd = "100 A"\n'
             'conductor = "3 AWG Cu"\n'
             '[[node]]\nid = "R"\nparent = "P"\nlength = "200 ft"\nphases = 1\n'
             'voltage = "277 V"\nocpd = "20 A"\nconductor = "8 AWG Cu"\n')
    design = check(prepare(load_scenario(write_scenario(tmp_path, nodes)), keep_pins=True))
    assert design.segments[1].egc == "8 AWG"


def test_pinned_parallel_below_the_minimum_names_the_rule(tmp_path):
    # NEC 310.10(G)(1): conductors in parallel 1/0 AWG and larger; 2x 4 AWG Cu is refused
    # for that, not for protection (2 × 70 A at 60 degC protects an 80 A device).
    nodes = ('[[node]]\nid = "F"\nparent = "SRC"\nlength = "50 ft"\nocpd = "80 A"\n'
             'conductor = "2x 4 AWG Cu"\n')
    design = check(prepare(load_scenario(write_scenario(tmp_path, nodes)), keep_pins=True))
    rules = {v.rule: v.message for v in design.violations}
    assert "protection" not in rules
    assert "minimum size for parallel conductors (1/0 AWG, NEC 310.10(G)(1))" in rules[
        "parallel size"]


# --- neutral counting (NEC 310.15(E)) -------------------------------------------------------

NEUTRAL = """
[[node]]
id = "P"
parent = "SRC"
length = "20 ft"
ocpd = "400 A"

[[node]]
id = "F"
parent = "P"
length = "50 ft"
neutral = true
conductor = "1 AWG Cu"
ocpd = "110 A"

[[node]]
id = "IT"
parent = "F"
length = "20 ft"
load = "{it} A"
nonlinear = true

[[node]]
id = "MTR"
parent = "F"
length = "20 ft"
load = "{plain} A"
"""


@pytest.mark.parametrize(("it", "plain", "counted"), [
    (60, 40, True),    # 60 % non-linear: the major portion, the neutral counts (4 conductors)
    (40, 60, False),   # 40 %: it carries only the unbalance and does not count
])
def test_neutral_counts_when_the_major_portion_is_nonlinear(tmp_path, it, plain, counted):
    # NEC 310.15(E)(3): a 4-wire wye feeder whose load is mainly non-linear counts its
    # neutral: 4 current-carrying conductors, factor 0.8 (310.15(C)(1)). 1 AWG Cu at
    # 90 degC, 145 A (NEC Table 310.16): 145 × 0.8 = 116 A, below the 75 degC terminal
    # column's 130 A; uncounted, the terminal column (130 A) limits it.
    path = write_scenario(tmp_path, NEUTRAL.format(it=it, plain=plain))
    prep = prepare(load_scenario(path), keep_pins=True)
    feeder = next(s for s in prep.segments if s.id == "F")
    assert feeder.nonlinear_share == pytest.approx(it / (it + plain))   # the feeder inherits
    design = check(prep)
    res = next(s for s in design.segments if s.id == "F")
    assert res.ampacity_a == pytest.approx(116.0 if counted else 130.0)


def test_nonlinear_share_reads_true_false_and_percent(tmp_path):
    for text, share in (("true", 1.0), ("false", 0.0), ('"60 %"', 0.6), ("0.25", 0.25)):
        body = NEUTRAL.format(it=10, plain=10).replace("nonlinear = true",
                                                        f"nonlinear = {text}")
        sc = load_scenario(write_scenario(tmp_path, body))
        assert next(n for n in sc.nodes if n.id == "IT").nonlinear == share


def test_nonlinear_out_of_range_is_one_line_exit_2(tmp_path, capsys):
    body = NEUTRAL.format(it=10, plain=10).replace("nonlinear = true", "nonlinear = 1.5")
    assert main(["solve", str(write_scenario(tmp_path, body))]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "IT" in err[0] and "nonlinear" in err[0]


# --- the cec profile's own rules (CSA C22.1, from memory) -----------------------------------


def test_cec_continuous_80_percent_binds_the_ampacity_as_installed(tmp_path):
    # CSA C22.1 Rule 8-104 (from memory): 48 A continuous within 80 % of the conductor
    # ampacity as installed: 60 A after correction, where the NEC asks 48 A (210.19(A)(1)(b)).
    for rules, after in (("cec", 60.0), ("nec", 48.0)):
        path = write_scenario(tmp_path, CONTINUOUS_48A.format(pin=""), rules=rules,
                              name=f"{rules}.toml")
        seg = prepare(load_scenario(path)).segments[0]
        assert (seg.required_ampacity_a, seg.required_adjusted_a) == (60.0, after)


def test_cec_bonding_conductor_by_the_conductor_ampacity(tmp_path):
    # CSA C22.1 Table 16 (from memory): by the ampacity of the ungrounded conductors, not
    # the device: a run of 230 A (4/0 AWG Cu, 75 degC column) takes the 300 A row, 4 AWG Cu.
    nodes = SERVICE.replace('load = "300 A"', 'load = "180 A"\nconductor = "4/0 AWG Cu"')
    path = write_scenario(tmp_path, nodes, rules="cec")
    design = check(prepare(load_scenario(path), keep_pins=True))
    load = next(s for s in design.segments if s.id == "LOAD")
    assert (load.ampacity_a, load.egc) == (230.0, "4 AWG")
    svc = next(s for s in design.segments if s.id == "SWBD")
    assert svc.egc is None and svc.bonding_jumper is not None   # service: a bonding jumper


def test_check_flags_a_motor_device_above_430_52(tmp_path):
    # 10 hp at 480 V, 14 A (NEC Table 430.250): an inverse-time breaker up to 250 % = 35 A
    # (NEC 430.52, Table 430.52); a given 50 A device is above it. 35 A passes.
    for device, flagged in (("50 A", True), ("35 A", False)):
        nodes = ('[[node]]\nid = "P"\nparent = "SRC"\nlength = "10 ft"\nocpd = "100 A"\n'
                 '[[node]]\nid = "M"\nparent = "P"\nlength = "40 ft"\n'
                 f'motor = {{ hp = 10 }}\nocpd = "{device}"\nconductor = "10 AWG Cu"\n')
        path = write_scenario(tmp_path, nodes, name=f"m{device[:2]}.toml")
        design = check(prepare(load_scenario(path), keep_pins=True))
        rules = {v.rule: v for v in design.violations}
        assert ("motor device" in rules) == flagged
        if flagged:
            assert (rules["motor device"].value, rules["motor device"].limit) == (50.0, 35.0)


@pytest.mark.parametrize(("phases", "neutral", "share", "two_lines", "expected"), [
    (3, True, 0.6, False, 4),    # NEC 310.15(E)(3): major portion non-linear, neutral counts
    (3, True, 0.5, False, 3),    # half is not the major portion
    (3, False, 1.0, False, 3),   # no neutral run
    (1, True, 0.0, True, 3),     # NEC 310.15(E)(2): 2 lines + N of a wye, the neutral counts
    (1, True, 0.0, False, 2),    # 1-phase 2-wire: line and neutral
])
def test_current_carrying_conductor_count(phases, neutral, share, two_lines, expected):
    from sizer.rules.ampacity import current_carrying_conductors
    got = current_carrying_conductors(NEC, np.array([phases]), np.array([neutral]),
                                      np.array([share]), np.array([two_lines]))
    assert got.tolist() == [expected]
    # the iec profile has no such rule here: 2 or 3
    iec = current_carrying_conductors(load_profile("iec"), np.array([phases]),
                                      np.array([neutral]), np.array([share]))
    assert iec.tolist() == [2 if phases == 1 else 3]


def test_solve_json_names_assumptions_and_stand_in_tables(tmp_path, capsys):
    # A 1-phase run with no voltage on a 480 V 3-phase bus is taken line to line: said.
    nodes = ('[[node]]\nid = "P"\nparent = "SRC"\nlength = "10 ft"\nocpd = "100 A"\n'
             '[[node]]\nid = "H"\nparent = "P"\nlength = "40 ft"\nphases = 1\nload = "20 A"\n'
             '[[node]]\nid = "M"\nparent = "P"\nlength = "40 ft"\nmotor = { hp = 10 }\n')
    path = write_scenario(tmp_path, nodes, rules="cec")
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out)]) == 0
    console = capsys.readouterr().out
    doc = json.loads(out.read_text())
    notes = doc["circuit_notes"]
    assert any(n.startswith("H: 1-phase with no voltage given: taken line to line at 480 V")
               for n in notes)
    assert any(n.startswith("M: motor full-load current 14 A from CEC Table 44") for n in notes)
    assert "ampacity" in doc["table_status"]["stand_in"]
    assert "motor_table" in doc["table_status"]["from_memory"]
    assert "line to line at 480 V" in console and "cec profile stand-ins:" in console


def test_device_listed_for_100_percent_drops_the_125_percent(tmp_path):
    # NEC 210.19(A)(1) Exception / 215.2(A)(1) Exception No. 1 (CEC Rule 8-104, from
    # memory): with an assembly listed for 100 % continuous operation, 48 A continuous
    # needs 48 A before and after adjustment; its feeder keeps 125 % for its own device.
    body = ('[[node]]\nid = "P"\nparent = "SRC"\nlength = "10 ft"\n'
            + CONTINUOUS_48A.format(pin="device_100_percent = true").replace(
                'parent = "SRC"', 'parent = "P"'))
    for rules in ("nec", "cec"):
        path = write_scenario(tmp_path, body, rules=rules, name=f"{rules}.toml")
        segs = {s.id: s for s in prepare(load_scenario(path)).segments}
        assert (segs["L"].required_ampacity_a, segs["L"].required_adjusted_a) == (48.0, 48.0)
        assert segs["P"].required_ampacity_a == pytest.approx(60.0)

"""Short-circuit withstand by insulation family, let-through energy, enforcement, grouping.

Sources: IEC 60949 adiabatic equation I²t = K² S² ln((θf + β)/(θi + β)), copper
K = 226 A·s½/mm², β = 234.5 K (from memory); ICEA P-32-382 for copper
(I/A)² t = 0.0297 log10((T2 + 234)/(T1 + 234)), A in circular mils [C]; final
temperatures: thermoplastic 150 degC (ICEA P-32-382) or 160 degC (IEC 60364-4-43
Table 43A, PVC), thermoset 250 degC (both), from memory. NEC Chapter 9 Table 8:
4/0 AWG = 211 600 cmil [C].
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from builders import write_scenario

from sizer.candidates import withstand_i2t_a2s
from sizer.cli import main
from sizer.conductors import MM2_PER_CMIL
from sizer.optimize import Objective, optimise, prepare
from sizer.report.tables import group_findings
from sizer.rules import load_profile
from sizer.scenario import load_scenario
from sizer.workflow import solve_verified

ONE_CYCLE_60HZ_S = 1 / 60
AREA_4_0_MM2 = 211_600 * MM2_PER_CMIL


@pytest.mark.parametrize(("family", "final_c"), [("thermoplastic", 150.0),
                                                  ("thermoset", 250.0)])
def test_one_cycle_withstand_by_family_equals_the_adiabatic_equation(family, final_c):
    nec = load_profile("nec")
    assert nec.withstand_final_c(90.0, family) == final_c
    # 4/0 AWG Cu from 90 degC, one cycle at 60 Hz.
    iec60949 = 226 * AREA_4_0_MM2 * math.sqrt(math.log((final_c + 234.5) / (90 + 234.5))
                                               / ONE_CYCLE_60HZ_S)
    icea = 211_600 * math.sqrt(0.0297 * math.log10((final_c + 234) / (90 + 234))
                               / ONE_CYCLE_60HZ_S)
    assert iec60949 == pytest.approx(icea, rel=0.01)  # the two published forms agree
    from sizer.conductors import adiabatic_withstand_a

    got = float(adiabatic_withstand_a(AREA_4_0_MM2, ONE_CYCLE_60HZ_S, "Cu", 90.0, final_c))
    assert got == pytest.approx(iec60949, rel=1e-3)


def test_thermoplastic_at_250_degc_would_overstate_its_withstand_by_about_half():
    # 90 -> 250 against 90 -> 150 degC, copper: sqrt of the ratio of the log terms.
    ratio = math.sqrt(math.log(484.5 / 324.5) / math.log(384.5 / 324.5))
    assert ratio == pytest.approx(1.54, abs=0.01)
    iec = load_profile("iec")
    assert iec.withstand_final_c(70.0, "thermoplastic") == 160.0  # PVC, IEC 60364-4-43


PANEL = """
[[node]]
id = "HP-1"
parent = "SRC"
length = "40 ft"
ocpd = "225 A"
"""

BRANCH = """
[[node]]
id = "HP-1-{i}"
parent = "HP-1"
length = "{length} ft"
ocpd = "20 A"
phases = 1
voltage = "277 V"
load = "12 A"
"""


def _panel(tmp_path, *, extra: str = "", count: int = 6):
    nodes = PANEL + "".join(BRANCH.format(i=i, length=60 + 10 * i) for i in range(count))
    path = write_scenario(tmp_path, nodes + extra, materials='["Cu"]')
    text = path.read_text().replace('fault_current = "22 kA"', 'fault_current = "65 kA"')
    path.write_text(text)
    return path


def test_price_list_family_decides_and_a_node_overrides(tmp_path):
    prep = prepare(load_scenario(_panel(tmp_path)))
    assert prep.prices.insulation_type == {"Cu": "thermoplastic", "Al": "thermoset"}
    rows = np.array([prep.table.offsets[1]])  # a 12 AWG-ish branch row
    _, final = withstand_i2t_a2s(prep.profile, prep.catalogue, prep.prices, prep.segments,
                                 prep.table, rows)
    assert final[0] == 150.0  # Cu THHN style: thermoplastic (ICEA P-32-382)
    path = _panel(tmp_path)
    path.write_text(path.read_text().replace("max_sets = 4", 'max_sets = 4\n'
                                             'insulation_type = "thermoset"'))
    prep = prepare(load_scenario(path))
    _, final = withstand_i2t_a2s(prep.profile, prep.catalogue, prep.prices, prep.segments,
                                 prep.table, rows)
    assert final[0] == 250.0


def test_identical_findings_on_one_board_are_one_group_that_says_the_fix(tmp_path):
    prep = prepare(load_scenario(_panel(tmp_path)))
    design, _ = solve_verified(prep, Objective.CAPEX)
    found = [v for v in design.violations if v.rule == "short-circuit withstand"]
    assert len(found) >= 3  # small branch conductors at 65 kA for one cycle
    groups = [g for g in group_findings(design) if g.rule == "short-circuit withstand"
              and g.board == "HP-1"]
    assert len(groups) == 1
    g = groups[0]
    assert g.title == f"{len(g.segments)} branch circuits on HP-1"
    assert "fix:" in g.worst.message and "let_through" in g.worst.message


def test_a_current_limiting_let_through_replaces_i_squared_t(tmp_path):
    path = _panel(tmp_path)
    path.write_text(path.read_text().replace("max_sets = 4", 'max_sets = 4\n'
                                             'let_through = "8000 A2s"'))
    design, _ = solve_verified(prepare(load_scenario(path)), Objective.CAPEX)
    # 12 AWG Cu (6530 cmil) thermoplastic 90 -> 150: (0.0297 x 0.0738) x 6530² = 9.3e4 A²s
    assert not [v for v in design.violations if v.rule == "short-circuit withstand"]


def test_enforce_offers_only_conductors_that_withstand(tmp_path):
    path = _panel(tmp_path)
    path.write_text(path.read_text().replace("max_sets = 4", 'max_sets = 4\n'
                                             'withstand = "enforce"'))
    prep = prepare(load_scenario(path))
    assert prep.withstand_removed.sum() > 0
    design, _ = solve_verified(prep, Objective.CAPEX)
    assert design.status == "optimal"
    assert not [v for v in design.violations if v.rule == "short-circuit withstand"]
    plain, _ = solve_verified(prepare(load_scenario(_panel(tmp_path))), Objective.CAPEX)
    assert design.totals.capex > plain.totals.capex


def test_enforce_with_no_conductor_that_withstands_is_diagnosed(tmp_path):
    path = _panel(tmp_path, count=1)
    path.write_text(path.read_text().replace("max_sets = 4", 'max_sets = 1\n'
                                             'withstand = "enforce"\n'
                                             'clearing_time = "5 s"'))
    prep = prepare(load_scenario(path))
    design = optimise(prep, Objective.CAPEX)
    assert design.status == "infeasible"
    assert any("withstands the short circuit" in line for line in design.diagnosis)


@pytest.mark.parametrize(("line", "message"), [
    ('insulation_type = "rubber"', "unknown insulation type 'rubber'"),
    ('let_through = "50 J"', "let-through energy"),
    ('withstand = "always"', '"finding" or "enforce"'),
])
def test_bad_withstand_fields_give_one_line_and_exit_2(tmp_path, capsys, line, message):
    path = _panel(tmp_path, count=1)
    path.write_text(path.read_text().replace("max_sets = 4", f"max_sets = 4\n{line}"))
    assert main(["solve", str(path), "--json", str(tmp_path / "o.json")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]

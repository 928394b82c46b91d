"""The whole-tree optimiser on scenarios: invariants, known optima, checks and diagnosis."""

from __future__ import annotations

import itertools
import json
import math
from pathlib import Path

import numpy as np
import pytest
from builders import write_scenario

from sizer.cli import main
from sizer.economics import economic_size_index
from sizer.optimize import Objective, loop_pu_of_rows, optimise, prepare
from sizer.rules.protection import (
    bonding_jumper_size_index,
    egc_size_index,
    next_size_up_allowed,
    protects,
)
from sizer.scenario import load_scenario
from sizer.workflow import frontier

DEMOS = sorted((Path(__file__).parents[1] / "scenarios").glob("*.toml"))


@pytest.fixture(scope="module", params=DEMOS, ids=lambda p: p.stem)
def demo(request):
    prep = prepare(load_scenario(request.param))
    return prep, {o: optimise(prep, o) for o in Objective}


def test_every_demo_solves_to_a_proven_optimum(demo):
    _, designs = demo
    for d in designs.values():
        assert d.status == "optimal" and d.proven_optimal


def test_every_path_and_segment_within_its_drop_limit(demo):
    prep, designs = demo
    p = prep.profile
    for d in designs.values():
        for seg, res in zip(prep.segments, d.segments, strict=True):
            own = p.drop_branch_pct if seg.kind == "branch" else p.drop_feeder_pct
            assert res.vd_pct <= own + 1e-9
            if seg.is_leaf:
                assert res.path_vd_pct <= p.drop_total_pct + 1e-9


def test_ampacity_protection_and_egc_hold(demo):
    prep, designs = demo
    p, cat = prep.profile, prep.catalogue
    for d in designs.values():
        for seg, res in zip(prep.segments, d.segments, strict=True):
            # NEC 210.19(A)(1)(b): the adjusted ampacity carries the load (motors: 430.22)
            assert res.ampacity_a >= seg.required_adjusted_a - 1e-9
            # NEC 240.4(G): a motor branch is protected by its overload relay; 240.21(C):
            # transformer secondary conductors get no next size up.
            if not seg.motor_branch:
                assert protects(p, np.array([res.ampacity_a]), np.array([res.ocpd_a]),
                                next_size_up_allowed(p, np.array([seg.secondary])))[0]
            phase = cat.index(res.size)
            if res.egc is None:
                # NEC 250.24(C): service conductors carry a bonding jumper, not an EGC
                assert seg.service and res.bonding_jumper is not None
                if p.service_bonding:   # nec: Table 250.102(C)(1) by the phase size
                    jumper = bonding_jumper_size_index(p, res.material, np.array([phase]))[0]
                    assert cat.index(res.bonding_jumper) == jumper
                continue
            egc = cat.index(res.egc)
            # NEC 250.122(A): never larger than the phase conductors ...
            assert egc <= phase
            if p.egc_rule == "conductor_ampacity":
                # CEC Table 16 (from memory): by the run's ampacity, not the device
                table = egc_size_index(p, res.material, np.array([res.ampacity_a]),
                                       cat.area_mm2[[phase]], cat.area_mm2[[phase]])[0]
                # (a larger one only as a priced step to meet disconnection, sizer.earthfault)
                assert egc == min(table, phase) + res.pe_step
                continue
            # ... and never smaller than the table size for the device (no growth assumed).
            table = egc_size_index(p, res.material, np.array([res.ocpd_a]),
                                   cat.area_mm2[[phase]], cat.area_mm2[[phase]])[0]
            assert egc >= min(table, phase)


def test_lifecycle_never_costs_more_over_life_and_capex_never_more_upfront(demo):
    _, d = demo
    capex, life = d[Objective.CAPEX], d[Objective.LIFECYCLE]
    assert life.totals.lifecycle <= capex.totals.lifecycle + 1e-6
    assert capex.totals.capex <= life.totals.capex + 1e-6


def test_engines_agree_on_the_demos(demo):
    prep, designs = demo
    milp = optimise(prep, Objective.LIFECYCLE, engine="milp")
    assert milp.totals.lifecycle == pytest.approx(designs[Objective.LIFECYCLE].totals.lifecycle,
                                                  rel=1e-9)


def test_frontier_is_monotone(demo):
    prep, _ = demo
    pts = frontier(prep, points=6, fill=False)
    assert len(pts) >= 2
    capex = [p.capex for p in pts]
    loss = [p.loss_pv for p in pts]
    assert capex == sorted(capex)
    assert all(b < a for a, b in itertools.pairwise(loss))


# --- a known optimum: a fatter feeder lets both branches be thinner ----------------------

FEEDER_AND_TWO_BRANCHES = """
[[node]]
id = "PANEL"
parent = "SRC"
length = "{feeder} ft"
ocpd = "100 A"

[[node]]
id = "A"
parent = "PANEL"
length = "{branch} ft"
load = "30 A"

[[node]]
id = "B"
parent = "PANEL"
length = "{branch} ft"
load = "30 A"
"""


def test_path_limit_trades_feeder_against_branches(tmp_path):
    # 208 V, a 60 A feeder of 300 ft and two 30 A branches of 250 ft, copper, one set: each
    # run at its cheapest compliant size drops about 2.6 %, so the paths would reach 5.2 %
    # against the 5 % total. Upsizing the one feeder is cheaper than upsizing both branches:
    # the optimum must do exactly that, and equal the brute-force optimum (which also
    # keeps the earth-fault loop of every run within its disconnection budget).
    path = write_scenario(tmp_path, FEEDER_AND_TWO_BRANCHES.format(feeder=300, branch=250),
                          voltage="208 V", max_sets=1)
    prep = prepare(load_scenario(path))
    d = optimise(prep, Objective.CAPEX)
    t = prep.table
    loop, budget = loop_pu_of_rows(prep), prep.earth.limit_pu
    rows = [range(t.offsets[s], t.offsets[s + 1]) for s in range(3)]
    best = math.inf
    for f in rows[0]:
        for a in rows[1]:
            for b in rows[2]:
                if (max(t.vd_pct[f] + t.vd_pct[a], t.vd_pct[f] + t.vd_pct[b]) <= 5 + 1e-12
                        and loop[f] <= budget[0] and loop[f] + loop[a] <= budget[1]
                        and loop[f] + loop[b] <= budget[2]):
                    best = min(best, t.capex[f] + t.capex[a] + t.capex[b])
    assert d.totals.capex == pytest.approx(best, rel=1e-12)
    assert max(s.path_vd_pct for s in d.segments) <= 5 + 1e-9
    cheapest = [min(r, key=lambda i: t.capex[i]) for r in rows]
    assert t.vd_pct[cheapest[0]] + t.vd_pct[cheapest[1]] > 5      # the limit binds
    chosen = [d.segments[s].size for s in range(3)]
    names = [prep.catalogue.sizes[t.size_index[c]] for c in cheapest]
    assert chosen[0] != names[0]                     # the feeder is upsized ...
    assert chosen[1:] == names[1:]                   # ... so both branches stay minimum


# --- against the published economic method (IEC 60287-3-2 clause 5.1) --------------------

ONE_BRANCH = """
[[node]]
id = "M"
parent = "SRC"
length = "60 ft"
load = "{amps} A"
"""


@pytest.mark.parametrize("amps", [20, 45, 80, 130, 200, 320])
@pytest.mark.parametrize("energy_price", ["0.06 USD/kWh", "0.25 USD/kWh"])
def test_lifecycle_choice_is_the_iec_60287_3_2_economic_size(tmp_path, amps, energy_price):
    # A short run (drop never binds), copper only, one set: the lifecycle optimum must be
    # the size whose economic current range (IEC 60287-3-2 clause 5.1, from neighbouring
    # sizes' installed cost and resistance with the F factor) contains the current, unless
    # ampacity rules that size out, in which case the smallest size that carries it.
    path = write_scenario(tmp_path, ONE_BRANCH.format(amps=amps), max_sets=1,
                          energy_price=energy_price)
    prep = prepare(load_scenario(path))
    d = optimise(prep, Objective.LIFECYCLE)
    t = prep.table
    n_sizes = len(prep.catalogue.sizes)
    installed = np.full(n_sizes, np.nan)   # per metre of one conductor: capex / (3 L)
    r = np.full(n_sizes, np.nan)
    length = prep.segments[0].length_m
    installed[t.size_index] = t.capex / (3 * length)
    r[t.size_index] = t.r_ohm / length
    # Clause 4: losses of three conductors, each I² R l F with F per W of peak loss.
    k = economic_size_index(amps, installed, r, prep.economics.loss_pv_per_w)
    assert prep.catalogue.sizes[int(k)] == d.segments[0].size


# --- sizer check and the diagnosis ------------------------------------------------------

PINNED_TOO_SMALL = """
[[node]]
id = "PUMP"
parent = "SRC"
length = "80 ft"
load = "50 A"
conductor = "10 AWG Cu"
"""


def test_check_flags_a_hand_made_violating_design(tmp_path, capsys):
    path = write_scenario(tmp_path, PINNED_TOO_SMALL)
    out = tmp_path / "check.json"
    assert main(["check", str(path), "--json", str(out)]) == 1
    doc = json.loads(out.read_text())
    assert doc["status"] == "violations"
    rules = {v["rule"] for v in doc["violations"] if v["segment"] == "PUMP"}
    # NEC 310.16: 10 AWG Cu at the 75 degC terminal column carries 35 A < 50 A.
    assert "ampacity" in rules


def test_check_passes_a_compliant_pinned_design(tmp_path):
    # 4 AWG Cu at the 22 kA source for one cycle: THHN-style thermoplastic (150 degC,
    # ICEA P-32-382) would reach only 15 kA, so the run is XHHW-2 style thermoset.
    path = write_scenario(tmp_path, PINNED_TOO_SMALL.replace(
        "10 AWG Cu", '4 AWG Cu"\ninsulation_type = "thermoset'))
    out = tmp_path / "check.json"
    code = main(["check", str(path), "--json", str(out)])
    doc = json.loads(out.read_text())
    assert doc["status"] == "compliant" and doc["violations"] == [] and code == 0


IMPOSSIBLE = """
[[node]]
id = "FAR-SIGN"
parent = "SRC"
length = "2 km"
load = "40 A"
"""


def test_impossible_run_is_diagnosed_with_the_path_and_a_fix(tmp_path, capsys):
    path = write_scenario(tmp_path, IMPOSSIBLE, max_sets=1, voltage="208 V")
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out)]) == 1
    doc = json.loads(out.read_text())
    assert doc["status"] == "infeasible"
    text = " ".join(doc["diagnosis"])
    assert "FAR-SIGN" in text
    assert "parallel sets" in text and "run of at most" in text


def test_results_json_has_every_key_of_the_design(tmp_path):
    path = write_scenario(tmp_path, FEEDER_AND_TWO_BRANCHES.format(feeder=50, branch=80))
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out), "--quiet"]) == 0
    doc = json.loads(out.read_text())
    assert {"status", "objective", "rules", "currency", "totals", "segments"} <= set(doc)
    assert set(doc["totals"]) >= {"capex", "loss_pv", "lifecycle", "loss_kwh_per_year"}
    keys = {"id", "parent", "kind", "material", "size", "sets", "egc", "length_m", "current_a",
            "ampacity_a", "vd_pct", "path_vd_pct", "loadflow_drop_pct", "r_ohm", "x_ohm",
            "ocpd_a", "capex", "loss_kw", "loss_pv", "fault_ka"}
    for seg in doc["segments"]:
        assert keys <= set(seg)
        assert seg["size"].endswith(("AWG", "kcmil", "mm2"))
    # lengths in metres whatever the input unit: 80 ft = 24.384 m
    assert {s["id"]: s["length_m"] for s in doc["segments"]}["A"] == pytest.approx(24.384)


def test_audit_catches_a_design_that_disagrees_with_itself(tmp_path):
    from dataclasses import replace

    from sizer.errors import InternalError
    from sizer.workflow import audit

    path = write_scenario(tmp_path, FEEDER_AND_TWO_BRANCHES.format(feeder=300, branch=250),
                          voltage="208 V", max_sets=1)
    prep = prepare(load_scenario(path))
    design = optimise(prep, Objective.CAPEX)
    audit(prep, design)  # a sound design passes
    bent = replace(design, segments=(replace(design.segments[0], vd_pct=0.1),
                                     *design.segments[1:]))
    with pytest.raises(InternalError, match="check of the design"):
        audit(prep, bent)
    wrong_total = replace(design, totals=replace(design.totals, capex=design.totals.capex + 5))
    with pytest.raises(InternalError, match="capex"):
        audit(prep, wrong_total)

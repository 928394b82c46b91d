"""The verification's findings in one numpy pass equal the plain walk over every run.

Issue 18 (the whole job at scale) replaced per-run Python loops in the verification by
one pass over all runs with masks, building a finding only for the runs that fail. The
plain walks below are the specification, written as the rules read (IEC 60949 adiabatic
withstand with the final temperature by insulation family; the interrupting rating
against the maximum fault where the device sits; IEC 60364-4-41 disconnection): the
one-pass code must give the same findings, in the same order, with the same numbers and
the same wording, on the bundled demos, on random trees and on fault levels drawn at
random (infinite and NaN levels included).
"""

from __future__ import annotations

import gc
import math
import random
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from builders import write_scenario

from sizer.candidates import MATERIALS, withstand_family, withstand_i2t_a2s
from sizer.conductors import adiabatic_withstand_a
from sizer.faults import disconnection_time_s
from sizer.model import Violation
from sizer.optimize import Objective, Prepared, optimise, prepare
from sizer.scenario import load_scenario
from sizer.verify import Network, load_flow, motor_start_dip_pct
from sizer.workflow import (
    _NETWORK_OF,
    _interrupting_findings,
    _ka,
    _withstand_findings,
    disconnection_findings,
    fault_networks,
    network_of,
    verify_design,
    with_verification,
)

DEMOS = sorted((Path(__file__).parents[1] / "scenarios").glob("*.toml"))
REL = 1e-12  # I²t squares the per-set current with x·x, the walk with x**2 (pow)


# --- the plain walks (the specification) --------------------------------------------


def walk_i2t(prep: Prepared, rows: np.ndarray) -> tuple[list[float], list[float]]:
    """I²t and final temperature of each row, one row at a time."""
    i2t, final = [], []
    for r in rows.tolist():
        seg = prep.segments[int(prep.table.segment[r])]
        material = MATERIALS[int(prep.table.material[r])]
        ins = seg.node.cable.insulation_c
        f = prep.profile.withstand_final_c(ins, withstand_family(seg, prep.prices, material))
        one_s = float(adiabatic_withstand_a(
            prep.catalogue.area_mm2[int(prep.table.size_index[r])], 1.0, material, ins, f))
        i2t.append((one_s * int(prep.table.sets[r])) ** 2)
        final.append(f)
    return i2t, final


def walk_withstand(prep: Prepared, rows: np.ndarray, near_a: np.ndarray) -> list[Violation]:
    """Withstand findings run by run: let-through against I²t, else I² × clearing time."""
    p = prep.profile
    i2t, final = walk_i2t(prep, rows)
    out = []
    for i, seg in enumerate(prep.segments):
        ins = seg.node.cable.insulation_c
        family = withstand_family(seg, prep.prices, MATERIALS[int(prep.table.material[rows[i]])])
        kind = f"{family}, " if family else ""
        limits = f"{kind}{ins:g} → {final[i]:g} degC, IEC 60949"
        better = "" if final[i] >= p.family_final_c["thermoset"] else ", or thermoset insulation"
        let_through = seg.node.let_through_a2s
        if let_through is not None:
            if let_through > i2t[i]:
                out.append(Violation(
                    seg.id, "short-circuit withstand", let_through, float(i2t[i]),
                    f"the device lets through {let_through:.3g} A²s, more than the "
                    f"conductor's {i2t[i]:.3g} A²s ({limits}); fix: a device that lets "
                    f"through less, or a larger conductor{better}"))
            continue
        if not math.isfinite(near_a[i]):
            continue
        time_s = seg.node.clearing_time_s or p.default_clearing_time_s
        capacity = math.sqrt(i2t[i] / time_s)
        if capacity < near_a[i]:
            out.append(Violation(
                seg.id, "short-circuit withstand", near_a[i] / 1e3, capacity / 1e3,
                f"{near_a[i] / 1e3:.1f} kA for {time_s:g} s exceeds the conductor's "
                f"{capacity / 1e3:.1f} kA adiabatic limit ({limits}); fix: a device "
                f"letting through at most {i2t[i]:.3g} A²s (give its let_through), a "
                f"shorter clearing time, or a larger conductor{better}"))
    return out


def walk_interrupting(prep: Prepared, near_a: np.ndarray) -> list[Violation]:
    """Devices whose interrupting rating is below the fault where they sit, run by run."""
    out = []
    for i, seg in enumerate(prep.segments):
        rating = seg.node.interrupting_a
        if rating is None or not near_a[i] > rating:
            continue
        out.append(Violation(
            seg.id, "interrupting rating", near_a[i] / 1e3, rating / 1e3,
            f"the maximum fault where the {seg.ocpd_a:g} A device sits is "
            f"{near_a[i] / 1e3:.1f} kA (c_max, motors contributing), above its "
            f"{rating / 1e3:g} kA interrupting rating; fix: a device rated for the fault, "
            "or a series-rated combination listed for it"))
    return out


def walk_disconnection(prep: Prepared, earth_a: np.ndarray,
                       trip_a: np.ndarray) -> list[Violation]:
    """Runs whose far-end earth fault is below the current that trips in time."""
    rule = prep.profile.fault
    out = []
    for i, seg in enumerate(prep.segments):
        if earth_a[i] >= trip_a[i] * (1 - 1e-9):
            continue
        time_s = disconnection_time_s(seg.ocpd_a, seg.is_leaf, rule)
        out.append(Violation(
            seg.id, "disconnection", float(earth_a[i]), float(trip_a[i]),
            f"the minimum earth fault at the far end is {earth_a[i]:.0f} A, below the "
            f"{trip_a[i]:.0f} A that disconnects the {seg.ocpd_a:g} A device within "
            f"{time_s:g} s; fix: a larger line or protective conductor on this path, a "
            f"device that trips at a lower current (curve B, a lower instantaneous "
            f"setting), or residual-current protection"))
    return out


def assert_same(got: list[Violation], want: list[Violation]) -> None:
    assert [(v.segment, v.rule, v.message) for v in got] == \
        [(v.segment, v.rule, v.message) for v in want]
    for g, w in zip(got, want, strict=True):
        assert g.value == pytest.approx(w.value, rel=REL, nan_ok=True)
        assert g.limit == pytest.approx(w.limit, rel=REL, nan_ok=True)


# --- random trees -----------------------------------------------------------------------


def random_nodes(seed: int) -> str:
    """Switchboards, panels (some behind a transformer) and circuits of every kind, with
    let-through energies, interrupting ratings, clearing times and insulation families
    drawn at random (invented data)."""
    r = random.Random(seed)
    out: list[str] = []

    def node(parent: str, **keys: object) -> str:
        name = f"N{len(out) + 1}"
        text = f'[[node]]\nid = "{name}"\nparent = "{parent}"\n'
        out.append(text + "".join(f"{k} = {v}\n" for k, v in keys.items()))
        return name

    def extras() -> dict[str, object]:
        keys: dict[str, object] = {}
        if r.random() < 0.2:
            keys["let_through"] = f'"{r.choice([2e4, 5e5, 3e6, 1e8]):g} A2s"'
        if r.random() < 0.2:
            keys["interrupting"] = f'"{r.choice([10, 14, 22, 65])} kA"'
        if r.random() < 0.2:
            keys["clearing_time"] = f'"{r.choice([0.01, 0.05, 0.2])} s"'
        if r.random() < 0.15:
            keys["insulation_type"] = r.choice(['"thermoplastic"', '"thermoset"'])
        return keys

    for _ in range(r.randint(1, 3)):
        board = node("SRC", length=f'"{r.randint(10, 80)} ft"', ocpd='"1200 A"', max_sets=8,
                     **extras())
        for _ in range(r.randint(1, 4)):
            if r.random() < 0.3:
                panel = node(board, length=f'"{r.randint(20, 200)} ft"', ocpd='"400 A"',
                             transformer='{ rating = "300 kVA", secondary = "208 V", '
                                         'impedance = "4.6 %", x_r = 3.2 }', **extras())
                to_neutral, to_line = "120 V", "208 V"
            else:
                panel = node(board, length=f'"{r.randint(20, 300)} ft"', ocpd='"225 A"',
                             **extras())
                to_neutral, to_line = "277 V", "480 V"
            for _ in range(r.randint(1, 14)):
                keys = extras()
                kind = r.random()
                if kind < 0.55:
                    keys.update(phases=1, voltage=f'"{to_neutral}"',
                                load=f'"{r.choice([0.5, 1, 1.5, 2.2, 3])} kW"')
                elif kind < 0.7:
                    keys.update(phases=1, voltage=f'"{to_line}"',
                                load=f'"{r.choice([2, 4, 6])} kW"')
                elif kind < 0.85:
                    keys.update(motor=f"{{ hp = {r.choice([5, 10, 20])}, start_multiple = 6, "
                                      "start_pf = 0.3 }", power_factor=0.86)
                else:
                    keys.update(load=f'"{r.choice([5, 10, 20])} kW"')
                node(panel, length=f'"{r.randint(10, 250)} ft"', **keys)
    return "\n".join(out)


@pytest.fixture(scope="module", params=[*DEMOS, *range(4)],
                ids=lambda p: p.stem if isinstance(p, Path) else f"random-{p}")
def prepared(request, tmp_path_factory) -> Prepared:
    if isinstance(request.param, Path):
        return prepare(load_scenario(request.param))
    folder = tmp_path_factory.mktemp(f"random{request.param}")
    path = write_scenario(folder, random_nodes(request.param), materials='["Cu", "Al"]',
                          insulation=random.Random(request.param).choice(
                              ["75 degC", "90 degC"]))
    return prepare(load_scenario(path))


def random_rows(prep: Prepared, seed: int) -> np.ndarray:
    """One candidate row of each run, drawn at random."""
    rng = np.random.default_rng(seed)
    off = prep.table.offsets
    return np.array([rng.integers(off[s], off[s + 1]) for s in range(off.size - 1)],
                    dtype=np.int64)


def random_levels_a(n: int, seed: int) -> np.ndarray:
    """Fault levels from 100 A to 200 kA, a few infinite or NaN."""
    rng = np.random.default_rng(seed)
    out = 10 ** rng.uniform(2, 5.3, n)
    out[rng.random(n) < 0.05] = math.inf
    out[rng.random(n) < 0.03] = math.nan
    return out


# --- the checks ---------------------------------------------------------------------------


def test_withstand_i2t_of_every_row_equals_the_row_by_row_walk(prepared):
    rows = np.arange(len(prepared.table), dtype=np.int64)
    i2t, final = withstand_i2t_a2s(prepared.profile, prepared.catalogue, prepared.prices,
                                   prepared.segments, prepared.table, rows)
    want_i2t, want_final = walk_i2t(prepared, rows)
    assert final.tolist() == want_final
    np.testing.assert_allclose(i2t, want_i2t, rtol=REL, atol=0)


@pytest.mark.parametrize("seed", range(3))
def test_findings_equal_the_walk_on_drawn_rows_and_fault_levels(prepared, seed):
    n = len(prepared.segments)
    rows = random_rows(prepared, seed)
    near = random_levels_a(n, seed)
    assert_same(_withstand_findings(prepared, rows, near),
                walk_withstand(prepared, rows, near))
    assert_same(_interrupting_findings(prepared, near), walk_interrupting(prepared, near))
    earth, trip = random_levels_a(n, seed + 10), random_levels_a(n, seed + 20)
    trip[::7] = earth[::7]  # on the boundary: no finding
    assert_same(disconnection_findings(prepared, earth, trip),
                walk_disconnection(prepared, earth, trip))


@pytest.mark.parametrize("objective", list(Objective))
def test_the_verification_of_the_optimum_equals_the_walks(prepared, objective):
    design = optimise(prepared, objective)
    assert design.segments
    choice = np.asarray(design.choice, dtype=np.int64)
    ver = verify_design(prepared, choice)
    net = network_of(prepared, choice)
    # what the walks see: the near end of each run sits on its parent's bus
    src = prepared.scenario.source.fault_current_a
    near = np.array([ver.fault_a[p] if p >= 0 else (src or math.inf)
                     for p in prepared.parent.tolist()])
    np.testing.assert_array_equal(ver.fault_near_a, near)
    found = [v for v in ver.findings if v.rule == "short-circuit withstand"]
    assert_same(found, walk_withstand(prepared, choice, near))
    found = [v for v in ver.findings if v.rule == "interrupting rating"]
    assert_same(found, walk_interrupting(prepared, near))
    # the motor-start dips with the shared running load flow equal one load flow each
    lf = load_flow(net)
    for seg_id, dip in ver.motor_dips:
        i = next(k for k, s in enumerate(prepared.segments) if s.id == seg_id)
        seg = prepared.segments[i]
        running = abs(seg.own_load_va) or seg.node.motor.power_w / max(seg.power_factor, 1e-6)
        start_s = seg.node.motor.start_multiple * running
        phi = math.acos(seg.node.motor.start_pf)
        start_va = complex(start_s * seg.node.motor.start_pf, start_s * math.sin(phi))
        alone = motor_start_dip_pct(net, i, start_va, running_va=seg.own_load_va)
        assert dip == alone == motor_start_dip_pct(net, i, start_va,
                                                   running_va=seg.own_load_va, before=lf)
    # the fault networks built from the load-flow network equal ones built afresh
    for shared, fresh in zip(fault_networks(prepared, choice, net),
                             fault_networks(prepared, choice), strict=True):
        np.testing.assert_array_equal(shared.z_ohm, fresh.z_ohm)
        np.testing.assert_array_equal(load_flow(shared).v_bus_pu, load_flow(fresh).v_bus_pu)


def test_with_verification_equals_replacing_each_result(prepared):
    design = optimise(prepared, Objective.LIFECYCLE)
    choice = np.asarray(design.choice, dtype=np.int64)
    ver = verify_design(prepared, choice)
    ver = replace(ver, earth_fault_a=np.where(np.arange(len(choice)) % 5 == 0, math.inf,
                                              ver.earth_fault_a))
    got = with_verification(prepared, design, choice, ver)
    want = tuple(
        replace(s, loadflow_drop_pct=float(ver.loadflow_drop_pct[i]),
                fault_ka=_ka(ver.fault_a[i]),
                fault_min_ka=None if ver.fault_min_a is None else _ka(ver.fault_min_a[i]),
                earth_fault_a=(None if ver.earth_fault_a is None
                               or not math.isfinite(ver.earth_fault_a[i])
                               else float(ver.earth_fault_a[i])),
                trip_a=None if ver.trip_a is None else float(ver.trip_a[i]))
        for i, s in enumerate(design.segments))
    assert got.segments == want
    assert [vars(s) for s in got.segments] == [vars(s) for s in want]
    assert all(type(a) is type(b) for g, w in zip(got.segments, want, strict=True)
               for a, b in zip(vars(g).values(), vars(w).values(), strict=True))
    assert got.violations == design.violations + ver.findings


def network_afresh(prep: Prepared, choice: np.ndarray) -> Network:
    """The load-flow network built from the segments for this one choice."""
    segs = prep.segments
    tx = [s.node.transformer for s in segs]
    return Network(
        parent=prep.parent,
        z_ohm=prep.table.r_ohm[choice] + 1j * prep.table.x_ohm[choice],
        circuit_v=np.array([s.voltage_v for s in segs], dtype=float),
        phases=np.array([s.phases for s in segs], dtype=np.int64),
        load_va=np.array([s.own_load_va for s in segs], dtype=complex)
        * prep.topology.above_product([s.node.demand_factor for s in segs]),
        xfmr_rating_va=np.array([0.0 if t is None else t.rating_va for t in tx]),
        xfmr_z_pct=np.array([0j if t is None else complex(t.r_pct, t.x_pct) for t in tx]),
        xfmr_secondary_v=np.array([s.voltage_v if t is None else t.secondary_v
                                   for s, t in zip(segs, tx, strict=True)]),
    )


def test_the_network_of_a_choice_equals_one_built_afresh(prepared):
    for seed in range(2):
        rows = random_rows(prepared, seed)
        got, want = network_of(prepared, rows), network_afresh(prepared, rows)
        for name in ("parent", "z_ohm", "circuit_v", "phases", "load_va", "xfmr_rating_va",
                     "xfmr_z_pct", "xfmr_secondary_v"):
            np.testing.assert_array_equal(getattr(got, name), getattr(want, name))
        a, b = load_flow(got), load_flow(want)
        np.testing.assert_array_equal(a.v_bus_pu, b.v_bus_pu)
        assert a.iterations == b.iterations


def test_the_fixed_part_of_the_network_goes_with_its_scenario():
    prep = prepare(load_scenario(DEMOS[0]))
    network_of(prep, random_rows(prep, 0))
    key = id(prep)
    assert key in _NETWORK_OF
    del prep
    gc.collect()
    assert key not in _NETWORK_OF

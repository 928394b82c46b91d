"""A scenario end to end: prepare, optimise, verify, and the frontier of cost against losses.

The command line and the reports call these; each step lives in its own module
(candidates, optimize, verify) and this one only strings them together.
"""

from __future__ import annotations

import itertools
import math
import weakref
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from functools import partial
from typing import Any, Generic, TypeVar

import numpy as np

from sizer.candidates import (
    MATERIALS,
    loop_temperature_c,
    withstand_family,
    withstand_i2t_a2s,
)
from sizer.conductors import impedance_ohm_per_m
from sizer.engines import KeptFronts, solve
from sizer.errors import InternalError
from sizer.faults import S_BASE_VA, disconnection_time_s, earth_fault_a, loop_pu
from sizer.model import (
    ESTIMATE_BASIS,
    LOADFLOW_BASIS,
    Design,
    DesignStatus,
    KeyFigures,
    Scenario,
    SegmentResult,
    Violation,
)
from sizer.optimize import (
    Objective,
    Prepared,
    build_problem,
    check,
    choice_totals,
    design_from_choice,
    design_of,
    exact_route_rows,
    loss_energy,
    optimal_choice,
    optimise,
    path_drops_pct,
    prepare,
    trip_of_rows,
)
from sizer.parallel import ordered_map, workers
from sizer.spare import has_spare, without_spare
from sizer.stages import count, stage
from sizer.topology import Topology
from sizer.verify import (
    LoadFlowResult,
    Network,
    fault_currents_a,
    load_flow,
    motor_shunt_y_pu,
    motor_start_dip_pct,
)

Progress = Callable[[str], None]

# The finding of a design whose AC load flow puts a load over the total drop limit.
LOADFLOW_DROP_RULE = "total drop (load flow)"


def quiet(_: str) -> None:
    """A progress callback that says nothing."""


@dataclass(frozen=True)
class FrontierPoint:
    """One design on the upfront-cost against loss-PV frontier."""

    capex: float
    loss_pv: float
    method: str          # "weighted sum" (supported point) or "epsilon constraint"
    parameter: float     # the loss weight, or the loss-PV cap
    proven_optimal: bool
    choice: tuple[int, ...]

    @property
    def lifecycle(self) -> float:
        """Upfront cost plus loss PV."""
        return self.capex + self.loss_pv


FRONTIER_FILL_MAX_SEGMENTS = 2000


R = TypeVar("R")


@dataclass(frozen=True)
class Plan(Generic[R]):
    """Independent solves, and how their answers make one result.

    Plans run together (``run_plans``) share the machine's cores: a long option and the
    frontier's weights keep both busy, where one after another a core waits for the
    longest solve of each.
    """

    calls: Sequence[Callable[[], object]]
    finish: Callable[[list[object]], R]


def run_plans(*plans: Plan[Any]) -> list[Any]:
    """Every plan's result; all their solves side by side, in the order given."""
    calls = [c for p in plans for c in p.calls]
    answers = ordered_map(lambda k: calls[k](), list(range(len(calls))))
    out, at = [], 0
    for p in plans:
        out.append(p.finish(answers[at:at + len(p.calls)]))
        at += len(p.calls)
    return out


def frontier(prep: Prepared, points: int = 12, *, engine: str = "auto", solver: str = "cbc",
             time_limit_s: float | None = 60.0, fill: bool = True,
             progress: Progress = quiet) -> list[FrontierPoint]:
    """Capex against loss PV: weighted sums for the supported points, ε-constraint between.

    Weighted sums (tree engine, fast) find the points on the convex hull; where two
    neighbours leave a gap, an ε-constraint MILP (minimum capex with loss PV capped at
    the gap's middle) looks for a design inside it, when it can finish in the time limit
    and the tree has at most FRONTIER_FILL_MAX_SEGMENTS runs.
    """
    plan = frontier_plan(prep, points, engine=engine, solver=solver,
                         time_limit_s=time_limit_s, fill=fill, progress=progress)
    return run_plans(plan)[0]


def frontier_plan(prep: Prepared, points: int = 12, *, engine: str = "auto",
                  solver: str = "cbc", time_limit_s: float | None = 60.0, fill: bool = True,
                  progress: Progress = quiet) -> Plan[list[FrontierPoint]]:
    """``frontier`` as a plan: its weighted solves, and how their answers make it."""
    t = prep.table
    # Weights from pure capex (0) to losses weighing 50× their present value.
    weights = [0.0, *[float(w) for w in np.geomspace(0.05, 50.0, max(points - 1, 1))]]
    progress(f"frontier: {len(weights)} loss weights, {min(workers(), len(weights))} "
             f"at a time")

    def weighted(w: float) -> tuple[tuple[int, ...], bool] | None:
        problem = build_problem(prep, Objective.LIFECYCLE, loss_weight=float(w))
        sol = solve(problem, engine=engine, solver=solver, time_limit_s=time_limit_s)
        if not sol.has_solution:
            return None
        return tuple(int(r) for r in sol.choice), sol.proven_optimal

    def finish(answers: list[object]) -> list[FrontierPoint]:
        found: dict[tuple[int, ...], FrontierPoint] = {}
        for w, answer in zip(weights, answers, strict=True):
            if answer is None:
                return []
            assert isinstance(answer, tuple)
            key: tuple[int, ...] = answer[0]
            proven: bool = answer[1]
            if key not in found:
                chosen = np.asarray(key, dtype=np.int64)
                found[key] = FrontierPoint(float(t.capex[chosen].sum()),
                                           float(t.loss_pv[chosen].sum()), "weighted sum",
                                           float(w), proven, key)
        return _filled(prep, found, points, solver=solver, time_limit_s=time_limit_s,
                       fill=fill, progress=progress)

    return Plan([partial(weighted, w) for w in weights], finish)


def _filled(prep: Prepared, found: dict[tuple[int, ...], FrontierPoint], points: int, *,
            solver: str, time_limit_s: float | None, fill: bool,
            progress: Progress) -> list[FrontierPoint]:
    """The weighted sums' points, gaps filled by ε-constraint MILPs on small trees."""
    t = prep.table
    pts = sorted(found.values(), key=lambda p: (p.capex, p.loss_pv))
    # The gap-filling MILP is worth its time on small trees only; on large ones the
    # weighted sums by the tree engine are the frontier.
    if fill and len(pts) > 1 and len(prep.segments) <= FRONTIER_FILL_MAX_SEGMENTS:
        gaps = sorted(itertools.pairwise(pts),
                      key=lambda ab: -(ab[0].loss_pv - ab[1].loss_pv))
        for a, b in gaps[: max(points - len(pts), 0)]:
            cap = 0.5 * (a.loss_pv + b.loss_pv)
            progress(f"frontier: loss PV cap {cap:,.0f}")
            problem = build_problem(prep, Objective.CAPEX, loss_pv_cap=cap)
            sol = solve(problem, engine="milp", solver=solver, time_limit_s=time_limit_s)
            if not sol.has_solution:
                continue
            key = tuple(int(r) for r in sol.choice)
            if key in found:
                continue
            found[key] = FrontierPoint(float(t.capex[sol.choice].sum()),
                                       float(t.loss_pv[sol.choice].sum()),
                                       "epsilon constraint", cap, sol.proven_optimal, key)
        pts = sorted(found.values(), key=lambda p: (p.capex, p.loss_pv))
    return _non_dominated(pts)


@dataclass(frozen=True)
class CheckedPoint:
    """A frontier point checked by the same load flow as the optimum."""

    point: FrontierPoint
    figures: KeyFigures
    design: Design | None      # the whole design, when asked for
    over_limit: bool           # the load flow puts a load over a total drop limit


def check_frontier(prep: Prepared, points: Sequence[FrontierPoint], *,
                   designs: bool = True) -> list[CheckedPoint]:
    """Each frontier point verified, with its key figures and (``designs``) its design.

    Without ``designs`` the figures come from the table's columns and no record is made
    per run: a page that sums a large tree by panel shows nothing more of a frontier
    point, and ten whole designs of 20,000 runs took 6.5 s and half a gigabyte.

    One after another: side by side (``sizer.parallel``) it was no faster at 20,000
    runs, as each point's thousands of findings cost as much to pass between processes
    as to find.
    """
    out = []
    for p in points:
        # routes at their actual derating
        choice = exact_route_rows(prep, np.asarray(p.choice, dtype=np.int64))
        ver = verify_design(prep, choice)
        design = None
        if designs:
            design = with_verification(prep, design_from_choice(
                prep, choice, objective="frontier",
                status=DesignStatus.OPTIMAL if p.proven_optimal else DesignStatus.TIME_LIMIT),
                choice, ver)
        figures = (design.key_figures() if design is not None
                   else checked_figures(prep, choice, ver))
        over = any(v.rule == LOADFLOW_DROP_RULE for v in ver.findings)
        out.append(CheckedPoint(p, figures, design, over))
    return out


def frontier_designs(prep: Prepared, points: Sequence[FrontierPoint]) -> list[Design]:
    """Each frontier point as a design, checked by the same load flow as the optimum."""
    return [c.design for c in check_frontier(prep, points) if c.design is not None]


def checked_figures(prep: Prepared, choice: np.ndarray, ver: Verification) -> KeyFigures:
    """``Design.key_figures`` of the verified choice, from the table's columns.

    The same sums in the same order as over a design's runs, so the same figures.
    """
    t = prep.table
    kwh, cost_year = loss_energy(prep, choice)
    flows = ver.loadflow_drop_pct.tolist()
    sizes = prep.catalogue.sizes
    return KeyFigures(
        totals=choice_totals(prep, choice, kwh),
        loss_w=1e3 * sum((t.loss_w[choice] / 1e3).tolist()),
        loss_cost_per_year=sum(cost_year.tolist()),
        findings=len(ver.findings),
        # a verified design has a load-flow drop for every run
        worst_drop_pct=max(flows) if flows else 0.0,
        drop_basis=LOADFLOW_BASIS if flows else ESTIMATE_BASIS,
        conductors=tuple(zip([MATERIALS[m] for m in t.material[choice].tolist()],
                             [sizes[k] for k in t.size_index[choice].tolist()],
                             t.sets[choice].tolist(), strict=True)))


def _non_dominated(points: list[FrontierPoint]) -> list[FrontierPoint]:
    out: list[FrontierPoint] = []
    best_loss = math.inf
    for p in sorted(points, key=lambda p: (p.capex, p.loss_pv)):
        if p.loss_pv < best_loss - 1e-9:
            out.append(p)
            best_loss = p.loss_pv
    return out



# --- verification ---------------------------------------------------------------------


@dataclass(frozen=True)
class Verification:
    """What the AC load flow and the fault check say of a design."""

    converged: bool
    iterations: int
    loadflow_drop_pct: np.ndarray     # per segment, at its far end (after a transformer)
    fault_a: np.ndarray               # per segment: maximum three-phase fault at its far end
    fault_near_a: np.ndarray          # per segment: at its near end (what the cable must withstand)
    infinite_source: bool
    findings: tuple[Violation, ...]
    motor_dips: tuple[tuple[str, float], ...]
    rounds: int = 0                   # re-solves of the closed loop
    fault_min_a: np.ndarray | None = None    # minimum three-phase fault at the far end
    earth_fault_a: np.ndarray | None = None  # minimum line-to-earth fault at the cable's far end
    trip_a: np.ndarray | None = None         # current that disconnects the device in time


# The part of each prepared scenario's load-flow network that no choice changes, kept
# while the Prepared lives (its id, checked by a weak reference: ids are reused).
_NETWORK_OF: dict[int, tuple[weakref.ref[Prepared], Network]] = {}


def _forget_network(key: int, ref: weakref.ref[Prepared]) -> None:
    known = _NETWORK_OF.get(key)
    if known is not None and known[0] is ref:
        del _NETWORK_OF[key]


def _fixed_network(prep: Prepared) -> Network:
    """The load-flow network of ``prep`` with zero cable impedance, built once per prep."""
    key = id(prep)
    known = _NETWORK_OF.get(key)
    if known is not None and known[0]() is prep:
        return known[1]
    segs = prep.segments
    n = len(segs)
    rating = np.zeros(n)
    z_pct = np.zeros(n, dtype=complex)
    secondary = np.array([s.voltage_v for s in segs], dtype=float)
    for i, seg in enumerate(segs):
        tx = seg.node.transformer
        if tx is not None:
            rating[i] = tx.rating_va
            z_pct[i] = complex(tx.r_pct, tx.x_pct)
            secondary[i] = tx.secondary_v
    # Loads at the design basis: each scaled by the demand factors of the panels above it,
    # so the source carries the same diversified demand as the design currents assume.
    diversity = prep.topology.above_product([s.node.demand_factor for s in segs])
    net = Network(
        parent=prep.parent,
        z_ohm=np.zeros(n, dtype=complex),
        circuit_v=np.array([s.voltage_v for s in segs], dtype=float),
        phases=np.array([s.phases for s in segs], dtype=np.int64),
        load_va=np.array([s.own_load_va for s in segs], dtype=complex) * diversity,
        xfmr_rating_va=rating,
        xfmr_z_pct=z_pct,
        xfmr_secondary_v=secondary,
    )
    _NETWORK_OF[key] = (weakref.ref(prep, partial(_forget_network, key)), net)
    return net


def network_of(prep: Prepared, choice: np.ndarray) -> Network:
    """The load-flow network of the chosen rows.

    Voltages, loads, transformers and the tree's walks are laid out once per prepared
    scenario (each load-flow round and every frontier design reuses them); only the
    chosen rows' impedances are new.
    """
    t = prep.table
    return _fixed_network(prep).with_z_ohm(t.r_ohm[choice] + 1j * t.x_ohm[choice])


def chosen_impedance_ohm(prep: Prepared, choice: np.ndarray, temp_c: np.ndarray) -> np.ndarray:
    """Complex per-phase impedance of each chosen run (sets combined) at ``temp_c``."""
    t = prep.table
    rows = np.asarray(choice, dtype=np.int64)
    out = np.empty(rows.size, dtype=np.complex128)
    inst = np.array([s.node.cable.installation for s in prep.segments])
    mat = t.material[rows]
    length = np.array([s.length_m for s in prep.segments])
    for name in np.unique(inst).tolist():
        for m in (0, 1):
            mask = (inst == name) & (mat == m)
            if not mask.any():
                continue
            r, x = impedance_ohm_per_m(prep.catalogue, MATERIALS[m], t.size_index[rows[mask]],
                                       temp_c[mask], name, prep.profile.frequency_hz)
            out[mask] = (r + 1j * x) * length[mask] / t.sets[rows[mask]]
    return out


def motor_contribution_y_pu(prep: Prepared) -> np.ndarray:
    """Admittance of each running three-phase motor feeding a fault (0 where none)."""
    rule = prep.profile.fault
    running = np.zeros(len(prep.segments))
    multiple = np.full(running.size, rule.motor_multiple)
    for i, seg in enumerate(prep.segments):
        motor = seg.node.motor
        if motor is None or seg.phases != 3:  # single-phase motors are left out
            continue
        running[i] = abs(seg.own_load_va) or motor.power_w / max(seg.power_factor, 1e-6)
        if motor.fault_multiple is not None:
            multiple[i] = motor.fault_multiple
    return motor_shunt_y_pu(running, multiple, rule.motor_r_x)


def fault_networks(prep: Prepared, choice: np.ndarray,
                   net: Network | None = None) -> tuple[Network, Network]:
    """The networks of the maximum and minimum fault calculations of IEC 60909-0.

    Maximum: conductor R at 20 degC; minimum: at the fault-loop temperature. ``net``:
    the load-flow network of the same choice, when the caller has it.
    """
    if net is None:
        net = network_of(prep, choice)
    n = len(prep.segments)
    cold = chosen_impedance_ohm(prep, choice, np.full(n, 20.0))
    hot_c = loop_temperature_c(prep.profile, np.array(
        [s.node.cable.insulation_c for s in prep.segments]))
    hot = chosen_impedance_ohm(prep, choice, hot_c)
    return net.with_z_ohm(cold), net.with_z_ohm(hot)


def earth_faults_a(prep: Prepared, choice: np.ndarray) -> np.ndarray:
    """Minimum line-to-earth fault current (A) at each cable's far end.

    ``c_min · U0 / |Z_source + Σ_path (line + protective conductor) + transformers above|``,
    complex sums, conductors at the fault-loop temperature (see ``sizer.faults``).
    """
    e = prep.earth
    own = loop_pu(prep.table.loop_ohm[np.asarray(choice, dtype=np.int64)], e.u0_v, S_BASE_VA)
    path_sum = prep.topology.path_sum  # the prepared tree's walk, not a new one per sum
    cables = path_sum(own.real) + 1j * path_sum(own.imag)
    xf = path_sum(e.xfmr_pu.real) + 1j * path_sum(e.xfmr_pu.imag)
    return earth_fault_a(e.c_min, e.u0_v, e.source_pu + cables + (xf - e.xfmr_pu), S_BASE_VA)


def verify_design(prep: Prepared, choice: np.ndarray, *,
                  flow: LoadFlowResult | None = None) -> Verification:
    """Load flow, fault levels, short-circuit withstand and motor-start dip of a choice.

    ``flow`` is this choice's load flow when the caller has it already.
    """
    net = network_of(prep, choice)
    lf = load_flow(net) if flow is None else flow
    src = prep.scenario.source
    rule = prep.profile.fault
    net_max, net_min = fault_networks(prep, choice, net)
    fault = fault_currents_a(net_max, src.fault_current_a, src.voltage_v, src.x_r,
                             source_phases=src.phases, c=rule.c_max,
                             shunt_y_pu=motor_contribution_y_pu(prep))
    # Minimum: no motors (IEC 60909-0), the source impedance for c_max (conservative).
    fault_min = fault_currents_a(net_min, src.fault_current_a, src.voltage_v, src.x_r,
                                 source_phases=src.phases, c=rule.c_min, source_c=rule.c_max)
    # A fault just past the near end of a cable sees the parent bus's level.
    source_level = src.fault_current_a if src.fault_current_a is not None else math.inf
    parent = prep.parent
    near = np.where(parent >= 0, np.asarray(fault, dtype=float)[np.maximum(parent, 0)],
                    source_level)
    earth = earth_faults_a(prep, choice)
    trip = trip_of_rows(prep, np.asarray(choice, dtype=np.int64))
    findings = list(_withstand_findings(prep, choice, near))
    findings += list(_interrupting_findings(prep, near))
    findings += list(disconnection_findings(prep, earth, trip))
    drop = np.asarray(lf.drop_pct, dtype=float)
    over = np.flatnonzero(drop > prep.leaf_limit_pct + 1e-6)
    findings += [Violation(prep.segments[i].id, LOADFLOW_DROP_RULE, float(drop[i]),
                           float(prep.leaf_limit_pct[i]),
                           f"the load flow gives {drop[i]:.2f} % from the source, over "
                           f"{prep.leaf_limit_pct[i]:g} %") for i in over.tolist()]
    dips = []
    limit = prep.profile.motor_start_dip_pct
    for i, seg in enumerate(prep.segments):
        motor = seg.node.motor
        if motor is None:
            continue
        running = abs(seg.own_load_va) or motor.power_w / max(seg.power_factor, 1e-6)
        start_s = motor.start_multiple * running
        phi = math.acos(motor.start_pf)
        start_va = complex(start_s * motor.start_pf, start_s * math.sin(phi))
        dip = motor_start_dip_pct(net, i, start_va, running_va=seg.own_load_va, before=lf)
        dips.append((seg.id, dip))
        if dip > limit + 1e-9:
            findings.append(Violation(seg.id, "motor-start dip", dip, limit,
                                      f"starting dips the voltage {dip:.1f} % (limit {limit:g} %)"))
    return Verification(
        converged=bool(lf.converged), iterations=int(lf.iterations),
        loadflow_drop_pct=np.asarray(lf.drop_pct, dtype=float), fault_a=np.asarray(fault),
        fault_near_a=near, infinite_source=src.fault_current_a is None,
        findings=tuple(findings), motor_dips=tuple(dips),
        fault_min_a=np.asarray(fault_min), earth_fault_a=earth, trip_a=trip,
    )


def disconnection_findings(prep: Prepared, earth_a: np.ndarray,
                           trip_a: np.ndarray) -> list[Violation]:
    """A ``disconnection`` violation for every run whose far-end earth fault is below trip.

    One comparison over all runs; messages only for the runs that fail, in run order.
    """
    rule = prep.profile.fault
    earth_a = np.asarray(earth_a, dtype=float)
    trip_a = np.asarray(trip_a, dtype=float)
    out = []
    for i in np.flatnonzero(~(earth_a >= trip_a * (1 - 1e-9))).tolist():
        seg = prep.segments[i]
        time_s = disconnection_time_s(seg.ocpd_a, seg.is_leaf, rule)
        out.append(Violation(
            seg.id, "disconnection", float(earth_a[i]), float(trip_a[i]),
            f"the minimum earth fault at the far end is {earth_a[i]:.0f} A, below the "
            f"{trip_a[i]:.0f} A that disconnects the {seg.ocpd_a:g} A device within "
            f"{time_s:g} s; fix: a larger line or protective conductor on this path, a "
            f"device that trips at a lower current (curve B, a lower instantaneous "
            f"setting), or residual-current protection"))
    return out


def _interrupting_findings(prep: Prepared, near_a: np.ndarray) -> list[Violation]:
    """Devices whose interrupting rating is below the maximum fault where they sit."""
    rating = np.array([math.nan if s.node.interrupting_a is None else s.node.interrupting_a
                       for s in prep.segments], dtype=float)
    near_a = np.asarray(near_a, dtype=float)
    near_ka = near_a / 1e3
    out = []
    # NaN (no rating given) compares False: those runs are not checked
    for i in np.flatnonzero(near_a > rating).tolist():
        seg = prep.segments[i]
        given = seg.node.interrupting_a
        assert given is not None  # a run without a rating compared NaN: never over
        out.append(Violation(
            seg.id, "interrupting rating", near_ka[i], given / 1e3,
            f"the maximum fault where the {seg.ocpd_a:g} A device sits is "
            f"{near_ka[i]:.1f} kA (c_max, motors contributing), above its "
            f"{given / 1e3:g} kA interrupting rating; fix: a device rated for the fault, "
            "or a series-rated combination listed for it"))
    return out


def _withstand_findings(prep: Prepared, choice: np.ndarray,
                        near_a: np.ndarray) -> list[Violation]:
    """Runs whose conductors would pass their final temperature in a fault at the near end.

    Adiabatic I²t of the chosen sets (IEC 60949, final temperature by insulation family,
    ``withstand_i2t_a2s``) against the device's let-through I²t when the node gives one,
    else against I² × clearing time with I the maximum fault at the run's near end.
    One numpy pass over all runs; messages only for the runs that fail, in run order.
    """
    p = prep.profile
    rows = np.asarray(choice, dtype=np.int64)
    i2t, final = withstand_i2t_a2s(p, prep.catalogue, prep.prices, prep.segments,
                                   prep.table, rows)
    near_a = np.asarray(near_a, dtype=float)
    let = np.array([math.nan if s.node.let_through_a2s is None else s.node.let_through_a2s
                    for s in prep.segments], dtype=float)
    has_let = np.array([s.node.let_through_a2s is not None for s in prep.segments],
                       dtype=bool)
    time_s = np.array([s.node.clearing_time_s or p.default_clearing_time_s
                       for s in prep.segments], dtype=float)
    capacity = np.sqrt(i2t / time_s)
    over_let = has_let & (let > i2t)
    over_fault = ~has_let & np.isfinite(near_a) & (capacity < near_a)
    # plain floats from here: formatting them is several times faster than numpy scalars
    near_ka = (near_a / 1e3).tolist()
    i2t_l, final_l, cap_l, time_l = i2t.tolist(), final.tolist(), capacity.tolist(), time_s.tolist()
    material = prep.table.material[rows].tolist()
    out = []
    # the limits' wording depends on a few values only: worded once for each
    words: dict[tuple[str | None, int, float, float], tuple[str, str]] = {}
    thermoset_c = p.family_final_c["thermoset"]
    for i in np.flatnonzero(over_let | over_fault).tolist():
        seg = prep.segments[i]
        ins = seg.node.cable.insulation_c
        key = (seg.node.insulation_type, material[i], ins, final_l[i])
        if key not in words:
            family = withstand_family(seg, prep.prices, MATERIALS[material[i]])
            kind = f"{family}, " if family else ""
            words[key] = (f"{kind}{ins:g} → {final_l[i]:g} degC, IEC 60949",
                          "" if final_l[i] >= thermoset_c else ", or thermoset insulation")
        limits, better = words[key]
        if over_let[i]:
            let_through = seg.node.let_through_a2s
            assert let_through is not None  # over_let holds only runs that give one
            out.append(Violation(
                seg.id, "short-circuit withstand", let_through, i2t_l[i],
                f"the device lets through {let_through:.3g} A²s, more than the "
                f"conductor's {i2t_l[i]:.3g} A²s ({limits}); fix: a device that lets "
                f"through less, or a larger conductor{better}"))
            continue
        cap_ka = cap_l[i] / 1e3
        out.append(Violation(
            seg.id, "short-circuit withstand", near_ka[i], cap_ka,
            f"{near_ka[i]:.1f} kA for {time_l[i]:g} s exceeds the conductor's "
            f"{cap_ka:.1f} kA adiabatic limit ({limits}); fix: a device "
            f"letting through at most {i2t_l[i]:.3g} A²s (give its let_through), a "
            f"shorter clearing time, or a larger conductor{better}"))
    return out


@dataclass(frozen=True)
class DisconnectionDriver:
    """A run the disconnection rule made larger than drop and ampacity alone would."""

    segment: str
    without: str          # the conductor chosen without the rule ("50 mm2 Al")
    chosen: str           # the conductor chosen with it
    earth_fault_a: float  # minimum far-end earth fault with the chosen conductors
    trip_a: float
    ocpd_a: float
    time_s: float
    pe_upsized: bool = False  # the EGC / PE is above the profile's rule to meet it
    curve: str = ""           # a lower miniature-breaker curve chosen to meet it


_PE_WORDS = {"nec": "equipment grounding conductor", "cec": "bonding conductor"}


def _conductor_text(s: SegmentResult, with_pe: bool, profile: str, with_curve: bool) -> str:
    """The run's conductor ("2x 50 mm2 Cu"), its EGC / PE or breaker curve when changed."""
    text = f"{s.sets}x {s.size} {s.material}".removeprefix("1x ")
    if with_pe and s.egc:
        text += f" with a {s.egc} {_PE_WORDS.get(profile, 'protective conductor')}"
    if with_curve and s.curve:
        text += f" on a type {s.curve} breaker"
    return text


def drivers_plan(prep: Prepared, design: Design) -> Plan[tuple[DisconnectionDriver, ...]]:
    """``disconnection_drivers`` as a plan of one solve."""
    def finish(answers: list[object]) -> tuple[DisconnectionDriver, ...]:
        drivers = answers[0]
        assert isinstance(drivers, tuple)
        return drivers

    return Plan([partial(disconnection_drivers, prep, design)], finish)


def disconnection_drivers(prep: Prepared, design: Design) -> tuple[DisconnectionDriver, ...]:
    """Runs upsized by the disconnection rule, not by drop.

    Re-solves the design's objective without the rule and names every run whose
    conductor (area × sets) is larger with it, or whose protective conductor stands
    above the profile's rule (a priced row of ``sizer.earthfault``). Empty for
    objectives other than capex and lifecycle, and when either solve has no design.
    """
    if design.objective not in (o.value for o in Objective) or not design.choice:
        return ()
    base = optimise(prep, Objective(design.objective), disconnection=False)
    if not base.choice:
        return ()
    t = prep.table
    area = prep.catalogue.area_mm2
    chosen = np.asarray(design.choice, dtype=np.int64)
    earth = earth_faults_a(prep, chosen)
    trip = trip_of_rows(prep, chosen)
    rule = prep.profile.fault
    out = []
    for i, (seg, r, b) in enumerate(zip(prep.segments, chosen.tolist(), base.choice,
                                        strict=True)):
        grown = area[t.size_index[r]] * t.sets[r] > area[t.size_index[b]] * t.sets[b] * (1 + 1e-9)
        # or a protective conductor above the profile's rule, or a lower breaker curve
        # (sizer.earthfault)
        pe_up = t.pe_step is not None and bool(t.pe_step[r] > 0)
        curve = "" if t.curve is None else str(t.curve[r])
        if not (grown or pe_up or curve):
            continue
        s_new, s_old = design.segments[i], base.segments[i]
        out.append(DisconnectionDriver(
            seg.id, _conductor_text(s_old, pe_up, prep.profile.name, bool(curve)),
            _conductor_text(s_new, pe_up, prep.profile.name, bool(curve)),
            float(earth[i]), float(trip[i]), seg.ocpd_a,
            disconnection_time_s(seg.ocpd_a, seg.is_leaf, rule),
            pe_upsized=pe_up, curve=curve))
    return tuple(out)


def _ka(current_a: float) -> float | None:
    return float(current_a) / 1e3 if math.isfinite(current_a) else None


def _with_fields(s: SegmentResult, **changes: object) -> SegmentResult:
    """``dataclasses.replace`` for a SegmentResult, without its per-call field walk.

    SegmentResult is a frozen dataclass with no ``__post_init__``; a copy of its fields
    with some changed is the same object ``replace`` builds, at a tenth of the cost
    (20,000 runs: 0.05 s instead of 0.5 s).
    """
    new = object.__new__(SegmentResult)
    values = new.__dict__
    values.update(s.__dict__)
    values.update(changes)
    return new


def with_verification(prep: Prepared, design: Design, choice: np.ndarray,
                      ver: Verification) -> Design:
    """The design with load-flow drops, fault levels and findings filled in."""
    n = len(design.segments)
    none: list[float | None] = [None] * n
    fault_min = none if ver.fault_min_a is None else [_ka(a) for a in ver.fault_min_a.tolist()]
    earth = none if ver.earth_fault_a is None else [
        a if math.isfinite(a) else None for a in ver.earth_fault_a.tolist()]
    trip = none if ver.trip_a is None else ver.trip_a.tolist()
    segments = tuple(
        _with_fields(s, loadflow_drop_pct=drop, fault_ka=_ka(fault), fault_min_ka=f_min,
                     earth_fault_a=e, trip_a=t)
        for s, drop, fault, f_min, e, t in zip(
            design.segments, ver.loadflow_drop_pct.tolist(), ver.fault_a.tolist(),
            fault_min, earth, trip, strict=True))
    notes = list(design.notes)
    if not ver.converged:
        notes.append(f"the AC load flow did not converge in {ver.iterations} iterations")
    if ver.infinite_source:
        notes.append("no source fault level given: fault currents assume an infinite bus")
    if ver.rounds:
        notes.append(f"load-flow check tightened the drop budget and re-solved "
                     f"{ver.rounds} time(s)")
    return replace(design, segments=segments, violations=design.violations + ver.findings,
                   notes=tuple(notes))


def solve_verified(prep: Prepared, objective: Objective, *, engine: str = "auto",
                   solver: str = "cbc", time_limit_s: float | None = None,
                   max_rounds: int = 5, motor_start: bool = False,
                   ) -> tuple[Design, Verification | None]:
    """Optimise, then close the loop with the AC load flow.

    The optimiser's linear drop estimate slightly under-states the load flow's drop; where
    a path ends over its limit by load flow, that load's budget is tightened by the
    difference and the problem solved again, at most ``max_rounds`` times.
    """
    limits = prep.leaf_limit_pct.copy()
    rounds = 0
    fronts = KeptFronts()   # a round re-solves only the subtrees whose limits moved
    while True:
        solved = optimal_choice(prep, objective, engine=engine, solver=solver,
                                time_limit_s=time_limit_s, limit_pct=limits,
                                motor_start=motor_start, reuse=fronts)
        if isinstance(solved, Design):
            return solved, None
        if not solved.has_solution:
            return design_of(prep, solved, objective, limit_pct=limits,
                             motor_start=motor_start), None
        # Only the load flow decides another round: the Design, its audit and the fault
        # checks are built once, for the choice that stands.
        choice = exact_route_rows(prep, np.asarray(solved.choice, dtype=np.int64))
        with stage("verify"):
            flow = load_flow(network_of(prep, choice))
        over = np.asarray(flow.drop_pct, dtype=float) - prep.leaf_limit_pct
        bad = np.isfinite(over) & (over > 1e-6)
        if not bad.any() or rounds >= max_rounds or not flow.converged:
            break
        est = path_drops_pct(prep.parent, prep.table.vd_pct[choice], prep.fixed_drop_pct)
        short = np.asarray(flow.drop_pct, dtype=float) - est
        # Tighten by the estimate's shortfall plus a hair, so the next round lands inside.
        limits[bad] = limits[bad] - short[bad] - 1e-4
        # Every other leaf the estimate under-states keeps room for its own shortfall,
        # with a tenth more for the change the re-solve brings upstream: otherwise the
        # next solve moves drops around and a leaf that had room becomes the next one
        # over (each round is a whole solve and load flow; at 5,000 runs this saves one
        # of two rounds for +0.003 % of cost).
        room = np.isfinite(short) & (short > 0) & ~bad
        limits[room] = np.minimum(limits[room],
                                  prep.leaf_limit_pct[room] - 1.1 * short[room] - 1e-4)
        rounds += 1
    design = design_of(prep, solved, objective, limit_pct=limits, motor_start=motor_start)
    with stage("audit"):
        audit(prep, design)
    with stage("verify"):
        ver = replace(verify_design(prep, choice, flow=flow), rounds=rounds)
    count("loadflow_rounds", rounds + 1)
    with stage("findings"):
        return with_verification(prep, design, choice, ver), ver


def check_verified(prep: Prepared, *, engine: str = "auto", solver: str = "cbc",
                   time_limit_s: float | None = None) -> tuple[Design, Verification | None]:
    """Check the design as pinned, verify it by load flow and fault level, and say so.

    ``prep`` comes from ``prepare(..., keep_pins=True)``. The status is ``violations``
    when the rules or the verification find anything, else ``compliant``.
    """
    design = check(prep, engine=engine, solver=solver, time_limit_s=time_limit_s)
    if not design.segments:
        return design, None
    choice = np.asarray(design.choice, dtype=np.int64)
    ver = verify_design(prep, choice)
    design = with_verification(prep, design, choice, ver)
    status = DesignStatus.VIOLATIONS if design.violations else DesignStatus.COMPLIANT
    return replace(design, status=status), ver


# --- options side by side ---------------------------------------------------------------


@dataclass(frozen=True)
class Option:
    """One way to build the job, for the side-by-side comparison."""

    key: str  # "code_minimum" | "lifecycle" | "all_copper" | "without_spare" | "as_pinned"
    title: str
    design: Design


def all_copper(scenario: Scenario) -> Scenario:
    """The same scenario with copper as the only material (pins kept as written)."""
    nodes = tuple(
        n if n.pin is not None else replace(n, cable=replace(n.cable, materials=("Cu",)))
        for n in scenario.nodes)
    return replace(scenario, nodes=nodes)


def compare_options(prep: Prepared, *, engine: str = "auto", solver: str = "cbc",
                    time_limit_s: float | None = None, progress: Progress = quiet,
                    solved: Sequence[Design] = ()) -> list[Option]:
    """Code minimum, lifecycle optimum, all copper, without spare and pinned options.

    See ``options_plan``.
    """
    return run_plans(options_plan(prep, engine=engine, solver=solver,
                                  time_limit_s=time_limit_s, progress=progress,
                                  solved=solved))[0]


def options_plan(prep: Prepared, *, engine: str = "auto", solver: str = "cbc",
                 time_limit_s: float | None = None, progress: Progress = quiet,
                 solved: Sequence[Design] = ()) -> Plan[list[Option]]:
    """``compare_options`` as a plan: the options to solve, and how they are listed.

    The option without the spare capacity is there when a node reserves some; the pinned
    design when pins exist.

    Each is verified by load flow like a normal solve; an option that has no feasible
    design is still listed, with its status. ``solved`` designs of this scenario (by
    their objective) are reused instead of solved again.
    """
    known = {d.objective: d for d in solved if d.segments}

    def solved_or_solve(objective: Objective) -> Design | Callable[[], Design]:
        if objective.value in known:
            return known[objective.value]
        return lambda: solve_verified(prep, objective, engine=engine, solver=solver,
                                      time_limit_s=time_limit_s)[0]

    def all_copper_option() -> Design:
        cu = prepare(all_copper(prep.scenario), prices=prep.prices)
        return solve_verified(cu, Objective.LIFECYCLE, engine=engine, solver=solver,
                              time_limit_s=time_limit_s)[0]

    def without_spare_option() -> Design:
        bare = prepare(without_spare(prep.scenario), prices=prep.prices)
        return solve_verified(bare, Objective.LIFECYCLE, engine=engine, solver=solver,
                              time_limit_s=time_limit_s)[0]

    def pinned_option() -> Design:
        pinned = prepare(prep.scenario, keep_pins=True, prices=prep.prices)
        return check_verified(pinned, engine=engine, solver=solver,
                              time_limit_s=time_limit_s)[0]

    jobs: list[tuple[str, str, Design | Callable[[], Design]]] = [
        ("code_minimum", "Code minimum (least upfront cost)",
         solved_or_solve(Objective.CAPEX)),
        ("lifecycle", "Lifecycle optimum (upfront + losses)",
         solved_or_solve(Objective.LIFECYCLE))]
    if any("Al" in n.cable.materials for n in prep.scenario.nodes if n.pin is None):
        jobs.append(("all_copper", "All copper, lifecycle optimum", all_copper_option))
    if has_spare(prep.scenario):
        jobs.append(("without_spare", "Lifecycle optimum without the spare capacity",
                     without_spare_option))
    if any(n.pin is not None for n in prep.scenario.nodes):
        jobs.append(("as_pinned", "Your pinned design (rest at least cost)", pinned_option))
    progress(f"options: {', '.join(key for key, _, _ in jobs)}")
    todo = [job for _, _, job in jobs if not isinstance(job, Design)]

    def finish(answers: list[object]) -> list[Option]:
        done = iter(answers)
        return [Option(key, title, job if isinstance(job, Design) else next(done))  # type: ignore[arg-type]
                for key, title, job in jobs]

    return Plan(todo, finish)


# --- an independent look at the answer ---------------------------------------------------


def audit(prep: Prepared, design: Design, *, rel_tol: float = 1e-6) -> None:
    """Re-check a finished design from its own numbers, apart from the solver's rows.

    Each segment's drop is recomputed from its R, X, current and power factor; path drops
    by summing along the parent names in one pass; totals by summing the segments; and
    the limits the design claims to meet are checked again. Any disagreement is an
    error, not a warning: the design must not be written.
    """
    if not design.segments:
        return
    problems: list[str] = []
    # The tree as the design itself names it (parent ids), not the solver's arrays.
    topo = Topology.from_ids([s.id for s in design.segments],
                             [s.parent for s in design.segments], prep.scenario.source.id)
    own_vd = []
    pf = {seg.id: seg.power_factor for seg in prep.segments}
    # the adjusted ampacity against the load (or the motor rule): 210.19(A)(1)(b)
    required = {seg.id: seg.required_adjusted_a for seg in prep.segments}
    fixed = {seg.id: float(prep.fixed_drop_pct[i]) for i, seg in enumerate(prep.segments)}
    leaf = {seg.id: seg.is_leaf for seg in prep.segments}
    p = prep.profile
    for s in design.segments:
        cos = pf[s.id]
        sin = math.sqrt(max(0.0, 1.0 - cos * cos))
        k = 2.0 if s.phases == 1 else math.sqrt(3.0)
        vd = 100.0 * k * s.current_a * (s.r_ohm * cos + s.x_ohm * sin) / s.voltage_v
        if not math.isclose(vd, s.vd_pct, rel_tol=rel_tol, abs_tol=1e-9):
            problems.append(f"'{s.id}' drop {s.vd_pct:.6f} % but R, X and I give {vd:.6f} %")
        own_vd.append(s.vd_pct + fixed[s.id])
        if not s.pinned and s.ampacity_a < required[s.id] * (1 - rel_tol):
            problems.append(f"'{s.id}' ampacity {s.ampacity_a:.1f} A below {required[s.id]:.1f} A")
        own = p.drop_limit_pct(s.kind)
        if not s.pinned and s.vd_pct > own * (1 + rel_tol):
            problems.append(f"'{s.id}' own drop {s.vd_pct:.3f} % over {own:g} %")
        solved = design.status in (DesignStatus.OPTIMAL, DesignStatus.BOUNDED,
                                   DesignStatus.TIME_LIMIT)
        if leaf[s.id] and not s.pinned and solved and (
                s.path_vd_pct > p.drop_total_pct * (1 + rel_tol)):
            problems.append(f"'{s.id}' path drop {s.path_vd_pct:.3f} % over {p.drop_total_pct:g} %")
    path = topo.path_sum(own_vd)
    for s, summed_path in zip(design.segments, path.tolist(), strict=True):
        if not math.isclose(summed_path, s.path_vd_pct, rel_tol=rel_tol, abs_tol=1e-9):
            problems.append(f"'{s.id}' path drop {s.path_vd_pct:.6f} % but the path sums to "
                            f"{summed_path:.6f} %")
    for name, total in (("capex", design.totals.capex), ("loss_pv", design.totals.loss_pv)):
        summed = math.fsum(getattr(s, name) for s in design.segments)
        if not math.isclose(summed, total, rel_tol=rel_tol, abs_tol=1e-6):
            problems.append(f"total {name} {total:.2f} but the segments sum to {summed:.2f}")
    if problems:
        raise InternalError("the check of the design from its own numbers failed: "
                            + "; ".join(problems[:3]))

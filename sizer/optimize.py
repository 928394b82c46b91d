"""The sizing problem for a whole tree: objectives, engines, frontier and diagnosis.

This module turns a scenario into the candidate table and the optimisation problem of
``sizer.engines`` (costs and drops only), hands it to an engine, and turns the chosen
rows back into a ``Design``. Solver names stay in ``sizer.engines``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from enum import StrEnum
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from sizer.candidates import (
    MATERIALS,
    LocalDiagnosis,
    adiabatic_pe_runs,
    build_candidates,
    route_indices,
    transformer_drops_pct,
)
from sizer.catalogue import Catalogue, load_catalogue
from sizer.catalogue.prices import PriceList, load_price_list, resolve_price_list
from sizer.earthfault import (
    CURVE_TIE_BREAK,
    MINIATURE_CURVES,
    EarthFaultTerms,
    curve_rows,
    curve_shift_pu,
    earth_fault_terms,
    enforce_withstand,
    pe_fault_terms,
    pe_step_rows,
    run_device,
    with_curve_budgets,
    with_curves,
    with_larger_pe,
)
from sizer.economics import EconomicParams, demand_charge_per_w_year
from sizer.engines import KeptFronts, Problem, Solution, SolveStatus, solve
from sizer.engines.problem import path_totals
from sizer.faults import (
    S_BASE_VA,
    rows_loop_pu,
)
from sizer.loads import design_segments
from sizer.model import (
    CandidateTable,
    Design,
    DesignStatus,
    Scenario,
    Segment,
    SegmentResult,
    Totals,
    Violation,
)
from sizer.operating import RunProfiles, run_profiles
from sizer.phases import (
    PhaseState,
    assign_phases,
    loss_current_squared_by_phase,
    neutral_current_squared,
    sized_by_worst_phase,
)
from sizer.rules import REL_TOL, load_profile
from sizer.rules.motors import branch_device_a
from sizer.rules.profile import RuleProfile, with_terminal_table
from sizer.spare import with_spare_capacity
from sizer.stages import count, stage
from sizer.topology import Topology
from sizer.units import conductor_label

_DEFAULT_PRICE_LISTS = {"awg": "demo-us.csv", "metric": "demo-metric.csv"}


class Objective(StrEnum):
    """What the optimiser minimises."""

    CAPEX = "capex"
    LIFECYCLE = "lifecycle"


@dataclass(frozen=True)
class Prepared:
    """Everything up to the candidate table; solve, check, frontier and sweep reuse it."""

    scenario: Scenario
    profile: RuleProfile
    catalogue: Catalogue
    prices: PriceList
    economics: EconomicParams
    segments: tuple[Segment, ...]
    table: CandidateTable
    local: LocalDiagnosis
    fixed_drop_pct: np.ndarray
    topology: Topology
    leaf_limit_pct: np.ndarray
    runs: RunProfiles            # operating peaks and loss profiles (sizer.operating)
    phases: PhaseState           # phase assignment, phase and neutral currents
    earth: EarthFaultTerms
    withstand_removed: np.ndarray   # rows per segment removed by withstand = "enforce"

    @property
    def parent(self) -> np.ndarray:
        """Parent segment of every segment (-1: fed from the source), parents first."""
        return self.topology.parent

    @cached_property
    def loop_pu(self) -> np.ndarray:
        """``loop_pu_of_rows``, worked out once: every solve of the table uses it."""
        out = loop_pu_of_rows(self)
        out.setflags(write=False)
        return out


def economic_params(scenario: Scenario) -> EconomicParams:
    """The scenario's economics as the IEC 60287-3-2 method needs them."""
    e = scenario.economics
    return EconomicParams(
        energy_price_per_wh=e.energy_price_per_kwh / 1e3,
        demand_per_w_year=float(demand_charge_per_w_year(e.demand_charge_per_kw_month)),
        escalation=e.escalation,
        discount=e.discount_rate,
        load_growth=e.load_growth,
        years=e.lifetime_years,
        load_factor=e.load_factor,
        loss_load_factor=e.loss_load_factor,
        hours_per_year=e.hours_per_year,
    )


def price_list_for(scenario: Scenario, catalogue: Catalogue) -> PriceList:
    """The scenario's price catalogue, or the bundled demo one for its sizes."""
    scenario_dir = Path(scenario.file).parent if scenario.file else Path.cwd()
    path = scenario.prices.catalogue
    if path is None:
        path = resolve_price_list(f"costdata/{_DEFAULT_PRICE_LISTS[catalogue.name]}",
                                  scenario_dir)
    elif not Path(path).is_absolute():
        path = resolve_price_list(str(path), scenario_dir)
    return load_price_list(
        path, catalogue, scenario.currency,
        copper_per_kg=scenario.prices.copper_per_kg,
        aluminium_per_kg=scenario.prices.aluminium_per_kg,
    )


def prepare(scenario: Scenario, *, keep_pins: bool = False,
            prices: PriceList | None = None) -> Prepared:
    """Design currents and the candidate table of a scenario."""
    with stage("currents"):
        profile = load_profile(scenario.rules)
        catalogue = load_catalogue(profile.catalogue)
        segments = design_segments(scenario, profile)
        price_list = prices if prices is not None else price_list_for(scenario, catalogue)
        if price_list.terminals_path is not None:
            # The price list's own terminal ranges (its supplier's devices) replace the
            # profile's.
            profile = with_terminal_table(profile, price_list.terminals_path)
        econ = economic_params(scenario)
        runs = run_profiles(scenario, segments, econ)
        phase_state = assign_phases(scenario, segments, runs)
        segments = with_spare_capacity(sized_by_worst_phase(segments, phase_state, profile),
                                       profile)
        topology = Topology(np.array([s.parent_index for s in segments], dtype=np.int64))
        earth = earth_fault_terms(scenario, segments, profile, topology.parent)
    with stage("candidates"):
        pe_fault = (pe_fault_terms(segments, profile, earth, topology.parent)
                    if adiabatic_pe_runs(segments, profile).any() else None)
        table, local = build_candidates(
            segments, profile, catalogue, price_list, runs.loss_pv_per_w(econ),
            keep_pins=keep_pins,
            loss_a2=loss_current_squared_by_phase(segments, runs, phase_state),
            neutral_a=phase_state.neutral_a,
            neutral_a2=neutral_current_squared(segments, phase_state),
            pe_fault=pe_fault,
            file=scenario.file,
        )
        # a larger EGC / PE, priced, where it can meet disconnection (sizer.earthfault)
        pe_rows, pe_size = pe_step_rows(segments, profile, catalogue, table, earth.u0_v,
                                        earth.limit_pu, topology.parent)
        table = with_larger_pe(segments, profile, catalogue, price_list, table, pe_rows,
                               pe_size, pe_fault)
        # another miniature-breaker curve where the scenario allows one (final circuits)
        c_rows, c_curves = curve_rows(segments, profile.fault, table, earth.u0_v,
                                      earth.trip_a, earth.limit_pu, topology.parent)
        table = with_curves(segments, profile.fault, table, c_rows, c_curves, earth.trip_a)
        earth = with_curve_budgets(earth, table)
        limit = np.where(topology.is_leaf, profile.drop_total_pct, np.inf)
        removed = np.zeros(len(segments), dtype=np.int64)
        if any(seg.node.withstand == "enforce" for seg in segments):
            table, removed = enforce_withstand(scenario, segments, profile, catalogue,
                                               price_list, table, keep_pins=keep_pins)
    count("segments", len(segments))
    count("candidate_rows", len(table))
    return Prepared(scenario, profile, catalogue, price_list, econ, segments, table, local,
                    transformer_drops_pct(segments), topology, limit, runs, phase_state,
                    earth, removed)


def trip_of_rows(prep: Prepared, rows: np.ndarray) -> np.ndarray:
    """The current (A) that disconnects the device of each candidate row in time."""
    t = prep.table
    if t.trip_a is None:
        return prep.earth.trip_a[t.segment[rows]]
    return t.trip_a[rows]


def loop_pu_of_rows(prep: Prepared) -> np.ndarray:
    """|line + protective conductor| of every candidate row, per unit on its U0.

    Rows on a breaker curve tripping above their run's lowest carry the difference of
    budgets (``sizer.earthfault.curve_shift_pu``), so one budget per run holds for all.
    """
    t = prep.table
    return (rows_loop_pu(t.loop_ohm, prep.earth.u0_v, t.segment, S_BASE_VA)
            + curve_shift_pu(t, prep.earth.u0_v, prep.earth.c_min, prep.earth.trip_a))


def objective_costs(table: CandidateTable, objective: Objective,
                    loss_weight: float | None = None) -> np.ndarray:
    """Per-candidate objective coefficient: capex, or capex + weight × loss PV.

    A row on another breaker curve costs ``CURVE_TIE_BREAK`` more, so that among
    designs of equal cost a run keeps its own device.
    """
    tie = 0.0 if table.curve is None else np.where(table.curve != "", CURVE_TIE_BREAK, 0.0)
    if loss_weight is not None:
        return table.capex + loss_weight * table.loss_pv + tie
    if objective is Objective.CAPEX:
        return table.capex + tie
    return table.capex + table.loss_pv + tie


def build_problem(prep: Prepared, objective: Objective, *, loss_weight: float | None = None,
                  limit_pct: np.ndarray | None = None, disconnection: bool = True,
                  **side: object) -> Problem:
    """The engine-facing statement: costs and drops per candidate, limits per segment.

    ``disconnection``: keep every run's far-end earth-fault loop within the budget that
    lets its device disconnect in time (False: left out, to see what it costs).
    """
    t = prep.table
    return Problem(
        parent=prep.parent,
        offsets=t.offsets,
        cost=objective_costs(t, objective, loss_weight),
        drop_pct=t.vd_pct,
        fixed_drop_pct=prep.fixed_drop_pct,
        limit_pct=prep.leaf_limit_pct if limit_pct is None else limit_pct,
        capex=t.capex,
        loss_pv=t.loss_pv,
        **_route_terms(prep),  # type: ignore[arg-type]
        loop_pu=prep.loop_pu if disconnection else None,
        loop_limit_pu=prep.earth.limit_pu if disconnection else None,
        **side,  # type: ignore[arg-type]
    )


def _run_curves(prep: Prepared) -> list[str | None]:
    """Each run's own miniature-breaker curve (None: another device), before any copy."""
    fault = prep.profile.fault
    out: list[str | None] = []
    for seg in prep.segments:
        device = run_device(seg, fault)
        out.append(device if device in MINIATURE_CURVES and seg.node.trip_multiple is None
                   else None)
    return out


def _route_terms(prep: Prepared) -> dict[str, np.ndarray]:
    """The shared-route arrays of the problem, when some runs share a route."""
    t = prep.table
    if t.route_count is None or t.route_top is None or not np.any(t.route_count > 0):
        return {}
    return {"route_of": route_indices(prep.segments), "route_count": t.route_count,
            "route_top": t.route_top}


def exact_route_rows(prep: Prepared, choice: np.ndarray) -> np.ndarray:
    """The same conductors, each route's rows derated for the route's actual content.

    A row may assume a more severe band than its route's total needs (still safe); its
    twin at the actual band has the same conductors, as much or more ampacity, a cooler
    conductor and no more loss, so the design stays feasible and costs no more — and its
    derating matches its route exactly.
    """
    t = prep.table
    terms = _route_terms(prep)
    if not terms or t.route_count is None or t.route_top is None:
        return choice
    route_of = terms["route_of"]
    out = np.array(choice, dtype=np.int64)
    n_routes = int(route_of.max()) + 1
    inside = route_of >= 0
    totals = np.bincount(route_of[inside], weights=t.route_count[out[inside]],
                         minlength=n_routes)
    tops = np.unique(t.route_top[t.route_count > 0])
    for s in np.flatnonzero(inside).tolist():
        want = tops[np.searchsorted(tops, totals[route_of[s]] - 1e-9, side="left")]
        r = int(out[s])
        rows = np.arange(t.offsets[s], t.offsets[s + 1])
        twin = rows[(t.material[rows] == t.material[r]) & (t.size_index[rows] == t.size_index[r])
                    & (t.sets[rows] == t.sets[r]) & (t.route_top[rows] == want)]
        if twin.size:
            out[s] = int(twin[0])
    return out


def path_drops_pct(parent: np.ndarray, own_pct: np.ndarray, fixed_pct: np.ndarray) -> np.ndarray:
    """Cumulative drop from the source to each segment's far end (parents come first)."""
    return path_totals(parent, own_pct + fixed_pct)


def loss_energy(prep: Prepared, choice: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per chosen row: its first-year loss energy (kWh) and that energy's cost."""
    loss_w = prep.table.loss_w[choice]
    return (loss_w * prep.runs.kwh_per_w(prep.economics),
            loss_w * prep.runs.annual_cost_per_w(prep.economics))


def choice_totals(prep: Prepared, choice: np.ndarray, kwh: np.ndarray) -> Totals:
    """The chosen rows' upfront cost and loss PV, and their loss energy ``kwh`` summed."""
    t = prep.table
    return Totals(capex=float(t.capex[choice].sum()), loss_pv=float(t.loss_pv[choice].sum()),
                  loss_kwh_per_year=float(kwh.sum()))


def design_from_choice(prep: Prepared, choice: np.ndarray, *, status: DesignStatus,
                       objective: str,
                       solution: Solution | None = None,
                       diagnosis: tuple[str, ...] = ()) -> Design:
    """Re-evaluate the chosen rows from the table and assemble the Design.

    Runs in shared routes are reported at the derating of their route's actual content
    (``exact_route_rows``), whatever band the solver's rows assumed.
    """
    t = prep.table
    cat = prep.catalogue
    choice = exact_route_rows(prep, np.asarray(choice, dtype=np.int64))
    vd = t.vd_pct[choice]
    path = path_drops_pct(prep.parent, vd, prep.fixed_drop_pct)
    service = [seg.service and prep.profile.bonds_service() for seg in prep.segments]
    kwh, cost_year = loss_energy(prep, choice)
    results = []
    race = prep.profile.raceway
    sizes = cat.sizes
    n = len(prep.segments)

    # Columns of the chosen rows as Python lists: one conversion per column, not one per
    # value (the same numbers).
    def column(values: np.ndarray | None, default: float | str) -> list[Any]:
        return [default] * n if values is None else values[choice].tolist()

    material, size_k, sets = column(t.material, 0), column(t.size_index, 0), column(t.sets, 1)
    egc_k, ampacity = column(t.egc_size_index, 0), column(t.ampacity_a, 0.0)
    r_ohm, x_ohm, capex = column(t.r_ohm, 0.0), column(t.x_ohm, 0.0), column(t.capex, 0.0)
    loss_w, loss_pv, temp = column(t.loss_w, 0.0), column(t.loss_pv, 0.0), column(t.temp_c, 0.0)
    top_k, ends = column(t.terminal_max, -1), column(t.splice_ends, 0)
    term_capex, race_capex = column(t.termination_capex, 0.0), column(t.raceway_capex, 0.0)
    race_k, pe_step = column(t.raceway_size, -1), column(t.pe_step, 0)
    route_top = column(t.route_top, 0.0)
    neutral_k = column(t.neutral_size_index, -1)
    curve_row = column(t.curve, "")
    run_curve = _run_curves(prep)
    phase = prep.phases.phase
    sizing, neutral_a = prep.phases.sizing_a.tolist(), prep.phases.neutral_a.tolist()
    labels: dict[tuple[str, int, int], str] = {}   # raceway wording, once per kind
    vd_list, path_list = vd.tolist(), path.tolist()
    operating, kwh_list, cost_list = (prep.runs.operating_a.tolist(), kwh.tolist(),
                                      cost_year.tolist())
    ids = [node.id for node in prep.scenario.nodes]
    for s, seg in enumerate(prep.segments):
        parent_id = (ids[seg.parent_index] if seg.parent_index >= 0
                     else prep.scenario.source.id)
        # ``phase`` of a single-phase run, phase and neutral currents of a three-phase one
        if seg.phases == 1:
            phase_fields: dict[str, Any] = {"phase": phase[s]}
        else:
            phase_fields = {"phase_currents_a": tuple(sizing[s]), "neutral_a": neutral_a[s]}
            if seg.neutral and t.neutral_size_index is not None:
                phase_fields["neutral_size"] = sizes[neutral_k[s]]
        cable = seg.node.cable
        if race is not None:
            key = (cable.installation, 1 if cable.sets_in_one_raceway else sets[s], race_k[s])
            if key not in labels:
                labels[key] = race.label(*key)
        results.append(SegmentResult(
            id=seg.id, parent=parent_id, kind=seg.kind,
            material=MATERIALS[material[s]],
            size=sizes[size_k[s]],
            sets=sets[s],
            egc=None if service[s] else sizes[egc_k[s]],
            bonding_jumper=sizes[egc_k[s]] if service[s] else None,
            length_m=seg.length_m, current_a=seg.current_a,
            ampacity_a=ampacity[s], vd_pct=vd_list[s],
            path_vd_pct=path_list[s], r_ohm=r_ohm[s], x_ohm=x_ohm[s],
            ocpd_a=seg.ocpd_a, capex=capex[s], loss_kw=loss_w[s] / 1e3,
            loss_pv=loss_pv[s], temp_c=temp[s],
            voltage_v=seg.voltage_v, phases=seg.phases, pinned=seg.node.pin is not None,
            operating_a=operating[s], loss_kwh_per_year=kwh_list[s],
            loss_cost_per_year=cost_list[s], **phase_fields,
            terminal_max=sizes[top_k[s]] if top_k[s] >= 0 else "",
            termination="reducing splice" if ends[s] > 0 else "direct",
            raceway=labels[key] if race is not None else "",
            conductor_capex=capex[s] - term_capex[s] - race_capex[s],
            termination_capex=term_capex[s], raceway_capex=race_capex[s],
            route=seg.node.route,
            route_conductors=(int(min(route_top[s], 10**6))
                              if seg.node.route and t.route_top is not None else 0),
            pe_step=pe_step[s],
            curve=str(curve_row[s]) if curve_row[s] else run_curve[s],
        ))
    return Design(
        status=status, objective=objective, rules=prep.profile.name,
        currency=prep.scenario.currency, totals=choice_totals(prep, choice, kwh),
        segments=tuple(results),
        engine=solution.engine if solution else "",
        proven_optimal=solution.proven_optimal if solution else False,
        gap=solution.gap if solution else None,
        diagnosis=diagnosis,
        notes=(solution.message,) if solution and solution.message else (),
        choice=tuple(int(r) for r in choice),
    )


def empty_design(prep: Prepared, status: DesignStatus, objective: str,
                 diagnosis: tuple[str, ...]) -> Design:
    """A design document with no segments: why there is no design."""
    return Design(status=status, objective=objective, rules=prep.profile.name,
                  currency=prep.scenario.currency, totals=Totals(0.0, 0.0, 0.0),
                  segments=(), diagnosis=diagnosis)


def design_from_solution(prep: Prepared, solution: Solution, objective: str, *,
                         status: DesignStatus | None = None,
                         diagnosis: Callable[[], list[str]] | None = None) -> Design:
    """The one way a solver outcome becomes a Design.

    A solution with a usable choice becomes a design (``status`` overrides the solver's
    word, e.g. for a pinned check); a proven-infeasible one carries ``diagnosis()``; any
    other stop without a choice (time limit before an incumbent, an engine error) is
    ``no_design`` with the solver's message, never a design made of rows that were not
    chosen.
    """
    if solution.has_solution:
        if status is None:
            status = {SolveStatus.OPTIMAL: DesignStatus.OPTIMAL,
                      SolveStatus.BOUNDED: DesignStatus.BOUNDED}.get(
                          solution.status, DesignStatus.TIME_LIMIT)
        return design_from_choice(prep, solution.choice, status=status, objective=objective,
                                  solution=solution)
    if solution.status is SolveStatus.INFEASIBLE:
        lines = diagnosis() if diagnosis is not None else [solution.message]
        return empty_design(prep, DesignStatus.INFEASIBLE, objective, tuple(lines))
    if solution.status is SolveStatus.TIME_LIMIT:
        why = (f"no design was found within the time limit ({solution.seconds:.1f} s with "
               f"{solution.engine}); give the solver more time (--time-limit) or use the tree "
               f"engine where the problem allows it")
    else:
        why = f"the {solution.engine or 'solver'} stopped without a design: {solution.message}"
    return empty_design(prep, DesignStatus.NO_DESIGN, objective, (why,))


def optimise(prep: Prepared, objective: Objective = Objective.LIFECYCLE, *,
             engine: str = "auto", solver: str = "cbc", time_limit_s: float | None = None,
             limit_pct: np.ndarray | None = None, loss_weight: float | None = None,
             motor_start: bool = False, disconnection: bool = True,
             **side: object) -> Design:
    """Solve for the cheapest compliant design; infeasible problems come back diagnosed.

    ``motor_start`` adds each motor's starting dip as a further path constraint;
    ``disconnection`` (default) the earth-fault loop of every run.
    """
    solved = optimal_choice(prep, objective, engine=engine, solver=solver,
                            time_limit_s=time_limit_s, limit_pct=limit_pct,
                            loss_weight=loss_weight, motor_start=motor_start,
                            disconnection=disconnection, **side)  # type: ignore[arg-type]
    if isinstance(solved, Design):
        return solved
    return design_of(prep, solved, objective, limit_pct=limit_pct,
                     disconnection=disconnection, motor_start=motor_start)


def optimal_choice(prep: Prepared, objective: Objective = Objective.LIFECYCLE, *,
                   engine: str = "auto", solver: str = "cbc",
                   time_limit_s: float | None = None, limit_pct: np.ndarray | None = None,
                   loss_weight: float | None = None, motor_start: bool = False,
                   disconnection: bool = True, reuse: KeptFronts | None = None,
                   **side: object) -> Solution | Design:
    """The solver's outcome alone, before any Design is assembled (``optimise``'s first half).

    A run with no candidate at all comes back at once as the diagnosed infeasible Design.
    The closed loop with the load flow re-solves on this, and builds the Design once;
    ``reuse`` carries the tree engine's fronts from one of its rounds to the next.
    """
    if _motor_start_applies(prep, motor_start):
        side["drop2_pct"], side["limit2_pct"] = motor_start_terms(prep)
    empty = np.diff(prep.table.offsets) == 0
    if empty.any():
        return empty_design(prep, DesignStatus.INFEASIBLE, objective.value,
                            tuple(diagnose(prep)))
    with stage("engine"):
        problem = build_problem(prep, objective, loss_weight=loss_weight,
                                limit_pct=limit_pct, disconnection=disconnection, **side)
        return solve(problem, engine=engine, solver=solver, time_limit_s=time_limit_s,
                     reuse=reuse)


def _motor_start_applies(prep: Prepared, motor_start: bool) -> bool:
    """The motor-start dip is a further path constraint: asked for, and a motor to start."""
    return motor_start and any(seg.node.motor is not None for seg in prep.segments)


def design_of(prep: Prepared, solution: Solution, objective: Objective, *,
              limit_pct: np.ndarray | None = None, disconnection: bool = True,
              motor_start: bool = False) -> Design:
    """``optimise``'s second half: the Design of a solution, or why there is none."""
    def why() -> list[str]:
        lines = diagnose(prep, limit_pct)
        if _motor_start_applies(prep, motor_start):
            lines = [*_motor_start_diagnosis(prep), *lines[:-1]] or lines
        earth = disconnection_diagnosis(prep) if disconnection else []
        if earth:
            generic = ["no design satisfies the combined constraints"]
            lines = earth + [line for line in lines if line not in generic]
        return lines

    with stage("design"):
        return design_from_solution(prep, solution, objective.value, diagnosis=why)


# --- diagnosis ------------------------------------------------------------------------


def diagnose(prep: Prepared, limit_pct: np.ndarray | None = None) -> list[str]:
    """Name each segment or path that no candidate satisfies, its best, and the fix."""
    lines: list[str] = []
    t = prep.table
    local = prep.local
    limits = prep.leaf_limit_pct if limit_pct is None else limit_pct
    for s, seg in enumerate(prep.segments):
        if t.offsets[s + 1] > t.offsets[s]:
            continue
        cable = seg.node.cable
        if prep.withstand_removed[s]:
            lines.append(
                f"segment '{seg.id}': no allowed conductor withstands the short circuit "
                f"(withstand = \"enforce\"); fix: a current-limiting device (give its "
                f"let_through), a shorter clearing_time, more parallel sets (max_sets), or "
                f"thermoset insulation (insulation_type)")
        elif local.pinned_fails[s]:
            lines.append(f"segment '{seg.id}': the pinned conductor {seg.node.pin} breaks the "
                         f"{local.pinned_fails[s]} rule; unpin it or pin a larger one")
        elif local.build_limits and local.build_limits[s]:
            lines.append(
                f"segment '{seg.id}': every conductor that meets the rules was refused by a "
                f"{local.build_limits[s]}; fix: allow reducing splices (oversize_termination "
                f"= \"splice\"), equipment with larger terminals (load_terminal_max), more "
                f"parallel sets, or another installation")
        elif not math.isfinite(local.best_drop_pct[s]):
            lines.append(
                f"segment '{seg.id}': no allowed conductor carries {seg.required_ampacity_a:.0f} A "
                f"and is protected by a {seg.ocpd_a:.0f} A device (largest available "
                f"{local.best_ampacity_a[s]:.0f} A with up to {cable.max_sets} sets); fix: allow "
                f"more parallel sets (max_sets), another material, or a larger catalogue size")
        else:
            own = prep.profile.drop_limit_pct(seg.kind)
            best = local.best_drop_pct[s]
            lines.append(
                f"segment '{seg.id}': its own drop is at best {best:.2f} % with "
                f"{local.best_label[s]} (limit {own:g} %); fix: {_drop_fixes(seg, best, own)}")
    if lines:
        return lines
    # Every segment has candidates: the paths are what fails. With the lowest-drop row on
    # every segment each path is at its best, so a path over its limit then is hopeless.
    best = np.full(len(prep.segments), np.inf)
    np.minimum.at(best, t.segment, t.vd_pct)
    path = path_drops_pct(prep.parent, best, prep.fixed_drop_pct)
    first, below = _first_failures(prep, path > limits + 1e-9)
    for s in first:
        chain = prep.topology.path(s)
        worst = max(chain, key=lambda k: best[k])
        seg = prep.segments[worst]
        names = _path_text(prep, chain)
        tx = sum(prep.fixed_drop_pct[k] for k in chain)
        tx_text = f" (of which transformers {tx:.2f} %)" if tx > 0 else ""
        fixes = _drop_fixes(seg, best[worst], best[worst] - (path[s] - limits[s]))
        lines.append(
            f"path {names}: best reachable drop {path[s]:.2f} %{tx_text} with the "
            f"lowest-drop conductors, limit {limits[s]:g} %; largest share on '{seg.id}' "
            f"({best[worst]:.2f} %); fix: {fixes}")
    lines += _further_failures(below, "drop")
    return lines or ["no design satisfies the combined constraints"]


_LISTED_FAILURES = 20
"""Up to this many failing paths, each is named; beyond, only each branch's first."""


def _first_failures(prep: Prepared, failing: np.ndarray) -> tuple[list[int], int]:
    """The failing segments to name in a diagnosis, and how many others fail.

    A few are all named. Many are cut to the failing segments with no failing segment
    above them: a path that fails at some run mostly fails for the runs fed through it
    too, so each branch's first failure names the cause, and the ones below are counted,
    not spelt out (down a riser thousands of runs deep every path below the first failure
    would otherwise be printed in full, the text growing with the square of the depth).
    """
    every = np.flatnonzero(failing)
    if every.size <= _LISTED_FAILURES:
        return every.tolist(), 0
    clear_above = prep.topology.above_product(~failing) > 0
    first = np.flatnonzero(failing & clear_above)
    return first.tolist(), int(every.size - first.size)


def _further_failures(count: int, what: str) -> list[str]:
    """One line for the failing runs fed through a failure already named."""
    if not count:
        return []
    return [f"{count} more run{'s' if count > 1 else ''} fed through the paths above also "
            f"miss{'' if count > 1 else 'es'} {'their' if count > 1 else 'its'} {what} "
            f"limit{'s' if count > 1 else ''}; fix the paths above first"]


_PATH_ENDS = 4
"""Runs named at each end of a long path in a diagnosis; the ones between are counted."""


def _path_text(prep: Prepared, chain: list[int]) -> str:
    """``SOURCE → A → B → …`` for a path of segments, its middle counted when long."""
    ids = [prep.segments[k].id for k in chain]
    if len(ids) > 2 * _PATH_ENDS + 1:
        ids = [*ids[:_PATH_ENDS], f"({len(ids) - 2 * _PATH_ENDS} runs)", *ids[-_PATH_ENDS:]]
    return " → ".join([prep.scenario.source.id, *ids])


def disconnection_diagnosis(prep: Prepared) -> list[str]:
    """Paths whose far-end earth fault stays below the trip current whatever is chosen.

    With the lowest-impedance conductors everywhere: the path, the best current, the fix.
    """
    t = prep.table
    loop = prep.loop_pu
    best = np.full(len(prep.segments), np.inf)
    np.minimum.at(best, t.segment, loop)
    path = path_totals(prep.parent, best)
    e = prep.earth
    lines = []
    first, below = _first_failures(prep, path > e.limit_pu + 1e-9)
    for s in first:
        chain = prep.topology.path(s)
        seg = prep.segments[s]
        names = _path_text(prep, chain)
        fixed = e.limit_pu[s] - e.c_min * S_BASE_VA / (e.u0_v[s] * e.trip_a[s])  # −source…
        best_a = e.c_min * S_BASE_VA / (e.u0_v[s] * (path[s] - fixed))
        worst = max(chain, key=lambda k: best[k])
        lines.append(
            f"path {names}: the far-end earth fault reaches at best {best_a:.0f} A with the "
            f"lowest-impedance conductors, below the {e.trip_a[s]:.0f} A that disconnects "
            f"the {seg.ocpd_a:g} A device in time (largest share on "
            f"'{prep.segments[worst].id}'); fix: a device that trips at a lower current "
            f"(curve B, a lower instantaneous setting), residual-current protection, more "
            f"parallel sets (max_sets), or a shorter run")
    return lines + _further_failures(below, "earth-fault disconnection")


def _motor_start_diagnosis(prep: Prepared) -> list[str]:
    """Motors whose starting dip cannot meet the limit even with the stiffest conductors."""
    dip, budget = motor_start_terms(prep)
    best = np.full(len(prep.segments), np.inf)
    np.minimum.at(best, prep.table.segment, dip)
    path = path_drops_pct(prep.parent, best, np.zeros_like(best))
    lines = []
    for s in np.flatnonzero(path > budget + 1e-9).tolist():
        seg = prep.segments[s]
        lines.append(
            f"motor '{seg.id}': starting drop at best {path[s]:.1f} % (linear estimate, budget "
            f"{budget[s]:.1f} % for a {prep.profile.motor_start_dip_pct:g} % dip) with the "
            f"lowest-impedance conductors; fix: more parallel sets (max_sets), a reduced-"
            f"voltage start (lower start_multiple), a shorter run, or relax --motor-start")
    return lines


def _drop_fixes(seg: Segment, best_pct: float, target_pct: float) -> str:
    cable = seg.node.cable
    fixes = []
    if target_pct <= 0:
        return "shorten the upstream runs or raise the supply voltage"
    ratio = best_pct / target_pct
    # Never suggest more sets than the scenario reader allows (MAX_SETS).
    from sizer.readers import MAX_SETS

    sets = math.ceil(cable.max_sets * ratio)
    if cable.max_sets < MAX_SETS:
        fixes.append(f"more parallel sets (max_sets {cable.max_sets} → {min(sets, MAX_SETS)}"
                     + (", the most allowed; not enough alone)" if sets > MAX_SETS else ")"))
    fixes.append(f"a run of at most {seg.length_m / ratio:.0f} m "
                 f"(now {seg.length_m:.0f} m)")
    fixes.append("a higher circuit voltage")
    return ", or ".join(fixes)


# --- checking a pinned design ---------------------------------------------------------


def check(prep: Prepared, *, engine: str = "auto", solver: str = "cbc",
          time_limit_s: float | None = None) -> Design:
    """Evaluate the design as pinned (unpinned segments filled at least cost) against the rules.

    ``prep`` must come from ``prepare(..., keep_pins=True)`` so that pinned rows breaking
    a rule are still in the table. The status is compliant or violations (from the
    candidate rows only: ``sizer.workflow.check_verified`` adds the load flow's word).
    """
    empty = np.diff(prep.table.offsets) == 0
    if empty.any():
        return empty_design(prep, DesignStatus.INFEASIBLE, "check", tuple(diagnose(prep)))
    problem = build_problem(prep, Objective.CAPEX)
    solution = solve(problem, engine=engine, solver=solver, time_limit_s=time_limit_s)
    if solution.status not in (SolveStatus.OPTIMAL, SolveStatus.BOUNDED):
        # The pins break a path limit: fill the rest without path limits and report.
        relaxed = replace(problem, limit_pct=np.full_like(problem.limit_pct, np.inf),
                          loop_pu=None, loop_limit_pu=None)
        solution = solve(relaxed, engine=engine, solver=solver, time_limit_s=time_limit_s)
    design = design_from_solution(prep, solution, "check", status=DesignStatus.COMPLIANT)
    if not design.segments:
        return design
    found = violations(prep, solution.choice, design)
    return replace(design, status=DesignStatus.VIOLATIONS if found else DesignStatus.COMPLIANT,
                   violations=tuple(found))


def motor_device_violations(profile: RuleProfile, seg: Segment) -> list[Violation]:
    """A motor branch's given device above what the profile allows (NEC 430.52)."""
    motors = profile.motors
    if not seg.motor_branch or seg.ocpd_chosen or motors is None:
        return []
    allowed = branch_device_a(motors, profile.standard_ratings_a, seg.current_a)
    if allowed is None or seg.ocpd_a <= allowed * (1 + REL_TOL):
        return []
    return [Violation(seg.id, "motor device", seg.ocpd_a, allowed,
                      f"a {seg.ocpd_a:g} A device is above the {allowed:g} A allowed for a "
                      f"{seg.current_a:g} A motor ({profile.sources.get('motor_device', '')})")]


def ampacity_violations(seg: Segment, label: str, before_a: float,
                        after_a: float) -> list[Violation]:
    """The two ampacity tests (NEC 210.19(A)(1)(a)/(b), motors 430.22/430.24) as violations."""
    out = []
    if after_a * (1 + REL_TOL) < seg.required_adjusted_a:
        out.append(Violation(seg.id, "ampacity", after_a, seg.required_adjusted_a,
                             f"{label} carries {after_a:.0f} A after adjustment, needs "
                             f"{seg.required_adjusted_a:.0f} A"))
    elif before_a * (1 + REL_TOL) < seg.required_ampacity_a:
        out.append(Violation(seg.id, "ampacity", before_a, seg.required_ampacity_a,
                             f"{label} carries {before_a:.0f} A before adjustment, needs "
                             f"{seg.required_ampacity_a:.0f} A (continuous loads at 125 %)"))
    return out


def violations(prep: Prepared, choice: np.ndarray, design: Design) -> list[Violation]:
    """Every rule the chosen rows break, re-checked from the segment data."""
    out: list[Violation] = []
    t = prep.table
    p = prep.profile
    for s, (seg, res) in enumerate(zip(prep.segments, design.segments, strict=True)):
        r = int(choice[s])
        label = conductor_label(res.sets, res.size, res.material)
        out.extend(ampacity_violations(seg, label, float(t.ampacity_before_a[r]),
                                       float(t.ampacity_a[r])))
        fails = prep.local.pinned_fails[s]
        out.extend(motor_device_violations(prep.profile, seg))
        if "protection" in fails:
            out.append(Violation(seg.id, "protection", float(t.ampacity_a[r]), seg.ocpd_a,
                                 f"a {seg.ocpd_a:.0f} A device does not protect {label}"
                                 + (" (transformer secondary conductors: no next size up, "
                                    "NEC 240.21(C))" if seg.secondary else "")))
        if "small-conductor" in fails:
            out.append(Violation(seg.id, "small conductor", seg.ocpd_a, seg.ocpd_a,
                                 f"a {seg.ocpd_a:.0f} A device is above the small-conductor "
                                 f"limit of {label}"))
        if "parallel" in fails:
            rule = next(k for k in fails.split(" and ") if "parallel" in k)
            out.append(Violation(seg.id, "parallel size", float(res.sets), 1.0,
                                 f"{label}: below the {rule}"))
        own = p.drop_limit_pct(seg.kind)
        if res.vd_pct > own + 1e-9:
            out.append(Violation(seg.id, f"{seg.kind} drop", res.vd_pct, own,
                                 f"own drop {res.vd_pct:.2f} % over {own:g} %"))
        total = float(prep.leaf_limit_pct[s])
        if math.isfinite(total) and res.path_vd_pct > total + 1e-9:
            out.append(Violation(seg.id, "total drop", res.path_vd_pct,
                                 float(prep.leaf_limit_pct[s]),
                                 f"drop from the source {res.path_vd_pct:.2f} % over "
                                 f"{prep.leaf_limit_pct[s]:g} %"))
        fail = 0 if t.build_fail is None else int(t.build_fail[r])
        if fail:
            what = "termination" if fail == 1 else "raceway"
            why = (f"the {seg.ocpd_a:g} A device's terminals do not take it (larger than "
                   f"{res.terminal_max or 'its range'}, or more sets than it has room for) and "
                   f"no reducing splice is allowed or priced" if fail == 1
                   else "no listed raceway size holds it")
            out.append(Violation(seg.id, what, float(res.sets), 0.0,
                                 f"{conductor_label(res.sets, res.size, res.material)}: {why}"))
    return out






# --- motor starting as a second path constraint -------------------------------------------


def motor_start_terms(prep: Prepared) -> tuple[np.ndarray, np.ndarray]:
    """Per-candidate dip (%) under motor starting, and each motor's dip budget (%).

    While a motor starts, its locked-rotor demand S = start_multiple × running VA at the
    starting power factor flows through every segment on its path; each segment adds
    S·(R cosφ + X sinφ)/V² (× 2 for a single-phase loop) and each transformer
    (S/S_rated)(R% cosφ + X% sinφ). A segment shared by several motors is charged with
    the largest starting demand below it, so the constraint is exact for one motor and
    conservative for several. The budget of a motor is the profile's dip limit, turned
    into a linear budget for a constant-impedance locked rotor, less the transformer
    dips on its path; segments without a motor are unconstrained.
    """
    segs = prep.segments
    topo = prep.topology
    own_start = np.full(len(segs), -np.inf)   # each motor's locked-rotor VA
    own_pf = np.ones(len(segs))
    for i, seg in enumerate(segs):
        motor = seg.node.motor
        if motor is not None:
            running = abs(seg.own_load_va) or motor.power_w / seg.power_factor
            own_start[i] = motor.start_multiple * running
            own_pf[i] = motor.start_pf
    is_motor = np.isfinite(own_start)
    # Every segment carries the largest start below it (itself included).
    largest = topo.subtree_argmax(own_start)
    start_va = np.where(largest >= 0, own_start[np.maximum(largest, 0)], 0.0)
    start_pf = np.where(largest >= 0, own_pf[np.maximum(largest, 0)], 1.0)
    # A locked rotor is a constant impedance: with a linear estimate d (per unit) of the
    # path's drop at the full starting demand, the dip is d/(1 + d), so a dip limit L
    # allows d = L/(1 - L).
    limit = prep.profile.motor_start_dip_pct / 100.0
    budget = np.where(is_motor, 100.0 * limit / (1.0 - limit), np.inf)
    # Transformers above each motor take their share of its budget: the motor's start
    # S·(R% cosφ + X% sinφ)/S_rated summed over them, as two path sums of R%/S and X%/S.
    r_per_va = np.array([s.node.transformer.r_pct / s.node.transformer.rating_va
                         if s.node.transformer else 0.0 for s in segs])
    x_per_va = np.array([s.node.transformer.x_pct / s.node.transformer.rating_va
                         if s.node.transformer else 0.0 for s in segs])
    r_above = topo.path_sum(r_per_va) - r_per_va
    x_above = topo.path_sum(x_per_va) - x_per_va
    cos_m = own_pf
    sin_m = np.sqrt(1 - cos_m * cos_m)
    tx_share = np.where(is_motor, own_start, 0.0) * (r_above * cos_m + x_above * sin_m)
    budget = np.where(is_motor, budget - tx_share, np.inf)
    t = prep.table
    s = t.segment
    cos = start_pf[s]
    sin = np.sqrt(1 - cos * cos)
    volts = np.array([seg.voltage_v for seg in segs])[s]
    loop = np.where(np.array([seg.phases for seg in segs])[s] == 1, 2.0, 1.0)
    dip = 100.0 * loop * start_va[s] * (t.r_ohm * cos + t.x_ohm * sin) / volts**2
    return dip, budget

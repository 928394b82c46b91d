"""Earth faults in the optimisation: the disconnection rule's terms, and ways to meet it.

The terms per run (:class:`EarthFaultTerms`, :func:`earth_fault_terms`): U0, the current
that trips its device in time, and the loop-impedance budget its path of cables may use;
the least loop above each run for the adiabatic PE rule (:func:`pe_fault_terms`); the
near-end fault bound and the ``withstand = "enforce"`` filter (:func:`near_fault_bound_a`,
:func:`enforce_withstand`). ``sizer.faults`` holds the pure formulas.

Ways to meet disconnection beyond the phase conductor, added to the candidate table as
ordinary rows so both engines honour them with no engine code:

- a larger protective conductor (EGC / PE), priced: the table sizes it by the profile's
  rule (NEC Table 250.122, CEC Table 16, IEC 60364-5-54 Table 54.2 or 543.1.2), so a
  run whose loop is too long for its device could otherwise only take larger phase
  conductors (:func:`pe_step_rows`, :func:`with_larger_pe`);
- another miniature-breaker curve where the scenario allows it (``curves``): a type B
  breaker disconnects at 5 × In where type C needs 10 × In (IEC 60898-1)
  (:func:`curve_rows`, :func:`with_curves`, :func:`curve_shift_pu`).

Copies are made only for rows at risk of breaking their run's budget, which keeps the
engines' work close to what it was.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from sizer.candidates import (
    PeFaultTerms,
    adiabatic_pe_ok,
    adiabatic_pe_runs,
    build_rows,
    fault_loop_ohm,
    installed_cost,
    segment_arrays,
    take_rows,
    withstand_i2t_a2s,
)
from sizer.catalogue import Catalogue
from sizer.catalogue.prices import PriceList
from sizer.engines.problem import path_totals
from sizer.faults import (
    S_BASE_VA,
    default_device,
    disconnection_time_s,
    loop_pu,
    rows_loop_pu,
    source_loop_ohm,
    trip_current_a,
    trip_multiple,
)
from sizer.model import CandidateTable, Scenario, Segment
from sizer.rules.profile import FaultRule, RuleProfile

__all__ = [
    "CURVE_TIE_BREAK",
    "MAX_PE_STEPS",
    "MINIATURE_CURVES",
    "budget_gain_pu",
    "curve_rows",
    "curve_shift_pu",
    "lower_curves",
    "pe_step_rows",
    "run_device",
    "with_curves",
    "with_larger_pe",
]

MAX_PE_STEPS = 3
"""Largest step (catalogue sizes) above the rule's protective conductor that is offered."""


# --- the terms of the disconnection rule, per run --------------------------------------------


@dataclass(frozen=True)
class EarthFaultTerms:
    """What the disconnection constraint needs per segment (see ``sizer.faults``).

    ``u0_v``: voltage to earth of the run's line conductors; ``trip_a``: the current that
    disconnects its device in time; ``source_pu`` and ``xfmr_pu`` (complex, per unit on
    ``S_BASE_VA`` and each point's U0): the source's share of every loop, and each node's
    transformer's share of the loops below it; ``limit_pu``: the most loop impedance
    the run's own path of cables may add, from c_min · U0 / trip_a less |source| and the
    |transformers| above (magnitudes added: conservative, so a design within it passes
    the complex check).
    """

    u0_v: np.ndarray
    trip_a: np.ndarray
    source_pu: complex
    xfmr_pu: np.ndarray
    limit_pu: np.ndarray
    c_min: float


def near_fault_bound_a(scenario: Scenario, segments: tuple[Segment, ...],
                       profile: RuleProfile) -> np.ndarray:
    """A three-phase fault current no run's near end can exceed, whatever is chosen (A).

    The source's level (or, below a transformer, the transformer's own level on an
    infinite primary, S/(√3·V·z)) plus the locked-rotor current of every running motor
    of the tree as if all were at that bus: cables only lower it, so the bound is
    conservative and needs no choice. Infinite where the source level is not given.
    """
    rule = profile.fault
    motors_va = sum(
        rule.motor_multiple * (abs(seg.own_load_va) or seg.node.motor.power_w
                               / max(seg.power_factor, 1e-6))
        for seg in segments if seg.node.motor is not None and seg.phases == 3)
    src = scenario.source
    src_a = math.inf if src.fault_current_a is None else src.fault_current_a
    bus = [0.0] * len(segments)
    out = np.empty(len(segments))
    for i, seg in enumerate(segments):
        p = seg.parent_index
        feed = src_a + motors_va / (math.sqrt(3.0) * src.voltage_v) if p < 0 else bus[p]
        out[i] = feed
        tx = seg.node.transformer
        if tx is not None:
            bus[i] = (tx.rating_va / (math.sqrt(3.0) * tx.secondary_v * tx.impedance_pct / 100)
                      + motors_va / (math.sqrt(3.0) * tx.secondary_v))
        else:
            bus[i] = feed * (1.0 if seg.phases == 3 else math.sqrt(3.0))  # L-N: √3 I at U0
    return out


def enforce_withstand(scenario: Scenario, segments: tuple[Segment, ...],
                      profile: RuleProfile, catalogue: Catalogue, prices: PriceList,
                      table: CandidateTable, *, keep_pins: bool = False
                      ) -> tuple[CandidateTable, np.ndarray]:
    """Drop the rows of ``withstand = "enforce"`` runs that fail the adiabatic withstand.

    Segment-local: each row's I²t (``withstand_i2t_a2s``) against the device's
    let-through, or against ``near_fault_bound_a``² × clearing time. Returns the table
    and the rows removed per segment.
    """
    bound = near_fault_bound_a(scenario, segments, profile)
    seg_of = table.segment
    enforce = np.array([s.node.withstand == "enforce" for s in segments])[seg_of]
    rows = np.flatnonzero(enforce)
    i2t, _ = withstand_i2t_a2s(profile, catalogue, prices, segments, table, rows)
    need = np.array([
        s.node.let_through_a2s if s.node.let_through_a2s is not None
        else bound[i] ** 2 * (s.node.clearing_time_s or profile.default_clearing_time_s)
        for i, s in enumerate(segments)])[seg_of[rows]]
    keep = np.ones(len(table), dtype=bool)
    keep[rows] = ~(i2t < need)  # an infinite need (no source level) is never met
    if keep_pins:
        pinned = np.array([s.node.pin is not None for s in segments])[seg_of]
        keep |= pinned
    removed = np.bincount(seg_of[~keep], minlength=len(segments))
    return take_rows(table, keep), removed


def pe_fault_terms(segments: tuple[Segment, ...], profile: RuleProfile,
                   earth: EarthFaultTerms, parent: np.ndarray) -> PeFaultTerms:
    """What the adiabatic PE rule needs: least loop above each run, its U0 and time.

    The source and every transformer strictly above the run (complex, referred to the
    run's U0 from the common per-unit base); the disconnection time of IEC 60364-4-41
    Table 41.1 for the run (``sizer.faults.disconnection_time_s``).
    """
    above = np.zeros(len(segments), dtype=np.complex128)
    for i in range(len(segments)):
        p = int(parent[i])
        above[i] = earth.source_pu if p < 0 else above[p] + earth.xfmr_pu[p]
    time = np.array([disconnection_time_s(seg.ocpd_a, seg.is_leaf, profile.fault)
                     for seg in segments])
    return PeFaultTerms(above * earth.u0_v**2 / S_BASE_VA, earth.u0_v, time, earth.c_min)


def earth_voltages_v(scenario: Scenario, segments: tuple[Segment, ...]) -> np.ndarray:
    """U0 of every run: the voltage to earth of its line conductors (V).

    The neutral voltage of the bus feeding it (V/√3 on a three-phase bus, V/2 on a
    centre-tapped single-phase one), or the circuit voltage where the bus has none.
    """
    def neutral(volts: float, phases: int) -> float:
        return volts / math.sqrt(3.0) if phases == 3 else volts / 2.0

    src = scenario.source
    bus = [0.0] * len(segments)  # neutral voltage of each node's own bus (0: none)
    u0 = np.empty(len(segments))
    for i, seg in enumerate(segments):
        p = seg.parent_index
        feed = neutral(src.voltage_v, src.phases) if p < 0 else bus[p]
        u0[i] = feed if feed > 0 else seg.voltage_v
        tx = seg.node.transformer
        if tx is not None:
            bus[i] = neutral(tx.secondary_v, tx.secondary_phases)
        elif seg.phases == 3:
            bus[i] = neutral(seg.voltage_v, 3)
        elif seg.line_to_neutral:
            bus[i] = 0.0
        else:
            bus[i] = feed if 0 < feed < seg.voltage_v else 0.0
    return u0


def earth_fault_terms(scenario: Scenario, segments: tuple[Segment, ...],
                      profile: RuleProfile, parent: np.ndarray) -> EarthFaultTerms:
    """Per-segment U0, trip current and loop-impedance budget of the disconnection rule."""
    rule = profile.fault
    src = scenario.source
    n = len(segments)
    u0 = earth_voltages_v(scenario, segments)
    trip = np.array([trip_current_a(seg.node.device or default_device(seg.ocpd_a, rule),
                                    seg.ocpd_a, seg.is_leaf, rule, seg.node.trip_multiple)
                     for seg in segments])
    src_u0 = src.voltage_v / (math.sqrt(3.0) if src.phases == 3 else 2.0)
    z_src = source_loop_ohm(src.fault_current_a, src.voltage_v, src.phases, src.x_r,
                            rule.c_max)
    source_pu = complex(loop_pu(z_src, src_u0, S_BASE_VA))
    xfmr = np.zeros(n, dtype=np.complex128)
    for i, seg in enumerate(segments):
        tx = seg.node.transformer
        if tx is None:
            continue
        # Zero sequence equal to positive (a Dyn transformer, common practice): the loop
        # share is the per-phase impedance, ohm at the secondary.
        z_ohm = tx.impedance_pct / 100.0 * tx.secondary_v**2 / tx.rating_va
        sec_u0 = tx.secondary_v / (math.sqrt(3.0) if tx.secondary_phases == 3 else 2.0)
        angle = math.atan(tx.x_r)
        z = complex(z_ohm * math.cos(angle), z_ohm * math.sin(angle))
        xfmr[i] = complex(loop_pu(z, sec_u0, S_BASE_VA))
    above = path_totals(parent, np.abs(xfmr)) - np.abs(xfmr)  # transformers strictly above
    allowed = rule.c_min * S_BASE_VA / (u0 * trip)
    limit = allowed - abs(source_pu) - above
    return EarthFaultTerms(u0, trip, source_pu, xfmr, limit, rule.c_min)


def with_curve_budgets(earth: EarthFaultTerms, table: CandidateTable) -> EarthFaultTerms:
    """The terms with each run's budget set for the lowest trip current any row offers.

    Rows on another breaker curve (``sizer.earthfault``) carry their own trip current;
    the run's ``trip_a`` and ``limit_pu`` become those of the lowest, and rows tripping
    higher add ``curve_shift_pu`` to their loop (``loop_pu_of_rows``).
    """
    if table.trip_a is None:
        return earth
    trip = earth.trip_a.copy()
    np.minimum.at(trip, table.segment, table.trip_a)
    return replace(earth, trip_a=trip, limit_pu=earth.limit_pu + budget_gain_pu(
        earth.c_min, earth.u0_v, earth.trip_a, trip))


# --- a larger protective conductor ---------------------------------------------------------


def _context(segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue):
    sa = segment_arrays(segments, profile, catalogue)
    inst_names = sorted(set(sa.installation))
    inst_code = np.array([inst_names.index(name) for name in sa.installation], dtype=np.int64)
    return sa, inst_names, inst_code


def _loops_around(table: CandidateTable, u0_v: np.ndarray, limit_pu: np.ndarray,
                  parent: np.ndarray, shift_pu: np.ndarray | float = 0.0
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per row: its own loop (pu), and the most and least loop above its run (pu).

    The most is what any feasible design can have above the run: the path to its parent
    within the parent's own budget, whatever the rows above could add; the least is the
    path of the least-loop rows. ``shift_pu`` is added to the own loops (curve rows).
    """
    n = parent.size
    seg = table.segment
    own = rows_loop_pu(table.loop_ohm, u0_v, seg, S_BASE_VA) + shift_pu
    # a run's rows are consecutive: its most and least by one reduction over each run
    has = np.diff(table.offsets) > 0
    first = table.offsets[:-1][has]
    most = np.zeros(n)
    least = np.full(n, np.inf)
    if first.size:
        most[has] = np.maximum(np.maximum.reduceat(own, first), 0.0)
        least[has] = np.minimum.reduceat(own, first)
    least[~np.isfinite(least)] = 0.0  # a run with no rows: diagnosed elsewhere
    reach = np.empty(n)
    for i, p in enumerate(parent.tolist()):
        reach[i] = min(limit_pu[i], most[i] + (reach[p] if p >= 0 else 0.0))
    most_above = np.array([reach[p] if p >= 0 else 0.0 for p in parent.tolist()])[seg]
    least_above = (path_totals(parent, least) - least)[seg]
    # Where even the least loop breaks a budget above, no design is feasible (diagnosed
    # elsewhere); the most above is then never taken below the least.
    return own, np.maximum(most_above, least_above), least_above


def pe_step_rows(segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue,
                 table: CandidateTable, u0_v: np.ndarray, limit_pu: np.ndarray,
                 parent: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows that get a copy with a larger protective conductor, and its size index.

    A row is at risk when its own loop plus the most loop any feasible choice above can
    add (the path to its parent within the parent's own budget) breaks its run's budget
    (``limit_pu``, see :class:`EarthFaultTerms`); a row safe even then never needs a
    larger PE. At-risk rows of final runs (leaves) get copies; those of feeders only when
    they fail even under the least loop above. The copies' PE runs from the smallest
    step with which the row meets its budget under the least loop above to the smallest
    with which it is safe under any feasible choice above (at most ``MAX_PE_STEPS``
    sizes above the rule's PE, and never above the phase conductor): between them the
    choice above decides, so the engines weigh them; none when no step helps. Service
    conductors and pinned runs get none (a pin names the row to check). Returns (row, PE
    size index) pairs, a row once per step.
    """
    sa, inst_names, inst_code = _context(segments, profile, catalogue)
    seg = table.segment
    own, most_above, least_above = _loops_around(table, u0_v, limit_pu, parent)
    limit = limit_pu[seg] * (1 - 1e-9)
    pinned = np.array([s.node.pin is not None for s in segments], dtype=bool)
    rows = np.flatnonzero(np.isfinite(limit) & ~pinned[seg] & ~sa.service[seg]
                          & (own + most_above > limit)
                          & (table.egc_size_index < table.size_index))
    # A feeder's protective conductor enters every loop below it, so its copies multiply
    # the trade-offs the engines weigh: a feeder row gets one only when it cannot meet
    # its own budget even under the least loop above (else it is unusable anyway).
    final = np.array([s.is_leaf for s in segments], dtype=bool)[seg[rows]]
    rows = rows[final | (own + least_above > limit)[rows]]
    safe = np.full(rows.size, -1, dtype=np.int64)
    meets = np.full(rows.size, -1, dtype=np.int64)
    # never above the phase conductor: a PE core as large as the line cores is the most
    # a cable carries (IEC 60364-5-54 Table 54.2 stops there; NEC 250.122(A) asks no more)
    most_pe = table.size_index[rows]
    for step in range(1, MAX_PE_STEPS + 1):
        egc = table.egc_size_index[rows] + step
        fits = egc <= most_pe
        egc = np.minimum(egc, most_pe)
        r = seg[rows]
        z = fault_loop_ohm(profile, catalogue, sa, inst_names, inst_code, r,
                           table.material[rows], table.size_index[rows], egc,
                           table.sets[rows], sa.length_m[r])
        pu = np.abs(loop_pu(z, u0_v[r], S_BASE_VA))
        safe = np.where((safe < 0) & fits & (pu + most_above[rows] <= limit[rows]), egc, safe)
        meets = np.where((meets < 0) & fits & (pu + least_above[rows] <= limit[rows]), egc,
                         meets)
    # every step from the least that can meet the budget to the least that always does
    lo = meets
    hi = np.where(safe >= 0, safe, np.where(meets >= 0, table.egc_size_index[rows]
                                            + MAX_PE_STEPS, -1))
    hi = np.minimum(hi, most_pe)
    count = np.where(lo >= 0, hi - lo + 1, 0)
    out_rows = np.repeat(rows, count)
    first = np.repeat(lo, count)
    within = np.arange(out_rows.size) - np.repeat(np.cumsum(count) - count, count)
    return out_rows, first + within


def with_larger_pe(segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue,
                   prices: PriceList, table: CandidateTable, rows: np.ndarray,
                   egc: np.ndarray, pe_fault: PeFaultTerms | None) -> CandidateTable:
    """The table plus a copy of ``rows[i]`` with protective conductor size ``egc[i]``.

    Each copy is priced (conductor, terminations, raceway: a larger EGC may need a
    larger conduit) and its loop recomputed; everything else is its row's. A copy that
    cannot be built, or whose PE fails the adiabatic rule where the run uses it, is
    left out. Rows of a segment stay together, the originals before their copies. The
    table's ``pe_step`` says how many sizes each row's PE stands above the rule's.
    """
    if rows.size == 0:
        return table
    sa, inst_names, inst_code = _context(segments, profile, catalogue)
    seg, mat = table.segment[rows], table.material[rows]
    size, sets = table.size_index[rows], table.sets[rows]
    build = build_rows(profile, prices, sa, seg, mat, size, sets, egc)
    length = sa.length_m[seg]
    neutral = (table.neutral_size_index[rows] if table.neutral_size_index is not None
               else size)
    capex = (installed_cost(prices, length, sa.conductors[seg], mat, size, sets, egc,
                            neutral_size=np.where(sa.own_neutral[seg], neutral, -1))
             + build.termination_capex + build.raceway_capex)
    ok = build.ok & np.isfinite(capex)
    adiabatic = adiabatic_pe_runs(segments, profile)[seg]
    if adiabatic.any() and pe_fault is not None:
        ok[adiabatic] &= adiabatic_pe_ok(
            profile, catalogue, prices, segments, sa, inst_names, inst_code, seg[adiabatic],
            mat[adiabatic], size[adiabatic], sets[adiabatic], egc[adiabatic], pe_fault)
    keep = np.flatnonzero(ok)
    if keep.size == 0:
        return table
    m = len(table)
    step = np.zeros(m, dtype=np.int8) if table.pe_step is None else table.pe_step
    src = rows[keep]
    changes = {
        "egc_size_index": egc[keep], "capex": capex[keep],
        "pe_step": step[src] + egc[keep] - table.egc_size_index[src],
        "loop_ohm": fault_loop_ohm(profile, catalogue, sa, inst_names, inst_code, seg[keep],
                                   mat[keep], size[keep], egc[keep], sets[keep],
                                   length[keep]),
        "terminal_max": build.terminal_max[keep], "splice_ends": build.splice_ends[keep],
        "termination_capex": build.termination_capex[keep],
        "raceway_size": build.raceway_size[keep], "raceway_capex": build.raceway_capex[keep],
        "build_fail": np.zeros(keep.size, dtype=np.int64),
    }
    return _append_rows(table, src, changes, {"pe_step": step})


def _append_rows(table: CandidateTable, src: np.ndarray, changes: dict[str, np.ndarray],
                 added: dict[str, np.ndarray]) -> CandidateTable:
    """The table plus copies of rows ``src`` with the columns in ``changes`` replaced.

    ``added`` are columns the table gains (a value for every original row). Columns the
    table does not have (None) stay absent. Rows of a segment stay together, the
    originals first (a stable order). The table passed in is taken over (left empty):
    its columns are let go one by one as they are copied, so that at most one column
    exists twice.
    """
    m = len(table)
    # Each copy goes after the last original row of its segment, copies of a segment in
    # the order given: one mask of where the originals land serves every column.
    seg_of_copy = table.segment[src]
    order = np.argsort(seg_of_copy, kind="stable")
    at = table.offsets[seg_of_copy[order] + 1] + np.arange(order.size)
    original = np.ones(m + order.size, dtype=bool)
    original[at] = False
    counts = np.diff(table.offsets) + np.bincount(seg_of_copy, minlength=table.offsets.size - 1)
    fields_of = {**table.hand_over(), **added}
    fields_of["offsets"] = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    for name in list(fields_of):
        col = fields_of[name]
        if name == "offsets" or not isinstance(col, np.ndarray) or col.shape[:1] != (m,):
            continue
        new = changes[name].astype(col.dtype, copy=False) if name in changes else col[src]
        out = np.empty(m + order.size, dtype=col.dtype)
        out[original] = col
        out[at] = new[order]
        fields_of[name] = out
        del col, new
    return CandidateTable(**fields_of)


# --- another miniature-breaker curve --------------------------------------------------------

CURVE_TIE_BREAK = 1e-3
"""Objective cost (currency units) of a curve other than the run's own device: among
designs of equal cost the run keeps its device (the price list prices no curves)."""

MINIATURE_CURVES = ("B", "C", "D")


def run_device(seg: Segment, rule: FaultRule) -> str:
    """The run's own overcurrent device: the node's, else the profile's by rating."""
    return seg.node.device or default_device(seg.ocpd_a, rule)


def lower_curves(segments: tuple[Segment, ...], rule: FaultRule) -> list[tuple[str, ...]]:
    """Per segment: the allowed curves that trip below the run's own device's.

    Final circuits (leaves) only, whose device is a miniature breaker (IEC 60898-1 B,
    C, D), with ``curves`` given and no ``trip_multiple``; pinned runs get none. A leaf's
    loop enters no other run's, so its curve is its own business (see :func:`curve_shift_pu`).
    """
    out: list[tuple[str, ...]] = []
    for seg in segments:
        device = run_device(seg, rule)
        if (not seg.is_leaf or seg.node.curves is None or seg.node.trip_multiple is not None
                or device not in MINIATURE_CURVES or seg.node.pin is not None):
            out.append(())
            continue
        own = trip_multiple(device, seg.ocpd_a, seg.is_leaf, rule)
        out.append(tuple(c for c in seg.node.curves
                         if trip_multiple(c, seg.ocpd_a, seg.is_leaf, rule) < own))
    return out


def curve_rows(segments: tuple[Segment, ...], rule: FaultRule, table: CandidateTable,
               u0_v: np.ndarray, trip_a: np.ndarray, limit_pu: np.ndarray,
               parent: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows that get a copy on a lower breaker curve, and the curve of each copy.

    A row at risk under its run's own device (as for the PE, :func:`pe_step_rows`) gets
    one copy per allowed lower curve with which it meets its budget under the least loop
    above; a row safe under its own device never needs another curve.
    """
    lower = lower_curves(segments, rule)
    if not any(lower):
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype="<U1")
    seg = table.segment
    own, most_above, least_above = _loops_around(table, u0_v, limit_pu, parent)
    offered = np.array([bool(c) for c in lower])
    rows = np.flatnonzero(offered[seg] & np.isfinite(limit_pu[seg])
                          & (own + most_above > limit_pu[seg] * (1 - 1e-9)))
    out_rows: list[int] = []
    out_curves: list[str] = []
    for r in rows.tolist():
        s = int(seg[r])
        for curve in lower[s]:
            trip = trip_current_a(curve, segments[s].ocpd_a, True, rule)
            limit = limit_pu[s] + budget_gain_pu(rule.c_min, u0_v[s], trip_a[s], trip)
            if own[r] + least_above[r] <= limit * (1 - 1e-9):
                out_rows.append(r)
                out_curves.append(curve)
    return np.array(out_rows, dtype=np.int64), np.array(out_curves, dtype="<U1")


def budget_gain_pu(c_min: float, u0_v: float | np.ndarray, trip_from_a: float | np.ndarray,
                    trip_to_a: float | np.ndarray) -> np.ndarray:
    """More loop (pu) a device tripping at ``trip_to_a`` allows than one at ``trip_from_a``.

    c_min · S / U0 · (1/I_to − 1/I_from), from IEC 60364-4-41 Zs · Ia ≤ U0.
    """
    return np.asarray(c_min * S_BASE_VA / u0_v * (1.0 / np.asarray(trip_to_a)
                                                  - 1.0 / np.asarray(trip_from_a)))


def with_curves(segments: tuple[Segment, ...], rule: FaultRule, table: CandidateTable,
                rows: np.ndarray, curves: np.ndarray, trip_a: np.ndarray) -> CandidateTable:
    """The table plus a copy of ``rows[i]`` on breaker curve ``curves[i]``.

    Every row then has a ``curve`` ("" for the run's own device) and a ``trip_a``.
    """
    if rows.size == 0:
        return table
    m = len(table)
    trip = np.array([trip_current_a(c, segments[s].ocpd_a, True, rule)
                     for s, c in zip(table.segment[rows].tolist(), curves.tolist(),
                                     strict=True)])
    return _append_rows(table, rows, {"curve": curves, "trip_a": trip},
                        {"curve": np.full(m, "", dtype="<U1"),
                         "trip_a": np.asarray(trip_a, dtype=float)[table.segment]})


def curve_shift_pu(table: CandidateTable, u0_v: np.ndarray, c_min: float,
                   seg_trip_a: np.ndarray) -> np.ndarray | float:
    """Per row: loop (pu) added so that one budget per run serves rows of every curve.

    The run's budget is set for its lowest trip current (``seg_trip_a``); a row on a
    device tripping higher meets its own budget exactly when its loop plus this shift
    meets the run's. Exact for final circuits: no other run's loop includes theirs.
    0 when no row has another curve.
    """
    if table.trip_a is None:
        return 0.0
    seg = table.segment
    return budget_gain_pu(c_min, u0_v[seg], table.trip_a, seg_trip_a[seg])

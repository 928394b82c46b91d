"""Ways to meet the disconnection rule beyond the phase conductor: a larger protective conductor.

The earth-fault loop of a run is its line conductor plus its protective conductor (EGC /
PE, ``sizer.faults``). The candidate table sizes the protective conductor by the
profile's rule (NEC Table 250.122, CEC Table 16, IEC 60364-5-54 Table 54.2 or 543.1.2),
so a run whose loop is too long for its device to trip in time could only be fixed by
larger phase conductors. A larger protective conductor alone is often cheaper (the
issue's "a larger EGC/PE (priced)"): :func:`pe_step_rows` picks the few rows where it
can matter and the step that does, :func:`with_larger_pe` adds them to the table as
ordinary rows (priced, their loop recomputed), so both engines see them with no engine
code.
"""

from __future__ import annotations

from dataclasses import fields, replace

import numpy as np

from sizer.candidates import (
    PeFaultTerms,
    adiabatic_pe_ok,
    adiabatic_pe_runs,
    build_rows,
    fault_loop_ohm,
    installed_cost,
    segment_arrays,
)
from sizer.catalogue import Catalogue
from sizer.catalogue.prices import PriceList
from sizer.engines.problem import path_totals
from sizer.faults import S_BASE_VA, loop_pu
from sizer.model import CandidateTable, Segment
from sizer.rules.profile import RuleProfile

__all__ = ["MAX_PE_STEPS", "pe_step_rows", "with_larger_pe"]

MAX_PE_STEPS = 3
"""Largest step (catalogue sizes) above the rule's protective conductor that is offered."""


def _context(segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue):
    sa = segment_arrays(segments, profile, catalogue)
    inst_names = sorted(set(sa.installation))
    inst_code = np.array([inst_names.index(name) for name in sa.installation], dtype=np.int64)
    return sa, inst_names, inst_code


def pe_step_rows(segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue,
                 table: CandidateTable, u0_v: np.ndarray, limit_pu: np.ndarray,
                 parent: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows that get a copy with a larger protective conductor, and its size index.

    A row is at risk when its own loop plus the most loop any feasible choice above can
    add (the path to its parent within the parent's own budget) breaks its run's budget
    (``limit_pu``, see ``optimize.EarthFaultTerms``); a row safe even then never needs a
    larger PE. At-risk rows of final runs (leaves) get copies; those of feeders only when
    they fail even under the least loop above. The copies' PE runs from the smallest
    step with which the row meets its budget under the least loop above to the smallest
    with which it is safe under any feasible choice above (at most ``MAX_PE_STEPS``
    sizes above the rule's PE, and never above the phase conductor): between them the
    choice above decides, so the engines weigh them; none when no step helps. Service
    conductors and pinned runs get none (a pin names the row to check). Returns (row, PE
    size index) pairs, a row once per step.
    """
    n = len(segments)
    sa, inst_names, inst_code = _context(segments, profile, catalogue)
    seg = table.segment
    own = np.abs(loop_pu(table.loop_ohm, u0_v[seg], S_BASE_VA))
    most = np.zeros(n)
    np.maximum.at(most, seg, own)
    least = np.full(n, np.inf)
    np.minimum.at(least, seg, own)
    least[~np.isfinite(least)] = 0.0  # a run with no rows: diagnosed elsewhere
    # The most loop any feasible design can have above each run: the path to its parent
    # within the parent's own budget, whatever the rows above could add.
    reach = np.empty(n)
    for i, p in enumerate(parent.tolist()):
        reach[i] = min(limit_pu[i], most[i] + (reach[p] if p >= 0 else 0.0))
    most_above = np.array([reach[p] if p >= 0 else 0.0 for p in parent.tolist()])[seg]
    least_above = (path_totals(parent, least) - least)[seg]
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
    step = np.zeros(m, dtype=np.int64) if table.pe_step is None else table.pe_step
    table = replace(table, pe_step=step)
    columns = {f.name: getattr(table, f.name) for f in fields(table)
               if isinstance(getattr(table, f.name), np.ndarray) and f.name != "offsets"
               and getattr(table, f.name).shape[:1] == (m,)}
    copy = {name: col[rows[keep]] for name, col in columns.items()}
    copy.update(
        egc_size_index=egc[keep], capex=capex[keep],
        pe_step=step[rows[keep]] + egc[keep] - table.egc_size_index[rows[keep]],
        loop_ohm=fault_loop_ohm(profile, catalogue, sa, inst_names, inst_code, seg[keep],
                                mat[keep], size[keep], egc[keep], sets[keep], length[keep]))
    for name, value in (("terminal_max", build.terminal_max),
                        ("splice_ends", build.splice_ends),
                        ("termination_capex", build.termination_capex),
                        ("raceway_size", build.raceway_size),
                        ("raceway_capex", build.raceway_capex)):
        if name in copy:
            copy[name] = value[keep].astype(copy[name].dtype, copy=False)
    if "build_fail" in copy:
        copy["build_fail"] = np.zeros(keep.size, dtype=copy["build_fail"].dtype)
    segment = np.concatenate([table.segment, copy["segment"]])
    order = np.argsort(segment, kind="stable")
    merged = {name: np.concatenate([col, copy[name]])[order] for name, col in columns.items()}
    counts = np.bincount(segment[order], minlength=table.offsets.size - 1)
    offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    return replace(table, offsets=offsets, **merged)  # type: ignore[arg-type]

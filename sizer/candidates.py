"""The candidate table: one row per segment × material × size × parallel sets.

Every row that passes the segment-local rules (ampacity, protection by the device,
small-conductor limits, minimum size for parallel sets, the segment's own drop limit)
is kept with its operating temperature, impedance, drop, peak loss, equipment grounding
conductor, upfront cost and loss present value. Built in one numpy pass over the grid;
the only Python loops run over the few distinct (material, settings) groups.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace

import numpy as np

from sizer.catalogue import Catalogue
from sizer.catalogue.prices import PriceList
from sizer.conductors import (
    adiabatic_withstand_a,
    impedance_ohm_per_m,
    operating_temperature_c,
)
from sizer.drop import drop_pct, transformer_regulation_pct
from sizer.errors import ScenarioError
from sizer.faults import default_device, pe_impedance_ohm
from sizer.model import CandidateTable, Segment
from sizer.rules.ampacity import ambient_factor, ampacity_a, grouping_factor, table_ampacity_a
from sizer.rules.profile import RuleProfile
from sizer.rules.protection import (
    egc_size_index_of_sizes,
    min_parallel_ok,
    overload_factor,
    protects,
    small_conductor_ok,
    terminal_temperature_c,
)
from sizer.units import MATERIALS


@dataclass(frozen=True)
class SegmentArrays:
    """Per-segment inputs of the candidate table as SI arrays (index = segment)."""

    length_m: np.ndarray
    current_a: np.ndarray
    required_a: np.ndarray
    ocpd_a: np.ndarray
    power_factor: np.ndarray
    voltage_v: np.ndarray
    phases: np.ndarray
    conductors: np.ndarray      # phase + neutral conductors per set (EGC apart)
    grouping: np.ndarray        # current-carrying conductors per raceway
    ambient_c: np.ndarray
    insulation_c: np.ndarray
    terminal_c: np.ndarray      # NaN: the profile's terminal rule decides
    installation: tuple[str, ...]
    max_sets: np.ndarray
    allowed: np.ndarray         # bool [n, 2]: material allowed (Cu, Al)
    pin_material: np.ndarray    # -1 none
    pin_size: np.ndarray        # -1 none
    pin_sets: np.ndarray        # -1 none
    own_limit_pct: np.ndarray
    overload_factor: np.ndarray  # share of Iz the device may be rated at (IEC 60364-4-43)


def conductors_per_set(phases: np.ndarray, neutral: np.ndarray) -> np.ndarray:
    """Phase and neutral conductors in one parallel set (the EGC apart): 2, 3 or 4."""
    return np.where(phases == 1, 2, 3 + neutral.astype(np.int64))


def installed_cost(prices: PriceList, length_m: np.ndarray, conductors: np.ndarray,
                   mat: np.ndarray, size: np.ndarray, sets: np.ndarray,
                   egc: np.ndarray) -> np.ndarray:
    """Upfront cost of each row: per set, its conductors and EGC bought and pulled."""
    def pick(table_cu: np.ndarray, table_al: np.ndarray, k: np.ndarray) -> np.ndarray:
        return np.where(mat == 0, table_cu[k], table_al[k])

    cu, al = prices.conductor("Cu"), prices.conductor("Al")
    per_set = (conductors * pick(cu, al, size) + pick(cu, al, egc)
               + pick(prices.labour("Cu"), prices.labour("Al"), size))
    return length_m * sets * per_set


def segment_arrays(
    segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue
) -> SegmentArrays:
    """Gather the per-segment inputs from the model into arrays."""
    n = len(segments)
    pin_m = np.full(n, -1, dtype=np.int64)
    pin_k = np.full(n, -1, dtype=np.int64)
    pin_s = np.full(n, -1, dtype=np.int64)
    allowed = np.zeros((n, 2), dtype=bool)
    for s, seg in enumerate(segments):
        cable = seg.node.cable
        for m, name in enumerate(MATERIALS):
            allowed[s, m] = name in cable.materials
        if (pin := seg.node.pin) is not None:
            pin_m[s] = MATERIALS.index(pin.material)
            pin_k[s] = catalogue.index(pin.size)
            pin_s[s] = pin.sets
            allowed[s, pin_m[s]] = True
    phases = np.array([seg.phases for seg in segments], dtype=np.int64)
    neutral = np.array([seg.neutral for seg in segments], dtype=bool)
    conductors = conductors_per_set(phases, neutral)
    default_grouping = np.where(phases == 1, 2, 3)
    grouping = np.array(
        [seg.node.cable.grouping or 0 for seg in segments], dtype=np.int64
    )
    kind_limit = {"branch": profile.drop_branch_pct, "feeder": profile.drop_feeder_pct}
    return SegmentArrays(
        length_m=np.array([seg.length_m for seg in segments], dtype=float),
        current_a=np.array([seg.current_a for seg in segments], dtype=float),
        required_a=np.array([seg.required_ampacity_a for seg in segments], dtype=float),
        ocpd_a=np.array([seg.ocpd_a for seg in segments], dtype=float),
        power_factor=np.array([seg.power_factor for seg in segments], dtype=float),
        voltage_v=np.array([seg.voltage_v for seg in segments], dtype=float),
        phases=phases,
        conductors=conductors,
        grouping=np.where(grouping > 0, grouping, default_grouping),
        ambient_c=np.array([seg.node.cable.ambient_c for seg in segments], dtype=float),
        insulation_c=np.array([seg.node.cable.insulation_c for seg in segments], dtype=float),
        terminal_c=np.array(
            [math.nan if seg.node.cable.terminals_c is None else seg.node.cable.terminals_c
             for seg in segments], dtype=float),
        installation=tuple(seg.node.cable.installation for seg in segments),
        max_sets=np.array([seg.node.cable.max_sets for seg in segments], dtype=np.int64),
        allowed=allowed,
        pin_material=pin_m,
        pin_size=pin_k,
        pin_sets=pin_s,
        own_limit_pct=np.array([kind_limit[seg.kind] for seg in segments], dtype=float),
        overload_factor=np.array([
            overload_factor(profile, seg.node.device or default_device(seg.ocpd_a,
                                                                        profile.fault),
                            seg.ocpd_a) for seg in segments]),
    )


@dataclass(frozen=True)
class LocalDiagnosis:
    """Why segments have no candidate: per segment, the best that the catalogue allows."""

    best_ampacity_a: np.ndarray      # largest ampacity of any allowed row
    best_drop_pct: np.ndarray        # lowest own drop among rows that carry the current
    best_label: tuple[str, ...]      # the row that gives best_drop_pct, as the trade writes it
    pinned_fails: tuple[str, ...]    # per segment: the rules a pinned conductor breaks ("" none)


def _grid(sa: SegmentArrays, n_sizes: int) -> tuple[np.ndarray, ...]:
    """Index arrays of every allowed (segment, material, size, sets) combination."""
    n = sa.length_m.shape[0]
    s_max = int(sa.max_sets.max(initial=1))
    s_max = max(s_max, int(sa.pin_sets.max(initial=1)))
    seg, mat, size, sets = np.meshgrid(
        np.arange(n), np.arange(2), np.arange(n_sizes), np.arange(1, s_max + 1),
        indexing="ij",
    )
    seg, mat, size, sets = (a.ravel() for a in (seg, mat, size, sets))
    pinned = sa.pin_material[seg] >= 0
    keep = np.where(
        pinned,
        (mat == sa.pin_material[seg]) & (size == sa.pin_size[seg]) & (sets == sa.pin_sets[seg]),
        sa.allowed[seg, mat] & (sets <= sa.max_sets[seg]),
    )
    return seg[keep], mat[keep], size[keep], sets[keep]


def transformer_drops_pct(segments: tuple[Segment, ...]) -> np.ndarray:
    """Regulation of each node's transformer at its demand (0 where none), in %."""
    out = np.zeros(len(segments))
    for s, seg in enumerate(segments):
        tx = seg.node.transformer
        if tx is None:
            continue
        # The transformer carries the demand of its secondary; its own losses are small.
        load_fraction = abs(seg.demand_va) / tx.rating_va
        out[s] = transformer_regulation_pct(
            load_fraction, tx.impedance_pct, tx.x_r, seg.power_factor
        )
    return out


def build_candidates(
    segments: tuple[Segment, ...],
    profile: RuleProfile,
    catalogue: Catalogue,
    prices: PriceList,
    loss_pv_per_w: float,
    *,
    keep_pins: bool = False,
) -> tuple[CandidateTable, LocalDiagnosis]:
    """Every compliant candidate of every segment, and what the rejected rows could reach.

    With ``keep_pins`` a pinned row stays in the table even when it breaks a
    segment-local rule (``sizer check`` reports it as a violation).
    """
    sa = segment_arrays(segments, profile, catalogue)
    n = len(segments)
    seg, mat, size, sets = _grid(sa, len(catalogue.sizes))
    inst_names = sorted(set(sa.installation))
    inst_code = np.array([inst_names.index(name) for name in sa.installation], dtype=np.int64)

    # --- ampacity per set (code) and the thermal rating behind the temperature ----------
    # Settings vary by segment, not by row: tabulate each distinct (settings, material,
    # terminal column) over all sizes once, then look rows up in the tables.
    amp_set, thermal_set = _ampacity_lookup(profile, sa, inst_names, inst_code, seg, mat, size,
                                            len(catalogue.sizes))
    ampacity = amp_set * sets
    ocpd = sa.ocpd_a[seg]

    valid = np.isfinite(ampacity) & (ampacity > 0)
    carries = valid & (ampacity >= sa.required_a[seg] - 1e-9)
    protected = protects(profile, np.where(valid, ampacity, 0.0) * sa.overload_factor[seg],
                         ocpd)
    small_ok = _by_material(mat, lambda m, mask: small_conductor_ok(
        profile, MATERIALS[m], size[mask], ocpd[mask]), dtype=bool)
    parallel_ok = min_parallel_ok(profile, size, sets)
    code_ok = carries & protected & small_ok & parallel_ok

    # --- temperature, impedance, drop ---------------------------------------------------
    current = sa.current_a[seg]
    temp_c = operating_temperature_c(
        sa.ambient_c[seg], sa.insulation_c[seg], current,
        np.where(valid, thermal_set * sets, np.inf),
    )
    r_m = np.empty(seg.shape[0])
    x_m = np.empty(seg.shape[0])
    imp_code = inst_code[seg] * 2 + mat
    for code in np.unique(imp_code).tolist():
        mask = imp_code == code
        r_m[mask], x_m[mask] = impedance_ohm_per_m(
            catalogue, MATERIALS[code % 2], size[mask], temp_c[mask],
            inst_names[code // 2], profile.frequency_hz,
        )
    length = sa.length_m[seg]
    vd = drop_pct(current, length, r_m, x_m, sa.power_factor[seg], sa.phases[seg],
                  sa.voltage_v[seg], sets)
    drop_ok = vd <= sa.own_limit_pct[seg] + 1e-12

    pinned = sa.pin_material[seg] >= 0
    keep = code_ok & drop_ok
    if keep_pins:
        keep |= pinned & valid

    diagnosis = _diagnose(n, seg, mat, size, sets, ampacity, vd, carries & protected & small_ok
                          & parallel_ok, pinned, code_ok, drop_ok, catalogue)

    # --- EGC: by the device, grown with the phase conductors (NEC 250.122(B)) -----------
    # "Increased in size" is measured from the smallest compliant conductor of the same
    # segment and material: the fewest circular mils in total over its parallel sets.
    min_size, min_sets = _smallest_compliant(seg, mat, size, sets, code_ok,
                                             catalogue.area_mm2, n)
    pair = seg * 2 + mat
    egc = _by_material(mat, lambda m, mask: egc_size_index_of_sizes(
        profile, MATERIALS[m], ocpd[mask], size[mask], min_size[pair[mask]], sets[mask],
        min_sets[pair[mask]]), dtype=np.int64)
    egc_ok = egc >= 0
    egc = np.where(egc_ok, egc, 0)

    # --- money --------------------------------------------------------------------------
    capex = installed_cost(prices, length, sa.conductors[seg], mat, size, sets, egc)
    keep &= np.isfinite(capex) & egc_ok

    r_ohm = r_m * length / sets
    x_ohm = x_m * length / sets
    loop = _fault_loop_ohm(profile, catalogue, sa, inst_names, inst_code, seg, mat, size, egc,
                           sets, length)
    loss_factor = np.where(sa.phases[seg] == 1, 2.0, 3.0)
    loss_w = loss_factor * current**2 * r_ohm
    loss_pv = loss_w * loss_pv_per_w

    idx = np.flatnonzero(keep)
    counts = np.bincount(seg[idx], minlength=n)
    offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    table = CandidateTable(
        offsets=offsets,
        segment=seg[idx],
        material=mat[idx],
        size_index=size[idx],
        sets=sets[idx],
        ampacity_a=ampacity[idx],
        temp_c=temp_c[idx],
        r_ohm=r_ohm[idx],
        x_ohm=x_ohm[idx],
        vd_pct=vd[idx],
        loss_w=loss_w[idx],
        capex=capex[idx],
        loss_pv=loss_pv[idx],
        egc_size_index=egc[idx],
        loop_ohm=loop[idx],
    )
    return table, diagnosis


def withstand_family(seg: Segment, prices: PriceList, material: str) -> str | None:
    """Insulation family of a run's conductors, or None (the profile decides by rating).

    The node's ``insulation_type``, else the price list's product line for the metal.
    """
    return seg.node.insulation_type or prices.insulation_type.get(material)


def withstand_i2t_a2s(profile: RuleProfile, catalogue: Catalogue, prices: PriceList,
                      segments: tuple[Segment, ...], table: CandidateTable,
                      rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Adiabatic I²t (A²s) each row's parallel sets withstand, and the final temperature.

    IEC 60949: I²t = K² S² ln((θf + β)/(θi + β)), θi the insulation rating (the
    conductor may be at it when the fault starts), θf by the insulation family
    (``RuleProfile.withstand_final_c``); sets share the fault current, so the sets'
    I²t is sets² times one conductor's.
    """
    rows = np.asarray(rows, dtype=np.int64)
    i2t = np.empty(rows.size)
    final = np.empty(rows.size)
    for k, r in enumerate(rows.tolist()):
        seg = segments[int(table.segment[r])]
        material = MATERIALS[int(table.material[r])]
        ins = seg.node.cable.insulation_c
        final[k] = profile.withstand_final_c(ins, withstand_family(seg, prices, material))
        one_s = float(adiabatic_withstand_a(catalogue.area_mm2[int(table.size_index[r])], 1.0,
                                            material, ins, final[k]))
        i2t[k] = (one_s * int(table.sets[r])) ** 2
    return i2t, final


def take_rows(table: CandidateTable, keep: np.ndarray) -> CandidateTable:
    """The table with only the rows where ``keep`` is True (offsets rebuilt)."""
    idx = np.flatnonzero(keep)
    n = table.offsets.size - 1
    counts = np.bincount(table.segment[idx], minlength=n)
    offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    arrays = {f.name: getattr(table, f.name)[idx] for f in fields(table)
              if isinstance(getattr(table, f.name), np.ndarray) and f.name != "offsets"}
    return replace(table, offsets=offsets, **arrays)


def loop_temperature_c(profile: RuleProfile, insulation_c: np.ndarray) -> np.ndarray:
    """Conductor temperature of the minimum fault loop (degC).

    The insulation rating, or the final short-circuit temperature, as the profile's
    ``[fault] loop_temperature`` says.
    """
    if profile.fault.loop_temperature == "end_of_fault":
        return np.array([profile.final_temperature_c(float(t)) for t in insulation_c])
    return np.asarray(insulation_c, dtype=float)


def _fault_loop_ohm(profile, catalogue, sa, inst_names, inst_code, seg, mat, size, egc, sets,
                    length) -> np.ndarray:
    """Line + protective conductor impedance of every row at the fault-loop temperature."""
    temp = loop_temperature_c(profile, sa.insulation_c)[seg]
    loop = np.zeros(seg.shape[0], dtype=np.complex128)
    imp_code = inst_code[seg] * 2 + mat
    for code in np.unique(imp_code).tolist():
        mask = imp_code == code
        material, inst = MATERIALS[code % 2], inst_names[code // 2]
        r, x = impedance_ohm_per_m(catalogue, material, size[mask], temp[mask], inst,
                                   profile.frequency_hz)
        loop[mask] = ((r + 1j * x) * length[mask] / sets[mask]
                      + pe_impedance_ohm(catalogue, material, egc[mask], sets[mask],
                                         length[mask], temp[mask], inst,
                                         profile.frequency_hz))
    return loop


def _ampacity_lookup(profile, sa, inst_names, inst_code, seg, mat, size, n_sizes):
    """Per-set code ampacity and thermal ampacity of every row, from per-group tables."""
    # Terminal column: given per segment, or the profile's rule (device rating and size).
    terminal_c = sa.terminal_c[seg]
    auto = np.isnan(terminal_c)
    if auto.any():
        terminal_c = terminal_c.copy()
        terminal_c[auto] = terminal_temperature_c(profile, sa.ocpd_a[seg[auto]], size[auto])
    terminal_c = np.where(np.isnan(terminal_c), -1.0, terminal_c)  # -1: no terminal limit
    settings = np.column_stack([sa.insulation_c, sa.ambient_c, sa.grouping, inst_code])
    uniq_settings, seg_group = np.unique(settings, axis=0, return_inverse=True)
    terms, term_code = np.unique(terminal_c, return_inverse=True)
    group = (seg_group.ravel()[seg] * 2 + mat) * len(terms) + term_code.ravel()
    all_sizes = np.arange(n_sizes)
    code_tab = np.full((uniq_settings.shape[0] * 2 * len(terms), n_sizes), np.nan)
    thermal_tab = np.full_like(code_tab, np.nan)
    for g in np.unique(group).tolist():
        t = g % len(terms)
        m = (g // len(terms)) % 2
        ins, amb, grp, inst = uniq_settings[g // len(terms) // 2]
        inst_name = inst_names[int(inst)]
        term = None if terms[t] < 0 else float(terms[t])
        code_tab[g] = ampacity_a(profile, MATERIALS[m], all_sizes, float(ins), term, float(amb),
                                 int(grp), inst_name)
        # The insulation column corrected for ambient and grouping: the current at which
        # the conductor reaches its rated temperature (terminals do not heat it).
        thermal_tab[g] = (table_ampacity_a(profile, MATERIALS[m], all_sizes, float(ins), inst_name)
                          * ambient_factor(profile, float(ins), float(amb), inst_name)
                          * grouping_factor(profile, int(grp)))
    return code_tab[group, size], thermal_tab[group, size]


def _smallest_compliant(seg, mat, size, sets, ok, area_mm2, n):
    """Size index and sets of the compliant row with the least total area, per (seg, mat)."""
    min_size = np.zeros(2 * n, dtype=np.int64)
    min_sets = np.ones(2 * n, dtype=np.int64)
    rows = np.flatnonzero(ok)
    if rows.size:
        pair = seg[rows] * 2 + mat[rows]
        order = np.lexsort((area_mm2[size[rows]] * sets[rows], pair))
        first = np.r_[True, pair[order][1:] != pair[order][:-1]]
        pick = rows[order][first]
        min_size[pair[order][first]] = size[pick]
        min_sets[pair[order][first]] = sets[pick]
    # A pair with no compliant row keeps (0, 1): its rows are dropped anyway.
    return min_size, min_sets


def _by_material(mat: np.ndarray, func, dtype) -> np.ndarray:
    out = np.zeros(mat.shape[0], dtype=dtype)
    for m in range(len(MATERIALS)):
        mask = mat == m
        if mask.any():
            out[mask] = func(m, mask)
    return out


def conductor_label(catalogue: Catalogue, material: int, size_index: int, sets: int) -> str:
    """The trade's way to write a row: ``"2x 500 kcmil Al"``."""
    lead = f"{sets}x " if sets > 1 else ""
    return f"{lead}{catalogue.sizes[size_index]} {MATERIALS[material]}"


def _diagnose(n, seg, mat, size, sets, ampacity, vd, code_ok, pinned, code_ok_strict,
              drop_ok, catalogue) -> LocalDiagnosis:
    best_amp = np.zeros(n)
    np.maximum.at(best_amp, seg, np.where(np.isfinite(ampacity), ampacity, 0.0))
    best_drop = np.full(n, np.inf)
    labels = [""] * n
    if code_ok.any():
        rows = np.flatnonzero(code_ok)
        order = np.lexsort((vd[rows], seg[rows]))
        rows = rows[order]
        first = np.r_[True, seg[rows][1:] != seg[rows][:-1]]
        for r in rows[first].tolist():
            s = int(seg[r])
            best_drop[s] = vd[r]
            labels[s] = conductor_label(catalogue, int(mat[r]), int(size[r]), int(sets[r]))
    fails = [""] * n
    for r in np.flatnonzero(pinned).tolist():
        broken = []
        if not code_ok_strict[r]:
            broken.append("ampacity or protection")
        if not drop_ok[r]:
            broken.append("own voltage-drop limit")
        fails[int(seg[r])] = " and ".join(broken)
    return LocalDiagnosis(best_amp, best_drop, tuple(labels), tuple(fails))


def reprice(
    table: CandidateTable,
    segments: tuple[Segment, ...],
    catalogue: Catalogue,
    prices: PriceList,
    loss_pv_per_w: float,
) -> CandidateTable:
    """The same rows with ``capex`` and ``loss_pv`` for new prices and a new F (money per W).

    Nothing that depends on amperes or ohms is recomputed: ampacity, temperature,
    impedance, drop and peak loss stay as built, so a sweep over energy or metal prices
    reuses the table. The arithmetic is the one of ``build_candidates``; rows are looked
    up by ``table.segment``, so a slice of a table reprices too.
    """
    if tuple(prices.sizes) != tuple(catalogue.sizes):
        raise ScenarioError(f"the price list is for the {prices.catalogue} sizes, not the "
                            f"{catalogue.name} catalogue", field="catalogue")
    conductors = conductors_per_set(
        np.array([seg.phases for seg in segments], dtype=np.int64),
        np.array([seg.neutral for seg in segments], dtype=bool))
    seg = table.segment
    length = np.array([s.length_m for s in segments], dtype=float)[seg]
    capex = installed_cost(prices, length, conductors[seg], table.material, table.size_index,
                           table.sets, table.egc_size_index)
    loss_pv = table.loss_w * loss_pv_per_w
    return replace(table, capex=capex, loss_pv=loss_pv)

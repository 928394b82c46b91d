"""The candidate table: one row per segment × material × size × parallel sets.

Every row that passes the segment-local rules (ampacity, protection by the device,
small-conductor limits, minimum size for parallel sets, the segment's own drop limit)
is kept with its operating temperature, impedance, drop, peak loss, equipment grounding
conductor, upfront cost and loss present value. Built in one numpy pass over the grid;
the only Python loops run over the few distinct (material, settings) groups.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Callable
from dataclasses import dataclass, fields, replace
from functools import cache
from pathlib import Path

import numpy as np

from sizer.catalogue import Catalogue
from sizer.catalogue.prices import PriceList
from sizer.conductors import (
    adiabatic_withstand_a,
    impedance_ohm_per_m,
    operating_temperature_c,
)
from sizer.drop import drop_pct, transformer_regulation_pct
from sizer.errors import InternalError, ScenarioError
from sizer.faults import default_device, pe_impedance_ohm
from sizer.model import CandidateTable, Segment
from sizer.rules.ampacity import (
    ambient_factor,
    carries_load,
    current_carrying_conductors,
    grouping_factor,
    soil_factor,
    table_ampacity_a,
)
from sizer.rules.profile import RuleProfile
from sizer.rules.protection import (
    bonding_jumper_size_index,
    egc_size_index_of_sizes,
    min_parallel_ok,
    next_size_up_allowed,
    overload_factor,
    protects,
    small_conductor_ok,
    terminal_temperature_c,
)
from sizer.rules.raceway import (
    DIRECT,
    NO_RACEWAY,
    NONE,
    TRAY,
    band_tops_conductors,
    grouped_conductors,
    raceway_size_index,
    tray_width_index,
)
from sizer.rules.terminations import (
    NO_TERMINAL,
    lands,
    most_per_terminal,
    splice_ends,
    terminal_range,
)
from sizer.topology import Topology
from sizer.units import MATERIALS
from sizer.units import conductor_label as trade_label


@dataclass(frozen=True)
class SegmentArrays:
    """Per-segment inputs of the candidate table as SI arrays (index = segment)."""

    length_m: np.ndarray
    current_a: np.ndarray
    required_a: np.ndarray      # before adjustment (210.19(A)(1)(a), 430.22)
    required_adjusted_a: np.ndarray  # after adjustment (210.19(A)(1)(b))
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
    motor_overload: np.ndarray  # bool: motor branch, conductors protected by the overload relay
    secondary: np.ndarray       # bool: transformer secondary conductors
    service: np.ndarray         # bool: service conductors (bonding jumper, no EGC)
    own_neutral: np.ndarray     # bool: a three-phase run with a neutral (sized on its own)
    neutral_size: np.ndarray    # area over the phase's (1.0 full, 2.0 double); 0: reduced
    triplen: np.ndarray         # declared third-harmonic share below the run
    overload_factor: np.ndarray  # share of Iz the device may be rated at (IEC 60364-4-43)
    route: np.ndarray | None = None        # shared route index per segment, -1 none
    per_set_ccc: np.ndarray | None = None  # current-carrying conductors of one set
    refuse_oversize: np.ndarray | None = None  # bool: no reducing splice allowed
    load_terminal_max: np.ndarray | None = None  # size index the load end takes, -1: as device
    min_parallel: np.ndarray | None = None   # smallest size index for parallel sets, -1 none
    soil_factor: np.ndarray | None = None    # soil resistivity and depth correction, buried
    one_raceway: np.ndarray | None = None    # bool: all parallel sets in one raceway


@dataclass(frozen=True)
class PeFaultTerms:
    """What the adiabatic protective-conductor rule (IEC 60364-5-54 543.1.2) needs.

    Per segment: ``upstream_ohm`` (complex, ohm at the run's U0) the least loop impedance
    above the run's near end whatever is chosen (the source and the transformers above;
    cables only add to it), ``u0_v`` the run's voltage to earth, ``time_s`` the
    disconnection time it must meet (IEC 60364-4-41 Table 41.1); ``c_min`` the IEC 60909
    minimum voltage factor.
    """

    upstream_ohm: np.ndarray
    u0_v: np.ndarray
    time_s: np.ndarray
    c_min: float


def conductors_per_set(phases: np.ndarray, neutral: np.ndarray) -> np.ndarray:
    """Phase and neutral conductors in one parallel set (the EGC apart): 2, 3 or 4."""
    return np.where(phases == 1, 2, 3 + neutral.astype(np.int64))


def installed_cost(prices: PriceList, length_m: np.ndarray, conductors: np.ndarray,
                   mat: np.ndarray, size: np.ndarray, sets: np.ndarray,
                   egc: np.ndarray, *, neutral_size: np.ndarray | None = None) -> np.ndarray:
    """Upfront cost of each row: per set, its conductors and EGC bought and pulled.

    ``neutral_size`` (size index per row, −1: none of its own) prices a three-phase
    run's neutral at its own size: one of the ``conductors`` is then that size.
    """
    return length_m * sets * cost_per_set_m(prices, conductors, mat, size, egc,
                                            neutral_size=neutral_size)


def cost_per_set_m(prices: PriceList, conductors: np.ndarray, mat: np.ndarray,
                   size: np.ndarray, egc: np.ndarray, *,
                   neutral_size: np.ndarray | None = None) -> np.ndarray:
    """``installed_cost`` of one parallel set per metre of run (money/m)."""
    def pick(table_cu: np.ndarray, table_al: np.ndarray, k: np.ndarray) -> np.ndarray:
        return np.where(mat == 0, table_cu[k], table_al[k])

    cu, al = prices.conductor("Cu"), prices.conductor("Al")
    phase_cost = pick(cu, al, size)
    per_set = (conductors * phase_cost + pick(cu, al, egc)
               + pick(prices.labour("Cu"), prices.labour("Al"), size))
    if neutral_size is not None:
        own = neutral_size >= 0
        per_set = per_set + np.where(
            own, pick(cu, al, np.where(own, neutral_size, 0)) - phase_cost, 0.0)
    return per_set


# The last arrays gathered, with what they were gathered from: preparing a scenario asks
# for the same ones three times (candidates, PE steps, their copies), 0.3 s each at
# 20,000 runs. Compared by identity; the tuple is held, so its id cannot be reused.
_last_arrays: list[tuple[tuple[Segment, ...], RuleProfile, Catalogue, SegmentArrays]] = []


def segment_arrays(
    segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue
) -> SegmentArrays:
    """Gather the per-segment inputs from the model into arrays (read-only: shared)."""
    if _last_arrays:
        last_segments, last_profile, last_catalogue, last = _last_arrays[0]
        if (last_segments is segments and last_profile is profile
                and last_catalogue is catalogue):
            return last
    sa = _gathered(segments, profile, catalogue)
    for f in fields(sa):
        value = getattr(sa, f.name)
        if isinstance(value, np.ndarray):
            value.flags.writeable = False
    _last_arrays[:] = [(segments, profile, catalogue, sa)]
    return sa


def _gathered(
    segments: tuple[Segment, ...], profile: RuleProfile, catalogue: Catalogue
) -> SegmentArrays:
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
    # NEC 310.15(E): the neutral counts where a wye circuit's load is mainly non-linear
    default_grouping = current_carrying_conductors(
        profile, phases, neutral, np.array([seg.nonlinear_share for seg in segments]),
        np.array([seg.phases == 1 and not seg.line_to_neutral and seg.from_three_phase
                  for seg in segments]))
    grouping = np.array(
        [seg.node.cable.grouping or 0 for seg in segments], dtype=np.int64
    )
    kind_limit = {"branch": profile.drop_branch_pct, "feeder": profile.drop_feeder_pct}
    return SegmentArrays(
        length_m=np.array([seg.length_m for seg in segments], dtype=float),
        current_a=np.array([seg.current_a for seg in segments], dtype=float),
        required_a=np.array([seg.required_ampacity_a for seg in segments], dtype=float),
        required_adjusted_a=np.array([seg.required_adjusted_a for seg in segments],
                                     dtype=float),
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
        motor_overload=np.array(
            [seg.motor_branch and profile.motors is not None
             and profile.motors.conductor_protection_by_overload for seg in segments],
            dtype=bool),
        secondary=np.array([seg.secondary for seg in segments], dtype=bool),
        service=np.array([seg.service and profile.bonds_service() for seg in segments],
                         dtype=bool),
        own_neutral=(phases == 3) & neutral,
        neutral_size=np.array([seg.node.neutral_size for seg in segments], dtype=float),
        triplen=_triplen_below(segments),
        route=route_indices(segments),
        per_set_ccc=default_grouping,
        refuse_oversize=np.array([
            (seg.node.cable.oversize_termination
             or (profile.terminals.oversize if profile.terminals is not None else "splice"))
            == "refuse" for seg in segments], dtype=bool),
        load_terminal_max=np.array([
            profile.size_index(seg.node.load_terminal_max) if seg.node.load_terminal_max
            else -1 for seg in segments], dtype=np.int64),
        min_parallel=np.array([_min_parallel(profile, seg.node.cable.min_parallel_size)
                               for seg in segments], dtype=np.int64),
        soil_factor=np.array([_soil(profile, seg) for seg in segments], dtype=float),
        one_raceway=np.array([seg.node.cable.sets_in_one_raceway for seg in segments],
                             dtype=bool),
        overload_factor=np.array([
            overload_factor(profile, seg.node.device or default_device(seg.ocpd_a,
                                                                        profile.fault),
                            seg.ocpd_a) for seg in segments]),
    )


def _triplen_below(segments: tuple[Segment, ...]) -> np.ndarray:
    """The largest declared triplen share at or below each segment."""
    own = np.array([seg.node.triplen for seg in segments], dtype=float)
    topo = Topology(np.array([seg.parent_index for seg in segments], dtype=np.int64))
    return own[topo.subtree_argmax(own)]


@cache
def neutral_rules() -> dict[str, dict[str, str]]:
    """Rows of ``sizer/rules/neutral.csv`` by profile name."""
    path = Path(__file__).with_name("rules") / "neutral.csv"
    with path.open(encoding="utf-8") as fh:
        rows = csv.DictReader(line for line in fh if not line.startswith("#"))
        return {row["profile"]: row for row in rows}


def neutral_size_index(profile_name: str, catalogue: Catalogue, sa: SegmentArrays,
                       seg: np.ndarray, mat: np.ndarray, size: np.ndarray, sets: np.ndarray,
                       egc: np.ndarray, neutral_a: np.ndarray,
                       code_by_size: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
    """Size index of each row's neutral (−1: no catalogue size will do).

    Full size by default; ``neutral_size`` above 1 asks for at least that multiple of
    the phase area (200 %: double); 0 asks for a reduced neutral where the profile's
    rules allow (``sizer/rules/neutral.csv``): the smallest size that carries the
    neutral current per set, not below the EGC or the profile's floor, not above the
    phase size. Where they do not allow it, the neutral stays full size.
    """
    area = np.asarray(catalogue.area_mm2, dtype=float)
    want = sa.neutral_size[seg]
    out = size.copy()
    bigger = want > 1.0
    if bigger.any():
        need = want[bigger] * area[size[bigger]] * (1 - 1e-9)
        k = np.searchsorted(area, need, side="left")
        out[bigger] = np.where(k < len(area), k, -1)
    rule = neutral_rules().get(profile_name)
    reduce = (want == 0.0) & sa.own_neutral[seg]
    if rule is None or rule["reduced_allowed"].strip().lower() != "true" or not reduce.any():
        return out
    min_phase = np.where(mat == 0, float(rule["min_phase_mm2_Cu"]),
                         float(rule["min_phase_mm2_Al"]))
    min_neutral = np.where(mat == 0, float(rule["min_neutral_mm2_Cu"]),
                           float(rule["min_neutral_mm2_Al"]))
    limit = rule["max_triplen"].strip()
    reduce &= area[size] > min_phase
    if limit:
        reduce &= sa.triplen[seg] <= float(limit) + 1e-12
    rows = np.flatnonzero(reduce)
    if rows.size == 0:
        return out
    floor_area = np.searchsorted(area, min_neutral[rows] * (1 - 1e-9), side="left")
    per_set = neutral_a[seg[rows]] / sets[rows]
    # Ampacity rises with size; sizes not made read 0 so they are never picked alone.
    climb = np.maximum.accumulate(np.nan_to_num(code_by_size(rows), nan=0.0), axis=1)
    k = (climb < (per_set * (1 - 1e-12))[:, None]).sum(axis=1).astype(np.int64)
    k = np.maximum.reduce([k, egc[rows], floor_area])
    out[rows] = np.minimum(k, size[rows])
    return out


def _soil(profile: RuleProfile, seg: Segment) -> float:
    """The soil correction of one segment, its node named in any error."""
    c = seg.node.cable
    try:
        return soil_factor(profile, c.installation, c.soil_resistivity_k_m_per_w, c.depth_m)
    except ScenarioError as exc:
        raise exc.located(node=seg.id) from None


def _min_parallel(profile: RuleProfile, given: str | None) -> int:
    """Smallest size index for parallel sets: the scenario's, never below a code minimum."""
    own = -1 if profile.min_parallel_size is None else profile.size_index(
        profile.min_parallel_size)
    if given is None:
        return own
    wanted = profile.size_index(given)
    # A practice minimum (iec) may be lowered; a code minimum (NEC 310.10(G)) may not.
    return wanted if profile.min_parallel_overridable else max(wanted, own)


def route_indices(segments: tuple[Segment, ...]) -> np.ndarray:
    """Index of each segment's shared route (routes numbered by first appearance), -1 none."""
    names: dict[str, int] = {}
    out = np.full(len(segments), -1, dtype=np.int64)
    for s, seg in enumerate(segments):
        if seg.node.route:
            out[s] = names.setdefault(seg.node.route, len(names))
    return out


@dataclass(frozen=True)
class LocalDiagnosis:
    """Why segments have no candidate: per segment, the best that the catalogue allows."""

    best_ampacity_a: np.ndarray      # largest ampacity of any allowed row
    best_drop_pct: np.ndarray        # lowest own drop among rows that carry the current
    best_label: tuple[str, ...]      # the row that gives best_drop_pct, as the trade writes it
    pinned_fails: tuple[str, ...]    # per segment: the rules a pinned conductor breaks ("" none)
    # per segment: the terminal or raceway limit that refused otherwise compliant rows ("" none)
    build_limits: tuple[str, ...] = ()


def _grid(sa: SegmentArrays, n_sizes: int) -> tuple[np.ndarray, ...]:
    """Index arrays of every allowed (segment, material, size, sets) combination.

    In segment, material, size, sets order; each segment up to its own ``max_sets`` (a
    grid up to the largest ``max_sets`` of the tree would be built only to be dropped).
    A pinned segment keeps its pinned row and, flagged apart (the last array is False),
    the other rows of the pin's material: the smallest compliant one of them is what
    NEC 250.122(B) measures the pin's EGC growth from.
    """
    pinned_seg = sa.pin_material >= 0
    pair_seg, pair_mat, span = _grid_pairs(sa)
    counts = n_sizes * span
    start = np.cumsum(counts) - counts
    total = int(counts.sum())
    seg = np.repeat(pair_seg, counts)
    mat = np.repeat(pair_mat, counts)
    pos = np.arange(total, dtype=np.int64) - np.repeat(start, counts)
    width = np.repeat(span, counts)
    size = pos // width
    sets = pos % width + 1
    pinned = pinned_seg[seg]
    pin_row = pinned & (size == sa.pin_size[seg]) & (sets == sa.pin_sets[seg])
    keep = pin_row | (sets <= sa.max_sets[seg])
    if not keep.all():
        seg, mat, size, sets = seg[keep], mat[keep], size[keep], sets[keep]
        pinned, pin_row = pinned[keep], pin_row[keep]
    return seg, mat, size, sets, ~pinned | pin_row


# Peak memory while the table is built, bytes: PEAK_BYTES_PER_COMBINATION for each
# (segment × material × size × sets) combination of the slice being built (its work
# arrays), TABLE_BYTES_PER_COMBINATION for each combination of the whole grid (the rows
# that survive, in place). Measured by `sizer bench`: about 0.49 GB above the process's
# base for the 20,000-run building's 3.9 million combinations, 2.1 GB for the
# 100,000-run one's 19 million; with a tenth of headroom.
PEAK_BYTES_PER_COMBINATION = 620
TABLE_BYTES_PER_COMBINATION = 140
MEMORY_LIMIT_ENV = "SIZER_MEMORY_LIMIT"


def _grid_pairs(sa: SegmentArrays) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(segment, material) pairs of the grid, segment-major, and the sets each spans.

    A pinned segment has its pin's material only, and spans to the larger of its
    ``max_sets`` and the pin's sets.
    """
    pinned = sa.pin_material >= 0
    mats = np.where(pinned[:, None], np.arange(2)[None, :] == sa.pin_material[:, None],
                    sa.allowed)
    pair_seg, pair_mat = np.nonzero(mats)
    top = np.where(pinned, np.maximum(sa.max_sets, sa.pin_sets), sa.max_sets)
    return pair_seg, pair_mat, top[pair_seg].astype(np.int64)


def segment_combinations(sa: SegmentArrays, n_sizes: int, n_bands: int) -> np.ndarray:
    """Per segment, how many (material, size, sets[, band]) rows its grid starts from."""
    pair_seg, _, span = _grid_pairs(sa)
    bands = (np.where(sa.route[pair_seg] >= 0, n_bands, 1) if sa.route is not None
             else 1)
    return np.bincount(pair_seg, weights=n_sizes * span * bands,
                       minlength=len(sa.length_m)).astype(np.int64)


def combinations(sa: SegmentArrays, n_sizes: int, n_bands: int) -> int:
    """How many (segment, material, size, sets[, band]) rows the table starts from."""
    return int(segment_combinations(sa, n_sizes, n_bands).sum())


# The table is built in slices of whole runs of about this many grid combinations: the
# work arrays of one slice (about PEAK_BYTES_PER_COMBINATION each) are the peak, not
# those of the whole grid. Large enough that numpy's per-call overhead stays small.
SLICE_COMBINATIONS = 250_000


def _slices(sa: SegmentArrays, per_segment: np.ndarray,
            most: int) -> list[tuple[int, int]]:
    """Consecutive segment ranges of about ``most`` combinations each.

    A shared route's runs stay in one range: they share its trench and its band count.
    """
    n = per_segment.shape[0]
    inside_route = np.zeros(n + 1, dtype=bool)   # a cut before segment b splits a route
    if sa.route is not None and np.any(sa.route >= 0):
        members = np.flatnonzero(sa.route >= 0)
        routes = sa.route[members]
        first = np.full(int(routes.max()) + 1, n, dtype=np.int64)
        last = np.full(int(routes.max()) + 1, -1, dtype=np.int64)
        np.minimum.at(first, routes, members)
        np.maximum.at(last, routes, members)
        used = last >= 0
        spans = np.zeros(n + 2, dtype=np.int64)
        np.add.at(spans, first[used] + 1, 1)
        np.add.at(spans, last[used] + 1, -1)
        inside_route = np.cumsum(spans)[: n + 1] > 0
    out = []
    lo, total = 0, 0
    for s, k in enumerate(per_segment.tolist()):
        if total >= most and not inside_route[s]:
            out.append((lo, s))
            lo, total = s, 0
        total += k
    out.append((lo, n))
    return out


def _sliced(sa: SegmentArrays, lo: int, hi: int) -> SegmentArrays:
    """The per-segment arrays of segments ``lo:hi``."""
    return replace(sa, **{f.name: getattr(sa, f.name)[lo:hi] for f in fields(sa)
                          if getattr(sa, f.name) is not None})


class _TableFill:
    """The table's columns, filled slice by slice in place.

    Each column is allocated once for every combination of the grid (an upper bound on
    the rows; pages never written are never resident) and the slices' rows are copied
    in as they come: no second copy of the table when the slices are joined, and no
    slices left about the heap between the work arrays.
    """

    def __init__(self, most_rows: int) -> None:
        self.most = most_rows
        self.rows = 0
        self.columns: dict[str, np.ndarray] = {}
        self.other: dict[str, object] = {}
        self.counts: list[np.ndarray] = []

    def add(self, part: CandidateTable, first_segment: int) -> None:
        """Append a slice's table (its segments numbered from ``first_segment``)."""
        k = len(part)
        for f in fields(part):
            value = getattr(part, f.name)
            if f.name == "offsets":
                self.counts.append(np.diff(value))
            elif isinstance(value, np.ndarray) and value.shape[:1] == (k,):
                column = self.columns.get(f.name)
                if column is None:
                    column = self.columns[f.name] = np.empty(
                        (self.most, *value.shape[1:]), dtype=value.dtype)
                column[self.rows:self.rows + k] = value
                if f.name == "segment":
                    column[self.rows:self.rows + k] += first_segment
            else:
                self.other.setdefault(f.name, value)
        self.rows += k

    def finished(self) -> CandidateTable:
        """The table: each column the filled part of its allocation."""
        counts = np.concatenate(self.counts) if self.counts else np.zeros(0, dtype=np.int64)
        offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
        columns = {name: column[:self.rows] for name, column in self.columns.items()}
        return CandidateTable(offsets=offsets, **columns, **self.other)  # type: ignore[arg-type]


def _joined_diagnoses(diagnoses: list[LocalDiagnosis]) -> LocalDiagnosis:
    """The diagnoses of consecutive slices as one."""
    if len(diagnoses) == 1:
        return diagnoses[0]
    return LocalDiagnosis(**{  # type: ignore[arg-type]
        f.name: (np.concatenate([getattr(d, f.name) for d in diagnoses])
                 if isinstance(getattr(diagnoses[0], f.name), np.ndarray)
                 else tuple(x for d in diagnoses for x in getattr(d, f.name)))
        for f in fields(LocalDiagnosis)})


def available_memory_bytes() -> float:
    """The memory the table may use: ``SIZER_MEMORY_LIMIT`` if set, else what is free.

    Free memory is the kernel's MemAvailable (Linux), else physical memory; infinite
    when neither can be read.
    """
    import os

    given = os.environ.get(MEMORY_LIMIT_ENV)
    if given:
        from sizer.readers import read_memory_bytes

        return read_memory_bytes(given, MEMORY_LIMIT_ENV)
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024.0
    except OSError:
        pass
    try:
        return float(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES"))
    except (ValueError, OSError, AttributeError):
        return float("inf")


def _memory_text(n_bytes: float) -> str:
    return f"{n_bytes / 1e9:.1f} GB" if n_bytes >= 1e9 else f"{n_bytes / 1e6:.0f} MB"


def check_table_fits(per_segment: np.ndarray, slices: list[tuple[int, int]],
                     file: str | None, limit_bytes: float | None = None) -> None:
    """Refuse, in one line, a candidate table larger than the memory it may use.

    ``per_segment``: each run's grid combinations (``segment_combinations``); ``slices``:
    the runs built at once (``_slices``). Raised before anything is built, instead of a
    traceback or the kernel stopping the process; the message says what to change.
    """
    rows = int(per_segment.sum())
    largest_slice = max((int(per_segment[lo:hi].sum()) for lo, hi in slices), default=0)
    need = (largest_slice * PEAK_BYTES_PER_COMBINATION
            + rows * TABLE_BYTES_PER_COMBINATION)
    limit = available_memory_bytes() if limit_bytes is None else limit_bytes
    if need > limit:
        raise ScenarioError(
            f"the candidate table would need about {_memory_text(need)} ({rows:,} "
            f"combinations of run, material, size and parallel sets) but "
            f"{_memory_text(limit)} is available: allow fewer materials or parallel sets "
            f"(max_sets), or use a coarser catalogue; {MEMORY_LIMIT_ENV} sets the limit "
            f"(e.g. \"8 GB\")",
            file=file)


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
    loss_pv_per_w: float | np.ndarray,
    *,
    keep_pins: bool = False,
    loss_a2: np.ndarray | None = None,
    neutral_a: np.ndarray | None = None,
    neutral_a2: np.ndarray | None = None,
    pe_fault: PeFaultTerms | None = None,
    file: str | None = None,
) -> tuple[CandidateTable, LocalDiagnosis]:
    """Every compliant candidate of every segment, and what the rejected rows could reach.

    Ampacity, protection and drop use each segment's sizing current; the loss columns use
    ``loss_a2`` (per segment: Σ I² of its current-carrying conductors at the operating
    peak, A², from ``sizer.operating``) when given, else the sizing current on every
    conductor. ``loss_pv_per_w`` is F (money per W of peak loss): one value, or one per
    segment. With ``keep_pins`` a pinned row stays in the table even when it breaks a
    segment-local rule (``sizer check`` reports it as a violation). ``pe_fault`` is
    needed when the profile sizes the protective conductor adiabatically. A table too
    large for the memory available is refused first (``check_table_fits``; ``file``
    names the scenario in the message).
    """
    sa = segment_arrays(segments, profile, catalogue)
    # Shared routes: one copy of each row per grouping band, its derating at that band.
    tops = band_tops_conductors(profile.grouping_bands, profile.grouping_conductors_per_group)
    per_segment = segment_combinations(sa, len(catalogue.sizes), len(tops))
    slices = _slices(sa, per_segment, SLICE_COMBINATIONS)
    check_table_fits(per_segment, slices, file)
    table = _TableFill(int(per_segment.sum()))
    diagnoses = []
    with_routes = sa.route is not None and bool(np.any(sa.route >= 0))
    for lo, hi in slices:
        def cut(values: np.ndarray | None, lo: int = lo, hi: int = hi) -> np.ndarray | None:
            return None if values is None else np.asarray(values)[lo:hi]
        part, diagnosis = _build_slice(
            segments[lo:hi], _sliced(sa, lo, hi), tops, profile, catalogue, prices,
            loss_pv_per_w if np.ndim(loss_pv_per_w) == 0 else cut(loss_pv_per_w),  # type: ignore[arg-type]
            keep_pins=keep_pins, loss_a2=cut(loss_a2), neutral_a=cut(neutral_a),
            neutral_a2=cut(neutral_a2),
            pe_fault=None if pe_fault is None else replace(
                pe_fault, upstream_ohm=pe_fault.upstream_ohm[lo:hi],
                u0_v=pe_fault.u0_v[lo:hi], time_s=pe_fault.time_s[lo:hi]),
            with_routes=with_routes)
        table.add(part, lo)
        diagnoses.append(diagnosis)
        del part
    return table.finished(), _joined_diagnoses(diagnoses)


def _build_slice(
    segments: tuple[Segment, ...],
    sa: SegmentArrays,
    tops: np.ndarray,
    profile: RuleProfile,
    catalogue: Catalogue,
    prices: PriceList,
    loss_pv_per_w: float | np.ndarray,
    *,
    keep_pins: bool,
    loss_a2: np.ndarray | None,
    neutral_a: np.ndarray | None,
    neutral_a2: np.ndarray | None,
    pe_fault: PeFaultTerms | None,
    with_routes: bool,
) -> tuple[CandidateTable, LocalDiagnosis]:
    """``build_candidates`` for a slice of whole runs (``sa`` and the arrays cut to it).

    ``with_routes``: the tree has shared routes (the route columns are kept).

    Runs alike in all but their length (twenty branch circuits of one panel, say) have
    the same rows, ampacities, temperatures, EGCs, terminations and raceways: those are
    worked out once per kind of run (``_length_free``, on one run of each kind) and
    copied to the others; drop, resistance, cost, loss and loop are then worked out for
    every row with its own length, by the same expressions as for a run alone.
    """
    n = len(segments)
    seg, mat, size, sets, own = _grid(sa, len(catalogue.sizes))
    seg, mat, size, sets, own, band = _route_bands(sa, (seg, mat, size, sets, own), len(tops))
    neutral = np.zeros(n) if neutral_a is None else np.asarray(neutral_a, dtype=float)
    if loss_a2 is None:
        loss_a2 = np.where(sa.phases == 1, 2.0, 3.0) * sa.current_a ** 2
    loss_a2 = np.asarray(loss_a2, dtype=float)
    adiabatic_seg = adiabatic_pe_runs(segments, profile)
    # the adiabatic PE depends on the run's length: such runs are a kind of their own
    kind = _run_kinds(sa, (neutral, loss_a2, neutral_a2, loss_pv_per_w), adiabatic_seg)
    tpl, tmap = _template_rows(seg, kind)
    free = _length_free(segments, sa, tops, profile, catalogue, prices, pe_fault, neutral,
                        adiabatic_seg, seg[tpl], mat[tpl], size[tpl], sets[tpl], band[tpl])

    def copied(name: str, rows: np.ndarray | slice = slice(None)) -> np.ndarray:
        return free[name][tmap[rows]]

    valid, ampacity, code_ok = copied("valid"), copied("ampacity"), copied("code_ok")
    r_m, x_m = copied("r_m"), copied("x_m")
    route_count, route_top = copied("route_count"), copied("route_top")
    current = sa.current_a[seg]
    length = sa.length_m[seg]
    vd = drop_pct(current, length, r_m, x_m, sa.power_factor[seg], sa.phases[seg],
                  sa.voltage_v[seg], sets)
    drop_ok = vd <= sa.own_limit_pct[seg] + 1e-12

    pinned = (sa.pin_material[seg] >= 0) & own
    keep = code_ok & drop_ok & own & (route_count <= route_top)
    if keep_pins:
        keep |= pinned & valid

    carries, protected = copied("carries"), copied("protected")
    broken = {"ampacity": ~carries, "protection": carries & ~protected,
              "small-conductor limit": ~copied("small_ok"),
              parallel_rule_name(profile): ~copied("parallel_ok"),
              "own voltage-drop limit": ~drop_ok}
    diagnosis = _diagnose(n, seg, mat, size, sets, ampacity, vd, code_ok & own, pinned,
                          broken, catalogue)
    del broken, carries, protected, drop_ok, valid, code_ok, r_m, x_m, current

    # The rows that cannot be kept have served the diagnosis: the rest of the work runs
    # on the survivors only.
    alive = np.flatnonzero(keep)
    at = tmap[alive]
    seg, mat, size, sets = seg[alive], mat[alive], size[alive], sets[alive]
    length, vd, pinned = length[alive], vd[alive], pinned[alive]
    route_count, route_top, ampacity = route_count[alive], route_top[alive], ampacity[alive]
    del keep, own, band

    def taken(name: str) -> np.ndarray:
        return free[name][at]

    egc_ok = taken("egc_ok")
    keep = ~taken("neutral_missing")
    build = BuildRows(*(taken(f"build_{f.name}") for f in fields(BuildRows)))
    diagnosis = replace(diagnosis, build_limits=_build_limits(
        n, seg, mat, size, sets, keep & egc_ok, build, profile, catalogue, sa))
    # A pinned conductor stays for ``sizer check`` even when it cannot be landed or drawn
    # in: check reports it as a violation.
    keep &= build.ok | (pinned & keep_pins)

    # --- money, loss and loop, each row at its own length --------------------------------
    assert build.raceways is not None and build.raceway_each is not None
    assert build.trench_share is not None
    raceway_capex = raceway_capex_of(
        length, build.raceways, build.raceway_each, build.trench_share,
        prices.raceways.trench_per_m if prices.raceways is not None else 0.0)
    termination_capex = np.where(build.ok, build.termination_capex, 0.0)
    raceway_capex = np.where(build.ok, raceway_capex, 0.0)
    capex = length * sets * taken("cost_per_set_m") + termination_capex + raceway_capex
    keep &= np.isfinite(capex) & egc_ok

    r_m = taken("r_m")
    r_ohm = r_m * length / sets
    x_ohm = taken("x_m") * length / sets
    loss_w = loss_a2[seg] * r_ohm
    if neutral_a2 is not None:
        # The neutral's I²R at its own size (same temperature as the phases: a stated
        # simplification; it carries less current and runs cooler).
        own_neutral = sa.own_neutral[seg]
        other = taken("neutral_other")
        r_n = r_ohm.copy()
        r_n[other] = taken("r_neutral_m")[other] * length[other] / sets[other]
        loss_w = loss_w + np.where(own_neutral, np.asarray(neutral_a2, float)[seg] * r_n, 0.0)
    loss_pv = loss_w * _per_row(loss_pv_per_w, seg)
    loop = loop_of(taken("loop_line_m"), taken("loop_pe_m"), length, sets)

    idx = np.flatnonzero(keep)
    counts = np.bincount(seg[idx], minlength=n)
    offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    at = at[idx]
    # Codes and counts in the narrowest integer type that holds them: a third less
    # memory per row than int64 throughout, with the same values (a catalogue has far
    # fewer than 2**15 sizes; runs fewer than 2**31).
    table = CandidateTable(
        offsets=offsets,
        segment=seg[idx].astype(np.int32),
        material=mat[idx].astype(np.int8),
        size_index=size[idx].astype(np.int16),
        sets=sets[idx].astype(np.int16),
        ampacity_a=ampacity[idx],
        ampacity_before_a=free["ampacity_before"][at],
        temp_c=free["temp_c"][at],
        r_ohm=r_ohm[idx],
        x_ohm=x_ohm[idx],
        vd_pct=vd[idx],
        loss_w=loss_w[idx],
        capex=capex[idx],
        loss_pv=loss_pv[idx],
        egc_size_index=free["egc"][at].astype(np.int16),
        neutral_size_index=free["neutral_size"][at].astype(np.int16),
        terminal_max=build.terminal_max[idx].astype(np.int16),
        splice_ends=build.splice_ends[idx].astype(np.int8),
        termination_capex=termination_capex[idx],
        raceway_size=build.raceway_size[idx].astype(np.int16),
        raceway_capex=raceway_capex[idx],
        build_fail=np.where(build.terminal_ok, np.where(build.raceway_ok, 0, 2), 1)[idx]
        .astype(np.int8),
        # without shared routes the two columns would say nothing (0 and inf throughout)
        route_count=route_count[idx].astype(np.int32) if with_routes else None,
        route_top=route_top[idx] if with_routes else None,
        loop_ohm=loop[idx],
    )
    return table, diagnosis


def _run_kinds(sa: SegmentArrays, per_segment: tuple[float | np.ndarray | None, ...],
               by_length: np.ndarray) -> np.ndarray:
    """Per segment, its kind: runs with every input but the length equal share a kind.

    ``per_segment`` are further inputs (one value, an array per segment, or None);
    runs flagged ``by_length`` share a kind only with runs of their very length.
    """
    n = sa.length_m.shape[0]
    columns = [np.where(by_length, sa.length_m, 0.0)[:, None]]
    for f in fields(sa):
        value = getattr(sa, f.name)
        if f.name == "length_m" or value is None:
            continue
        if f.name == "installation":
            value = np.unique(np.asarray(value, dtype=object).astype(str),
                              return_inverse=True)[1]
        columns.append(np.asarray(value, dtype=float).reshape(n, -1))
    for value in per_segment:
        if value is not None and np.ndim(value) > 0:
            columns.append(np.asarray(value, dtype=float).reshape(n, -1))
    # equal bits, equal kind (no tolerance: a kind's rows are copied, not approximated)
    bits = np.ascontiguousarray(np.concatenate(columns, axis=1)).view(np.uint64)
    _, kind = np.unique(bits, axis=0, return_inverse=True)
    return kind.ravel().astype(np.int64)


def _template_rows(seg: np.ndarray, kind: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The grid rows of one run of each kind, and for every row its template's position.

    Rows of a run are consecutive and a kind's runs have the same grid (the grid depends
    only on inputs the kind compares), so row j of a run copies row j of its template.
    """
    n = kind.shape[0]
    counts = np.bincount(seg, minlength=n)
    start = np.concatenate([[0], np.cumsum(counts)[:-1]])
    _, first = np.unique(kind, return_index=True)
    template = first[kind]                               # per segment: its kind's template
    if not np.array_equal(counts, counts[template]):
        raise InternalError("runs of one kind have grids of different lengths")
    is_template = np.zeros(n, dtype=bool)
    is_template[first] = True
    rows = np.flatnonzero(is_template[seg])
    position = np.zeros(n, dtype=np.int64)
    position[first] = np.searchsorted(rows, start[first])
    tmap = position[template[seg]] + (np.arange(seg.shape[0]) - start[seg])
    return rows, tmap


def _length_free(segments, sa, tops, profile, catalogue, prices, pe_fault, neutral_a,
                 adiabatic_seg, seg, mat, size, sets, band) -> dict[str, np.ndarray]:
    """Every column of the given rows that does not depend on the run's length."""
    n = len(segments)
    out: dict[str, np.ndarray] = {}
    route = sa.route[seg] if sa.route is not None else np.full(seg.shape, -1)
    ccc = sa.per_set_ccc if sa.per_set_ccc is not None else np.where(sa.phases == 1, 2, 3)
    in_route = route >= 0
    out["route_count"] = np.where(in_route, sets * ccc[seg], 0)
    route_top = out["route_top"] = np.where(in_route, tops[np.maximum(band, 0)], np.inf)
    inst_names = sorted(set(sa.installation))
    inst_code = np.array([inst_names.index(name) for name in sa.installation], dtype=np.int64)

    # --- ampacity per set (code) and the thermal rating behind the temperature ----------
    # Settings vary by segment, not by row: tabulate each distinct (settings, material,
    # terminal column) over all sizes once, then look rows up in the tables.
    together = _sets_together(profile, sa.installation)
    if sa.one_raceway is not None:
        together = together | sa.one_raceway
    row_grouping = np.where(in_route, np.minimum(route_top, _MANY).astype(np.int64),
                            grouped_conductors(sa.grouping[seg], sets, together[seg]))
    amp_set, before_set, thermal_set, amp_rows = _ampacity_lookup(
        profile, sa, inst_names, inst_code, seg, mat, size, len(catalogue.sizes), row_grouping)
    ampacity = out["ampacity"] = amp_set * sets
    out["ampacity_before"] = before_set * sets
    ocpd = sa.ocpd_a[seg]

    valid = out["valid"] = np.isfinite(ampacity) & (ampacity > 0)
    # NEC 210.19(A)(1)/215.2(A)(1): the two tests apart (motors: 430.22/430.24 in both).
    carries = out["carries"] = valid & carries_load(before_set * sets, ampacity,
                                                    sa.required_a[seg],
                                                    sa.required_adjusted_a[seg])
    motor = sa.motor_overload[seg]
    # 240.4(G): a motor branch's conductors are protected by the overload relay; the
    # 430.52 device may exceed their ampacity and 240.4(D) does not apply. IEC 60364-4-43
    # overload coordination rates the device at a share of Iz (overload_factor).
    protected = out["protected"] = motor | protects(
        profile, np.where(valid, ampacity, 0.0) * sa.overload_factor[seg], ocpd,
        next_size_up_allowed(profile, sa.secondary[seg]))
    small_ok = out["small_ok"] = motor | _by_material(mat, lambda m, mask: small_conductor_ok(
        profile, MATERIALS[m], size[mask], ocpd[mask]), dtype=bool)
    parallel_ok = out["parallel_ok"] = (
        min_parallel_ok(profile, size, sets) if sa.min_parallel is None
        else (sets == 1) | (size >= sa.min_parallel[seg]))
    code_ok = out["code_ok"] = carries & protected & small_ok & parallel_ok

    # --- temperature and impedance per metre ----------------------------------------------
    temp_c = out["temp_c"] = operating_temperature_c(
        sa.ambient_c[seg], sa.insulation_c[seg], sa.current_a[seg],
        np.where(valid, thermal_set * sets, np.inf),
    )
    r_m = out["r_m"] = np.empty(seg.shape[0])
    x_m = out["x_m"] = np.empty(seg.shape[0])
    imp_code = inst_code[seg] * 2 + mat
    for code in np.unique(imp_code).tolist():
        mask = imp_code == code
        r_m[mask], x_m[mask] = impedance_ohm_per_m(
            catalogue, MATERIALS[code % 2], size[mask], temp_c[mask],
            inst_names[code // 2], profile.frequency_hz,
        )

    # --- EGC: by the device, grown with the phase conductors (NEC 250.122(B)) -----------
    # "Increased in size" is measured from the smallest compliant conductor of the same
    # segment and material: the fewest circular mils in total over its parallel sets.
    min_size, min_sets = _smallest_compliant(seg, mat, size, sets, code_ok,
                                             catalogue.area_mm2, n)
    pair = seg * 2 + mat
    # cec: bonding conductor by the ampacity of the run (CEC Table 16), not the device
    egc_key = (np.where(valid, ampacity, np.nan) if profile.egc_rule == "conductor_ampacity"
               else ocpd)
    egc = _by_material(mat, lambda m, mask: egc_size_index_of_sizes(
        profile, MATERIALS[m], egc_key[mask], size[mask], min_size[pair[mask]], sets[mask],
        min_sets[pair[mask]]), dtype=np.int64)
    # Service conductors carry no EGC: a supply-side bonding jumper per raceway instead
    # (NEC 250.24(C), 250.102(C)), in the same column and priced the same way.
    service = sa.service[seg]
    if service.any() and profile.service_bonding:
        egc[service] = _by_material(mat[service], lambda m, mask: bonding_jumper_size_index(
            profile, MATERIALS[m], size[service][mask]), dtype=np.int64)
    adiabatic = adiabatic_seg[seg] & ~service
    if adiabatic.any():
        if pe_fault is None:
            raise ValueError("the adiabatic PE rule needs the earth-fault terms (pe_fault)")
        rows = np.flatnonzero(adiabatic)
        egc[rows] = adiabatic_pe_size_index(profile, catalogue, prices, segments, sa,
                                            inst_names, inst_code, seg[rows], mat[rows],
                                            size[rows], sets[rows], pe_fault)
    out["egc_ok"] = egc >= 0
    egc = out["egc"] = np.where(egc >= 0, egc, 0)

    # --- the neutral of a three-phase four-wire run: its own size -------------------------
    neutral_size = neutral_size_index(profile.name, catalogue, sa, seg, mat, size, sets, egc,
                                      neutral_a, amp_rows)
    own_neutral = sa.own_neutral[seg]
    out["neutral_missing"] = own_neutral & (neutral_size < 0)
    neutral_size = out["neutral_size"] = np.where(own_neutral & (neutral_size >= 0),
                                                  neutral_size, size)
    other = out["neutral_other"] = own_neutral & (neutral_size != size)
    r_n = out["r_neutral_m"] = np.zeros(seg.shape[0])
    for code in np.unique(imp_code[other]).tolist():
        mask = other & (imp_code == code)
        r_n[mask] = impedance_ohm_per_m(
            catalogue, MATERIALS[code % 2], neutral_size[mask], temp_c[mask],
            inst_names[code // 2], profile.frequency_hz)[0]

    # --- what it takes to build, and its price per metre --------------------------------
    build = build_rows(profile, prices, sa, seg, mat, size, sets, egc)
    for f in fields(BuildRows):
        out[f"build_{f.name}"] = getattr(build, f.name)
    out["cost_per_set_m"] = cost_per_set_m(prices, sa.conductors[seg], mat, size, egc,
                                           neutral_size=np.where(own_neutral, neutral_size,
                                                                 -1))
    out["loop_line_m"], out["loop_pe_m"] = fault_loop_per_m(
        profile, catalogue, sa, inst_names, inst_code, seg, mat, size, egc)
    return out


def _own_neutral(segments: tuple[Segment, ...], table: CandidateTable) -> np.ndarray | None:
    """The rows' neutral size index where a three-phase run has its own (−1 elsewhere)."""
    if table.neutral_size_index is None:
        return None
    own = np.array([seg.phases == 3 and seg.neutral for seg in segments], dtype=bool)
    return np.where(own[table.segment], table.neutral_size_index, -1)


def _per_row(per_segment: float | np.ndarray, seg: np.ndarray) -> np.ndarray | float:
    """A per-segment value spread over rows (a single value stays as it is)."""
    arr = np.asarray(per_segment, dtype=float)
    return float(arr) if arr.ndim == 0 else arr[seg]


_MANY = 10**6  # a conductor count in the last grouping band (its top is inf)


def _route_bands(sa: SegmentArrays, rows: tuple[np.ndarray, ...], n_bands: int):
    """Row arrays (segment first), route rows repeated once per grouping band.

    The band array comes last (-1 for rows outside routes).
    """
    seg = rows[0]
    if sa.route is None or not np.any(sa.route >= 0):
        return (*rows, np.full(seg.shape, -1, dtype=np.int64))
    inside = sa.route[seg] >= 0
    rep = np.where(inside, n_bands, 1)
    band = np.concatenate([np.arange(k) if k > 1 else np.array([-1]) for k in rep.tolist()])
    out = [np.repeat(a, rep) for a in rows]
    band = np.where(np.repeat(inside, rep), band, -1).astype(np.int64)
    return (*out, band)


@dataclass(frozen=True)
class BuildRows:
    """Per candidate row: how its conductors land and what raceway carries them."""

    ok: np.ndarray                 # it can be built (terminals and raceway)
    terminal_ok: np.ndarray        # its conductors land, directly or by splice
    raceway_ok: np.ndarray         # a listed raceway size holds it
    terminal_max: np.ndarray       # largest size the device terminal takes (-1: any)
    splice_ends: np.ndarray        # 0, 1 or 2 ends landed by a reducing splice
    termination_capex: np.ndarray  # splices: ends × conductors × sets × price of one
    raceway_size: np.ndarray       # trade size or tray width index (-1: none)
    raceway_capex: np.ndarray      # raceways per set (tray per run) and trench, installed
    # what raceway_capex is made of, per metre of run (``raceway_capex_of``)
    raceways: np.ndarray | None = None      # raceways along the run (0: none priced)
    raceway_each: np.ndarray | None = None  # price of one per metre (NaN: no size fits)
    trench_share: np.ndarray | None = None  # share of the trench the run pays (0: none)


def build_rows(profile: RuleProfile, prices: PriceList, sa: SegmentArrays, seg: np.ndarray,
               mat: np.ndarray, size: np.ndarray, sets: np.ndarray,
               egc: np.ndarray) -> BuildRows:
    """Terminations and raceways of every row, with their installed cost.

    Terminations: the device's terminal range (``sizer.rules.terminations``) at the
    supply end and, as common practice, the same range at the load end; a conductor above
    it lands by a reducing splice priced per conductor, or is refused (profile choice).
    Raceways: one per parallel set holding the set's phase and neutral conductors and its
    EGC, trade size by the fill rule; a tray (one per run) by summed diameters; a trench
    per metre of route for the profile's trench installations.
    """
    rows = seg.shape[0]
    conductors = sa.conductors[seg]
    length = sa.length_m[seg]
    sold_splice = np.where(mat == 0, prices.splice("Cu")[size], prices.splice("Al")[size])
    if profile.terminals is None:
        term_max = np.full(rows, NO_TERMINAL, dtype=np.int64)
        ends = np.zeros(rows, dtype=np.int64)
        term_ok = np.ones(rows, dtype=bool)
    else:
        # More sets than the terminal takes land through a splice box: each conductor is
        # spliced to the terminal's own number of sets (common practice on long runs
        # upsized for voltage drop), priced like a reducing splice.
        most = most_per_terminal(profile.terminals, sa.ocpd_a[seg])
        crowded = sets > most
        # (above the table ``most`` is 0 and terminal_range gives NO_TERMINAL: refused)
        low, term_max = terminal_range(profile.terminals, sa.ocpd_a[seg],
                                       np.where(crowded, np.maximum(most, 1), sets))
        load_max = term_max
        if sa.load_terminal_max is not None:
            own = sa.load_terminal_max[seg]
            load_max = np.where((own >= 0) & (term_max >= 0), own, term_max)
        term_ok = lands(size, low, term_max, "splice")
        ends = np.where(term_ok, np.where(crowded, 2, splice_ends(size, term_max, load_max)),
                        0)
        if sa.refuse_oversize is not None:
            term_ok &= ~sa.refuse_oversize[seg] | (ends == 0)
        term_ok &= (ends == 0) | np.isfinite(sold_splice)
    term_capex = np.where(ends > 0, ends * conductors * sets * sold_splice, 0.0)

    race_size = np.full(rows, NO_RACEWAY, dtype=np.int64)
    race_count = np.zeros(rows, dtype=np.int64)
    race_each = np.zeros(rows)
    trench = np.zeros(rows)
    race_ok = np.ones(rows, dtype=bool)
    rules = profile.raceway
    if rules is not None:
        priced = prices.raceways
        kind_of_seg = [rules.installation_type[inst] for inst in sa.installation]
        kind_names = sorted(set(kind_of_seg))
        kind_code = np.array([kind_names.index(k) for k in kind_of_seg], dtype=np.int64)[seg]
        area = np.where(mat == 0, rules.conductor_area_mm2["Cu"][size],
                        rules.conductor_area_mm2["Al"][size])
        egc_area = np.where(mat == 0, rules.conductor_area_mm2["Cu"][egc],
                            rules.conductor_area_mm2["Al"][egc])
        for code, kind in enumerate(kind_names):
            m = kind_code == code
            if kind in (NONE, DIRECT):
                continue  # no raceway (a direct-buried run pays its trench below)
            if kind == TRAY:
                d = np.sqrt(4.0 / np.pi) * (conductors[m] * np.sqrt(area[m])
                                            + np.sqrt(egc_area[m]))
                k = tray_width_index(rules.tray_widths_mm, sets[m] * d)
                names = [f"{w:g}" for w in rules.tray_widths_mm]
                per_run: np.ndarray | int = 1
            else:
                rtype = rules.types[kind]
                # one raceway per set with its EGC, or (the scenario's choice) all sets in one
                # raceway with one EGC (NEC 250.122(F): one EGC in a common raceway)
                shared = (sa.one_raceway[seg[m]] if sa.one_raceway is not None
                          else np.zeros(m.sum(), dtype=bool))
                per_raceway = np.where(shared, sets[m], 1)
                k = raceway_size_index(rtype.area_mm2, rules.fill,
                                       per_raceway * conductors[m] * area[m] + egc_area[m],
                                       per_raceway * conductors[m] + 1)
                names = list(rtype.designators)
                per_run = np.where(shared, 1, 0)
            race_size[m] = k
            race_ok[m] = k >= 0
            if priced is not None:
                price = np.array([priced.price_per_m(kind, name) for name in names])
                race_each[m] = np.where(k >= 0, price[np.maximum(k, 0)], np.nan)
                race_count[m] = np.where(per_run == 1, 1, sets[m])
        if priced is not None:
            in_trench = np.array([inst in rules.trench for inst in sa.installation])
            share = _trench_share(sa.route, in_trench)
            trench = np.where(in_trench[seg], share[seg], 0.0)
    trench_per_m = prices.raceways.trench_per_m if prices.raceways is not None else 0.0
    return BuildRows(term_ok & race_ok, term_ok, race_ok, term_max, ends, term_capex,
                     race_size, raceway_capex_of(length, race_count, race_each, trench,
                                                 trench_per_m),
                     race_count, race_each, trench)


def raceway_capex_of(length_m: np.ndarray, raceways: np.ndarray, each: np.ndarray,
                     trench_share: np.ndarray, trench_per_m: float) -> np.ndarray:
    """Installed raceways (``raceways`` × price per metre) and trench share of each row."""
    capex = np.where(raceways > 0, length_m * raceways * each, 0.0)
    return capex + np.where(trench_share > 0, length_m * trench_per_m * trench_share, 0.0)


def _trench_share(route: np.ndarray | None, in_trench: np.ndarray) -> np.ndarray:
    """Share of its trench each segment pays: buried runs of one route share one trench.

    Common practice for the price: the k buried runs of a route each pay 1/k of the
    trench along their own length (exact when they run the same way).
    """
    share = np.ones(in_trench.shape[0])
    if route is None:
        return share
    members = (route >= 0) & in_trench
    if members.any():
        counts = np.bincount(route[members])
        share[members] = 1.0 / counts[route[members]]
    return share


def _build_limits(n, seg, mat, size, sets, compliant, build: BuildRows, profile: RuleProfile,
                  catalogue: Catalogue, sa: SegmentArrays) -> tuple[str, ...]:
    """Per segment, the terminal or raceway limit that refused compliant rows ("" none)."""
    out = [""] * n
    refused = np.flatnonzero(compliant & ~build.ok)
    # one pass over the refused rows grouped by segment (never a scan per segment)
    by_seg = refused[np.argsort(seg[refused], kind="stable")]
    bounds = np.flatnonzero(np.diff(seg[by_seg])) + 1
    for rows in np.split(by_seg, bounds) if by_seg.size else ():
        s = int(seg[rows[0]])
        r = int(rows[np.argmin(size[rows] * 100 + sets[rows])])
        label = conductor_label(catalogue, int(mat[r]), int(size[r]), int(sets[r]))
        if not build.terminal_ok[r]:
            top = int(build.terminal_max[r])
            takes = (f"takes at most {catalogue.sizes[top]} per terminal" if top >= 0
                     else f"takes no {int(sets[r])} conductors per terminal")
            out[s] = f"terminal limit: the {sa.ocpd_a[s]:g} A device {takes} ({label} refused)"
        else:
            kind = (profile.raceway.installation_type[sa.installation[s]]
                    if profile.raceway is not None else "")
            out[s] = f"raceway limit: {label} fits no listed {kind} size (refused)"
    return tuple(out)


def _sets_together(profile: RuleProfile, installation: tuple[str, ...]) -> np.ndarray:
    """Per segment: whether its parallel sets lie together and derate as one group.

    Sets laid in one trench (the profile's trench installations, e.g. "buried") heat one
    another, so all their conductors count as one group (NEC 310.15(C)(1) counts every
    conductor of a parallel set; IEC 60364-5-52 Table B.52.17 counts circuits). Sets in
    their own raceways in air do not.
    """
    trench = profile.raceway.trench if profile.raceway is not None else ("buried",)
    return np.array([inst in trench for inst in installation], dtype=bool)


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
    I²t is sets² times one conductor's. One numpy pass per metal; the final temperature
    is looked up once per (run, metal) pair the rows use, in the rows' order, so a bad
    insulation rating fails on the same row as a row-by-row walk would.
    """
    rows = np.asarray(rows, dtype=np.int64)
    seg = table.segment[rows].astype(np.int64)
    mat = table.material[rows].astype(np.int64)
    pair = seg * len(MATERIALS) + mat
    used, first, inverse = np.unique(pair, return_index=True, return_inverse=True)
    final_of_pair = np.empty(used.size)
    ins_of_pair = np.empty(used.size)
    by_family: dict[tuple[float, str | None], float] = {}
    for k in np.argsort(first, kind="stable").tolist():  # in the order the rows meet them
        s = segments[int(used[k]) // len(MATERIALS)]
        material = MATERIALS[int(used[k]) % len(MATERIALS)]
        ins = s.node.cable.insulation_c
        key = (ins, withstand_family(s, prices, material))
        if key not in by_family:
            by_family[key] = profile.withstand_final_c(*key)
        final_of_pair[k] = by_family[key]
        ins_of_pair[k] = ins
        if not final_of_pair[k] > ins:
            raise ScenarioError("final short-circuit temperature must exceed the initial one")
    final = final_of_pair[inverse.reshape(-1)]
    initial = ins_of_pair[inverse.reshape(-1)]
    one_s = np.empty(rows.size)
    area = catalogue.area_mm2[table.size_index[rows].astype(np.int64)]
    for m, material in enumerate(MATERIALS):
        on = mat == m
        if on.any():
            one_s[on] = adiabatic_withstand_a(area[on], 1.0, material, initial[on], final[on])
    i2t = (one_s * table.sets[rows].astype(float)) ** 2
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


def adiabatic_pe_runs(segments: tuple[Segment, ...], profile: RuleProfile) -> np.ndarray:
    """Per segment: its PE is sized by the adiabatic equation (IEC 60364-5-54 543.1.2).

    The node's ``pe_rule`` (or ``[defaults]``) where given, else the profile's.
    """
    return np.array([(seg.node.pe_rule or profile.pe_rule) == "adiabatic"
                     for seg in segments], dtype=bool)


def loop_temperature_c(profile: RuleProfile, insulation_c: np.ndarray) -> np.ndarray:
    """Conductor temperature of the minimum fault loop (degC).

    The insulation rating, or the final short-circuit temperature, as the profile's
    ``[fault] loop_temperature`` says.
    """
    if profile.fault.loop_temperature == "end_of_fault":
        return np.array([profile.final_temperature_c(float(t)) for t in insulation_c])
    return np.asarray(insulation_c, dtype=float)


def pe_k(material: str, insulation_c: float, final_c: float) -> float:
    """The k of IEC 60364-5-54 543.1.2 (A·s^0.5/mm2) for a PE core starting at ``insulation_c``.

    From the IEC 60949 adiabatic constants: k = K · sqrt(ln((θf + β)/(θi + β))), which
    gives Table A.54.3's 115 (Cu, PVC 70 -> 160 degC) and 143 (Cu, XLPE 90 -> 250 degC).
    """
    return float(adiabatic_withstand_a(1.0, 1.0, material, insulation_c, final_c))


def adiabatic_pe_size_index(profile, catalogue, prices, segments, sa, inst_names, inst_code,
                            seg, mat, size, sets, pe_fault: PeFaultTerms) -> np.ndarray:
    """Smallest PE size of every row meeting S >= sqrt(I² t) / k (IEC 60364-5-54 543.1.2).

    See :func:`adiabatic_pe_ok`. A larger PE lowers the loop and raises I, so sizes are
    tried in ascending order. -1: no catalogue size suffices.
    """
    out = np.full(seg.shape[0], -1, dtype=np.int64)
    for s in range(len(catalogue.sizes)):
        todo = np.flatnonzero(out < 0)
        if not todo.size:
            break
        ok = adiabatic_pe_ok(profile, catalogue, prices, segments, sa, inst_names, inst_code,
                             seg[todo], mat[todo], size[todo], sets[todo],
                             np.full(todo.size, s), pe_fault)
        out[todo[ok]] = s
    return out


def adiabatic_pe_ok(profile, catalogue, prices, segments, sa, inst_names, inst_code, seg, mat,
                    size, sets, pe, pe_fault: PeFaultTerms) -> np.ndarray:
    """Whether each row's PE of size index ``pe`` meets IEC 60364-5-54 543.1.2.

    I is the far-end line-to-earth current per parallel set under IEC 60909 minimum
    conditions (c_min, conductors at the fault-loop temperature) with the row's own line
    and PE and only ``pe_fault.upstream_ohm`` above: cables above only lower it, so the
    size also holds for the run's actual far-end current; t the run's required
    disconnection time; k by ``pe_k`` for the run's insulation and family.
    """
    temp = loop_temperature_c(profile, sa.insulation_c)[seg]
    length = sa.length_m[seg]
    k_pair = np.array([[pe_k(m, float(s.node.cable.insulation_c), profile.withstand_final_c(
        s.node.cable.insulation_c, withstand_family(s, prices, m))) for m in MATERIALS]
        for s in segments]).reshape(-1, len(MATERIALS))
    allowed_a_per_mm2 = k_pair[seg, mat] / np.sqrt(pe_fault.time_s[seg])
    ok = np.zeros(seg.shape[0], dtype=bool)
    imp_code = inst_code[seg] * 2 + mat
    for code in np.unique(imp_code).tolist():
        rows = np.flatnonzero(imp_code == code)
        material, inst = MATERIALS[code % 2], inst_names[code // 2]
        r, x = impedance_ohm_per_m(catalogue, material, size[rows], temp[rows], inst,
                                   profile.frequency_hz)
        z_pe = pe_impedance_ohm(catalogue, material, pe[rows], sets[rows], length[rows],
                                temp[rows], inst, profile.frequency_hz)
        z = (pe_fault.upstream_ohm[seg[rows]] + (r + 1j * x) * length[rows] / sets[rows]
             + z_pe)
        with np.errstate(divide="ignore", invalid="ignore"):
            per_set_a = pe_fault.c_min * pe_fault.u0_v[seg[rows]] / np.abs(z) / sets[rows]
            ok[rows] = catalogue.area_mm2[pe[rows]] * allowed_a_per_mm2[rows] >= per_set_a
    return ok


def fault_loop_ohm(profile, catalogue, sa, inst_names, inst_code, seg, mat, size, egc, sets,
                   length) -> np.ndarray:
    """Line + protective conductor impedance (complex ohm) of rows at the fault-loop temp."""
    line_m, pe_m = fault_loop_per_m(profile, catalogue, sa, inst_names, inst_code, seg, mat,
                                    size, egc)
    return loop_of(line_m, pe_m, length, sets)


def fault_loop_per_m(profile, catalogue, sa, inst_names, inst_code, seg, mat, size,
                     egc) -> tuple[np.ndarray, np.ndarray]:
    """Per metre of one set at the fault-loop temperature: the line's and the PE's Z (ohm/m)."""
    temp = loop_temperature_c(profile, sa.insulation_c)[seg]
    line = np.zeros(seg.shape[0], dtype=np.complex128)
    pe = np.zeros(seg.shape[0], dtype=np.complex128)
    imp_code = inst_code[seg] * 2 + mat
    for code in np.unique(imp_code).tolist():
        mask = imp_code == code
        material, inst = MATERIALS[code % 2], inst_names[code // 2]
        r, x = impedance_ohm_per_m(catalogue, material, size[mask], temp[mask], inst,
                                   profile.frequency_hz)
        line[mask] = r + 1j * x
        pe[mask] = pe_impedance_ohm(catalogue, material, egc[mask], 1, 1.0, temp[mask], inst,
                                    profile.frequency_hz)
    return line, pe


def loop_of(line_per_m: np.ndarray, pe_per_m: np.ndarray, length_m: np.ndarray,
            sets: np.ndarray) -> np.ndarray:
    """Line + PE loop impedance (complex ohm) of runs of ``length_m`` in ``sets`` sets.

    ``line·L/sets + pe·(L/sets)``, worked part by part in real arithmetic: numpy divides
    a complex by a real-valued complex as a product with its reciprocal, so these are
    the same values, bit for bit, in about half the time.
    """
    length = np.asarray(length_m, dtype=float)
    n_sets = np.asarray(sets, dtype=float)
    per_set = 1.0 / n_sets
    scale = length / n_sets
    out = np.empty(np.broadcast(line_per_m, length, n_sets).shape, dtype=np.complex128)
    out.real = line_per_m.real * length * per_set + pe_per_m.real * scale
    out.imag = line_per_m.imag * length * per_set + pe_per_m.imag * scale
    return out


def _ampacity_lookup(profile, sa, inst_names, inst_code, seg, mat, size, n_sizes, row_grouping):
    """Per-set ampacities of every row, from per-group tables.

    Returned: the code ampacity, the value before adjustment, the thermal rating, and a
    lookup of the code ampacity of every size for given rows (to size a neutral).

    The tables hold the insulation column corrected for ambient, and the terminal limit;
    the grouping factor of each row (it depends on the row's sets) is applied after, in
    the order of ``sizer.rules.ampacity.ampacity_a``: min(table × ambient × group, limit).
    """
    # Terminal column: given per segment, or the profile's rule (device rating and size).
    terminal_c = sa.terminal_c[seg]
    auto = np.isnan(terminal_c)
    if auto.any():
        terminal_c = terminal_c.copy()
        terminal_c[auto] = terminal_temperature_c(profile, sa.ocpd_a[seg[auto]], size[auto])
    terminal_c = np.where(np.isnan(terminal_c), -1.0, terminal_c)  # -1: no terminal limit
    soil = sa.soil_factor if sa.soil_factor is not None else np.ones(len(inst_code))
    # Loaded conductors of the circuit: iec tabulates whole circuits, two loaded
    # (single-phase) above three (IEC 60364-5-52 Annex B); nec/cec tables are per conductor.
    ccc = sa.per_set_ccc if sa.per_set_ccc is not None else np.where(sa.phases == 1, 2, 3)
    loaded = np.where(ccc == 2, 2, 3) if profile.ampacity_two_loaded_a else np.full(len(ccc), 3)
    settings = np.column_stack([sa.insulation_c, sa.ambient_c, inst_code, soil, loaded])
    uniq_settings, seg_group = np.unique(settings, axis=0, return_inverse=True)
    terms, term_code = np.unique(terminal_c, return_inverse=True)
    group = (seg_group.ravel()[seg] * 2 + mat) * len(terms) + term_code.ravel()
    all_sizes = np.arange(n_sizes)
    limit_tab = np.full((uniq_settings.shape[0] * 2 * len(terms), n_sizes), np.inf)
    corrected_tab = np.full_like(limit_tab, np.nan)
    before_tab = np.full_like(limit_tab, np.nan)
    for g in np.unique(group).tolist():
        t = g % len(terms)
        m = (g // len(terms)) % 2
        ins, amb, inst, ground, n_loaded = uniq_settings[g // len(terms) // 2]
        inst_name = inst_names[int(inst)]
        plain = table_ampacity_a(profile, MATERIALS[m], all_sizes, float(ins), inst_name,
                                 int(n_loaded))
        # The insulation column corrected for ambient (and soil): with the grouping factor,
        # the current at which the conductor reaches its rated temperature (terminals do
        # not heat it).
        corrected_tab[g] = (plain * ambient_factor(profile, float(ins), float(amb), inst_name)
                            * float(ground))
        if terms[t] >= 0:
            limit_tab[g] = table_ampacity_a(profile, MATERIALS[m], all_sizes, float(terms[t]),
                                            inst_name, int(n_loaded))
        # Before any adjustment or correction, at the lower of the two columns: the value
        # the first test of NEC 210.19(A)(1)/215.2(A)(1) compares with 125 % of the load.
        before_tab[g] = np.minimum(plain, limit_tab[g])
    factor = np.broadcast_to(np.asarray(grouping_factor(profile, row_grouping), dtype=float),
                             seg.shape)
    thermal = corrected_tab[group, size] * factor

    def code_by_size(rows: np.ndarray) -> np.ndarray:
        """Code ampacity per set of every catalogue size, for the given rows' settings."""
        return np.minimum(corrected_tab[group[rows]] * factor[rows, None],
                          limit_tab[group[rows]])

    return (np.minimum(thermal, limit_tab[group, size]), before_tab[group, size], thermal,
            code_by_size)


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
    return trade_label(sets, catalogue.sizes[size_index], MATERIALS[material])


def parallel_rule_name(profile: RuleProfile) -> str:
    """The words for the minimum size of parallel conductors, with its source."""
    source = profile.sources.get("parallel", "")
    clause = source.split(":")[0] if source else "the profile's rule"
    return f"minimum size for parallel conductors ({profile.min_parallel_size}, {clause})"


def _diagnose(n, seg, mat, size, sets, ampacity, vd, code_ok, pinned, broken,
              catalogue) -> LocalDiagnosis:
    # Rows come segment by segment (the grid's order): per-segment reductions are
    # reduceat over each segment's first row.
    counts = np.bincount(seg, minlength=n)
    has = counts > 0
    start = (np.cumsum(counts) - counts)[has]
    best_amp = np.zeros(n)
    if seg.size:
        best_amp[has] = np.maximum.reduceat(
            np.where(np.isfinite(ampacity), ampacity, 0.0), start)
        best_amp = np.maximum(best_amp, 0.0)
    best_drop = np.full(n, np.inf)
    labels = [""] * n
    if code_ok.any():
        best_drop[has] = np.minimum.reduceat(np.where(code_ok, vd, np.inf), start)
        # the first row, in the grid's order, that gives its segment's best drop
        rows = np.flatnonzero(code_ok & (vd == best_drop[seg]))
        _, first = np.unique(seg[rows], return_index=True)
        for r in rows[first].tolist():
            labels[int(seg[r])] = conductor_label(catalogue, int(mat[r]), int(size[r]),
                                                  int(sets[r]))
    fails = [""] * n
    for r in np.flatnonzero(pinned).tolist():
        fails[int(seg[r])] = " and ".join(name for name, bad in broken.items() if bad[r])
    return LocalDiagnosis(best_amp, best_drop, tuple(labels), tuple(fails))


def reprice(
    table: CandidateTable,
    segments: tuple[Segment, ...],
    catalogue: Catalogue,
    prices: PriceList,
    loss_pv_per_w: float | np.ndarray,
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
                           table.sets, table.egc_size_index,
                           neutral_size=_own_neutral(segments, table))
    # Splices and raceways are not metal-indexed: they stay as built.
    for extra in (table.termination_capex, table.raceway_capex):
        if extra is not None:
            capex = capex + extra
    loss_pv = table.loss_w * _per_row(loss_pv_per_w, seg)
    return replace(table, capex=capex, loss_pv=loss_pv)

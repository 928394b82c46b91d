"""The data model: a scenario as read, its segments with design currents, and a design.

Frozen dataclasses only; quantities are SI floats (V, A, W, VA, m, s, degC) or fractions,
with the unit in the field name where it is not obvious.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from enum import StrEnum
from pathlib import Path
from typing import Any, Literal

import numpy as np

from sizer.errors import ScenarioError
from sizer.units import MATERIALS, ConductorSpec, LoadSpec

SegmentKind = Literal["feeder", "branch"]

# Plausible ambient temperatures for a cable route, degC.
AMBIENT_RANGE_C = (-40.0, 80.0)


def _check(ok: bool, message: str, node: str | None, field_name: str) -> None:
    if not ok:
        raise ScenarioError(message, node=node, field=field_name)


@dataclass(frozen=True)
class Economics:
    """How losses are priced over the installation's life (fractions, not percents)."""

    energy_price_per_kwh: float
    discount_rate: float
    lifetime_years: float
    load_factor: float
    demand_charge_per_kw_month: float = 0.0
    escalation: float = 0.0
    load_growth: float = 0.0
    loss_load_factor: float | None = None
    hours_per_year: float = 8760.0
    # Grid emission factor for the CO2 column; 0.4 kg/kWh is a round mid-range grid value.
    emission_kg_per_kwh: float = 0.4
    loss_load_method: str = "moments"   # one of LOSS_LOAD_METHODS (sizer.operating)

    def __post_init__(self) -> None:
        _check(self.energy_price_per_kwh >= 0, "must not be negative", None, "energy_price")
        _check(self.demand_charge_per_kw_month >= 0, "must not be negative", None,
               "demand_charge")
        _check(-0.5 < self.discount_rate < 1.0, "must be between -50 % and 100 %", None,
               "discount_rate")
        _check(-0.5 < self.escalation < 1.0, "must be between -50 % and 100 %", None,
               "escalation")
        _check(-0.5 < self.load_growth < 1.0, "must be between -50 % and 100 %", None,
               "load_growth")
        _check(0 < self.lifetime_years <= 100, "must be between 0 and 100 years", None,
               "lifetime")
        _check(0 < self.load_factor <= 1, "must be in (0, 1]", None, "load_factor")
        if self.loss_load_factor is not None:
            _check(0 < self.loss_load_factor <= 1, "must be in (0, 1]", None,
                   "loss_load_factor")
        _check(0 < self.hours_per_year <= 8784, "must be between 0 and 8784 h", None, "hours")
        _check(self.emission_kg_per_kwh >= 0, "must not be negative", None, "emission_factor")
        _check(self.loss_load_method in LOSS_LOAD_METHODS,
               "must be one of " + ", ".join(f'"{m}"' for m in LOSS_LOAD_METHODS), None,
               "loss_load_method")


@dataclass(frozen=True)
class Prices:
    """Which price catalogue to use and, optionally, today's metal prices per kg."""

    catalogue: Path | None = None
    copper_per_kg: float | None = None
    aluminium_per_kg: float | None = None


@dataclass(frozen=True)
class Transformer:
    """A transformer at a node: the node's cable feeds its primary, its children its secondary."""

    rating_va: float
    secondary_v: float
    impedance_pct: float
    x_r: float
    secondary_phases: int = 3
    # No-load (core) loss as % of rating. 0.5 % is a stated assumption, typical of LV
    # dry-type units of 15-500 kVA (common practice, from memory); give the nameplate value.
    core_loss_pct: float = 0.5

    def __post_init__(self) -> None:
        _check(finite_positive(self.rating_va), "must be a positive apparent power", None,
               "transformer.rating")
        _check(finite_positive(self.secondary_v), "must be a positive voltage", None,
               "transformer.secondary")
        _check(math.isfinite(self.impedance_pct) and 0 < self.impedance_pct < 100,
               "must be a percentage above 0 and below 100 %", None, "transformer.impedance")
        _check(finite_positive(self.x_r), "must be a positive number", None, "transformer.x_r")
        _check(self.secondary_phases in (1, 3), "must be 1 or 3", None,
               "transformer.secondary_phases")
        _check(math.isfinite(self.core_loss_pct) and 0 <= self.core_loss_pct < 10,
               "must be between 0 and 10 %", None, "transformer.core_loss")

    @property
    def r_pct(self) -> float:
        """Resistance on the transformer's own rating: R% = Z% / √(1 + (X/R)²)."""
        return self.impedance_pct / math.sqrt(1.0 + self.x_r * self.x_r)

    @property
    def x_pct(self) -> float:
        """Leakage reactance on the transformer's own rating: X% = R% · X/R."""
        return self.r_pct * self.x_r


@dataclass(frozen=True)
class Motor:
    """A motor load; its starting demand is checked for voltage dip."""

    power_w: float             # rating, taken as the running input power (see loads.py)
    start_multiple: float = 6.0
    start_pf: float = 0.3
    fault_multiple: float | None = None  # locked-rotor × rated feeding a fault (None: profile's)

    def __post_init__(self) -> None:
        _check(finite_positive(self.power_w), "must be a positive power", None, "motor")
        _check(math.isfinite(self.start_multiple) and 1 <= self.start_multiple <= 20,
               "must be between 1 and 20", None, "motor.start_multiple")
        _check(math.isfinite(self.start_pf) and 0 < self.start_pf <= 1, "must be in (0, 1]",
               None, "motor.start_pf")
        _check(self.fault_multiple is None
               or (math.isfinite(self.fault_multiple) and 0 <= self.fault_multiple <= 20),
               "must be between 0 and 20", None, "motor.fault_multiple")


@dataclass(frozen=True)
class CableSettings:
    """Per-node cable choices, inherited from ``[defaults]`` unless the node overrides."""

    materials: tuple[str, ...] = ("Cu", "Al")
    insulation_c: float = 90.0
    terminals_c: float | None = 75.0   # None: the rule profile's terminal rule decides
    ambient_c: float = 30.0
    installation: str = "conduit"
    grouping: int | None = None        # current-carrying conductors in the raceway
    max_sets: int = 4
    oversize_termination: str | None = None  # "splice" | "refuse"; None: the profile's
    min_parallel_size: str | None = None     # None: the profile's minimum for parallel sets
    soil_resistivity_k_m_per_w: float | None = None  # buried runs; None: the reference
    depth_m: float | None = None                     # buried runs; None: the reference
    sets_in_one_raceway: bool = False  # all parallel sets in one raceway (they derate together)

    def __post_init__(self) -> None:
        _check(len(self.materials) > 0 and all(m in MATERIALS for m in self.materials),
               "must be one or more of \"Cu\", \"Al\"", None, "materials")
        _check(finite_positive(self.insulation_c), "must be a positive temperature", None,
               "insulation")
        if self.terminals_c is not None:
            _check(finite_positive(self.terminals_c), "must be a positive temperature", None,
                   "terminals")
        _check(math.isfinite(self.ambient_c) and AMBIENT_RANGE_C[0] <= self.ambient_c
               <= AMBIENT_RANGE_C[1], "must be between -40 degC and 80 degC", None, "ambient")
        if self.grouping is not None:
            _check(self.grouping >= 1, "must be at least 1", None, "grouping")
        _check(self.max_sets >= 1, "must be at least 1", None, "max_sets")


# How a run's loss-load factor is found (see sizer.operating): from the mean and spread of
# the loads below it ("moments"), or Buller-Woodrow on the run's own load factor.
LOSS_LOAD_METHODS = ("moments", "buller-woodrow")


@dataclass(frozen=True)
class Operating:
    """How a node's load runs, for losses only (None: the category's or parent's default).

    Sizing never reads these: ampacity, protection and drop use the code's sizing current.
    """

    category: str | None = None          # a row of sizer/operating_profiles.csv
    utilisation: float | None = None     # peak operating current / the declared load
    load_factor: float | None = None     # mean / peak operating current
    full_load_hours: float | None = None   # instead of load_factor: h / hours per year
    loss_load_factor: float | None = None  # mean square / peak² of the operating current
    peak_coincidence: float | None = None  # current at the building's peak / own peak
    coincidence: float | None = None     # feeders: operating peak / sum of the peaks below
    load_growth: float | None = None     # fraction per year, for this node and below

    def __post_init__(self) -> None:
        for name in ("utilisation", "load_factor", "loss_load_factor", "peak_coincidence",
                     "coincidence"):
            value = getattr(self, name)
            if value is not None:
                _check(math.isfinite(value) and 0 < value <= 1, "must be in (0, 1]", None,
                       name)
        _check(self.load_factor is None or self.full_load_hours is None,
               "give load_factor or full_load_hours, not both", None, "full_load_hours")
        if self.full_load_hours is not None:
            _check(math.isfinite(self.full_load_hours) and 0 < self.full_load_hours <= 8784,
                   "must be above 0 h and at most 8784 h", None, "full_load_hours")
        if self.load_factor is not None and self.loss_load_factor is not None:
            lf = self.load_factor
            _check(lf * lf * (1 - 1e-9) <= self.loss_load_factor <= lf * (1 + 1e-9),
                   f"{self.loss_load_factor:g} is impossible with load_factor {lf:g}: any "
                   f"load curve has LF² ≤ loss load factor ≤ LF", None, "loss_load_factor")
        if self.load_growth is not None:
            _check(math.isfinite(self.load_growth) and -0.5 < self.load_growth < 1.0,
                   "must be between -50 % and 100 %", None, "load_growth")


@dataclass(frozen=True)
class Source:
    """The service or supply transformer secondary at the root of the tree."""

    id: str
    voltage_v: float
    phases: int
    fault_current_a: float | None = None
    x_r: float = 10.0

    def __post_init__(self) -> None:
        _check(bool(self.id), "must not be empty", None, "id")
        _check(finite_positive(self.voltage_v), "must be a positive voltage", self.id, "voltage")
        _check(self.phases in (1, 3), "must be 1 or 3", self.id, "phases")
        if self.fault_current_a is not None:
            _check(finite_positive(self.fault_current_a), "must be a positive current",
                   self.id, "fault_current")
        _check(finite_positive(self.x_r), "must be a positive number", self.id, "x_r")


@dataclass(frozen=True)
class Node:
    """One node of the tree; its cable run from the parent is its segment."""

    id: str
    parent: str
    length_m: float
    voltage_v: float           # nominal voltage of the circuit feeding this node
    phases: int
    cable: CableSettings
    power_factor: float = 0.9
    load: LoadSpec | None = None
    continuous: bool = False
    ocpd_a: float | None = None
    demand_factor: float = 1.0
    pin: ConductorSpec | None = None
    transformer: Transformer | None = None
    motor: Motor | None = None
    clearing_time_s: float | None = None
    neutral: bool | None = None   # None: decided from the loads below (see loads.py)
    nonlinear: float = 0.0        # share of the node's own load that is non-linear (0-1)
    voltage_assumed: bool = False  # 1-phase with no voltage given: line to line was taken
    device_100_percent: bool = False  # device listed for 100 % continuous operation
    route: str = ""               # a shared route: runs in it derate from its whole content
    load_terminal_max: str = ""   # largest conductor the load end takes ("": as the device)
    device: str | None = None     # overcurrent device for disconnection (None: profile's)
    trip_multiple: float | None = None  # × rating that disconnects in time (None: device's)
    insulation_type: str | None = None  # thermoplastic | thermoset (None: price list / rating)
    let_through_a2s: float | None = None  # device let-through I²t (None: I² × clearing time)
    withstand: str = "finding"          # finding | enforce
    interrupting_a: float | None = None  # device interrupting rating (None: not checked)
    pe_rule: str | None = None          # table | adiabatic (None: the profile's)
    curves: tuple[str, ...] | None = None  # miniature-breaker curves allowed (None: device's)
    description: str = ""         # free text from the scenario, shown in reports
    operating: Operating = field(default_factory=Operating)  # how the load runs (losses)
    phase: str | None = None      # "A" | "B" | "C" | "AB" | "BC" | "CA"; None: assigned
    triplen: float = 0.0          # third-harmonic current / the load's current (neutral)
    spare: float = 0.0            # spare capacity reserved: sizes the run, not its losses
    # Neutral of a three-phase run over the phase area: 1 full, up to 2; 0: reduced to
    # its own current where the rule profile allows (sizer/rules/neutral.csv).
    neutral_size: float = 1.0

    def __post_init__(self) -> None:
        # The dataclass checks its own fields; whole-tree checks live in sizer.validation.
        # All fine (the usual case, tens of thousands of times per file): one expression.
        # A comparison with NaN is false, so "0 < x < inf" also says "finite".
        inf = math.inf
        if (self.id and self.parent and 0 < self.length_m < inf and 0 < self.voltage_v < inf
                and self.phases in (1, 3) and 0 < self.power_factor <= 1
                and 0 < self.demand_factor <= 1
                and (self.ocpd_a is None or 0 < self.ocpd_a < inf)
                and (self.clearing_time_s is None or 0 < self.clearing_time_s < inf)
                and 0 <= self.nonlinear <= 1 and 0 <= self.triplen <= 1
                and 0 <= self.spare <= 1
                and (self.neutral_size == 0.0 or 1.0 <= self.neutral_size <= 2.0)):
            return
        _check(bool(self.id), "must not be empty", None, "id")
        _check(bool(self.parent), "must name the parent node", self.id, "parent")
        _check(finite_positive(self.length_m), "must be a positive length", self.id, "length")
        _check(finite_positive(self.voltage_v), "must be a positive voltage", self.id,
               "voltage")
        _check(self.phases in (1, 3), "must be 1 or 3", self.id, "phases")
        _check(math.isfinite(self.power_factor) and 0 < self.power_factor <= 1,
               "must be in (0, 1]", self.id, "power_factor")
        _check(math.isfinite(self.demand_factor) and 0 < self.demand_factor <= 1,
               "must be in (0, 1]", self.id, "demand_factor")
        if self.ocpd_a is not None:
            _check(finite_positive(self.ocpd_a), "must be a positive current", self.id, "ocpd")
        if self.clearing_time_s is not None:
            _check(finite_positive(self.clearing_time_s), "must be a positive time", self.id,
                   "clearing_time")
        _check(math.isfinite(self.nonlinear) and 0 <= self.nonlinear <= 1,
               "must be a share from 0 to 1", self.id, "nonlinear")
        _check(math.isfinite(self.triplen) and 0 <= self.triplen <= 1,
               "must be between 0 and 100 %", self.id, "triplen")
        _check(math.isfinite(self.spare) and 0 <= self.spare <= 1,
               "must be between 0 and 100 %", self.id, "spare")
        _check(self.neutral_size == 0.0 or 1.0 <= self.neutral_size <= 2.0,
               "must be \"reduced\" or between 100 % and 200 %", self.id, "neutral_size")


@dataclass(frozen=True)
class Scenario:
    """A whole scenario: project facts, economics, prices, the source and the nodes.

    ``nodes`` are ordered parents first, so a node's parent always comes before it.
    """

    file: str
    title: str
    rules: str
    currency: str
    economics: Economics
    prices: Prices
    source: Source
    nodes: tuple[Node, ...]
    inputs: tuple[str, ...] = ()   # every file read (head and CSV schedule): never overwritten

    def index(self) -> dict[str, int]:
        """Node id → position in ``nodes``."""
        return {n.id: i for i, n in enumerate(self.nodes)}


@dataclass(frozen=True)
class Segment:
    """The run from a node's parent to the node, with its design currents."""

    index: int
    node: Node
    parent_index: int          # -1 when fed from the source
    kind: SegmentKind
    voltage_v: float
    phases: int
    current_a: float           # for voltage drop and losses
    required_ampacity_a: float  # before adjustment: with the continuous-load factor
    ocpd_a: float
    ocpd_chosen: bool          # True when sizer picked the device rating
    power_factor: float
    demand_va: complex         # P + jQ carried by the segment (demand factors applied)
    own_load_va: complex       # the node's own load, for the load flow
    neutral: bool              # a neutral is run (1-phase line-to-neutral: it is the return)
    is_leaf: bool
    # 1-phase between a line and the neutral (120 V on 208Y/120, 277 V on 480Y/277); a
    # 1-phase segment with ``neutral`` and not this is a 3-wire circuit (two lines + N).
    line_to_neutral: bool = False
    # The adjusted ampacity (after ambient and grouping factors) must carry this (A): the
    # load at 100 % (NEC 210.19(A)(1)(b)), or the motor rules 430.22/430.24 where motors
    # are below. ``required_ampacity_a`` is for the table ampacity before adjustment.
    required_adjusted_a: float = 0.0
    motor_branch: bool = False  # feeds one motor: conductors sized by 430.22, device by 430.52
    motor_basis: str = ""       # where the full-load current came from, in words
    service: bool = False       # fed from the source: service conductors, no EGC
    secondary: bool = False     # fed from a transformer node: its secondary conductors
    nonlinear_share: float = 0.0  # share of the demand that is non-linear (0-1)
    from_three_phase: bool = False  # fed from a 3-phase bus (a 1-phase 3-wire run: 2 lines + N)

    @property
    def id(self) -> str:
        """The node's id names its segment."""
        return self.node.id

    @property
    def length_m(self) -> float:
        """Route length of the run."""
        return self.node.length_m


@dataclass(frozen=True)
class CandidateTable:
    """Every (segment × material × size × sets) row, as parallel numpy arrays in SI.

    Rows of segment ``s`` are ``offsets[s]:offsets[s + 1]``; only rows that pass every
    segment-local rule are here. ``rejected`` counts why rows were dropped, per segment,
    for the diagnosis.
    """

    offsets: np.ndarray
    segment: np.ndarray
    material: np.ndarray        # 0 Cu, 1 Al
    size_index: np.ndarray
    sets: np.ndarray
    ampacity_a: np.ndarray
    temp_c: np.ndarray
    r_ohm: np.ndarray           # per phase, whole run, sets combined, at temp_c
    x_ohm: np.ndarray
    vd_pct: np.ndarray
    loss_w: np.ndarray          # peak I²R loss of the whole circuit
    capex: np.ndarray
    loss_pv: np.ndarray
    egc_size_index: np.ndarray
    loop_ohm: np.ndarray        # complex: line + protective conductor at the fault-loop temp
    rejected: tuple[str, ...] = field(default=())
    # table ampacity before adjustment (terminal-limited column, sets summed), for the
    # first ampacity test (NEC 210.19(A)(1)(a)); empty when not built
    ampacity_before_a: np.ndarray = field(default_factory=lambda: np.zeros(0))
    neutral_size_index: np.ndarray | None = None   # the neutral's own size (3-phase runs)
    # What it takes to build each row (zeros/-1 when the profile has no such rules):
    terminal_max: np.ndarray | None = None      # largest size the device terminal takes, -1 any
    splice_ends: np.ndarray | None = None       # ends (0-2) landed by a reducing splice
    termination_capex: np.ndarray | None = None  # the splices, priced
    raceway_size: np.ndarray | None = None      # trade size or tray width index, -1 none
    raceway_capex: np.ndarray | None = None     # raceways (and trench), installed
    build_fail: np.ndarray | None = None        # 0 buildable; 1 terminal, 2 raceway (pins only)
    route_count: np.ndarray | None = None       # conductors the row adds to its shared route
    route_top: np.ndarray | None = None         # most conductors its derating allows there
    # sizes the EGC / PE stands above the profile's rule, bought to meet disconnection
    # (sizer.earthfault); None when no row has one
    pe_step: np.ndarray | None = None
    # a miniature-breaker curve other than the run's own ("" own device) and the trip
    # current of every row (sizer.earthfault); None when no row has another curve
    curve: np.ndarray | None = None
    trip_a: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.segment.shape[0])

    def hand_over(self) -> dict[str, Any]:
        """Every field by name, this table left empty (None throughout).

        For a step that replaces the table by a larger one: each column can then be let
        go as soon as it is copied, instead of two whole tables living at once. The
        table is not used again.
        """
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        for name in out:
            object.__setattr__(self, name, None)
        return out


@dataclass(frozen=True)
class SegmentResult:
    """One segment of a finished design, as written to the JSON results."""

    id: str
    parent: str
    kind: SegmentKind
    material: str
    size: str
    sets: int
    egc: str | None             # None on service conductors: they carry no EGC
    length_m: float
    current_a: float
    ampacity_a: float
    vd_pct: float
    path_vd_pct: float
    r_ohm: float
    x_ohm: float
    ocpd_a: float
    capex: float
    loss_kw: float
    loss_pv: float
    temp_c: float
    voltage_v: float
    phases: int
    pinned: bool = False
    loadflow_drop_pct: float | None = None
    bonding_jumper: str | None = None  # service conductors: supply-side bonding jumper
    operating_a: float = 0.0          # peak operating current used for losses
    phase: str | None = None          # single-phase runs on a three-phase system
    phase_currents_a: tuple[float, float, float] | None = None  # three-phase runs (sizing)
    neutral_a: float | None = None    # three-phase runs: phasor sum + triplens (sizing)
    neutral_size: str | None = None   # three-phase runs with a neutral: its own size
    loss_kwh_per_year: float = 0.0    # first year, from the run's own loss-load factor
    loss_cost_per_year: float = 0.0   # first year: energy + demand charge at the building peak
    terminal_max: str = ""        # largest conductor the device terminal takes, per set
    termination: str = ""         # "direct" | "reducing splice"
    raceway: str = ""             # e.g. "2 x 53 mm (2 in) EMT", or the tray width
    conductor_capex: float = 0.0  # conductors, EGC and pulling them
    termination_capex: float = 0.0
    raceway_capex: float = 0.0
    route: str = ""               # the shared route, if any
    route_conductors: int = 0     # current-carrying conductors its derating counts
    fault_ka: float | None = None        # maximum three-phase fault (c_max, R at 20 degC, motors)
    fault_min_ka: float | None = None    # minimum three-phase fault (c_min, R hot, no motors)
    earth_fault_a: float | None = None   # minimum line-to-earth fault at the cable's far end
    trip_a: float | None = None          # current that disconnects the device in time
    pe_step: int = 0     # sizes the EGC / PE stands above the rule's, to meet disconnection
    curve: str | None = None  # miniature-breaker curve (B, C, D) of the run's device


@dataclass(frozen=True)
class Totals:
    """Money and energy summed over the design."""

    capex: float
    loss_pv: float
    loss_kwh_per_year: float

    @property
    def lifecycle(self) -> float:
        """Upfront cost plus the present value of losses."""
        return self.capex + self.loss_pv


@dataclass(frozen=True)
class Violation:
    """A rule a design breaks: which segment, which rule, the value and the limit."""

    segment: str
    rule: str
    value: float
    limit: float
    message: str = ""


class DesignStatus(StrEnum):
    """What a design document is, as written in every result (the JSON ``status``)."""

    OPTIMAL = "optimal"          # proven least cost
    BOUNDED = "bounded"          # least cost within a stated tolerance (deep trees)
    TIME_LIMIT = "time_limit"    # a real design, stopped at the time limit (see its gap)
    NO_DESIGN = "no_design"      # the solver stopped without finding any design
    INFEASIBLE = "infeasible"    # proven: no design meets the rules (see the diagnosis)
    COMPLIANT = "compliant"      # a pinned design that meets every rule
    VIOLATIONS = "violations"    # a pinned design that breaks rules (see violations)

    @property
    def words(self) -> str:
        """The status in plain words, as every report and summary shows it."""
        return _STATUS_WORDS[self]

    @property
    def has_design(self) -> bool:
        """True when the document carries a design (segments), False for the reasons why not."""
        return self not in (DesignStatus.NO_DESIGN, DesignStatus.INFEASIBLE)


_STATUS_WORDS = {
    DesignStatus.OPTIMAL: "optimal (proven)",
    DesignStatus.BOUNDED: "meets every limit; least cost within the tolerance the notes "
                          "state (search bounded on a deep tree), not proven optimal",
    DesignStatus.TIME_LIMIT: "stopped at the time limit: best design found, optimality "
                             "not proven",
    DesignStatus.NO_DESIGN: "no design found (the solver stopped before finding one)",
    DesignStatus.INFEASIBLE: "no design satisfies the rules",
    DesignStatus.COMPLIANT: "the design meets every rule checked",
    DesignStatus.VIOLATIONS: "the design breaks rules",
}


@dataclass(frozen=True)
class Design:
    """A finished design (or the reason there is none)."""

    status: DesignStatus
    objective: str
    rules: str
    currency: str
    totals: Totals
    segments: tuple[SegmentResult, ...]
    engine: str = ""
    proven_optimal: bool = False
    gap: float | None = None
    diagnosis: tuple[str, ...] = ()
    violations: tuple[Violation, ...] = ()
    notes: tuple[str, ...] = ()
    choice: tuple[int, ...] = field(default=(), repr=False)  # candidate rows, not exported

    def worst_path_drop_pct(self) -> float:
        """The largest source-to-end drop over all segments (estimate)."""
        return max((s.path_vd_pct for s in self.segments), default=0.0)

    def key_figures(self) -> KeyFigures:
        """Its totals and the few figures a page compares designs by."""
        segs = self.segments
        flows = [s.loadflow_drop_pct for s in segs if s.loadflow_drop_pct is not None]
        by_flow = bool(segs) and len(flows) == len(segs)
        return KeyFigures(
            totals=self.totals,
            loss_w=1e3 * sum(s.loss_kw for s in segs),
            loss_cost_per_year=sum(s.loss_cost_per_year for s in segs),
            findings=len(self.violations),
            worst_drop_pct=max(flows) if by_flow else self.worst_path_drop_pct(),
            drop_basis=LOADFLOW_BASIS if by_flow else ESTIMATE_BASIS,
            conductors=tuple((s.material, s.size, s.sets) for s in segs))


LOADFLOW_BASIS = "AC load flow"
ESTIMATE_BASIS = "linear estimate"


@dataclass(frozen=True)
class KeyFigures:
    """What a page shows of a design beside the others: totals and a few figures.

    Money in the design's currency. ``conductors`` is each run's (material, size, sets)
    in run order: two designs with the same conductors are one design on a page.
    """

    totals: Totals
    loss_w: float                  # peak losses, W
    loss_cost_per_year: float      # first year, each run at its own loss-load factor
    findings: int                  # rule findings, verification included
    worst_drop_pct: float          # source to end: by load flow when it ran for every run
    drop_basis: str                # LOADFLOW_BASIS | ESTIMATE_BASIS
    conductors: tuple[tuple[str, str, int], ...]


def finite_positive(value: float) -> bool:
    """True for a finite number above zero."""
    return math.isfinite(value) and value > 0

"""The data model: a scenario as read, its segments with design currents, and a design.

Frozen dataclasses only; quantities are SI floats (V, A, W, VA, m, s, degC) or fractions,
with the unit in the field name where it is not obvious.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np

from sizer.errors import ScenarioError
from sizer.units import ConductorSpec, LoadSpec

SegmentKind = Literal["feeder", "branch"]


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


@dataclass(frozen=True)
class Motor:
    """A motor load; its starting demand is checked for voltage dip."""

    power_w: float
    start_multiple: float = 6.0
    start_pf: float = 0.3


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


@dataclass(frozen=True)
class Source:
    """The service or supply transformer secondary at the root of the tree."""

    id: str
    voltage_v: float
    phases: int
    fault_current_a: float | None = None
    x_r: float = 10.0


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
    required_ampacity_a: float  # with the continuous-load factor
    ocpd_a: float
    ocpd_chosen: bool          # True when sizer picked the device rating
    power_factor: float
    demand_va: complex         # P + jQ carried by the segment (demand factors applied)
    own_load_va: complex       # the node's own load, for the load flow
    neutral: bool
    is_leaf: bool

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
    rejected: tuple[str, ...] = field(default=())

    def __len__(self) -> int:
        return int(self.segment.shape[0])


@dataclass(frozen=True)
class SegmentResult:
    """One segment of a finished design, as written to the JSON results."""

    id: str
    parent: str
    kind: SegmentKind
    material: str
    size: str
    sets: int
    egc: str
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
    fault_ka: float | None = None


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


@dataclass(frozen=True)
class Design:
    """A finished design (or the reason there is none)."""

    status: str                 # optimal | infeasible | time_limit | error | compliant | violations
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

    def worst_path_drop_pct(self) -> float:
        """The largest source-to-end drop over all segments (estimate)."""
        return max((s.path_vd_pct for s in self.segments), default=0.0)


def finite_positive(value: float) -> bool:
    """True for a finite number above zero."""
    return math.isfinite(value) and value > 0

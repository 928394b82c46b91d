"""Report tables computed from finished designs: options, upsizing justification, schedule.

Pure computation, no drawing and no HTML: every table is a tuple of frozen row
dataclasses, so plots and renderers read named fields. Money is in the scenario's
currency, energy in kWh, drops in % of each circuit's nominal voltage, lengths in m.

The justification follows the economics of ``sizer.economics`` (IEC 60287-3-2): a
segment's peak-loss saving ΔP (W) saves ΔP·(T·P + D) in the first year, grows with
(1 + a)²·(1 + b) a year, and its NPV is −added cost + ΔP·F.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

from sizer.economics import EconomicParams, npv, q_factor, simple_payback_years
from sizer.model import Design, SegmentResult, Violation
from sizer.operating import load_profiles
from sizer.optimize import Prepared
from sizer.units import conductor_label
from sizer.workflow import DisconnectionDriver, FrontierPoint, Option

# --- labels ---------------------------------------------------------------------------


def conductor_text(sets: int, size: str, material: str) -> str:
    """A conductor as the trade writes it: "350 kcmil Al", "2x 500 kcmil Cu"."""
    return conductor_label(sets, size, material)


def segment_conductor(s: SegmentResult) -> str:
    """The conductor of a design segment as text."""
    return conductor_text(s.sets, s.size, s.material)


def money(value: float) -> str:
    """Whole money units with thousands separators ("1,240"); "—" when not finite."""
    if not math.isfinite(value):
        return "—"
    text = f"{value:,.0f}"
    return "0" if text == "-0" else text


def peak_loss_w(design: Design) -> float:
    """Total peak I²R loss of a design (W)."""
    return 1e3 * sum(s.loss_kw for s in design.segments)


def annual_loss_cost(design: Design) -> float:
    """First-year cost of the design's losses: each run's energy and demand charge."""
    return sum(s.loss_cost_per_year for s in design.segments)


# --- options side by side ---------------------------------------------------------------


@dataclass(frozen=True)
class OptionRow:
    """One option of the side-by-side comparison (money in the scenario's currency)."""

    key: str
    title: str
    status: str
    capex: float
    loss_pv: float
    lifecycle: float
    loss_kwh_per_year: float          # first year
    loss_cost_per_year: float         # first year: energy + demand charge
    worst_drop_pct: float             # estimate (linear drop formula)
    worst_loadflow_drop_pct: float | None
    co2_t_per_year: float             # first year, from the grid emission factor
    co2_t_lifetime: float             # over the lifetime, with load growth
    # the upfront cost by what it buys (NaN without a design)
    conductor_capex: float = math.nan  # conductors, EGC and pulling them
    termination_capex: float = math.nan  # reducing splices
    raceway_capex: float = math.nan    # raceways, trays and trenches, installed

    @property
    def feasible(self) -> bool:
        """True when the option has a design (its numbers mean something)."""
        return math.isfinite(self.capex)


def lifetime_energy_factor(economics: EconomicParams) -> float:
    """Lifetime energy / first-year energy: Σ_{n=1..N} g^(n−1) with g = (1 + a)² (load growth a)."""
    return float(q_factor((1.0 + economics.load_growth) ** 2, economics.years))


def option_row(key: str, title: str, design: Design, economics: EconomicParams,
               emission_kg_per_kwh: float) -> OptionRow:
    """The comparison row of one design; NaN numbers when it has no segments."""
    if not design.segments:
        nan = math.nan
        return OptionRow(key, title, design.status, nan, nan, nan, nan, nan, nan, None,
                         nan, nan)
    kwh = design.totals.loss_kwh_per_year
    flows = [s.loadflow_drop_pct for s in design.segments]
    lf = max(flows) if all(v is not None for v in flows) else None  # type: ignore[type-var]
    co2_year = kwh * emission_kg_per_kwh / 1e3
    return OptionRow(
        key=key, title=title, status=design.status,
        capex=design.totals.capex, loss_pv=design.totals.loss_pv,
        lifecycle=design.totals.lifecycle,
        loss_kwh_per_year=kwh,
        loss_cost_per_year=annual_loss_cost(design),
        worst_drop_pct=design.worst_path_drop_pct(),
        worst_loadflow_drop_pct=lf,
        co2_t_per_year=co2_year,
        co2_t_lifetime=co2_year * lifetime_energy_factor(economics),
        conductor_capex=sum(s.conductor_capex for s in design.segments),
        termination_capex=sum(s.termination_capex for s in design.segments),
        raceway_capex=sum(s.raceway_capex for s in design.segments),
    )


def options_table(options: Sequence[Option], economics: EconomicParams,
                  emission_kg_per_kwh: float) -> tuple[OptionRow, ...]:
    """Code minimum, lifecycle optimum, all copper, as pinned: one row each, in that order."""
    return tuple(option_row(o.key, o.title, o.design, economics, emission_kg_per_kwh)
                 for o in options)


def option_design(options: Sequence[Option], key: str) -> Design | None:
    """The design of the option with ``key`` when it has segments."""
    for o in options:
        if o.key == key and o.design.segments:
            return o.design
    return None


# --- upsizing justification ----------------------------------------------------------


@dataclass(frozen=True)
class JustificationRow:
    """Why one segment is worth upsizing from the code minimum (first-year savings)."""

    segment: str
    code_minimum: str           # conductor text
    lifecycle: str
    added_cost: float
    peak_loss_saving_w: float
    kwh_saved_per_year: float
    money_saved_per_year: float
    payback_years: float        # simple, undiscounted; inf = never
    npv: float                  # over the lifetime, discounted
    sentence: str


def justification_sentence(segment: str, before: str, after: str, added_cost: float,
                           kwh_per_year: float, money_per_year: float, payback_years: float,
                           npv_value: float, years: float, currency: str,
                           same_material: bool = True) -> str:
    """One plain-language sentence an owner can read about one upsizing."""
    verb = "Upsizing" if same_material else "Changing"
    head = (f"{verb} {segment} from {before} to {after} costs {money(added_cost)} {currency} "
            f"more now")
    if money_per_year > 0:
        saving = (f", saves {money(kwh_per_year)} kWh ({money(money_per_year)} {currency}) "
                  f"a year")
        pays = (f" and pays back in {payback_years:.1f} years (simple payback)"
                if math.isfinite(payback_years)
                else "")
    else:
        saving, pays = ", saves no energy", " and never pays back"
    if npv_value >= 0:
        worth = f"over {years:g} years it is worth {money(npv_value)} {currency} today."
    else:
        worth = (f"over {years:g} years it costs {money(-npv_value)} {currency} more than it "
                 f"saves, in today's money (it lets other runs stay within the drop limits).")
    return f"{head}{saving}{pays}; {worth}"


def justification_table(code_minimum: Design, lifecycle: Design,
                        economics: EconomicParams, currency: str) -> tuple[JustificationRow, ...]:
    """Each segment where the lifecycle design differs and costs more upfront, by NPV (best first).

    added cost = capex(lifecycle) − capex(code minimum); ΔP = peak loss saved (W);
    kWh/year = ΔP·T/1000; money/year = ΔP·(T·P + D·k²); payback = added / money per year;
    NPV = −added + ΔP·F, with T, k and F the run's own (``sizer.operating``), so
    NPV = −added + the loss present value saved.
    """
    base = {s.id: s for s in code_minimum.segments}
    rows = []
    for s in lifecycle.segments:
        b = base.get(s.id)
        if b is None or (b.material, b.size, b.sets) == (s.material, s.size, s.sets):
            continue
        added = s.capex - b.capex
        if added <= 0:
            continue
        saving_w = (b.loss_kw - s.loss_kw) * 1e3
        kwh = b.loss_kwh_per_year - s.loss_kwh_per_year
        per_year = b.loss_cost_per_year - s.loss_cost_per_year
        payback = float(simple_payback_years(added, per_year))
        value = (b.loss_pv - s.loss_pv) - added
        before, after = segment_conductor(b), segment_conductor(s)
        rows.append(JustificationRow(
            segment=s.id, code_minimum=before, lifecycle=after, added_cost=added,
            peak_loss_saving_w=saving_w, kwh_saved_per_year=kwh,
            money_saved_per_year=per_year, payback_years=payback, npv=value,
            sentence=justification_sentence(s.id, before, after, added, kwh, per_year,
                                            payback, value, economics.years, currency,
                                            same_material=b.material == s.material),
        ))
    rows.sort(key=lambda r: (-r.npv, r.segment))
    return tuple(rows)


# --- cumulative cash flow of the whole upsizing ----------------------------------------


@dataclass(frozen=True)
class CashFlowRow:
    """One year of the upsizing's cash flow (year 0 is the purchase)."""

    year: int
    flow: float                  # that year's money: −added cost in year 0, saving after
    cumulative: float            # undiscounted running sum
    cumulative_discounted: float  # running sum of flow/(1 + i)^year


@dataclass(frozen=True)
class CashFlow:
    """The lifecycle design against the code minimum, whole design, year by year."""

    rows: tuple[CashFlowRow, ...]
    added_cost: float
    first_year_saving: float
    payback_years: float         # simple: added cost / first-year saving
    npv: float                   # −added + PV of the savings over the lifetime

    def crossing_year(self, discounted: bool = False) -> float | None:
        """Where the cumulative curve first reaches zero (interpolated), None if never."""
        values = [r.cumulative_discounted if discounted else r.cumulative for r in self.rows]
        for prev, row, v0, v1 in zip(self.rows, self.rows[1:], values, values[1:],
                                     strict=False):
            if v0 < 0 <= v1:
                return prev.year + (row.year - prev.year) * (-v0) / (v1 - v0)
        return 0.0 if values and values[0] >= 0 else None


def upsizing_cash_flow(code_minimum: Design, lifecycle: Design,
                       economics: EconomicParams) -> CashFlow:
    """Cumulative cash flow of building the lifecycle design instead of the code minimum.

    Year 0: −Δcapex. Year n ≥ 1: S·g^(n−1) with S = Σ ΔP·(T·P + D·k²) the first-year saving
    (each run its own T, k)
    and g = (1 + a)²·(1 + b); discounted by (1 + i)^n. Over whole years the discounted
    sum ends at the same NPV as ``sizer.economics.npv``.
    """
    added = lifecycle.totals.capex - code_minimum.totals.capex
    first = annual_loss_cost(code_minimum) - annual_loss_cost(lifecycle)
    growth = (1.0 + economics.load_growth) ** 2 * (1.0 + economics.escalation)
    years = max(math.ceil(economics.years - 1e-9), 1)
    rows = [CashFlowRow(0, -added, -added, -added)]
    cum, cum_d = -added, -added
    for n in range(1, years + 1):
        flow = first * growth ** (n - 1)
        cum += flow
        cum_d += flow / (1.0 + economics.discount) ** n
        rows.append(CashFlowRow(n, flow, cum, cum_d))
    value = float(npv(added, first, economics.escalation, economics.discount, economics.years,
                      economics.load_growth))
    return CashFlow(tuple(rows), added, first, float(simple_payback_years(added, first)), value)


# --- schedule ----------------------------------------------------------------------------


@dataclass(frozen=True)
class ScheduleRow:
    """One segment of the cable schedule."""

    from_id: str
    to_id: str
    description: str
    kind: str
    voltage_v: float
    phases: int
    length_m: float
    current_a: float
    ocpd_a: float
    material: str
    size: str
    sets: int
    conductor: str
    egc: str                      # the EGC, or "bond ..." (bonding jumper) on service runs
    ampacity_a: float
    terminal_max: str             # largest conductor the device terminal takes, per set
    termination: str              # "direct" | "reducing splice"
    raceway: str
    utilisation_pct: float        # design current / ampacity
    vd_pct: float                 # the run's own drop
    path_vd_pct: float            # source to far end, estimate
    loadflow_drop_pct: float | None
    fault_ka: float | None
    earth_fault_a: float | None
    trip_a: float | None
    capex: float
    loss_kw: float
    loss_pv: float
    pinned: bool


def grounding_label(s: SegmentResult) -> str:
    """The EGC's size, or the supply-side bonding jumper's on service conductors."""
    if s.egc is not None:
        return s.egc
    return f"bond {s.bonding_jumper}" if s.bonding_jumper else ""


def schedule_table(design: Design,
                   descriptions: Mapping[str, str] | None = None) -> tuple[ScheduleRow, ...]:
    """The per-segment schedule, in the design's order (parents first)."""
    text = descriptions or {}
    return tuple(
        ScheduleRow(
            from_id=s.parent, to_id=s.id, description=text.get(s.id, ""), kind=s.kind,
            voltage_v=s.voltage_v, phases=s.phases, length_m=s.length_m,
            current_a=s.current_a, ocpd_a=s.ocpd_a, material=s.material, size=s.size,
            sets=s.sets, conductor=segment_conductor(s), egc=grounding_label(s),
            ampacity_a=s.ampacity_a,
            terminal_max=s.terminal_max, termination=s.termination, raceway=s.raceway,
            utilisation_pct=100.0 * s.current_a / s.ampacity_a if s.ampacity_a > 0 else math.nan,
            vd_pct=s.vd_pct, path_vd_pct=s.path_vd_pct, loadflow_drop_pct=s.loadflow_drop_pct,
            fault_ka=s.fault_ka, earth_fault_a=s.earth_fault_a, trip_a=s.trip_a,
            capex=s.capex, loss_kw=s.loss_kw, loss_pv=s.loss_pv,
            pinned=s.pinned,
        )
        for s in design.segments)


@dataclass(frozen=True)
class PanelRow:
    """The runs fed from one panel or board, summed: one row of a large tree's schedule."""

    panel: str                    # the node (or the source) that feeds the runs
    runs: int
    conductors: str               # runs per material, e.g. "Cu 28, Al 5"
    capex: float
    loss_pv: float
    worst_drop_pct: float         # path drop at the far end: load flow where run, else estimate
    worst_run: str
    over_limit: int               # runs with a drop over its limit
    findings: int                 # findings on these runs (verification included)


def panel_summary(design: Design, own_limit_pct: Callable[[str], float],
                  path_limit_pct: Sequence[float]) -> tuple[PanelRow, ...]:
    """The schedule summed by the panel each run hangs on, panels in the design's order.

    ``own_limit_pct(kind)`` is a run's own drop limit; ``path_limit_pct[i]`` the limit of
    run i's path drop (inf where none applies, e.g. a feeder). One pass over the runs.
    """
    findings: dict[str, int] = {}
    for v in design.violations:
        findings[v.segment] = findings.get(v.segment, 0) + 1
    groups: dict[str, list[int]] = {}
    for i, s in enumerate(design.segments):
        groups.setdefault(s.parent, []).append(i)
    rows = []
    for panel, members in groups.items():
        segs = [design.segments[i] for i in members]
        materials: dict[str, int] = {}
        for s in segs:
            materials[s.material] = materials.get(s.material, 0) + 1
        drops = [(s.loadflow_drop_pct if s.loadflow_drop_pct is not None else s.path_vd_pct,
                  s.id) for s in segs]
        worst, worst_run = max(drops)
        over = sum(1 for i, s, (drop, _id) in zip(members, segs, drops, strict=True)
                   if s.vd_pct > own_limit_pct(s.kind) + 1e-9
                   or max(drop, s.path_vd_pct) > path_limit_pct[i] + 1e-9)
        rows.append(PanelRow(
            panel=panel, runs=len(segs),
            conductors=", ".join(f"{m} {n}" for m, n in sorted(materials.items())),
            capex=sum(s.capex for s in segs), loss_pv=sum(s.loss_pv for s in segs),
            worst_drop_pct=worst, worst_run=worst_run, over_limit=over,
            findings=sum(findings.get(s.id, 0) for s in segs)))
    return tuple(rows)


@dataclass(frozen=True)
class FindingGroup:
    """Findings of one rule on the runs fed from one board: one line, not one per run."""

    rule: str
    board: str                    # the parent the runs hang on
    kind: str                     # "branch circuit" | "feeder" (the first run's kind)
    segments: tuple[str, ...]
    worst: Violation              # the finding furthest over its limit (what resolves it)

    @property
    def title(self) -> str:
        """"12 branch circuits on HP-1" or the run's own name when it is alone."""
        if len(self.segments) == 1:
            return self.segments[0]
        return f"{len(self.segments)} {self.kind}s on {self.board}"


def group_findings(design: Design, min_group: int = 2) -> tuple[FindingGroup, ...]:
    """Findings grouped by (rule, board): identical problems read as one line.

    Groups keep the order of their first finding; a group of fewer than ``min_group``
    runs stays one line per run. Each group shows its worst finding (largest value over
    limit), whose message says what resolves it.
    """
    by_id = {s.id: s for s in design.segments}
    groups: dict[tuple[str, str], list[Violation]] = {}
    for v in design.violations:
        seg = by_id.get(v.segment)
        board = seg.parent if seg is not None else ""
        groups.setdefault((v.rule, board), []).append(v)
    out: list[FindingGroup] = []
    for (rule, board), found in groups.items():
        parts = [found] if len(found) >= min_group else [[v] for v in found]
        for part in parts:
            seg = by_id.get(part[0].segment)
            kind = "branch circuit" if seg is None or seg.kind == "branch" else "feeder"

            def excess(v: Violation) -> float:
                return v.value / v.limit if v.limit else math.inf

            out.append(FindingGroup(rule, board, kind, tuple(v.segment for v in part),
                                    max(part, key=excess)))
    return tuple(out)


def disconnection_sentence(driver: DisconnectionDriver) -> str:
    """Why one run is larger than drop alone asks: its device must still disconnect."""
    d = driver
    return (f"{d.segment}: {d.chosen} instead of the {d.without} that drop and ampacity "
            f"alone allow, so that the minimum earth fault at its far end "
            f"({d.earth_fault_a:,.0f} A) reaches the {d.trip_a:,.0f} A that disconnects its "
            f"{d.ocpd_a:g} A device within {d.time_s:g} s.")


# --- voltage profile along the worst path -------------------------------------------------


@dataclass(frozen=True)
class ProfilePoint:
    """The far end of one run on the path: distance from the source and drop so far."""

    node: str
    distance_m: float
    drop_pct: float                # estimate
    loadflow_drop_pct: float | None


@dataclass(frozen=True)
class VoltageProfile:
    """Drop against distance from the source to the worst load (first point: the source)."""

    load: str
    points: tuple[ProfilePoint, ...]
    by_loadflow: bool              # the worst load was picked by the load flow


def worst_path_profile(design: Design) -> VoltageProfile:
    """The path to the load with the largest drop (load flow when present, else estimate)."""
    segs = {s.id: s for s in design.segments}
    if not segs:
        return VoltageProfile("", (), False)
    by_lf = all(s.loadflow_drop_pct is not None for s in design.segments)

    def worst_key(s: SegmentResult) -> float:
        return s.loadflow_drop_pct if by_lf else s.path_vd_pct  # type: ignore[return-value]

    worst = max(design.segments, key=worst_key)
    chain = [worst]
    while chain[-1].parent in segs:
        chain.append(segs[chain[-1].parent])
    chain.reverse()
    points = [ProfilePoint(chain[0].parent, 0.0, 0.0, 0.0 if by_lf else None)]
    distance = 0.0
    for s in chain:
        distance += s.length_m
        points.append(ProfilePoint(s.id, distance, s.path_vd_pct, s.loadflow_drop_pct))
    return VoltageProfile(worst.id, tuple(points), by_lf)


# --- frontier and cost breakdown ---------------------------------------------------------


@dataclass(frozen=True)
class FrontierRow:
    """One point of the upfront-cost against loss-PV frontier."""

    capex: float
    loss_pv: float
    lifecycle: float
    method: str                  # "weighted sum" | "epsilon constraint"
    proven_optimal: bool


def frontier_table(points: Sequence[FrontierPoint]) -> tuple[FrontierRow, ...]:
    """The frontier points, cheapest upfront first."""
    return tuple(FrontierRow(p.capex, p.loss_pv, p.lifecycle, p.method, p.proven_optimal)
                 for p in sorted(points, key=lambda p: (p.capex, p.loss_pv)))


@dataclass(frozen=True)
class CostRow:
    """Upfront cost and loss PV of one segment (or of the remaining segments together)."""

    segment: str
    capex: float
    loss_pv: float
    count: int = 1               # segments this row stands for

    @property
    def lifecycle(self) -> float:
        """Upfront plus loss PV."""
        return self.capex + self.loss_pv


def cost_breakdown(design: Design, top: int | None = 15) -> tuple[CostRow, ...]:
    """Segments by lifetime cost, largest first; beyond ``top`` they are summed in one row."""
    rows = sorted((CostRow(s.id, s.capex, s.loss_pv) for s in design.segments),
                  key=lambda r: (-r.lifecycle, r.segment))
    if top is None or len(rows) <= top:
        return tuple(rows)
    keep, rest = rows[: top - 1], rows[top - 1:]
    other = CostRow(f"other {len(rest)} runs", sum(r.capex for r in rest),
                    sum(r.loss_pv for r in rest), len(rest))
    return (*keep, other)


# --- how the loads run (the operating profiles used for losses) -------------------------


@dataclass(frozen=True)
class ProfileRow:
    """One load category as used for losses, with how many loads took it."""

    category: str
    loads: int
    overridden: int            # loads that override one of the category's values
    utilisation: float         # the category's (overrides aside)
    load_factor: float
    full_load_hours: float     # load factor × hours per year
    loss_load_factor: float    # mean over the loads of the category
    peak_coincidence: float
    source: str


def profiles_table(prep: Prepared) -> tuple[ProfileRow, ...]:
    """The operating profiles of the design's loads, one row per category used."""
    profiles = load_profiles()
    runs = prep.runs
    hours = prep.economics.hours_per_year
    rows = []
    for name in profiles:
        idx = [i for i, c in enumerate(runs.category) if c == name]
        if not idx:
            continue
        prof = profiles[name]
        lf = prof.load_factor
        if lf is None:
            lf = (prep.economics.load_factor if prep.economics.load_factor is not None
                  else prep.economics.theta)
        op = [prep.segments[i].node.operating for i in idx]
        overridden = sum(1 for o in op if any(
            v is not None for v in (o.utilisation, o.load_factor, o.loss_load_factor,
                                    o.peak_coincidence)))
        rows.append(ProfileRow(
            category=name, loads=len(idx), overridden=overridden,
            utilisation=prof.utilisation, load_factor=lf, full_load_hours=lf * hours,
            loss_load_factor=sum(float(runs.loss_load_factor[i]) for i in idx) / len(idx),
            peak_coincidence=prof.peak_coincidence, source=prof.source))
    return tuple(rows)

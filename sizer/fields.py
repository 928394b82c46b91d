"""The field registry: every key a scenario may hold, defined once.

Each :class:`Field` says where the key may stand (its table, and for cable settings also
``[defaults]``), how its value is read, its unit, default and allowed range, what it
means in one line, which model attribute holds it, and whether a sweep may vary it.
The scenario reader, its messages, ``sizer sweep --vary``, the CSV node schedule's
columns, the report's assumptions table and the key reference (``scenarios/README.md``,
made by :func:`key_reference`) all read this one list.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

from sizer import readers as r
from sizer.readers import (
    CLEARING_TIME_S,
    DEFAULT_POWER_FACTOR,
    MAX_CURRENT_A,
    MAX_GROUPING,
    MAX_LENGTH_M,
    MAX_PRICE,
    MAX_SETS,
    MAX_VOLTAGE_V,
    MIN_FAULT_A,
    Reader,
)

TABLES = ("project", "economics", "prices", "defaults", "source", "node", "transformer",
          "motor")
_AMBIENT = f"{r.AMBIENT_RANGE_C[0]:g} to {r.AMBIENT_RANGE_C[1]:g} degC"


@dataclass(frozen=True)
class Field:
    """One scenario key.

    ``table`` is where it is written (``transformer`` and ``motor`` are node sub-tables);
    ``also_defaults`` lets ``[defaults]`` give it for every node. ``read`` turns the raw
    value into the model's SI value; a money field has ``money_per`` instead (its reader
    needs the project currency: :meth:`reader`). ``unit`` is the unit the key is written
    in (``{cur}`` for the currency; ``%`` fields hold a fraction in the model, except
    where ``attr`` ends in ``_pct``). ``default`` is the value when absent (None: not
    given); ``required`` keys have none. ``sweep`` marks the fields ``sizer sweep``
    varies; ``metal`` names the conductor metal a price field re-indexes.
    """

    table: str
    name: str
    help: str
    read: Reader | None = None
    unit: str = ""
    default: Any = None
    required: bool = False
    bounds: str = ""
    attr: str = ""
    also_defaults: bool = False
    sweep: bool = False
    money_per: str = ""
    alt_per: str = ""
    metal: str = ""
    example: str = ""
    subtable: bool = False    # a table of its own keys (transformer, motor)
    default_text: str = ""    # the default in words, where it is not one fixed value

    def __post_init__(self) -> None:
        if self.table not in TABLES:
            raise ValueError(f"{self.name}: unknown table {self.table!r}")
        if not self.subtable and (self.read is None) == (not self.money_per):
            raise ValueError(f"{self.name}: give exactly one of read and money_per")

    @property
    def key(self) -> str:
        """The dotted key: ``economics.energy_price``, ``transformer.rating``, ``node.length``."""
        return f"{self.table}.{self.name}"

    def reader(self, currency: str | None = None) -> Reader:
        """The reader of this field's raw value (money fields need the currency)."""
        if self.read is not None:
            return self.read
        if currency is None or not self.money_per:
            raise ValueError(f"{self.name}: a money field needs the currency")
        return r.money_reader(currency, self.money_per, self.alt_per)

    @property
    def hint(self) -> str:
        """An example for a message about a missing key: ' (e.g. key = value)'."""
        return f" (e.g. {self.name} = {self.example})" if self.example else ""

    def unit_in(self, currency: str) -> str:
        """The unit with the currency filled in."""
        return self.unit.format(cur=currency)

    @property
    def percent(self) -> bool:
        """True when the key is written in % and the model holds a fraction."""
        return self.unit == "%" and not self.attr.endswith("_pct")


_F = Field
FIELDS: tuple[Field, ...] = (
    # --- [project]
    _F("project", "title", "the project's name, shown on every report", r.read_text,
       default_text="the file name", example='"North wing"'),
    _F("project", "rules", "rule profile: nec, cec or iec", r.read_text, required=True,
       bounds="nec | cec | iec", example='"nec"'),
    _F("project", "currency", "currency of every price (ISO code)", r.read_text,
       required=True, example='"USD"'),
    _F("project", "schedule", "a CSV node schedule beside this file, read after the "
       "[[node]] tables", r.read_text, example='"circuits.csv"'),
    # --- [economics]
    _F("economics", "energy_price", "price of energy lost in the conductors",
       money_per="kWh", unit="{cur}/kWh", required=True, bounds=f"0 to {MAX_PRICE:g}",
       attr="energy_price_per_kwh", sweep=True, example='"0.12 USD/kWh"'),
    _F("economics", "demand_charge", "price per kW of monthly peak", money_per="kW",
       alt_per="kW*month", unit="{cur}/kW", default=0.0, bounds=f"0 to {MAX_PRICE:g}",
       attr="demand_charge_per_kw_month", sweep=True, example='"14 USD/kW"'),
    _F("economics", "escalation", "yearly growth of the energy price", r.read_percent,
       unit="%", default=0.0, attr="escalation", sweep=True, example='"2 %"'),
    _F("economics", "discount_rate", "yearly rate that discounts future costs",
       r.read_percent, unit="%", required=True, attr="discount_rate", sweep=True,
       example='"7 %"'),
    _F("economics", "load_growth", "yearly growth of the load", r.read_percent, unit="%",
       default=0.0, attr="load_growth", sweep=True, example='"1 %"'),
    _F("economics", "lifetime", "years the installation is valued over", r.read_years,
       unit="year", required=True, attr="lifetime_years", sweep=True, example='"25 year"'),
    _F("economics", "load_factor", "average load over peak load", r.read_fraction,
       required=True, bounds="(0, 1]", attr="load_factor", sweep=True, example="0.55"),
    _F("economics", "loss_load_factor", "average loss over peak loss; derived from "
       "load_factor when not given", r.read_fraction, bounds="load_factor² to load_factor",
       attr="loss_load_factor", sweep=True, example="0.35"),
    _F("economics", "hours", "hours in a year the installation runs", r.read_hours,
       unit="h", default=8760.0, attr="hours_per_year", sweep=True, example='"8760 h"'),
    _F("economics", "emission_factor", "CO2 per kWh lost, for the report", r.read_emission,
       unit="kg/kWh", default=0.4, attr="emission_kg_per_kwh", sweep=True,
       example='"0.4 kg/kWh"'),
    _F("economics", "loss_load_method", "how each run's loss-load factor is found: from the "
       "mean and spread of the loads below it (moments), or 0.3 LF + 0.7 LF² on its own "
       "load factor (buller-woodrow)", r.read_loss_load_method, default="moments",
       bounds="moments | buller-woodrow", attr="loss_load_method", example='"moments"'),
    # --- [prices]
    _F("prices", "catalogue", "price list (CSV): beside the scenario, or a bundled one",
       r.read_text, default_text="the bundled demo list for the profile's sizes",
       attr="catalogue", example='"costdata/demo-us.csv"'),
    _F("prices", "copper", "copper price the list is re-indexed to", money_per="kg",
       unit="{cur}/kg", bounds=f"above 0, at most {MAX_PRICE:g}", attr="copper_per_kg",
       sweep=True, metal="Cu", example='"10.5 USD/kg"'),
    _F("prices", "aluminium", "aluminium price the list is re-indexed to (also spelt "
       "aluminum)", money_per="kg", unit="{cur}/kg", bounds=f"above 0, at most {MAX_PRICE:g}",
       attr="aluminium_per_kg", sweep=True, metal="Al", example='"2.7 USD/kg"'),
    # --- [source]
    _F("source", "id", "name of the source", r.read_text, required=True,
       example='"SERVICE"'),
    _F("source", "voltage", "line-to-line voltage at the source", r.read_voltage, unit="V",
       required=True, bounds=f"above 0, at most {MAX_VOLTAGE_V:g} V", attr="voltage_v",
       example='"480 V"'),
    _F("source", "phases", "1 or 3", r.read_phases, required=True, bounds="1 | 3",
       attr="phases", example="3"),
    _F("source", "fault_current", "available three-phase fault current; none: an infinite "
       "bus", r.read_fault_current, unit="A",
       bounds=f"{MIN_FAULT_A:g} A to {MAX_CURRENT_A / 1e3:g} kA", attr="fault_current_a",
       example='"35 kA"'),
    _F("source", "x_r", "X/R ratio of the source impedance", r.read_number, default=10.0,
       bounds="0 or more", attr="x_r", example="10"),
    # --- [[node]]
    _F("node", "id", "name of the node; its run from the parent carries it too",
       r.read_text, required=True, example='"PANEL-2"'),
    _F("node", "parent", "the node (or the source) that feeds this one", r.read_text,
       required=True, example='"SWBD"'),
    _F("node", "description", "free text for the schedule", r.read_description, default="",
       attr="description", example='"kiln 2 burners"'),
    _F("node", "length", "route length of the run from the parent", r.read_length,
       unit="m", required=True, bounds=f"above 0, at most {MAX_LENGTH_M / 1e3:g} km",
       attr="length_m", example='"310 ft"'),
    _F("node", "voltage", "circuit voltage (line-to-line, or line-to-neutral for a "
       "single-phase line-to-neutral circuit)", r.read_voltage, unit="V",
       default_text="the parent's (or its transformer's secondary)",
       bounds=f"above 0, at most {MAX_VOLTAGE_V:g} V", attr="voltage_v",
       example='"208 V"'),
    _F("node", "phases", "1 or 3", r.read_phases, default_text="the parent's", bounds="1 | 3",
       attr="phases", example="1"),
    _F("node", "load", "the load: current (A), real power (W, kW, hp) or apparent power "
       "(VA, kVA); on a motor, its nameplate current, which does not size the circuit "
       "(the profile's full-load current table does)", r.read_load,
       default_text="none: the sum of the loads below, or the profile's unknown-load rule "
       "on the device", bounds="0 or more", attr="load",
       example='"180 kW"'),
    _F("node", "power_factor", "power factor of the load", r.read_fraction,
       default=DEFAULT_POWER_FACTOR, bounds="(0, 1]", attr="power_factor",
       also_defaults=True, example="0.95"),
    _F("node", "continuous", "the load runs 3 h or more at a time (sized at the profile's "
       "continuous factor)", r.read_bool, default_text="true for motors, else false",
       attr="continuous", example="true"),
    _F("node", "ocpd", "rating of the overcurrent device protecting the run",
       r.read_current, unit="A", default_text="chosen by sizer",
       bounds=f"above 0, at most {MAX_CURRENT_A / 1e3:g} kA", attr="ocpd_a",
       example='"225 A"'),
    _F("node", "demand_factor", "share of the connected load below that is drawn at once",
       r.read_fraction, default=1.0, bounds="(0, 1]", attr="demand_factor", example="0.8"),
    _F("node", "conductor", "pin the run's conductor: [N x ]SIZE MATERIAL", r.read_pin,
       default_text="chosen by sizer", attr="pin", example='"2x 500 kcmil Al"'),
    _F("node", "neutral", "a neutral is run with the phase conductors", r.read_bool,
       default_text="by the circuit (line-to-neutral loads need one)", attr="neutral",
       example="true"),
    _F("node", "device_100_percent", "the run's device and its assembly are listed for "
       "continuous operation at 100 % of their rating: continuous loads count at 100 %",
       r.read_bool, default=False, attr="device_100_percent", example="true"),
    _F("node", "nonlinear", "share of the load that is non-linear (LED drivers, IT "
       "equipment): true, false or a share; a feeder takes the share of the loads below. "
       "Above the profile's share a 4-wire wye neutral counts as current-carrying",
       r.read_share, default=0.0, bounds="true, false or 0 to 1", attr="nonlinear",
       example="true"),
    _F("node", "clearing_time", "time the device takes to clear a fault, for the "
       "withstand check", r.auto(r.read_time), unit="s", default_text="auto: the profile's",
       bounds=f"{CLEARING_TIME_S[0] * 1e3:g} ms to {CLEARING_TIME_S[1]:g} s, or \"auto\"",
       attr="clearing_time_s", also_defaults=True, example='"0.05 s"'),
    _F("node", "materials", "conductor materials the optimiser may choose",
       r.read_materials, default=("Cu", "Al"), bounds="Cu, Al", attr="materials",
       also_defaults=True, example='["Cu", "Al"]'),
    _F("node", "insulation", "insulation temperature rating", r.read_temperature,
       unit="degC", default=90.0, bounds="a rating of the profile's table",
       attr="insulation_c", also_defaults=True, example='"90 degC"'),
    _F("node", "terminals", "temperature rating of the terminals", r.auto(r.read_temperature),
       unit="degC", default_text="auto: the profile's terminal rule",
       bounds="a rating of the profile's table, or \"auto\"", attr="terminals_c",
       also_defaults=True, example='"75 degC"'),
    _F("node", "ambient", "ambient temperature along the route", r.read_ambient,
       unit="degC", default=30.0, bounds=_AMBIENT, attr="ambient_c", also_defaults=True,
       example='"40 degC"'),
    _F("node", "installation", "how the run is installed", r.read_installation,
       default="conduit", bounds=" | ".join(r.INSTALLATION_WORDS), attr="installation",
       also_defaults=True, example='"tray"'),
    _F("node", "grouping", "current-carrying conductors sharing the raceway",
       r.read_grouping, default_text="auto: the run's own conductors",
       bounds=f"1 to {MAX_GROUPING}, or \"auto\"", attr="grouping", also_defaults=True,
       example="6"),
    _F("node", "max_sets", "most parallel sets the optimiser may use", r.read_sets,
       default=4, bounds=f"1 to {MAX_SETS}", attr="max_sets", also_defaults=True,
       example="4"),
    # How the load runs, for losses only (sizer.operating); sizing never reads these.
    _F("node", "category", "load category for its operating profile: a row of "
       "sizer/operating_profiles.csv", r.read_category,
       default_text="motors for a motor, unknown with no load, else general",
       bounds="general | lighting | receptacles | motors | hvac | process_heating | "
       "ev_charging | it | unknown", attr="category", also_defaults=True,
       example='"lighting"'),
    _F("node", "utilisation", "peak operating current over the declared load (over the "
       "device rating when no load is given), for losses", r.read_fraction,
       default_text="the category's", bounds="(0, 1]", attr="utilisation",
       also_defaults=True, example="0.6"),
    _F("node", "load_factor", "mean over peak operating current of the load, for losses",
       r.read_fraction, default_text="the category's", bounds="(0, 1]", attr="load_factor",
       also_defaults=True, example="0.45"),
    _F("node", "full_load_hours", "equivalent full-load hours a year (instead of "
       "load_factor: hours / [economics] hours)", r.read_full_load_hours, unit="h",
       default_text="from load_factor", bounds="above 0, at most 8784 h",
       attr="full_load_hours", also_defaults=True, example='"3000 h"'),
    _F("node", "loss_load_factor", "mean square over peak² of the operating current",
       r.read_fraction, default_text="0.3 LF + 0.7 LF²", bounds="load_factor² to "
       "load_factor", attr="loss_load_factor", example="0.3"),
    _F("node", "peak_coincidence", "the load's current at the building's peak over its "
       "own peak (its loss at that peak bears the demand charge)", r.read_fraction,
       default_text="the category's", bounds="(0, 1]", attr="peak_coincidence",
       also_defaults=True, example="0.8"),
    _F("node", "coincidence", "a feeder's operating peak over the sum of the operating "
       "peaks below it (diversity), for losses", r.read_fraction,
       default_text="the demand_factor", bounds="(0, 1]", attr="coincidence",
       example="0.7"),
    _F("node", "load_growth", "yearly growth of the loads at and below this node, for "
       "losses", r.read_percent, unit="%", default_text="[economics] load_growth",
       attr="load_growth", example='"3 %"'),
    _F("node", "phase", "the phase (line to neutral) or pair (line to line) a single-phase "
       "circuit on a three-phase panel uses", r.read_phase,
       default_text="assigned by sizer to balance the panel",
       bounds="A | B | C | AB | BC | CA", attr="phase", example='"BC"'),
    _F("node", "triplen", "third-harmonic current of the load as a share of its current "
       "(adds up in the neutral)", r.read_percent, unit="%", default=0.0,
       bounds="0 to 100 %", attr="triplen", example='"30 %"'),
    _F("node", "spare", "spare capacity reserved on a feeder or panel: sizes its run "
       "(ampacity, device, drop) but not its losses", r.read_percent, unit="%",
       default=0.0, bounds="0 to 100 %", attr="spare", example='"25 %"'),
    _F("node", "neutral_size", "a three-phase run's neutral over the phase size: up to "
       "200 % (nonlinear loads), or \"reduced\" to its own current where the rule profile "
       "allows (sizer/rules/neutral.csv)", r.read_neutral_size, unit="%", default=1.0,
       default_text="100 % (full size)", bounds="\"reduced\" or 100 % to 200 %",
       attr="neutral_size", also_defaults=True, example='"200 %"'),
    _F("node", "route", "a shared route (tray, duct bank, trench) by name: every run with "
       "the same route derates from the conductors the route actually holds",
       r.read_text, default_text="none: the run's own raceway", attr="route",
       example='"TRAY-NORTH"'),
    _F("node", "load_terminal_max", "largest conductor the load-end equipment's terminals "
       "take (motor starter, receptacle, panel main lugs)", r.read_size,
       default_text="as the device at the supply end (the profile's terminal table)",
       bounds="a size of the profile", attr="load_terminal_max", example='"250 kcmil"'),
    _F("node", "oversize_termination", "a conductor larger than its terminal takes: land it "
       "with a priced reducing splice, or refuse it", r.auto(r.read_oversize),
       default_text="auto: the profile's (splice)", bounds="splice | refuse | \"auto\"",
       attr="oversize_termination", also_defaults=True, example='"refuse"'),
    _F("node", "min_parallel_size", "smallest conductor the optimiser may run in parallel "
       "sets", r.auto(r.read_size), default_text="auto: the profile's (NEC 1/0 AWG; iec "
       "50 mm2, common practice)", bounds="a size of the profile; never below a code "
       "minimum", attr="min_parallel_size", also_defaults=True, example='"4/0 AWG"'),
    _F("node", "sets_in_one_raceway", "run all parallel sets in one raceway (one EGC; "
       "they derate together) instead of one raceway per set", r.read_bool, default=False,
       attr="sets_in_one_raceway", also_defaults=True, example="true"),
    _F("node", "soil_resistivity", "soil thermal resistivity of a buried run", r.auto(
       r.read_soil_resistivity), unit="K*m/W", default_text="auto: the profile's reference "
       "(iec 2.5 K*m/W; nec and cec do not correct)", bounds="0.2 to 10 K*m/W, or \"auto\"",
       attr="soil_resistivity_k_m_per_w", also_defaults=True, example='"1.5 K*m/W"'),
    _F("node", "depth", "laying depth of a buried run", r.auto(r.read_depth), unit="m",
       default_text="auto: the profile's reference (iec 0.7 m; nec and cec do not correct)",
       bounds="0.2 to 5 m, or \"auto\"", attr="depth_m", also_defaults=True,
       example='"0.9 m"'),
    _F("node", "device", "the run's overcurrent device, for the disconnection rule: B, C "
       "or D (miniature breaker curve), breaker (moulded case) or fuse", r.auto(r.read_device),
       default_text="auto: the profile's", bounds=" | ".join(r.DEVICE_WORDS) + ', or "auto"',
       attr="device", also_defaults=True, example='"C"'),
    _F("node", "curves", "miniature-breaker curves the optimiser may choose from to meet "
       "disconnection (a lower curve trips at a lower current: B 5, C 10, D 20 × In); "
       "for runs whose device is a miniature breaker and no trip_multiple is given; the "
       "run's own device is kept unless a lower curve is needed", r.auto(r.read_curves),
       default_text="auto: the run's device only", bounds='a list of B, C, D, or "auto"',
       attr="curves", also_defaults=True, example='["B", "C"]'),
    _F("node", "trip_multiple", "current that disconnects the device within the required "
       "time, × its rating (from its curve; replaces the device's default)",
       r.auto(r.read_trip_multiple), default_text="auto: by the device",
       bounds=f'1 to {r.MAX_TRIP_MULTIPLE:g}, or "auto"', attr="trip_multiple",
       also_defaults=True, example="5"),
    _F("node", "insulation_type", "insulation family for the short-circuit withstand: "
       "thermoplastic (PVC, THHN style) or thermoset (XLPE, EPR, XHHW-2 style)",
       r.auto(r.read_insulation_type), default_text="auto: the price list's product line, "
       "else by the insulation rating", bounds='thermoplastic | thermoset, or "auto"',
       attr="insulation_type", also_defaults=True, example='"thermoplastic"'),
    _F("node", "let_through", "the device's let-through energy I²t (current-limiting "
       "devices); replaces I² × clearing time in the withstand check", r.read_let_through,
       unit="A²s", default_text="none: I² × clearing_time", bounds="above 0",
       attr="let_through_a2s", also_defaults=True, example='"50000 A2s"'),
    _F("node", "withstand", "short-circuit withstand: a finding in the results, or "
       "enforced (conductors that fail it are not offered)", r.read_withstand,
       default="finding", bounds="finding | enforce", attr="withstand", also_defaults=True,
       example='"enforce"'),
    _F("node", "interrupting", "interrupting (breaking) rating of the run's device, "
       "checked against the maximum fault where it sits", r.read_fault_current, unit="A",
       default_text="none: not checked", bounds=f"{MIN_FAULT_A:g} A to "
       f"{MAX_CURRENT_A / 1e3:g} kA", attr="interrupting_a", also_defaults=True,
       example='"22 kA"'),
    _F("node", "pe_rule", "how the protective conductor (PE) is sized: by the profile's "
       "table (IEC 60364-5-54 Table 54.2) or by the adiabatic equation of 543.1.2 with the "
       "run's earth-fault current and disconnection time (iec only)", r.auto(r.read_pe_rule),
       default_text="auto: the profile's (iec: table)", bounds='table | adiabatic, or "auto"',
       attr="pe_rule", also_defaults=True, example='"adiabatic"'),
    _F("node", "transformer", "the node is a transformer: a table of the keys below",
       attr="transformer", subtable=True, example='{ rating = "75 kVA", ... }'),
    _F("node", "motor", "the node's load is a motor: a table of the keys below",
       attr="motor", subtable=True, example="{ hp = 20 }"),
    # --- transformer = { ... }
    _F("transformer", "rating", "nameplate rating", r.read_rating_va, unit="VA",
       required=True, attr="rating_va", example='"75 kVA"'),
    _F("transformer", "secondary", "secondary line-to-line voltage", r.read_voltage,
       unit="V", required=True, attr="secondary_v", example='"208 V"'),
    _F("transformer", "impedance", "nameplate impedance", r.read_percent_number, unit="%",
       required=True, attr="impedance_pct", example='"5.2 %"'),
    _F("transformer", "x_r", "X/R ratio from the maker's test report (2-6 is typical of "
       "15-500 kVA dry-type units)", r.read_number, required=True, attr="x_r",
       example="4"),
    _F("transformer", "secondary_phases", "1 or 3", r.read_phases,
       default=3, default_text="the primary's", bounds="1 | 3", attr="secondary_phases",
       example="3"),
    _F("transformer", "core_loss", "no-load loss in % of the rating", r.read_percent_number,
       unit="%", default=0.5, attr="core_loss_pct", example='"0.4 %"'),
    # --- motor = { ... }
    _F("motor", "kw", "rated output in kW (give one of kw, hp, power)", r.read_number,
       unit="kW", attr="power_w", example="15"),
    _F("motor", "hp", "rated output in horsepower (give one of kw, hp, power)",
       r.read_number, unit="hp", attr="power_w", example="20"),
    _F("motor", "power", "rated output with its unit (give one of kw, hp, power)",
       r.read_motor_power, unit="W", attr="power_w", example='"15 kW"'),
    _F("motor", "start_multiple", "starting current over running current", r.read_number,
       default=6.0, attr="start_multiple", example="6"),
    _F("motor", "start_pf", "power factor while starting", r.read_fraction, default=0.3,
       bounds="(0, 1]", attr="start_pf", example="0.3"),
    _F("motor", "fault_multiple", "locked-rotor current over rated current this running "
       "motor feeds into a three-phase fault; 0 for none (a drive without regeneration)",
       r.read_number, default_text="the profile's (5)", bounds="0 to 20",
       attr="fault_multiple", example="0"),
)

# Spellings read as another key.
ALIASES: Mapping[str, str] = MappingProxyType({"prices.aluminum": "aluminium"})

BY_KEY: Mapping[str, Field] = MappingProxyType({f.key: f for f in FIELDS})


def in_table(table: str) -> tuple[Field, ...]:
    """The fields written in ``table`` (``defaults``: the node fields it may give)."""
    if table == "defaults":
        return tuple(f for f in FIELDS if f.also_defaults)
    return tuple(f for f in FIELDS if f.table == table)


def keys(table: str) -> tuple[str, ...]:
    """The key names ``table`` accepts, aliases included."""
    names = tuple(f.name for f in in_table(table))
    extra = tuple(a.split(".", 1)[1] for a in ALIASES if a.startswith(f"{table}."))
    return names + extra


def field(table: str, name: str) -> Field:
    """The field ``name`` of ``table`` (``defaults`` finds the node field)."""
    return BY_KEY[f"{'node' if table == 'defaults' else table}.{name}"]


def readers(table: str) -> dict[str, Reader]:
    """Key → reader for the plain-valued keys of ``table`` (sub-tables left out)."""
    return {f.name: f.reader() for f in in_table(table) if f.read is not None}


def sweep_fields() -> tuple[Field, ...]:
    """The fields ``sizer sweep --vary`` may vary."""
    return tuple(f for f in FIELDS if f.sweep)


def schedule_columns() -> tuple[str, ...]:
    """Columns of a CSV node schedule: node keys, then the dotted sub-table keys."""
    return (*(f.name for f in in_table("node") if not f.subtable),
            *(f"transformer.{f.name}" for f in in_table("transformer")),
            *(f"motor.{f.name}" for f in in_table("motor")))


def _cell(text: object) -> str:
    return str(text).replace("|", "\\|")


def key_reference() -> str:
    """Markdown reference of every scenario key, generated from the registry."""
    out = [
        "# Scenario keys",
        "",
        "Generated from `sizer/fields.py` (`python -m sizer.fields > scenarios/README.md`); "
        "a test fails when the two differ. Quantities are strings with their unit "
        '(`"120 ft"`, `"480 V"`); feet and metres, AWG/kcmil and mm² all work. `{cur}` is '
        "the project currency. Keys marked *defaults* may also stand in `[defaults]`, "
        "which every node inherits.",
        "",
        "The demo scenarios in this folder are invented places; their numbers are for "
        "trying sizer out, not for design.",
    ]
    titles = {"project": "[project]", "economics": "[economics]", "prices": "[prices]",
              "source": "[source]", "node": "[[node]]",
              "transformer": "transformer = { ... } (in a node)",
              "motor": "motor = { ... } (in a node)"}
    for table, title in titles.items():
        out += ["", f"## {title}", "",
                "| key | unit | default | allowed | meaning |",
                "|---|---|---|---|---|"]
        for f in in_table(table):
            if f.required:
                default = "required"
            elif f.default_text:
                default = f.default_text
            elif f.default is None:
                default = "not given"
            elif isinstance(f.default, tuple):
                default = ", ".join(f.default)
            else:
                default = f"{f.default:g}" if isinstance(f.default, float) else str(f.default)
            name = f"`{f.name}`" + (" (*defaults*)" if f.also_defaults else "")
            out.append(f"| {name} | {_cell(f.unit or '—')} | {_cell(default)} | "
                       f"{_cell(f.bounds or '—')} | {_cell(f.help)} (e.g. `{f.example}`) |")
    return "\n".join(out) + "\n"


if __name__ == "__main__":
    print(key_reference(), end="")

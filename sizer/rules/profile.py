"""Rule profiles: one electrical code's sizing rules as data, loaded into a frozen RuleProfile.

A profile is a TOML file (limits, factors, rules, each with its source) plus CSV tables
(ampacity, equipment grounding conductor, the size order with areas) in this directory.
Every CSV opens with ``#`` lines naming its standard, table, edition and status.
"""

from __future__ import annotations

import dataclasses
import math
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from itertools import pairwise
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from sizer.errors import ScenarioError, UnitError
from sizer.rules.motors import MOTOR_RULES, MotorRules, read_flc_table, read_typical
from sizer.rules.raceway import (
    DIRECT,
    NONE,
    TRAY,
    RacewayRules,
    read_conductor_areas,
    read_raceway_types,
)
from sizer.rules.tables import read_csv as _read_csv
from sizer.rules.tables import read_number as _number
from sizer.rules.terminations import TerminalTable, read_terminal_table
from sizer.units import MATERIALS, MM2_PER_CMIL, parse_size

PROFILES: tuple[str, ...] = ("nec", "cec", "iec")
INSTALLATIONS: tuple[str, ...] = ("conduit", "steel_conduit", "tray", "buried", "direct_buried",
                                  "free_air")
CATALOGUES: tuple[str, ...] = ("awg", "metric")
EGC_RULES: tuple[str, ...] = ("device_rating", "phase_area", "conductor_ampacity")
# protective conductor size (iec): IEC 60364-5-54 Table 54.2 by the phase size, or the
# adiabatic equation of 543.1.2 with the run's earth-fault current and disconnection time
PE_RULES: tuple[str, ...] = ("table", "adiabatic")
DROP_KINDS: tuple[str, ...] = ("branch", "feeder", "total")

_HERE = Path(__file__).parent


@dataclass(frozen=True)
class TerminalRule:
    """Default termination temperature (NEC 110.14(C)(1)) when the scenario gives none.

    Circuits rated at most ``low_max_ocpd_a``, or conductors no larger than
    ``low_max_size``, are limited to the ``low_c`` column; all others to ``high_c``.
    """

    low_c: float
    high_c: float
    low_max_ocpd_a: float
    low_max_size: str
    source: str


@dataclass(frozen=True)
class SoilCorrection:
    """Correction of buried ampacities for soil thermal resistivity and laying depth.

    ``resistivity``: installation -> ((K·m/W, factor), ...) ascending; ``depth``:
    ((m, factor), ...) ascending; a value between rows takes the next more severe row.
    """

    reference_k_m_per_w: float
    reference_depth_m: float
    resistivity: Mapping[str, tuple[tuple[float, float], ...]]
    depth: tuple[tuple[float, float], ...]
    source: str


@dataclass(frozen=True)
class FaultRule:
    """Fault levels and disconnection: IEC 60909 voltage factors, motors, trip currents.

    ``c_max``/``c_min``: voltage factors for the maximum and minimum short-circuit
    current (IEC 60909-0 Table 1). ``motor_multiple``: locked-rotor current of a running
    induction motor over its rated current (its contribution to a three-phase fault);
    ``motor_r_x``: its R/X. ``device``: the overcurrent device assumed where a node names
    none, rated up to ``small_device_max_a``; ``large_device`` above; ``trip_multiple``:
    current (x In) that disconnects a breaker in time when the node gives no curve.
    Fuses: ``fuse_multiple_final`` (x In for ``final_time_s``) and
    ``fuse_multiple_distribution`` (x In for ``distribution_time_s``). A final circuit is
    one fed at most ``final_circuit_max_a``. ``loop_temperature``: conductor temperature
    of the minimum fault loop, "operating" (the insulation's rating) or "end_of_fault".
    """

    c_max: float
    c_min: float
    motor_multiple: float
    motor_r_x: float
    device: str
    small_device_max_a: float
    large_device: str
    trip_multiple: float
    fuse_multiple_final: float
    fuse_multiple_distribution: float
    final_circuit_max_a: float
    final_time_s: float
    distribution_time_s: float
    loop_temperature: str
    source: str


DEVICES: tuple[str, ...] = ("B", "C", "D", "breaker", "fuse")
INSULATION_FAMILIES: tuple[str, ...] = ("thermoplastic", "thermoset")
LOOP_TEMPERATURES: tuple[str, ...] = ("operating", "end_of_fault")


@dataclass(frozen=True, eq=False)
class RuleProfile:
    """An electrical code's sizing rules; every value comes from the profile's TOML and CSVs.

    Arrays are read-only; sizes are indexed in ``sizes`` order, which is the order of the
    catalogue named by ``catalogue``. Instances compare and hash by identity (profiles
    are cached), so they can be passed to cached functions.
    """

    name: str                                # "nec" | "cec" | "iec" (or a custom file's name)
    title: str
    edition: str
    path: str                                # the TOML file it was read from
    catalogue: str                           # "awg" | "metric"
    frequency_hz: float
    notes: tuple[str, ...]                   # assumptions and stand-ins, for reports
    sources: Mapping[str, str]               # topic -> standard, clause, edition, status
    # voltage drop, % of nominal
    drop_branch_pct: float
    drop_feeder_pct: float
    drop_total_pct: float
    # design current
    unknown_load_factor: float               # x device rating when no load is given
    continuous_factor: float                 # x continuous load for the ampacity before adjustment
    # sizes (canonical names, ascending area) and their areas
    sizes: tuple[str, ...]
    size_area_mm2: np.ndarray                # float [n_sizes]; AWG from Table 8 circular mils
    # ampacity
    insulation_temps_c: tuple[float, ...]    # insulation ratings the profile allows
    column_temps_c: tuple[float, ...]        # temperature columns of the ampacity table, ascending
    methods: tuple[str, ...]                 # table methods ("310.16", "B1", "C", "E", "D1")
    installation_methods: Mapping[str, str]  # installation word -> method
    reference_ambient_c: Mapping[str, float]  # method -> ambient of its table
    ambient_credit_min_c: float              # colder ambients get no more credit than this
    # (method, material) -> A, shape [n_columns, n_sizes], NaN where the table has none
    ampacity_tables_a: Mapping[tuple[str, str], np.ndarray]
    grouping_conductors_per_group: int       # 1: count conductors (NEC); 3: count circuits (IEC)
    # (largest count in the band, factor), ascending, the last band up to inf
    grouping_bands: tuple[tuple[float, float], ...]
    terminal_rule: TerminalRule | None       # None: no default terminal limit
    # protection
    standard_ratings_a: tuple[float, ...]    # ascending
    next_size_up_max_a: float | None         # None: device must not exceed the ampacity
    # IEC 60364-4-43 433.1: I2 <= overload_i2_limit x Iz, I2 = multiple x In by device
    # class ("breaker", "fuse", "fuse_small" below 16 A); empty: no such rule
    overload_i2_multiple: Mapping[str, float]
    overload_i2_limit: float
    small_conductor_max_ocpd_a: tuple[tuple[str, str, float], ...]  # (material, size, max device A)
    # equipment grounding (protective) conductor
    # "device_rating" (NEC 250.122) | "phase_area" (IEC 60364-5-54) | "conductor_ampacity"
    # (CEC Table 16: by the ampacity of the largest ungrounded conductor, or equivalent)
    egc_rule: str
    egc_table: tuple[tuple[float, str, str], ...]  # device_rating: (device <= A, Cu size, Al size)
    egc_table_area_mm2: tuple[tuple[float, float], ...]  # same rows: (Cu area, Al area)
    egc_proportional: bool                   # NEC 250.122(B)
    # phase_area rule: (phase area <= mm2, fraction of phase, fixed mm2), need = fraction S + fixed
    egc_phase_bands: tuple[tuple[float, float, float], ...]
    # other limits
    min_parallel_size: str | None            # None: no minimum
    default_clearing_time_s: float
    short_circuit_final_c: tuple[tuple[float, float], ...]  # (insulation rating, final temp)
    # final short-circuit temperature by insulation family (thermoplastic, thermoset)
    family_final_c: Mapping[str, float]
    motor_start_dip_pct: float
    fault: FaultRule
    min_parallel_overridable: bool = False   # the minimum is practice, not code: may be lowered
    soil: SoilCorrection | None = None       # soil resistivity and depth factors; None: none
    terminals: TerminalTable | None = None   # terminal ranges by device rating; None: any size
    raceway: RacewayRules | None = None      # raceway practice; None: raceways not sized
    _size_lookup: Mapping[str, int] = field(init=False, repr=False)
    # the continuous factor also binds the adjusted ampacity (CEC Rule 8-104), not only
    # the ampacity before adjustment (NEC 210.19(A)(1)(a))
    continuous_after_adjustment: bool = False
    # motor circuits (NEC Article 430); None: motors are ordinary loads
    motors: MotorRules | None = None
    # transformer secondary conductors: None (general rules), "device" (ampacity >= the
    # device they end in, no next size up: NEC 240.21(C)) or "rated_current" (ampacity >=
    # secondary_factor x rated secondary current)
    secondary_rule: str | None = None
    secondary_factor: float = 1.0
    # service conductors: supply-side bonding jumper by the largest phase conductor per
    # raceway, rows (largest Cu area mm2, largest Al area mm2, jumper Cu area, jumper Al
    # area); above the last row, service_bonding_pct % of the phase area. () : an EGC as
    # for any other run.
    service_bonding: tuple[tuple[float, float, float, float], ...] = ()
    service_bonding_pct: float = 12.5

    # share of non-linear load from which a wye system's neutral counts as a
    # current-carrying conductor (NEC 310.15(E)(3): "major portion"); None: never
    neutral_nonlinear_share: float | None = None
    # ampacity of a circuit with two loaded conductors (single-phase), same shape as
    # ampacity_tables_a, NaN where the three-loaded value applies; empty: the tables are
    # per conductor (NEC, CEC) or the profile has no such column
    ampacity_two_loaded_a: Mapping[tuple[str, str], np.ndarray] = field(
        default_factory=lambda: MappingProxyType({}))
    # "table" (the egc_rule) or "adiabatic" (IEC 60364-5-54 543.1.2, phase_area rule only)
    pe_rule: str = "table"

    def __post_init__(self) -> None:
        lookup = {s: i for i, s in enumerate(self.sizes)}
        object.__setattr__(self, "_size_lookup", MappingProxyType(lookup))
        problems = _problems(self)
        if problems:
            raise ScenarioError(f"rule profile '{self.name}': " + "; ".join(problems),
                                file=self.path)

    # --- small helpers every caller needs -------------------------------------------

    def bonds_service(self) -> bool:
        """Whether service conductors get a bonding jumper (its table) instead of an EGC."""
        return bool(self.service_bonding) or self.egc_rule == "conductor_ampacity"

    def size_index(self, size: str) -> int:
        """Index of a canonical size name in this profile's size order."""
        try:
            return self._size_lookup[size]
        except KeyError:
            raise UnitError(
                f"size {size!r} is not in the '{self.catalogue}' sizes of rule profile "
                f"'{self.name}'"
            ) from None

    def indices(self, size_index: object) -> tuple[np.ndarray, np.ndarray]:
        """``(safe, valid)`` for an integer array of size indices.

        ``valid`` marks indices inside the size list; ``safe`` replaces the others by 0
        so they can index tables (the caller masks them with NaN/False). Negative
        indices are invalid here, never counted from the end.
        """
        idx = np.asarray(size_index)
        if idx.dtype.kind not in "iu":
            raise TypeError(f"size_index must be integers, got dtype {idx.dtype}")
        valid = (idx >= 0) & (idx < len(self.sizes))
        return np.where(valid, idx, 0), valid

    def method(self, installation: str) -> str:
        """Table method used for an installation word (e.g. "conduit" -> "B1" in iec)."""
        try:
            return self.installation_methods[installation]
        except KeyError:
            raise ScenarioError(
                f"unknown installation {installation!r} (use one of {', '.join(INSTALLATIONS)})"
            ) from None

    def drop_limit_pct(self, kind: str) -> float:
        """Voltage-drop limit in % for "branch", "feeder" or "total"."""
        if kind not in DROP_KINDS:
            raise ScenarioError(f"unknown voltage-drop kind {kind!r} (use branch, feeder, total)")
        return float(getattr(self, f"drop_{kind}_pct"))

    def final_temperature_c(self, insulation_c: float) -> float:
        """Short-circuit final temperature in degC for an insulation rating."""
        for rating, final in self.short_circuit_final_c:
            if math.isclose(rating, insulation_c):
                return final
        raise ScenarioError(self._insulation_message(insulation_c))

    def withstand_final_c(self, insulation_c: float, family: str | None) -> float:
        """Final short-circuit temperature (degC) of an insulation family.

        ``family`` "thermoplastic" or "thermoset" (the profile's value for it); None:
        the profile's final temperature for the insulation rating (90 degC → thermoset).
        """
        if family is None:
            return self.final_temperature_c(insulation_c)
        return self.family_final_c[family]

    def check_insulation(self, insulation_c: float) -> float:
        """Return ``insulation_c`` if the profile allows it, else raise ScenarioError."""
        for rating in self.insulation_temps_c:
            if math.isclose(rating, insulation_c):
                return rating
        raise ScenarioError(self._insulation_message(insulation_c))

    def _insulation_message(self, insulation_c: float) -> str:
        allowed = ", ".join(f"{t:g} degC" for t in self.insulation_temps_c)
        return (f"insulation rated {insulation_c:g} degC is not in rule profile "
                f"'{self.name}' (allowed: {allowed})")


def table_status(profile: RuleProfile) -> dict[str, list[str]]:
    """Which of the profile's tables and rules are stand-ins or (partly) from memory.

    ``{"stand_in": [topic, ...], "from_memory": [topic, ...]}``, topics as in
    ``profile.sources`` (ampacity_table, motor_table, ...), read from their source text:
    "STAND-IN" marks a stand-in, "[M]" or "from memory" a recalled value. The console
    and the JSON carry it; the report lists the full source texts.
    """
    stand_in = [t for t, text in sorted(profile.sources.items()) if "STAND-IN" in text]
    memory = [t for t, text in sorted(profile.sources.items())
              if t not in stand_in and ("[M]" in text or "from memory" in text.lower())]
    return {"stand_in": stand_in, "from_memory": memory}


def table_status_line(profile: RuleProfile) -> str:
    """``table_status`` in one line for the console ("" when every value is corroborated)."""
    status = table_status(profile)
    parts = []
    if status["stand_in"]:
        parts.append("stand-ins: " + ", ".join(status["stand_in"]))
    if status["from_memory"]:
        parts.append("from memory (verify): " + ", ".join(status["from_memory"]))
    return f"{profile.name} profile " + "; ".join(parts) if parts else ""


def check_material(material: str) -> str:
    """Return ``material`` if it is "Cu" or "Al", else raise UnitError."""
    if material not in MATERIALS:
        raise UnitError(f"unknown conductor material {material!r} (use \"Cu\" or \"Al\")")
    return material


# --- self-checks --------------------------------------------------------------------


def _problems(p: RuleProfile) -> list[str]:
    """Everything wrong with a profile, as short sentences (empty when it is sound)."""
    out: list[str] = []
    n = len(p.sizes)
    if p.catalogue not in CATALOGUES:
        out.append(f"catalogue must be one of {CATALOGUES}, got {p.catalogue!r}")
    if not p.frequency_hz > 0:
        out.append("frequency_hz must be positive")
    for kind in DROP_KINDS:
        v = getattr(p, f"drop_{kind}_pct")
        if not 0 < v <= 100:
            out.append(f"drop {kind} limit must be in (0, 100] %, got {v}")
    if max(p.drop_branch_pct, p.drop_feeder_pct) > p.drop_total_pct:
        out.append("a branch or feeder drop limit exceeds the total limit")
    if not 0 < p.unknown_load_factor <= 1:
        out.append(f"unknown_load_factor must be in (0, 1], got {p.unknown_load_factor}")
    if not 1 <= p.continuous_factor <= 2:
        out.append(f"continuous_factor must be in [1, 2], got {p.continuous_factor}")
    if n == 0 or len(set(p.sizes)) != n:
        out.append("sizes must be a non-empty list without repeats")
    area = p.size_area_mm2
    if area.shape != (n,) or not np.all(np.isfinite(area)) or np.any(np.diff(area) <= 0):
        out.append("size areas must be finite and strictly ascending in size order")
    if list(p.column_temps_c) != sorted(set(p.column_temps_c)):
        out.append("ampacity columns must be distinct temperatures")
    for t in p.insulation_temps_c:
        if t not in p.column_temps_c:
            out.append(f"insulation {t:g} degC has no ampacity column")
    if set(p.installation_methods) != set(INSTALLATIONS):
        out.append(f"[ampacity.methods] must map exactly the installations {INSTALLATIONS}")
    for inst, m in p.installation_methods.items():
        if m not in p.methods:
            out.append(f"installation {inst!r} maps to method {m!r}, which has no table")
    for m in p.methods:
        ref = p.reference_ambient_c.get(m)
        if ref is None:
            out.append(f"method {m!r} has no reference ambient")
        elif not p.ambient_credit_min_c < ref < min(p.column_temps_c):
            out.append(f"method {m!r}: reference ambient must lie between the credit floor "
                       "and the lowest column temperature")
    for (m, mat), table in [*p.ampacity_tables_a.items(), *p.ampacity_two_loaded_a.items()]:
        if m not in p.methods or mat not in MATERIALS:
            out.append(f"ampacity table for unknown method/material {m!r}/{mat!r}")
        if table.shape != (len(p.column_temps_c), n):
            out.append(f"ampacity table {m}/{mat} has shape {table.shape}, "
                       f"expected {(len(p.column_temps_c), n)}")
        elif np.any(table[np.isfinite(table)] <= 0):
            out.append(f"ampacity table {m}/{mat} has a value <= 0")
    if p.grouping_conductors_per_group < 1:
        out.append("grouping conductors_per_group must be >= 1")
    counts = [b[0] for b in p.grouping_bands]
    factors = [b[1] for b in p.grouping_bands]
    if not counts or counts[-1] != math.inf or any(b <= a for a, b in pairwise(counts)):
        out.append("grouping bands must ascend and end with inf")
    if any(not 0 < f <= 1 for f in factors) or any(b > a for a, b in pairwise(factors)):
        out.append("grouping factors must lie in (0, 1] and never rise with the count")
    if p.terminal_rule is not None:
        tr = p.terminal_rule
        if tr.low_c not in p.column_temps_c or tr.high_c not in p.column_temps_c:
            out.append("terminal rule temperatures must be ampacity columns")
        if tr.low_max_size not in p.sizes:
            out.append(f"terminal rule size {tr.low_max_size!r} is not a profile size")
    r = p.standard_ratings_a
    if not r or r[0] <= 0 or any(b <= a for a, b in pairwise(r)):
        out.append("standard ratings must be positive and strictly ascending")
    if p.next_size_up_max_a is not None and not p.next_size_up_max_a > 0:
        out.append("next_size_up_max_a must be positive (leave it out for none)")
    for mat, size, limit in p.small_conductor_max_ocpd_a:
        if mat not in MATERIALS or size not in p.sizes or not limit > 0:
            out.append(f"bad small-conductor limit {(mat, size, limit)}")
    if p.egc_rule not in EGC_RULES:
        out.append(f"egc rule must be one of {EGC_RULES}, got {p.egc_rule!r}")
    if p.egc_rule in ("device_rating", "conductor_ampacity"):
        limits = [row[0] for row in p.egc_table]
        if not limits or any(b <= a for a, b in pairwise(limits)):
            out.append("EGC table must list ascending device ratings")
        for cu_mm2, al_mm2 in p.egc_table_area_mm2:
            if not (cu_mm2 > 0 and al_mm2 > 0):
                out.append("EGC table has a size without an area")
                break
    if p.egc_rule == "phase_area":
        tops = [b[0] for b in p.egc_phase_bands]
        if not tops or tops[-1] != math.inf or any(b <= a for a, b in pairwise(tops)):
            out.append("EGC phase-area bands must ascend and end with inf")
        if p.egc_proportional:
            out.append("the proportional EGC increase applies to the device_rating rule only")
    if p.pe_rule not in PE_RULES:
        out.append(f"pe_rule must be one of {', '.join(PE_RULES)}, got {p.pe_rule!r}")
    elif p.pe_rule == "adiabatic" and p.egc_rule != "phase_area":
        out.append("pe_rule = \"adiabatic\" (IEC 60364-5-54 543.1.2) needs the phase_area EGC rule")
    if p.min_parallel_size is not None and p.min_parallel_size not in p.sizes:
        out.append(f"min_parallel_size {p.min_parallel_size!r} is not a profile size")
    if not 0 < p.default_clearing_time_s <= 5:
        out.append("default_clearing_time_s must be in (0, 5] s (the adiabatic range)")
    finals = dict(p.short_circuit_final_c)
    for t in p.insulation_temps_c:
        if t not in finals or not finals[t] > t:
            out.append(f"insulation {t:g} degC needs a short-circuit final temperature above it")
    if not 0 < p.motor_start_dip_pct < 100:
        out.append("motor_start_dip_pct must be in (0, 100)")
    f = p.fault
    if not 0.8 <= f.c_min <= 1.0 <= f.c_max <= 1.2:
        out.append("[fault] needs 0.8 <= c_min <= 1 <= c_max <= 1.2")
    if not (f.motor_multiple >= 0 and f.motor_r_x >= 0):
        out.append("[fault] motor_multiple and motor_r_x must be >= 0")
    if f.device not in DEVICES or f.large_device not in DEVICES:
        out.append(f"[fault] device and large_device must be one of {', '.join(DEVICES)}")
    if f.loop_temperature not in LOOP_TEMPERATURES:
        out.append(f"[fault] loop_temperature must be one of {', '.join(LOOP_TEMPERATURES)}")
    if not all(m >= 1 for m in (f.trip_multiple, f.fuse_multiple_final,
                                f.fuse_multiple_distribution)):
        out.append("[fault] trip multiples must be >= 1")
    if not (f.final_circuit_max_a > 0 and 0 < f.final_time_s <= f.distribution_time_s):
        out.append("[fault] needs final_circuit_max_a > 0 and 0 < final_time_s <= "
                   "distribution_time_s")
    return out


# --- loading ------------------------------------------------------------------------


class _Section:
    """Strict reader of one TOML table: unknown keys are errors (they are usually typos)."""

    def __init__(self, data: Mapping[str, Any], where: str, file: str) -> None:
        if not isinstance(data, Mapping):
            raise ScenarioError(f"[{where}] must be a table", file=file)
        self.data = dict(data)
        self.where = where
        self.file = file

    def _fail(self, key: str, message: str) -> ScenarioError:
        return ScenarioError(message, file=self.file, field=f"{self.where}.{key}".lstrip("."))

    def take(self, key: str, kind: type | tuple[type, ...], default: Any = ...) -> Any:
        if key not in self.data:
            if default is ...:
                raise self._fail(key, "is missing")
            return default
        value = self.data.pop(key)
        if kind is float and isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        if not isinstance(value, kind) or (isinstance(value, bool) and kind is not bool):
            raise self._fail(key, f"has the wrong type ({type(value).__name__})")
        return value

    def sub(self, key: str) -> _Section:
        return _Section(self.take(key, dict), f"{self.where}.{key}".lstrip("."), self.file)

    def optional_sub(self, key: str) -> _Section | None:
        return self.sub(key) if key in self.data else None

    def floats(self, key: str) -> tuple[float, ...]:
        values = self.take(key, list)
        try:
            return tuple(float(v) for v in values)
        except (TypeError, ValueError):
            raise self._fail(key, "must be a list of numbers") from None

    def finish(self) -> None:
        if self.data:
            raise self._fail(sorted(self.data)[0], "is not a known key")


def _canonical(size: str, path: Path) -> str:
    try:
        name = parse_size(size)
    except UnitError as exc:
        raise ScenarioError(str(exc), file=str(path)) from None
    if name != size:
        raise ScenarioError(f"size {size!r} must be written canonically as {name!r}",
                            file=str(path))
    return name


def _read_sizes(path: Path) -> tuple[tuple[str, ...], np.ndarray, str]:
    header, rows, source = _read_csv(path)
    if header == ["size", "area_cmil"]:
        scale = MM2_PER_CMIL
    elif header == ["size", "area_mm2"]:
        scale = 1.0
    else:
        raise ScenarioError("size table needs columns size,area_cmil or size,area_mm2",
                            file=str(path))
    sizes = tuple(_canonical(r[0], path) for r in rows)
    area = np.array([_number(r[1], path) * scale for r in rows])
    return sizes, area, source


def _read_ampacity(
    path: Path, sizes: tuple[str, ...]
) -> tuple[tuple[float, ...], tuple[str, ...], dict[tuple[str, str], np.ndarray], str]:
    """Ampacity CSV with columns ``METHOD:MATERIAL:COLUMN_degC``, rows in profile size order."""
    header, rows, source = _read_csv(path)
    if header[0] != "size" or tuple(r[0] for r in rows) != sizes:
        raise ScenarioError("ampacity rows must list exactly the profile sizes, in order",
                            file=str(path))
    keys: list[tuple[str, str, float]] = []
    for col in header[1:]:
        parts = col.split(":")
        if len(parts) != 3 or parts[1] not in MATERIALS:
            raise ScenarioError(f"column {col!r} is not METHOD:MATERIAL:TEMP", file=str(path))
        keys.append((parts[0], parts[1], _number(parts[2], path)))
    if len(set(keys)) != len(keys):
        raise ScenarioError("repeated ampacity column", file=str(path))
    temps = tuple(sorted({k[2] for k in keys}))
    methods = tuple(dict.fromkeys(k[0] for k in keys))
    tables: dict[tuple[str, str], np.ndarray] = {}
    for j, (method, material, temp) in enumerate(keys):
        table = tables.setdefault((method, material), np.full((len(temps), len(sizes)), np.nan))
        table[temps.index(temp)] = [_number(r[j + 1], path) for r in rows]
    for table in tables.values():
        table.flags.writeable = False
    return temps, methods, tables, source


def _size_area_mm2(size: str, sizes: tuple[str, ...], area: np.ndarray, path: Path) -> float:
    """Area of a size named in a table; kcmil sizes beyond the catalogue from their name."""
    if size in sizes:
        return float(area[sizes.index(size)])
    if size.endswith(" kcmil"):
        return float(size.split()[0]) * 1000 * MM2_PER_CMIL
    raise ScenarioError(f"size {size!r} is neither a profile size nor a kcmil size",
                        file=str(path))


def _read_egc(
    path: Path, sizes: tuple[str, ...], area: np.ndarray
) -> tuple[tuple[tuple[float, str, str], ...], tuple[tuple[float, float], ...], str]:
    header, rows, source = _read_csv(path)
    if header not in (["ocpd_max_a", "Cu", "Al"], ["ampacity_max_a", "Cu", "Al"]):
        raise ScenarioError("EGC table needs columns ocpd_max_a,Cu,Al (or ampacity_max_a,Cu,Al)",
                            file=str(path))
    table = tuple((_number(r[0], path), _canonical(r[1], path), _canonical(r[2], path))
                  for r in rows)
    areas = tuple((_size_area_mm2(cu, sizes, area, path), _size_area_mm2(al, sizes, area, path))
                  for _, cu, al in table)
    return table, areas, source


def _bands(values: Any, width: int, what: str, file: str) -> tuple[tuple[float, ...], ...]:
    try:
        rows = tuple(tuple(float(x) for x in row) for row in values)
    except (TypeError, ValueError):
        raise ScenarioError(f"{what} must be a list of [number, ...] rows", file=file) from None
    if any(len(row) != width for row in rows):
        raise ScenarioError(f"{what} rows must have {width} numbers each", file=file)
    return rows


def read_profile(path: str | Path) -> RuleProfile:
    """Read a rule-profile TOML (and the CSVs it names, beside it) into a RuleProfile."""
    path = Path(path)
    file = str(path)
    try:
        with path.open("rb") as fh:
            data = tomllib.load(fh)
    except OSError as exc:
        raise ScenarioError(f"cannot read rule profile: {exc}", file=file) from None
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"not valid TOML: {exc}", file=file) from None
    top = _Section(data, "", file)
    here = path.parent
    sources: dict[str, str] = {}

    name = top.take("name", str)
    title = top.take("title", str)
    edition = top.take("edition", str)
    catalogue = top.take("catalogue", str)
    frequency_hz = top.take("frequency_hz", float)
    notes = tuple(str(x) for x in top.take("notes", list, []))

    vd = top.sub("voltage_drop")
    drop = {k: vd.take(f"{k}_pct", float) for k in DROP_KINDS}
    sources["voltage_drop"] = vd.take("source", str)
    vd.finish()

    dc = top.sub("design_current")
    unknown_load_factor = dc.take("unknown_load_factor", float)
    sources["unknown_load"] = dc.take("unknown_load_source", str)
    continuous_factor = dc.take("continuous_factor", float)
    continuous_after = dc.take("continuous_after_adjustment", bool, False)
    sources["continuous"] = dc.take("continuous_source", str)
    dc.finish()

    amp = top.sub("ampacity")
    sizes, area, sources["sizes"] = _read_sizes(here / amp.take("sizes", str))
    temps, methods, tables, sources["ampacity_table"] = _read_ampacity(
        here / amp.take("table", str), sizes)
    two_loaded: dict[tuple[str, str], np.ndarray] = {}
    if (two_file := amp.take("table_two_loaded", str, None)) is not None:
        two_temps, _, two_loaded, sources["ampacity_two_loaded"] = _read_ampacity(
            here / two_file, sizes)
        if two_temps != temps or not set(two_loaded) <= set(tables):
            raise ScenarioError("the two-loaded-conductor table must have the columns of the "
                                "main ampacity table", file=str(here / two_file))
    insulation = amp.floats("insulation_temps_c")
    credit_min = amp.take("ambient_credit_min_c", float)
    sources["ampacity"] = amp.take("source", str)
    sources["ambient"] = amp.take("ambient_source", str)
    meth = amp.sub("methods")
    ref = amp.sub("reference_ambient_c")
    installation_methods = {k: meth.take(k, str) for k in list(meth.data)}
    reference_ambient = {k: ref.take(k, float) for k in list(ref.data)}
    amp.finish()

    grp = top.sub("grouping")
    per_group = grp.take("conductors_per_group", int)
    grouping = _bands(grp.take("bands", list), 2, "grouping bands", file)
    sources["grouping"] = grp.take("source", str)
    grp.finish()

    terminal_rule = None
    if (term := top.optional_sub("terminals")) is not None:
        terminal_rule = TerminalRule(
            low_c=term.take("low_c", float), high_c=term.take("high_c", float),
            low_max_ocpd_a=term.take("low_max_ocpd_a", float),
            low_max_size=term.take("low_max_size", str), source=term.take("source", str))
        sources["terminals"] = terminal_rule.source
        term.finish()

    prot = top.sub("protection")
    ratings = prot.floats("standard_ratings_a")
    sources["standard_ratings"] = prot.take("standard_ratings_source", str)
    next_size_up = prot.take("next_size_up_max_a", float, None)
    i2_multiple: dict[str, float] = {}
    i2_limit = math.inf
    if (ovl := prot.optional_sub("overload")) is not None:
        i2_limit = ovl.take("i2_max_of_iz", float)
        i2_multiple = {k: ovl.take(k, float) for k in ("breaker", "fuse", "fuse_small")}
        sources["overload"] = ovl.take("source", str)
        ovl.finish()
    sources["next_size_up"] = prot.take("next_size_up_source", str)
    sources["small_conductors"] = prot.take("small_conductors_source", str)
    small = []
    for i, row in enumerate(prot.take("small_conductors", list, [])):
        s = _Section(row, f"protection.small_conductors[{i}]", file)
        small.append((s.take("material", str), s.take("size", str), s.take("max_ocpd_a", float)))
        s.finish()
    prot.finish()

    egc = top.sub("egc")
    egc_rule = egc.take("rule", str)
    egc_proportional = egc.take("proportional", bool)
    sources["egc"] = egc.take("source", str)
    egc_table: tuple[tuple[float, str, str], ...] = ()
    egc_areas: tuple[tuple[float, float], ...] = ()
    phase_bands: tuple[tuple[float, ...], ...] = ()
    if egc_rule in ("device_rating", "conductor_ampacity"):
        egc_table, egc_areas, sources["egc_table"] = _read_egc(
            here / egc.take("table", str), sizes, area)
    elif egc_rule == "phase_area":
        phase_bands = _bands(egc.take("bands", list), 3, "EGC bands", file)
    pe_rule = egc.take("pe_rule", str, "table")
    if (pe_source := egc.take("pe_adiabatic_source", str, None)) is not None:
        sources["pe_adiabatic"] = pe_source
    egc.finish()

    min_parallel = None
    overridable = False
    if (par := top.optional_sub("parallel")) is not None:
        min_parallel = par.take("min_size", str)
        overridable = par.take("practice", bool, False)
        sources["parallel"] = par.take("source", str)
        par.finish()

    sc = top.sub("short_circuit")
    clearing = sc.take("default_clearing_time_s", float)
    finals = _bands(sc.take("final_temperature_c", list), 2, "final temperatures", file)
    family_final = {f: sc.take(f"{f}_final_c", float) for f in INSULATION_FAMILIES}
    sources["insulation_family"] = sc.take("family_source", str)
    sources["short_circuit"] = sc.take("source", str)
    sc.finish()

    terminals = None
    if (tm := top.optional_sub("terminations")) is not None:
        header, rows, table_source = _read_csv(here / tm.take("table", str))
        terminals = read_terminal_table(
            header, rows, {sz: i for i, sz in enumerate(sizes)}, tm.take("oversize", str),
            f"{tm.take('source', str)}; table: {table_source}", str(here / "terminals"))
        sources["terminations"] = terminals.source
        tm.finish()

    soil = None
    if (so := top.optional_sub("soil")) is not None:
        by_inst = so.sub("resistivity")
        soil = SoilCorrection(
            reference_k_m_per_w=so.take("reference_k_m_per_w", float),
            reference_depth_m=so.take("reference_depth_m", float),
            resistivity=MappingProxyType({
                k: tuple((b[0], b[1]) for b in _bands(by_inst.take(k, list), 2,
                                                      "soil resistivity factors", file))
                for k in list(by_inst.data)}),
            depth=tuple((b[0], b[1]) for b in _bands(so.take("depth", list), 2,
                                                     "depth factors", file)),
            source=so.take("source", str))
        by_inst.finish()
        so.finish()
        sources["soil"] = soil.source

    raceway = None
    if (rw := top.optional_sub("raceway")) is not None:
        raceway = _read_raceway(rw, here, sizes, file)
        sources["raceway"] = raceway.source

    ms = top.sub("motor_start")
    dip = ms.take("max_dip_pct", float)
    sources["motor_start"] = ms.take("source", str)
    ms.finish()

    extra = _read_circuit_rules(top, here, sizes, area, sources)
    fl = top.sub("fault")
    fault = FaultRule(
        c_max=fl.take("c_max", float), c_min=fl.take("c_min", float),
        motor_multiple=fl.take("motor_multiple", float),
        motor_r_x=fl.take("motor_r_x", float), device=fl.take("device", str),
        small_device_max_a=fl.take("small_device_max_a", float),
        large_device=fl.take("large_device", str),
        trip_multiple=fl.take("trip_multiple", float),
        fuse_multiple_final=fl.take("fuse_multiple_final", float),
        fuse_multiple_distribution=fl.take("fuse_multiple_distribution", float),
        final_circuit_max_a=fl.take("final_circuit_max_a", float),
        final_time_s=fl.take("final_time_s", float),
        distribution_time_s=fl.take("distribution_time_s", float),
        loop_temperature=fl.take("loop_temperature", str),
        source=fl.take("source", str))
    sources["fault"] = fault.source
    fl.finish()
    top.finish()

    area.flags.writeable = False
    return RuleProfile(
        name=name, title=title, edition=edition, path=file, catalogue=catalogue,
        frequency_hz=frequency_hz, notes=notes, sources=MappingProxyType(sources),
        drop_branch_pct=drop["branch"], drop_feeder_pct=drop["feeder"],
        drop_total_pct=drop["total"],
        unknown_load_factor=unknown_load_factor, continuous_factor=continuous_factor,
        sizes=sizes, size_area_mm2=area,
        insulation_temps_c=insulation, column_temps_c=temps, methods=methods,
        installation_methods=MappingProxyType(installation_methods),
        reference_ambient_c=MappingProxyType(reference_ambient),
        ambient_credit_min_c=credit_min, ampacity_tables_a=MappingProxyType(tables),
        ampacity_two_loaded_a=MappingProxyType(two_loaded),
        grouping_conductors_per_group=per_group,
        grouping_bands=tuple((b[0], b[1]) for b in grouping),
        terminal_rule=terminal_rule,
        standard_ratings_a=ratings, next_size_up_max_a=next_size_up,
        overload_i2_multiple=MappingProxyType(i2_multiple), overload_i2_limit=i2_limit,
        small_conductor_max_ocpd_a=tuple(small),
        egc_rule=egc_rule, egc_table=egc_table, egc_table_area_mm2=egc_areas,
        egc_proportional=egc_proportional,
        egc_phase_bands=tuple((b[0], b[1], b[2]) for b in phase_bands),
        pe_rule=pe_rule,
        min_parallel_size=min_parallel, default_clearing_time_s=clearing,
        short_circuit_final_c=tuple((b[0], b[1]) for b in finals),
        family_final_c=MappingProxyType(family_final),
        motor_start_dip_pct=dip, fault=fault, continuous_after_adjustment=continuous_after,
        terminals=terminals, raceway=raceway, min_parallel_overridable=overridable, soil=soil,
        **extra,
    )


def _read_circuit_rules(top: _Section, here: Path, sizes: tuple[str, ...], area: np.ndarray,
                        sources: dict[str, str]) -> dict[str, Any]:
    """The optional sections [motors], [transformer_secondary], [service], [neutral]."""
    out: dict[str, Any] = {}
    if (mo := top.optional_sub("motors")) is not None:
        rule = mo.take("rule", str)
        if rule not in MOTOR_RULES:
            raise mo._fail("rule", f"must be one of {', '.join(MOTOR_RULES)}")
        three = single = None
        if (name := mo.take("three_phase_table", str, None)) is not None:
            three = read_flc_table(here / name, mo.take("three_phase_name", str))
        if (name := mo.take("single_phase_table", str, None)) is not None:
            single = read_flc_table(here / name, mo.take("single_phase_name", str))
        columns = _bands(mo.take("voltage_columns", list, []), 3, "motor voltage columns",
                         mo.file)
        device_max = mo.take("branch_device_max_pct", float, None)
        out["motors"] = MotorRules(
            rule=rule, three_phase=three, single_phase=single,
            voltage_columns=tuple((c[0], c[1], c[2]) for c in columns),
            typical=read_typical(here / mo.take("typical_table", str)),
            branch_factor=mo.take("branch_factor", float),
            branch_device_max_pct=device_max,
            branch_device_next_size_up=mo.take("branch_device_next_size_up", bool, False),
            conductor_protection_by_overload=mo.take("conductor_protection_by_overload", bool,
                                                     False))
        for key in ("table_source", "typical_source", "branch_source", "device_source"):
            sources[f"motor_{key.removesuffix('_source')}"] = mo.take(key, str, "")
        mo.finish()
    if (sec := top.optional_sub("transformer_secondary")) is not None:
        rule = sec.take("rule", str)
        if rule not in ("device", "rated_current"):
            raise sec._fail("rule", "must be device or rated_current")
        out["secondary_rule"] = rule
        out["secondary_factor"] = sec.take("factor", float, 1.0)
        sources["transformer_secondary"] = sec.take("source", str)
        sec.finish()
    if (svc := top.optional_sub("service")) is not None:
        path = here / svc.take("bonding_table", str)
        header, rows, sources["service_bonding_table"] = _read_csv(path)
        if header != ["phase_cu_max", "phase_al_max", "Cu", "Al"]:
            raise ScenarioError("bonding table needs columns phase_cu_max,phase_al_max,Cu,Al",
                                file=str(path))
        out["service_bonding"] = tuple(
            tuple(_size_area_mm2(_canonical(c, path), sizes, area, path) for c in r)
            for r in rows)
        out["service_bonding_pct"] = svc.take("above_table_pct", float)
        sources["service_bonding"] = svc.take("source", str)
        svc.finish()
    if (neu := top.optional_sub("neutral")) is not None:
        out["neutral_nonlinear_share"] = neu.take("nonlinear_share", float)
        sources["neutral_counting"] = neu.take("source", str)
        neu.finish()
    return out


def with_terminal_table(profile: RuleProfile, path: str | Path) -> RuleProfile:
    """The profile with its terminal ranges replaced by a table file.

    The file has the columns of the profile's own table (e.g. one beside a price list);
    the oversize practice stays the profile's.
    """
    header, rows, source = _read_csv(Path(path))
    oversize = profile.terminals.oversize if profile.terminals is not None else "splice"
    table = read_terminal_table(header, rows, {sz: i for i, sz in enumerate(profile.sizes)},
                                oversize, f"{Path(path).name}: {source}", str(path))
    return dataclasses.replace(profile, terminals=table)


def _read_raceway(rw: _Section, here: Path, sizes: tuple[str, ...], file: str) -> RacewayRules:
    """The ``[raceway]`` section and the raceway and conductor tables it names."""
    header, rows, race_source = _read_csv(here / rw.take("raceways", str))
    types = read_raceway_types(header, rows, str(here / "raceways"))
    c_header, c_rows, cond_source = _read_csv(here / rw.take("conductors", str))
    insulation = rw.sub("insulation")
    lookup = {sz: i for i, sz in enumerate(sizes)}
    areas: dict[str, np.ndarray] = {
        m: read_conductor_areas(c_header, c_rows, lookup, insulation.take(m, str), file)
        for m in MATERIALS}
    insulation.finish()
    fill = _bands(rw.take("fill", list), 2, "raceway fill bands", file)
    widths = rw.floats("tray_widths_mm")
    trench = tuple(str(x) for x in rw.take("trench", list))
    inch_labels = rw.take("inch_labels", bool)
    kinds = rw.sub("types")
    installation_type = {k: kinds.take(k, str) for k in list(kinds.data)}
    kinds.finish()
    source = rw.take("source", str)
    rw.finish()
    for inst, kind in installation_type.items():
        if kind not in types and kind not in (TRAY, NONE, DIRECT):
            raise ScenarioError(f"[raceway.types] {inst} = {kind!r} is not a raceway type of "
                                f"the table ({', '.join(types)}), {TRAY!r} or {NONE!r}",
                                file=file)
    if set(installation_type) != set(INSTALLATIONS):
        raise ScenarioError(f"[raceway.types] must map exactly the installations "
                            f"{INSTALLATIONS}", file=file)
    if not fill or fill[-1][0] != math.inf:
        raise ScenarioError("raceway fill bands must end with inf", file=file)
    return RacewayRules(
        types=MappingProxyType(types), installation_type=MappingProxyType(installation_type),
        conductor_area_mm2=MappingProxyType(areas),
        fill=tuple((b[0], b[1]) for b in fill), tray_widths_mm=widths, trench=trench,
        inch_labels=inch_labels,
        source=f"{source}; raceways: {race_source}; conductors: {cond_source}")


@cache
def load_profile(name: str) -> RuleProfile:
    """The bundled profile "nec", "cec" or "iec", or a profile TOML file by path; cached."""
    if name in PROFILES:
        return read_profile(_HERE / f"{name}.toml")
    if name.endswith(".toml"):
        return read_profile(name)
    raise ScenarioError(
        f"unknown rule profile {name!r} (use one of {', '.join(PROFILES)} or a .toml file)",
        field="rules")

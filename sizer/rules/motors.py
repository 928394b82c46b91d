"""Motor circuits by a rule profile: full-load current, conductor factor, branch device.

The codes size motor circuits from tabulated full-load currents, not from nameplates
(NEC 430.6(A)(1)): NEC Tables 430.248 (single-phase) and 430.250 (three-phase) by
horsepower and the table voltage of the system (460 V for 480 V). The iec profile has
no such table: the rated current comes from the output power, a typical efficiency and
a typical power factor (stated as typical values). A table that has no row or column for
a motor falls back to that formula and says so.

Pure functions of SI floats: powers in W, voltages in V, currents in A.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from sizer.errors import ScenarioError
from sizer.rules.tables import read_csv, read_number

HP_W = 745.69987158227022  # one mechanical horsepower in W (pint's "hp")
MOTOR_RULES = ("table", "efficiency")
_REL = 1e-6   # a 3.7 kW motor is 4.96 hp: the 5 hp row; 7.5 hp is the 7.5 hp row


@dataclass(frozen=True, eq=False)
class FlcTable:
    """Full-load currents (A) by horsepower (rows, ascending) and table voltage (columns)."""

    hp: np.ndarray
    volts: tuple[float, ...]
    current_a: np.ndarray        # [rows, columns], NaN where the table has no value
    source: str
    name: str                    # e.g. "NEC Table 430.250"


@dataclass(frozen=True, eq=False)
class TypicalMotors:
    """Typical efficiency and power factor by rated output (kW rows, ascending)."""

    kw: np.ndarray
    efficiency: np.ndarray
    power_factor: np.ndarray
    source: str


@dataclass(frozen=True, eq=False)
class MotorRules:
    """A profile's motor-circuit rules, read from its ``[motors]`` section and tables."""

    rule: str                                   # "table" | "efficiency"
    three_phase: FlcTable | None
    single_phase: FlcTable | None
    # (table voltage, lowest system voltage, highest system voltage) it stands for
    voltage_columns: tuple[tuple[float, float, float], ...]
    typical: TypicalMotors
    branch_factor: float                        # x full-load current, branch conductors
    branch_device_max_pct: float | None         # None: the general device rule
    branch_device_next_size_up: bool
    conductor_protection_by_overload: bool      # NEC 240.4(G): Article 430 protects them


@dataclass(frozen=True)
class MotorCurrent:
    """A motor's full-load current and where it came from, in words for the report."""

    current_a: float
    basis: str
    from_table: bool


def read_flc_table(path: Path, name: str) -> FlcTable:
    """An FLC CSV: ``hp`` then one column per table voltage."""
    header, rows, source = read_csv(path)
    if not header or header[0] != "hp" or len(header) < 2:
        raise ScenarioError("motor table needs columns hp,VOLTS,...", file=str(path))
    volts = tuple(read_number(h, path) for h in header[1:])
    hp = np.array([read_number(r[0], path) for r in rows])
    cur = np.array([[read_number(c, path) for c in r[1:]] for r in rows])
    if hp.size == 0 or np.any(np.diff(hp) <= 0) or np.any(~np.isfinite(hp)):
        raise ScenarioError("motor table rows must ascend in hp", file=str(path))
    if np.any(cur[np.isfinite(cur)] <= 0):
        raise ScenarioError("motor table has a current <= 0", file=str(path))
    return FlcTable(hp, volts, cur, source, name)


def read_typical(path: Path) -> TypicalMotors:
    """Typical efficiency and power factor CSV: ``kw,efficiency,power_factor``."""
    header, rows, source = read_csv(path)
    if header != ["kw", "efficiency", "power_factor"]:
        raise ScenarioError("typical-motor table needs columns kw,efficiency,power_factor",
                            file=str(path))
    data = np.array([[read_number(c, path) for c in r] for r in rows])
    if (data.size == 0 or np.any(np.diff(data[:, 0]) <= 0) or np.any(data[:, 1:] <= 0)
            or np.any(data[:, 1:] > 1)):
        raise ScenarioError("typical-motor rows must ascend in kW with fractions in (0, 1]",
                            file=str(path))
    return TypicalMotors(data[:, 0], data[:, 1], data[:, 2], source)


def table_voltage_v(rules: MotorRules, system_v: float) -> float | None:
    """The table voltage that stands for a system voltage (460 V for 480 V), or None."""
    for table_v, low, high in rules.voltage_columns:
        if low * (1 - _REL) <= system_v <= high * (1 + _REL):
            return table_v
    return None


def table_current_a(table: FlcTable, power_w: float, table_v: float) -> tuple[float, float]:
    """(FLC in A, table hp) of the smallest row at or above the motor's hp; NaN if none."""
    hp = power_w / HP_W
    row = int(np.searchsorted(table.hp, hp * (1 - _REL), side="left"))
    if row >= table.hp.size or table_v not in table.volts:
        return math.nan, math.nan
    return float(table.current_a[row, table.volts.index(table_v)]), float(table.hp[row])


def typical_current_a(typical: TypicalMotors, power_w: float, voltage_v: float,
                      phases: int) -> tuple[float, float, float]:
    """(I in A, efficiency, power factor): I = P / (k · V · η · cos φ), k = √3 or 1.

    The row at or below the motor's output gives η and cos φ (smaller motors are less
    efficient, so this errs high); below the first row, the first row.
    """
    kw = power_w / 1000.0
    row = max(int(np.searchsorted(typical.kw, kw * (1 + _REL), side="right")) - 1, 0)
    eff, pf = float(typical.efficiency[row]), float(typical.power_factor[row])
    k = math.sqrt(3.0) if phases == 3 else 1.0
    return power_w / (k * voltage_v * eff * pf), eff, pf


def full_load_current(rules: MotorRules, power_w: float, voltage_v: float,
                      phases: int) -> MotorCurrent:
    """The full-load current a motor circuit is sized from (A), with its basis in words."""
    if not (math.isfinite(power_w) and power_w > 0 and math.isfinite(voltage_v)
            and voltage_v > 0):
        raise ScenarioError("a motor needs a positive rating and voltage", field="motor")
    why = ""
    if rules.rule == "table":
        table = rules.three_phase if phases == 3 else rules.single_phase
        column = table_voltage_v(rules, voltage_v)
        if table is not None and column is not None:
            amps, hp = table_current_a(table, power_w, column)
            if math.isfinite(amps):
                return MotorCurrent(amps, f"{table.name}, {hp:g} hp at {column:g} V", True)
            why = f"{table.name} has no {power_w / HP_W:.3g} hp motor at {column:g} V"
        elif table is not None:
            why = f"{table.name} has no column for {voltage_v:g} V"
    amps, eff, pf = typical_current_a(rules.typical, power_w, voltage_v, phases)
    basis = (f"{power_w / 1e3:.3g} kW / (typical efficiency {100 * eff:.1f} % x typical "
             f"power factor {pf:.2f})")
    return MotorCurrent(amps, f"{why}: {basis}" if why else basis, False)


def branch_device_a(rules: MotorRules, ratings_a: tuple[float, ...],
                    full_load_a: float) -> float | None:
    """The branch short-circuit and ground-fault device a motor circuit gets (A).

    NEC 430.52(C)(1) and Table 430.52: an inverse-time breaker up to 250 % of the
    full-load current; where that is not a standard rating, the next standard rating
    above it (Exception No. 1). sizer takes the largest rating the rule allows, the one
    that best rides through the start. None where the profile has no such rule.
    """
    if rules.branch_device_max_pct is None:
        return None
    limit = rules.branch_device_max_pct / 100.0 * full_load_a
    r = np.asarray(ratings_a, dtype=float)
    if rules.branch_device_next_size_up:
        pos = int(np.searchsorted(r, limit * (1 - 1e-9), side="left"))
    else:
        pos = int(np.searchsorted(r, limit * (1 + 1e-9), side="right")) - 1
    if pos < 0 or pos >= r.size:
        return None
    return float(r[pos])

"""Readers of one scenario value: raw TOML value (or CSV cell text) to an SI value.

Each reader takes the raw value and ``text`` (True for a CSV cell, whose numbers come as
text) and returns the parsed value, or raises ScenarioError with a one-line message;
the caller adds the file, node and field. Bounds here are sanity bounds of our own, not
rules: beyond them an input is a typo, and the candidate grid would exhaust memory.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from functools import lru_cache
from typing import Any

from sizer.errors import ScenarioError, UnitError
from sizer.model import AMBIENT_RANGE_C
from sizer.units import (
    LoadSpec,
    parse_conductor,
    parse_length_m,
    parse_load,
    parse_material,
    parse_money,
    parse_percent,
    parse_quantity,
)
from sizer.validation import suggest

Reader = Callable[[Any, bool], Any]


def show(value: Any) -> str:
    """A raw value as a message quotes it (TOML booleans in lower case)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int) and abs(value) >= 10**15:   # shown short, not in 300 digits
        digits = int(math.log10(abs(value))) + 1
        return f"{'-' if value < 0 else ''}a {digits}-digit number"
    return repr(value)


def _unit_text(value: Any, example: str) -> str:
    if isinstance(value, bool) or not isinstance(value, str):
        raise ScenarioError(f"must be a quantity with its unit, in quotes, e.g. \"{example}\", "
                            f"got {show(value)}")
    return value


# The installation words of the scenario format; the catalogue decides what each means.
INSTALLATION_WORDS = ("conduit", "steel_conduit", "tray", "buried", "direct_buried",
                      "free_air")
# sizer sizes low-voltage cable: 1000 V AC is the top of the low-voltage range (IEC 60038).
MAX_VOLTAGE_V = 1000.0
DEFAULT_POWER_FACTOR = 0.9
# Sanity bounds, not rules: beyond them an input is a typo, and the candidate grid
# (segments x materials x sizes x sets) would exhaust memory or overflow.
MAX_LENGTH_M = 100_000.0   # 100 km, far beyond any low-voltage run
MAX_SETS = 20              # parallel sets of one run
MAX_GROUPING = 1000        # current-carrying conductors in one raceway
MAX_CURRENT_A = 1.0e6      # a device rating or an available fault current (1 MA)
MIN_FAULT_A = 10.0
CLEARING_TIME_S = (1e-3, 5.0)  # the adiabatic limit holds up to 5 s (IEC 60949)
MAX_PRICE = 1.0e6          # per kWh, per kW-month or per kg, in any currency
# Mechanical horsepower (the NEC and NEMA motor rating unit), 745.7 W, from pint.
HP_W = parse_quantity("1 hp", "W")


_CONTROL = re.compile(r"[\x00-\x1f]")   # a control character: not one line of text


def read_text(value: Any, text: bool = False) -> str:
    """One line of non-empty text."""
    if not isinstance(value, str):
        raise ScenarioError(f"must be text in quotes, got {show(value)}")
    s = value.strip()
    if not s:
        raise ScenarioError("must not be empty")
    if _CONTROL.search(s):
        raise ScenarioError(f"must be one line of text, got {value!r}")
    return s


def read_number(value: Any, text: bool = False) -> float:
    """A plain finite number (a CSV cell's text is read as one)."""
    if isinstance(value, bool):
        raise ScenarioError(f"must be a number, got {show(value)}")
    if isinstance(value, int | float):
        try:
            x = float(value)
        except OverflowError as exc:
            raise ScenarioError(f"is too large, got {show(value)}") from exc
    elif isinstance(value, str) and text:
        try:
            x = float(value.strip())
        except ValueError as exc:
            raise ScenarioError(f"must be a number, got {value!r}") from exc
    elif isinstance(value, str):
        raise ScenarioError(f"must be a plain number without quotes or unit, got {value!r}")
    else:
        raise ScenarioError(f"must be a number, got {show(value)}")
    if not math.isfinite(x):
        raise ScenarioError(f"must be a finite number, got {show(value)}")
    return x


def read_fraction(value: Any, text: bool = False) -> float:
    """A number in (0, 1]: power factor, demand factor, load factor."""
    x = read_number(value, text)
    if not 0 < x <= 1:
        raise ScenarioError(f"must be in (0, 1], got {show(value)}")
    return x


def read_phases(value: Any, text: bool = False) -> int:
    """1 or 3."""
    x = read_number(value, text)
    if x not in (1.0, 3.0):
        raise ScenarioError(f"must be 1 or 3, got {show(value)}")
    return int(x)


def read_count(value: Any, text: bool = False) -> int:
    """A whole number of at least 1."""
    x = read_number(value, text)
    if x != int(x) or x < 1:
        raise ScenarioError(f"must be a whole number of at least 1, got {show(value)}")
    return int(x)


def auto(read: Reader) -> Reader:
    """Let ``"auto"`` stand for None (the rule profile decides)."""
    def reader(value: Any, text: bool = False) -> Any:
        if isinstance(value, str) and value.strip().lower() == "auto":
            return None
        return read(value, text)
    return reader


def read_bool(value: Any, text: bool = False) -> bool:
    """A boolean: true or false (a CSV cell may also say yes/no/1/0)."""
    if isinstance(value, bool):
        return value
    if text and isinstance(value, str):
        word = value.strip().lower()
        if word in ("true", "yes", "y", "1"):
            return True
        if word in ("false", "no", "n", "0"):
            return False
    raise ScenarioError(f"must be true or false, got {show(value)}")


# pint parsing costs ~20 µs; schedules repeat the same strings many times over.
_length_m = lru_cache(maxsize=4096)(parse_length_m)
_parse_load = lru_cache(maxsize=4096)(parse_load)


@lru_cache(maxsize=4096)
def _quantity(value: str, unit: str) -> float:
    return parse_quantity(value, unit)


def _positive_at_most(x: float, value: Any, what: str, top: float, top_text: str) -> float:
    """``x`` when 0 < x <= top, else the one-line error naming ``what`` and the bound."""
    if not x > 0:
        raise ScenarioError(f"must be a positive {what}, got {show(value)}")
    if x > top:
        raise ScenarioError(f"must be at most {top_text}, got {show(value)}")
    return x


def read_length(value: Any, text: bool = False) -> float:
    """A route length in metres, positive and at most MAX_LENGTH_M."""
    x = _length_m(_unit_text(value, "120 ft"))
    if not x > 0:
        raise ScenarioError(f"must be a positive length, got {show(value)}")
    if x > MAX_LENGTH_M:
        raise ScenarioError(f"must be at most {MAX_LENGTH_M / 1000:g} km (a low-voltage run "
                            f"is far shorter: check the unit), got {show(value)}")
    return x


def _at_most(read: Reader, top: int, what: str) -> Reader:
    """``read``, refusing values above ``top``."""
    def reader(value: Any, text: bool = False) -> Any:
        x = read(value, text)
        if x is not None and x > top:
            raise ScenarioError(f"must be at most {top} {what}, got {show(value)}")
        return x
    return reader


read_sets = _at_most(read_count, MAX_SETS, "parallel sets")
read_grouping = _at_most(auto(read_count), MAX_GROUPING, "conductors in one raceway")


def read_memory_bytes(value: Any, what: str = "memory") -> float:
    """An amount of memory in bytes ("8 GB", "512 MB"), for the candidate-table guard."""
    try:
        x = _quantity(_unit_text(value, "8 GB"), "B")
    except ScenarioError as exc:
        raise ScenarioError(f"{what}: {exc.message}") from None
    if not x > 0:
        raise ScenarioError(f"{what}: must be a positive amount of memory such as \"8 GB\", "
                            f"got {show(value)}")
    return x


def read_voltage(value: Any, text: bool = False) -> float:
    """A low voltage in volts."""
    x = _quantity(_unit_text(value, "480 V"), "V")
    if not x > 0:
        raise ScenarioError(f"must be a positive voltage, got {show(value)}")
    if x > MAX_VOLTAGE_V:
        raise ScenarioError(f"sizer sizes low-voltage circuits, up to {MAX_VOLTAGE_V:g} V; "
                            f"got {show(value)}")
    return x


def read_current(value: Any, text: bool = False) -> float:
    """A positive current in amperes, at most MAX_CURRENT_A."""
    x = _quantity(_unit_text(value, "20 A"), "A")
    return _positive_at_most(x, value, "current", MAX_CURRENT_A, f"{MAX_CURRENT_A / 1e3:g} kA")


def read_fault_current(value: Any, text: bool = False) -> float:
    """An available fault current in amperes (10 A to 1 MA)."""
    x = read_current(value, text)
    if x < MIN_FAULT_A:
        raise ScenarioError(f"must be at least {MIN_FAULT_A:g} A, got {show(value)}")
    return x


def read_time(value: Any, text: bool = False) -> float:
    """A device clearing time in seconds, 1 ms to 5 s."""
    low, high = CLEARING_TIME_S
    x = _positive_at_most(_quantity(_unit_text(value, "0.1 s"), "s"), value, "time", high,
                          f"{high:g} s (the range of the adiabatic withstand check)")
    if x < low:
        raise ScenarioError(f"must be between {low * 1e3:g} ms and {high:g} s (the range of "
                            f"the adiabatic withstand check), got {show(value)}")
    return x


def _price_bound(x: float, value: Any) -> float:
    if x > MAX_PRICE:
        raise ScenarioError(f"must be at most {MAX_PRICE:g} (check the unit), got "
                            f"{show(value)}")
    return x  # zero is a valid price (free energy, no demand charge)


def read_temperature(value: Any, text: bool = False) -> float:
    """A conductor or terminal temperature rating in degC."""
    x = _quantity(_unit_text(value, "90 degC"), "degC")
    if not 0 < x <= 300:
        raise ScenarioError(f"must be a temperature rating such as \"90 degC\", "
                            f"got {show(value)}")
    return x


def read_ambient(value: Any, text: bool = False) -> float:
    """An ambient temperature in degC, within what cable routes see."""
    x = _quantity(_unit_text(value, "30 degC"), "degC")
    lo, hi = AMBIENT_RANGE_C
    if not lo <= x <= hi:
        raise ScenarioError(f"must be a plausible ambient, {lo:g} degC to {hi:g} degC, "
                            f"got {show(value)}")
    return x


def read_percent(value: Any, text: bool = False) -> float:
    """A percentage, returned as a fraction ("2 %" -> 0.02)."""
    return parse_percent(_unit_text(value, "2 %")) / 100.0


def read_share(value: Any, text: bool = False) -> float:
    """A share of the load as a fraction in [0, 1]: true (1), false (0), 0.6 or "60 %"."""
    if isinstance(value, bool) or (text and isinstance(value, str)
                                   and value.strip().lower() in ("true", "false", "yes", "no")):
        return 1.0 if read_bool(value, text) else 0.0
    if isinstance(value, str) and "%" in value:
        x = parse_percent(value) / 100.0
    else:
        x = read_number(value, text)
    if not 0 <= x <= 1:
        raise ScenarioError(f"must be true, false or a share from 0 to 1 (or 0 % to 100 %), "
                            f"got {show(value)}")
    return x


def _listed(value: Any, example: str) -> list[Any]:
    """The items of a TOML list, or of text listing them ("Cu, Al", "B/C")."""
    if isinstance(value, str):
        return [p for p in re.split(r"[,;/\s]+", value.strip()) if p]
    if isinstance(value, list):
        return value
    raise ScenarioError(f"must be a list such as {example}, got {show(value)}")


def read_materials(value: Any, text: bool = False) -> tuple[str, ...]:
    """A list of materials (or text such as "Cu, Al")."""
    parts = _listed(value, '["Cu", "Al"]')
    materials = tuple(dict.fromkeys(parse_material(p) for p in parts))
    if not materials:
        raise ScenarioError("must name at least one material (\"Cu\", \"Al\")")
    return materials


OVERSIZE_WORDS = ("splice", "refuse")


def read_oversize(value: Any, text: bool = False) -> str:
    """What to do with a conductor larger than its terminal takes: splice or refuse."""
    word = read_text(value).lower()
    if word not in OVERSIZE_WORDS:
        raise ScenarioError(f"must be one of {', '.join(OVERSIZE_WORDS)} or \"auto\", "
                            f"got {show(value)}")
    return word


def read_size(value: Any, text: bool = False) -> str:
    """A conductor size as the trade writes it ("250 kcmil", "4/0 AWG", "95 mm2")."""
    from sizer.units import parse_size

    try:
        return parse_size(read_text(value))
    except UnitError as exc:
        raise ScenarioError(exc.message) from None


def read_soil_resistivity(value: Any, text: bool = False) -> float:
    """Soil thermal resistivity in K·m/W ("1.5 K*m/W", or a plain number in K·m/W)."""
    from sizer.units import parse_quantity

    if isinstance(value, int | float) and not isinstance(value, bool):
        x = float(value)
    else:
        raw = read_text(value).replace("K.m/W", "K*m/W").replace("K·m/W", "K*m/W")
        try:
            x = float(raw) if _is_number(raw) else parse_quantity(raw, "K*m/W")
        except UnitError as exc:
            raise ScenarioError(f"{exc.message} (write e.g. \"1.5 K*m/W\")") from None
    if not (math.isfinite(x) and 0.2 <= x <= 10):
        raise ScenarioError(f"must be between 0.2 and 10 K*m/W, got {show(value)}")
    return x


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def read_depth(value: Any, text: bool = False) -> float:
    """Laying depth in metres (to the cables), between 0.2 m and 5 m."""
    x = _length_m(_unit_text(value, "0.8 m"))
    if not (math.isfinite(x) and 0.2 <= x <= 5.0):
        raise ScenarioError(f"must be a depth between 0.2 m and 5 m, got {show(value)}")
    return x
DEVICE_WORDS = ("B", "C", "D", "breaker", "fuse")
"""Overcurrent devices for the disconnection rule: miniature breakers by IEC 60898-1
curve, a moulded-case breaker, a fuse (sizer.rules.profile.DEVICES)."""
MAX_TRIP_MULTIPLE = 50.0


def read_device(value: Any, text: bool = False) -> str:
    """The run's overcurrent device: B, C, D (miniature breaker curves), breaker, fuse."""
    word = read_text(value)
    for known in DEVICE_WORDS:
        if word.lower() == known.lower():
            return known
    raise ScenarioError(f"unknown device {word!r}{suggest(word, DEVICE_WORDS)} "
                        f"(use {', '.join(DEVICE_WORDS)}, or \"auto\")")


CURVE_WORDS = ("B", "C", "D")
"""Miniature-breaker curves (IEC 60898-1) a run may be given to meet disconnection."""


def read_curves(value: Any, text: bool = False) -> tuple[str, ...]:
    """Miniature-breaker curves the optimiser may choose from: ["B", "C"] (or "B, C")."""
    parts = _listed(value, '["B", "C"]')
    out = []
    for part in parts:
        word = read_text(part).upper()
        if word not in CURVE_WORDS:
            raise ScenarioError(f"unknown curve {show(part)} (use B, C or D: miniature "
                                "breaker curves of IEC 60898-1)")
        out.append(word)
    curves = tuple(dict.fromkeys(out))
    if not curves:
        raise ScenarioError("must name at least one curve (\"B\", \"C\", \"D\")")
    return curves


def read_trip_multiple(value: Any, text: bool = False) -> float:
    """Current that disconnects the device in time, as a multiple of its rating."""
    x = read_number(value, text)
    if not 1 <= x <= MAX_TRIP_MULTIPLE:
        raise ScenarioError(f"must be from 1 to {MAX_TRIP_MULTIPLE:g} (× the device "
                            f"rating), got {show(value)}")
    return x


INSULATION_TYPES = ("thermoplastic", "thermoset")
WITHSTAND_WORDS = ("finding", "enforce")
PE_RULE_WORDS = ("table", "adiabatic")
_I2T_SCALE = {"a2s": 1.0, "ka2s": 1e6, "ma2s": 1e12}


def read_insulation_type(value: Any, text: bool = False) -> str:
    """The insulation family: thermoplastic (PVC, THHN) or thermoset (XLPE, EPR, XHHW-2)."""
    word = read_text(value).lower()
    if word not in INSULATION_TYPES:
        raise ScenarioError(f"unknown insulation type {word!r}"
                            f"{suggest(word, INSULATION_TYPES)} (use thermoplastic, "
                            "thermoset, or \"auto\")")
    return word


def read_withstand(value: Any, text: bool = False) -> str:
    """How the short-circuit withstand is used: a finding, or enforced on the candidates."""
    word = read_text(value).lower()
    if word not in WITHSTAND_WORDS:
        raise ScenarioError(f"must be \"finding\" or \"enforce\", got {show(value)}")
    return word


def read_pe_rule(value: Any, text: bool = False) -> str:
    """How the protective conductor is sized: by the profile's table or adiabatically."""
    word = read_text(value).lower()
    if word not in PE_RULE_WORDS:
        raise ScenarioError(f"must be \"table\" or \"adiabatic\" (or \"auto\"), got "
                            f"{show(value)}")
    return word


def read_let_through(value: Any, text: bool = False) -> float:
    """A device's let-through energy I²t in A²s: "50000 A2s", "1.2 kA2s", "3e4 A^2 s"."""
    raw = read_text(value)
    compact = raw.replace(" ", "").replace("²", "2").replace("^2", "2").replace("*", "")
    for unit, scale in sorted(_I2T_SCALE.items(), key=lambda kv: -len(kv[0])):
        if compact.lower().endswith(unit):
            number = compact[: -len(unit)]
            try:
                x = float(number) * scale
            except ValueError:
                break
            if not (math.isfinite(x) and x > 0):
                break
            return x
    raise ScenarioError(f"must be a let-through energy like \"50000 A2s\" or "
                        f"\"1.2 kA2s\", got {show(value)}")


def read_installation(value: Any, text: bool = False) -> str:
    """An installation word the conductor catalogue knows."""
    from sizer.catalogue import installation

    word = read_text(value)
    try:
        installation(word)
    except ScenarioError as exc:
        raise ScenarioError(f"unknown installation {word!r}{suggest(word, INSTALLATION_WORDS)} "
                            f"(use {', '.join(INSTALLATION_WORDS)})") from exc
    return word


def read_load(value: Any, text: bool = False) -> LoadSpec:
    """A load in A, W/kW/hp or VA/kVA."""
    raw = _unit_text(value, "12 kW")
    try:
        return _parse_load(raw)
    except UnitError as exc:
        if "not negative" in exc.message:
            raise ScenarioError(f"must be a load of at least 0, got {raw!r}") from exc
        raise


def _power_of_kind(value: Any, kind: str, example: str, words: str) -> float:
    """A positive power of one kind (``"apparent"`` VA or ``"real"`` W)."""
    spec = _parse_load(_unit_text(value, example))
    if spec.kind != kind or not spec.value > 0:
        raise ScenarioError(f"must be a positive {words}, got {show(value)}")
    return spec.value


def read_rating_va(value: Any, text: bool = False) -> float:
    """A transformer rating: apparent power in VA."""
    return _power_of_kind(value, "apparent", "75 kVA", 'apparent power such as "75 kVA"')


def read_pin(value: Any, text: bool = False) -> Any:
    """A pinned conductor ``"[N x ]SIZE MATERIAL"``."""
    return parse_conductor(_unit_text(value, "2x 500 kcmil Al"))


def read_description(value: Any, text: bool = False) -> str:
    """Free text, possibly empty."""
    return "" if value == "" else read_text(value, text)


def read_years(value: Any, text: bool = False) -> float:
    """A duration in years."""
    return _quantity(_unit_text(value, "25 year"), "year")


def read_hours(value: Any, text: bool = False) -> float:
    """Hours (of a year)."""
    return _quantity(_unit_text(value, "8760 h"), "h")


def read_emission(value: Any, text: bool = False) -> float:
    """An emission factor in kg per kWh."""
    return _quantity(_unit_text(value, "0.4 kg/kWh"), "kg/kWh")


def read_percent_number(value: Any, text: bool = False) -> float:
    """A percentage kept as its number ("4.5 %" -> 4.5)."""
    return parse_percent(_unit_text(value, "4.5 %"))


def read_motor_power(value: Any, text: bool = False) -> float:
    """A motor rating: real power in W."""
    return _power_of_kind(value, "real", "15 kW", 'real power such as "15 kW" or "20 hp"')


def money_reader(currency: str, per: str, alt_per: str = "") -> Reader:
    """A reader of a price in ``currency`` per ``per`` (or ``alt_per``), at most MAX_PRICE."""
    def reader(value: Any, text: bool = False) -> float:
        value = _unit_text(value, f"0.12 {currency}/{per}")
        try:
            x = parse_money(value, currency, per)
        except UnitError:
            if not alt_per:
                raise
            x = parse_money(value, currency, alt_per)
        if per == "kg":   # a metal price: zero would make every conductor free of metal
            return _positive_at_most(x, value, "price", MAX_PRICE,
                                     f"{MAX_PRICE:g} (check the unit)")
        return _price_bound(x, value)
    return reader


def read_category(value: Any, text: bool = False) -> str:
    """A load category of ``sizer/operating_profiles.csv`` (how the load runs, for losses)."""
    from sizer.operating import categories  # the data file's rows; imported late (data)

    name = read_text(value, text)
    known = categories()
    if name not in known:
        hint = suggest(name, known)
        raise ScenarioError(f"unknown load category {show(value)}; use one of "
                            + ", ".join(known) + hint)
    return name


def read_loss_load_method(value: Any, text: bool = False) -> str:
    """How each run's loss-load factor is found: moments | buller-woodrow."""
    from sizer.model import LOSS_LOAD_METHODS

    name = read_text(value, text)
    if name not in LOSS_LOAD_METHODS:
        raise ScenarioError(f"must be one of {', '.join(LOSS_LOAD_METHODS)}, got {show(value)}")
    return name


def read_full_load_hours(value: Any, text: bool = False) -> float:
    """Equivalent full-load hours a year (0 < h ≤ 8784)."""
    h = read_hours(value, text)
    if not 0 < h <= 8784:
        raise ScenarioError(f"must be above 0 h and at most 8784 h a year, got {show(value)}")
    return h


def read_phase(value: Any, text: bool = False) -> str:
    """The line(s) a single-phase circuit uses: A, B, C (to neutral) or AB, BC, CA."""
    name = read_text(value, text).upper()
    if name not in ("A", "B", "C", "AB", "BC", "CA"):
        raise ScenarioError(f"must be A, B or C (line to neutral) or AB, BC or CA (line to "
                            f"line), got {show(value)}")
    return name


def read_neutral_size(value: Any, text: bool = False) -> float:
    """A three-phase neutral's size: "reduced" (0.0) or 100 % to 200 % of the phase area."""
    if isinstance(value, str) and value.strip().lower() == "reduced":
        return 0.0
    pct = read_percent(value, text)
    if not 1.0 - 1e-12 <= pct <= 2.0 + 1e-12:
        raise ScenarioError(f'must be "reduced" or between 100 % and 200 %, got {show(value)}')
    return pct

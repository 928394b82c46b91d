"""The one pint registry, and parsers for the quantities and sizes the trade writes.

Every number with a unit enters sizer here and leaves as a plain float in the unit the
caller names (SI unless stated), so the hot code never sees pint.
"""

from __future__ import annotations

import functools
import math
import re
import sys
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

from sizer.errors import UnitError

if TYPE_CHECKING:
    import pint

# Each currency is its own dimension, so a price in EUR never silently meets USD.
CURRENCIES = ("USD", "EUR", "CAD", "GBP", "AUD", "NZD", "CHF", "SEK", "NOK", "DKK", "JPY",
              "CNY", "INR", "ZAR", "BRL", "MXN", "PLN", "CZK")

# pint looks for these at import to support their arrays; sizer never gives it one, and
# importing them costs more than pint itself (dask alone ~0.1 s here). Hidden while pint
# loads, they are importable as usual afterwards.
_NOT_FOR_PINT = ("dask", "scipy")


def _import_pint() -> Any:
    hidden = [name for name in _NOT_FOR_PINT if name not in sys.modules]
    for name in hidden:
        sys.modules[name] = None  # type: ignore[assignment]  # import and find_spec: absent
    try:
        import pint
    finally:
        for name in hidden:
            if sys.modules.get(name, 0) is None:
                del sys.modules[name]
    return pint


def _pint() -> Any:
    return sys.modules.get("pint") or _import_pint()


@functools.cache
def registry() -> pint.UnitRegistry:
    """The one pint registry, built on first use (commands that parse no unit skip it).

    pint keeps its parsed definitions in the user's cache folder (``cache_folder=":auto:"``),
    so later runs skip parsing its definitions file.
    """
    pint = _import_pint()
    try:
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except OSError:  # no writable cache folder: parse the definitions every time
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    # Conductor areas: 1 kcmil = 1000 circular mils (pint already knows circular_mil).
    ureg.define("kcmil = 1000 * circular_mil = MCM")
    for code in CURRENCIES:
        ureg.define(f"{code} = [currency_{code}]")
    return ureg


def __getattr__(name: str) -> Any:
    """``ureg`` and ``Q_`` as module attributes, built on first use."""
    if name == "ureg":
        return registry()
    if name == "Q_":
        return registry().Quantity
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

Material = Literal["Cu", "Al"]
MATERIALS: tuple[Material, ...] = ("Cu", "Al")
_MATERIAL_WORDS: dict[str, Material] = {
    "cu": "Cu", "copper": "Cu",
    "al": "Al", "aluminium": "Al", "aluminum": "Al",
}

_NUMBER = r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?"
_QUANTITY = re.compile(rf"^\s*(?P<num>{_NUMBER}|nan|NaN|inf|-inf)\s*(?P<unit>.*?)\s*$")
_UNIT_SPELLINGS = (
    ("°C", "degC"), ("°F", "degF"), ("º", "deg"), ("%", "percent"),
    ("mm²", "mm**2"), ("m²", "m**2"),
)


def _normalise_unit(unit: str) -> str:
    for written, pint_name in _UNIT_SPELLINGS:
        unit = unit.replace(written, pint_name)
    unit = re.sub(r"\bmm2\b", "mm**2", unit)
    unit = re.sub(r"\bm2\b", "m**2", unit)
    return unit.strip()


def quantity(text: object) -> pint.Quantity:
    """Parse ``"120 ft"``, ``"30 degC"``, ``"3 %"``, ``"0.12 USD/kWh"`` into a pint quantity.

    A bare number is refused: every quantity in a scenario says its unit.
    """
    if isinstance(text, bool) or not isinstance(text, str):
        raise UnitError(f"must be a quantity with a unit in quotes, e.g. \"120 ft\", got {text!r}")
    match = _QUANTITY.match(text)
    if not match:
        raise UnitError(f"cannot read a quantity from {text!r}")
    number = float(match["num"])
    if not math.isfinite(number):
        raise UnitError(f"must be a finite number, got {text!r}")
    unit = _normalise_unit(match["unit"])
    if not unit:
        raise UnitError(f"needs a unit, got {text!r}")
    try:
        ureg = registry()
        return ureg.Quantity(number, ureg.parse_units(unit))
    except Exception as exc:  # pint's parser raises many kinds (TokenError, ZeroDivision...)
        raise UnitError(f"unknown unit {match['unit']!r} in {text!r}") from exc


def parse_quantity(text: object, unit: str) -> float:
    """Return the magnitude of ``text`` in ``unit``; raise UnitError when it does not fit."""
    q = quantity(text)
    try:
        return float(q.to(unit).magnitude)
    except _pint().errors.DimensionalityError as exc:
        raise UnitError(f"{text!r} is not {_describe(unit)}") from exc


_DESCRIPTIONS = {
    "m": "a length", "V": "a voltage", "A": "a current", "W": "a power", "s": "a time",
    "degC": "a temperature", "percent": "a percentage", "year": "a duration in years",
    "h": "a duration", "Hz": "a frequency", "kg": "a mass",
}


def _describe(unit: str) -> str:
    return _DESCRIPTIONS.get(unit, f"in units of {unit}")


def parse_length_m(text: object) -> float:
    """A length (ft, m, ...) in metres."""
    return parse_quantity(text, "m")


def parse_temperature_c(text: object) -> float:
    """A temperature (degC, degF, K) in degrees Celsius; offset units are converted right."""
    return parse_quantity(text, "degC")


def parse_percent(text: object) -> float:
    """A percentage written with %, returned as a percent number ("3 %" -> 3.0)."""
    q = quantity(text)
    if not q.dimensionless:
        raise UnitError(f"{text!r} is not a percentage")
    return float(q.to("percent").magnitude)


def parse_money(text: object, currency: str, per: str | None = None) -> float:
    """A price such as ``"0.12 USD/kWh"`` in ``currency`` per ``per`` (e.g. "kWh", "kg")."""
    unit = currency if per is None else f"{currency}/({per})"
    q = quantity(text)
    try:
        return float(q.to(unit).magnitude)
    except _pint().errors.DimensionalityError as exc:
        raise UnitError(f"{text!r} is not a price in {unit}") from exc


# --- loads -----------------------------------------------------------------------------

LoadKind = Literal["current", "real", "apparent"]


@dataclass(frozen=True)
class LoadSpec:
    """A load as written: a current (A), a real power (W) or an apparent power (VA)."""

    kind: LoadKind
    value: float  # A, W or VA

    def __post_init__(self) -> None:
        if not math.isfinite(self.value) or self.value < 0:
            raise UnitError(f"a load must be finite and not negative, got {self.value}")


def parse_load(text: object) -> LoadSpec:
    """Read ``"180 kW"``, ``"75 kVA"``, ``"15 hp"`` or ``"42 A"``."""
    q = quantity(text)
    if q.check("[current]"):
        spec = LoadSpec("current", float(q.to("A").magnitude))
    elif q.check("[power]"):
        apparent = "volt_ampere" in str(q.units)
        spec = LoadSpec("apparent" if apparent else "real", float(q.to("W").magnitude))
    else:
        raise UnitError(f"{text!r} is not a load: give A, W/kW/hp or VA/kVA")
    return spec


# --- conductor sizes -------------------------------------------------------------------

_AWG = re.compile(r"^(?P<hash>#\s*)?(?P<n>\d{1,2}|[1-4]/0|0{1,4})\s*(?P<unit>awg)?$", re.I)
_KCMIL = re.compile(rf"^(?P<n>{_NUMBER})\s*(?:kcmil|mcm)$", re.I)
_MM2 = re.compile(rf"^(?P<n>{_NUMBER})\s*(?:mm2|mm²|mm\^2|mm\*\*2|sq\.?\s*mm)$", re.I)


def parse_size(text: object) -> str:
    """Return the trade's canonical name of a conductor size.

    ``"4/0"``, ``"0000"``, ``"#4/0 AWG"`` -> ``"4/0 AWG"``; ``"250 MCM"`` -> ``"250 kcmil"``;
    ``"95 mm²"`` -> ``"95 mm2"``. Whether a catalogue holds the size is the catalogue's
    question, not this one's.
    """
    if not isinstance(text, str):
        raise UnitError(f"a conductor size is text such as \"4/0 AWG\", got {text!r}")
    t = text.strip()
    if m := _AWG.match(t):
        n = m["n"]
        if "/" not in n and set(n) == {"0"}:
            n = f"{len(n)}/0"
        elif "/" not in n and m["unit"] is None and m["hash"] is None:
            raise UnitError(f"size {text!r} is ambiguous: write \"{n} AWG\" or \"{n} mm2\"")
        elif "/" not in n:
            n = str(int(n))
        return f"{n} AWG"
    if m := _KCMIL.match(t):
        return f"{_tidy(float(m['n']))} kcmil"
    if m := _MM2.match(t):
        return f"{_tidy(float(m['n']))} mm2"
    raise UnitError(f"unknown conductor size {text!r} (write e.g. \"4/0 AWG\", "
                    "\"250 kcmil\" or \"95 mm2\")")


def _tidy(value: float) -> str:
    return f"{value:g}"


def parse_material(text: object) -> Material:
    """Return "Cu" or "Al" for the ways the trade writes them."""
    if isinstance(text, str) and text.strip().lower() in _MATERIAL_WORDS:
        return _MATERIAL_WORDS[text.strip().lower()]
    raise UnitError(f"unknown conductor material {text!r} (use \"Cu\" or \"Al\")")


@dataclass(frozen=True)
class ConductorSpec:
    """A pinned conductor: ``sets`` parallel sets of ``size`` in ``material``."""

    sets: int
    size: str
    material: Material

    def __str__(self) -> str:
        return conductor_label(self.sets, self.size, self.material)


def conductor_label(sets: int, size: str, material: str) -> str:
    """A conductor as the trade writes it: ``"2x 500 kcmil Al"``, ``"10 AWG Cu"``."""
    return f"{sets}x {size} {material}" if sets > 1 else f"{size} {material}"


_PIN = re.compile(r"^\s*(?:(?P<sets>\d+)\s*[x×]\s*)?(?P<size>.+?)\s+(?P<mat>[A-Za-z]+)\s*$")


def parse_conductor(text: object) -> ConductorSpec:
    """Read a pin ``"[N x ]SIZE MATERIAL"``, e.g. ``"2x 500 kcmil Al"`` or ``"10 AWG Cu"``."""
    if not isinstance(text, str) or not (m := _PIN.match(text)):
        raise UnitError(f"cannot read a conductor from {text!r} (write e.g. \"2x 500 kcmil Al\")")
    sets = int(m["sets"]) if m["sets"] else 1
    if sets < 1:
        raise UnitError(f"parallel sets must be at least 1 in {text!r}")
    return ConductorSpec(sets, parse_size(m["size"]), parse_material(m["mat"]))


# --- conversion factors ---------------------------------------------------------------

M_PER_FT = 0.3048
# Area of a circle one mil (0.0254 mm) across, in mm²: the circular mil.
MM2_PER_CMIL = math.pi / 4 * 0.0254**2

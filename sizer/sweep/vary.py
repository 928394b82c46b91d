"""What a sweep varies: the fields (from the field registry) and their value ranges."""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from sizer import fields
from sizer.errors import ScenarioError, UnitError
from sizer.fields import Field
from sizer.units import parse_money, parse_percent, parse_quantity, quantity
from sizer.validation import suggest

# The most values one range may have.
MAX_COUNT = 10_000


# --- the fields a sweep can vary ---------------------------------------------------------


# The fields a sweep varies, from the one field registry; numbers are in ``Field.unit``.
FIELDS: Mapping[str, Field] = MappingProxyType({f.name: f for f in fields.sweep_fields()})
_ALIASES = {alias.split(".", 1)[1]: name for alias, name in fields.ALIASES.items()}
# A range to show in messages, per field.
_EXAMPLES = MappingProxyType({
    "energy_price": "0.06:0.30:9", "demand_charge": "8:20:4", "escalation": "0:4:5",
    "discount_rate": "4:10:4", "load_growth": "0:3:4", "lifetime": "15:40:6",
    "load_factor": "0.3:0.9:7", "loss_load_factor": "0.2:0.8:7", "hours": "4000:8760:5",
    "emission_factor": "0.2:0.8:4", "copper": "6:14:5", "aluminium": "2:4:5"})


def _field_error(name: str, message: str) -> ScenarioError:
    return ScenarioError(message, field=f"--vary {name}")


@dataclass(frozen=True)
class VaryRange:
    """One varied field and its values, in the field's unit (``Field.unit``)."""

    name: str
    values: tuple[float, ...]

    @property
    def spec(self) -> Field:
        """The field's specification."""
        return FIELDS[self.name]


def field_names() -> tuple[str, ...]:
    """Names a sweep can vary."""
    return tuple(FIELDS)


def parse_value(name: str, text: str, currency: str) -> float:
    """One value of a field in the field's unit; a bare number is taken in that unit.

    ``"0.12"`` and ``"0.12 USD/kWh"`` both read 0.12 for energy_price; ``"7"`` and
    ``"7 %"`` both read 7 for discount_rate; ``"25"`` and ``"300 month"`` read 25 years.
    The value must pass the scenario reader's own bounds for the field.
    """
    spec = FIELDS[name]
    t = text.strip()
    try:
        value = float(t)
    except ValueError:
        value = _with_unit(spec, t, currency)
    if not math.isfinite(value):
        raise _field_error(name, f"{text!r} is not a finite number")
    # The scenario's reader decides what is allowed, so a sweep never goes where a
    # scenario file could not.
    unit = spec.unit_in(currency)
    raw: object = value if not unit else f"{value!r} {unit}"
    try:
        spec.reader(currency)(raw, False)
    except ScenarioError as exc:
        raise _field_error(name, f"{text!r}: {exc.message}") from None
    return value


def _with_unit(spec: Field, text: str, currency: str) -> float:
    unit = spec.unit_in(currency)
    try:
        if spec.money_per:
            try:
                return parse_money(text, currency, spec.money_per)
            except UnitError:
                if not spec.alt_per:
                    raise
                return parse_money(text, currency, spec.alt_per)
        if spec.unit == "%":
            return parse_percent(text)
        if spec.unit == "":
            q = quantity(text)
            if not q.dimensionless:
                raise UnitError(f"{text!r} is a plain fraction such as 0.55 (or \"55 %\")")
            return float(q.to("").magnitude)
        return parse_quantity(text, unit)
    except UnitError as exc:
        shown = f"{unit}" if unit else "a plain number"
        raise _field_error(spec.name, f"{exc.message} (give {shown}, e.g. "
                                      f"{_example(spec)})") from None


def _example(spec: Field) -> str:
    return f"{spec.name}={_EXAMPLES[spec.name]}"


def parse_vary(text: str, currency: str) -> VaryRange:
    """Read ``name=start:stop:count`` (or ``name=v1,v2,...`` or ``name=value``).

    Values take units like the scenario (``"0.06 USD/kWh:0.30 USD/kWh:9"``) or are bare
    numbers in the field's unit. Raises ScenarioError naming ``--vary NAME``.
    """
    if not isinstance(text, str) or "=" not in text:
        raise ScenarioError(f"write NAME=START:STOP:COUNT, e.g. energy_price=0.06:0.30:9, "
                            f"got {text!r}", field="--vary")
    raw_name, _, body = text.partition("=")
    name = raw_name.strip().lower().replace("-", "_")
    name = _ALIASES.get(name, name)
    if name not in FIELDS:
        raise ScenarioError(f"unknown field {raw_name.strip()!r}{suggest(name, FIELDS)} "
                            f"(vary one of {', '.join(FIELDS)})", field="--vary")
    body = body.strip()
    if not body:
        raise _field_error(name, f"no values (write e.g. {_example(FIELDS[name])})")
    if ":" in body:
        parts = body.split(":")
        if len(parts) != 3:
            raise _field_error(name, f"a range is START:STOP:COUNT, got {body!r}")
        start = parse_value(name, parts[0], currency)
        stop = parse_value(name, parts[1], currency)
        try:
            count = float(parts[2].strip())
        except ValueError:
            raise _field_error(name, f"the count must be a whole number, got "
                                     f"{parts[2].strip()!r}") from None
        if not (count.is_integer() and 1 <= count <= MAX_COUNT):
            raise _field_error(name, f"the count must be a whole number from 1 to {MAX_COUNT}, "
                                     f"got {parts[2].strip()!r}")
        n = int(count)
        if n == 1:
            if start != stop:
                raise _field_error(name, "one point needs START equal to STOP (or write "
                                         "NAME=VALUE)")
            values: tuple[float, ...] = (start,)
        else:
            if not start < stop:
                raise _field_error(name, f"START must be below STOP, got {parts[0].strip()} "
                                         f"and {parts[1].strip()}")
            with np.errstate(all="raise"):
                try:
                    values = tuple(float(v) for v in np.linspace(start, stop, n))
                except FloatingPointError:
                    raise _field_error(name, f"the range {parts[0].strip()} to "
                                             f"{parts[1].strip()} is too wide to divide") from None
    else:
        values = tuple(parse_value(name, v, currency) for v in body.split(",") if v.strip())
        if not values:
            raise _field_error(name, "no values")
        if any(b <= a for a, b in itertools.pairwise(values)):
            raise _field_error(name, "list the values in ascending order, each once")
    return VaryRange(name, values)


def nearest(values: Sequence[float], target: float) -> float:
    """The value closest to ``target`` (the first of two equally close)."""
    return min(values, key=lambda v: abs(v - target))


def _with(values: tuple[float, ...], k: int, v: float) -> tuple[float, ...]:
    return (*values[:k], v, *values[k + 1:])

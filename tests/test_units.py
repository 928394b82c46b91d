"""Parsing quantities, sizes and pins the way the trade writes them."""

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer.errors import ScenarioError, UnitError
from sizer.units import (
    parse_conductor,
    parse_length_m,
    parse_load,
    parse_money,
    parse_percent,
    parse_quantity,
    parse_size,
    parse_temperature_c,
)


@pytest.mark.parametrize("text,expected", [
    ("14 AWG", "14 AWG"), ("#12", "12 AWG"), ("4/0", "4/0 AWG"), ("4/0 AWG", "4/0 AWG"),
    ("0000", "4/0 AWG"), ("00", "2/0 AWG"), ("0", "1/0 AWG"), ("1/0 awg", "1/0 AWG"),
    ("250 kcmil", "250 kcmil"), ("250 MCM", "250 kcmil"), ("250kcmil", "250 kcmil"),
    ("95 mm2", "95 mm2"), ("95 mm²", "95 mm2"), ("1.5 mm2", "1.5 mm2"), ("2.5 sq mm", "2.5 mm2"),
])
def test_sizes_as_the_trade_writes_them(text, expected):
    assert parse_size(text) == expected


@pytest.mark.parametrize("text", ["12", "4 AWX", "", "mm2", "250 kcm", "big"])
def test_unknown_or_ambiguous_sizes_name_the_text(text):
    with pytest.raises(UnitError) as err:
        parse_size(text)
    assert repr(text) in str(err.value)


@pytest.mark.parametrize("text,sets,size,material", [
    ("2x 500 kcmil Al", 2, "500 kcmil", "Al"), ("10 AWG Cu", 1, "10 AWG", "Cu"),
    ("3 x 4/0 AWG copper", 3, "4/0 AWG", "Cu"), ("4× 240 mm2 aluminium", 4, "240 mm2", "Al"),
    ("1/0 AWG aluminum", 1, "1/0 AWG", "Al"),
])
def test_pins(text, sets, size, material):
    spec = parse_conductor(text)
    assert (spec.sets, spec.size, spec.material) == (sets, size, material)


@pytest.mark.parametrize("text", ["2x 500 kcmil", "0x 4 AWG Cu", "500 kcmil Fe", "Cu"])
def test_bad_pins(text):
    with pytest.raises(UnitError):
        parse_conductor(text)


@pytest.mark.parametrize("text,metres", [
    ("120 ft", 36.576),          # 1 ft = 0.3048 m exactly (international foot)
    ("36.576 m", 36.576), ("0.5 km", 500.0), ("1200 in", 30.48),
])
def test_lengths(text, metres):
    assert parse_length_m(text) == pytest.approx(metres, rel=1e-12)


@pytest.mark.parametrize("text,celsius", [
    ("30 degC", 30.0), ("30 °C", 30.0), ("86 degF", 30.0), ("86 °F", 30.0),
    ("303.15 K", 30.0), ("-40 degF", -40.0),      # offset units converted, not scaled
])
def test_temperatures_with_offset_units(text, celsius):
    assert parse_temperature_c(text) == pytest.approx(celsius, abs=1e-9)


def test_percentages_and_money():
    assert parse_percent("3 %") == pytest.approx(3.0)
    assert parse_percent("0.5 percent") == pytest.approx(0.5)
    assert parse_money("0.12 USD/kWh", "USD", "kWh") == pytest.approx(0.12)
    assert parse_money("120 USD/MWh", "USD", "kWh") == pytest.approx(0.12)
    with pytest.raises(UnitError):
        parse_money("0.12 EUR/kWh", "USD", "kWh")    # currencies never mix


@pytest.mark.parametrize("text,kind,value", [
    ("180 kW", "real", 180e3), ("75 kVA", "apparent", 75e3), ("42 A", "current", 42.0),
    ("15 hp", "real", 15 * 745.69987158227022),   # mechanical horsepower, 745.7 W
])
def test_loads(text, kind, value):
    spec = parse_load(text)
    assert spec.kind == kind and spec.value == pytest.approx(value, rel=1e-9)


@pytest.mark.parametrize("text", ["40 A", "nan m", "inf ft", "12", "twelve ft", "10 bananas"])
def test_a_length_that_is_not_one(text):
    with pytest.raises(ScenarioError):
        parse_length_m(text)


@pytest.mark.parametrize("value", [12, 3.5, None, True, ["1 m"]])
def test_numbers_without_units_are_refused(value):
    with pytest.raises(UnitError, match="unit"):
        parse_quantity(value, "m")


@given(st.floats(min_value=1e-3, max_value=1e6, allow_nan=False))
def test_feet_and_metres_agree(x):
    assert parse_length_m(f"{x!r} ft") == pytest.approx(x * 0.3048, rel=1e-12)
    assert math.isfinite(parse_length_m(f"{x!r} m"))

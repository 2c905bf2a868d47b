"""Quantity parsing and dimension checks (rcc.units).

Reference for the SI prefixes and derived units: BIPM, *The International
System of Units (SI)*, 9th ed., 2019, tables 4 (derived units) and 7
(prefixes).  The Celsius offset 273.15 K is the SI definition (same
brochure, sec. 2.3.1), taken here through ``scipy.constants.zero_Celsius``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.constants import micro, milli, mega, kilo, nano, pico, zero_Celsius

from rcc.units import (
    DIMENSIONS,
    UnitError,
    celsius_to_kelvin,
    format_si,
    kelvin_to_celsius,
    parse_quantity,
)

# (text, dimension, value in SI base units) -- SI brochure tables 4 and 7
SI_CASES = [
    ("4.7 uF", "capacitance", 4.7 * micro),
    ("4.7 µF", "capacitance", 4.7 * micro),  # micro sign U+00B5
    ("4.7 μF", "capacitance", 4.7 * micro),  # Greek small mu U+03BC
    ("1.5 Mohm", "resistance", 1.5 * mega),
    ("1.5 MΩ", "resistance", 1.5 * mega),
    ("2.2 kohm", "resistance", 2.2 * kilo),
    ("230 V", "voltage", 230.0),
    ("0.6 V", "voltage", 0.6),
    ("19.3 mm^2", "area", 19.3 * milli**2),
    ("19.3 mm²", "area", 19.3 * milli**2),
    ("1.5 mH", "inductance", 1.5 * milli),
    ("20 pF", "capacitance", 20 * pico),
    ("47 nF", "capacitance", 47 * nano),
    ("1 us", "time", 1 * micro),
    ("4 MHz", "frequency", 4 * mega),
    ("0.39 T", "flux density", 0.39),
    ("6 W", "power", 6.0),
    ("500 mA", "current", 0.5),
    ("-2 mV/K", "voltage per kelvin", -2 * milli),
    ("0.5 %/K", "fraction per kelvin", 0.005),
    ("1e-3 H", "inductance", 1e-3),
    ("2.5E2 V", "voltage", 250.0),
    (".5 A", "current", 0.5),
    ("  12 V  ", "voltage", 12.0),
]


@pytest.mark.parametrize("text, dimension, expected", SI_CASES)
def test_parse_prefixed_units(text, dimension, expected):
    assert parse_quantity(text, dimension) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(
    "text, expected_celsius",
    [("-10 degC", -10.0), ("25 degC", 25.0), ("0 degC", 0.0), ("85 °C", 85.0)],
)
def test_parse_celsius_gives_kelvin(text, expected_celsius):
    # SI brochure sec. 2.3.1: T/K = t/degC + 273.15
    assert parse_quantity(text, "temperature") == pytest.approx(
        expected_celsius + zero_Celsius, abs=1e-9)


def test_plain_kelvin_string_and_number():
    assert parse_quantity("300 K", "temperature") == pytest.approx(300.0)
    assert parse_quantity(300, "temperature") == 300.0


@pytest.mark.parametrize(
    "value, dimension",
    [(230, "voltage"), (4.7e-6, "capacitance"), (-1.5, "voltage"), (0, "current"),
     (20, "dimensionless"), ("20", "dimensionless"), ("1e-3", "inductance")],
)
def test_plain_numbers_are_si(value, dimension):
    assert parse_quantity(value, dimension) == float(value)


@pytest.mark.parametrize(
    "text, dimension, pattern",
    [
        ("10 mF", "inductance", r"expected an inductance .*'mF' is not a unit of inductance"),
        ("10 mH", "capacitance", r"expected a capacitance .*'mH' is not a unit of capacitance"),
        ("230 A", "voltage", r"expected a voltage .*'A' is not a unit of voltage"),
        ("19.3 mm", "area", r"expected an area .*'mm' is not a unit of area"),
        ("25 degC", "voltage", r"not a unit of voltage"),
        ("1 kohm", "frequency", r"not a unit of frequency"),
    ],
)
def test_wrong_dimension_is_refused(text, dimension, pattern):
    with pytest.raises(UnitError, match=pattern):
        parse_quantity(text, dimension)


@pytest.mark.parametrize(
    "value, pattern",
    [
        ("abc", r"expected a number with an optional unit"),
        ("", r"expected a number with an optional unit"),
        ("V 230", r"expected a number with an optional unit"),
        ("5 foo", r"unknown unit 'foo'"),
        ("nan", r"expected a finite voltage, got 'nan'"),
        ("inf", r"expected a finite voltage, got 'inf'"),
        ("-inf", r"expected a finite voltage"),
        (float("nan"), r"expected a finite voltage, got nan"),
        (float("inf"), r"expected a finite voltage, got inf"),
        (True, r"got a boolean"),
        ([1, 2], r"expected a number or a string .*got list"),
        (None, r"got NoneType"),
    ],
)
def test_bad_values_are_refused(value, pattern):
    with pytest.raises(UnitError, match=pattern):
        parse_quantity(value, "voltage")


def test_unit_error_is_a_value_error():
    # STYLE.md: package exceptions subclass built-ins
    assert issubclass(UnitError, ValueError)


def test_every_dimension_accepts_its_own_unit():
    # the display unit of every dimension must parse back to 1 of itself
    for name, dimension in DIMENSIONS.items():
        if dimension.unit:
            assert parse_quantity(f"1 {dimension.unit}", name) == pytest.approx(1.0), name


def test_celsius_kelvin_round_trip_scalar_and_array():
    values = np.array([-40.0, 0.0, 25.0, 125.0])
    kelvin = celsius_to_kelvin(values)
    np.testing.assert_allclose(kelvin, values + 273.15, rtol=0, atol=1e-12)
    np.testing.assert_allclose(kelvin_to_celsius(kelvin), values, rtol=0, atol=1e-12)
    assert celsius_to_kelvin(25.0) == pytest.approx(298.15)


@pytest.mark.parametrize(
    "value, unit, text",
    [(4.7e-6, "F", "4.7 uF"), (1.5e6, "ohm", "1.5 Mohm"), (230.0, "V", "230 V"),
     (0.0, "A", "0 A"), (2e-12, "F", "2 pF")],
)
def test_format_si(value, unit, text):
    assert format_si(value, unit) == text


def test_format_si_non_finite_is_not_a_number():
    assert format_si(math.nan, "V") == "n/a"
    assert format_si(None, "V") == "n/a"


@pytest.mark.parametrize("text", ["4.7 uF", "1.5 Mohm", "230 V", "20 pF", "1.5 mH"])
def test_format_si_round_trips_through_parse(text):
    # display text re-read by the parser gives the same SI value
    unit_dimension = {"F": "capacitance", "ohm": "resistance", "V": "voltage",
                      "H": "inductance"}
    value_unit = text.split()[1]
    dimension = next(d for u, d in unit_dimension.items() if value_unit.endswith(u))
    value = parse_quantity(text, dimension)
    unit = DIMENSIONS[dimension].unit
    assert parse_quantity(format_si(value, unit), dimension) == pytest.approx(value)


# --------------------------------------------------------------- property
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

#: SI brochure table 7 prefixes, as written in design files
PREFIXES = {"p": pico, "n": nano, "u": micro, "µ": micro, "m": milli, "": 1.0,
            "k": kilo, "M": mega}
UNITS = {"F": "capacitance", "H": "inductance", "V": "voltage", "A": "current",
         "ohm": "resistance", "s": "time", "Hz": "frequency", "W": "power"}


@settings(derandomize=True, deadline=None, max_examples=200)
@given(number=st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False),
       prefix=st.sampled_from(sorted(PREFIXES)), unit=st.sampled_from(sorted(UNITS)),
       space=st.sampled_from(["", " ", "  "]))
def test_prefix_scaling_property(number, prefix, unit, space):
    text = f"{number!r}{space}{prefix}{unit}"
    assert parse_quantity(text, UNITS[unit]) == pytest.approx(
        number * PREFIXES[prefix], rel=1e-12, abs=1e-300)


# ------------------------------------------ the unit table against pint
def _through_pint(number: float, unit_text: str, dimension: str) -> float:
    from rcc.units import _registry

    registry = _registry()
    return float(registry.Quantity(number, unit_text).to(
        registry.Unit(DIMENSIONS[dimension].pint_unit)).magnitude)


#: Numbers as design files write them, and a spread of magnitudes and signs.
TABLE_NUMBERS = ([0.0, -0.0, 1.0, -1.0, 0.1, 0.3, 0.6, 4.7, 19.3, 22.0, 47.0, 85.0, 150.0,
                  230.0, 265.0, 470.0, 680.0, 1e-3, 2.5e2, 1e6, -10.0, -40.0, 1 / 3]
                 + [float(f"{x:.{d}g}") for d in (2, 3, 6, 17)
                    for x in np.random.default_rng(11).uniform(-1e3, 1e3, 60)])


@pytest.mark.parametrize("unit_text", sorted(__import__("rcc.units").units.unit_table()))
def test_unit_table_gives_what_pint_gives(unit_text):
    # the table read without pint must be exactly pint's conversion, to the last
    # bit, and in the same dimension; pint is the reference (its definitions file)
    from rcc.units import unit_table

    dimension, _, _ = unit_table()[unit_text]
    for number in TABLE_NUMBERS:
        expected = _through_pint(number, unit_text, dimension)
        got = parse_quantity(f"{number!r} {unit_text}", dimension)
        assert got == expected and math.copysign(1, got) == math.copysign(1, expected), (
            number, unit_text, got, expected)


def test_units_outside_the_table_still_go_through_pint():
    # pint reads what the table does not hold; the table never widens or narrows
    # what a design file may say
    from rcc.units import unit_table

    for text, dimension, expected in [("2 kV", "voltage", 2e3), ("3 cm^2", "area", 3e-4),
                                      ("77 degF", "temperature", 298.15),
                                      ("1 ms", "time", 1e-3), ("1 GHz", "frequency", 1e9)]:
        unit = text.split(" ", 1)[1]
        value = parse_quantity(text, dimension)
        assert value == _through_pint(float(text.split()[0]), unit, dimension)
        if expected is not None:
            assert value == pytest.approx(expected, rel=1e-12)
    assert "cm^2" not in unit_table() and "degF" not in unit_table()

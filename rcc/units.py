"""Parsing of physical quantities written in design files.

A value is either a plain number, taken in SI base units, or a string with a
number, an optional SI prefix and a unit: ``"4.7 uF"``, ``"4.7 µF"``,
``"1.5 Mohm"``, ``"19.3 mm^2"``, ``"-10 degC"``.  Unit arithmetic and the
dimension check are delegated to the pint library; this module only adds the
table of dimensions the design file uses and error messages in the
vocabulary of the file.

Temperatures are kept in kelvin inside the package and shown in degrees
Celsius; everything else is kept in SI base units.

The units design files use nearly always (an SI prefix on V, A, ohm, F, H, s,
Hz, T or W; mm^2, degC, K, mV/K, %/K) are read from a small table instead:
importing pint and building its registry costs about half a second per
process, more than a whole check spends on everything but the models.  The
table gives the same value pint gives, to the last bit
(``tests/test_units.py`` checks every entry against pint); any other unit, and
every error message, still goes through pint.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

__all__ = [
    "DIMENSIONS",
    "Dimension",
    "UnitError",
    "parse_quantity",
    "kelvin_to_celsius",
    "celsius_to_kelvin",
    "format_si",
    "format_quantity",
]


class UnitError(ValueError):
    """A value could not be read as a quantity of the expected dimension."""


@dataclass(frozen=True)
class Dimension:
    """A physical dimension a design-file key can carry.

    Attributes
    ----------
    name : str
        Word used in messages, e.g. ``"capacitance"``.
    unit : str
        SI unit symbol used for display, e.g. ``"F"``.
    pint_unit : str
        Unit expression understood by pint with the same dimensionality.
    """

    name: str
    unit: str
    pint_unit: str


DIMENSIONS: dict[str, Dimension] = {
    d.name: d
    for d in (
        Dimension("voltage", "V", "volt"),
        Dimension("current", "A", "ampere"),
        Dimension("resistance", "ohm", "ohm"),
        Dimension("capacitance", "F", "farad"),
        Dimension("inductance", "H", "henry"),
        Dimension("time", "s", "second"),
        Dimension("frequency", "Hz", "hertz"),
        Dimension("area", "m^2", "meter**2"),
        Dimension("flux density", "T", "tesla"),
        Dimension("temperature", "K", "kelvin"),
        Dimension("power", "W", "watt"),
        Dimension("voltage per kelvin", "V/K", "volt/kelvin"),
        Dimension("fraction per kelvin", "1/K", "1/kelvin"),
        Dimension("dimensionless", "", "dimensionless"),
    )
}

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@lru_cache(maxsize=1)
def _registry():
    import pint

    registry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return registry


#: SI prefixes the table accepts (``u`` for micro after normalisation).
_TABLE_PREFIXES = {"P": 1e15, "T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3, "": 1.0,
                   "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15}


@lru_cache(maxsize=1)
def unit_table() -> dict[str, tuple[str, float, float]]:
    """Units read without pint: ``{unit text: (dimension, factor, offset)}``.

    Returns
    -------
    dict
        The value in SI base units is ``number * factor + offset``
        [SI base units]; the dimension is a key of :data:`DIMENSIONS`.
        Every entry converts exactly as pint does (tested).
    """
    from scipy.constants import zero_Celsius

    table = {}
    for symbol, dimension in (("V", "voltage"), ("A", "current"), ("ohm", "resistance"),
                              ("F", "capacitance"), ("H", "inductance"), ("s", "time"),
                              ("Hz", "frequency"), ("T", "flux density"), ("W", "power")):
        for prefix, factor in _TABLE_PREFIXES.items():
            table[prefix + symbol] = (dimension, factor, 0.0)
    for prefix in ("", "m", "u"):
        table[prefix + "V/K"] = ("voltage per kelvin", _TABLE_PREFIXES[prefix], 0.0)
    table.update({
        "m^2": ("area", 1.0, 0.0),
        "mm^2": ("area", 1e-6, 0.0),
        "K": ("temperature", 1.0, 0.0),
        "degC": ("temperature", 1.0, zero_Celsius),
        "1/K": ("fraction per kelvin", 1.0, 0.0),
        "%/K": ("fraction per kelvin", 1e-2, 0.0),
        "%": ("dimensionless", 1e-2, 0.0),
    })
    return table


def _normalise_unit_text(text: str) -> str:
    # U+03A9 Greek capital omega and U+2126 ohm sign; U+00B5 micro and U+03BC mu
    text = text.replace("\u03a9", "ohm").replace("\u2126", "ohm").replace("°C", "degC")
    text = text.replace("\u00b5", "u").replace("\u03bc", "u")
    text = text.replace("°F", "degF").replace("²", "^2").replace("³", "^3")
    return text


def parse_quantity(value, dimension: str) -> float:
    """Read a design-file value as a float in SI base units.

    Parameters
    ----------
    value : int, float or str
        A plain number or a string such as ``"4.7 uF"`` or ``"-10 degC"``
        [SI base units when no unit is written; K for temperature].
    dimension : str
        Key of :data:`DIMENSIONS` the value must have.

    Returns
    -------
    float
        The value in SI base units [SI].

    Raises
    ------
    UnitError
        The value is not a number, has no finite value, or its unit has a
        different dimension.  The message says what was expected.
    """
    expected = DIMENSIONS[dimension]
    what = "number" if expected.name == "dimensionless" else expected.name
    if isinstance(value, bool):
        raise UnitError(f"expected a {expected.name}, got a boolean")
    if isinstance(value, (int, float)):
        try:
            number = float(value)
        except OverflowError:  # an integer too large for a float
            raise UnitError(f"expected a finite {what}, got an integer of "
                            f"{len(str(abs(value)))} digits") from None
        if not math.isfinite(number):
            raise UnitError(f"expected a finite {what}, got {value!r}")
        return number
    if not isinstance(value, str):
        raise UnitError(
            f"expected a number or a string such as '1.5 {expected.unit or '1'}', "
            f"got {type(value).__name__}"
        )
    match = _NUMBER.match(value)
    if match is None:
        if value.strip().lower() in {"nan", "inf", "-inf", "+inf", "infinity"}:
            raise UnitError(f"expected a finite {what}, got {value!r}")
        raise UnitError(
            f"expected a number with an optional unit, such as "
            f"'4.7 {_example_unit(expected)}'".replace(" '4.7 '", " '4.7'")
        )
    number = float(match.group(1))
    if not math.isfinite(number):
        raise UnitError(f"expected a finite {what}, got a number too large to represent")
    unit_text = _normalise_unit_text(match.group(2))
    if re.match(r"^[.,]|^\d+[.,]\d|^[eE][-+]?\d", unit_text):
        raise UnitError(
            f"expected a number with an optional unit, such as "
            f"'4.7 {_example_unit(expected)}'".replace(" '4.7 '", " '4.7'")
            + f" (cannot read the number in {value!r})")
    if not unit_text:
        return number
    known = unit_table().get(unit_text)
    if known is not None and known[0] == expected.name:
        _, factor, offset = known
        result = number * factor + offset if offset else number * factor
        if not math.isfinite(result):
            raise UnitError(f"expected a finite {what}, got {value!r}")
        return result
    registry = _registry()
    try:
        quantity = registry.Quantity(number, unit_text)
    except Exception:  # pint raises several unrelated types for bad units
        raise UnitError(
            f"expected {_article(expected.name)} {expected.name} such as "
            f"'4.7 {_example_unit(expected)}' (unknown unit {match.group(2)!r})"
        ) from None
    target = registry.Unit(expected.pint_unit)
    if quantity.dimensionality != target.dimensionality:
        raise UnitError(
            f"expected {_article(expected.name)} {expected.name} such as "
            f"'4.7 {_example_unit(expected)}' ({match.group(2)!r} is not a unit of "
            f"{expected.name})"
        )
    result = float(quantity.to(target).magnitude)
    if not math.isfinite(result):
        raise UnitError(f"expected a finite {what}, got {value!r}")
    return result


def _article(word: str) -> str:
    return "an" if word[:1] in "aeiou" else "a"


def _example_unit(dimension: Dimension) -> str:
    examples = {
        "voltage": "V",
        "current": "mA",
        "resistance": "kohm",
        "capacitance": "nF",
        "inductance": "mH",
        "time": "us",
        "frequency": "kHz",
        "area": "mm^2",
        "flux density": "T",
        "temperature": "degC",
        "power": "W",
        "voltage per kelvin": "mV/K",
        "fraction per kelvin": "%/K",
        "dimensionless": "",
    }
    return examples[dimension.name]


def celsius_to_kelvin(temperature_celsius):
    """Convert Celsius to kelvin.

    Parameters
    ----------
    temperature_celsius : float or array_like
        Temperature [degC].

    Returns
    -------
    float or ndarray
        Temperature [K] (``scipy.constants.zero_Celsius`` offset).
    """
    from scipy.constants import zero_Celsius

    return temperature_celsius + zero_Celsius


def kelvin_to_celsius(temperature_kelvin):
    """Convert kelvin to Celsius.

    Parameters
    ----------
    temperature_kelvin : float or array_like
        Temperature [K].

    Returns
    -------
    float or ndarray
        Temperature [degC] (``scipy.constants.zero_Celsius`` offset).
    """
    from scipy.constants import zero_Celsius

    return temperature_kelvin - zero_Celsius


_PREFIXES = [
    (1e15, "P"),
    (1e12, "T"),
    (1e9, "G"),
    (1e6, "M"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "u"),
    (1e-9, "n"),
    (1e-12, "p"),
    (1e-15, "f"),
]


def format_si(value: float, unit: str, digits: int = 4) -> str:
    """Format a value with an SI prefix for display.

    Parameters
    ----------
    value : float
        Value in SI units [SI].
    unit : str
        Unit symbol appended after the prefix [-].
    digits : int
        Significant digits [-].

    Returns
    -------
    str
        E.g. ``4.7e-6, "F"`` -> ``"4.7 uF"``; ``"n/a"`` for None or non-finite.
        Display only; never parse the result back.
    """
    if value is None or not math.isfinite(value):
        return "n/a"
    if value == 0:
        return f"0 {unit}".strip()
    magnitude = abs(value)
    for scale, prefix in _PREFIXES:
        if magnitude >= scale * 0.9995:
            return f"{value / scale:.{digits}g} {prefix}{unit}".strip()
    scale, prefix = _PREFIXES[-1]
    return f"{value / scale:.{digits}g} {prefix}{unit}".strip()


def format_quantity(value: float, dimension: str, digits: int = 3) -> str:
    """Format a value of a design-file dimension for messages and references.

    Parameters
    ----------
    value : float
        Value in SI base units [SI] (kelvin for temperatures).
    dimension : str
        Key of :data:`DIMENSIONS` [-].
    digits : int
        Significant digits [-].

    Returns
    -------
    str
        Temperatures in degC, areas in mm^2, relative tempcos in %/K, other
        units with an SI prefix (:func:`format_si`); dimensionless numbers plain.
    """
    if dimension == "temperature":
        return f"{kelvin_to_celsius(value):.{digits}g} degC"
    if dimension == "area":  # a prefix would apply to the metre, not the square metre
        return f"{value * 1e6:.{digits}g} mm^2"
    if dimension == "fraction per kelvin":
        return f"{value * 100:.{digits}g} %/K"
    if dimension == "dimensionless":
        return f"{value:.{digits}g}"
    return format_si(value, DIMENSIONS[dimension].unit, digits)

"""Option readers shared by the commands that take one operating point
(``--line``, ``--load``, ``--time``): one message style, one parser each."""

from __future__ import annotations

import math
from typing import Optional

LINE_HELP = "Line voltage, e.g. 230V: RMS for AC input, DC otherwise. Default: nominal."
LOAD_HELP = ("Load as a current, resistance or power, e.g. 0.3A, 40ohm, 4W, or a "
             "percentage of load_max (50%). Default: nominal.")


def _quantity(text: str, dimension: str, option: str, example: str) -> float:
    """A value with its unit; a bare number is refused (which unit did it mean?)."""
    from rcc.units import UnitError, parse_quantity

    try:
        float(text)
    except ValueError:
        pass
    else:
        raise ValueError(f"{option} {text!r}: expected a value with its unit, e.g. "
                         f"'{example}'")
    try:
        value = parse_quantity(text, dimension)
    except UnitError as error:
        raise ValueError(f"{option} {text!r}: {error}") from None
    return value


def line_option(design, text: Optional[str]) -> float:
    """``--line``: RMS line (AC input) or DC voltage [V]; default nominal.

    The bus it gives must be positive (above the bridge drop for AC input) and
    at most 100 kV.
    """
    from rcc.mains import rectified_peak
    from rcc.schema import PLAUSIBLE

    if text is None:
        return float(design.input.line_voltages[1])
    value = _quantity(text, "voltage", "--line", "230V")
    high = PLAUSIBLE["voltage"][1]
    if not (math.isfinite(value) and 0 < value <= high):
        raise ValueError(f"--line {text!r}: expected a positive voltage up to {high:.0f} V, "
                         "such as '230V' (RMS for AC input, DC otherwise)")
    if design.input.is_ac:
        bus = float(rectified_peak(value, design.input.bridge_drop))
        if bus <= 0:
            raise ValueError(
                f"--line {text!r}: its peak {value * math.sqrt(2):.3g} V does not exceed the "
                f"bridge drop {design.input.bridge_drop:.3g} V (input.bridge_drop): no bus "
                "voltage; expected a higher RMS line voltage")
    return value


def load_option(design, text: Optional[str]):
    """``--load``: a :class:`rcc.design.Load`; default ``output.load_nominal``.
    A percentage is of ``output.load_max`` (``50%``)."""
    from rcc.sweep import parse_load_range

    if text is None:
        return design.output.load_nominal
    if "," in text or ":" in text:
        raise ValueError(f"--load {text!r}: expected one load, e.g. 0.3A, 40ohm, 4W or 50%")
    try:
        load = parse_load_range(text, "--load", reference=design.output.load_max)
    except ValueError as error:
        if "expected currents" not in str(error):
            raise
        raise ValueError(f"--load {text!r}: expected one load: a current, resistance or "
                         "power (e.g. 0.3A, 40ohm, 4W) or a percentage of load_max (50%)"
                         ) from None
    return type(load)(load.kind, float(load.value[0]))


#: Longest simulated time [s].
MAX_TIME = 10.0


def time_option(text: str) -> float:
    """``--time``: a duration in (0, 10 s] [s]; the unit is required."""
    value = _quantity(text, "time", "--time", "20ms")
    if not (math.isfinite(value) and 0 < value <= MAX_TIME):
        raise ValueError(f"--time {text!r}: expected a duration in (0, {MAX_TIME:g} s], "
                         "such as '20ms'")
    return value

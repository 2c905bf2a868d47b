"""Option readers shared by the commands that take one operating point
(``--line``, ``--load``, ``--time``): one message style, one parser each."""

from __future__ import annotations

import math
from typing import Optional

LINE_HELP = "Line voltage, e.g. 230V: RMS for AC input, DC otherwise. Default: nominal."
TEMPERATURE_HELP = ("Temperature of all devices with its unit, e.g. -20degC. Default: "
                    "25 degC moved into the design's range.")
HFE_HELP = ("Switch current gain at 25 degC: min, typ, max (the design's) or a number. "
            "Default: typ.")
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


def temperature_option(design, text: Optional[str]) -> float:
    """``--temperature``: device temperature [K]; default 25 degC clipped into
    the design's range."""
    from rcc.cycle import reference_temperature
    from rcc.schema import PLAUSIBLE

    if text is None:
        return float(reference_temperature(design))
    value = _quantity(text, "temperature", "--temperature", "-20degC")
    low, high = PLAUSIBLE["temperature"]
    if not low <= value <= high:
        raise ValueError(f"--temperature {text!r}: expected {low - 273.15:g} degC to "
                         f"{high - 273.15:g} degC")
    return value


def hfe_option(design, text: Optional[str]) -> float:
    """``--hfe``: switch gain at 25 degC [1]: ``min``/``typ``/``max`` or a number."""
    from rcc.schema import GAINS

    if text is None or text.strip().lower() == "typ":
        return float(design.switch.hfe_typ)
    word = text.strip().lower()
    if word in ("min", "max"):
        return float(getattr(design.switch, f"hfe_{word}"))
    try:
        value = float(text)
    except ValueError:
        raise ValueError(f"--hfe {text!r}: expected min, typ, max or a number") from None
    if not (math.isfinite(value) and GAINS[0] <= value <= GAINS[1]):
        raise ValueError(f"--hfe {text!r}: expected a gain from {GAINS[0]:g} to {GAINS[1]:g}")
    return value

"""Option readers shared by the commands that take one operating point
(``--line``, ``--load``, ``--time``): one message style, one parser each."""

from __future__ import annotations

import math
from typing import Optional

LINE_HELP = "Line voltage, e.g. 230V: RMS for AC input, DC otherwise. Default: nominal."
LOAD_HELP = ("Load as a current, resistance or power, e.g. 0.3A, 40ohm, 4W. "
             "Default: nominal.")


def line_option(design, text: Optional[str]) -> float:
    """``--line``: RMS line (AC input) or DC voltage [V]; default nominal."""
    from rcc.units import UnitError, parse_quantity

    if text is None:
        return float(design.input.line_voltages[1])
    try:
        value = parse_quantity(text, "voltage")
    except UnitError as error:
        raise ValueError(f"--line {text!r}: {error}") from None
    if not (math.isfinite(value) and value > 0):
        raise ValueError(f"--line {text!r}: expected a positive voltage such as '230 V' "
                         "(RMS for AC input, DC otherwise)")
    return value


def load_option(design, text: Optional[str]):
    """``--load``: a :class:`rcc.design.Load`; default ``output.load_nominal``."""
    from rcc.design import parse_load

    if text is None:
        return design.output.load_nominal
    try:
        return parse_load(text)
    except ValueError as error:
        raise ValueError(f"--load {text!r}: {error} (the unit decides: current, "
                         "resistance or power)") from None


def time_option(text: str) -> float:
    """``--time``: a duration in (0, 10 s] [s]."""
    from rcc.units import UnitError, parse_quantity

    try:
        value = parse_quantity(text, "time")
    except UnitError as error:
        raise ValueError(f"--time {text!r}: {error}") from None
    if not (math.isfinite(value) and 0 < value <= 10.0):
        raise ValueError(f"--time {text!r}: expected a duration in (0, 10 s], such as '20 ms'")
    return value

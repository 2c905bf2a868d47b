"""Which bus a time-domain run sees: the bulk capacitor with its line ripple,
or a DC bus held at the rectified peak or at the bulk-capacitor valley.

The cycle model (:mod:`rcc.cycle`) and the periodic steady state
(:mod:`rcc.engine.pss`) work on a constant bus, the bulk valley at their
input power (:func:`rcc.mains.bus_voltage`); a run from power-on can show the
real thing, the bulk capacitor charged through the bridge near each line
crest and discharged by the converter between crests
(``build_circuit(..., bus_model="bulk")``).  Every output of a run says
which of these it used (:attr:`RunBus.description`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rcc.design import Design, Load

__all__ = ["BUS_CHOICES", "RunBus", "run_bus", "default_bus_choice", "check_bus_choice",
           "steady_bus_choice", "bus_json"]

#: Bus of a run, by name: what it is (the command line's ``--bus`` choices).
BUS_CHOICES = {
    "bulk": "the bulk capacitor charged through the bridge from the sine line "
            "(line-frequency ripple; AC input)",
    "peak": "a DC bus held at the rectified peak of the line (no ripple; AC input)",
    "valley": "a DC bus held at the bulk-capacitor valley at the cycle model's input "
              "power, the bus of rcc check and rcc cycle (no ripple; AC input)",
    "dc": "the DC input (DC input)",
}


@dataclass(frozen=True)
class RunBus:
    """The bus a run uses.

    Attributes
    ----------
    choice : str
        Key of :data:`BUS_CHOICES`.
    bus_model : str
        ``build_circuit``'s ``bus_model``: ``"bulk"`` or ``"dc"``.
    voltage : float
        The DC bus, or for ``"bulk"`` the rectified crest where the bulk
        capacitor starts [V].
    description : str
        One line for summaries and figure titles.
    line_frequency : float
        Line frequency for AC input, 0 for DC input [Hz].
    """

    choice: str
    bus_model: str
    voltage: float
    description: str
    line_frequency: float = 0.0


def default_bus_choice(design: Design) -> str:
    """The default bus of a run from power-on.

    Parameters
    ----------
    design : Design
        The design [-].

    Returns
    -------
    str
        ``"bulk"`` for AC input (the physical circuit), ``"dc"`` otherwise [-].
    """
    return "bulk" if design.input.is_ac else "dc"


def steady_bus_choice(design: Design) -> str:
    """The bus of the cycle model and the periodic steady state (``rcc check``,
    ``sweep``, ``cycle``).

    Parameters
    ----------
    design : Design
        The design [-].

    Returns
    -------
    str
        ``"valley"`` for AC input, ``"dc"`` otherwise [-].
    """
    return "valley" if design.input.is_ac else "dc"


def bus_json(choice: str) -> dict:
    """The bus entries of a JSON report.

    Parameters
    ----------
    choice : str
        Key of :data:`BUS_CHOICES` [-].

    Returns
    -------
    dict
        ``{"bus_model": choice, "bus_description": ...}`` [-].
    """
    return {"bus_model": choice, "bus_description": BUS_CHOICES[choice]}


def check_bus_choice(design: Design, choice: str | None) -> str:
    """A bus choice checked against the design's input.

    Parameters
    ----------
    design : Design
        The design [-].
    choice : str or None
        Key of :data:`BUS_CHOICES`; None for :func:`default_bus_choice` [-].

    Returns
    -------
    str
        The choice [-].

    Raises
    ------
    ValueError
        On an unknown choice or one that does not fit the input (an AC
        choice for DC input, ``"dc"`` for AC input), naming the valid ones.
    """
    if choice is None:
        return default_bus_choice(design)
    if choice not in BUS_CHOICES:
        raise ValueError(f"--bus {choice!r}: expected one of {', '.join(BUS_CHOICES)}")
    if design.input.is_ac == (choice == "dc"):
        valid = [name for name in BUS_CHOICES if (name == "dc") != design.input.is_ac]
        raise ValueError(f"--bus {choice!r}: the design has "
                         f"{'AC' if design.input.is_ac else 'DC'} input; expected "
                         f"{', '.join(valid)}")
    return choice


def run_bus(design: Design, line_voltage: float, load: Load, temperature: float,
            hfe: float, choice: str | None = None) -> RunBus:
    """The bus of a run at one operating condition.

    Parameters
    ----------
    design : Design
        The design [-].
    line_voltage : float
        RMS line (AC input) or DC input voltage [V].
    load : Load
        Output load [-].
    temperature : float
        Device temperature [K] (for ``"valley"``: the cycle model's point).
    hfe : float
        Switch gain at 25 degC [1] (for ``"valley"``).
    choice : str, optional
        Key of :data:`BUS_CHOICES`; default :func:`default_bus_choice`.

    Returns
    -------
    RunBus
        The bus of the run [-].

    Raises
    ------
    ValueError
        On an unknown choice, or a choice that does not fit the input (an AC
        choice for DC input or ``"dc"`` for AC input).

    Notes
    -----
    ``"peak"``: ``sqrt(2) V_rms - V_bridge`` (:func:`rcc.mains.rectified_peak`).
    ``"valley"``: the bus :func:`rcc.cycle.operating_points` solves the point
    at (the bulk valley at its own input power, energy balance over a half
    line cycle, :func:`rcc.mains.bulk_valley`); seconds of CPU.
    """
    from rcc.mains import rectified_peak

    choice = check_bus_choice(design, choice)
    if choice == "dc":
        return RunBus(choice, "dc", float(line_voltage), f"{line_voltage:.4g} V DC input")
    frequency = design.input.line_frequency
    line = f"{line_voltage:.4g} V RMS {frequency:g} Hz"
    peak = float(rectified_peak(line_voltage, design.input.bridge_drop))
    if choice == "bulk":
        return RunBus(choice, "bulk", peak, (
            f"bulk capacitor {design.input.bulk_capacitance * 1e6:.3g} uF charged through "
            f"the bridge from {line} (crest {peak:.4g} V)"), frequency)
    if choice == "peak":
        return RunBus(choice, "dc", peak, f"held at {peak:.4g} V, the rectified peak of "
                                          f"{line} (no bulk ripple)", frequency)
    from rcc.cycle import operating_points

    point = operating_points(design, np.atleast_1d(float(line_voltage)), load,
                             np.atleast_1d(float(temperature)), np.atleast_1d(float(hfe)))
    valley = float(np.ravel(point.bus_voltage)[0])
    return RunBus(choice, "dc", valley, (
        f"held at {valley:.4g} V, the bulk-capacitor valley at the cycle model's input "
        f"power from {line} (no ripple)"), frequency)

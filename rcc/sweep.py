"""Sweeps of the cycle model over line, load and temperature grids."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

import numpy as np

from rcc.cycle import OperatingPoints, operating_points
from rcc.design import Design, Load
from rcc.units import UnitError, parse_quantity

__all__ = ["SweepResult", "parse_range", "parse_load_range", "sweep", "to_csv", "plot_sweep"]


@dataclass(frozen=True)
class SweepResult:
    """Cycle-model sweep.

    Attributes
    ----------
    design : Design
        The design swept.
    line_voltage : ndarray, shape (n_line,)
        RMS line (AC input) or DC input voltages [V].
    load : Load
        Load kind and values, shape (n_load,) [A], [ohm] or [W].
    temperature : ndarray, shape (n_temperature,)
        Temperatures [K].
    points : OperatingPoints
        Arrays of shape (n_temperature, n_line, n_load).
    """

    design: Design
    line_voltage: np.ndarray
    load: Load
    temperature: np.ndarray
    points: OperatingPoints

    def to_json(self) -> dict:
        return {"title": self.design.title, "source": self.design.source,
                "load_kind": self.load.kind, "operating_points": self.points.records()}


def parse_range(text: str, dimension: str, name: str = "range") -> np.ndarray:
    """Parse ``"start:stop:count"`` (or a single value) with units.

    Parameters
    ----------
    text : str
        E.g. ``"85V:265V:5"`` or ``"230 V"``.
    dimension : str
        Dimension of :data:`rcc.units.DIMENSIONS` the values must have.
    name : str
        Option name used in messages.

    Returns
    -------
    ndarray
        Values in SI units [SI]; ``count`` evenly spaced points.

    Raises
    ------
    ValueError
        With a message naming the option, the text and what was expected.
    """
    parts = text.split(":")
    try:
        if len(parts) == 1:
            return np.array([parse_quantity(parts[0], dimension)])
        if len(parts) != 3:
            raise UnitError("expected START:STOP:COUNT, e.g. '85V:265V:5'")
        start = parse_quantity(parts[0], dimension)
        stop = parse_quantity(parts[1], dimension)
        count = int(parts[2])
    except (UnitError, ValueError) as error:
        raise ValueError(f"{name} {text!r}: {error}") from None
    if count < 1:
        raise ValueError(f"{name} {text!r}: expected a count of at least 1")
    return np.linspace(start, stop, count)


def parse_load_range(text: str, name: str = "--load") -> Load:
    """Parse a load range; the unit decides current [A], resistance [ohm] or power [W].

    Parameters
    ----------
    text : str
        E.g. ``"0.05A:0.5A:20"``, ``"24ohm"`` or ``"1W:6W:6"``.
    name : str
        Option name used in messages.

    Returns
    -------
    Load
        With an array of values [A], [ohm] or [W].
    """
    from rcc.design import parse_load

    parts = text.split(":")
    expected = (f"{name} {text!r}: expected currents ('0.05A:0.5A:20'), resistances "
                "('24ohm:240ohm:10') or powers ('1W:6W:6')")
    if len(parts) not in (1, 3):
        raise ValueError(expected)
    try:
        ends = [parse_load(part) for part in parts[:2]]
        count = int(parts[2]) if len(parts) == 3 else 1
    except ValueError as error:
        if "non-negative" in str(error):
            raise ValueError(f"{name} {text!r}: expected non-negative loads "
                             "(positive resistances)") from None
        raise ValueError(expected) from None
    if len({end.kind for end in ends}) != 1:
        raise ValueError(f"{expected}; both ends of one kind")
    if count < 1:
        raise ValueError(f"{name} {text!r}: expected a count of at least 1")
    return Load(ends[0].kind, np.linspace(ends[0].value, ends[-1].value, count))


def sweep(design: Design, line_voltage, load: Load, temperature=None, hfe=None) -> SweepResult:
    """Evaluate the cycle model on a line x load x temperature grid.

    Parameters
    ----------
    design : Design
        The design.
    line_voltage : array_like
        RMS line (AC) or DC input voltages [V].
    load : Load
        Load kind with an array of values [A], [ohm] or [W].
    temperature : array_like, optional
        Temperatures [K]; default 25 degC clipped into the design range.
    hfe : float, optional
        Switch current gain at 25 degC [1]; default ``hfe_typ``.

    Returns
    -------
    SweepResult
    """
    from rcc.cycle import reference_temperature

    lines = np.atleast_1d(np.asarray(line_voltage, dtype=float))
    temperatures = np.atleast_1d(np.asarray(
        reference_temperature(design) if temperature is None else temperature, dtype=float))
    values = np.atleast_1d(np.asarray(load.value, dtype=float))
    grid_load = Load(load.kind, values[None, None, :])
    points = operating_points(design, lines[None, :, None], grid_load,
                              temperatures[:, None, None], hfe)
    return SweepResult(design=design, line_voltage=lines, load=Load(load.kind, values),
                       temperature=temperatures, points=points)


def to_csv(result: SweepResult) -> str:
    """The sweep as CSV text.

    Parameters
    ----------
    result : SweepResult
        The sweep [-].

    Returns
    -------
    str
        One row per point, SI units, temperature in degC.
    """
    rows = result.points.records()
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(rows[0].keys()))
    writer.writeheader()
    writer.writerows(rows)
    return buffer.getvalue()


_ON_MARKERS = {"drive": "s", "limit": "^", "regulation": "o"}


def plot_sweep(result: SweepResult, ax=None, temperature_index: int = 0):
    """Frequency, output voltage and peak current against load, one curve per line.

    Parameters
    ----------
    result : SweepResult
        The sweep.
    ax : sequence of three matplotlib Axes, optional
        Created (stacked) when not given.
    temperature_index : int
        Which temperature of the sweep to draw.

    Returns
    -------
    sequence of Axes
        Marker shape shows what ended the on-time; open markers show
        drive-timed off-times; burst points are drawn with crosses.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(3, 1, sharex=True, figsize=(7.5, 9), constrained_layout=True)
    p = result.points
    x = result.load.value
    unit = {"current": "A", "resistance": "ohm", "power": "W"}[result.load.kind]
    quantities = [("frequency", 1e-3, "frequency [kHz]\n(average over bursts)"),
                  ("output_voltage", 1.0, "output [V]"),
                  ("peak_current", 1.0, "peak current [A]")]
    for axis, (name, scale, label) in zip(ax, quantities):
        for j, line in enumerate(result.line_voltage):
            y = getattr(p, name)[temperature_index, j] * scale
            (curve,) = axis.plot(x, y, "-", lw=1.2, label=f"{line:.0f}")
            for k in range(x.size):
                mode = p.mode[temperature_index, j, k]
                on_end = str(p.on_end[temperature_index, j, k])
                off_end = str(p.off_end[temperature_index, j, k])
                marker = "x" if mode == "burst" else _ON_MARKERS[on_end]
                face = "none" if off_end == "drive-timing" else curve.get_color()
                axis.plot(x[k], y[k], marker, color=curve.get_color(), mfc=face, ms=4)
        axis.set_ylabel(label)
        axis.grid(True, alpha=0.3)
    line_title = "line [V RMS]" if result.design.input.is_ac else "bus [V DC]"
    ax[0].legend(title=line_title, fontsize=8)
    ax[0].set_title(f"{result.design.title}\nmarkers: square drive, triangle limit, circle "
                    "regulation, x burst; open = drive-timed off", fontsize=9)
    ax[-1].set_xlabel(f"load [{unit}]")
    return ax

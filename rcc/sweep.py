"""Sweeps of the cycle model over line, load and temperature grids."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

import numpy as np

from rcc.cycle import OperatingPoints, operating_points
from rcc.design import Design, Load
from rcc.units import DIMENSIONS, UnitError, parse_quantity

__all__ = ["SweepResult", "parse_range", "parse_load_range", "sweep", "to_csv", "plot_sweep",
           "MAX_COUNT", "MAX_POINTS"]


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


#: Most values one option may list or generate [-]; larger requests are refused
#: with a message instead of exhausting memory.
MAX_COUNT = 1000
#: Most points of one sweep grid (line x load x temperature) [-].
MAX_POINTS = 200_000


def _count(text: str, name: str, whole: str) -> int:
    try:
        count = int(text)
    except ValueError:
        raise ValueError(f"{name} {whole!r}: expected a whole number of points after the "
                         f"second colon, got {text!r}") from None
    if not 1 <= count <= MAX_COUNT:
        raise ValueError(f"{name} {whole!r}: expected a count from 1 to {MAX_COUNT}")
    return count


def _check_bounds(values, bounds, dimension, name, text):
    if bounds is None:
        return
    low, high = bounds
    if np.any(values < low) or np.any(values > high):
        from rcc.units import DIMENSIONS, format_si

        unit = DIMENSIONS[dimension].unit
        if dimension == "temperature":
            span = f"{low - 273.15:g} degC to {high - 273.15:g} degC"
        else:
            span = f"{format_si(low, unit, 3)} to {format_si(high, unit, 3)}"
        raise ValueError(f"{name} {text!r}: expected values from {span}")


def parse_range(text: str, dimension: str, name: str = "range", bounds=None) -> np.ndarray:
    """Parse ``"start:stop:count"``, a list ``"a,b,c"`` or a single value, with units.

    Parameters
    ----------
    text : str
        E.g. ``"85V:265V:5"``, ``"100V,230V"`` or ``"230 V"``.
    dimension : str
        Dimension of :data:`rcc.units.DIMENSIONS` the values must have.
    name : str
        Option name used in messages.
    bounds : tuple of float, optional
        Allowed ``(low, high)`` [SI]; values outside are refused.

    Returns
    -------
    ndarray
        Values in SI units [SI]; ``count`` evenly spaced points, or the listed ones.

    Raises
    ------
    ValueError
        With a message naming the option, the text and what was expected.  A
        bare number without its unit is refused (``"230"``: volts? percent?).
    """
    def one(part):
        try:
            float(part)
        except ValueError:
            pass
        else:
            unit = "degC" if dimension == "temperature" else DIMENSIONS[dimension].unit
            raise ValueError(f"{name} {text!r}: expected values with their unit, "
                             f"e.g. '{part.strip()}{unit}'")
        try:
            return parse_quantity(part, dimension)
        except UnitError as error:
            raise ValueError(f"{name} {text!r}: {error}") from None

    if "," in text:
        parts = [part for part in text.split(",")]
        if len(parts) > MAX_COUNT:
            raise ValueError(f"{name} {text[:40]!r}...: expected at most {MAX_COUNT} values")
        values = np.array([one(part) for part in parts])
    else:
        parts = text.split(":")
        if len(parts) == 1:
            values = np.array([one(parts[0])])
        elif len(parts) == 3:
            start, stop = one(parts[0]), one(parts[1])
            values = np.linspace(start, stop, _count(parts[2], name, text))
        else:
            raise ValueError(f"{name} {text!r}: expected START:STOP:COUNT (e.g. "
                             "'85V:265V:5'), a list (e.g. '100V,230V') or one value")
    _check_bounds(values, bounds, dimension, name, text)
    return values


def parse_load_range(text: str, name: str = "--load", reference: Load | None = None) -> Load:
    """Parse a load range; the unit decides current [A], resistance [ohm] or power [W].

    Parameters
    ----------
    text : str
        E.g. ``"0.05A:0.5A:20"``, ``"24ohm"``, ``"1W,3W,6W"`` or, as percentages of
        ``reference``, ``"10%:100%:5"``.
    name : str
        Option name used in messages.
    reference : Load, optional
        The full load (``output.load_max``) that percentages refer to; a percentage
        of a resistance load is the resistance drawing that fraction of the current.

    Returns
    -------
    Load
        With an array of values [A], [ohm] or [W].
    """
    from rcc.design import parse_load

    expected = (f"{name} {text!r}: expected currents ('0.05A:0.5A:20'), resistances "
                "('24ohm:240ohm:10'), powers ('1W:6W:6'), a list ('1W,3W,6W') or "
                "percentages of the full load ('10%:100%:5')")

    def one(part):
        part = part.strip()
        if part.endswith("%"):
            if reference is None:
                raise ValueError(f"{name} {text!r}: percentages need the design's full load")
            try:
                fraction = float(part[:-1]) / 100.0
            except ValueError:
                raise ValueError(expected) from None
            if not (np.isfinite(fraction) and 0 < fraction <= 10):
                raise ValueError(f"{name} {text!r}: expected percentages in (0 %, 1000 %]")
            if reference.kind == "resistance":
                return Load("resistance", reference.value / fraction)
            return Load(reference.kind, reference.value * fraction)
        try:
            return parse_load(part)
        except ValueError as error:
            message = str(error)
            if "unit" in message or "range the models" in message or "non-negative" in message:
                raise ValueError(f"{name} {text!r}: {message}") from None
            raise ValueError(expected) from None

    if "," in text:
        parts = text.split(",")
        if len(parts) > MAX_COUNT:
            raise ValueError(f"{name} {text[:40]!r}...: expected at most {MAX_COUNT} values")
        ends = [one(part) for part in parts]
        values = np.array([end.value for end in ends])
    else:
        parts = text.split(":")
        if len(parts) not in (1, 3):
            raise ValueError(expected)
        count = _count(parts[2], name, text) if len(parts) == 3 else 1
        if all(part.strip().endswith("%") for part in parts[:2]):
            # even steps of the load itself, also for a resistance load
            percents = [_percent(part, expected) for part in parts[:2]]
            ends = [one(f"{float(percent)!r}%")
                    for percent in np.linspace(percents[0], percents[-1], count)]
            values = np.array([end.value for end in ends])
        else:
            ends = [one(part) for part in parts[:2]]
            values = np.linspace(ends[0].value, ends[-1].value, count)
    if len({end.kind for end in ends}) != 1:
        raise ValueError(f"{expected}; all of one kind")
    return Load(ends[0].kind, values)


def _percent(part: str, expected: str) -> float:
    try:
        return float(part.strip()[:-1])
    except ValueError:
        raise ValueError(expected) from None


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
    size = lines.size * temperatures.size * values.size
    if size > MAX_POINTS:
        raise ValueError(f"the sweep would have {size} points (line x load x temperature); "
                         f"expected at most {MAX_POINTS}")
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
        One row per point, SI units, temperature in degC; one column per loss
        mechanism (``loss_<name>_w``) [W].
    """
    rows = []
    for record in result.points.records():
        losses = record.pop("losses_w")
        record.update({f"loss_{name}_w": watts for name, watts in losses.items()})
        rows.append(record)
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(rows[0].keys()), lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return buffer.getvalue()


_ON_MARKERS = {"drive": "s", "limit": "^", "regulation": "o"}
_TEMPERATURE_STYLES = ("-", "--", ":", "-.")


def plot_sweep(result: SweepResult, ax=None, verification=None):
    """Frequency, output voltage and peak current against load, one curve per line
    voltage and temperature.

    Parameters
    ----------
    result : SweepResult
        The sweep.
    ax : sequence of three matplotlib Axes, optional
        Created (stacked) when not given.
    verification : list of dict, optional
        :func:`rcc.verification.verification_rows` of the same sweep: the engine's
        periodic steady states are drawn as black stars over the model curves.

    Returns
    -------
    sequence of Axes
        Colour: line voltage; line style: temperature (solid, dashed, dotted,
        dash-dot in the order swept; more than four temperatures repeat the styles).
        Marker shape shows what ended the on-time; open markers show drive-timed
        off-times; burst points are drawn with crosses.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D

    if ax is None:
        _, ax = plt.subplots(3, 1, sharex=True, figsize=(7.5, 9), constrained_layout=True)
    p = result.points
    x = result.load.value
    unit = {"current": "A", "resistance": "ohm", "power": "W"}[result.load.kind]
    quantities = [("frequency", 1e-3, "frequency [kHz]\n(average over bursts)"),
                  ("output_voltage", 1.0, "output [V]"),
                  ("peak_current", 1.0, "peak current [A]")]
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for axis, (name, scale, label) in zip(ax, quantities):
        for i, temperature in enumerate(result.temperature):
            style = _TEMPERATURE_STYLES[i % len(_TEMPERATURE_STYLES)]
            for j, line in enumerate(result.line_voltage):
                colour = colours[j % len(colours)]
                y = getattr(p, name)[i, j] * scale
                axis.plot(x, y, style, color=colour, lw=1.2)
                for k in range(x.size):
                    mode = p.mode[i, j, k]
                    marker = "x" if mode == "burst" else _ON_MARKERS[str(p.on_end[i, j, k])]
                    face = "none" if str(p.off_end[i, j, k]) == "drive-timing" else colour
                    axis.plot(x[k], y[k], marker, color=colour, mfc=face, ms=4)
        axis.set_ylabel(label)
        axis.grid(True, alpha=0.3)
    if verification:
        _plot_verification(ax, result, verification, quantities)
    line_title = "line [V RMS]" if result.design.input.is_ac else "bus [V DC]"
    handles = [Line2D([], [], color=colours[j % len(colours)], label=f"{line:.0f}")
               for j, line in enumerate(result.line_voltage)]
    ax[0].legend(handles=handles, title=line_title, fontsize=8, loc="best")
    if result.temperature.size > 1:
        styles = [Line2D([], [], color="0.3", ls=_TEMPERATURE_STYLES[i % 4],
                         label=f"{t - 273.15:.0f} degC")
                  for i, t in enumerate(result.temperature)]
        ax[1].legend(handles=styles, title="temperature", fontsize=8, loc="best")
        temperatures = "line style: temperature"
    else:
        temperatures = f"at {result.temperature[0] - 273.15:.0f} degC"
    engine = ("\nstars: engine periodic steady state (open star: not converged, the last "
              "cycle of a transient)" if verification else "")
    bus = "bus at the bulk valley" if result.design.input.is_ac else "DC bus"
    ax[0].set_title(f"{result.design.title} ({temperatures}; {bus})\nmarkers: square drive, "
                    "triangle limit, circle regulation, x burst; open = drive-timed off"
                    + engine, fontsize=9)
    ax[-1].set_xlabel(f"load [{unit}]")
    return ax


def _plot_verification(ax, result, rows, quantities):
    """Engine points (black stars) over the model curves, at the sweep's load values."""
    keys = {"frequency": "engine_frequency_hz", "output_voltage": "engine_output_v",
            "peak_current": "engine_peak_a"}
    for row in rows:
        if row.get("load_value") is None:
            continue
        for axis, (name, scale, _) in zip(ax, quantities):
            value = row.get(keys[name])
            if value is not None:
                axis.plot(row["load_value"], value * scale, "*", color="black", ms=8,
                          mfc="none" if not row.get("engine_converged") else "black",
                          zorder=5)

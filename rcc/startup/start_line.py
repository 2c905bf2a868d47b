"""Starting into the load: the engine from power-on at the worst start-up
corner, and the lowest line at which the supply starts and reaches its
operating point at full load.

The small-signal analysis (:mod:`rcc.startup.analysis`) says whether the
power-on DC point is unstable, i.e. whether oscillation *begins*.  Whether
the supply then comes up into its load is a large-signal question: the
drive capacitor must reset during the off-times while the output is still
low, and the current limit must deliver the load.  It is answered here with
the time-domain engine from power-on (:func:`rcc.engine.power_on.run_from_power_on`)
at the worst start-up corner: coldest, ``hfe_min``, heaviest load.

:func:`search_start_line` finds the lowest line at which that run reaches its
operating point by bisection between a line where it does not and one where
it does, with few engine runs, and states the resolution.  Below the
small-signal threshold of oscillation (mapped to the line at which the power-on
bus reaches it) the supply cannot even begin to oscillate, so that line is
a failing end of the bracket that costs no engine run.

The engine is imported lazily: importing this module does not load numba.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

__all__ = ["StartLineSearch", "run_into_load", "power_on_run", "reaches_operating_point",
           "search_start_line", "power_on_line_for_bus", "INTO_LOAD_DURATION",
           "START_LINE_RESOLUTION", "START_LINE_RUNS", "REGULATED_KINDS"]

#: Longest engine run from power-on for the start-up-into-load verdict and
#: for each run of the start-line search [s].
INTO_LOAD_DURATION = 0.06
#: The start-line search stops when its bracket is narrower than this
#: fraction of the design's lowest line [1].
START_LINE_RESOLUTION = 0.02
#: Most engine runs of the start-line search besides the run at the lowest
#: line (which the start-up-into-load verdict has already made) [1].
START_LINE_RUNS = 4
#: Kinds of operation (:data:`rcc.operation.KINDS`) in which the supply has
#: reached its operating point: it switches and its output is not locked up
#: far below regulation.
REGULATED_KINDS = ("regular", "burst", "irregular")


def reaches_operating_point(run, output_tolerance: float) -> bool | None:
    """Whether an engine run from power-on reached its operating point.

    Parameters
    ----------
    run : rcc.engine.power_on.PowerOnRun
        The run.
    output_tolerance : float
        Allowed relative shortfall of the output below the expected output
        (``limits.output_tolerance``) [1].

    Returns
    -------
    bool or None
        True where the run switches (regular, bursts or irregular: not
        lock-up) and its output over the settled window is within
        ``output_tolerance`` below the output the design regulates to (or
        above it): the supply came up into regulation.  False for lock-up, no
        oscillation, or an output that stays below that band within the
        run (the output has not come up by the end of the power-on window, or
        the current limit caps the power there).  None when the engine failed
        (no verdict) [-].
    """
    if run.kind == "failed":
        return None
    return run.kind in REGULATED_KINDS and \
        run.output_voltage >= (1.0 - output_tolerance) * run.expected_output


@functools.lru_cache(maxsize=32)
def power_on_run(design, line_voltage: float, load, temperature: float, hfe: float,
                 max_duration: float):
    """:func:`rcc.engine.power_on.run_from_power_on`, remembered.

    The engine is deterministic, so a run is made once per process for the
    same design, line, load, temperature, gain and window (``rcc check`` and
    the start-up analysis ask for the same runs).

    Parameters
    ----------
    design : rcc.design.Design
        The design (hashable, frozen).
    line_voltage : float
        RMS line (AC input) or DC input voltage [V].
    load : rcc.design.Load
        The load (one value).
    temperature : float
        Device temperature [K].
    hfe : float
        Switch current gain at 25 degC [1].
    max_duration : float
        Longest simulated time [s].

    Returns
    -------
    rcc.engine.power_on.PowerOnRun
    """
    from rcc.engine.power_on import run_from_power_on

    return run_from_power_on(design, float(line_voltage), load, temperature=temperature,
                             hfe=hfe, max_duration=max_duration)


def run_into_load(design, line_voltage: float | None = None):
    """The engine from power-on at the worst start-up corner, full load.

    Parameters
    ----------
    design : rcc.design.Design
        The design.
    line_voltage : float, optional
        RMS line (AC input) or DC input voltage [V]; default the lowest line
        of the design.

    Returns
    -------
    rcc.engine.power_on.PowerOnRun
        Coldest temperature, ``hfe_min``, the heaviest load, at most
        :data:`INTO_LOAD_DURATION` simulated.
    """
    if line_voltage is None:
        line_voltage = design.input.line_voltages[0]
    return power_on_run(design, float(line_voltage), design.output.load_max,
                        float(design.environment.temperature_min),
                        float(design.switch.hfe_min), INTO_LOAD_DURATION)


def power_on_line_for_bus(design, bus_voltage: float) -> float:
    """Line at which the engine from power-on (worst corner, full load) runs
    at a given bus.

    Parameters
    ----------
    design : rcc.design.Design
        The design.
    bus_voltage : float
        Bus voltage [V].

    Returns
    -------
    float
        The DC input itself; for AC input the RMS line at which the bulk
        valley at full load (:func:`rcc.engine.power_on.power_on_bus_voltage`)
        equals ``bus_voltage``, by bisection to 1e-9 relative [V].
    """
    if not design.input.is_ac:
        return float(bus_voltage)
    from rcc.engine.power_on import power_on_bus_voltage

    load, cold = design.output.load_max, design.environment.temperature_min
    # the valley never exceeds the rectified peak: start where the peak is the bus
    low = (float(bus_voltage) + design.input.bridge_drop) / math.sqrt(2.0)
    high = max(2.0 * low, 1.0)
    while power_on_bus_voltage(design, high, load, cold) < bus_voltage:
        high *= 2.0
    while high - low > 1e-9 * high:
        middle = 0.5 * (low + high)
        if power_on_bus_voltage(design, middle, load, cold) < bus_voltage:
            low = middle
        else:
            high = middle
    return high


@dataclass(frozen=True)
class StartLineSearch:
    """Lowest line at which the supply starts into its full load.

    Attributes
    ----------
    line_voltage : float or None
        Lowest line tried (RMS for AC input, the DC input otherwise) at which
        the engine from power-on, coldest, ``hfe_min`` and full load, reaches
        its operating point; ``None`` where it does so at no line of the
        design's range (or the search could not tell) [V].
    bus_voltage : float or None
        Bus of that run [V].
    failing_line_voltage : float or None
        Highest line below ``line_voltage`` (or the highest line of the
        design, when none starts) known not to start into the load [V].
    failing_basis : str
        What shows it fails there: ``"engine"`` (a run from power-on) or
        ``"small-signal"`` (the power-on bus there is below the threshold of
        oscillation: the DC point is stable at some corner); empty when there
        is no failing line.
    resolution : float or None
        ``line_voltage - failing_line_voltage``: the threshold lies in this
        bracket (one threshold assumed) [V].
    runs : tuple of PowerOnRun
        The engine runs, in the order made (the run at the lowest line, when
        made, first).
    window : float
        Longest simulated time of one run [s].
    oscillation_line_voltage : float or None
        Line at which the power-on bus reaches the small-signal threshold of
        oscillation (the search's floor) [V].
    output_tolerance : float
        Shortfall of the output allowed for "reaches its operating point"
        (:func:`reaches_operating_point`) [1].
    note : str
        Why the search stopped before its resolution (the engine failed),
        else empty.
    """

    line_voltage: float | None
    bus_voltage: float | None
    failing_line_voltage: float | None
    failing_basis: str
    resolution: float | None
    runs: tuple = field(repr=False)
    window: float
    oscillation_line_voltage: float | None
    output_tolerance: float
    note: str = ""

    def to_json(self) -> dict:
        """JSON-ready summary (SI units; no NaN)."""
        def number(x):
            return None if x is None or not math.isfinite(x) else float(x)

        return {
            "line_v": number(self.line_voltage),
            "bus_v": number(self.bus_voltage),
            "failing_line_v": number(self.failing_line_voltage),
            "failing_basis": self.failing_basis,
            "resolution_v": number(self.resolution),
            "window_s": self.window,
            "oscillation_line_v": number(self.oscillation_line_voltage),
            "note": self.note,
            "runs": [{"line_v": number(run.line_voltage), "bus_v": number(run.bus_voltage),
                      "kind": run.kind,
                      "reaches_operating_point": reaches_operating_point(
                          run, self.output_tolerance),
                      "output_v": number(run.output_voltage),
                      "expected_output_v": number(run.expected_output),
                      "settled": run.settled, "simulated_s": number(run.duration),
                      "wall_time_s": number(run.wall_time)} for run in self.runs],
        }


def search_start_line(design, oscillation_bus_voltage: float | None, first_run=None,
                      runs: int = START_LINE_RUNS,
                      resolution: float = START_LINE_RESOLUTION) -> StartLineSearch:
    """Lowest line at which the supply starts into its full load.

    Parameters
    ----------
    design : rcc.design.Design
        The design.
    oscillation_bus_voltage : float or None
        Small-signal threshold of oscillation over the corners
        (:func:`rcc.startup.minimum_start_bus_voltage`); ``None`` when some
        corner does not oscillate at any bus of the design [V].
    first_run : PowerOnRun, optional
        The run at the lowest line (:func:`run_into_load`), when already made;
        reused, not repeated.
    runs : int
        Most engine runs besides the run at the lowest line [1].
    resolution : float
        Stop when the bracket is narrower than this fraction of the lowest
        line [1].

    Returns
    -------
    StartLineSearch

    Notes
    -----
    Bisection on the line voltage between a line that does not start into the
    load and one that does, each step one engine run from power-on
    (:func:`run_into_load`, at most :data:`INTO_LOAD_DURATION`): the bracket
    halves with every run.  The ends:

    - where the run at the lowest line reaches its operating point, the
      bracket is [floor, lowest line], the floor being the line where the
      power-on bus reaches the small-signal threshold of oscillation: below it
      the DC point is stable at some corner and oscillation cannot begin
      (no engine run needed);
    - otherwise [max(lowest line, floor), highest line], after one run at the
      highest line; if that does not start either, no line of the design
      does.

    It assumes one threshold (the supply starts into the load at every line
    above it), as a designer would; a design that starts at some lines and
    locks up at higher ones is reported at the bracket the bisection
    lands in.  The engine holds the bus constant at the bulk valley for the
    full load (:func:`rcc.engine.power_on.power_on_bus_voltage`), as in the
    start-up-into-load verdict.
    """
    lowest, highest = (float(v) for v in (design.input.line_voltages[0],
                                          design.input.line_voltages[2]))
    tolerance = design.limits.output_tolerance
    floor = (None if oscillation_bus_voltage is None
             else power_on_line_for_bus(design, float(oscillation_bus_voltage)))
    made = []
    spent = 0  # runs besides the one at the lowest line

    def run_at(line):
        nonlocal spent
        if line == lowest and first_run is not None:
            run = first_run
        else:
            run = run_into_load(design, line)
            spent += line != lowest
        made.append(run)
        return run

    def result(line, run, failing, basis, note=""):
        span = None if (line is None or failing is None) else line - failing
        return StartLineSearch(
            line_voltage=line, bus_voltage=None if run is None else float(run.bus_voltage),
            failing_line_voltage=failing, failing_basis=basis if failing is not None else "",
            resolution=span, runs=tuple(made), window=INTO_LOAD_DURATION,
            oscillation_line_voltage=floor, output_tolerance=tolerance, note=note)

    if floor is None or floor >= highest:
        # oscillation cannot begin at some corner at any line of the design
        return result(None, None, highest, "small-signal")
    high = high_run = None
    if floor < lowest:
        run = run_at(lowest)
        verdict = reaches_operating_point(run, tolerance)
        if verdict is None:
            return result(None, None, None, "", f"the engine failed at {lowest:.4g} V: "
                          f"{run.message}")
        if verdict:
            high, high_run, low, basis = lowest, run, floor, "small-signal"
        else:
            low, basis = lowest, "engine"
    else:
        low, basis = floor, "small-signal"
    if high is None:
        run = run_at(highest)
        verdict = reaches_operating_point(run, tolerance)
        if not verdict:
            note = "" if verdict is False else (f"the engine failed at {highest:.4g} V: "
                                                f"{run.message}")
            return result(None, None, highest if verdict is False else low,
                          "engine" if verdict is False else basis, note)
        high, high_run = highest, run
    note = ""
    while spent < runs and high - low > resolution * lowest:
        middle = 0.5 * (low + high)
        run = run_at(middle)
        verdict = reaches_operating_point(run, tolerance)
        if verdict is None:
            note = f"the engine failed at {middle:.4g} V: {run.message}"
            break
        if verdict:
            high, high_run = middle, run
        else:
            low, basis = middle, "engine"
    return result(high, high_run, low, basis, note)

"""The cycle model checked by the engine: operating points of
:func:`rcc.cycle.operating_points` next to the periodic steady state of the
same design (:func:`rcc.engine.pss.periodic_steady_state`), and the solve's
iteration count for the engine benchmark.

Notes
-----
Both models run on the same bus voltage (for AC input the bulk-capacitor
valley at the cycle model's input power), the same load, temperature and
switch gain, so their frequency, output voltage and peak current can be
compared point by point; ``notes/periodic_steady_state.md`` discusses the
differences found on the worked cases.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from rcc.design import Load
from rcc.engine.shooting import FallbackWarning, PeriodicSteadyStateError

if TYPE_CHECKING:  # the results module imports this one
    from rcc.engine.pss import PeriodicSteadyState

__all__ = ["VerifiedPoint", "verify_operating_points", "benchmark_iterations"]


@dataclass(frozen=True)
class VerifiedPoint:
    """One operating point by the cycle model and by the periodic steady state.

    Attributes
    ----------
    line_voltage : float
        RMS line (AC input) or DC input voltage [V].
    load : Load
        The load.
    temperature : float
        Temperature [K].
    model_frequency, model_output_voltage, model_peak_current : float
        Cycle model (:func:`rcc.cycle.operating_points`) [Hz], [V], [A].
    model_mode : str
        Cycle model's conduction mode.
    steady_state : PeriodicSteadyState or None
        The engine's periodic steady state; ``None`` if there is none.
    error : str
        Why there is no steady state (empty otherwise).
    frequency_difference, output_voltage_difference, peak_current_difference : float or None
        ``engine / model - 1``; 0 where there is no steady state or both are
        zero; None where the cycle model gives zero (the supply off or locked
        up) and the engine does not: no relative difference exists, and the
        two disagree [1].
    event_sequence_changed : bool
        The event sequence differs from the previous point of the list
        (same temperature and line): a change of operating regime between
        neighbouring points.
    """

    line_voltage: float
    load: Load
    temperature: float
    model_frequency: float
    model_output_voltage: float
    model_peak_current: float
    model_mode: str
    steady_state: PeriodicSteadyState | None
    error: str
    frequency_difference: float | None
    output_voltage_difference: float | None
    peak_current_difference: float | None
    event_sequence_changed: bool

    def to_json(self) -> dict:
        """JSON-ready summary (no NaN)."""
        from scipy.constants import zero_Celsius

        data = {
            "line_v": self.line_voltage, "load": self.load.text(),
            "temperature_c": self.temperature - zero_Celsius,
            "model": {"frequency_hz": self.model_frequency,
                      "output_v": self.model_output_voltage,
                      "peak_current_a": self.model_peak_current, "mode": self.model_mode},
            "difference": {"frequency": self.frequency_difference,
                           "output_v": self.output_voltage_difference,
                           "peak_current": self.peak_current_difference},
            "event_sequence_changed": self.event_sequence_changed,
            "error": self.error,
        }
        if self.steady_state is not None:
            summary = self.steady_state.to_json()
            summary.pop("state_at_turn_on", None)
            data["steady_state"] = summary
        return data


def _relative(engine: float, model: float) -> float | None:
    if model != 0.0:
        return engine / model - 1.0
    return 0.0 if engine == 0.0 else None


def verify_operating_points(design, line_voltages, loads, temperatures=None, hfe=None):
    """The cycle model's operating points checked by the periodic steady state.

    Parameters
    ----------
    design : Design
        The design.
    line_voltages : float or sequence of float
        RMS line (AC input) or DC input voltages [V].
    loads : Load, str or sequence of them
        Loads (a :class:`rcc.design.Load` whose value may be an array is
        expanded).
    temperatures : float or sequence of float, optional
        Temperatures [K]; default 25 degC clipped into the design's range.
    hfe : float, optional
        Switch current gain at 25 degC [1]; default ``switch.hfe_typ``.

    Returns
    -------
    list of VerifiedPoint
        One per (temperature, line, load) combination, in that nesting
        order.

    Notes
    -----
    Each point is solved independently (warm-up from power-on), so one
    failure does not spoil the next; a point without a periodic steady state
    (no oscillation, bursts) carries ``error`` instead of numbers.
    """
    from rcc.cycle import reference_temperature
    from rcc.engine.pss import _model_point, parse_load, periodic_steady_state

    lines = np.atleast_1d(np.asarray(line_voltages, dtype=float))
    if temperatures is None:
        temperatures = [reference_temperature(design)]
    temps = np.atleast_1d(np.asarray(temperatures, dtype=float))
    if isinstance(loads, Load):
        values = np.atleast_1d(np.asarray(loads.value, dtype=float))
        load_list = [Load(loads.kind, float(v)) for v in values]
    elif isinstance(loads, str):
        load_list = [parse_load(design, loads)]
    else:
        load_list = [parse_load(design, item) for item in loads]
    gain = design.switch.hfe_typ if hfe is None else float(hfe)
    points = []
    for temperature in temps:
        for line in lines:
            previous = None
            for load in load_list:
                model = _model_point(design, line, load, temperature, gain)
                mf, mv, mi = (float(np.ravel(getattr(model, name))[0]) for name in
                              ("frequency", "output_voltage", "peak_current"))
                mode = str(np.ravel(model.mode)[0])
                try:
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore", FallbackWarning)
                        result = periodic_steady_state(design, float(line), load,
                                                       float(temperature), gain)
                    error = ""
                except PeriodicSteadyStateError as failure:
                    result, error = None, str(failure)
                changed = (result is not None and previous is not None
                           and result.event_sequence != previous)
                if result is not None:
                    previous = result.event_sequence
                    diffs = (_relative(result.frequency, mf),
                             _relative(result.output_voltage, mv),
                             _relative(result.peak_current, mi))
                else:
                    diffs = (0.0, 0.0, 0.0)
                points.append(VerifiedPoint(float(line), load, float(temperature), mf, mv, mi,
                                            mode, result, error, *diffs, bool(changed)))
    return points


def benchmark_iterations(design=None) -> dict:
    """Newton iterations of the periodic-steady-state solve, for the benchmark.

    Parameters
    ----------
    design : Design or path, optional
        Default: the worked case ``worked_cases/legacy_24v_substitute.toml``
        at nominal line and full load.

    Returns
    -------
    dict
        ``iterations`` (Newton iterations after the warm-up) [1],
        ``warmup_cycles`` [1], ``transient_cycles`` (extra cycles before
        Newton converged) [1], ``method``, ``converged``, ``seconds`` (wall
        time of the whole solve) [s].
    """
    import time
    from pathlib import Path

    from rcc.design import load_design
    from rcc.engine.pss import WARMUP_CYCLES, periodic_steady_state

    if design is None:
        design = Path(__file__).resolve().parents[2] / "worked_cases" / \
            "legacy_24v_substitute.toml"
    if not hasattr(design, "switch"):
        design = load_design(design)
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FallbackWarning)
        result = periodic_steady_state(design, load=design.output.load_max)
    seconds = time.perf_counter() - start
    extra = 0
    for flag in result.flags:
        if flag.startswith("Newton converged after"):
            extra = int(flag.split()[3])
    return {"iterations": result.iterations, "warmup_cycles": WARMUP_CYCLES,
            "transient_cycles": extra, "method": result.method,
            "converged": result.converged, "seconds": seconds}

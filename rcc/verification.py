"""Cycle model against the periodic-steady-state engine, point by point.

``--verify`` of ``rcc check`` and ``rcc sweep``: every reported operating
point is also solved as the periodic steady state of the time-domain engine
(:func:`rcc.engine.pss.verify_operating_points`) and the differences are
tabulated.  Kept apart from :mod:`rcc.checks` because it is slow (seconds
per point) and optional.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rcc.design import Design, Load

__all__ = ["verification_rows", "split_loads", "StartupStress", "startup_stress"]


def verification_rows(design: Design, line_voltages, loads, temperatures=None,
                      progress=None) -> list[dict]:
    """Differences between the cycle model and the engine, as JSON-ready rows.

    Parameters
    ----------
    design : Design
        The design.
    line_voltages : sequence of float
        RMS line (AC input) or DC voltages [V].
    loads : sequence of Load
        Loads, each with a scalar value [A], [ohm] or [W].
    temperatures : sequence of float, optional
        Temperatures [K]; default 25 degC clipped into the design's range.
    progress : callable, optional
        Called as ``progress(done, total)`` after each point [1].

    Returns
    -------
    list of dict
        One row per point: line [V], load text and value [A], [ohm] or [W], model and engine frequency
        [Hz], output [V] and peak current [A], relative differences [1]
        (engine / model - 1), whether the engine's periodic steady state
        converged and its flags (a non-converged result carries the numbers
        of the last transient cycle: bursts, period two, irregular cycles),
        and ``error`` (why the engine has no result there); numbers are
        ``None`` where missing.
    """
    from rcc.engine.pss import verify_operating_points

    rows = []
    line_voltages = list(np.atleast_1d(line_voltages))
    per_line = len(np.atleast_1d(temperatures)) if temperatures is not None else 1
    total = len(loads) * len(line_voltages) * per_line
    points = (point for load in loads for line in line_voltages
              for point in verify_operating_points(design, [line], load, temperatures))
    for done, point in enumerate(points, start=1):
        if progress is not None:
            progress(done, total)
        state = point.steady_state
        engine = (state.frequency, state.output_voltage, state.peak_current) \
            if state is not None else (None, None, None)
        rows.append({
            "line_v": point.line_voltage,
            "load": point.load.text(),
            "load_value": float(point.load.value),
            "model_mode": point.model_mode,
            "model_frequency_hz": point.model_frequency,
            "engine_frequency_hz": engine[0],
            "frequency_diff": point.frequency_difference if state is not None else None,
            "model_output_v": point.model_output_voltage,
            "engine_output_v": engine[1],
            "output_diff": point.output_voltage_difference if state is not None else None,
            "model_peak_a": point.model_peak_current,
            "engine_peak_a": engine[2],
            "peak_diff": point.peak_current_difference if state is not None else None,
            "engine_converged": bool(state.converged) if state is not None else False,
            "engine_flags": "; ".join(state.flags) if state is not None else "",
            "error": point.error,
        })
    return [{key: (float(value) if isinstance(value, (np.floating,)) else value)
             for key, value in row.items()} for row in rows]


def split_loads(load: Load) -> list[Load]:
    """One scalar load per value of a load with an array of values.

    Parameters
    ----------
    load : Load
        Load kind with one or more values [A], [ohm] or [W].

    Returns
    -------
    list of Load
        Scalar loads of the same kind.
    """
    values = np.atleast_1d(np.asarray(load.value, dtype=float))
    return [Load(load.kind, float(v)) for v in values]


#: Simulated time after the estimated start-up time, so that the first cycles
#: with the output still low are inside the run [s].
STARTUP_MARGIN = 1e-3
#: Longest start-up simulated for the stress table [s].
STARTUP_LIMIT = 10e-3


@dataclass(frozen=True)
class StartupStress:
    """Peaks from power-on, by the time-domain engine.

    Attributes
    ----------
    line_voltage : float
        Highest line (RMS for AC input, DC otherwise) [V].
    bus_voltage : float
        Bus held at its no-load value (rectified peak for AC input) [V].
    temperature : float
        Device temperature: the coldest of the range (lowest limiter Vbe
        tempco aside, the hardest base drive) [K].
    duration : float
        Simulated time from power-on [s].
    primary_peak_a : float
        Highest primary current [A].
    magnetizing_peak_a : float
        Highest magnetizing current [A].
    core_peak_flux_t : float
        ``L_m i_m / (N_p A_e)`` at the magnetizing peak [T].
    switch_peak_v : float
        Highest collector voltage [V].
    """

    line_voltage: float
    bus_voltage: float
    temperature: float
    duration: float
    primary_peak_a: float
    magnetizing_peak_a: float
    core_peak_flux_t: float
    switch_peak_v: float

    def to_json(self) -> dict:
        return dict(self.__dict__)


def startup_stress(design: Design, start_time: float | None = None) -> StartupStress:
    """Primary current, flux and collector voltage from power-on at the highest
    line, heaviest load, coldest temperature and ``hfe_max``, by the engine.

    Parameters
    ----------
    design : Design
        The design.
    start_time : float, optional
        Estimated start-up time [s] (:func:`rcc.startup.startup_report`); the run
        lasts that plus :data:`STARTUP_MARGIN`, at most :data:`STARTUP_LIMIT`.

    Returns
    -------
    StartupStress

    Notes
    -----
    During start-up the output is still low, so the regulation path does not yet
    shorten the on-time and the drive capacitor starts discharged: the switch is
    driven hardest and its storage time adds most to the current limit.  The
    steady-state worst case of :func:`rcc.checks.check_design` does not see
    those cycles; this run does.  Flux from Faraday's law, ``B = L_m i_m/(N_p A_e)``
    (McLyman, *Transformer and Inductor Design Handbook*, 3rd ed., 2004, ch. 1).
    """
    from rcc.engine import build_circuit, dc_initial_state, simulate
    from rcc.mains import bus_voltage

    line = float(design.input.line_voltages[2])
    bus = float(bus_voltage(design, line))
    temperature = float(min(design.environment.temperature_min,
                            design.environment.temperature_max))
    duration = min((start_time or 0.0) + STARTUP_MARGIN, STARTUP_LIMIT)
    circuit = build_circuit(design, bus, design.output.load_max, temperature,
                            design.switch.hfe_max)
    trace = simulate(circuit, dc_initial_state(circuit), duration,
                     max_step=duration / 20000.0)
    magnetizing = float(np.max(trace.states[:, list(trace.state_names).index(
        "i_magnetizing")]))
    tr = design.transformer
    return StartupStress(
        line_voltage=line, bus_voltage=bus, temperature=temperature,
        duration=float(trace.final_time),
        primary_peak_a=float(np.max(trace.signals["primary_current"])),
        magnetizing_peak_a=magnetizing,
        core_peak_flux_t=tr.magnetizing_inductance * magnetizing
        / (tr.primary_turns * tr.core_area),
        switch_peak_v=float(np.max(trace.signals["collector_voltage"])))

"""Cycle model against the periodic-steady-state engine, point by point.

``--verify`` of ``rcc check`` and ``rcc sweep``: every reported operating
point is also solved as the periodic steady state of the time-domain engine
(:func:`rcc.engine.pss.verify_operating_points`) and the differences are
tabulated.  Kept apart from :mod:`rcc.checks` because it is slow (seconds
per point) and optional.
"""

from __future__ import annotations

import numpy as np

from rcc.design import Design, Load

__all__ = ["verification_rows", "split_loads"]


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

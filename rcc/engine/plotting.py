"""Plots of engine results: stacked waveforms of a run (start-up and a
steady-state zoom) and of one period of the periodic steady state.

Plot functions take a :class:`rcc.engine.Trace` or a
:class:`rcc.engine.pss.PeriodicSteadyState` and optional axes, import
matplotlib lazily (Agg backend) and never compute anything new.
"""

from __future__ import annotations

import numpy as np

__all__ = ["WAVEFORM_PANELS", "plot_waveforms", "plot_periodic_steady_state", "zoom_window",
           "write_csv"]

#: Stacked panels: (signal name, axis label, display scale, unit).
WAVEFORM_PANELS = (
    ("collector_voltage", "collector", 1.0, "V"),
    ("primary_current", "primary", 1e3, "mA"),
    ("base_current", "base", 1e3, "mA"),
    ("limiter_current", "limiter", 1e3, "mA"),
    ("feedback_voltage", "feedback winding", 1.0, "V"),
    ("output_voltage", "output", 1.0, "V"),
)


def zoom_window(trace, cycles: int = 3) -> tuple[float, float]:
    """Time window of the last ``cycles`` switch turn-ons of a trace.

    Parameters
    ----------
    trace : Trace
    cycles : int
        Number of switching cycles to show.

    Returns
    -------
    (float, float)
        Start and end [s]; the last 5 % of the run when there are not
        enough turn-ons.
    """
    turn_ons = trace.turn_on_times()
    if len(turn_ons) > cycles:
        start = turn_ons[-cycles - 1]
        end = turn_ons[-1] + 0.15 * (turn_ons[-1] - turn_ons[-2])
        return float(start), float(min(end, trace.final_time))
    span = trace.final_time - trace.times[0]
    return float(trace.final_time - 0.05 * span), float(trace.final_time)


def plot_waveforms(trace, title: str = "", cycles: int = 3, axes=None):
    """Stacked waveforms: whole run on the left, a steady-state zoom on the right.

    Parameters
    ----------
    trace : Trace
        Engine run (:func:`rcc.engine.simulate.simulate`), SI units [-].
    title : str
        Figure title.
    cycles : int
        Switching cycles in the zoom [1].
    axes : matplotlib Axes grid, shape (6, 2), optional
        Axes to draw in; a new figure when omitted [-].

    Returns
    -------
    matplotlib Axes grid, shape (6, 2)
        The axes drawn in (signals in V and mA, time in ms and us; the zoom
        from the start of its window) [-].
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    if axes is None:
        fig, axes = plt.subplots(len(WAVEFORM_PANELS), 2, figsize=(13, 12), sharex="col",
                                 gridspec_kw={"width_ratios": [1.4, 1.0]})
    else:
        fig = axes[0, 0].figure
    start, end = zoom_window(trace, cycles)
    zoom = (trace.times >= start) & (trace.times <= end)
    scale_t, unit_t = _time_scale(trace.final_time - trace.times[0])
    zscale_t, zunit_t = _time_scale(end - start)
    for row, (name, label, scale, unit) in enumerate(WAVEFORM_PANELS):
        values = trace.signals[name] * scale
        axes[row, 0].plot(trace.times * scale_t, values, lw=0.6, color="C0")
        axes[row, 1].plot((trace.times[zoom] - start) * zscale_t, values[zoom], lw=0.9,
                          color="C1")
        axes[row, 0].set_ylabel(f"{label} [{unit}]")
        for ax in axes[row]:
            ax.grid(True, alpha=0.3)
    axes[-1, 0].set_xlabel(f"time [{unit_t}] (start-up)")
    # the zoom's time axis starts at the window (absolute microseconds late
    # in a run have too many digits to read)
    axes[-1, 1].set_xlabel(f"time [{zunit_t}] after t = {start * scale_t:.6g} {unit_t} "
                           f"(last {cycles} cycles)")
    axes[0, 0].set_title("whole run")
    axes[0, 1].set_title("steady-state zoom")
    if title:
        fig.suptitle(title)
    fig.tight_layout()
    return axes


def _time_scale(span: float) -> tuple[float, str]:
    if span >= 0.5:
        return 1.0, "s"
    if span >= 5e-4:
        return 1e3, "ms"
    return 1e6, "us"


def write_csv(trace, path) -> None:
    """Write time, the named signals and the state vector as CSV.

    Parameters
    ----------
    trace : Trace
    path : str or Path
        Output file (overwritten; the caller checks for existing files).
    """
    names = list(trace.signals)
    columns = [trace.times] + [trace.signals[n] for n in names] + list(trace.states.T)
    header = ["time_s"] + [f"{n}_{_unit(n)}" for n in names] + [
        f"state_{s}" for s in trace.state_names]
    data = np.column_stack(columns)
    np.savetxt(path, data, delimiter=",", header=",".join(header), comments="",
               fmt="%.10g")


def _unit(name: str) -> str:
    if name.endswith("voltage"):
        return "V"
    return "A"


def plot_periodic_steady_state(result, axes=None):
    """Stacked plots of one steady-state period.

    Parameters
    ----------
    result : PeriodicSteadyState
        From :func:`rcc.engine.pss.periodic_steady_state`.
    axes : sequence of 6 matplotlib Axes, optional
        Where to draw; default a new figure with six stacked axes.

    Returns
    -------
    list of matplotlib Axes
        Collector voltage [V], primary current [mA], base current [mA],
        limiter current [mA], feedback winding voltage [V] and output
        voltage [V] against time in [us].
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    wave = result.waveform
    if axes is None:
        figure, axes = plt.subplots(len(WAVEFORM_PANELS), 1, sharex=True, figsize=(8, 10))
    axes = list(axes)
    time_us = wave.time * 1e6
    for ax, (name, label, scale, unit) in zip(axes, WAVEFORM_PANELS):
        ax.plot(time_us, getattr(wave, name) * scale, linewidth=0.9)
        ax.set_ylabel(f"{label} [{unit}]")
        ax.grid(True, alpha=0.3)
    axes[-1].set_xlabel("time from turn-on [us]")
    status = "stable" if result.stable else "UNSTABLE"
    axes[0].set_title(
        f"periodic steady state: {result.frequency / 1e3:.4g} kHz, "
        f"{result.output_voltage:.4g} V out, bus {result.bus_voltage:.4g} V, "
        f"load {result.load.text()} ({result.method}, {status})", fontsize=9)
    axes[0].figure.tight_layout()
    return axes

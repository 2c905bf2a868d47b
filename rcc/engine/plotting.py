"""Plots of engine results: stacked waveforms of a run (start-up and a
steady-state zoom) and of one period of the periodic steady state.

Plot functions take a :class:`rcc.engine.Trace` or a
:class:`rcc.engine.pss.PeriodicSteadyState` and optional axes, import
matplotlib lazily (Agg backend) and never compute anything new.
"""

from __future__ import annotations

import numpy as np

__all__ = ["WAVEFORM_PANELS", "BUS_PANEL", "CYCLE_PANELS", "cycle_status", "on_time_end",
           "plot_waveforms", "plot_periodic_steady_state", "zoom_window",
           "write_csv", "csv_columns", "csv_rows", "csv_size"]

#: Stacked panels: (signal name, axis label, display scale, unit).
WAVEFORM_PANELS = (
    ("collector_voltage", "collector", 1.0, "V"),
    ("primary_current", "primary", 1e3, "mA"),
    ("base_current", "base", 1e3, "mA"),
    ("limiter_current", "limiter", 1e3, "mA"),
    ("feedback_voltage", "feedback winding", 1.0, "V"),
    ("output_voltage", "output", 1.0, "V"),
)
#: The panel added when the bus is the bulk capacitor (line ripple).
BUS_PANEL = ("bus_voltage", "bus", 1.0, "V")


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


def plot_waveforms(trace, title: str = "", cycles: int = 3, axes=None,
                   panels=WAVEFORM_PANELS):
    """Stacked waveforms: whole run on the left, the last cycles on the right.

    Parameters
    ----------
    trace : Trace
        Engine run (:func:`rcc.engine.simulate.simulate`), SI units [-].
    title : str
        Figure title.
    cycles : int
        Switching cycles in the zoom [1].
    axes : matplotlib Axes grid, shape (len(panels), 2), optional
        Axes to draw in; a new figure when omitted [-].
    panels : sequence of (signal, label, scale, unit)
        The stacked signals, default :data:`WAVEFORM_PANELS` (add
        :data:`BUS_PANEL` for a run on the bulk capacitor) [-].

    Returns
    -------
    matplotlib Axes grid, shape (len(panels), 2)
        The axes drawn in (signals in V and mA, time in ms and us; the zoom
        from the start of its window) [-].
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    if axes is None:
        fig, axes = plt.subplots(len(panels), 2, figsize=(13, 2.0 * len(panels)),
                                 sharex="col",
                                 gridspec_kw={"width_ratios": [1.4, 1.0]})
    else:
        fig = axes[0, 0].figure
    start, end = zoom_window(trace, cycles)
    zoom = (trace.times >= start) & (trace.times <= end)
    scale_t, unit_t = _time_scale(trace.final_time - trace.times[0])
    zscale_t, zunit_t = _time_scale(end - start)
    for row, (name, label, scale, unit) in enumerate(panels):
        values = trace.signals[name] * scale
        axes[row, 0].plot(trace.times * scale_t, values, lw=0.6, color="C0")
        axes[row, 1].plot((trace.times[zoom] - start) * zscale_t, values[zoom], lw=0.9,
                          color="C1")
        axes[row, 0].set_ylabel(f"{label} [{unit}]")
        for ax in axes[row]:
            ax.grid(True, alpha=0.3)
            # absolute values on the axis (an offset like "+3.139e2" over a
            # bus that moves by 0.1 V hides the level an engineer reads)
            ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    axes[-1, 0].set_xlabel(f"time [{unit_t}] (start-up)")
    # the zoom's time axis starts at the window (absolute microseconds late
    # in a run have too many digits to read)
    axes[-1, 1].set_xlabel(f"time [{zunit_t}] after t = {start * scale_t:.6g} {unit_t} "
                           f"(last {cycles} cycles)")
    axes[0, 0].set_title("whole run")
    axes[0, 1].set_title(f"last {cycles} turn-ons" if len(trace.turn_on_times()) > cycles
                         else "end of the run (too few turn-ons for cycles)")
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


#: Bytes per CSV cell written with ``%.10g`` and a comma, on average [B].
CSV_CELL_BYTES = 15


def csv_columns(trace, signals=None) -> list[str]:
    """Names of the signals (and states) a CSV of ``trace`` would hold.

    Parameters
    ----------
    trace : Trace
    signals : sequence of str, optional
        Signal names of ``trace.signals`` and/or ``"states"`` (the whole state
        vector); default every signal and the states.

    Returns
    -------
    list of str

    Raises
    ------
    ValueError
        An unknown name; the message lists the valid ones.
    """
    valid = list(trace.signals) + ["states"]
    if signals is None:
        return valid
    unknown = [name for name in signals if name not in valid]
    if unknown:
        raise ValueError(f"unknown signal {unknown[0]!r}; expected some of "
                         + ", ".join(valid))
    return list(dict.fromkeys(signals))


def csv_rows(trace, every: int = 1, window=None) -> np.ndarray:
    """Sample indices a CSV keeps.

    Parameters
    ----------
    trace : Trace
    every : int
        Keep every ``every``-th sample [1].
    window : (float, float), optional
        Time window to keep [s].

    Returns
    -------
    ndarray of int
        Indices into ``trace.times`` [1].
    """
    index = np.arange(trace.times.size)
    if window is not None:
        start, end = window
        index = index[(trace.times >= start) & (trace.times <= end)]
    return index[::max(int(every), 1)]


def csv_size(trace, signals=None, every: int = 1, window=None) -> int:
    """Estimated size of the CSV file.

    Parameters
    ----------
    trace : Trace
    signals : sequence of str, optional
        See :func:`csv_columns`.
    every : int
        Keep every ``every``-th sample [1].
    window : (float, float), optional
        Time window to keep [s].

    Returns
    -------
    int
        Size [B], at :data:`CSV_CELL_BYTES` per value.
    """
    columns = csv_columns(trace, signals)
    width = 1 + sum(len(trace.state_names) if c == "states" else 1 for c in columns)
    return int(csv_rows(trace, every, window).size * width * CSV_CELL_BYTES)


def write_csv(trace, path, signals=None, every: int = 1, window=None) -> None:
    """Write time, the chosen signals and (optionally) the state vector as CSV.

    Parameters
    ----------
    trace : Trace
    path : str or Path
        Output file (overwritten; the caller checks for existing files).
    signals : sequence of str, optional
        See :func:`csv_columns`; default all signals and the states.
    every : int
        Keep every ``every``-th sample [1] (events appear as two samples).
    window : (float, float), optional
        Time window to keep [s].
    """
    rows = csv_rows(trace, every, window)
    columns, header = [trace.times[rows]], ["time_s"]
    for name in csv_columns(trace, signals):
        if name == "states":
            columns += list(trace.states[rows].T)
            header += [f"state_{state}" for state in trace.state_names]
        else:
            columns.append(trace.signals[name][rows])
            header.append(f"{name}_{_unit(name)}")
    np.savetxt(path, np.column_stack(columns), delimiter=",", header=",".join(header),
               comments="", fmt="%.10g")


def _unit(name: str) -> str:
    if name.endswith("voltage"):
        return "V"
    return "A"


#: Panels of one steady-state period: the run's panels with the secondary and
#: clamp currents before the output voltage.
CYCLE_PANELS = WAVEFORM_PANELS[:5] + (
    ("output_rectifier_current", "secondary", 1.0, "A"),
    ("clamp_current", "clamp", 1e3, "mA"),
) + WAVEFORM_PANELS[5:]


def cycle_status(result) -> str:
    """What the plotted period is, in words an engineer acts on.

    Parameters
    ----------
    result : PeriodicSteadyState
        Its ``converged`` and ``stable`` flags are used.

    Returns
    -------
    str
    """
    if not result.converged:
        return "NOT CONVERGED: last cycle of a long transient (may not be periodic)"
    if not result.stable:
        return "periodic but UNSTABLE: the supply does not stay on this cycle"
    return "periodic steady state, stable"


def on_time_end(result) -> tuple[float, str]:
    """When the on-time ended and what ended it (display only).

    Parameters
    ----------
    result : PeriodicSteadyState
        The cycle; its waveform, on-time and peak current are used.

    Returns
    -------
    (float, str)
        Instant of the peak primary current within the on-time, where the switch
        leaves saturation [s], and ``"limiter"`` if the limiter transistor
        conducts then (current limit or regulation), else ``"base drive"``.
    """
    wave = result.waveform
    inside = np.flatnonzero(wave.time <= result.on_time)
    if inside.size == 0:
        return float(result.on_time), "base drive"
    index = int(inside[np.argmax(wave.primary_current[inside])])
    limiter = float(wave.limiter_current[index])
    return float(wave.time[index]), ("limiter" if limiter > 0.01 * max(
        float(wave.primary_current[index]), 1e-12) else "base drive")


def plot_periodic_steady_state(result, axes=None, rating=None, bus=None):
    """Stacked plots of one steady-state period.

    Parameters
    ----------
    result : PeriodicSteadyState
        From :func:`rcc.engine.pss.periodic_steady_state`.
    axes : sequence of 8 matplotlib Axes, optional
        Where to draw; default a new figure with eight stacked axes.
    rating : (float, str), optional
        Allowed collector voltage [V] and its label (e.g. ``"80 % of VCEV"``),
        drawn as a red line on the collector panel.
    bus : str, optional
        How the bus was held, for the title (default ``"bus <V> V"``) [-].

    Returns
    -------
    list of matplotlib Axes
        Collector voltage [V], primary current [mA], base current [mA], limiter
        current [mA], feedback winding voltage [V], secondary (output rectifier)
        current [A], clamp current [mA] and output voltage [V] against time in
        [us]; a dashed line where the on-time ended (the switch leaves saturation
        at the peak primary current), labelled with what ended it.
        The title says whether the period is a stable steady state.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    wave = result.waveform
    if axes is None:
        figure, axes = plt.subplots(len(CYCLE_PANELS), 1, sharex=True, figsize=(8, 12))
    axes = list(axes)
    time_us = wave.time * 1e6
    end, reason = on_time_end(result)
    for ax, (name, label, scale, unit) in zip(axes, CYCLE_PANELS):
        ax.plot(time_us, getattr(wave, name) * scale, linewidth=0.9)
        ax.set_ylabel(f"{label} [{unit}]")
        ax.grid(True, alpha=0.3)
        ax.axvline(end * 1e6, color="0.4", ls="--", lw=0.8)
    axes[1].annotate(f"on-time ends: {reason}", (end * 1e6, 0.9),
                     xycoords=("data", "axes fraction"), xytext=(-4, 0),
                     textcoords="offset points", fontsize=8, color="0.3", ha="right",
                     va="top")
    if rating is not None:
        volts, text = rating
        axes[0].axhline(volts, color="tab:red", lw=1.0)
        axes[0].annotate(text, (0.0, volts), xycoords=("axes fraction", "data"),
                         xytext=(4, -3), textcoords="offset points", ha="left", va="top",
                         fontsize=8, color="tab:red")
        low, high = axes[0].get_ylim()
        axes[0].set_ylim(low, max(high, 1.05 * volts))
    axes[-1].set_xlabel("time from turn-on [us]")
    axes[0].set_title(
        f"{cycle_status(result)}\n{result.frequency / 1e3:.4g} kHz, "
        f"{result.output_voltage:.4g} V out, "
        f"{bus or f'bus {result.bus_voltage:.4g} V'}, "
        f"load {result.load.text()} ({result.method})", fontsize=9)
    axes[0].figure.tight_layout()
    return axes

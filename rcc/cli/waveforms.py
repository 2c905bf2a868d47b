"""`rcc waveforms DESIGN [--line V] [--load X] [--time 20ms] [--bus bulk|peak|valley]
[--from-dc-point] [--plot FILE.png] [--csv FILE] [--force]`: start-up and
steady-state waveforms from the time-domain engine."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.overrides import load_with_overrides, set_option

from rcc.cli import (EXIT_FINDING_FAILED, app, fail_input, plan_outputs,
                     write_outputs)
from rcc.cli.outputs import FIGURE_SUFFIXES
from rcc.cli.progress import QUIET_HELP, Status
from rcc.cli.options import (HFE_HELP, LINE_HELP, LOAD_HELP, TEMPERATURE_HELP, hfe_option,
                             line_option, load_option, temperature_option, time_option)


#: A CSV larger than this is announced on stderr before it is written [B].
LARGE_CSV_BYTES = 20e6
BUS_HELP = ("Bus of the run: bulk (the bulk capacitor charged through the bridge, "
            "with line ripple), peak (held at the rectified peak) or valley (held at the "
            "bulk valley, as check and cycle). Default: bulk for AC input, the DC "
            "input otherwise.")


@app.command(short_help="Simulate from switch-on (engine): waveforms and summary.")
def waveforms(
    design_file: Path = typer.Argument(..., metavar="DESIGN", help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    line: Optional[str] = typer.Option(None, "--line", help=LINE_HELP),
    load: Optional[str] = typer.Option(None, "--load", help=LOAD_HELP),
    temperature: Optional[str] = typer.Option(None, "--temperature", help=TEMPERATURE_HELP),
    hfe: Optional[str] = typer.Option(None, "--hfe", help=HFE_HELP),
    bus: Optional[str] = typer.Option(None, "--bus", help=BUS_HELP),
    time: str = typer.Option("20ms", "--time", help="Simulated time from switch-on, "
                             "with its unit (up to 10s)."),
    from_dc_point: bool = typer.Option(False, "--from-dc-point", help="Start from the DC "
                                       "operating point instead of discharged capacitors."),
    max_events: int = typer.Option(2_000_000, "--max-events", min=1000, max=100_000_000,
                                   help="Stop after this many switching events."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write stacked waveforms "
                                        "(.png, .pdf or .svg)."),
    csv: Optional[Path] = typer.Option(None, "--csv", help="Write the traces as CSV."),
    every: int = typer.Option(1, "--every", min=1, help="CSV: keep every N-th sample."),
    window: Optional[str] = typer.Option(None, "--window", help="CSV: time window "
                                         "START:STOP, e.g. 15ms:20ms."),
    signals: Optional[str] = typer.Option(None, "--signals", help="CSV: comma-separated "
                                          "signal names (and 'states' for the state "
                                          "vector). Default: all."),
    force: bool = typer.Option(False, "--force", help="Overwrite existing output files."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Simulate the supply from switch-on: collector voltage, primary, base and
    limiter currents, feedback winding and output voltage.

    For AC input the bus is the bulk capacitor charged through the bridge
    from the sine line, with its line-frequency ripple (--bus bulk); --bus
    peak or valley hold it constant instead.

    Exit code 0 when the supply runs, 1 when it does not oscillate or locks up
    or the engine stops (event storm, inconsistent circuit, --max-events
    reached), 2 on bad input.
    """
    design = load_with_overrides(design_file, settings)
    from rcc.engine.bus import check_bus_choice, run_bus

    try:
        line_voltage = line_option(design, line)
        load_value = load_option(design, load)
        duration = time_option(time)
        temperature_value = temperature_option(design, temperature)
        gain = hfe_option(design, hfe)
        csv_window = _window_option(window, duration)
        csv_signals = _signals_option(signals)
        check_bus_choice(design, bus)
    except ValueError as error:
        raise fail_input(str(error)) from None
    plan_outputs({"--plot": (plot, FIGURE_SUFFIXES), "--csv": (csv, None)}, force)
    from rcc.engine import EngineError, build_circuit, dc_initial_state, simulate

    try:
        with Status(quiet) as status:
            if bus == "valley":
                status.phase("cycle model: the bulk valley at its input power")
            run = run_bus(design, line_voltage, load_value, temperature_value, gain, bus)
            circuit = build_circuit(design, run.voltage, load_value, temperature_value, gain,
                                    bus_model=run.bus_model)
            x0 = dc_initial_state(circuit, from_dc_point=from_dc_point)
            status.phase(f"simulating {duration * 1e3:g} ms", total=duration)
            trace = simulate(circuit, x0, duration, max_step=duration / 20000.0,
                             max_events=max_events,
                             progress=(lambda t, t_end: status.update(t))
                             if status.enabled else None)
    except EngineError as error:
        reason = str(error).replace("raise max_events", "raise --max-events")
        typer.echo(f"{design.title}\nengine stopped: {reason}")
        raise typer.Exit(EXIT_FINDING_FAILED) from None
    operation = operation_of(trace, design.output.voltage_target)
    typer.echo(format_summary(design.title, run, load_value, temperature_value, gain, trace,
                              operation))
    writers = []
    if csv is not None:
        from rcc.engine.plotting import csv_size, write_csv

        try:
            size = csv_size(trace, csv_signals, every, csv_window)
        except ValueError as error:
            raise fail_input(f"--signals {signals!r}: {error}") from None
        if size > LARGE_CSV_BYTES:
            typer.echo(f"writing about {size / 1e6:.0f} MB to {csv} (reduce with --every, "
                       "--window or --signals)", err=True)
        writers.append(lambda files: write_csv(trace, files.path(csv), csv_signals, every,
                                               csv_window))
    if plot is not None:
        def write_plot(files):
            import matplotlib.pyplot as plt

            from rcc.engine.plotting import BUS_PANEL, WAVEFORM_PANELS, plot_waveforms

            panels = WAVEFORM_PANELS + ((BUS_PANEL,) if run.bus_model == "bulk" else ())
            axes = plot_waveforms(trace, title=f"{design.title}\nbus: {run.description}, load "
                                              f"{load_value.text()}", panels=panels)
            axes[0, 0].figure.savefig(files.path(plot), dpi=110)
            plt.close(axes[0, 0].figure)

        writers.append(write_plot)
    write_outputs(writers)
    if operation["kind"] in NOT_RUNNING:
        raise typer.Exit(EXIT_FINDING_FAILED)


def _window_option(text, duration):
    """``--window START:STOP`` [s] inside the run."""
    if text is None:
        return None
    from rcc.sweep import parse_range

    parts = text.split(":")
    if len(parts) != 2:
        raise ValueError(f"--window {text!r}: expected START:STOP with units, e.g. 15ms:20ms")
    start, stop = (float(parse_range(part, "time", "--window")[0]) for part in parts)
    if not 0 <= start < stop:
        raise ValueError(f"--window {text!r}: expected 0 <= START < STOP")
    if start >= duration:
        raise ValueError(f"--window {text!r}: starts after the end of the run "
                         f"({duration * 1e3:g} ms)")
    return start, stop


def _signals_option(text):
    if text is None:
        return None
    from rcc.engine import SIGNAL_NAMES

    names = [name.strip() for name in text.split(",") if name.strip()]
    valid = list(SIGNAL_NAMES) + ["states"]
    unknown = [name for name in names if name not in valid]
    if unknown or not names:
        raise ValueError(f"--signals {text!r}: expected some of {', '.join(valid)}")
    return names


def operation_of(trace, expected_output=None) -> dict:
    """Kind of operation of a run over its last quarter, as a JSON-ready dict.

    Uses :func:`rcc.operation.classify_operation` (regular, burst with its period
    and pulses per burst, irregular, lock-up, none) when that module is
    installed; otherwise tells only whether the supply oscillates at all.
    """
    import numpy as np

    turn_ons = trace.turn_on_times()
    try:
        from rcc.operation import classify_operation
    except ImportError:  # the classifier ships with the population tools
        if turn_ons.size < 3:
            return {"kind": "starting" if _rising(trace) else "none",
                    "output_v": float(np.mean(trace.signals["output_voltage"][
                        trace.times >= 0.75 * trace.final_time]))}
        intervals = np.diff(turn_ons[-4:])
        return {"kind": "oscillating", "frequency_hz": float(1.0 / np.median(intervals))}
    ends = np.append(turn_ons, trace.final_time)
    current = trace.signals["primary_current"]
    peaks = np.array([float(np.max(current[(trace.times >= start) & (trace.times < end)],
                                   initial=0.0)) for start, end in zip(ends, ends[1:])])
    output = trace.signals["output_voltage"]
    operation = classify_operation(turn_ons, peaks, trace.times, output,
                                   expected_output=expected_output,
                                   end_time=trace.final_time).to_json()
    if operation["kind"] in NOT_RUNNING and _rising(trace):
        operation["kind"] = "starting"  # a run too short to tell
    return operation


def _rising(trace) -> bool:
    """Whether the output is still rising at the end of a run: its mean over the
    last quarter exceeds the quarter before by :data:`RISING` (and 1 mV)."""
    import numpy as np

    output, times = trace.signals["output_voltage"], trace.times
    quarter = trace.final_time / 4.0
    last = output[times >= 3 * quarter]
    before = output[(times >= 2 * quarter) & (times < 3 * quarter)]
    return bool(before.size and last.size and np.mean(last) > 1e-3 and
                np.mean(last) > RISING * np.mean(before))


#: Output still rising when its mean over the last quarter of the run exceeds the
#: quarter before by this factor: the supply is still starting, not locked up [1].
RISING = 1.05
#: Kinds of operation after which ``waveforms`` exits with 1.
NOT_RUNNING = ("none", "lockup")


def _operation_text(operation: dict) -> str:
    kind = operation["kind"]
    if kind == "none":
        return "NO OSCILLATION (fewer than 3 turn-ons)"
    if kind == "lockup":
        return (f"LOCK-UP: switching far below the regulated output (mean "
                f"{operation['output_v']:.3g} V over the last quarter)")
    if kind == "starting":
        return (f"still starting up at the end of the run (output {operation['output_v']:.3g} "
                "V over the last quarter and rising): run longer with --time")
    frequency = f"{operation['frequency_hz'] / 1e3:.4g} kHz"
    if kind == "burst":
        return (f"burst: {operation['pulses_per_burst']:.3g} pulses every "
                f"{operation['burst_period_s'] * 1e3:.3g} ms (mean {frequency}; pulses "
                f"{1e-3 / operation['pulse_interval_s']:.4g} kHz apart)")
    if kind == "regular":
        return f"regular at {frequency} over the last quarter of the run"
    if kind == "irregular":
        return (f"irregular (intervals spread {operation['interval_spread']:.0%}, mean "
                f"{frequency})")
    return f"oscillating, last cycles at {frequency}"


def format_summary(title, run, load, temperature, hfe, trace, operation=None) -> str:
    """Plain-text summary of a run on the bus ``run``
    (:class:`rcc.engine.bus.RunBus`)."""
    import numpy as np

    turn_ons = trace.turn_on_times()
    out = trace.signals["output_voltage"]
    operation = operation or operation_of(trace)
    rows = [("bus", run.description)]
    if run.bus_model == "bulk":
        rows.append(("bus over the run", _bulk_text(trace, run)))
    rows += [
        ("load", load.text()),
        ("temperature / hFE", f"{temperature - 273.15:.3g} degC / {hfe:.3g} at 25 degC"),
        ("simulated", f"{trace.final_time * 1e3:.4g} ms, {len(trace.event_times)} switching "
                      f"events, {len(turn_ons)} switch turn-ons"),
        ("operation", _operation_text(operation)),
        ("output at end", f"{out[-1]:.4g} V"),
        ("collector peak", f"{np.max(trace.signals['collector_voltage']):.4g} V"),
        ("primary peak", f"{np.max(trace.signals['primary_current']) * 1e3:.4g} mA"),
    ]
    width = max(len(name) for name, _ in rows)
    return "\n".join([title] + [f"  {name:<{width}}  {value}" for name, value in rows])


def _bulk_text(trace, run) -> str:
    """Bus range of a run on the bulk capacitor, over its last line period
    (the ripple) when the run is that long."""
    import numpy as np

    bus, times = trace.signals["bus_voltage"], trace.times
    period = 1.0 / run.line_frequency
    text = f"{np.min(bus):.4g} V to {np.max(bus):.4g} V"
    if trace.final_time - times[0] >= period:
        last = bus[times >= trace.final_time - period]
        text += (f"; over the last line period {np.min(last):.4g} V to {np.max(last):.4g} V "
                 f"({np.ptp(last):.3g} V p-p ripple)")
    else:
        text += f" (run shorter than a line period, {period * 1e3:.3g} ms: no full ripple)"
    return text

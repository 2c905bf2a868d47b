"""`rcc waveforms DESIGN [--line V] [--load X] [--time 20ms] [--from-dc-point]
[--plot FILE.png] [--csv FILE] [--force]`: start-up and steady-state waveforms
from the time-domain engine."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli import EXIT_FINDING_FAILED, app, fail_input, refuse_overwrite
from rcc.cli.overrides import load_with_overrides, set_option
from rcc.cli.options import LINE_HELP, LOAD_HELP, line_option, load_option, time_option


@app.command()
def waveforms(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    line: Optional[str] = typer.Option(None, "--line", help=LINE_HELP),
    load: Optional[str] = typer.Option(None, "--load", help=LOAD_HELP),
    time: str = typer.Option("20ms", "--time", help="Simulated time from switch-on."),
    from_dc_point: bool = typer.Option(False, "--from-dc-point", help="Start from the DC "
                                       "operating point instead of discharged capacitors."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write stacked waveforms (PNG)."),
    csv: Optional[Path] = typer.Option(None, "--csv", help="Write the traces as CSV."),
    force: bool = typer.Option(False, "--force", help="Overwrite existing output files."),
) -> None:
    """Simulate the supply from switch-on: collector voltage, primary, base and
    limiter currents, feedback winding and output voltage.

    Exit code 0 when the run completes, 1 when the engine stops on an event
    storm or an inconsistent circuit, 2 on bad input.
    """
    design = load_with_overrides(design_file, settings)
    from rcc.cycle import reference_temperature
    from rcc.mains import bus_voltage as no_load_bus

    try:
        line_voltage = line_option(design, line)
        load_value = load_option(design, load)
        duration = time_option(time)
    except ValueError as error:
        raise fail_input(str(error)) from None
    # the bus is held at its no-load value: the rectified peak for AC input
    bus_voltage = float(no_load_bus(design, line_voltage))
    if bus_voltage <= 0:
        raise fail_input(f"--line {line!r}: the bus would be {bus_voltage:.3g} V after the "
                         "bridge drop; expected a higher line voltage")
    if plot is not None and plot.suffix.lower() != ".png":
        raise fail_input(f"--plot {str(plot)!r}: expected a .png file name")
    refuse_overwrite(plot, force)
    refuse_overwrite(csv, force)
    from rcc.engine import EngineError, build_circuit, dc_initial_state, simulate

    temperature = reference_temperature(design)
    circuit = build_circuit(design, bus_voltage, load_value, temperature)
    try:
        x0 = dc_initial_state(circuit, from_dc_point=from_dc_point)
        trace = _run_with_progress(circuit, x0, duration, simulate)
    except EngineError as error:
        typer.echo(f"{design.title}\nengine stopped: {error}")
        raise typer.Exit(EXIT_FINDING_FAILED) from None
    typer.echo(format_summary(design.title, line_voltage, bus_voltage, load_value,
                              temperature, trace))
    if csv is not None:
        from rcc.engine.plotting import write_csv

        write_csv(trace, csv)
    if plot is not None:
        import matplotlib.pyplot as plt

        from rcc.engine.plotting import plot_waveforms

        axes = plot_waveforms(trace, title=design.title)
        axes[0, 0].figure.savefig(plot, dpi=110)
        plt.close(axes[0, 0].figure)


def _run_with_progress(circuit, x0, duration, simulate):
    """Run the engine with a progress bar on stderr for long runs."""
    max_step = duration / 20000.0
    if duration < 5e-3:
        return simulate(circuit, x0, duration, max_step=max_step)
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("simulating"), BarColumn(), TextColumn("{task.percentage:>3.0f} %"),
                  TimeElapsedColumn(), transient=True,
                  console=_stderr_console()) as progress:
        task = progress.add_task("run", total=duration)

        def report(t, t_end):
            progress.update(task, completed=t)

        return simulate(circuit, x0, duration, max_step=max_step, progress=report)


def _stderr_console():
    from rich.console import Console

    return Console(stderr=True)


def format_summary(title, line_voltage, bus_voltage, load, temperature, trace) -> str:
    """Plain-text summary of a run."""
    import numpy as np

    turn_ons = trace.turn_on_times()
    out = trace.signals["output_voltage"]
    rows = [
        ("line / bus", f"{line_voltage:.4g} V / {bus_voltage:.4g} V"),
        ("load", load.text()),
        ("temperature", f"{temperature - 273.15:.3g} degC"),
        ("simulated", f"{trace.final_time * 1e3:.4g} ms, {len(trace.event_times)} switching "
                      f"events, {len(turn_ons)} switch turn-ons"),
        ("output at end", f"{out[-1]:.4g} V"),
        ("collector peak", f"{np.max(trace.signals['collector_voltage']):.4g} V"),
        ("primary peak", f"{np.max(trace.signals['primary_current']) * 1e3:.4g} mA"),
    ]
    if len(turn_ons) >= 4:
        periods = np.diff(turn_ons[-4:])
        rows.append(("last cycles", f"{1e-3 / periods.mean():.4g} kHz "
                                    f"(period {periods.mean() * 1e6:.4g} us)"))
    else:
        rows.append(("last cycles", "fewer than 4 turn-ons: not oscillating steadily"))
    width = max(len(name) for name, _ in rows)
    return "\n".join([title] + [f"  {name:<{width}}  {value}" for name, value in rows])

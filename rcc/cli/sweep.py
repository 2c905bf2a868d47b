"""`rcc sweep DESIGN --line ... --load ...`: the cycle model over a grid."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.overrides import load_with_overrides, set_option

from rcc.cli import (EXIT_FINDING_FAILED, EXIT_OK, app, echo_json, fail_input,
                     plan_outputs, write_outputs)
from rcc.cli.outputs import FIGURE_SUFFIXES
from rcc.cli.progress import QUIET_HELP, Status


@app.command(short_help="The cycle model over line, load and temperature ranges.")
def sweep(
    design_file: Path = typer.Argument(..., metavar="DESIGN", help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    line: Optional[str] = typer.Option(None, help="Line range START:STOP:COUNT, e.g. "
                                       "85V:265V:5 (RMS for AC input, DC otherwise). "
                                       "Default: min, nominal, max."),
    load: Optional[str] = typer.Option(None, help="Load range, e.g. 0.05A:0.5A:20, "
                                       "24ohm:240ohm:10, 1W,3W,6W or 10%:100%:5 (of "
                                       "load_max). Default: 10%:100%:10."),
    temperature: Optional[str] = typer.Option(None, help="Temperature or range, e.g. "
                                              "25degC or 0degC:60degC:3."),
    csv_file: Optional[Path] = typer.Option(None, "--csv", help="Write the table as CSV."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write a figure (.png, .pdf "
                                        "or .svg)."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    force: bool = typer.Option(False, "--force", help="Overwrite existing output files."),
    verify: bool = typer.Option(False, "--verify", help="Also solve every point with the "
                                "periodic-steady-state engine and show the differences "
                                "(slow: seconds per point)."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Frequency, output voltage and peak current against load, per line voltage
    (and temperature).

    Ranges are START:STOP:COUNT, a list (100V,230V) or one value, each with its
    unit; loads may be percentages of load_max (10%:100%:10).  Exit code 0, or 1
    when some point of the grid does not run (no oscillation, overload
    collapse, start-up lock-up: listed below the table), 2 on bad input.
    """
    import numpy as np

    from rcc.report import format_points_table
    from rcc.schema import PLAUSIBLE
    from rcc.sweep import parse_load_range, parse_range, plot_sweep, sweep as run, to_csv

    design = load_with_overrides(design_file, settings)
    try:
        lines = (parse_range(line, "voltage", "--line", bounds=(1.0, PLAUSIBLE["voltage"][1]))
                 if line else np.array(design.input.line_voltages))
        loads = parse_load_range(load or "10%:100%:10", "--load",
                                 reference=design.output.load_max)
        temperatures = (parse_range(temperature, "temperature", "--temperature",
                                    bounds=PLAUSIBLE["temperature"])
                        if temperature else None)
    except ValueError as error:
        raise fail_input(str(error)) from None
    plan_outputs({"--csv": (csv_file, None), "--plot": (plot, FIGURE_SUFFIXES)}, force)
    with Status(quiet) as status:
        count = lines.size * np.size(loads.value) * (1 if temperatures is None
                                                     else temperatures.size)
        status.phase(f"cycle model at {count} points")
        try:
            result = run(design, lines, loads, temperatures)
        except ValueError as error:
            raise fail_input(str(error)) from None
        data = result.to_json()
        if verify:
            from rcc.verification import split_loads, verification_rows

            status.phase("engine steady state at every point", total=count)
            data["verification"] = verification_rows(
                design, lines, split_loads(loads), temperatures,
                progress=lambda done, total: status.update(done))
    not_running = _not_running(result)
    import textwrap

    from rcc.engine.bus import BUS_CHOICES, bus_json, steady_bus_choice

    choice = steady_bus_choice(design)
    if json_output:
        data["not_running"] = not_running
        echo_json({**data, **bus_json(choice)})
    else:
        from rcc.report import format_verification

        typer.echo(design.title)
        typer.echo(format_points_table(result.points.records()))
        typer.echo(textwrap.fill(f"bus: {BUS_CHOICES[choice]}", width=92))
        for note in not_running:
            typer.echo(f"does not run: {note}")
        if verify:
            typer.echo("")
            typer.echo(format_verification(data["verification"]))

    def write_csv(files):
        if csv_file is not None:
            files.write_text(csv_file, to_csv(result))

    def write_plot(files):
        if plot is not None:
            import matplotlib.pyplot as plt

            axes = plot_sweep(result, verification=data.get("verification"))
            axes[0].figure.savefig(files.path(plot), dpi=120)
            plt.close(axes[0].figure)

    write_outputs([write_csv, write_plot])
    raise typer.Exit(EXIT_FINDING_FAILED if not_running else EXIT_OK)


def _not_running(result) -> list[str]:
    """One line per grid point where the supply does not run steadily."""
    import numpy as np

    from rcc.design import Load

    p = result.points
    notes = []
    stopped = ~np.asarray(p.running, dtype=bool)
    lockup = np.asarray(p.startup_lockup, dtype=bool)
    for index in zip(*np.nonzero(stopped | lockup)):
        t, j, k = index
        why = "no oscillation" if stopped[index] else "cannot start into this load (lock-up)"
        load = Load(result.load.kind, float(result.load.value[k]))
        notes.append(f"line {result.line_voltage[j]:.4g} V, load {load.text()}, "
                     f"{result.temperature[t] - 273.15:.0f} degC: {why}")
    return notes

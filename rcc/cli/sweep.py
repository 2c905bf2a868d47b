"""`rcc sweep DESIGN --line ... --load ...`: the cycle model over a grid."""

from __future__ import annotations

import json
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli import app, fail_input, refuse_overwrite
from rcc.cli.overrides import load_with_overrides, set_option


@app.command()
def sweep(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    line: Optional[str] = typer.Option(None, help="Line range START:STOP:COUNT, e.g. "
                                       "85V:265V:5 (RMS for AC input, DC otherwise). "
                                       "Default: min, nominal, max."),
    load: Optional[str] = typer.Option(None, help="Load range, e.g. 0.05A:0.5A:20, "
                                       "24ohm:240ohm:10 or 1W:6W:6. Default: 10 % to 100 % "
                                       "of load_max in 10 steps."),
    temperature: Optional[str] = typer.Option(None, help="Temperature or range, e.g. "
                                              "25degC or 0degC:60degC:3."),
    csv_file: Optional[Path] = typer.Option(None, "--csv", help="Write the table as CSV."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write a figure (PNG)."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    force: bool = typer.Option(False, "--force", help="Overwrite existing output files."),
    verify: bool = typer.Option(False, "--verify", help="Also solve every point with the "
                                "periodic-steady-state engine and show the differences "
                                "(slow: seconds per point)."),
) -> None:
    """Frequency, output voltage and peak current against load, per line voltage."""
    import numpy as np

    from rcc.design import Load
    from rcc.report import format_points_table
    from rcc.sweep import parse_load_range, parse_range, plot_sweep, sweep as run, to_csv

    design = load_with_overrides(design_file, settings)
    refuse_overwrite(csv_file, force)
    refuse_overwrite(plot, force)
    try:
        lines = (parse_range(line, "voltage", "--line") if line
                 else np.array(design.input.line_voltages))
        if load:
            loads = parse_load_range(load)
        else:
            top = design.output.load_max
            loads = Load(top.kind, top.value * np.linspace(0.1, 1.0, 10)
                         if top.kind != "resistance" else top.value / np.linspace(0.1, 1.0, 10))
        temperatures = (parse_range(temperature, "temperature", "--temperature")
                        if temperature else None)
    except ValueError as error:
        raise fail_input(str(error)) from None
    if np.any(lines <= 0):
        raise fail_input(f"--line {line!r}: expected positive voltages")
    result = run(design, lines, loads, temperatures)
    data = result.to_json()
    if verify:
        from rcc.verification import split_loads, verification_rows

        data["verification"] = verification_rows(design, lines, split_loads(loads),
                                                 temperatures)
    if json_output:
        typer.echo(json.dumps(data, indent=2))
    else:
        from rcc.report import format_verification

        typer.echo(design.title)
        typer.echo(format_points_table(result.points.records()))
        if verify:
            typer.echo("")
            typer.echo(format_verification(data["verification"]))
    if csv_file is not None:
        csv_file.write_text(to_csv(result), encoding="utf-8")
    if plot is not None:
        import matplotlib.pyplot as plt

        axes = plot_sweep(result)
        axes[0].figure.savefig(plot, dpi=120)
        plt.close(axes[0].figure)

"""`rcc check DESIGN [--json]`: operating points, stresses and findings."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.overrides import load_with_overrides, set_option

from rcc.cli.progress import QUIET_HELP, Status
from rcc.cli import EXIT_FINDING_FAILED, EXIT_OK, app, echo_json, fail_input


@app.command(short_help="Operating points, worst-case stresses and findings.")
def check(
    design_file: Path = typer.Argument(..., metavar="DESIGN", help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    verify: bool = typer.Option(False, "--verify", help="Also solve every reported point "
                                "with the periodic-steady-state engine and show the "
                                "differences (slow: seconds per point)."),
    engine_budget: str = typer.Option(
        "20s", "--engine-budget", metavar="TIME",
        help="Engine time for solving the points the cycle model doubts with the "
             "engine from power-on, e.g. 60s, counted at a fixed nominal engine speed "
             "(the same points on every machine); 0s solves none (they stay marked)."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Operating points at min/nominal/max line and load, stresses and findings.

    Exit code 0 when no finding fails, 1 when one does, 2 on bad input.
    """
    from rcc.analysis import full_check
    from rcc.checks import solve_doubtful_points
    from rcc.report import format_check_report

    from rcc.startup import DcPointError

    design = load_with_overrides(design_file, settings)
    budget = _budget_option(engine_budget)
    with Status(quiet) as status:
        try:
            report = full_check(design, startup_engine=True, progress=status)
        except DcPointError as error:
            raise fail_input(f"{design_file}: {error}") from None
        status.phase(f"engine from power-on at the doubtful points ({budget:g} s budget)")
        report = solve_doubtful_points(report, budget)
        data = report.to_json()
        if verify:
            from rcc.verification import verification_rows

            output = design.output
            status.phase("engine steady state at every point", total=9)
            data["verification"] = verification_rows(
                design, design.input.line_voltages,
                [output.load_min, output.load_nominal, output.load_max],
                progress=lambda done, total: status.update(done))
    import textwrap

    from rcc.engine.bus import bus_json, steady_bus_choice

    if json_output:
        echo_json({**data, **bus_json(steady_bus_choice(design))})
    else:
        typer.echo(format_check_report(data))
        typer.echo(textwrap.fill(
            "Bus: the operating points hold it at the bulk-capacitor valley at their own "
            "input power (no line ripple), the start-up stresses at the rectified peak of "
            "the highest line; rcc waveforms shows it with its ripple."
            if design.input.is_ac else "Bus: the DC input.", width=92))
    raise typer.Exit(EXIT_FINDING_FAILED if report.verdict == "fail" else EXIT_OK)


def _budget_option(text: str) -> float:
    """``--engine-budget``: a duration from 0 to 1 h [s]; the unit is required."""
    from rcc.cli.options import _quantity

    try:
        value = _quantity(text, "time", "--engine-budget", "20s")
    except ValueError as error:
        raise fail_input(str(error)) from None
    if not 0 <= value <= 3600:
        raise fail_input(f"--engine-budget {text!r}: expected a duration from 0 s to 1 h, "
                         "such as '20s'")
    return value

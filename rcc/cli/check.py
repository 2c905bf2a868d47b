"""`rcc check DESIGN [--json]`: operating points, stresses and findings."""

from __future__ import annotations

import json
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli import EXIT_FINDING_FAILED, EXIT_OK, app
from rcc.cli.overrides import load_with_overrides, set_option


@app.command()
def check(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    verify: bool = typer.Option(False, "--verify", help="Also solve every reported point "
                                "with the periodic-steady-state engine and show the "
                                "differences (slow: seconds per point)."),
) -> None:
    """Operating points at min/nominal/max line and load, stresses and findings.

    Exit code 0 when no finding fails, 1 when one does, 2 on bad input.
    """
    from rcc.analysis import full_check
    from rcc.report import format_check_report

    design = load_with_overrides(design_file, settings)
    report = full_check(design)
    data = report.to_json()
    if verify:
        from rcc.verification import verification_rows

        output = design.output
        data["verification"] = verification_rows(
            design, design.input.line_voltages,
            [output.load_min, output.load_nominal, output.load_max])
    if json_output:
        typer.echo(json.dumps(data, indent=2))
    else:
        typer.echo(format_check_report(data))
    raise typer.Exit(EXIT_FINDING_FAILED if report.verdict == "fail" else EXIT_OK)

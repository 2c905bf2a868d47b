"""`rcc check DESIGN [--json]`: operating points, stresses and findings."""

from __future__ import annotations

from pathlib import Path

import typer

from rcc.cli import app, load_or_exit


@app.command()
def check(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
) -> None:
    """Operating points at min/nominal/max line and load, stresses and findings."""
    design = load_or_exit(design_file)
    typer.echo(design.title)

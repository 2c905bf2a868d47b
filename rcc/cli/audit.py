"""`rcc audit DESIGN --candidates FILE`: check, spread and rank repair or
redesign candidates."""

from __future__ import annotations

import csv
import io
import json
import os
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.progress import QUIET_HELP

from rcc.cli import EXIT_OK, app, fail_input, refuse_overwrite
from rcc.cli.overrides import load_with_overrides, set_option

#: Monte Carlo samples per candidate by default (each sample is a full check).
DEFAULT_SAMPLES = 50


@app.command(short_help="Rank repair or redesign candidates: checks, spreads, reasons.")
def audit(
    design_file: Path = typer.Argument(..., help="TOML design file (the reference)."),
    candidates: Path = typer.Option(..., "--candidates", help="Candidates file "
                                    "([[candidate]] tables with name and [candidate.set])."),
    settings: Optional[List[str]] = set_option(),
    samples: int = typer.Option(DEFAULT_SAMPLES, "--samples", min=0, max=100_000,
                                help="Tolerance-spread samples per candidate (0: no "
                                     "spread, rank by the check alone)."),
    seed: int = typer.Option(1, "--seed", min=0, help="Seed of every spread."),
    workers: int = typer.Option(0, "--workers", min=0, help="Worker processes (0: one "
                                "per CPU)."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    csv_file: Optional[Path] = typer.Option(None, "--csv", help="Write the ranking as CSV."),
    force: bool = typer.Option(False, "--force", help="Overwrite an existing CSV file."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Each candidate gets the full check and its tolerance spread; the ranking
    puts candidates that fail below those that pass, then orders by warnings,
    smallest margin and yield, with the reason for each.

    Exit code 0 when the audit ran, 2 on bad input.
    """
    from rcc.cli.compare import format_comparison
    from rcc.cli.progress_line import Progress
    from rcc.compare import audit as run, load_candidates
    from rcc.design import DesignError

    design = load_with_overrides(design_file, settings)
    refuse_overwrite(csv_file, force)
    try:
        variants = load_candidates(candidates, design)
    except DesignError as error:
        raise fail_input(error.problems) from None
    progress = Progress(f"audit ({len(variants) + 1} designs)", quiet)
    try:
        result = run(design, variants, samples=samples, seed=seed,
                     workers=workers or os.cpu_count() or 1, progress=progress)
    finally:
        progress.close()
    if csv_file is not None:
        csv_file.write_text(ranking_csv(result), encoding="utf-8")
    if json_output:
        typer.echo(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        typer.echo(format_comparison(result.comparison))
        typer.echo(format_ranking(result, samples))
    raise typer.Exit(EXIT_OK)


def format_ranking(result, samples: int) -> str:
    """The ranking with one reason per candidate."""
    spread_text = (f"tolerance spread of {samples} samples each (Wilson 95 % intervals)"
                   if samples else "no tolerance spread (--samples 0)")
    out = [f"Ranking (best first): full check and {spread_text}", ""]
    for candidate in result.ranking:
        out.append(f"  {candidate.rank}. {candidate.variant.name}")
        if candidate.variant.description:
            out.append(f"     {candidate.variant.description}")
        out.append(f"     {candidate.reason}")
    return "\n".join(out) + "\n"


def ranking_csv(result) -> str:
    """One CSV line per candidate: rank, name, verdict, failing, warnings,
    smallest margin, yield and its interval, reason."""
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["rank", "name", "verdict", "failing", "warnings", "smallest_margin",
                     "yield", "yield_low_95", "yield_high_95", "unverified_samples",
                     "reason"])
    for c in result.ranking:
        p = c.spread.pass_yield if c.spread is not None else None
        low, high = p.interval_95 if p is not None else ("", "")
        writer.writerow([c.rank, c.variant.name, c.evaluation.verdict,
                         " ".join(c.evaluation.failing), " ".join(c.evaluation.warning),
                         f"{c.evaluation.smallest_margin:.6g}",
                         "" if p is None else f"{p.fraction:.6g}", low, high,
                         "" if c.spread is None else c.spread.unverified_samples, c.reason])
    return buffer.getvalue()

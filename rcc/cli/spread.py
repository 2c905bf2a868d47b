"""`rcc spread DESIGN`: Monte Carlo yield, worst case (corners, RSS) and
sensitivities over the design's `[tolerances]`."""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.progress import QUIET_HELP

from rcc.cli import EXIT_OK, app, fail_input, refuse_overwrite
from rcc.cli.overrides import load_with_overrides, set_option

#: Default sample count: 10,000 is the aim once the check is vectorized; at about
#: half a second per full check today, 1,000 samples take minutes.
DEFAULT_SAMPLES = 1000


@app.command(short_help="Tolerance spread: yield, worst case, sensitivities.")
def spread(
    design_file: Path = typer.Argument(..., help="TOML design file with a tolerances "
                                       "section (without one only hFE spreads)."),
    settings: Optional[List[str]] = set_option(),
    samples: int = typer.Option(DEFAULT_SAMPLES, "--samples", min=1, max=1_000_000,
                                help="Monte Carlo samples."),
    seed: int = typer.Option(1, "--seed", min=0, help="Seed: the same seed gives the "
                             "same samples and results."),
    workers: int = typer.Option(0, "--workers", min=0, help="Worker processes "
                                "(0: one per CPU); results do not depend on it."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write histograms and "
                                        "sensitivities (PNG)."),
    force: bool = typer.Option(False, "--force", help="Overwrite an existing plot file."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Tolerance spread: yield with its 95 % Wilson interval, fail fraction per
    finding, percentiles, worst case by corners and RSS beside the worst sample,
    and normalized sensitivities.

    Exit code 0 when the study ran (read the yield), 2 on bad input.
    """
    from rcc.cli.progress_line import Progress
    from rcc.spread import parameters_of, plot_spread
    from rcc.spread import spread as run

    design = load_with_overrides(design_file, settings)
    refuse_overwrite(plot, force)
    if plot is not None and plot.suffix.lower() != ".png":
        raise fail_input(f"--plot {str(plot)!r}: expected a .png file name")
    if plot is not None and not plot.parent.exists():
        raise fail_input(f"--plot {str(plot)!r}: folder {plot.parent} does not exist")
    workers = workers or os.cpu_count() or 1
    progress = Progress(f"spread ({len(parameters_of(design))} parameters)", quiet)
    try:
        result = run(design, samples=samples, seed=seed, workers=workers, progress=progress)
    finally:
        progress.close()
    if json_output:
        typer.echo(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        typer.echo(format_spread(result))
    if plot is not None:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        axes = plot_spread(result)
        axes[0][0].figure.savefig(plot, dpi=110)
        plt.close(axes[0][0].figure)
        if not json_output:
            typer.echo(f"wrote {plot}")
    raise typer.Exit(EXIT_OK)


def _percent(proportion) -> str:
    if proportion.fraction is None:
        return "n/a (no samples)"
    low, high = proportion.interval_95
    return (f"{100 * proportion.fraction:.1f} % ({proportion.count}/{proportion.trials}; "
            f"95 % Wilson interval {100 * low:.1f} to {100 * high:.1f} %)")


def format_spread(result) -> str:
    """Plain-text report of a :class:`rcc.spread.SpreadResult`."""
    from rcc.report import format_table
    from rcc.units import format_si

    def si(value, unit):
        if value is None:
            return "n/a"
        return format_si(value, unit, 4) if unit else f"{value:.4g}"

    out = [result.title, "=" * len(result.title), "",
           f"Tolerance spread: {result.samples} samples, seed {result.seed}, "
           f"{result.workers} worker(s). Each sample is one built unit, checked over the "
           "whole line, load and temperature range (the full check).", "",
           "Varied:"]
    for p in result.parameters:
        out.append(f"    {p.key:40s} {si(p.low, p.unit)} .. {si(p.high, p.unit)} "
                   f"({p.distribution}{', 3 sigma at the edges' if p.distribution != 'uniform' else ''})")
    out += ["", f"Yield (no failing finding), all samples: {_percent(result.pass_yield)}"]
    if result.unverified_samples:
        from rcc.margins import describe_doubt

        out += [f"UNVERIFIED: {result.unverified_samples} of {result.samples} samples, where "
                "the cycle model doubts a point the check rests on (not solved by the "
                "time-domain engine; confirm with `rcc check` or `rcc waveforms`), "
                "samples per doubt:"]
        width = max(len(reason) for reason in result.unverified)
        out += [f"    {reason:{width}s} {count:6d}  {describe_doubt(reason)}"
                for reason, count in result.unverified.items()]
        out += [f"Yield over the verified samples only: {_percent(result.verified_yield)}",
                f"Yield counting unverified samples as failing: "
                f"{_percent(result.verified_pass)}"]
    if result.errors:
        out.append(f"{result.errors} samples raised a model error and count as failing.")
    out += ["", "Findings (fraction of samples; 95 % Wilson interval)", ""]
    rows = [[f.code, f"{100 * f.fail.fraction:.1f} %",
             f"{100 * f.fail.interval_95[0]:.1f}-{100 * f.fail.interval_95[1]:.1f} %",
             f"{100 * f.warn.fraction:.1f} %"] for f in result.findings]
    out += [format_table(["finding", "fails", "interval", "warns"], rows) if rows
            else "    none in any sample", ""]
    out += ["Quantities over the samples", ""]
    out += [format_table(["quantity", "p01", "p50", "p99", "undefined"], [
        [q.name, si(q.p01, q.unit), si(q.p50, q.unit), si(q.p99, q.unit),
         str(q.undefined) if q.undefined else ""] for q in result.quantities]), ""]
    out += [f"Worst case: extreme-value analysis over {result.corner_method} "
            f"({result.corners_evaluated} evaluated), root-sum-square (3 sigma) and the "
            "worst Monte Carlo sample (methods after ECSS-Q-HB-30-01A)", ""]
    out += [format_table(["quantity", "extreme", "nominal", "corners", "RSS", "worst sample"], [
        [w.quantity, w.extreme, si(w.nominal, w.unit),
         si(w.value, w.unit) if w.value is not None or not w.corner else "no start",
         si(w.rss, w.unit), si(w.monte_carlo, w.unit)] for w in result.worst_case]), ""]
    out.append("Corners giving each extreme (low/high edge of each band):")
    for w in result.worst_case:
        edges = []
        for p in result.parameters:
            if p.key in w.corner:
                edges.append(f"{p.key} {'high' if w.corner[p.key] == p.high else 'low'}")
        out.append(f"    {w.quantity} {w.extreme}: " + ", ".join(edges))
    out += ["", "Sensitivities (normalized, (dQ/Q)/(dp/p); the three largest per quantity)", ""]
    for name in dict.fromkeys(s.quantity for s in result.sensitivities):
        top = [s for s in result.sensitivities if s.quantity == name][:3]
        out.append(f"    {name:24s} " + ", ".join(f"{s.parameter} {s.value:+.3g}" for s in top))
    return "\n".join(out).rstrip() + "\n"

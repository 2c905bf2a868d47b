"""`rcc cycle DESIGN [--line V] [--load X] [--json] [--plot FILE.png]`: the
periodic steady state of the free-running oscillation and its stability."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli import EXIT_FINDING_FAILED, EXIT_OK, app, fail_input, refuse_overwrite
from rcc.cli.overrides import load_with_overrides, set_option
from rcc.cli.options import LINE_HELP, LOAD_HELP, line_option, load_option


@app.command()
def cycle(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    line: Optional[str] = typer.Option(None, "--line", help=LINE_HELP),
    load: Optional[str] = typer.Option(None, "--load", help=LOAD_HELP),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write the one-period "
                                        "waveforms (PNG)."),
    force: bool = typer.Option(False, "--force", help="Overwrite an existing plot file."),
) -> None:
    """Periodic steady state by Newton's method on the turn-on Poincaré map,
    with Floquet multipliers (cycle stability).

    Exit code 0 for a converged stable cycle, 1 when the cycle is unstable,
    not converged or the supply does not oscillate, 2 on bad input.
    """
    from rcc.engine.pss import (PeriodicSteadyStateError, periodic_steady_state,
                                plot_periodic_steady_state)

    design = load_with_overrides(design_file, settings)
    refuse_overwrite(plot, force)
    if plot is not None and plot.suffix.lower() != ".png":
        raise fail_input(f"--plot {str(plot)!r}: expected a .png file name")
    try:
        line_voltage = line_option(design, line)
        load_value = load_option(design, load)
    except ValueError as error:
        raise fail_input(str(error)) from None
    try:
        result = periodic_steady_state(design, line_voltage, load_value)
    except PeriodicSteadyStateError as error:
        if json_output:
            typer.echo(json.dumps({"error": str(error), "stable": False}, indent=2))
        else:
            typer.echo(f"{design.title}\nno periodic steady state: {error}")
        raise typer.Exit(EXIT_FINDING_FAILED) from None
    if json_output:
        typer.echo(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        typer.echo(format_cycle(design.title, result))
    if plot is not None:
        import matplotlib.pyplot as plt

        axes = plot_periodic_steady_state(result)
        axes[0].figure.savefig(plot, dpi=120)
        plt.close(axes[0].figure)
    ok = result.converged and result.stable
    raise typer.Exit(EXIT_OK if ok else EXIT_FINDING_FAILED)


def format_cycle(title: str, result) -> str:
    """Plain-text report of a periodic steady state."""
    rows = [
        ("line", f"{result.line_voltage:.4g} V"),
        ("bus", f"{result.bus_voltage:.4g} V"),
        ("load", result.load.text()),
        ("frequency", f"{result.frequency / 1e3:.5g} kHz"),
        ("period", f"{result.period * 1e6:.5g} us"),
        ("on-time", f"{result.on_time * 1e6:.5g} us"),
        ("off-time", f"{result.off_time * 1e6:.5g} us"),
        ("peak current", f"{result.peak_current * 1e3:.5g} mA"),
        ("output", f"{result.output_voltage:.5g} V"),
        ("output ripple", f"{result.output_ripple * 1e3:.4g} mV p-p"),
        ("switch peak", f"{result.switch_peak_voltage:.5g} V"),
        ("method", f"{result.method}, {result.iterations} iterations, "
                   f"residual {result.residual:.2g}"),
        ("stable", "yes" if result.stable else "NO"),
        ("power", f"{result.power.input:.4g} W in, {result.power.output:.4g} W out, "
                  f"{result.power.loss:.4g} W lost"
                  + ("" if abs(result.power.stored) <= 0.01 * abs(result.power.input)
                     else f", {-result.power.stored:.4g} W from stored energy "
                          "(this cycle is not periodic)")),
    ]
    lines = [title]
    width = max(len(name) for name, _ in rows)
    lines += [f"  {name:<{width}}  {value}" for name, value in rows]
    lines.append("  Floquet multipliers (|m|, angle):")
    for m in result.multipliers[:6]:
        lines.append(f"    {abs(m):.6f}  {math.degrees(math.atan2(m.imag, m.real)):+.1f} deg")
    shown = [(name, watts) for name, watts in result.power.losses.items()
             if watts >= 0.01 * result.power.loss]
    lines.append("  losses (1 % of the total and above): " + ", ".join(
        f"{name.replace('_', ' ')} {watts * 1e3:.3g} mW" for name, watts in shown))
    lines.append(f"  events: {' '.join(result.event_sequence)}")
    for flag in result.flags:
        lines.append(f"  note: {flag}")
    return "\n".join(lines)

"""`rcc cycle DESIGN [--line V] [--load X] [--json] [--plot FILE.png]`: the
periodic steady state of the free-running oscillation and its stability."""

from __future__ import annotations

import math
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.overrides import load_with_overrides, set_option

from rcc.cli import (EXIT_FINDING_FAILED, EXIT_OK, app, echo_json, fail_input,
                     plan_outputs, write_outputs)
from rcc.cli.outputs import FIGURE_SUFFIXES
from rcc.cli.progress import QUIET_HELP, Status
from rcc.cli.options import (HFE_HELP, LINE_HELP, LOAD_HELP, TEMPERATURE_HELP, hfe_option,
                             line_option, load_option, temperature_option)


@app.command(short_help="The periodic steady state and its stability (engine).")
def cycle(
    design_file: Path = typer.Argument(..., metavar="DESIGN", help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    line: Optional[str] = typer.Option(None, "--line", help=LINE_HELP),
    load: Optional[str] = typer.Option(None, "--load", help=LOAD_HELP),
    temperature: Optional[str] = typer.Option(None, "--temperature", help=TEMPERATURE_HELP),
    hfe: Optional[str] = typer.Option(None, "--hfe", help=HFE_HELP),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write the one-period "
                                        "waveforms (.png, .pdf or .svg)."),
    force: bool = typer.Option(False, "--force", help="Overwrite an existing plot file."),
    verbose: bool = typer.Option(False, "--verbose", help="Also list the switching events "
                                 "of the cycle (engine device states)."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Periodic steady state by Newton's method on the turn-on Poincaré map,
    with Floquet multipliers (cycle stability).

    Exit code 0 for a converged stable cycle, 1 when the cycle is unstable,
    not converged or the supply does not oscillate, 2 on bad input.
    """
    from rcc.engine.pss import (PeriodicSteadyStateError, periodic_steady_state,
                                plot_periodic_steady_state)

    design = load_with_overrides(design_file, settings)
    try:
        line_voltage = line_option(design, line)
        load_value = load_option(design, load)
        temperature_value = temperature_option(design, temperature)
        gain = hfe_option(design, hfe)
    except ValueError as error:
        raise fail_input(str(error)) from None
    plan_outputs({"--plot": (plot, FIGURE_SUFFIXES)}, force)
    try:
        with Status(quiet) as status:
            result = periodic_steady_state(design, line_voltage, load_value,
                                           temperature_value, gain, progress=status)
    except PeriodicSteadyStateError as error:
        if json_output:
            echo_json({"error": str(error), "stable": False})
        else:
            typer.echo(f"{design.title}\nno periodic steady state: {error}")
        raise typer.Exit(EXIT_FINDING_FAILED) from None
    from rcc.engine.bus import bus_json, steady_bus_choice

    if json_output:
        echo_json({**result.to_json(), **bus_json(steady_bus_choice(design))})
    else:
        typer.echo(format_cycle(design.title, result, verbose=verbose,
                                is_ac=design.input.is_ac))
    if plot is not None:
        def write_plot(files):
            import matplotlib.pyplot as plt

            from rcc.stress import rating_basis

            basis, volts = rating_basis(design.switch)
            derating = design.limits.voltage_derating
            axes = plot_periodic_steady_state(result, rating=(
                volts * derating, f"{derating:.0%} of {basis.upper()} {volts:.0f} V"),
                bus=(f"bus held at {result.bus_voltage:.4g} V (bulk valley)"
                     if design.input.is_ac else None))
            axes[0].figure.savefig(files.path(plot), dpi=120)
            plt.close(axes[0].figure)

        write_outputs([write_plot])
    ok = result.converged and result.stable
    raise typer.Exit(EXIT_OK if ok else EXIT_FINDING_FAILED)


def format_cycle(title: str, result, verbose: bool = False, is_ac: bool = True) -> str:
    """Plain-text report of a periodic steady state (the engine's switching
    events only with ``verbose``)."""
    from rcc.engine.plotting import cycle_status, on_time_end

    rows = [
        ("line", f"{result.line_voltage:.4g} V"),
        ("bus", f"{result.bus_voltage:.4g} V" + (" (bulk-capacitor valley at this input "
                                                 "power, as the cycle model)" if is_ac
                                                 else " (DC input)")),
        ("temperature / hFE", f"{result.temperature - 273.15:.3g} degC / {result.hfe:.3g} "
                              "at 25 degC"),
        ("load", result.load.text()),
        ("frequency", f"{result.frequency / 1e3:.5g} kHz"),
        ("period", f"{result.period * 1e6:.5g} us"),
        ("on-time", f"{result.on_time * 1e6:.5g} us (ended by {on_time_end(result)[1]})"),
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
    lines = [title, f"  {cycle_status(result)}"]
    width = max(len(name) for name, _ in rows)
    lines += [f"  {name:<{width}}  {value}" for name, value in rows]
    lines.append("  Floquet multipliers (|m|, angle):")
    for m in result.multipliers[:6]:
        lines.append(f"    {abs(m):.6f}  {math.degrees(math.atan2(m.imag, m.real)):+.1f} deg")
    shown = [(name, watts) for name, watts in result.power.losses.items()
             if watts >= 0.01 * result.power.loss]
    lines.append("  losses (1 % of the total and above): " + ", ".join(
        f"{name.replace('_', ' ')} {watts * 1e3:.3g} mW" for name, watts in shown))
    if verbose:
        lines.append(f"  events: {' '.join(result.event_sequence)}")
    for flag in result.flags:
        lines.append(f"  note: {flag}")
    return "\n".join(lines)

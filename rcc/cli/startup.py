"""`rcc startup DESIGN`: start-up verdict, minimum start-up voltage, start-up
time and findings; optionally the symbolic derivation and a loop-gain plot."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.overrides import load_with_overrides, set_option

from rcc.cli import (EXIT_FINDING_FAILED, EXIT_OK, app, echo_json, fail_input,
                     plan_outputs, write_outputs)
from rcc.cli.outputs import FIGURE_SUFFIXES
from rcc.cli.progress import QUIET_HELP, Status


def _si(value, unit):
    from rcc.units import format_si

    return "n/a" if value is None else format_si(value, unit)


def _text(report, findings) -> str:
    r = report.result
    dc = r.dc
    lines = [
        report.title,
        f"Start-up at the lowest bus {r.bus_voltage:.4g} V, worst corner "
        f"{r.temperature - 273.15:.3g} degC, hFE(25 degC) {r.hfe:.3g}",
        f"  DC point     {dc.region}, Ic {_si(dc.collector_current, 'A')}, "
        f"Ib {_si(dc.base_current, 'A')}, Vbe {dc.base_emitter_voltage:.3f} V, "
        f"limiter {'conducting' if dc.limiter_active else 'off'}",
        "  poles [1/s]  " + ", ".join(
            f"{p.real:.4g}{p.imag:+.4g}j" if p.imag else f"{p.real:.4g}" for p in r.poles),
    ]
    if r.starts:
        lines.append(f"  DC point     unstable: oscillation begins, growth rate "
                     f"{r.growth_rate:.4g} 1/s, frequency {_si(r.growth_frequency, 'Hz')}")
        run = report.into_load
        if run is not None:
            reached = "reaches its operating point" if report.reaches_operating_point \
                else "does NOT reach its operating point"
            settle = "" if run.time_to_regulation is None else \
                f", regulated after {_si(run.time_to_regulation, 's')}"
            lines.append(
                f"  into load    engine from power-on at {run.line_voltage:.4g} V line, "
                f"{run.temperature - 273.15:.3g} degC, hFE(25 degC) {run.hfe:.3g}, "
                f"{run.load.text()}: {run.kind}, output {run.output_voltage:.3g} V of "
                f"{run.expected_output:.3g} V{settle}")
            lines.append(f"  verdict      {'starts' if report.starts else 'does not start'}"
                         f" into its load: it {reached}")
        elif report.start_line is not None:
            lines.append("  verdict      does not start into its load: at the lowest line the "
                         "bulk capacitor cannot carry the full load")
        else:
            lines.append("  verdict      starts (small-signal only: the engine was not run)")
    else:
        lines.append(f"  verdict      stalls, held by: {r.holding_element}")
    from rcc.report import format_start_line

    lines += ["  " + line for line in format_start_line(report.to_json())]
    t = report.start_time
    if t is not None:
        lines.append(f"  start time   {_si(t.total, 's')} (bulk {_si(t.bulk_charge_time, 's')}, "
                     f"base {_si(t.base_charge_time, 's')}, growth "
                     f"{_si(t.growth_time, 's')})")
    d = report.drive
    if d is not None:
        lines.append(f"  drive        end-of-on-time base current {_si(d.base_current_end, 'A')}"
                     f" (needs {_si(d.base_current_needed, 'A')}), ring restart margin "
                     f"{d.restart_margin:.3g} V")
    lines.append("findings:" if findings else "findings: none")
    for f in findings:
        lines.append(f"  {f.severity.upper()} {f.code}: {f.message}")
        if f.advice:
            lines.append(f"       advice: {f.advice}")
    return "\n".join(lines)


@app.command(short_help="Will it start? DC point, poles, start-up voltage and time.")
def startup(
    design_file: Path = typer.Argument(..., metavar="DESIGN", help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    derivation: bool = typer.Option(False, "--derivation",
                                    help="Also print the loop gain and the start condition "
                                         "with the design's numbers, every symbol "
                                         "explained."),
    latex: Path = typer.Option(None, "--latex", help="Write the derivation with the "
                               "design's numbers as a LaTeX document (e.g. startup.tex)."),
    plot: Path = typer.Option(None, "--plot", help="Write a Bode plot of the loop gain "
                                                   "(e.g. loop.png)."),
    force: bool = typer.Option(False, "--force", help="Overwrite the --plot file."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Will it start? DC point, poles, verdict, minimum start-up voltage,
    start-up time, weak-drive and hiccup checks.

    Exit code 0 when no finding fails, 1 when one does, 2 on bad input.
    """
    from rcc.startup import DcPointError, plot_loop_gain, startup_findings, startup_report

    design = load_with_overrides(design_file, settings)
    plan_outputs({"--plot": (plot, FIGURE_SUFFIXES), "--latex": (latex, (".tex",))}, force)
    try:
        with Status(quiet) as status:
            status.phase("start-up analysis: DC point, poles, start-up threshold; then the "
                         "engine from power-on into the load")
            report = startup_report(design, engine=True)
    except DcPointError as error:
        raise fail_input(f"{design_file}: {error}") from None
    findings = startup_findings(design, report)
    text, writers = None, []
    if derivation or latex is not None:
        import shutil

        from rcc.startup.worked_derivation import (derivation_text, latex_document,
                                                   worked_derivation)

        worked = worked_derivation(design, report.result)
        if derivation:
            text = derivation_text(worked, width=shutil.get_terminal_size((92, 24)).columns)
        if latex is not None:
            writers.append(lambda files: files.write_text(latex, latex_document(worked)))
    if plot is not None:
        def write_plot(files):
            import matplotlib

            matplotlib.use("Agg")
            import matplotlib.pyplot as plt

            axes = plot_loop_gain(report.result)
            figure = axes[0].figure if hasattr(axes, "__len__") else axes.figure
            figure.savefig(files.path(plot), dpi=120)
            plt.close(figure)

        writers.append(write_plot)
    write_outputs(writers)
    if json_output:
        data = {"design": report.title, "startup": report.to_json(),
                "findings": [f.to_json() for f in findings]}
        if text is not None:
            data["derivation"] = text
        echo_json(data)
    else:
        if text is not None:
            typer.echo(text)
            typer.echo("")
        typer.echo(_text(report, findings))
        for path in (plot, latex):
            if path is not None:
                typer.echo(f"wrote {path}")
    failed = any(f.severity == "fail" for f in findings)
    raise typer.Exit(EXIT_FINDING_FAILED if failed else EXIT_OK)

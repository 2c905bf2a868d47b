"""`rcc startup DESIGN`: start-up verdict, minimum start-up voltage, start-up
time and findings; optionally the symbolic derivation and a loop-gain plot."""

from __future__ import annotations

import json
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli import EXIT_FINDING_FAILED, EXIT_OK, app, fail_input, refuse_overwrite
from rcc.cli.overrides import load_with_overrides, set_option


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
        lines.append(f"  verdict      starts: growth rate {r.growth_rate:.4g} 1/s, "
                     f"frequency {_si(r.growth_frequency, 'Hz')}")
    else:
        lines.append(f"  verdict      stalls, held by: {r.holding_element}")
    threshold = report.min_start_bus_voltage
    text = "does not start at any bus voltage of the design" if threshold is None \
        else f"{threshold:.4g} V bus"
    if threshold is not None and report.min_start_line_voltage is not None:
        text += f" ({report.min_start_line_voltage:.4g} V RMS line)"
    lines.append(f"  starts from  {text}")
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


@app.command()
def startup(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    derivation: bool = typer.Option(False, "--derivation",
                                    help="Also print the symbolic loop gain and the "
                                         "start condition, every symbol explained."),
    latex: bool = typer.Option(False, "--latex",
                               help="Print the derivation as LaTeX (implies --derivation)."),
    plot: Path = typer.Option(None, "--plot", help="Write a Bode plot of the loop gain "
                                                   "(e.g. loop.png)."),
    force: bool = typer.Option(False, "--force", help="Overwrite the --plot file."),
) -> None:
    """Will it start? DC point, poles, verdict, minimum start-up voltage,
    start-up time, weak-drive and hiccup checks.

    Exit code 0 when no finding fails, 1 when one does, 2 on bad input.
    """
    from rcc.startup import DcPointError, plot_loop_gain, startup_findings, startup_report

    design = load_with_overrides(design_file, settings)
    if plot is not None:
        refuse_overwrite(plot, force)
        if not plot.parent.exists():
            raise fail_input(f"{plot}: folder {plot.parent} does not exist")
        if plot.suffix.lower() not in (".png", ".pdf", ".svg"):
            raise fail_input(f"{plot}: expected a .png, .pdf or .svg file name")
    try:
        report = startup_report(design)
    except DcPointError as error:
        raise fail_input(f"{design_file}: {error}") from None
    findings = startup_findings(design, report)
    text = None
    if derivation or latex:
        from rcc.startup.symbolic import derivation_text

        text = derivation_text(latex=latex)
    if plot is not None:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        ax = plot_loop_gain(report.result)
        ax.figure.tight_layout()
        ax.figure.savefig(plot, dpi=120)
        plt.close(ax.figure)
    if json_output:
        data = {"design": report.title, "startup": report.to_json(),
                "findings": [f.to_json() for f in findings]}
        if text is not None:
            data["derivation"] = text
        typer.echo(json.dumps(data, indent=2))
    else:
        if text is not None:
            typer.echo(text)
            typer.echo("")
        typer.echo(_text(report, findings))
        if plot is not None:
            typer.echo(f"wrote {plot}")
    failed = any(f.severity == "fail" for f in findings)
    raise typer.Exit(EXIT_FINDING_FAILED if failed else EXIT_OK)

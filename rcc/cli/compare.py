"""`rcc compare DESIGN [DESIGN ...]`: designs or variants side by side."""

from __future__ import annotations

import json
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli import EXIT_OK, app, fail_input
from rcc.cli.overrides import load_with_overrides, parse_settings, set_option, split_variant
from rcc.cli.progress import QUIET_HELP, Status


@app.command(short_help="Designs or variants side by side: margins, findings, stresses.")
def compare(
    design_files: List[Path] = typer.Argument(..., help="TOML design files; the first "
                                              "is the reference."),
    settings: Optional[List[str]] = set_option(),
    set_each: Optional[List[str]] = typer.Option(
        None, "--set-each", metavar="KEY=VALUE[,KEY=VALUE]",
        help="A variant of the first design with these overrides, e.g. --set-each "
             "'switch.hfe_min=10,switch.vceo=450 V'. Repeatable: one variant each."),
    candidates: Optional[Path] = typer.Option(None, "--candidates", help="Candidates "
                                              "file: its candidates become variants of "
                                              "the first design."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """Verdicts, finding margins, start-up, stresses and operating points side by
    side; per row the best design and every design worse than the first.

    Exit code 0 when the comparison ran, 2 on bad input.
    """
    from rcc.compare import Variant, compare as run, load_candidates, variants_from_settings
    from rcc.design import DesignError

    designs = [load_with_overrides(path, settings) for path in design_files]
    variants = [Variant(path.stem, design, {}) for path, design in zip(design_files, designs)]
    try:
        if set_each:
            variants += variants_from_settings(
                designs[0], [parse_settings(split_variant(text)) for text in set_each])
        if candidates is not None:
            variants += load_candidates(candidates, designs[0])
    except ValueError as error:  # DesignError is a ValueError
        raise fail_input(error.problems if isinstance(error, DesignError)
                         else str(error)) from None
    if len(variants) < 2:
        raise fail_input("compare: expected two or more designs, or one design with "
                         "--set-each or --candidates")
    from rcc.margins import evaluate

    evaluations = []
    with Status(quiet) as status:
        for number, variant in enumerate(variants):
            status(f"full check of {variant.name} ({number + 1} of {len(variants)})",
                   number, len(variants))
            evaluations.append(evaluate(variant.design, keep_report=True))
    result = run(variants, evaluations)
    if json_output:
        typer.echo(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        typer.echo(format_comparison(result))
    raise typer.Exit(EXIT_OK)


def _cell(row, value) -> str:
    from rcc.units import format_si

    if row.kind == "verdict":
        return value.upper()
    if row.kind == "finding":
        if value is None:
            return "-"
        severity, margin = value
        return severity + ("" if margin is None else f" {margin:+.1%}")
    if value is None:
        return "n/a" if row.kind != "startup" else "no start"
    if row.kind == "margin":
        return f"{value:+.1%}"
    return format_si(value, row.unit, 4)


def format_comparison(result, names=None) -> str:
    """Plain-text side-by-side table of a :class:`rcc.compare.Comparison`."""
    from rcc.report import format_table
    from rcc.units import format_si

    names = names or [v.name for v in result.variants]
    out = ["Comparison (the first design is the reference)", ""]
    for i, variant in enumerate(result.variants):
        changes = ", ".join(f"{k}={v}" for k, v in variant.overrides.items())
        text = variant.design.title if not changes else (
            changes if changes == variant.name else f"{changes}")
        out.append(f"  [{i}] {variant.name}" + ("" if text == variant.name else f": {text}"))
    out += ["", "* best in its row; ! worse than the reference. Margins are relative "
            "(positive passes); finding cells give severity and how far beyond the limit.",
            ""]
    rows = []
    for row in result.rows:
        cells = []
        for i, value in enumerate(row.values):
            mark = "*" if i in row.best and len(set(map(str, row.values))) > 1 else " "
            if i and any(w.design == names[i] and w.quantity == row.quantity
                         for w in result.worse):
                mark = "!"
            cells.append(_cell(row, value) + mark)
        label = {"finding": f"finding {row.quantity}", "margin": f"margin {row.quantity}"
                 }.get(row.kind, row.quantity)
        rows.append([label] + cells)
    out += [format_table(["row"] + [f"[{i}]" for i in range(len(names))], rows), ""]
    out += ["Operating points on the reference's line x load grid: frequency / output / "
            "peak current", ""]
    grid_rows = []
    for index, point in enumerate(result.grid[0]):
        row = [format_si(point["line_v"], "V", 3), format_si(point["load_a"], "A", 3)]
        for points in result.grid:
            p = points[index]
            row.append(f"{format_si(p['frequency_hz'], 'Hz', 3)} / "
                       f"{format_si(p['output_v'], 'V', 3)} / "
                       f"{format_si(p['peak_current_a'], 'A', 3)} {p['mode']}")
        grid_rows.append(row)
    out += [format_table(["line", "load"] + [f"[{i}]" for i in range(len(names))],
                         grid_rows), ""]
    reference = result.variants[0].design.input
    for i, variant in enumerate(result.variants[1:], 1):
        own = variant.design.input
        if (own.is_ac, own.line_voltages) != (reference.is_ac, reference.line_voltages):
            kind = "RMS" if own.is_ac else "DC"
            out.append(f"Note: [{i}] is specified for {own.line_voltages[0]:.4g} to "
                       f"{own.line_voltages[2]:.4g} V {kind}; the grid above runs it at the "
                       "reference's lines and loads.")
    if len(out) and out[-1].startswith("Note"):
        out.append("")
    if result.worse:
        out += ["Worse than the reference:"]
        for name in dict.fromkeys(w.design for w in result.worse):
            out.append(f"  {name}: " + ", ".join(w.quantity for w in result.worse
                                                 if w.design == name))
    unverified = [(v.name, e.unverified) for v, e in zip(result.variants, result.evaluations)
                  if e.unverified]
    if unverified:
        out += ["", "Fast model not trusted at some points (check with `rcc cycle`): "
                + "; ".join(f"{name} ({', '.join(r)})" for name, r in unverified)]
    from rcc.checks import SAFETY_CAUTION

    out += ["", SAFETY_CAUTION]
    return "\n".join(out).rstrip() + "\n"

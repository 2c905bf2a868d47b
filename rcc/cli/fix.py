"""`rcc fix DESIGN`: preferred-value changes that clear failing and warning
findings, each verified by the full check."""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import List, Optional

import typer

from rcc.cli.progress import QUIET_HELP

from rcc.cli import EXIT_OK, app
from rcc.cli.overrides import load_with_overrides, set_option


@app.command(short_help="Smallest preferred-value changes that clear failing findings.")
def fix(
    design_file: Path = typer.Argument(..., help="TOML design file."),
    settings: Optional[List[str]] = set_option(),
    workers: int = typer.Option(0, "--workers", min=0, help="Worker processes (0: one "
                                "per CPU)."),
    json_output: bool = typer.Option(False, "--json", help="Print one JSON object."),
    engine: bool = typer.Option(True, "--engine/--no-engine", help="Check the design and "
                                "its best changes with the engine from power-on (start "
                                "into full load, start-up stresses; seconds each)."),
    quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
) -> None:
    """For each failing or warning finding, the smallest change of each adjustable
    value (start-up, drive and base-emitter resistors, drive capacitor, sense
    resistor, zener, clamp, feedback turns) that clears it, as an IEC 60063
    preferred value, checked in full; and the best single change and pair, with
    what the engine from power-on adds to the design and to them.

    Exit code 0 when the search ran, 2 on bad input.
    """
    from rcc.cli.progress_line import Progress
    from dataclasses import replace

    from rcc.fix import engine_checks, suggest_fixes

    design = load_with_overrides(design_file, settings)
    progress = Progress("fix (full check per value)", quiet)
    try:
        result = suggest_fixes(design, workers=workers or os.cpu_count() or 1,
                               progress=progress)
        if engine:
            progress.close()
            progress = Progress("fix: engine from power-on on the design and its best "
                                "changes", quiet)
            result = replace(result, engine=engine_checks(design, result, progress))
    finally:
        progress.close()
    if json_output:
        typer.echo(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        typer.echo(format_fixes(result, design_file))
    raise typer.Exit(EXIT_OK)


def _set_args(suggestion) -> str:
    return " ".join(f"--set {key}='{text}'" for key, text in suggestion.texts.items())


def _effect(suggestion, original) -> str:
    e = suggestion.evaluation
    new_fail = [c for c in e.failing if c not in original.failing]
    new_warn = [c for c in e.warning if c not in original.warning and c not in original.failing]
    parts = [f"verdict {e.verdict.upper()}"]
    if e.failing:
        parts.append("still fails " + ", ".join(c for c in e.failing if c not in new_fail)
                     if any(c not in new_fail for c in e.failing) else "")
    if new_fail:
        parts.append("NEW FAIL " + ", ".join(new_fail))
    if new_warn:
        parts.append("new warning " + ", ".join(new_warn))
    parts.append(f"smallest margin {e.smallest_margin:+.1%}")
    return "; ".join(p for p in parts if p)


def _stopped(evaluation) -> bool:
    from rcc.fix import NOT_RUNNING

    return any(code in NOT_RUNNING for code in evaluation.failing)


def format_fixes(result, design_file) -> str:
    """Plain-text list of suggestions, grouped by finding."""
    original = result.original
    out = [result.title, "=" * len(result.title), "",
           f"Design verdict {original.verdict.upper()}; smallest margin "
           f"{original.smallest_margin:+.1%}. {result.evaluations} full checks. Values are "
           "IEC 60063 preferred values (E24 resistors and voltages, E12 capacitors) or "
           "whole turns; each suggestion was checked in full.", ""]
    findings = list(dict.fromkeys(s.finding for s in result.suggestions)) + list(result.unfixed)
    for code in findings:
        severity = original.severity_of(code)
        out.append(f"[{severity.upper()}] {code}")
        for s in (s for s in result.suggestions if s.finding == code):
            ((key, text),) = s.texts.items()
            out.append(f"    {key} = {text:10s} ({s.series[key]})  -> {_effect(s, original)}")
        if code in result.unfixed:
            out.append(f"    {result.unfixed[code]}")
        out.append("")
    for label, s in (("Best single change", result.best_single),
                     ("Best pair", result.best_pair)):
        if s is None:
            continue
        changes = ", ".join(f"{k} = {v}" for k, v in s.texts.items())
        better = "improves on the design" if s.verified else "no improvement found"
        if s.verified and _stopped(original) and not _stopped(s.evaluation):
            better = "the supply starts and runs, as the design does not"
        out += [f"{label}: {changes} ({better}) -> {_effect(s, original)}",
                f"    try: rcc check {design_file} {_set_args(s)}", ""]
    if result.engine:
        out.append("With the engine from power-on (start into full load at the worst corner, "
                   "the first cycles at the highest line; the search above does not see "
                   "these):")
        for check in result.engine:
            changes = ", ".join(f"{k} = {v}" for k, v in check.changes.items())
            head = check.label + (f" ({changes})" if changes else "")
            out.append(f"    {head}: verdict {check.verdict.upper()}"
                       + (f", fails {', '.join(check.failing)}" if check.failing else ""))
            for item in check.added:
                value = "" if item["value"] is None else \
                    f" {item['value']:.4g} {item['unit']}".rstrip()
                limit = "" if item["limit"] is None else \
                    f" (limit {item['limit']:.4g} {item['unit']})".replace(" )", ")")
                out.append(f"        engine adds {item['severity'].upper()} {item['code']}"
                           f"{value}{limit}")
        out.append("")
    out.append("The fast model decides these; confirm a chosen change with `rcc check "
               "--verify` or `rcc cycle` before building it.")
    return "\n".join(out).rstrip() + "\n"

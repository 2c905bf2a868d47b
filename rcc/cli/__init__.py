"""Command line: a thin layer over the library.

Each command lives in its own module of this package, parses its options,
calls one library function and prints.  Commands register themselves on
:data:`app` when their module is imported below.
"""

from __future__ import annotations

import sys

import typer

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Analyze self-oscillating (ringing-choke) flyback supplies from a design file.",
)

@app.callback()
def _root() -> None:
    """Analyze self-oscillating (ringing-choke) flyback supplies from a design file."""


#: Exit codes shared by every command.
EXIT_OK, EXIT_FINDING_FAILED, EXIT_BAD_INPUT = 0, 1, 2


def fail_input(lines) -> "typer.Exit":
    """Print bad-input lines to stderr and return the exit to raise (code 2)."""
    for line in [lines] if isinstance(lines, str) else lines:
        typer.echo(line, err=True)
    return typer.Exit(EXIT_BAD_INPUT)


def load_or_exit(path):
    """Load a design file; on any problem print one line each and exit 2."""
    from rcc.design import DesignError, load_design

    try:
        return load_design(path)
    except DesignError as error:
        raise fail_input(error.problems) from None


def refuse_overwrite(path, force: bool) -> None:
    """Exit 2 if ``path`` exists and ``force`` is not set."""
    from pathlib import Path

    if path is not None and Path(path).exists() and not force:
        raise fail_input(f"{path}: exists; use --force to overwrite it")


def main() -> None:  # console-script entry point
    app(prog_name="rcc")


# Command modules register on `app` when imported.
from rcc.cli import check as _check  # noqa: E402,F401
from rcc.cli import sweep as _sweep  # noqa: E402,F401
from rcc.cli import startup as _startup  # noqa: E402,F401
from rcc.cli import cycle as _cycle  # noqa: E402,F401
from rcc.cli import waveforms as _waveforms  # noqa: E402,F401
from rcc.cli import compare as _compare  # noqa: E402,F401
from rcc.cli import audit as _audit  # noqa: E402,F401
from rcc.cli import spread as _spread  # noqa: E402,F401
from rcc.cli import fix as _fix  # noqa: E402,F401

if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

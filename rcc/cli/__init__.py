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
    rich_markup_mode=None,
    help="Analyze self-oscillating (ringing-choke) flyback supplies from a design file.",
)

def _version(value: bool) -> None:
    if value:
        from rcc import __version__

        typer.echo(f"rcc {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(version: bool = typer.Option(False, "--version", is_eager=True, callback=_version,
                                       help="Print the version and exit.")) -> None:
    """Analyze self-oscillating (ringing-choke) flyback supplies from a design file.

    Exit codes of every command: 0 success, 1 a finding fails or the supply does
    not run as asked, 2 bad input (one line per problem on stderr).  Also
    available as `python -m rcc`.
    """


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
    """Exit 2 if ``path`` cannot be written (exists without ``force``, missing or
    read-only folder, a directory); :func:`plan_outputs` checks several at once."""
    plan_outputs({"output": (path, None)}, force)


def plan_outputs(outputs: dict, force: bool) -> None:
    """Check the output paths before computing; exit 2 with one line if one
    cannot be written (see :func:`rcc.cli.outputs.check_outputs`)."""
    from rcc.cli.outputs import OutputError, check_outputs

    try:
        check_outputs(outputs, force)
    except OutputError as error:
        raise fail_input(str(error)) from None


def write_outputs(writers) -> None:
    """Run ``writers`` (callables taking an :class:`rcc.cli.outputs.OutputFiles`)
    and move every file into place together; a write error (full disk, folder
    removed meanwhile) exits 2 with one line and leaves no file behind."""
    from rcc.cli.outputs import OutputFiles

    try:
        with OutputFiles() as files:
            for writer in writers:
                writer(files)
    except OSError as error:
        target = f" {error.filename}" if error.filename else ""
        raise fail_input(f"cannot write{target}: {error.strerror or error}; no output "
                         "file was changed") from None


def echo_json(data) -> None:
    """Print ``data`` as strict JSON (no NaN or Infinity: they become null)."""
    from rcc.cli.outputs import strict_json

    typer.echo(strict_json(data))


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

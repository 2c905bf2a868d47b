"""Progress of long commands on stderr: a spinner with the phase, and a bar
when the amount of work is known.

Shown only when both stdout and stderr are terminals and ``--quiet`` is not
given, so piped or redirected output, CI logs and tests stay clean.  The
display is transient: it disappears when the phase ends.
"""

from __future__ import annotations

import sys
import time

__all__ = ["Status", "QUIET_HELP"]

#: Seconds of a phase before its time left is estimated (earlier steps are
#: often cached or cheaper than the rest) [s].
ESTIMATE_AFTER = 3.0

QUIET_HELP = "No progress display on stderr (it is also off when output is not a terminal)."


def _interactive() -> bool:
    try:
        return sys.stdout.isatty() and sys.stderr.isatty()
    except (AttributeError, ValueError):  # replaced or closed streams
        return False


class Status:
    """Context manager showing what a long command is doing.

    Parameters
    ----------
    quiet : bool
        Show nothing.
    animated : bool
        Redraw from a background thread (the spinner turns while the library
        computes).  False draws only at each update: no thread, for callers
        that fork worker processes.

    Examples
    --------
    >>> with Status(quiet=True) as status:
    ...     status.phase("simulating", total=2.0)
    ...     status.update(1.0)
    """

    def __init__(self, quiet: bool = False, animated: bool = True):
        self.enabled = not quiet and _interactive()
        self.animated = animated
        self._progress = None
        self._task = None
        self._shown = None

    def __enter__(self) -> "Status":
        if self.enabled:
            from rich.console import Console
            from rich.progress import (BarColumn, Progress, SpinnerColumn, TextColumn,
                                       TimeElapsedColumn)

            # a phase of unknown length shows the spinner and the elapsed time
            # only; a known one a bar and its percentage
            self._progress = Progress(
                SpinnerColumn(), TextColumn("{task.description}"),
                BarColumn(bar_width=24),
                TextColumn("{task.fields[percent]}"),
                TimeElapsedColumn(), transient=True, auto_refresh=self.animated,
                console=Console(stderr=True, force_terminal=True))
            self._progress.__enter__()
        return self

    def phase(self, description: str, total: float | None = None) -> None:
        """Start a phase; ``total`` known amount of work, ``None`` for a spinner."""
        if self._progress is None:
            return
        if self._task is not None:
            self._progress.remove_task(self._task)
        self._task = self._progress.add_task(description, total=total, percent="")
        self._started = time.monotonic()

    def update(self, completed: float) -> None:
        """Work done so far in the current phase (same unit as ``total``)."""
        if self._progress is not None and self._task is not None:
            total = self._progress.tasks[-1].total
            text = ""
            if total:
                text = f"{100.0 * completed / total:3.0f} %"
                elapsed = time.monotonic() - self._started
                if 0 < completed < total and elapsed >= ESTIMATE_AFTER:
                    text += f", about {elapsed * (total - completed) / completed:.0f} s left"
            self._progress.update(self._task, completed=completed, percent=text,
                                  refresh=not self.animated)

    def __call__(self, description: str, done: float | None = None,
                 total: float | None = None) -> None:
        """Progress callback of the library (``progress(description, done,
        total)``): a new phase when the description or total changes, else
        an update of the work done."""
        if self._progress is None:
            return
        if self._shown != (description, total):
            self.phase(description, total)
            self._shown = (description, total)
        if done is not None:
            self.update(done)

    def __exit__(self, kind, error, trace) -> bool:
        if self._progress is not None:
            self._progress.__exit__(kind, error, trace)
        return False

"""A progress line on stderr for long runs: shown only when stdout is a terminal
and the run has taken more than :data:`DELAY` seconds; never with ``--quiet``."""

from __future__ import annotations

import sys
import time

__all__ = ["Progress", "DELAY"]

#: Seconds before the progress line appears.
DELAY = 1.5


class Progress:
    """Callable ``progress(done, total)`` that draws ``label [####    ] done/total eta``."""

    def __init__(self, label: str, quiet: bool = False, stream=None):
        self.label = label
        self.stream = stream or sys.stderr
        self.enabled = not quiet and sys.stdout.isatty()
        self.start = time.monotonic()
        self.shown = False

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        elapsed = time.monotonic() - self.start
        if elapsed < DELAY and done < total:
            return
        width = 30
        filled = int(width * done / max(total, 1))
        remaining = elapsed / max(done, 1) * (total - done)
        self.stream.write(f"\r{self.label} [{'#' * filled}{' ' * (width - filled)}] "
                          f"{done}/{total}, {elapsed:.0f} s, about {remaining:.0f} s left ")
        self.stream.flush()
        self.shown = True

    def close(self) -> None:
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()

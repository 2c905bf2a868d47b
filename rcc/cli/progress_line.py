"""Progress of runs with a known number of steps (``audit``, ``spread``,
``fix``): the same display as every other command (:class:`rcc.cli.progress.Status`:
on stderr, only when stdout and stderr are terminals, never with ``--quiet``),
behind the ``progress(done, total)`` callback those library functions take."""

from __future__ import annotations

from rcc.cli.progress import Status

__all__ = ["Progress"]


class Progress:
    """Callable ``progress(done, total)``: a bar with ``label``, the percentage
    and the time left; :meth:`close` removes it.

    Parameters
    ----------
    label : str
        What is running, e.g. ``"spread (5 parameters)"`` [-].
    quiet : bool
        Show nothing [-].
    """

    def __init__(self, label: str, quiet: bool = False):
        self.label = label
        # no redraw thread: spread forks its worker processes while this runs
        self._status = Status(quiet, animated=False).__enter__()
        self.enabled = self._status.enabled

    def __call__(self, done: int, total: int) -> None:
        self._status(self.label, done, total)

    def close(self) -> None:
        """Remove the display (call once, in a ``finally``)."""
        self._status.__exit__(None, None, None)

"""Output files and JSON of the commands: checked before any computing, written
through a temporary file and renamed only when every output of the run is ready.

A command declares its outputs first (:func:`check_outputs`): a missing or
read-only folder, a directory given as a file, the same path given twice, a
missing or wrong suffix or an existing file without ``--force`` ends the run with
exit code 2 and one line, before minutes of computing.  :class:`OutputFiles`
then writes each output to a temporary file beside its target and renames all
of them at the end, so a failure (a full disk, an error in a later step) never
leaves a half-written file or one output without the others.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from pathlib import Path

__all__ = ["check_outputs", "OutputFiles", "strict_json", "OutputError"]

#: Figure formats matplotlib writes without extra packages.
FIGURE_SUFFIXES = (".png", ".pdf", ".svg")


class OutputError(ValueError):
    """An output path cannot be written; the message is one line."""


def check_outputs(outputs: dict, force: bool) -> None:
    """Check every output path before computing.

    Parameters
    ----------
    outputs : dict of str to (Path or None, tuple of str or None)
        ``{"--plot": (path, FIGURE_SUFFIXES), "--csv": (path, None)}``: option name,
        path given (``None``: not requested) and the allowed suffixes (``None``: any).
    force : bool
        Whether an existing file may be replaced.

    Raises
    ------
    OutputError
        The first problem, as ``--option PATH: what is wrong; what to do``.
    """
    seen: dict[Path, str] = {}
    for option, (path, suffixes) in outputs.items():
        if path is None:
            continue
        path = Path(path)
        where = f"{option} {path}"
        if path.is_dir():
            raise OutputError(f"{where}: is a directory; expected a file name")
        if suffixes is not None and path.suffix.lower() not in suffixes:
            raise OutputError(f"{where}: expected a file name ending in "
                              f"{' / '.join(suffixes)}, e.g. {path.stem or 'out'}{suffixes[0]}")
        resolved = path.resolve()
        if resolved in seen:
            raise OutputError(f"{where}: the same file as {seen[resolved]}; give each output "
                              "its own file name")
        seen[resolved] = option
        folder = resolved.parent
        if not folder.is_dir():
            raise OutputError(f"{where}: folder {path.parent} does not exist")
        if not os.access(folder, os.W_OK | os.X_OK):
            raise OutputError(f"{where}: folder {path.parent} is not writable")
        if path.exists() and not force:
            raise OutputError(f"{where}: exists; use --force to overwrite it")


class OutputFiles:
    """Stage output files and move them into place together.

    Use as a context manager: :meth:`path` returns a temporary file beside the
    target (same suffix, so format detection works) to write to; on a normal
    exit every staged file is renamed onto its target, on an exception all are
    removed and the targets stay untouched.
    """

    def __init__(self):
        self._staged: list[tuple[Path, Path]] = []

    def path(self, target) -> Path:
        """A temporary path to write ``target``'s content to."""
        target = Path(target)
        handle, name = tempfile.mkstemp(prefix=f".{target.stem}.", suffix=target.suffix,
                                        dir=target.resolve().parent)
        os.close(handle)
        self._staged.append((Path(name), target))
        return Path(name)

    def write_text(self, target, text: str) -> None:
        """Stage ``text`` for ``target`` (UTF-8)."""
        self.path(target).write_text(text, encoding="utf-8")

    def __enter__(self) -> "OutputFiles":
        return self

    def __exit__(self, kind, error, trace) -> bool:
        if kind is None:
            try:
                for temporary, target in self._staged:
                    os.replace(temporary, target)
            finally:
                self._discard()
            return False
        self._discard()
        return False

    def _discard(self) -> None:
        for temporary, _ in self._staged:
            try:
                temporary.unlink()
            except FileNotFoundError:
                pass
        self._staged.clear()


def _finite(value):
    """Replace non-finite floats by None, recursively (strict JSON has no NaN)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {key: _finite(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(item) for item in value]
    if hasattr(value, "item") and callable(value.item):  # numpy scalars
        return _finite(value.item())
    return value


def strict_json(data) -> str:
    """``data`` as strict JSON (RFC 8259): non-finite numbers become ``null``."""
    return json.dumps(_finite(data), indent=2, allow_nan=False)

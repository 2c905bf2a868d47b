"""Where the engine's compiled kernels are cached, and a check that they are intact.

The time-domain engine compiles its hot loop with numba (``cache=True``).  By
default numba writes the cache beside the source, inside the installed package;
:func:`configure` points it to a per-user cache folder instead (``NUMBA_CACHE_DIR``,
unless the user has set it):

- Linux and others: ``$XDG_CACHE_HOME/rcc/numba`` (default ``~/.cache/rcc/numba``);
- macOS: ``~/Library/Caches/rcc/numba``;
- Windows: ``%LOCALAPPDATA%\\rcc\\Cache\\numba``.

A truncated or garbage cache file makes numba fail to unpickle it or abort the
process while loading its machine code, and it keeps failing until the file is
deleted.  So every process that imports the engine records, at exit, a SHA-256
digest of each of rcc's cache files in a manifest; the next import deletes every
cache file that is missing from the manifest or whose digest differs (written by
a process that crashed, damaged on disk, edited), and numba compiles those
kernels again.  Nothing here is needed for correctness of results: at worst a
kernel is compiled once more.
"""

from __future__ import annotations

import atexit
import hashlib
import json
import os
import sys
import tempfile
from pathlib import Path

__all__ = ["cache_folder", "configure", "verify", "record", "MANIFEST_NAME"]

#: Manifest of digests inside the cache folder.
MANIFEST_NAME = "rcc-cache-manifest.json"
#: rcc's compiled kernels all live in ``rcc/engine/simulate.py``.
_PREFIX = "simulate."
_SUFFIXES = (".nbi", ".nbc")


def cache_folder() -> Path:
    """The per-user folder the engine's kernels are cached in.

    Returns
    -------
    Path
        ``NUMBA_CACHE_DIR`` when set, else the platform's user cache folder
        followed by ``rcc/numba``.
    """
    given = os.environ.get("NUMBA_CACHE_DIR")
    if given:
        return Path(given)
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
        return base / "rcc" / "Cache" / "numba"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Caches" / "rcc" / "numba"
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "rcc" / "numba"


def _cache_files(folder: Path):
    if not folder.is_dir():
        return []
    return sorted(path for path in folder.rglob(f"{_PREFIX}*")
                  if path.suffix in _SUFFIXES and path.is_file())


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _manifest(folder: Path) -> dict:
    try:
        data = json.loads((folder / MANIFEST_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def verify(folder: Path) -> list[Path]:
    """Delete rcc's cache files that the manifest does not vouch for.

    Parameters
    ----------
    folder : Path
        The cache folder.

    Returns
    -------
    list of Path
        The files deleted (numba compiles those kernels again).
    """
    manifest = _manifest(folder)
    removed = []
    for path in _cache_files(folder):
        key = path.relative_to(folder).as_posix()
        try:
            intact = manifest.get(key) == _digest(path)
            if not intact:
                path.unlink()
                removed.append(path)
        except OSError:
            continue
    return removed


def record(folder: Path) -> None:
    """Write the manifest of the cache files present now (atomically).

    Parameters
    ----------
    folder : Path
        The cache folder.
    """
    try:
        entries = {path.relative_to(folder).as_posix(): _digest(path)
                   for path in _cache_files(folder)}
        handle, name = tempfile.mkstemp(prefix=".manifest.", dir=folder)
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            json.dump(entries, stream, indent=0, sort_keys=True)
        os.replace(name, folder / MANIFEST_NAME)
    except OSError:
        pass  # a read-only or vanished cache folder only costs a recompile


def configure() -> Path:
    """Point numba's cache at :func:`cache_folder`, drop damaged files, and
    record the manifest when the process exits.  Call before numba compiles
    (the engine package does it on import).

    Returns
    -------
    Path
        The cache folder.
    """
    folder = cache_folder()
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        return folder  # numba falls back to its own choice
    os.environ.setdefault("NUMBA_CACHE_DIR", str(folder))
    if "numba" in sys.modules:  # imported already: set its configuration directly
        from numba.core import config

        config.CACHE_DIR = str(folder)
    verify(folder)
    atexit.register(record, folder)
    return folder

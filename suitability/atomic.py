"""Atomic file writes: every writer of the package goes through :func:`atomic_write`.

A file killed half-way through writing can still open (GDAL even calls a truncated GeoTIFF a valid COG),
so nothing is ever written under its final name: the content goes to a hidden temporary in the same
folder (same file system, so the rename is atomic) and only a complete file is moved into place with
``os.replace``. The temporary is ``.<name>.tmp-<pid><suffix>``: hidden, marked with the writer's process
id so that :func:`suitability.outputs.remove_leftovers` can tell an abandoned one from one in use, and
ending in the real suffix because GDAL (GeoPackage) picks its driver by it.
"""

from __future__ import annotations

import errno
import os
import shutil
from collections.abc import Callable
from pathlib import Path

from .errors import OutputError

# Less free space than this after a failed write means the disk filled up.
_NEARLY_FULL_BYTES = 8 * 1024 * 1024


def temporary_path(target: str | os.PathLike) -> Path:
    """The hidden temporary name used while ``target`` is written (same folder, same suffix)."""
    target = Path(target)
    return target.with_name(f".{target.name}.tmp-{os.getpid()}{target.suffix}")


def atomic_write(target: str | os.PathLike, write: Callable[[Path], object], *, what: str = "the file") -> Path:
    """Call ``write(temporary)`` and move the temporary onto ``target`` only if it returned normally.

    what: the thing written, for the error message ("the manifest", "the brief"). Any failure removes the
    temporary and raises :class:`~suitability.errors.OutputError` naming ``target`` (with a hint when the
    disk is full); an existing ``target`` is left as it was. Returns ``target`` as a Path.
    """
    target = Path(target)
    temporary = temporary_path(target)
    try:
        write(temporary)
        os.replace(temporary, target)
    except Exception as error:
        temporary.unlink(missing_ok=True)
        if isinstance(error, OutputError):
            raise
        raise OutputError(
            f"{target}: cannot write {what}: {error}{disk_full_hint(error, target.parent)}"
        ) from error
    return target


def write_text_atomic(target: str | os.PathLike, text: str, *, what: str = "the file", sync: bool = False) -> Path:
    """Write UTF-8 ``text`` to ``target`` atomically; ``sync`` flushes it to disk before the rename."""

    def write(path: Path) -> None:
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(text)
            if sync:
                handle.flush()
                os.fsync(handle.fileno())

    return atomic_write(target, write, what=what)


def disk_full_hint(error: BaseException, folder=None) -> str:
    """'; the disk is full ...' when ``error`` (or what caused it) says so, or when ``folder``'s file system
    has almost no free space left (GDAL often reports a full disk only as a failed seek or read); else ''."""
    seen, full = error, False
    while seen is not None and not full:
        text = str(seen).lower()
        full = (isinstance(seen, OSError) and seen.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)) or any(
            word in text for word in ("no space left", "disk full", "free disk space", "file too large", "quota exceeded"))
        seen = seen.__cause__ or seen.__context__
    free = None
    if folder is not None:
        try:
            free = shutil.disk_usage(folder).free
        except OSError:
            pass
    if not full and (free is None or free >= _NEARLY_FULL_BYTES):
        return ""
    left = f" ({free} bytes free on the disk of {folder})" if free is not None else ""
    return (f"; the disk is full (or a file-size or quota limit was reached){left}: free space or choose another "
            "output.folder, then run again (finished scenarios can be kept with --resume)")


__all__ = ["atomic_write", "write_text_atomic", "temporary_path", "disk_full_hint"]

"""Atomic file writes: every writer of the package goes through :func:`atomic_write`.

A file killed half-way through writing can still open (GDAL even calls a truncated GeoTIFF a valid COG),
so nothing is ever written under its final name. The content goes to a private temporary folder made in
the target's folder with :func:`tempfile.mkdtemp` (an unpredictable name, created exclusively, mode 0700,
so nobody can plant a file or a symbolic link inside it), under the target's own name (GDAL picks its
driver by the suffix); only a complete file is moved into place with ``os.replace``, which replaces a
link at the final name instead of following it. The folder's name carries the tool's marker,
``.suitability-tmp-<host>-<pid>-<random>``: :func:`suitability.outputs.remove_leftovers` removes only
such folders, and only when their process no longer exists (see :func:`is_abandoned`).
"""

from __future__ import annotations

import errno
import os
import shutil
import socket
import tempfile
from collections.abc import Callable
from pathlib import Path

from .errors import OutputError

# Less free space than this after a failed write means the disk filled up.
_NEARLY_FULL_BYTES = 8 * 1024 * 1024

#: Name prefixes that mark the tool's own temporary folders (files are only ever written inside them).
TEMPORARY_PREFIX = ".suitability-tmp-"
STAGING_PREFIX = ".suitability-staging-"
MARKED_PREFIXES = (TEMPORARY_PREFIX, STAGING_PREFIX)


def marked_prefix(prefix: str = TEMPORARY_PREFIX) -> str:
    """``prefix`` followed by this host and process id: the start of every temporary name of this process."""
    return f"{prefix}{socket.gethostname()}-{os.getpid()}-"


def make_private_folder(parent: str | os.PathLike, prefix: str = TEMPORARY_PREFIX) -> Path:
    """A new folder in ``parent`` named with the tool's marker and a random part, mode 0700 (``mkdtemp``)."""
    return Path(tempfile.mkdtemp(prefix=marked_prefix(prefix), dir=parent))


def is_abandoned(path: Path) -> bool:
    """True if ``path`` is a real folder (not a link) named with the tool's marker, owned by this user,
    by a process of this host that no longer exists."""
    from .runlock import process_alive

    prefix = next((p for p in MARKED_PREFIXES if path.name.startswith(p)), None)
    if prefix is None:
        return False
    host = socket.gethostname()
    rest = path.name[len(prefix):]
    if not rest.startswith(f"{host}-"):
        return False
    pid_text = rest[len(host) + 1:].split("-", 1)[0]
    if not pid_text.isdigit():
        return False
    try:
        info = os.lstat(path)
    except OSError:
        return False
    import stat

    if not stat.S_ISDIR(info.st_mode) or info.st_uid != os.getuid():
        return False
    return not process_alive(int(pid_text))


def atomic_write(target: str | os.PathLike, write: Callable[[Path], object], *, what: str = "the file") -> Path:
    """Call ``write(temporary)`` and move the temporary onto ``target`` only if it returned normally.

    The temporary is ``<private folder>/<target name>`` (see the module docstring); it does not exist when
    ``write`` is called. what: the thing written, for the error message ("the manifest", "the brief"). Any
    failure removes the private folder and raises :class:`~suitability.errors.OutputError` naming
    ``target`` (with a hint when the disk is full); an existing ``target`` is left as it was. Returns
    ``target`` as a Path.
    """
    target = Path(target)
    private = None
    try:
        private = make_private_folder(target.parent)
        temporary = private / target.name
        write(temporary)
        if temporary.is_symlink() or not temporary.is_file():
            raise OutputError(f"{target}: cannot write {what}: the writer did not produce a regular file")
        os.replace(temporary, target)
    except Exception as error:
        if isinstance(error, OutputError):
            raise
        raise OutputError(
            f"{target}: cannot write {what}: {error}{disk_full_hint(error, target.parent)}"
        ) from error
    finally:
        if private is not None:
            shutil.rmtree(private, ignore_errors=True)
    return target


def write_text_atomic(target: str | os.PathLike, text: str, *, what: str = "the file", sync: bool = False) -> Path:
    """Write UTF-8 ``text`` to ``target`` atomically; ``sync`` flushes it to disk before the rename."""

    def write(path: Path) -> None:
        # O_EXCL | O_NOFOLLOW: the file is new, in a folder only this user can write to.
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_NOFOLLOW, 0o644)
        with open(fd, "w", encoding="utf-8") as handle:
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
    left = f" ({byte_size_text(free)} left on the disk of {folder})" if free is not None else ""
    return (f"; the disk is full or nearly full, or a file-size or quota limit was reached{left}: free space or "
            "choose another output.folder, then run again (finished scenarios can be kept with --resume)")


def byte_size_text(size: float) -> str:
    """A byte count in words a person reads at a glance: 1052672 -> '1.0 MiB', 512 -> '512 bytes'."""
    if size < 1024:
        return f"{int(size)} bytes"
    for unit in ("KiB", "MiB", "GiB", "TiB", "PiB"):
        size /= 1024.0
        if size < 1024 or unit == "PiB":
            return f"{size:.1f} {unit}"
    return f"{size:.1f} PiB"  # pragma: no cover


__all__ = ["atomic_write", "write_text_atomic", "make_private_folder", "is_abandoned", "marked_prefix",
           "disk_full_hint", "byte_size_text", "TEMPORARY_PREFIX", "STAGING_PREFIX", "MARKED_PREFIXES"]

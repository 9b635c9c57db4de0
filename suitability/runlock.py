"""One run at a time per output folder: a lock file holding the owner's process id.

The lock is the hidden file ``<folder>/.suitability.lock``. Its owner holds an exclusive ``flock`` on it
for the whole run and writes into it, as JSON, its process id, host, start time and command line, so
that a second run can say who is using the folder. The kernel drops a ``flock`` when the process that
holds it ends, however it ends (SIGKILL included): a lock file left behind by a dead run is therefore
free, and the next run takes it over (:attr:`RunLock.taken_over_from` tells whose it was).

Where the file system cannot ``flock`` (some network file systems), the recorded process id decides:
a lock recorded by a live process on this host, or by any process on another host (which cannot be
checked from here), is respected; one recorded by a process of this host that no longer exists is stale
and taken over.

The owner removes the file when it is done. A waiting process may have opened the file just before it
was removed; it then holds a lock on a file that no longer has a name, so after locking, the file's
identity is compared with the one at the path and the attempt repeated if they differ. POSIX only
(``fcntl.flock``, ``os.pread``).
"""

from __future__ import annotations

import errno
import fcntl
import json
import os
import socket
import stat
import sys
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

from .errors import OutputError

LOCK_NAME = ".suitability.lock"
_ATTEMPTS = 20


@dataclass(frozen=True)
class LockOwner:
    """Who holds (or held) a lock: process id, host name, start time (ISO 8601, UTC), command line."""

    pid: int | None
    host: str | None
    started: str | None
    command: str | None

    @classmethod
    def from_text(cls, text: str) -> LockOwner | None:
        try:
            record = json.loads(text)
        except ValueError:
            return None
        if not isinstance(record, dict):
            return None
        pid = record.get("pid")
        return cls(pid if isinstance(pid, int) else None, record.get("host"), record.get("started"),
                   record.get("command"))

    def describe(self) -> str:
        who = f"process {self.pid}" if self.pid is not None else "an unknown process"
        where = f" on {self.host}" if self.host else ""
        since = f", started {self.started}" if self.started else ""
        return f"{who}{where}{since}"

    def is_alive_here(self) -> bool:
        """True if the owner is a running process of this host (unknown hosts count as alive)."""
        if self.host != socket.gethostname():
            return True
        return self.pid is not None and process_alive(self.pid)


class RunLock:
    """Exclusive use of an output folder. Use as a context manager; the folder must exist.

    Raises OutputError naming the lock file and the process that holds it when the folder is in use.
    """

    def __init__(self, folder: str | os.PathLike):
        self.folder = Path(folder)
        self.path = self.folder / LOCK_NAME
        self.taken_over_from: LockOwner | None = None
        self._fd: int | None = None

    def __enter__(self) -> RunLock:
        self.acquire()
        return self

    def __exit__(self, *exc_info) -> None:
        self.release()

    def acquire(self) -> RunLock:
        if self._fd is not None:
            raise OutputError(f"{self.path}: this run already holds the lock")
        for _ in range(_ATTEMPTS):
            try:
                # O_NOFOLLOW: a symbolic link planted at the lock's name is refused, never followed.
                fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW | os.O_NONBLOCK, 0o644)
            except OSError as error:
                if error.errno == errno.ELOOP:
                    raise OutputError(f"{self.path}: the lock file of the output folder is a symbolic link; the tool "
                                      "does not follow links when writing. Remove it and run again") from error
                raise OutputError(f"{self.path}: cannot create the lock file of the output folder: {error}") from error
            try:
                if not stat.S_ISREG(os.fstat(fd).st_mode):
                    raise OutputError(f"{self.path}: the lock file of the output folder is not a regular file; "
                                      "remove it and run again")
                if self._lock_or_refuse(fd) and self._still_at_path(fd):
                    previous = LockOwner.from_text(_read(fd))
                    _write(fd, self._record())
                    self.taken_over_from = previous
                    self._fd = fd
                    return self
            except BaseException:
                os.close(fd)
                raise
            os.close(fd)  # the file we locked was removed by its owner meanwhile: try the new one
        raise OutputError(f"{self.path}: could not take the lock of the output folder; another run keeps replacing it")

    def release(self) -> None:
        if self._fd is None:
            return
        fd, self._fd = self._fd, None
        try:
            if self._still_at_path(fd):
                self.path.unlink()
        except OSError:
            pass  # a lock file left behind is taken over by the next run
        finally:
            os.close(fd)  # closing drops the flock

    def _lock_or_refuse(self, fd: int) -> bool:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            self._refuse(LockOwner.from_text(_read(fd)))
        except OSError as error:
            if error.errno not in (errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS, errno.EINVAL):
                raise OutputError(f"{self.path}: cannot lock the output folder: {error}") from error
            owner = LockOwner.from_text(_read(fd))  # no flock here: the recorded process decides
            if owner is not None and owner.pid != os.getpid() and owner.is_alive_here():
                self._refuse(owner)
        return True

    def _refuse(self, owner: LockOwner | None) -> None:
        who = owner.describe() if owner is not None else "another process"
        raise OutputError(
            f"output folder {self.folder} is in use by another run ({who}): lock file {self.path}. "
            "Wait for that run to finish, or choose another output.folder"
        )

    def _still_at_path(self, fd: int) -> bool:
        try:
            here = os.lstat(self.path)
        except FileNotFoundError:
            return False
        mine = os.fstat(fd)
        return (here.st_dev, here.st_ino) == (mine.st_dev, mine.st_ino)

    @staticmethod
    def _record() -> str:
        return json.dumps({
            "pid": os.getpid(),
            "host": socket.gethostname(),
            "started": datetime.now(timezone.utc).isoformat(timespec="seconds"),
            "command": " ".join(sys.argv),
        })


def read_lock_owner(folder: str | os.PathLike) -> LockOwner | None:
    """The owner recorded in ``folder``'s lock file, or None if there is none (or it is unreadable)."""
    try:
        return LockOwner.from_text((Path(folder) / LOCK_NAME).read_text(encoding="utf-8"))
    except OSError:
        return None


def process_alive(pid: int) -> bool:
    """True if a process with this id exists on this host (one we may not signal counts as existing)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _read(fd: int) -> str:
    return os.pread(fd, 1 << 16, 0).decode("utf-8", errors="replace")


def _write(fd: int, text: str) -> None:
    data = text.encode("utf-8")
    os.ftruncate(fd, 0)
    os.pwrite(fd, data, 0)
    os.fsync(fd)


__all__ = ["RunLock", "LockOwner", "LOCK_NAME", "read_lock_owner", "process_alive"]

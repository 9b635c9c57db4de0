"""Peak memory and CPU time of a child process, without the parent's memory counted in.

On Linux a process's ``ru_maxrss`` starts from the high-water mark of the memory it had when it called
``exec``: a child of a benchmark that holds 2 GiB (its inputs, the kernel benchmark) reports at least
2 GiB through ``os.wait4``, whatever it used itself (measured here: a child that only starts Python, 10
MiB, reported 2073 MiB under a parent holding 2 GiB). Every benchmark figure of peak memory comes from
processes started by larger ones, so each is started through a small launcher instead: this file, run as
a script, starts the command, waits for it with ``os.wait4`` and writes that rusage to a file. The
command is then forked from the launcher's own small memory (about 10-20 MiB of a bare interpreter), so
its ``ru_maxrss`` is its own peak (and that of its children it waited for), as the operating system
reports it.

Usage from Python: ``child = MeasuredChild(command, stdout=..., env=...)``, then ``child.wait()``.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True)
class ChildUsage:
    """The child's exit code, its CPU seconds (user, system) and its peak resident memory [KiB]."""

    returncode: int
    ru_utime: float
    ru_stime: float
    ru_maxrss: int


class MeasuredChild:
    """``subprocess.Popen(command, **popen_options)`` started through the launcher; ``process`` is the
    launcher, whose standard streams the command inherits (pipes given here reach the command)."""

    def __init__(self, command: list[str], **popen_options):
        handle, self._report = tempfile.mkstemp(prefix="child_usage_", suffix=".json")
        os.close(handle)
        self.process = subprocess.Popen([sys.executable, __file__, self._report, "--", *map(str, command)],
                                        **popen_options)
        self.pid = self.process.pid

    def wait(self) -> ChildUsage:
        """Wait for the command (if ``process.communicate()`` has not already) and return what it used."""
        self.process.wait()
        try:
            report = json.loads(Path(self._report).read_text() or "{}")
        finally:
            os.unlink(self._report)
        if not report:
            raise RuntimeError(f"the launcher of {self.process.args[4:]} wrote no usage (exit code "
                               f"{self.process.returncode})")
        return ChildUsage(**report)


def _launch(report: str, command: list[str]) -> int:
    child = subprocess.Popen(command)
    for forwarded in (signal.SIGTERM, signal.SIGINT):
        signal.signal(forwarded, lambda number, _frame: child.send_signal(number))
    _, status, usage = os.wait4(child.pid, 0)
    code = os.waitstatus_to_exitcode(status)
    Path(report).write_text(json.dumps({"returncode": code, "ru_utime": usage.ru_utime, "ru_stime": usage.ru_stime,
                                        "ru_maxrss": usage.ru_maxrss}))
    return code if code >= 0 else 128 - code


if __name__ == "__main__":
    separator = sys.argv.index("--")
    sys.exit(_launch(sys.argv[1], sys.argv[separator + 1:]))

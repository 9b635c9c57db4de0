"""The launcher that measures a child's peak memory (benchmarks/child_usage.py), against the operating system.

Linux's getrusage/wait4 ru_maxrss is a process's peak resident set in KiB (getrusage(2) man page); the kernel
starts it from the high-water mark of the memory the process held when it called exec (fs/exec.c,
setmax_mm_hiwater_rss), so a child of a large process reports the parent's size. The memory tests and the
benchmarks start their runs through the launcher, so that what they report is the run's own peak.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from benchmarks.child_usage import MeasuredChild  # noqa: E402  (the repository root holds benchmarks/)

MIB = 1024  # ru_maxrss is in KiB on Linux
ALLOCATES_200_MIB = "import numpy as np; a = np.ones(200 * 2**20 // 8); a.sum()"

pytestmark = pytest.mark.skipif(sys.platform != "linux", reason="ru_maxrss in KiB and exec accounting: Linux")


def test_a_child_started_directly_reports_its_large_parent_and_the_launcher_does_not():
    held = np.ones(768 * 2**20 // 8)  # this process now holds 768 MiB, pages touched
    direct = subprocess.Popen([sys.executable, "-c", "pass"])
    _, status, usage = os.wait4(direct.pid, 0)
    assert os.waitstatus_to_exitcode(status) == 0
    assert usage.ru_maxrss >= 768 * MIB  # the trap: the parent's memory, not the child's

    launched = MeasuredChild([sys.executable, "-c", "pass"]).wait()
    assert launched.returncode == 0
    assert launched.ru_maxrss < 200 * MIB  # a bare interpreter (about 10-30 MiB)
    assert held[-1] == 1.0


def test_the_launcher_reports_the_childs_own_peak_cpu_and_exit_code():
    usage = MeasuredChild([sys.executable, "-c", ALLOCATES_200_MIB]).wait()
    assert usage.returncode == 0
    assert 200 * MIB <= usage.ru_maxrss < 600 * MIB
    assert usage.ru_utime + usage.ru_stime > 0.0
    assert MeasuredChild([sys.executable, "-c", "import sys; sys.exit(3)"]).wait().returncode == 3


def test_pipes_given_to_the_launcher_reach_the_command():
    child = MeasuredChild([sys.executable, "-c", "import sys; print('out'); print('err', file=sys.stderr)"],
                          stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    stdout, stderr = child.process.communicate()
    assert (stdout.strip(), stderr.strip()) == (b"out", b"err")
    assert child.wait().returncode == 0

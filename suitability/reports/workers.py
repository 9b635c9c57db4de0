"""Worker processes of the briefs: the district briefs' figures and every brief's PDF.

Drawing a figure and rendering a PDF (layout, font subsetting) are pure Python and hold the interpreter
lock, so threads would not run two at once; worker processes do. The main process keeps the order of
the briefs: it draws the region briefs' figures itself, writes every HTML page in order, and hands out

- ``figures``: draw the figures of one district brief (written to ``figures/`` as PNG and SVG); the main
  process embeds the PNG files in that brief's HTML when its turn comes, so the page is the one it would
  have drawn itself;
- ``pdf``: render a brief's HTML file, already written, as its PDF (:func:`write_pdf`, as here).

The workers are plain Python processes running :func:`serve`, fed one job per line on stdin (fields
separated by TAB), answering one line per job on stdout (``ok`` TAB JSON, or ``error`` TAB message); the
warnings a job raised travel with its answer and are raised again in the main process. They are not
multiprocessing children: those would re-run the caller's main script (spawn) or copy a process whose
other threads (dask's, GDAL's) may hold locks (fork). Where no worker can be started,
everything is done in the main process, one brief after the other.
"""

from __future__ import annotations

import itertools
import json
import os
import pickle
import subprocess
import sys
import warnings
from collections import deque
from collections.abc import Callable
from pathlib import Path

from suitability.atomic import atomic_write
from suitability.errors import OutputError

TEMPLATES = Path(__file__).with_name("templates")
#: Warning classes a worker's warnings are raised again as, by name (others: UserWarning).
_WARNINGS = {cls.__name__: cls for cls in (UserWarning, FutureWarning, DeprecationWarning, RuntimeWarning,
                                           PendingDeprecationWarning, ResourceWarning)}
#: Jobs sent to one worker and not yet answered, at most (a PDF job holds its page's HTML until done).
MAX_QUEUED = 2


def write_pdf(html: str, target: str | os.PathLike) -> Path:
    """Render ``html`` (a brief's page) as a PDF at ``target``, written atomically."""
    import weasyprint  # imported late: it is slow to import and only the PDF needs it

    return atomic_write(target, lambda path: weasyprint.HTML(string=html, base_url=str(TEMPLATES)).write_pdf(path),
                        what="the brief")


def default_workers() -> int:
    """Worker processes: one per core (the main process mostly waits for them), at most 4; none on one core."""
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return 0 if cores < 2 else min(cores, 4)


class _Worker:
    def __init__(self):
        package_root = str(Path(__file__).resolve().parents[2])  # this tree's package, not another install
        path = os.pathsep.join(filter(None, [package_root, os.environ.get("PYTHONPATH")]))
        # -c, not -m: the package imports this module first, and runpy would warn about running it again
        command = [sys.executable, "-c", "from suitability.reports.workers import serve; serve()"]
        self.process = subprocess.Popen(command, stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True,
                                        encoding="utf-8", env={**os.environ, "PYTHONPATH": path})
        self.queued: deque[tuple[int, str, Callable[[dict], None] | None]] = deque()

    def send(self, sequence: int, fields: list[str], on_reply: Callable[[dict], None] | None) -> None:
        self.process.stdin.write("\t".join(fields) + "\n")
        self.process.stdin.flush()
        self.queued.append((sequence, fields[-1], on_reply))

    def receive(self) -> None:
        """Wait for the oldest job's answer; hand it on, or raise its error."""
        _, subject, on_reply = self.queued.popleft()
        answer = self.process.stdout.readline().rstrip("\n")
        status, _, payload = answer.partition("\t")
        if status == "ok":
            reply = json.loads(payload)
            for category, message in reply.pop("warnings", []):  # as if raised here: the caller shows them
                warnings.warn(message, _WARNINGS.get(category, UserWarning), stacklevel=2)
            if on_reply is not None:
                on_reply(reply)
            return
        if status == "error":
            raise OutputError(payload)
        raise OutputError(f"{subject}: cannot write the brief: its worker process ended "
                          f"(exit code {self.process.poll()})")

    def close(self, kill: bool) -> None:
        if kill:
            self.process.kill()
        try:
            self.process.stdin.close()
        except OSError:
            pass
        try:
            self.process.wait(timeout=60)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
        self.process.stdout.close()


class Workers:
    """``count`` worker processes (0: none, :attr:`active` is False). Use as a context manager: leaving it
    waits for every job and raises the first failure; leaving it on an error stops the workers."""

    def __init__(self, count: int | None = None):
        self._count = default_workers() if count is None else count
        self._workers: list[_Worker] = []
        self._sequence = itertools.count()

    @property
    def active(self) -> bool:
        return bool(self._workers)

    def __enter__(self) -> Workers:
        try:
            for _ in range(self._count):
                self._workers.append(_Worker())
        except OSError:  # no process can be started here: do everything in this process
            self._close(kill=True)
        return self

    def has_room(self) -> bool:
        return any(len(worker.queued) < MAX_QUEUED for worker in self._workers)

    def submit(self, fields: list[str], on_reply: Callable[[dict], None] | None = None) -> None:
        """Send a job to the least busy worker (waiting for its oldest job if it has too many)."""
        worker = min(self._workers, key=lambda w: len(w.queued))
        while len(worker.queued) >= MAX_QUEUED:
            worker.receive()
        worker.send(next(self._sequence), fields, on_reply)

    def broadcast(self, fields: list[str]) -> None:
        """Send a job to every worker (a setup) and wait for every answer."""
        for worker in self._workers:
            worker.send(next(self._sequence), fields, None)
        for worker in self._workers:
            while worker.queued:
                worker.receive()

    def wait_until(self, done: Callable[[], bool]) -> None:
        """Receive answers, oldest job first, until ``done()``."""
        while not done():
            busy = [worker for worker in self._workers if worker.queued]
            if not busy:
                raise RuntimeError("waiting for a worker's answer, but no job is out")
            min(busy, key=lambda w: w.queued[0][0]).receive()

    def __exit__(self, exc_type, exc, traceback) -> None:
        failed = exc_type is not None
        try:
            if not failed:
                self.wait_until(lambda: not any(worker.queued for worker in self._workers))
        except BaseException:
            failed = True
            raise
        finally:
            self._close(kill=failed)

    def _close(self, kill: bool) -> None:
        for worker in self._workers:
            worker.close(kill=kill and bool(worker.queued))
        self._workers = []


def write_setup(path: Path, **state) -> Path:
    """The state every ``figures`` job needs (pickled), for the workers' ``setup`` job."""
    path.write_bytes(pickle.dumps(state, protocol=pickle.HIGHEST_PROTOCOL))
    return path


def serve() -> None:
    """The worker's loop: do each job of stdin, answer on stdout."""
    answers = os.fdopen(os.dup(1), "w", encoding="utf-8")
    os.dup2(2, 1)  # anything else printed (a library's message) goes to stderr, not into the answers
    sys.stdout = sys.stderr
    state: dict = {}
    for line in sys.stdin:
        kind, *fields = line.rstrip("\n").split("\t")
        subject = fields[-1] if fields else kind
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("default")
                reply = _do(kind, fields, state)
        except Exception as error:  # reported to the main process, which raises it
            message = str(error) if isinstance(error, OutputError) else f"{subject}: cannot write the brief: {error}"
            print("error\t" + message.replace("\n", " "), file=answers, flush=True)
        else:
            reply["warnings"] = [[w.category.__name__, str(w.message)] for w in caught]
            print("ok\t" + json.dumps(reply), file=answers, flush=True)


def _do(kind: str, fields: list[str], state: dict) -> dict:
    """One job (see the module docstring); ``state`` keeps what ``setup`` loaded."""
    if kind == "setup":
        state.clear()
        state.update(pickle.loads(Path(fields[0]).read_bytes()))
        return {}
    if kind == "figures":
        from suitability.reports.brief import draw_page_figures

        return draw_page_figures(int(fields[0]), **state)
    if kind == "pdf":
        write_pdf(Path(fields[0]).read_text(encoding="utf-8"), fields[1])
        return {}
    raise ValueError(f"unknown job {kind!r}")


if __name__ == "__main__":
    serve()

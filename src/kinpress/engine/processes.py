"""Worker processes for compressors that do not release the GIL (pyppmd)."""

from __future__ import annotations

import os
import queue
import subprocess
import sys
import threading
from collections.abc import Iterator, Sequence
from typing import IO, Any

import numpy as np

from .tiles import SizeJob, Tile
from .wire import receive, send


class WorkerError(RuntimeError):
    """A worker process failed or died."""


def worker_command() -> list[str]:
    """How a worker starts: Python in isolated mode (-I: neither the current folder nor
    PYTHONPATH nor the user's site-packages on the import path), importing kinpress from the
    folder this kinpress was imported from and nothing else added, so that a module named like
    a compression library in the user's folder is never run. It also starts in the root folder.
    """
    import kinpress

    home = os.path.dirname(os.path.dirname(os.path.abspath(kinpress.__file__)))
    start = (
        f"import sys; sys.path.insert(0, {home!r}); "
        "from kinpress.engine.wire import serve; serve(sys.stdin.buffer, sys.stdout.buffer)"
    )
    return [sys.executable, "-I", "-c", start]


class WorkerProcesses:
    """`count` worker processes (see `worker_command`), each holding the items (replaced by
    `load`, so one set of workers serves run after run). A run left before its last answer
    leaves answers in flight: such workers must serve no further run (LocalEngine ends them)."""

    def __init__(self, count: int, items: Sequence[bytes]) -> None:
        self._procs = [
            subprocess.Popen(
                worker_command(), stdin=subprocess.PIPE, stdout=subprocess.PIPE, cwd=os.sep
            )
            for _ in range(count)
        ]
        self._answers: queue.Queue[tuple[int, Any]] = queue.Queue()
        self._readers = []
        payload = list(items)
        for index, proc in enumerate(self._procs):
            assert proc.stdout is not None
            self._send(index, payload)
            reader = threading.Thread(
                target=self._read, args=(index, proc.stdout), daemon=True, name="kinpress-reader"
            )
            reader.start()
            self._readers.append(reader)

    @property
    def pids(self) -> list[int]:
        """The workers' process ids."""
        return [proc.pid for proc in self._procs]

    def load(self, items: Sequence[bytes]) -> None:
        """Give every worker `items` in place of those it holds, for the runs that follow."""
        payload = list(items)
        for index in range(len(self._procs)):
            self._send(index, payload)

    def _send(self, index: int, message: Any) -> None:
        """Write to a worker; one that has died is a WorkerError, not a broken pipe."""
        proc = self._procs[index]
        assert proc.stdin is not None
        try:
            send(proc.stdin, message)
        except OSError:  # BrokenPipeError above all: the worker is gone
            raise WorkerError(self._ended(index)) from None

    def _ended(self, index: int) -> str:
        code = self._procs[index].wait()
        return f"a worker process ended unexpectedly (exit code {code})"

    def _read(self, index: int, stream: IO[bytes]) -> None:
        try:
            while True:
                self._answers.put((index, receive(stream)))
        except (EOFError, OSError):
            self._answers.put((index, None))

    def run(self, job: SizeJob, tiles: Sequence[Tile]) -> Iterator[tuple[Tile, np.ndarray]]:
        """Yield (tile, sizes) as workers finish them, two tiles in flight per worker."""
        waiting = list(enumerate(tiles))[::-1]
        load = [0] * len(self._procs)
        in_flight = 0
        while waiting or in_flight:
            for index in range(len(self._procs)):
                while load[index] < 2 and waiting:
                    task, tile = waiting.pop()
                    self._send(index, (task, job, tile))
                    load[index] += 1
                    in_flight += 1
            index, answer = self._answers.get()
            if answer is None:
                raise WorkerError(self._ended(index))
            task, result = answer
            if isinstance(result, str):
                raise WorkerError(f"a worker process failed:\n{result}")
            load[index] -= 1
            in_flight -= 1
            yield tiles[task], result

    def close(self) -> None:
        """Ask every worker to stop; end any that do not within a few seconds."""
        for proc in self._procs:
            try:
                assert proc.stdin is not None
                send(proc.stdin, None)
                proc.stdin.close()
            except (BrokenPipeError, OSError):
                pass
        for proc in self._procs:
            try:
                proc.wait(timeout=5)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()

    def __enter__(self) -> WorkerProcesses:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

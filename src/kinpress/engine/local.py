"""Run tiles on this machine's cores: threads where the library releases the GIL, else processes."""

from __future__ import annotations

import os
import threading
import weakref
from collections.abc import Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ThreadPoolExecutor, wait
from typing import TYPE_CHECKING

import numpy as np

from ..compressors import compressor
from .tiles import SizeJob, Tile, run_tile

if TYPE_CHECKING:
    from .processes import WorkerProcesses


def available_cores() -> int:
    """Cores this process may use (its CPU affinity, not the machine's total)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


class LocalEngine:
    """All cores of this machine (`jobs`, default: every core this process may use).

    Threads run compressors that release the GIL; the others run in worker processes, which get
    each run's items once, at its start, so tasks carry only tile indices. At most two tiles per
    worker are in flight, so an interrupted run loses little. The worker processes are kept for
    the engine's next run: a classification runs ten or so phases, and starting workers (Python,
    kinpress, the compressor's helper processes) took about a third of a second each time, half
    of a small PPMd classification (benchmarks/bench_engine_runs.py). They end with `close` (or
    the `with` block), when the engine is collected, or when this process ends; a run left
    before its end (an error, Ctrl-C) ends them at once, since they may still owe it answers. Idle
    workers hold no items (each run sends its own and takes them back).
    """

    def __init__(self, jobs: int | None = None) -> None:
        if jobs is not None and jobs < 1:
            raise ValueError("jobs must be at least 1")
        self.jobs = jobs or available_cores()
        self._workers: WorkerProcesses | None = None
        self._ending: weakref.finalize[[WorkerProcesses], LocalEngine] | None = None
        self._lock = threading.Lock()

    def __getstate__(self) -> dict[str, int]:
        """A copy or pickle carries the worker count only; its workers will be its own (so an
        estimator holding an engine can be cloned, as cross-validation does)."""
        return {"jobs": self.jobs}

    def __setstate__(self, state: dict[str, int]) -> None:
        self.__init__(state["jobs"])  # type: ignore[misc]

    def close(self) -> None:
        """End the worker processes kept for the next run, if any."""
        if self._ending is not None:
            self._ending()  # WorkerProcesses.close, once
        self._workers = self._ending = None

    def __enter__(self) -> LocalEngine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def run(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        """Yield (tile, sizes) as tiles finish, in any order."""
        if self.jobs == 1 or len(tiles) <= 1:
            for tile in tiles:
                yield tile, run_tile(items, job, tile)
            return
        yield from self._pooled(items, job, tiles)

    def _pooled(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        if not compressor(job.spec).releases_gil:
            yield from self._in_processes(items, job, tiles)
            return
        executor = ThreadPoolExecutor(max_workers=self.jobs, thread_name_prefix="kinpress")
        pending: dict[Future[np.ndarray], Tile] = {}
        queue = iter(tiles)
        try:
            while True:
                while len(pending) < 2 * self.jobs and (tile := next(queue, None)) is not None:
                    pending[executor.submit(run_tile, items, job, tile)] = tile
                if not pending:
                    return
                done, _ = wait(pending, return_when=FIRST_COMPLETED)
                for future in done:
                    yield pending.pop(future), future.result()
        finally:
            for future in pending:
                future.cancel()
            executor.shutdown(wait=True, cancel_futures=True)

    def _in_processes(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        """Run on the kept worker processes (started for the first run), or, while another
        thread's run holds them, on processes of this run's own."""
        from .processes import WorkerProcesses  # subprocess is slow to import; rarely needed

        if not self._lock.acquire(blocking=False):
            with WorkerProcesses(self.jobs, items) as own:
                yield from own.run(job, tiles)
            return
        finished = False
        try:
            if self._workers is None:
                self._workers = WorkerProcesses(self.jobs, items)
                self._ending = weakref.finalize(self, WorkerProcesses.close, self._workers)
            else:
                self._workers.load(items)
            yield from self._workers.run(job, tiles)
            self._workers.load([])  # idle workers hold no items
            finished = True
        finally:
            if not finished:  # left early or failed: answers may be owed, a worker may be gone
                self.close()
            self._lock.release()

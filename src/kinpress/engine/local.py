"""Run tiles on this machine's cores: threads where the library releases the GIL, else processes."""

from __future__ import annotations

import os
from collections.abc import Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ThreadPoolExecutor, wait

import numpy as np

from ..compressors import compressor
from .tiles import SizeJob, Tile, run_tile


def available_cores() -> int:
    """Cores this process may use (its CPU affinity, not the machine's total)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


class LocalEngine:
    """All cores of this machine (`jobs`, default: every core this process may use).

    Threads run compressors that release the GIL; the others run in worker processes, which get
    the items once, at start-up, so tasks carry only tile indices. At most two tiles per worker
    are in flight, so an interrupted run loses little.
    """

    def __init__(self, jobs: int | None = None) -> None:
        if jobs is not None and jobs < 1:
            raise ValueError("jobs must be at least 1")
        self.jobs = jobs or available_cores()

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
            from .processes import WorkerProcesses  # subprocess is slow to import; rarely needed

            with WorkerProcesses(self.jobs, items) as workers:
                yield from workers.run(job, tiles)
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

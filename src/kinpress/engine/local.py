"""Run tiles on this machine's cores: threads where the library releases the GIL, else processes."""

from __future__ import annotations

import multiprocessing
import os
from collections.abc import Iterator, Sequence
from concurrent.futures import (
    FIRST_COMPLETED,
    Executor,
    Future,
    ProcessPoolExecutor,
    ThreadPoolExecutor,
    wait,
)

import numpy as np

from ..compressors import compressor
from .tiles import SizeJob, Tile, run_tile

_worker_items: Sequence[bytes] = ()


def available_cores() -> int:
    """Cores this process may use (its CPU affinity, not the machine's total)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


def _init_worker(items: Sequence[bytes]) -> None:
    global _worker_items
    _worker_items = items


def _run_in_worker(job: SizeJob, tile: Tile) -> np.ndarray:
    return run_tile(_worker_items, job, tile)


class LocalEngine:
    """All cores of this machine (`jobs`, default: every core this process may use).

    Items travel to each worker process once, at start-up; tasks carry only tile indices.
    At most two tiles per worker are in flight, so an interrupted run loses little.
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

    def _executor(self, items: Sequence[bytes], job: SizeJob) -> Executor:
        if compressor(job.spec).releases_gil:
            return ThreadPoolExecutor(max_workers=self.jobs, thread_name_prefix="kinpress")
        # A fresh interpreter per worker: forking a process that runs a progress thread is unsafe.
        context = multiprocessing.get_context("spawn")
        return ProcessPoolExecutor(
            max_workers=self.jobs, mp_context=context, initializer=_init_worker, initargs=(items,)
        )

    def _pooled(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        executor = self._executor(items, job)
        threads = isinstance(executor, ThreadPoolExecutor)
        pending: dict[Future[np.ndarray], Tile] = {}
        queue = iter(tiles)
        try:
            while True:
                while len(pending) < 2 * self.jobs:
                    tile = next(queue, None)
                    if tile is None:
                        break
                    future = (
                        executor.submit(run_tile, items, job, tile)
                        if threads
                        else executor.submit(_run_in_worker, job, tile)
                    )
                    pending[future] = tile
                if not pending:
                    return
                done, _ = wait(pending, return_when=FIRST_COMPLETED)
                for future in done:
                    yield pending.pop(future), future.result()
        finally:
            for future in pending:
                future.cancel()
            executor.shutdown(wait=True, cancel_futures=True)

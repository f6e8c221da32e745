"""Run tiles on a Dask cluster: the same pure tile function, on other machines' cores.

The items are sent to every worker once; each task then carries only a tile of indices and
returns its sizes. Sizes come back to this process, which alone reads and writes the cache, so
a cluster run resumes, and shares, exactly as a local one. Workers need kinpress installed.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ..compressors import compressor
from .tiles import SizeJob, Tile, run_tile

if TYPE_CHECKING:
    from distributed import Client

DASK_MISSING = "a Dask cluster needs the dask extra: pip install 'kinpress[dask]'"


class ClusterError(RuntimeError):
    """The cluster cannot be reached or used."""


def worker_identity(spec: str) -> str:
    """What a worker would compute with: kinpress's version and the compressor's cache key."""
    from .._version import __version__

    return f"kinpress {__version__}, {compressor(spec).cache_key}"


class DaskEngine:
    """Tiles as tasks on a Dask cluster (`address` like tcp://host:8786, or a Client).

    A connection waits `timeout` seconds, by default Dask's connect timeout. `jobs` is the
    cluster's total worker threads; at most two tasks per thread are in flight, so an interrupted
    run loses little. Compressors that hold the GIL (ppmd) want workers of
    one thread each (``dask worker ADDRESS --nthreads 1 --nworkers N``); a warning says so.
    """

    def __init__(self, address: str | Client, *, timeout: float | None = None) -> None:
        given: Any = address  # distributed's API is untyped
        self.address = address if isinstance(address, str) else str(given.scheduler.address)
        self._timeout = timeout
        self._client: Any = None if isinstance(address, str) else address
        self._owns_client = isinstance(address, str)

    @property
    def client(self) -> Any:
        """The connected client (connecting on first use)."""
        if self._client is None:
            try:
                from distributed import Client
            except ImportError:
                raise ClusterError(DASK_MISSING) from None
            try:
                # Without a timeout, Dask's own (distributed.comm.timeouts.connect) applies.
                options = {} if self._timeout is None else {"timeout": self._timeout}
                self._client = Client(self.address, **options)  # type: ignore[no-untyped-call]
            except (OSError, TimeoutError, ValueError) as error:
                raise ClusterError(
                    f"cannot reach the Dask scheduler at {self.address}: {error}"
                ) from None
        return self._client

    def _threads(self) -> dict[str, int]:
        threads: dict[str, int] = self.client.nthreads()
        if not threads:
            raise ClusterError(f"the Dask cluster at {self.address} has no workers")
        return threads

    @property
    def jobs(self) -> int:
        return sum(self._threads().values())

    def run(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        """Yield (tile, sizes) as tasks finish, in any order."""
        from distributed import as_completed

        threads = self._threads()
        if not compressor(job.spec).releases_gil and max(threads.values()) > 1:
            warnings.warn(
                f"{job.spec} holds Python's lock while it compresses: start the Dask workers "
                "with --nthreads 1 (and --nworkers N) for full speed",
                stacklevel=2,
            )
        client = self.client
        self._check_workers(job.spec)
        [shared] = client.scatter([list(items)], broadcast=True, hash=False)
        queue = iter(tiles)
        pending: dict[str, tuple[Any, Tile]] = {}
        running: Any = as_completed()  # type: ignore[no-untyped-call]

        def submit_next() -> None:
            tile = next(queue, None)
            if tile is not None:
                future = client.submit(run_tile, shared, job, tile, pure=False)
                pending[future.key] = (future, tile)
                running.add(future)

        for _ in range(2 * sum(threads.values())):
            submit_next()
        try:
            for future in running:
                sizes = np.asarray(future.result(), dtype=np.int64)
                _, tile = pending.pop(future.key)
                submit_next()
                yield tile, sizes
        finally:
            if pending:
                client.cancel([future for future, _ in pending.values()])
            client.cancel([shared])

    def _check_workers(self, spec: str) -> None:
        """Every worker must have kinpress and the same compressor library as this process:
        sizes from another library version would be wrong under this cache's keys."""
        try:
            found: dict[str, str] = self.client.run(worker_identity, spec)
        except Exception as error:  # Dask wraps a worker's failed import in a plain Exception
            raise ClusterError(
                f"the Dask workers at {self.address} cannot run kinpress ({error}); install it,"
                " the same version as here, on every worker"
            ) from None
        here = worker_identity(spec)
        for worker, there in sorted(found.items()):
            if there != here:
                raise ClusterError(
                    f"Dask worker {worker} has {there} where this machine has {here}; install"
                    " the same versions on every worker"
                )

    def close(self) -> None:
        """Disconnect, if this engine made the connection."""
        if self._client is not None and self._owns_client:
            self._client.close()
            self._client = None

    def __enter__(self) -> DaskEngine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

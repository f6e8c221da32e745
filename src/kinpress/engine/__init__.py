"""Where size computations run: engines take tiles and give back sizes, nothing more."""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from typing import Protocol

import numpy as np

from .cluster import ClusterError, DaskEngine
from .local import LocalEngine, available_cores
from .tiles import SizeJob, Tile, plan_tiles, run_tile

__all__ = [
    "ClusterError",
    "DaskEngine",
    "Engine",
    "LocalEngine",
    "SizeJob",
    "Tile",
    "available_cores",
    "plan_tiles",
    "run_tile",
]


class Engine(Protocol):
    """Anything that can run tiles: `jobs` workers, results as they finish."""

    @property
    def jobs(self) -> int: ...

    def run(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]: ...

"""Bootstrap support for compression trees: resample each item's blocks, rebuild, count splits.

Each replicate replaces every item by a same-length sequence of its own fixed-size blocks drawn
with replacement (the block bootstrap of Kunsch 1989, applied per item because compression
distances need no alignment, hence no shared columns to resample), recomputes the distance matrix
through the engine and rebuilds the tree; an internal branch's support is the percentage of
replicate trees that contain its split (Felsenstein 1985).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from .compressors import Compressor
from .distance import measure_matrix
from .engine import Engine
from .items import Item, ItemLike, as_items
from .measure import Measurement, Progress
from .trees import Method, Node, add_support, build_tree


def resample_blocks(data: bytes, block: int, rng: np.random.Generator) -> bytes:
    """`data` cut into blocks of `block` bytes (the last may be short), drawn with replacement
    until the original length is reached."""
    if block >= len(data):
        return data
    starts = np.arange(0, len(data), block)
    out = bytearray()
    while len(out) < len(data):
        start = int(starts[rng.integers(len(starts))])
        out += data[start : start + block]
    return bytes(out[: len(data)])


def replicate_items(
    items: Sequence[Item], block_fraction: float, rng: np.random.Generator
) -> list[Item]:
    """One bootstrap replicate of every item; blocks are `block_fraction` of each item's length."""
    if not 0 < block_fraction <= 1:
        raise ValueError("block fraction must be in (0, 1]")
    return [
        replace(
            item,
            data=resample_blocks(item.data, max(1, round(block_fraction * len(item.data))), rng),
        )
        for item in items
    ]


def bootstrap_support(
    tree: Node,
    items: Sequence[ItemLike],
    comp: Compressor,
    *,
    replicates: int,
    block_fraction: float = 0.02,
    seed: int = 1,
    method: Method = "nj",
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    progress: Progress | None = None,
) -> Node:
    """`tree` with support percentages from `replicates` block-bootstrap replicates.

    Replicates are not cached: their contents are throwaway, and nothing from the original
    run's sizes may leak into them. `progress` counts replicates, not sizes.
    """
    if replicates < 1:
        raise ValueError("the number of replicates must be at least 1")
    measurement = Measurement.of(comp, conditional=conditional, strand=strand, engine=engine)
    rng = np.random.default_rng(seed)
    items = as_items(items)
    trees = []
    for k in range(replicates):
        resampled = replicate_items(items, block_fraction, rng)
        dm = measure_matrix(resampled, measurement)
        trees.append(build_tree(dm.labels, dm.distances, method=method))
        if progress is not None:
            progress("replicates", k + 1, replicates)
    return add_support(tree, trees)

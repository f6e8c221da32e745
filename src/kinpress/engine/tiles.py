"""Tiles of the size computation: pure functions of item bytes, compressor spec and tile.

A tile lists single items or (first, second) pairs by index. For a pair the value is the size of
compressing `second` knowing `first`: C(first + second) by concatenation, or `second` compressed
with a compressor primed by `first`. With strand="both", `first` is also tried reverse-complemented
and the smaller size kept. Any engine (threads, processes, a cluster) runs the same function.
"""

from __future__ import annotations

import itertools
import threading
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..compressors import Compressor, compressor
from ..items import reverse_complement

_local = threading.local()


@dataclass(frozen=True)
class SizeJob:
    """What every tile of one run shares: the compressor, the conditional method, the strand."""

    spec: str
    method: str = "concat"
    strand: str = "one"

    @property
    def pair_method(self) -> str:
        """The cache's name for pair sizes under this job."""
        return self.method + ("+revcomp" if self.strand == "both" else "")


@dataclass(frozen=True)
class Tile:
    """Indices into the item list; `second` is empty for a tile of single items."""

    first: tuple[int, ...]
    second: tuple[int, ...] = ()

    @property
    def singles(self) -> bool:
        return not self.second


def compressor_for(spec: str) -> Compressor:
    """One compressor per thread and spec, reused across tiles so contexts are built once."""
    cached: dict[str, Compressor] | None = getattr(_local, "compressors", None)
    if cached is None:
        cached = _local.compressors = {}
    if spec not in cached:
        cached[spec] = compressor(spec)
    return cached[spec]


def run_tile(items: Sequence[bytes], job: SizeJob, tile: Tile) -> np.ndarray:
    """The sizes a tile asks for, in tile order, as int64."""
    comp = compressor_for(job.spec)
    if tile.singles:
        return np.array(comp.sizes([items[i] for i in tile.first]), dtype=np.int64)
    both = job.strand == "both"
    out = np.empty(len(tile.first), dtype=np.int64)
    # Runs of pairs that share their first item: one primer, or one reverse complement, per run;
    # by concatenation, one prefix (see Compressor.after).
    for f, start, stop in _runs(tile.first):
        seconds = [items[s] for s in tile.second[start:stop]]
        references = [items[f], reverse_complement(items[f])] if both else [items[f]]
        if job.method == "primed":
            largest = max(len(x) for x in seconds)
            found = [comp.primed(ref, largest).sizes(seconds) for ref in references]
        else:
            found = [comp.prefixed_sizes(ref, seconds) for ref in references]
        out[start:stop] = np.min(np.array(found, dtype=np.int64), axis=0)
    return out


def _runs(values: Sequence[int]) -> list[tuple[int, int, int]]:
    """(value, start, stop) for each run of equal consecutive values."""
    runs = []
    start = 0
    for k in range(1, len(values) + 1):
        if k == len(values) or values[k] != values[start]:
            runs.append((values[start], start, k))
            start = k
    return runs


def plan_tiles(
    items: Sequence[bytes],
    first: Sequence[int],
    second: Sequence[int] | None,
    workers: int,
    *,
    target_bytes: int = 16 << 20,
    prefix_once: bool = False,
) -> list[Tile]:
    """Cut a work list into tiles: about `target_bytes` each, and at least 4 per worker.

    Pairs should arrive sorted by `first`, so a tile reuses a primed compressor (or, with
    concatenation, the state after one prefix, see Compressor.after) for its run. A pair weighs
    its two items' bytes, or with `prefix_once` (primed, or a compressor that keeps its state
    after a prefix) its second item's, the first's counted only where a run starts: there a
    long first costs once for the whole run, and cutting the run into tiles by both items'
    bytes would prepare it again in every tile (PPMd order 32 on 24 languages of code: 1,175
    prefixes, each 40 ms, for 48 corpora). A run is cut only where its seconds alone pass a
    tile's bytes (`_run_cuts`), since every tile that starts inside a run prepares its first
    again: a corpus of a megabyte costs about as much as dozens of items, and cutting a run
    for balance had two workers run lzma 9 only 1.23 times as fast as one (runs of 1 MB corpora).
    """
    n = len(first)
    if n == 0:
        return []
    lengths = np.array([len(data) for data in items], dtype=np.int64)
    firsts = np.asarray(first)
    sizes = lengths[firsts]
    if second is not None:
        if prefix_once:
            starts = np.ones(n, dtype=bool)
            starts[1:] = firsts[1:] != firsts[:-1]
            sizes = np.where(starts, sizes, 0)
        sizes = sizes + lengths[np.asarray(second)]
    total = int(sizes.sum())
    per_tile = max(1, min(target_bytes, total // max(1, 4 * workers)))
    if second is not None and prefix_once:
        cuts = _run_cuts(lengths, list(first), np.asarray(second), per_tile)
    else:
        bounds = np.searchsorted(np.cumsum(sizes), np.arange(per_tile, total, per_tile), "left")
        cuts = [0, *sorted(set(int(b) + 1 for b in bounds if int(b) + 1 < n)), n]
    tiles = []
    for lo, hi in itertools.pairwise(cuts):
        if hi > lo:
            tiles.append(
                Tile(tuple(first[lo:hi]), tuple(second[lo:hi]) if second is not None else ())
            )
    return tiles


def _run_cuts(
    lengths: np.ndarray, first: list[int], second: np.ndarray, per_tile: int
) -> list[int]:
    """Tile bounds for pairs in runs of one first item whose first is prepared once per tile:
    each run cut into as few pieces of about equal seconds' bytes as keep those bytes within
    `per_tile` (its first counted again in each piece), and consecutive pieces packed into one
    tile while their cost, firsts and seconds, stays within `per_tile`."""
    pieces: list[tuple[int, int]] = []  # (start, cost) of each piece, in order
    for f, lo, hi in _runs(first):
        seconds = lengths[second[lo:hi]]
        total = int(seconds.sum())
        count = min(hi - lo, max(1, -(-total // per_tile)))
        inner = np.searchsorted(np.cumsum(seconds), total * np.arange(1, count) / count, "left")
        bounds = [0, *sorted(set(int(b) + 1 for b in inner if 0 < b + 1 < hi - lo)), hi - lo]
        for a, b in itertools.pairwise(bounds):
            pieces.append((lo + a, int(lengths[f]) + int(seconds[a:b].sum())))
    cuts = [0]
    load = 0
    for start, cost in pieces:
        if load and load + cost > per_tile:
            cuts.append(start)
            load = 0
        load += cost
    return [*cuts, len(first)]

"""Normalized compression distance and the DistanceMatrix value.

NCD(x, y) = max(C(x|y), C(y|x)) / max(C(x), C(y))   (Li et al. 2004; Cilibrasi & Vitanyi 2005)

For C(x) >= C(y) the larger conditional is C(x|y) (symmetry of information, up to logarithmic
terms), so each unordered pair costs one compression: C(x|y) = C(yx) - C(y) by concatenation, or x
compressed with a compressor primed by y. NCD is then C(x|y) / C(x), the same as the classic
(C(xy) - min(C(x), C(y))) / max(C(x), C(y)).
"""

from __future__ import annotations

import hashlib
import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np

from .cache import SizeCache
from .compressors import ADAPTERS, Compressor, SpecError, compressor
from .engine import Engine, LocalEngine, SizeJob, Tile, plan_tiles
from .items import InputError, Item

CONDITIONALS = ("concat", "primed")
STRANDS = ("one", "both")

Progress = Callable[[str, int, int], None]
"""Called with (phase, done, total) as tiles finish; a unit is one compression to compute."""


class MeasurementWarning(UserWarning):
    """A measurement is less trustworthy than it looks (pairs beyond the window, say)."""


@dataclass(frozen=True)
class MatrixStats:
    """What a run did: how much it computed and how much it took from the cache."""

    pairs_computed: int = 0
    pairs_from_cache: int = 0
    singles_computed: int = 0
    singles_from_cache: int = 0
    self_pairs_computed: int = 0
    bytes_compressed: int = 0
    seconds: float = 0.0
    clipped_below_zero: int = 0
    above_one: int = 0
    identical_items: int = 0

    def as_dict(self) -> dict[str, float | int]:
        return dict(self.__dict__)


@dataclass(frozen=True)
class DistanceMatrix:
    """Labels, the symmetric non-negative distance array with zero diagonal, and its provenance.

    `self_distances` holds the measured NCD(x, x), which a real compressor makes a little above
    zero (far above once x+x outgrows its window); `raw` is the unclipped symmetric matrix with the
    measured NCD(x, x) on its diagonal.
    """

    labels: tuple[str, ...]
    distances: np.ndarray
    sizes: np.ndarray | None = None
    self_distances: np.ndarray | None = None
    raw: np.ndarray | None = None
    compressor: str = ""
    conditional: str = ""
    strand: str = "one"
    classes: tuple[str | None, ...] | None = None
    stats: MatrixStats = field(default_factory=MatrixStats)

    def __post_init__(self) -> None:
        n = len(self.labels)
        if self.distances.shape != (n, n):
            raise ValueError(f"distances must be {n}x{n}, got {self.distances.shape}")
        if len(set(self.labels)) != n:
            raise ValueError("labels must be unique")

    def __len__(self) -> int:
        return len(self.labels)


def content_digest(data: bytes) -> bytes:
    """The 128-bit BLAKE2b hash that keys cached sizes."""
    return hashlib.blake2b(data, digest_size=16).digest()


class _Sizes:
    """Sizes for one job: cached where possible, the rest computed by the engine in tiles."""

    def __init__(
        self,
        data: Sequence[bytes],
        digests: Sequence[bytes],
        comp: Compressor,
        job: SizeJob,
        engine: Engine,
        cache: SizeCache | None,
        progress: Progress | None,
    ) -> None:
        self.data, self.digests, self.comp, self.job = data, digests, comp, job
        self.engine, self.cache, self.progress = engine, cache, progress
        self.bytes_compressed = 0
        self.lengths = np.array([len(d) for d in data], dtype=np.int64)

    def fetch(
        self, phase: str, first: np.ndarray, second: np.ndarray | None
    ) -> tuple[np.ndarray, np.ndarray]:
        """Sizes for singles (second None) or pairs, and which of them came from the cache."""
        method = "single" if second is None else self.job.pair_method
        keys = [
            (self.digests[f], b"" if second is None else self.digests[s])
            for f, s in zip(first, first if second is None else second, strict=True)
        ]
        stored = self.cache.get_many(self.comp.cache_key, method, keys) if self.cache else {}
        out = np.array([stored.get(k, -1) for k in keys], dtype=np.int64)
        cached = out >= 0
        todo = np.flatnonzero(~cached)
        if todo.size:
            self._compute(phase, method, first, second, todo, keys, out)
        return out, cached

    def _compute(
        self,
        phase: str,
        method: str,
        first: np.ndarray,
        second: np.ndarray | None,
        todo: np.ndarray,
        keys: list[tuple[bytes, bytes]],
        out: np.ndarray,
    ) -> None:
        tiles = plan_tiles(
            self.data,
            first[todo].tolist(),
            None if second is None else second[todo].tolist(),
            self.engine.jobs,
            target_bytes=4 << 20,
        )
        where: dict[Tile, np.ndarray] = {}
        start = 0
        for tile in tiles:
            where[tile] = todo[start : start + len(tile.first)]
            start += len(tile.first)
        done = 0
        for tile, sizes in self.engine.run(self.data, self.job, tiles):
            slots = where[tile]
            out[slots] = sizes
            fed = int(self.lengths[list(tile.first)].sum())
            if not tile.singles:  # pairs feed both sides, twice when both strands are tried
                fed += int(self.lengths[list(tile.second)].sum())
                fed *= 2 if self.job.strand == "both" else 1
            self.bytes_compressed += fed
            if self.cache is not None:
                rows = [(*keys[k], int(out[k])) for k in slots]
                self.cache.put_many(self.comp.cache_key, method, rows)
            done += len(slots)
            if self.progress is not None:
                self.progress(phase, done, int(todo.size))


def _check_job(comp: Compressor, conditional: str, strand: str, items: Sequence[Item]) -> None:
    if conditional not in CONDITIONALS:
        raise SpecError(f"unknown conditional {conditional!r}; use {' or '.join(CONDITIONALS)}")
    if conditional == "primed" and not comp.primable:
        names = " or ".join(name for name, cls in ADAPTERS.items() if cls.primable)
        raise SpecError(f"{comp.name} cannot be primed; use --conditional concat or {names}")
    if strand not in STRANDS:
        raise SpecError(f"unknown strand {strand!r}; use {' or '.join(STRANDS)}")
    if strand == "both":
        other = next((i for i in items if not i.nucleotide), None)
        if other is not None:
            raise InputError(
                f"{other.source}: --strand both needs nucleotide sequences; {other.name} is not one"
            )
    if len(items) < 2:
        raise InputError(f"need at least two items to compare, got {len(items)}")


def _warn_beyond_window(comp: Compressor, lengths: np.ndarray) -> None:
    window = comp.window_bytes
    if window is None:
        return
    order = np.sort(lengths)
    # Pairs (i, j) with len_i + len_j > window, counted from the sorted lengths.
    over = len(order) * (len(order) - 1) // 2 - int(
        sum(
            np.searchsorted(order[k + 1 :], window - order[k], side="right")
            for k in range(len(order))
        )
    )
    if over:
        warnings.warn(
            f"{comp.spec}: {over} item pairs are longer together than its {window:,}-byte window;"
            " their distances drift towards 1",
            MeasurementWarning,
            stacklevel=3,
        )


def _distinct(items: Sequence[Item]) -> tuple[list[bytes], list[bytes], np.ndarray]:
    """Distinct contents, their digests, and for each item the index of its content."""
    unique: dict[bytes, int] = {}
    data: list[bytes] = []
    index = np.empty(len(items), dtype=np.int64)
    for k, item in enumerate(items):
        digest = content_digest(item.data)
        if digest not in unique:
            unique[digest] = len(data)
            data.append(item.data)
        index[k] = unique[digest]
    return data, list(unique), index


@dataclass(frozen=True)
class ConditionalSizes:
    """C(x) of every item and C(x|y) of requested ordered pairs (y given, x compressed)."""

    sizes: np.ndarray
    given: np.ndarray
    target: np.ndarray
    conditional: np.ndarray
    stats: MatrixStats


def _singles(
    items: Sequence[Item],
    comp: Compressor,
    conditional: str,
    strand: str,
    engine: Engine,
    cache: SizeCache | None,
    progress: Progress | None,
) -> tuple[_Sizes, np.ndarray, np.ndarray, int]:
    """The checked job's sizes source, each item's index into the distinct contents, every
    distinct C(x), and how many of those came from the cache."""
    _check_job(comp, conditional, strand, items)
    data, digests, index = _distinct(items)
    sizes = _Sizes(data, digests, comp, SizeJob(comp.spec, conditional, strand), engine, cache,
                   progress)  # fmt: skip
    single, cached = sizes.fetch("single items", np.arange(len(data)), None)
    return sizes, index, single, int(cached.sum())


def conditional_sizes(
    items: Sequence[Item],
    pairs: Sequence[tuple[int, int]],
    comp: Compressor | str = "zstd",
    *,
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    jobs: int | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> ConditionalSizes:
    """C(x|y) for each (y, x) index pair into `items`, both directions as asked, and every C(x).

    By concatenation C(x|y) = C(yx) - C(y); primed, x compressed by a compressor primed with y.
    Sizes come from the cache where possible and are computed in tiles by the engine otherwise.
    """
    started = time.perf_counter()
    sizes, index, single, singles_cached = _singles(
        items, compressor(comp), conditional, strand, engine or LocalEngine(jobs), cache, progress
    )
    data = sizes.data
    requested = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    given, target = index[requested[:, 0]], index[requested[:, 1]]
    order = np.lexsort((target, given))
    found, found_cached = sizes.fetch("pairs", given[order], target[order])
    cached = int(found_cached.sum())
    paired = np.empty_like(found)
    paired[order] = found
    if conditional == "concat":
        paired = paired - single[given]
    stats = MatrixStats(
        pairs_computed=len(requested) - cached,
        pairs_from_cache=cached,
        singles_computed=len(data) - singles_cached,
        singles_from_cache=singles_cached,
        bytes_compressed=sizes.bytes_compressed,
        seconds=time.perf_counter() - started,
        identical_items=len(items) - len(data),
    )
    return ConditionalSizes(
        sizes=single[index],
        given=requested[:, 0],
        target=requested[:, 1],
        conditional=paired,
        stats=stats,
    )


def distance_matrix(
    items: Sequence[Item],
    comp: Compressor | str = "zstd",
    *,
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    jobs: int | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> DistanceMatrix:
    """The NCD matrix of `items` under a compressor.

    Each distinct content is compressed once, each unordered pair once (one direction, see the
    module docstring), and NCD(x, x) once per item. Negative values (real compressors give a few)
    are clipped to 0 and counted; values above 1 are kept and counted.

    >>> dm = distance_matrix(load_items(["genomes/"]), "zstd:level=19")  # doctest: +SKIP
    """
    started = time.perf_counter()
    comp = compressor(comp)
    sizes, index, single, singles_cached = _singles(
        items, comp, conditional, strand, engine or LocalEngine(jobs), cache, progress
    )
    _warn_beyond_window(comp, sizes.lengths)
    digests = sizes.digests
    m = len(sizes.data)
    diag = np.arange(m)

    # Condition the larger on the smaller: first = smaller C, ties broken by hash so that the
    # order, and so the cache key, does not depend on input order.
    tie = np.array([int.from_bytes(d[:8], "big") for d in digests], dtype=np.uint64)
    position = np.empty(m, dtype=np.int64)
    position[np.lexsort((tie, single))] = diag
    ii, jj = np.triu_indices(m, k=1)
    swap = position[ii] > position[jj]
    small, large = np.where(swap, jj, ii), np.where(swap, ii, jj)
    # Self pairs C(xx) join the pairs in one pass: no second wait for the slowest tile.
    given, target = np.concatenate([diag, small]), np.concatenate([diag, large])
    order = np.argsort(given, kind="stable")
    found = np.empty(len(given), dtype=np.int64)
    cached = np.empty(len(given), dtype=bool)
    found[order], cached[order] = sizes.fetch("pairs", given[order], target[order])
    self_sizes, pair_sizes = found[:m], found[m:]
    self_cached, pairs_cached = int(cached[:m].sum()), int(cached[m:].sum())
    if conditional == "concat":
        self_sizes = self_sizes - single
        pair_sizes = pair_sizes - single[small]
    self_unique = self_sizes / np.maximum(single, 1)
    square = np.zeros((m, m))
    square[small, large] = square[large, small] = pair_sizes / np.maximum(single[large], 1)
    square[diag, diag] = self_unique

    # Expand distinct contents back to items; identical items sit at their measured NCD(x, x).
    raw = square[np.ix_(index, index)]
    distances = raw.copy()
    distances[index[:, None] == index[None, :]] = 0.0
    upper = distances[np.triu_indices(len(items), k=1)]
    stats = MatrixStats(
        pairs_computed=len(small) - pairs_cached,
        pairs_from_cache=pairs_cached,
        singles_computed=m - singles_cached,
        singles_from_cache=singles_cached,
        self_pairs_computed=m - self_cached,
        bytes_compressed=sizes.bytes_compressed,
        seconds=time.perf_counter() - started,
        clipped_below_zero=int(np.count_nonzero(upper < 0)),
        above_one=int(np.count_nonzero(upper > 1)),
        identical_items=len(items) - m,
    )
    np.clip(distances, 0.0, None, out=distances)
    for array in (distances, raw):
        array.setflags(write=False)
    return DistanceMatrix(
        labels=tuple(item.name for item in items),
        distances=distances,
        sizes=single[index],
        self_distances=self_unique[index],
        raw=raw,
        compressor=comp.spec,
        conditional=conditional,
        strand=strand,
        classes=tuple(item.label for item in items) if any(i.label for i in items) else None,
        stats=stats,
    )

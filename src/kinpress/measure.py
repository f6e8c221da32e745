"""How and where sizes are measured: the settings as one value, the sizes themselves, and the
one rule for which item of a pair conditions the other.

C(x) is the compressed size of x; C(x|y) what x costs once y is known: C(yx) - C(y) by
concatenation, or the size of x compressed by a compressor primed with y. For C(x) >= C(y) the
larger of C(x|y) and C(y|x) is C(x|y) (symmetry of information, up to logarithmic terms), so of
any pair the item of smaller C (ties by content hash, `conditioning_order`) conditions the
other, one compression per pair, and every route (matrix, neighbours, origins) stores and finds
the same cached size. `ncd` turns a conditional size into the distance.
"""

from __future__ import annotations

import hashlib
import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Protocol

import numpy as np

from .cache import SizeCache
from .compressors import ADAPTERS, Compressor, SpecError, compressor
from .engine import Engine, LocalEngine, SizeJob, Tile, plan_tiles
from .items import InputError, Item, ItemLike, as_items

CONDITIONALS = ("concat", "primed")
STRANDS = ("one", "both")


class Progress(Protocol):
    """The one progress callback of the library, for every long call that takes ``progress=``
    (distance_matrix, conditional_sizes, the neighbour search, derived, origins, support).

    Called as ``progress(phase, done, total)`` whenever work finishes: ``done`` of ``total``
    units of ``phase`` are done. The phase names, for a person, what is counted: compressions
    to compute (``"single items"``, ``"pairs"``, with a note such as ``"pairs (round 2)"``) or
    bootstrap matrices (``"replicates"``). It is called from the calling thread, may skip
    values and must return quickly; what it shows is the caller's business.
    """

    def __call__(self, phase: str, done: int, total: int, /) -> None: ...


def staged(progress: Progress | None, stage: str) -> Progress | None:
    """`progress` with each phase told as part of `stage`: ``"pairs (held-out reference,
    content)"``, so that a person sees which of a command's measurements is under way and the
    counts of one do not seem to start over in the next."""
    if progress is None:
        return None

    def report(phase: str, done: int, total: int, /) -> None:
        progress(f"{phase} ({stage})", done, total)

    return report


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
class Measurement:
    """How and where sizes are measured: one value, built once per call from the public keyword
    arguments (`Measurement.of`) and handed inward whole.

    `compressor` measures; `conditional` is how C(x|y) is taken ("concat" or "primed");
    `strand` "both" lets a nucleotide sequence count as the smaller of itself and its reverse
    complement; `engine` runs the work (a `LocalEngine` or a `DaskEngine`); `cache` stores the
    sizes (None: none kept); `progress` is told how the work goes.

    >>> m = Measurement.of("zstd:level=3", engine=LocalEngine(1))
    >>> m.compressor.spec, m.conditional, m.strand, m.engine.jobs
    ('zstd:level=3', 'concat', 'one', 1)
    """

    compressor: Compressor
    conditional: str
    strand: str
    engine: Engine
    cache: SizeCache | None = None
    progress: Progress | None = None

    @classmethod
    def of(
        cls,
        comp: Compressor | str = "zstd",
        *,
        conditional: str = "concat",
        strand: str = "one",
        engine: Engine | None = None,
        cache: SizeCache | None = None,
        progress: Progress | None = None,
    ) -> Measurement:
        """The checked value; `engine` None runs on every core of this machine."""
        built = compressor(comp)
        if conditional not in CONDITIONALS:
            raise SpecError(f"unknown conditional {conditional!r}; use {' or '.join(CONDITIONALS)}")
        if conditional == "primed" and not built.primable:
            names = " or ".join(name for name, kind in ADAPTERS.items() if kind.primable)
            raise SpecError(f"{built.name} cannot be primed; use --conditional concat or {names}")
        if strand not in STRANDS:
            raise SpecError(f"unknown strand {strand!r}; use {' or '.join(STRANDS)}")
        return cls(built, conditional, strand, engine or LocalEngine(), cache, progress)

    def staged(self, stage: str) -> Measurement:
        """This measurement with its progress told as part of `stage` (see `staged`)."""
        return replace(self, progress=staged(self.progress, stage))

    @property
    def job(self) -> SizeJob:
        """What every tile of this measurement computes."""
        return SizeJob(self.compressor.spec, self.conditional, self.strand)


def content_digest(data: bytes) -> bytes:
    """The 128-bit BLAKE2b hash that keys cached sizes."""
    return hashlib.blake2b(data, digest_size=16).digest()


class Sizes:
    """Sizes for one measurement of some distinct contents: cached where possible, the rest
    computed by the engine in tiles."""

    def __init__(
        self, data: Sequence[bytes], digests: Sequence[bytes], measurement: Measurement
    ) -> None:
        self.data, self.digests = data, digests
        self.comp, self.job = measurement.compressor, measurement.job
        self.engine, self.cache = measurement.engine, measurement.cache
        self.progress = measurement.progress
        self.bytes_compressed = 0
        self.lengths = np.array([len(d) for d in data], dtype=np.int64)

    def fetch(
        self,
        phase: str,
        first: np.ndarray,
        second: np.ndarray | None,
        *,
        done: int = 0,
        total: int | None = None,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Sizes for singles (second None) or pairs, and which of them came from the cache.

        Progress counts the sizes this call computes, or, with `total`, places the call in a
        longer run of `total` sizes of which `done` are behind it (cached ones count as done).
        """
        method = "single" if second is None else self.job.pair_method
        keys = [
            (self.digests[f], b"" if second is None else self.digests[s])
            for f, s in zip(first, first if second is None else second, strict=True)
        ]
        stored = self.cache.get_many(self.comp.cache_key, method, keys) if self.cache else {}
        out = np.array([stored.get(k, -1) for k in keys], dtype=np.int64)
        cached = out >= 0
        missing = np.flatnonzero(~cached)
        # A key asked twice (the pairs (a, b) and (b, a) of two identical items both ask (u, u))
        # is computed once: two equal tiles would be told apart by nothing but their order.
        seen: dict[tuple[bytes, bytes], int] = {}
        todo = np.unique(
            np.array([seen.setdefault(keys[k], int(k)) for k in missing], dtype=np.int64)
        )
        if todo.size:
            start = 0 if total is None else done + int(cached.sum())
            scale = int(todo.size) if total is None else total
            self._compute(phase, method, first, second, todo, keys, out, (start, scale))
            for k in missing:
                out[k] = out[seen[keys[k]]]
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
        progress: tuple[int, int],
    ) -> None:
        tiles = plan_tiles(
            self.data,
            first[todo].tolist(),
            None if second is None else second[todo].tolist(),
            self.engine.jobs,
            target_bytes=4 << 20,
            prefix_once=self.job.method == "primed" or self.comp.continues,
        )
        where: dict[Tile, np.ndarray] = {}
        start = 0
        for tile in tiles:
            where[tile] = todo[start : start + len(tile.first)]
            start += len(tile.first)
        done, total = progress
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
                self.progress(phase, done, total)


def _check_items(measurement: Measurement, items: Sequence[Item]) -> None:
    if measurement.strand == "both":
        other = next((i for i in items if not i.nucleotide), None)
        if other is not None:
            raise InputError(
                f"{other.source}: --strand both needs nucleotide sequences; {other.name} is not one"
            )
    check_pair_count(items)


def check_pair_count(items: Sequence[object]) -> None:
    """Raise InputError with fewer than two items: nothing to compare."""
    if len(items) < 2:
        raise InputError(f"need at least two items to compare, got {len(items)}")


def warn_beyond_window(comp: Compressor, lengths: np.ndarray) -> None:
    """Warn of pairs longer together than the compressor's window."""
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
            stacklevel=4,  # the caller of distance_matrix or nearest_neighbours
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


def measure_singles(
    items: Sequence[Item],
    measurement: Measurement,
    before: Callable[[int], None] | None = None,
) -> tuple[Sizes, np.ndarray, np.ndarray, int]:
    """The checked measurement's sizes source, each item's index into the distinct contents,
    every distinct C(x), and how many of those came from the cache; `before` is called with the
    number of distinct contents before anything is compressed."""
    _check_items(measurement, items)
    data, digests, index = _distinct(items)
    if before is not None:
        before(len(data))
    sizes = Sizes(data, digests, measurement)
    single, cached = sizes.fetch("single items", np.arange(len(data)), None)
    return sizes, index, single, int(cached.sum())


def conditional_sizes(
    items: Sequence[ItemLike],
    pairs: Sequence[tuple[int, int]],
    comp: Compressor | str = "zstd",
    *,
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> ConditionalSizes:
    """C(x|y) for each (y, x) index pair into `items`, both directions as asked, and every C(x).

    By concatenation C(x|y) = C(yx) - C(y); primed, x compressed by a compressor primed with y.
    Sizes come from the cache where possible and are computed in tiles by the engine otherwise.
    The keyword arguments make the `Measurement` (`measure_conditional` takes one).
    """
    measurement = Measurement.of(
        comp, conditional=conditional, strand=strand, engine=engine, cache=cache, progress=progress
    )
    return measure_conditional(as_items(items), pairs, measurement)


def measure_conditional(
    items: Sequence[Item], pairs: Sequence[tuple[int, int]], measurement: Measurement
) -> ConditionalSizes:
    """`conditional_sizes` under a `Measurement`."""
    started = time.perf_counter()
    sizes, index, single, singles_cached = measure_singles(items, measurement)
    data = sizes.data
    requested = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    given, target = index[requested[:, 0]], index[requested[:, 1]]
    order = np.lexsort((target, given))
    found, found_cached = sizes.fetch("pairs", given[order], target[order])
    cached = int(found_cached.sum())
    paired = np.empty_like(found)
    paired[order] = found
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
        conditional=conditional_of(paired, single[given], measurement.conditional),
        stats=stats,
    )


def conditional_of(stored: np.ndarray, given: np.ndarray, conditional: str) -> np.ndarray:
    """C(x|y) from the sizes stored for pairs (y, x) and C(y) (`given`): C(yx) - C(y) by
    concatenation, the primed size as it is."""
    return stored - given if conditional == "concat" else stored


def ncd(conditional: np.ndarray, size: np.ndarray) -> np.ndarray:
    """NCD(x, y) = C(x|y) / C(x) for y conditioning x (`conditioning_order`), C(x) taken as 1
    at least; not clipped: a real compressor gives a few values below 0 and above 1.

    With C(x) >= C(y) this is the classic NCD (Li et al. 2004; Cilibrasi & Vitanyi 2005),
    max(C(x|y), C(y|x)) / max(C(x), C(y)); origins' and derived's ratios C(x | corpus) / C(x)
    are the same quotient with a corpus given.

    >>> ncd(np.array([30, 90]), np.array([100, 100])).tolist()
    [0.3, 0.9]
    """
    quotient: np.ndarray = conditional / np.maximum(size, 1)
    return quotient


def _tie(digest: bytes) -> int:
    return int.from_bytes(digest[:8], "big")


def conditioning_order(digests: Sequence[bytes], single: np.ndarray) -> np.ndarray:
    """The one rule for which item of a pair conditions the other: distinct contents in order
    of C(x), ties broken by content hash; of any pair, the earlier content conditions the later
    one, so that a pair's measurement (and its cache key) does not depend on the order of the
    inputs, whichever route (matrix, neighbours, origins, calibration) asks for it."""
    tie = np.array([_tie(d) for d in digests], dtype=np.uint64)
    return np.lexsort((tie, single))


def conditioning_rank(digests: Sequence[bytes], single: np.ndarray) -> np.ndarray:
    """Each distinct content's place in `conditioning_order`."""
    order = conditioning_order(digests, single)
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order))
    return rank


def conditioned(
    rank: np.ndarray, first: np.ndarray, second: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Pairs of contents as (given, target), each ordered by its `conditioning_rank`."""
    swap = rank[first] > rank[second]
    return np.where(swap, second, first), np.where(swap, first, second)


def conditions(size_a: int, digest_a: bytes, size_b: int, digest_b: bytes) -> bool:
    """Whether a conditions b: `conditioning_order` for one pair, where no arrays are at hand."""
    return (size_a, _tie(digest_a)) <= (size_b, _tie(digest_b))

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
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
import numpy.typing as npt

from ._version import __version__
from .cache import SizeCache
from .compressors import ADAPTERS, Compressor, SpecError, compressor
from .engine import Engine, LocalEngine, SizeJob, Tile, plan_tiles
from .items import InputError, Item

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


_CHECK_CELLS = 1 << 22  # cells per block of rows the validator reads at once


def _blocks(n: int) -> Iterator[slice]:
    """Blocks of rows of an n×n matrix, so checks hold at most a few MB of temporaries."""
    step = max(1, _CHECK_CELLS // max(n, 1))
    return (slice(start, min(start + step, n)) for start in range(0, n, step))


def check_distances(
    distances: npt.ArrayLike,
    labels: Sequence[str] | None = None,
    *,
    strict_diagonal: bool = False,
) -> npt.NDArray[np.float64]:
    """The one check of a distance matrix, called by every consumer (DistanceMatrix, trees,
    groups); returns it as float64, raising ValueError naming the first fault.

    Parameters
    ----------
    distances : array_like, n×n
        Must be non-empty and square; every value finite (no NaN or infinity: a distance not
        measured has no place in a matrix), non-negative, and symmetric within
        ``1e-5 · max(1, max d)`` (as the matrix readers allow: files other programs round to
        six decimals pass); a near-symmetric matrix is returned as (D + Dᵀ) / 2.
    labels : sequence of str, optional
        The items' names, one per row, distinct; faults then name the items.
    strict_diagonal : bool
        The diagonal rule, the same for every consumer: a non-zero diagonal is read as the
        items' measured distances to themselves, NCD(x, x), small but not zero with a real
        compressor, which no method uses: it is returned as zero. Groups pass True to refuse
        one instead (their functions take arrays from anyone, where a non-zero diagonal more
        likely means similarities or misaligned rows).

    Returns
    -------
    ndarray of float64
        ``distances`` itself when it needed no change (so a large matrix is not copied), else a
        new array; a caller that writes into it copies it first.

    Examples
    --------
    >>> check_distances([[0.05, 1.0], [1.0, 0.04]], ["a", "b"]).tolist()
    [[0.0, 1.0], [1.0, 0.0]]
    >>> check_distances([[0, 1.0], [1.2, 0]], ["a", "b"])
    Traceback (most recent call last):
    ...
    ValueError: distance matrix is not symmetric: 'a'→'b' is 1.0 but 'b'→'a' is 1.2
    """
    d = np.asarray(distances, dtype=np.float64)
    if d.ndim != 2 or d.shape[0] != d.shape[1] or d.shape[0] == 0:
        raise ValueError(f"distances must be a non-empty square matrix, got shape {d.shape}")
    n = d.shape[0]
    if labels is not None:
        if len(labels) != n:
            raise ValueError(f"{len(labels)} labels for a {n}×{n} distance matrix")
        if not all(isinstance(label, str) for label in labels):
            raise ValueError("labels must be strings")
        if len(set(labels)) != n:
            repeated = sorted(k for k, count in Counter(labels).items() if count > 1)
            raise ValueError(f"labels must be unique; repeated: {repeated}")

    def name(i: int) -> str:
        return repr(labels[i]) if labels is not None else f"item {i}"

    largest, asymmetric = 0.0, False
    for rows in _blocks(n):
        block = d[rows]
        for problem, where in (("not finite", ~np.isfinite(block)), ("negative", block < 0)):
            if where.any():
                i, j = (int(k) for k in np.argwhere(where)[0])
                i += rows.start
                raise ValueError(
                    f"distance between {name(i)} and {name(j)} is {problem}: {d[i, j]}"
                    " (distances must be finite and non-negative)"
                )
        largest = max(largest, float(block.max()))
        asymmetric = asymmetric or not np.array_equal(block, d[:, rows].T)
    if asymmetric:
        tolerance = 1e-5 * max(1.0, largest)
        for rows in _blocks(n):
            skew = np.abs(d[rows] - d[:, rows].T)
            if skew.max() > tolerance:
                i, j = divmod(int(skew.argmax()), n)
                i += rows.start
                raise ValueError(
                    f"distance matrix is not symmetric: {name(i)}→{name(j)} is {d[i, j]} "
                    f"but {name(j)}→{name(i)} is {d[j, i]}"
                )
        d = (d + d.T) / 2
    diagonal = np.diagonal(d)
    if diagonal.any():
        if strict_diagonal:
            i = int(np.flatnonzero(diagonal)[0])
            raise ValueError(
                f"distances must have a zero diagonal: {name(i)} is {diagonal[i]} from itself"
            )
        d = d.copy() if not asymmetric else d
        np.fill_diagonal(d, 0.0)
    return d


@dataclass(frozen=True)
class DistanceMatrix:
    """Labels, the symmetric non-negative distance array with zero diagonal, and its provenance.

    The array is checked by :func:`check_distances` when the value is made (a non-zero diagonal
    read as zero).

    `self_distances` holds the measured NCD(x, x), which a real compressor makes a little above
    zero (far above once x+x outgrows its window); `raw` (built when asked) is the unclipped
    symmetric matrix with the measured NCD(x, x) on its diagonal and between identical items.
    Only the clipped values are kept for it: `negatives` (content numbers and values, before
    clipping) and `content` (each item's content number), so that the matrix is held once.
    """

    labels: tuple[str, ...]
    distances: np.ndarray
    sizes: np.ndarray | None = None
    self_distances: np.ndarray | None = None
    content: np.ndarray | None = None
    negatives: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
    compressor: str = ""
    conditional: str = ""
    strand: str = "one"
    classes: tuple[str | None, ...] | None = None
    stats: MatrixStats = field(default_factory=MatrixStats)

    def __post_init__(self) -> None:
        checked = check_distances(self.distances, self.labels)
        if checked is not self.distances:
            object.__setattr__(self, "distances", checked)

    def __len__(self) -> int:
        return len(self.labels)

    def as_json(self, rows: bool = True) -> dict[str, Any]:
        """Labels, the compressor and method, per-item C(x) and NCD(x, x) (by label), run stats,
        the kinpress version, the known classes when there are any, and the distances (rounded
        to 8 decimals) unless not `rows` (`formats.json_lines` then streams them a row at a
        time)."""
        # formats reads and writes matrices, so it imports this module: imported when called.
        from .formats import json_ready

        doc: dict[str, Any] = {
            "labels": list(self.labels),
            "compressor": self.compressor,
            "conditional": self.conditional,
            "strand": self.strand,
            "sizes": {}
            if self.sizes is None
            else dict(zip(self.labels, map(int, self.sizes), strict=True)),
            "self_distances": {}
            if self.self_distances is None
            else dict(zip(self.labels, np.round(self.self_distances, 8), strict=True)),
            "stats": self.stats.as_dict(),
            "kinpress": __version__,
        }
        if self.classes is not None:
            doc["classes"] = dict(zip(self.labels, self.classes, strict=True))
        if rows:
            doc["distances"] = np.round(self.distances, 8)
        return dict(json_ready(doc))

    @property
    def raw(self) -> np.ndarray | None:
        """The unclipped matrix, NCD(x, x) on the diagonal and between identical items; a new
        array each time (None when the self distances are unknown, as in a matrix read back)."""
        if self.self_distances is None:
            return None
        raw = np.array(self.distances, dtype=np.float64)
        content = np.arange(len(self)) if self.content is None else self.content
        if self.negatives is not None:
            for small, large, value in zip(*self.negatives, strict=True):
                rows, cols = np.flatnonzero(content == small), np.flatnonzero(content == large)
                raw[np.ix_(rows, cols)] = value
                raw[np.ix_(cols, rows)] = value
        if self.content is not None and len(np.unique(content)) < len(self):
            for c in np.unique(content):
                same = np.flatnonzero(content == c)
                raw[np.ix_(same, same)] = self.self_distances[same[0]]
        np.fill_diagonal(raw, self.self_distances)
        return raw


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
        todo = np.flatnonzero(~cached)
        if todo.size:
            start = 0 if total is None else done + int(cached.sum())
            scale = int(todo.size) if total is None else total
            self._compute(phase, method, first, second, todo, keys, out, (start, scale))
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
    before: Callable[[int], None] | None = None,
) -> tuple[_Sizes, np.ndarray, np.ndarray, int]:
    """The checked job's sizes source, each item's index into the distinct contents, every
    distinct C(x), and how many of those came from the cache; `before` is called with the number
    of distinct contents before anything is compressed."""
    _check_job(comp, conditional, strand, items)
    data, digests, index = _distinct(items)
    if before is not None:
        before(len(data))
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


class TooLarge(ValueError):
    """A run that would need more memory than the machine has: refused before it starts."""


BYTES_PER_CELL = 12
"""Peak bytes per matrix cell: the float64 matrix, held once (8), and the bookkeeping of a chunk
of pairs, sized to the matrix (`_chunk_for`); measured 11.0 at 1,600 items and 10.7 at 5,000
(benchmarks/bench_scale.py --matrix-memory)."""

BASE_BYTES = 200 << 20
"""The interpreter, numpy, scipy, the compressor libraries and a chunk of pair bookkeeping."""


def matrix_memory_bytes(count: int, input_bytes: int, repeats: bool = False) -> int:
    """Estimated peak memory of `distance_matrix` on `count` items of `input_bytes` in all.

    The inputs are held twice at most (the items, and a joined pair while it is compressed in
    each worker), and every cell of the matrix costs BYTES_PER_CELL (8 more when some items
    share their content: the distinct contents' matrix is expanded to the items'), above a
    fixed BASE_BYTES.
    """
    per_cell = BYTES_PER_CELL + (8 if repeats else 0)
    return BASE_BYTES + 2 * input_bytes + per_cell * count * count


def available_memory() -> int | None:
    """Memory this process may still use: the system's available memory, lowered by a cgroup
    (container) limit; None where neither can be read."""
    found: list[int] = []
    try:
        with open("/proc/meminfo", encoding="ascii") as info:
            for line in info:
                if line.startswith("MemAvailable:"):
                    found.append(int(line.split()[1]) * 1024)
    except (OSError, ValueError, IndexError):
        pass
    try:
        with open("/sys/fs/cgroup/memory.max", encoding="ascii") as limit_file:
            limit = limit_file.read().strip()
        with open("/sys/fs/cgroup/memory.current", encoding="ascii") as used_file:
            used = int(used_file.read().strip())
        if limit != "max":
            found.append(int(limit) - used)
    except (OSError, ValueError):
        pass
    return min(found) if found else None


def check_matrix_memory(
    items: Sequence[Item], distinct: int | None = None, limit: int | None = None
) -> None:
    """Raise TooLarge when the matrix of `items` (`distinct` of them with contents of their own,
    default all) would need more memory (`matrix_memory_bytes`) than `limit` (default:
    `available_memory`)."""
    limit = available_memory() if limit is None else limit
    if limit is None:
        return
    total = sum(len(item.data) for item in items)
    repeats = distinct is not None and distinct < len(items)
    need = matrix_memory_bytes(len(items), total, repeats=repeats)
    if need > limit:
        raise TooLarge(
            f"a full matrix of {len(items):,} items needs about {need / 2**30:.1f} GiB of memory"
            f" and {limit / 2**30:.1f} GiB is available: find each item's nearest neighbours"
            " instead ('kinpress nearest'; 'kinpress groups' works from them by itself), compare"
            " fewer or larger items (a coarser --split), or run on a machine with more memory"
        )


def conditioning_order(digests: Sequence[bytes], single: np.ndarray) -> np.ndarray:
    """Distinct contents in order of C(x), ties broken by content hash: of any pair, the earlier
    content conditions the later one, so that a pair's measurement (and its cache key) does not
    depend on the order of the inputs, whichever route (matrix or neighbours) asks for it."""
    tie = np.array([int.from_bytes(d[:8], "big") for d in digests], dtype=np.uint64)
    return np.lexsort((tie, single))


def estimate_matrix_seconds(
    items: Sequence[Item], comp: Compressor | str, jobs: int, *, sample: int = 24, seed: int = 0
) -> float:
    """Wall time a full matrix of `items` would take on `jobs` workers: n(n-1)/2 pairs at the
    mean time of compressing `sample` concatenated pairs drawn at random (one thread, timed
    here), plus every item once. A rough figure for choosing a route, not a promise."""
    n = len(items)
    if n < 2:
        return 0.0
    comp = compressor(comp)
    rng = np.random.default_rng(seed)
    first = rng.integers(0, n, sample)
    second = (first + rng.integers(1, n, sample)) % n
    joined = [items[a].data + items[b].data for a, b in zip(first, second, strict=True)]
    comp.sizes(joined[:1])  # the first call builds the compressor's context
    started = time.perf_counter()
    comp.sizes(joined)
    per_pair = (time.perf_counter() - started) / sample
    return per_pair * (n * (n - 1) / 2 + n) / max(jobs, 1)


PAIR_CHUNK = 1 << 18
"""Pairs looked up and computed at a time: bounds the per-pair bookkeeping (cache keys, tiles)
whatever the number of items; each chunk still spreads over every worker."""


def _chunk_for(m: int) -> int:
    """Pairs per chunk for m distinct contents: PAIR_CHUNK, or less for smaller matrices, so that
    the chunk's bookkeeping (about 200 bytes a pair) stays a small share of the matrix's 8 bytes
    a cell (at least 16 chunks a run, none below 16,384 pairs)."""
    return max(1 << 14, min(PAIR_CHUNK, m * m // 128))


def _row_chunks(m: int, chunk: int) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """(first, second) position pairs p <= q of an m x m upper triangle, diagonal included, row
    after row, in chunks of whole rows holding about `chunk` pairs (one row at least)."""
    row = 0
    while row < m:
        stop, count = row, 0
        while stop < m and (count == 0 or count + (m - stop) <= chunk):
            count += m - stop
            stop += 1
        rows = np.arange(row, stop)
        first = np.repeat(rows, m - rows)
        starts = np.cumsum(m - rows) - (m - rows)
        second = first + np.arange(count) - np.repeat(starts, m - rows)
        yield first, second
        row = stop


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
    memory_limit: int | None = None,
) -> DistanceMatrix:
    """The NCD matrix of `items` under a compressor.

    Each distinct content is compressed once, each unordered pair once (one direction, see the
    module docstring), and NCD(x, x) once per item. Negative values (real compressors give a few)
    are clipped to 0 and counted; values above 1 are kept and counted.

    Before any compression the peak memory of the run is estimated (`matrix_memory_bytes`) and
    compared with `memory_limit` (default: the memory this machine has available,
    `available_memory`); a run that would not fit raises `TooLarge`.

    >>> dm = distance_matrix(load_items(["genomes/"]), "zstd:level=19")  # doctest: +SKIP
    """
    started = time.perf_counter()
    comp = compressor(comp)
    sizes, index, single, singles_cached = _singles(
        items,
        comp,
        conditional,
        strand,
        engine or LocalEngine(jobs),
        cache,
        progress,
        before=lambda distinct: check_matrix_memory(items, distinct, memory_limit),
    )
    _warn_beyond_window(comp, sizes.lengths)
    digests = sizes.digests
    m = len(sizes.data)

    # Condition the larger on the smaller: distinct contents in order of C (ties broken by hash,
    # so that the order, and so the cache key, does not depend on input order); each pair's
    # earlier content conditions the later one. Self pairs C(xx) come in the same pass, first in
    # their row, so that no second wait for the slowest tile is needed.
    position = conditioning_order(digests, single)
    counts = np.bincount(index, minlength=m)
    square = np.zeros((m, m))  # the one n x n array of the run (m x m, then n x n, with repeats)
    self_sizes = np.empty(m, dtype=np.int64)
    negatives: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
    total = m * (m + 1) // 2
    done = pairs_cached = self_cached = above_one = 0
    for first, second in _row_chunks(m, _chunk_for(m)):
        small, large = position[first], position[second]
        found, cached = sizes.fetch("pairs", small, large, done=done, total=total)
        done += len(found)
        own = first == second
        self_sizes[small[own]] = found[own]
        self_cached += int(cached[own].sum())
        pairs_cached += int(cached[~own].sum())
        small, large, found = small[~own], large[~own], found[~own]
        if conditional == "concat":
            found = found - single[small]
        ncd = found / np.maximum(single[large], 1)
        below = ncd < 0
        if below.any():
            negatives.append((small[below], large[below], ncd[below]))
            ncd[below] = 0.0
        above_one += int((counts[small] * counts[large])[ncd > 1].sum())
        square[small, large] = ncd
        square[large, small] = ncd
    if conditional == "concat":
        self_sizes = self_sizes - single
    self_unique = self_sizes / np.maximum(single, 1)
    # Expand distinct contents back to items; identical items are at distance 0.
    distances = square[np.ix_(index, index)] if m < len(items) else square
    del square
    for c in np.flatnonzero(counts > 1):
        same = np.flatnonzero(index == c)
        distances[np.ix_(same, same)] = 0.0
    np.fill_diagonal(distances, 0.0)
    clipped = [np.concatenate(parts) for parts in zip(*negatives, strict=True)]
    pairs = m * (m - 1) // 2
    stats = MatrixStats(
        pairs_computed=pairs - pairs_cached,
        pairs_from_cache=pairs_cached,
        singles_computed=m - singles_cached,
        singles_from_cache=singles_cached,
        self_pairs_computed=m - self_cached,
        bytes_compressed=sizes.bytes_compressed,
        seconds=time.perf_counter() - started,
        clipped_below_zero=int(sum((counts[s] * counts[b]).sum() for s, b, _ in negatives)),
        above_one=above_one,
        identical_items=len(items) - m,
    )
    distances.setflags(write=False)
    return DistanceMatrix(
        labels=tuple(item.name for item in items),
        distances=distances,
        sizes=single[index],
        self_distances=self_unique[index],
        content=index,
        negatives=(clipped[0], clipped[1], clipped[2]) if clipped else None,
        compressor=comp.spec,
        conditional=conditional,
        strand=strand,
        classes=tuple(item.label for item in items) if any(i.label for i in items) else None,
        stats=stats,
    )

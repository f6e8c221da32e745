"""Normalized compression distance: the DistanceMatrix value, the one validator of a distance
array, the matrix of items, and scikit-learn's pairwise distances; NCD of chosen pairs is in
:mod:`kinpress.pairs`, re-exported here.

NCD(x, y) = max(C(x|y), C(y|x)) / max(C(x), C(y))   (Li et al. 2004; Cilibrasi & Vitanyi 2005)

Sizes, the rule for which item of a pair conditions the other, and the formula itself
(`measure.ncd`) live in :mod:`kinpress.measure`; every distance here is computed through them.
"""

from __future__ import annotations

import time
from collections import Counter
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from ._version import __version__
from .cache import SizeCache
from .compressors import Compressor, compressor
from .engine import Engine
from .items import Item, ItemLike, as_items
from .measure import (
    MatrixStats,
    Measurement,
    Progress,
    Sizes,
    conditional_of,
    conditioning_order,
    measure_singles,
    ncd,
    warn_beyond_window,
)
from .pairs import PAIR_CHUNK as PAIR_CHUNK  # re-exported
from .pairs import PairDistances as PairDistances  # re-exported
from .pairs import cross_distances as cross_distances  # re-exported
from .pairs import pair_distances as pair_distances  # re-exported

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
        _check_labels(labels, n)

    def name(i: int) -> str:
        return repr(labels[i]) if labels is not None else f"item {i}"

    largest, asymmetric = _scan_values(d, name)
    if asymmetric:
        d = _symmetrised(d, largest, name)
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


def _check_labels(labels: Sequence[str], n: int) -> None:
    """One distinct string label per row of an n×n matrix, else ValueError."""
    if len(labels) != n:
        raise ValueError(f"{len(labels)} labels for a {n}×{n} distance matrix")
    if not all(isinstance(label, str) for label in labels):
        raise ValueError("labels must be strings")
    if len(set(labels)) != n:
        repeated = sorted(k for k, count in Counter(labels).items() if count > 1)
        raise ValueError(f"labels must be unique; repeated: {repeated}")


def _scan_values(d: npt.NDArray[np.float64], name: Callable[[int], str]) -> tuple[float, bool]:
    """The largest value of ``d`` and whether it is not exactly symmetric, read in blocks of
    rows; ValueError at the first value not finite or negative."""
    largest, asymmetric = 0.0, False
    for rows in _blocks(d.shape[0]):
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
    return largest, asymmetric


def _symmetrised(
    d: npt.NDArray[np.float64], largest: float, name: Callable[[int], str]
) -> npt.NDArray[np.float64]:
    """(D + Dᵀ) / 2 of a matrix symmetric within ``1e-5 · max(1, largest)``, else ValueError
    naming the first pair past it."""
    n = d.shape[0]
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
    result: npt.NDArray[np.float64] = (d + d.T) / 2
    return result


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

    def to_frame(self) -> Any:
        """The distances as a pandas DataFrame indexed by label both ways (`convert`)."""
        from .convert import matrix_frame

        return matrix_frame(self)

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


def estimate_matrix_seconds(
    items: Sequence[Item], comp: Compressor | str, cores: int, *, sample: int = 24, seed: int = 0
) -> float:
    """Wall time a full matrix of `items` would take spread over `cores` cores (what the
    estimate assumes, not where anything runs): n(n-1)/2 pairs at the mean time of compressing
    `sample` concatenated pairs drawn at random (one thread, timed here), plus every item once.
    A rough figure for choosing a route, not a promise."""
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
    return per_pair * (n * (n - 1) / 2 + n) / max(cores, 1)


def _chunk_for(m: int, cached: bool = False) -> int:
    """Pairs per chunk for m distinct contents: PAIR_CHUNK, or less for smaller matrices, so that
    the chunk's bookkeeping (about 200 bytes a pair) stays a small share of the matrix's 8 bytes
    a cell (at least 16 chunks a run, none below 16,384 pairs). With a size cache a chunk's
    keys, stored rows and lookup table cost some 600 bytes a pair, so chunks are a quarter as
    large (none below 4,096 pairs): a rerun read from the cache then peaks no higher than the
    run that computed it (measured at 5,000 items: 13.3 bytes a cell against 11.3 before)."""
    if cached:
        return max(1 << 12, min(PAIR_CHUNK, m * m // 512))
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
    items: Sequence[ItemLike],
    comp: Compressor | str = "zstd",
    *,
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
    memory_limit: int | None = None,
) -> DistanceMatrix:
    """The NCD matrix of `items` under a compressor.

    Each distinct content is compressed once, each unordered pair once (one direction, the
    smaller content conditioning the larger: `measure.conditioning_order`), and NCD(x, x) once
    per item. Negative values (real compressors give a few) are clipped to 0 and counted; values
    above 1 are kept and counted.

    Before any compression the peak memory of the run is estimated (`matrix_memory_bytes`) and
    compared with `memory_limit` (default: the memory this machine has available,
    `available_memory`); a run that would not fit raises `TooLarge`. The other keyword
    arguments make the `Measurement` (`measure_matrix` takes one).

    >>> dm = distance_matrix(load_items(["genomes/"]), "zstd:level=19")  # doctest: +SKIP
    """
    measurement = Measurement.of(
        comp, conditional=conditional, strand=strand, engine=engine, cache=cache, progress=progress
    )
    return measure_matrix(as_items(items), measurement, memory_limit=memory_limit)


@dataclass
class _PairPass:
    """What one pass over the distinct contents' pairs found besides their distances: C(xx) of
    each content, the values clipped below 0 (small, large, value), and counts of the pairs
    (self pairs apart) read from the cache and of the item pairs above 1."""

    self_sizes: np.ndarray
    negatives: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = field(default_factory=list)
    pairs_cached: int = 0
    self_cached: int = 0
    above_one: int = 0


def _measure_pairs(
    square: np.ndarray,
    sizes: Sizes,
    position: np.ndarray,
    single: np.ndarray,
    counts: np.ndarray,
    conditional: str,
) -> _PairPass:
    """Fill `square` (m x m) with the NCD of every pair of the m distinct contents, in chunks of
    rows; `position` is the conditioning order (each pair's earlier content conditions the
    later one), `counts` the items of each content. Self pairs C(xx) come in the same pass,
    first in their row, so that no second wait for the slowest tile is needed."""
    m = len(counts)
    passed = _PairPass(np.empty(m, dtype=np.int64))
    total = m * (m + 1) // 2
    done = 0
    for first, second in _row_chunks(m, _chunk_for(m, sizes.cache is not None)):
        small, large = position[first], position[second]
        found, cached = sizes.fetch("pairs", small, large, done=done, total=total)
        done += len(found)
        own = first == second
        passed.self_sizes[small[own]] = found[own]
        passed.self_cached += int(cached[own].sum())
        passed.pairs_cached += int(cached[~own].sum())
        small, large, found = small[~own], large[~own], found[~own]
        value = ncd(conditional_of(found, single[small], conditional), single[large])
        below = value < 0
        if below.any():
            passed.negatives.append((small[below], large[below], value[below]))
            value[below] = 0.0
        passed.above_one += int((counts[small] * counts[large])[value > 1].sum())
        square[small, large] = value
        square[large, small] = value
    return passed


def measure_matrix(
    items: Sequence[Item], measurement: Measurement, *, memory_limit: int | None = None
) -> DistanceMatrix:
    """`distance_matrix` under a `Measurement`."""
    started = time.perf_counter()
    comp, conditional = measurement.compressor, measurement.conditional
    sizes, index, single, singles_cached = measure_singles(
        items,
        measurement,
        before=lambda distinct: check_matrix_memory(items, distinct, memory_limit),
    )
    warn_beyond_window(comp, sizes.lengths)
    digests = sizes.digests
    m = len(sizes.data)

    # Distinct contents in conditioning order; each pair's earlier content conditions the later
    # one.
    position = conditioning_order(digests, single)
    counts = np.bincount(index, minlength=m)
    square = np.zeros((m, m))  # the one n x n array of the run (m x m, then n x n, with repeats)
    passed = _measure_pairs(square, sizes, position, single, counts, conditional)
    negatives = passed.negatives
    self_unique = ncd(conditional_of(passed.self_sizes, single, conditional), single)
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
        pairs_computed=pairs - passed.pairs_cached,
        pairs_from_cache=passed.pairs_cached,
        singles_computed=m - singles_cached,
        singles_from_cache=singles_cached,
        self_pairs_computed=m - passed.self_cached,
        bytes_compressed=sizes.bytes_compressed,
        seconds=time.perf_counter() - started,
        clipped_below_zero=int(sum((counts[s] * counts[b]).sum() for s, b, _ in negatives)),
        above_one=passed.above_one,
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
        strand=measurement.strand,
        classes=tuple(item.label for item in items) if any(i.label for i in items) else None,
        stats=stats,
    )


def pairwise_distances(
    X: Iterable[ItemLike],
    Y: Iterable[ItemLike] | None = None,
    compressor: str | Compressor = "zstd:level=19",
    *,
    conditional: str = "concat",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
) -> np.ndarray:
    """NCD between inputs, shaped (len(X), len(Y)), for scikit-learn's ``metric="precomputed"``.

    Without Y, the square matrix of `distance_matrix` (symmetric, zero diagonal, non-negative);
    with Y, the block of rows X and columns Y of the matrix of X + Y, measured the same way.
    Inputs are taken as `items.as_items` takes them: bytes, str (UTF-8), `Item`s or Biopython
    `SeqRecord`s.
    """
    measurement = Measurement.of(compressor, conditional=conditional, engine=engine, cache=cache)
    rows = as_items(X, "x")
    if Y is None:
        if len(rows) < 2:
            return np.zeros((len(rows), len(rows)))
        return np.array(measure_matrix(rows, measurement).distances)
    return cross_distances(rows, as_items(Y, "y"), measurement)

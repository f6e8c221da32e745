"""Each item's k nearest items under NCD, without computing all pairs.

A full matrix costs n(n-1)/2 compressions and n^2 floats; for 10^5 items that is 5 x 10^9
compressions and 80 GB. Nearest neighbours need far fewer pairs, found in two steps and measured
exactly (the same NCD, engine, tiles and size cache as `distance_matrix`):

1. Sketch candidates. Each distinct content's set of `shingle`-byte substrings
   (`derived.shingle_hashes`) is summarised by a MinHash signature of `num_perm` values (Broder
   1997, "On the resemblance and containment of documents"). As in the LSH Forest (Bawa, Condie
   & Ganesan 2005, "LSH Forest: self-tuning indexes for similarity search", WWW), `trees` sorted
   orders are built, each on `depth` signature values of its own: contents sharing a long prefix
   sit side by side, so the `window` contents either side of an item are likely similar. That
   pool is ranked by the estimated Jaccard index (the share of agreeing signature values) and
   each item's `first` best are measured.
2. Neighbourhood rounds (NN-descent, Dong, Moses & Li 2011, "Efficient k-nearest neighbor graph
   construction for generic similarity measures", WWW): a neighbour of a neighbour is likely a
   neighbour. Each round proposes, from the entries that entered the lists in the round before,
   the items two steps away (i -> m -> j) and the pairs of items listed by one item (m -> i,
   m -> j), ranks them by the triangle bound d(i, m) + d(m, j) (NCD is close to a metric), and
   measures for every item up to `step` proposals not measured yet. Rounds stop when fewer than
   `delta` n k list entries changed (NN-descent's rule) or after `rounds` rounds.

The number of pairs measured per item adapts to the data: an item whose list stops changing
proposes nothing more, one in a crowded neighbourhood keeps exploring. Items with the same bytes
are at distance 0 without any compression. For small sets (n <= `exhaustive_below`) every pair
is measured, which is then cheaper than the search.
"""

from __future__ import annotations

import time
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .cache import SizeCache
from .compressors import Compressor
from .derived import shingle_hashes
from .distance import PAIR_CHUNK, PairDistances, measure_matrix
from .engine import Engine
from .groups import Grouping
from .items import Item, ItemLike, as_items
from .measure import MatrixStats, Measurement, Progress, measure_singles, warn_beyond_window

_BATCH = 1 << 12


@dataclass(frozen=True)
class Search:
    """How the neighbour search proposes pairs (see the module docstring); None: from k.

    Lists are kept `least` long at least whatever k (and cut to k at the end): short lists
    explore too narrow a neighbourhood. On 10,000 generated chunks of 30 sources (crowded, as
    10^5 chunks of 300 sources are), recall of the true 10 nearest was 0.77 with lists of 10 and
    at most 10 rounds (0.81 at 10^5), 0.80 with 30 rounds, 0.95 with lists of 16 (1.6 times the
    pairs, 2.2 % of all there).
    """

    shingle: int = 8
    num_perm: int = 64
    trees: int = 8
    depth: int = 4
    window: int = 6
    first: int | None = None
    step: int | None = None
    rounds: int = 30
    delta: float = 0.002
    exhaustive_below: int = 200
    least: int = 16
    seed: int = 0

    def first_for(self, k: int) -> int:
        """Sketch candidates measured per item: `first`, by default 2k."""
        return self.first if self.first is not None else 2 * k

    def step_for(self, k: int) -> int:
        """Proposals measured per item and round: `step`, by default k."""
        return self.step if self.step is not None else k


@dataclass(frozen=True)
class Neighbours:
    """Each item's k nearest other items and their NCD, nearest first.

    ``index[i, r]`` is the item at rank r + 1 from item i (-1 where fewer than k were found) and
    ``distances[i, r]`` its NCD (clipped at 0, as in a matrix; inf where missing). ``pairs`` is
    the number of distinct item pairs measured (computed or from the cache), against
    ``possible`` = n(n-1)/2; ``rounds`` the neighbourhood rounds run.
    """

    labels: tuple[str, ...]
    index: np.ndarray
    distances: np.ndarray
    k: int
    compressor: str
    conditional: str
    strand: str
    pairs: int
    possible: int
    rounds: int
    exhaustive: bool
    stats: MatrixStats

    def __len__(self) -> int:
        return len(self.labels)

    @property
    def fraction(self) -> float:
        """Pairs measured as a share of all pairs."""
        return self.pairs / max(self.possible, 1)

    def rows(self) -> Iterator[tuple[str, int, str, float]]:
        """(item, rank, neighbour, ncd) for every found neighbour, rank from 1."""
        for i, name in enumerate(self.labels):
            for r in range(self.k):
                j = int(self.index[i, r])
                if j >= 0:
                    yield name, r + 1, self.labels[j], float(self.distances[i, r])

    def to_frame(self) -> Any:
        """One pandas row per found neighbour: item, rank, neighbour, ncd (`convert`)."""
        from .convert import neighbours_frame

        return neighbours_frame(self)

    def as_json(self) -> dict[str, object]:
        """The neighbour lists per item, how they were measured and what they cost."""
        return {
            "k": self.k,
            "compressor": self.compressor,
            "conditional": self.conditional,
            "strand": self.strand,
            "pairs_measured": self.pairs,
            "pairs_possible": self.possible,
            "rounds": self.rounds,
            "exhaustive": self.exhaustive,
            "items": [
                {
                    "item": name,
                    "neighbours": [
                        {"item": self.labels[int(j)], "ncd": round(float(d), 8)}
                        for j, d in zip(self.index[i], self.distances[i], strict=True)
                        if j >= 0
                    ],
                }
                for i, name in enumerate(self.labels)
            ],
            "stats": self.stats.as_dict(),
        }


def signatures(data: Sequence[bytes], shingle: int, num_perm: int, seed: int) -> np.ndarray:
    """MinHash signatures (rows) of the `shingle`-byte substring sets of `data`.

    h_p(S) = min over s in S of (a_p s + b_p) mod 2^32, odd a_p, drawn from `seed`, the scheme
    `derived.sketches` uses; an empty content gets the all-ones signature.
    """
    rng = np.random.default_rng(seed)
    multiply = rng.integers(0, 1 << 32, num_perm, dtype=np.uint64).astype(np.uint32) | 1
    add = rng.integers(0, 1 << 32, num_perm, dtype=np.uint64).astype(np.uint32)
    out = np.full((len(data), num_perm), np.iinfo(np.uint32).max, dtype=np.uint32)
    for row, content in enumerate(data):
        hashes = shingle_hashes(content, shingle)
        for start in range(0, len(hashes), _BATCH):
            chunk = hashes[start : start + _BATCH, None] * multiply + add
            np.minimum(out[row], chunk.min(axis=0), out=out[row])
    return out


def _similarity(sig: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Estimated Jaccard index of pairs: the share of equal signature values."""
    out = np.empty(len(a))
    for start in range(0, len(a), PAIR_CHUNK):
        stop = start + PAIR_CHUNK
        out[start:stop] = (sig[a[start:stop]] == sig[b[start:stop]]).mean(axis=1)
    return out


def _best_per_item(a: np.ndarray, b: np.ndarray, score: np.ndarray, per_item: int) -> np.ndarray:
    """Mask of the pairs among the `per_item` lowest scores of either of their items."""
    ends = np.concatenate([a, b])
    pair = np.concatenate([np.arange(len(a))] * 2)
    order = np.lexsort((pair, np.concatenate([score, score]), ends))
    sorted_ends = ends[order]
    rank = np.arange(len(order)) - np.searchsorted(sorted_ends, sorted_ends, side="left")
    keep = np.zeros(len(a), dtype=bool)
    keep[pair[order][rank < per_item]] = True
    return keep


def _unique_pairs(
    a: np.ndarray, b: np.ndarray, n: int, score: np.ndarray
) -> tuple[np.ndarray, ...]:
    """Pairs as (low, high) without self pairs, each once with its lowest score."""
    low, high = np.minimum(a, b), np.maximum(a, b)
    valid = low != high
    low, high, score = low[valid], high[valid], score[valid]
    key = low.astype(np.int64) * n + high
    order = np.lexsort((score, key))
    key, score = key[order], score[order]
    first = np.ones(len(key), dtype=bool)
    first[1:] = key[1:] != key[:-1]
    key, score = key[first], score[first]
    return key // n, key % n, key, score


def _forest_pairs(sig: np.ndarray, content: np.ndarray, search: Search) -> tuple[np.ndarray, ...]:
    """Candidate item pairs: neighbours within `window` in each tree's sorted order."""
    n = len(content)
    items_sig = sig[content]
    a_parts, b_parts = [], []
    for tree in range(search.trees):
        columns = items_sig[:, tree * search.depth : (tree + 1) * search.depth]
        order = np.lexsort(columns.T[::-1])
        for offset in range(1, min(search.window, n - 1) + 1):
            a_parts.append(order[:-offset])
            b_parts.append(order[offset:])
    a, b = np.concatenate(a_parts), np.concatenate(b_parts)
    low, high, key, _ = _unique_pairs(a, b, n, np.zeros(len(a)))
    return low, high, key


@dataclass
class _Lists:
    """The current neighbour lists, which entries are new since the last round, what is measured."""

    index: np.ndarray
    distances: np.ndarray
    new: np.ndarray
    measured: np.ndarray

    @classmethod
    def empty(cls, n: int, k: int) -> _Lists:
        return cls(
            index=np.full((n, k), -1, dtype=np.int64),
            distances=np.full((n, k), np.inf),
            new=np.zeros((n, k), dtype=bool),
            measured=np.zeros(0, dtype=np.int64),
        )

    def is_measured(self, key: np.ndarray) -> np.ndarray:
        where = np.searchsorted(self.measured, key)
        where = np.minimum(where, max(len(self.measured) - 1, 0))
        return self.measured[where] == key if len(self.measured) else np.zeros(len(key), bool)

    def add(self, a: np.ndarray, b: np.ndarray, key: np.ndarray, d: np.ndarray) -> int:
        """Merge measured pairs (a, b) at distance d into both items' lists; return the number of
        list entries that changed."""
        n, k = self.index.shape
        self.measured = np.union1d(self.measured, key)
        rows = np.concatenate([np.repeat(np.arange(n), k), a, b])
        cols = np.concatenate([self.index.ravel(), b, a])
        dist = np.concatenate([self.distances.ravel(), d, d])
        fresh = np.concatenate([np.zeros(n * k, dtype=bool), np.ones(2 * len(a), dtype=bool)])
        valid = cols >= 0
        rows, cols, dist, fresh = rows[valid], cols[valid], dist[valid], fresh[valid]
        order = np.lexsort((cols, dist, rows))
        rows, cols, dist, fresh = rows[order], cols[order], dist[order], fresh[order]
        rank = np.arange(len(rows)) - np.searchsorted(rows, rows, side="left")
        keep = rank < k
        self.index.fill(-1)
        self.distances.fill(np.inf)
        self.new.fill(False)
        self.index[rows[keep], rank[keep]] = cols[keep]
        self.distances[rows[keep], rank[keep]] = dist[keep]
        self.new[rows[keep], rank[keep]] = fresh[keep]
        return int(fresh[keep].sum())

    def proposals(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Unmeasured pairs two steps apart through a new list entry, with their triangle bound:
        i -> m -> j (bound d(i,m) + d(m,j)) and i <- m -> j (d(m,i) + d(m,j)). Made for a block
        of items at a time, each block's pairs reduced before the next, so that the n k^2 raw
        proposals are never held at once (at 10^5 items they took 2 GB)."""
        n, k = self.index.shape
        keys, bounds = [], []
        block = max(1, (1 << 20) // (k * k))
        for start in range(0, n, block):
            rows = np.arange(start, min(n, start + block))
            a, b, bound = self._two_steps(rows)
            _, _, key, bound = _unique_pairs(a, b, n, bound)
            fresh = ~self.is_measured(key)
            keys.append(key[fresh])
            bounds.append(bound[fresh])
        key = np.concatenate(keys)
        return _unique_pairs(key // n, key % n, n, np.concatenate(bounds))  # type: ignore[return-value]

    def _two_steps(self, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Pairs i -> m -> j for i in `rows`, and pairs listed together by m in `rows`."""
        k = self.index.shape[1]
        a_parts, b_parts, bound_parts = [], [], []
        index, distances, new = self.index[rows], self.distances[rows], self.new[rows]
        valid = index >= 0
        i = np.repeat(rows, k)[valid.ravel()]
        m, d1, n1 = index[valid], distances[valid], new[valid]
        for hop in range(k):  # i -> m -> index[m, hop]
            j, d2, n2 = self.index[m, hop], self.distances[m, hop], self.new[m, hop]
            use = (j >= 0) & (n1 | n2)
            a_parts.append(i[use])
            b_parts.append(j[use])
            bound_parts.append(d1[use] + d2[use])
        for p in range(k):  # m -> index[m, p] and m -> index[m, q]
            for q in range(p + 1, k):
                x, y = index[:, p], index[:, q]
                use = (x >= 0) & (y >= 0) & (new[:, p] | new[:, q])
                a_parts.append(x[use])
                b_parts.append(y[use])
                bound_parts.append(distances[use, p] + distances[use, q])
        return np.concatenate(a_parts), np.concatenate(b_parts), np.concatenate(bound_parts)


def _all_pairs(n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    a, b = np.triu_indices(n, 1)
    a, b = a.astype(np.int64), b.astype(np.int64)
    return a, b, a * n + b


def _searched(
    lists: _Lists,
    measure: PairDistances,
    data: Sequence[bytes],
    content: np.ndarray,
    search: Search,
) -> int:
    """Fill `lists` by sketch candidates and neighbourhood rounds; return the rounds run."""
    n, k = lists.index.shape
    sig = signatures(data, search.shingle, search.num_perm, search.seed)
    low, high, key = _forest_pairs(sig, content, search)
    similarity = _similarity(sig, content[low], content[high])
    keep = _best_per_item(low, high, -similarity, search.first_for(k))
    low, high, key = low[keep], high[keep], key[keep]
    lists.add(low, high, key, measure(low, high, "pairs (sketch candidates)"))
    rounds = 0
    for rounds in range(1, search.rounds + 1):
        low, high, key, bound = lists.proposals()
        keep = _best_per_item(low, high, bound, search.step_for(k))
        if not keep.any():
            rounds -= 1
            break
        low, high, key = low[keep], high[keep], key[keep]
        changed = lists.add(low, high, key, measure(low, high, f"pairs (round {rounds})"))
        if changed < search.delta * n * k:
            break
    return rounds


def nearest_neighbours(
    items: Sequence[ItemLike],
    comp: Compressor | str = "zstd",
    *,
    k: int = 10,
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
    search: Search | None = None,
) -> Neighbours:
    """Each item's `k` nearest other items under NCD (method in the module docstring).

    Pairs are measured exactly as in `distance_matrix` (one direction, the smaller content
    conditioning the larger, negative values clipped to 0), through the same engine, tiles and
    cache, so a matrix and a neighbour search of the same items share every size they compute.
    The keyword arguments `conditional` to `progress` make the `Measurement`.
    """
    measurement = Measurement.of(
        comp, conditional=conditional, strand=strand, engine=engine, cache=cache, progress=progress
    )
    return _nearest(as_items(items), measurement, k, search or Search())


def _nearest(items: Sequence[Item], measurement: Measurement, k: int, search: Search) -> Neighbours:
    started = time.perf_counter()
    if k < 1:
        raise ValueError(f"k must be at least 1, got {k}")
    sizes, content, single, singles_cached = measure_singles(items, measurement)
    warn_beyond_window(measurement.compressor, sizes.lengths)
    n = len(items)
    k = min(k, n - 1)
    measure = PairDistances(sizes, content, single, measurement.conditional)
    lists = _Lists.empty(n, min(max(k, search.least), n - 1))
    exhaustive = n <= search.exhaustive_below
    if exhaustive:
        a, b, key = _all_pairs(n)
        lists.add(a, b, key, measure(a, b, "pairs"))
        rounds = 0
    else:
        rounds = _searched(lists, measure, sizes.data, content, search)
    stats = MatrixStats(
        pairs_computed=measure.computed,
        pairs_from_cache=measure.cached,
        singles_computed=len(sizes.data) - singles_cached,
        singles_from_cache=singles_cached,
        bytes_compressed=sizes.bytes_compressed,
        seconds=time.perf_counter() - started,
        clipped_below_zero=measure.clipped,
        identical_items=n - len(sizes.data),
    )
    return Neighbours(
        labels=tuple(item.name for item in items),
        index=lists.index[:, :k].copy(),
        distances=lists.distances[:, :k].copy(),
        k=k,
        compressor=measurement.compressor.spec,
        conditional=measurement.conditional,
        strand=measurement.strand,
        pairs=len(lists.measured),
        possible=n * (n - 1) // 2,
        rounds=rounds,
        exhaustive=exhaustive,
        stats=stats,
    )


def exact_neighbours(distances: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The k nearest other items of every row of a full distance matrix: (index, distances)."""
    d = np.array(distances, dtype=np.float64)
    np.fill_diagonal(d, np.inf)
    k = min(k, len(d) - 1)
    index = np.argsort(d, axis=1, kind="stable")[:, :k]
    return index, np.take_along_axis(d, index, axis=1)


def recall(found: np.ndarray, rows: np.ndarray, queries: Sequence[int], k: int) -> float:
    """Mean share of each query's true k nearest that `found` (its neighbour index rows) holds.

    `rows[q]` is query q's exact distance to every item. A found neighbour counts when its exact
    distance is at most the k-th smallest (so ties at the k-th place do not count against it).
    """
    hits = []
    for row, q in zip(rows, queries, strict=True):
        d = np.array(row, dtype=np.float64)
        d[q] = np.inf
        kth = np.partition(d, k - 1)[k - 1]
        got = [j for j in found[q][:k] if j >= 0]
        hits.append(sum(d[j] <= kth + 1e-12 for j in got) / k)
    return float(np.mean(hits))


SAMPLE_ITEMS = 800
"""Items whose full matrix scores the sparse groups' candidates (silhouettes on a sample)."""


@dataclass(frozen=True)
class SparseGroups:
    """Groups made from neighbour lists: the grouping, the lists, and the scoring sample."""

    grouping: Grouping
    neighbours: Neighbours
    sample: tuple[int, ...]
    sample_pairs_computed: int


def sparse_groups(
    items: Sequence[ItemLike],
    comp: Compressor | str = "zstd",
    *,
    k: int | None = None,
    cut: float | None = None,
    report_outliers: bool = False,
    neighbours: int = 10,
    sample_items: int = SAMPLE_ITEMS,
    seed: int = 0,
    conditional: str = "concat",
    strand: str = "one",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
    search: Search | None = None,
) -> SparseGroups:
    """Flat groups without a full matrix: each item's `neighbours` nearest
    (`nearest_neighbours`), then `groups.find_groups_sparse` with silhouettes measured on the
    full matrix of `sample_items` items (a quarter of them at most) drawn at random (`seed`),
    under the same `Measurement` (made from `conditional` to `progress`); `k`, `cut` and
    `report_outliers` as in `groups.find_groups`."""
    from .groups import find_groups_sparse

    measurement = Measurement.of(
        comp, conditional=conditional, strand=strand, engine=engine, cache=cache, progress=progress
    )
    items = as_items(items)
    found = _nearest(items, measurement, neighbours, search or Search())
    rng = np.random.default_rng(seed)
    count = min(sample_items, max(2, len(items) // 4))  # never near a full matrix
    sample = np.sort(rng.choice(len(items), count, replace=False))
    dm = measure_matrix([items[i] for i in sample], measurement)
    grouping = find_groups_sparse(
        found.index, found.distances, sample, dm.distances, k=k, cut=cut,
        report_outliers=report_outliers,
    )  # fmt: skip
    return SparseGroups(grouping, found, tuple(int(i) for i in sample), dm.stats.pairs_computed)

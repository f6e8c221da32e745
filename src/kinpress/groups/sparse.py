"""Flat groups from each item's nearest neighbours and a measured sample (see kinpress.groups)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt
from sklearn.cluster import HDBSCAN

from ..distance import check_distances
from .dense import (
    _CORE_NEIGHBOURS,
    _TINY,
    _best,
    _Candidate,
    _group_ids,
    _grouping,
    _renumber,
    _silhouettes,
    _size_grid,
)
from .result import OUTLIER, FloatArray, Grouping, IntArray

# Sparse route: groups from each item's nearest neighbours and a dense sample.
#
# HDBSCAN* needs, for each item, its core distance (the distance to its m-th nearest neighbour)
# and a minimum spanning tree of mutual-reachability distances. Both come from a k-nearest-
# neighbour graph with k >= m: the core distances exactly, and the spanning tree up to edges
# between groups no item of which lists a member of the other (joined here by links just
# longer than any listed distance, so such groups meet only at the top of the hierarchy). The
# silhouette that chooses among candidates is computed on a random sample of items whose full
# matrix is measured (silhouettes on a subsample, as in Rousseeuw's CLARA of Kaufman & Rousseeuw
# 1990, chapter 3).


def neighbour_graph(index: npt.ArrayLike, distances: npt.ArrayLike) -> Any:
    """The symmetric sparse graph (CSR) of neighbour lists: an edge i - j at their distance when
    either lists the other; zero distances are stored as 1e-12 so that they stay edges, and
    components are chained by links just longer than the longest listed distance. (Much longer
    links would let a component that is born with them stay one group: its stability in the
    density hierarchy grows with the length of the link it is born at.)"""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    idx = np.asarray(index)
    dist = np.asarray(distances, dtype=np.float64)
    n = idx.shape[0]
    rows = np.repeat(np.arange(n), idx.shape[1])
    valid = idx.ravel() >= 0
    low = np.minimum(rows[valid], idx.ravel()[valid])
    high = np.maximum(rows[valid], idx.ravel()[valid])
    keys, first = np.unique(low.astype(np.int64) * n + high, return_index=True)
    a, b = keys // n, keys % n
    d = np.maximum(dist.ravel()[valid][first], _TINY)
    both = (np.concatenate([a, b]), np.concatenate([b, a]))
    graph = coo_matrix((np.concatenate([d, d]), both), shape=(n, n)).tocsr()
    count, labels = connected_components(graph, directed=False)
    if count > 1:
        firsts = np.unique(labels, return_index=True)[1]
        link = float(d.max(initial=0.0)) * (1 + 1e-9) + _TINY
        ends = (
            np.concatenate([firsts[:-1], firsts[1:]]),
            np.concatenate([firsts[1:], firsts[:-1]]),
        )
        extra = coo_matrix((np.full(2 * (count - 1), link), ends), shape=(n, n))
        graph = (graph + extra).tocsr()
    return graph


def find_groups_sparse(
    index: npt.ArrayLike,
    distances: npt.ArrayLike,
    sample: npt.ArrayLike,
    sample_distances: npt.ArrayLike,
    *,
    k: int | None = None,
    cut: float | None = None,
    report_outliers: bool = False,
) -> Grouping:
    """Flat groups from neighbour lists, as `find_groups` makes them from a full matrix.

    ``index[i]`` lists item i's nearest other items (-1 for none), ``distances[i]`` their
    distances; ``sample`` are item numbers whose full matrix is ``sample_distances``. The density
    hierarchy is HDBSCAN* on the neighbour graph (`neighbour_graph`; same core distances as the
    dense route), candidates over the same grid of minimum sizes are scored by the mean
    silhouette of the sampled items, outliers join the group nearest along the graph (shortest
    paths from grouped items). With ``k`` and no candidate of exactly k groups, the candidate of
    the nearest count is taken (method "+nearest-count"): merging and splitting need distances
    between all members. A group's medoid is its member closest on average to the neighbours
    it lists in its own group; its silhouette the mean over its sampled members (NaN if none).
    """
    graph = neighbour_graph(index, distances)
    n = graph.shape[0]
    idx = np.asarray(index)
    rows = np.asarray(sample, dtype=np.intp)
    d = check_distances(sample_distances, strict_diagonal=True)
    if k is not None and not 1 <= k <= n:
        raise ValueError(f"k must be an integer from 1 to the number of items ({n}), got {k!r}")
    neighbours = min(_CORE_NEIGHBOURS, n)
    scorer = _SampleScore(graph, rows, d)
    if cut is not None:
        labels = _sparse_cut(graph, cut, neighbours)
        return scorer.summary(idx, distances, labels, "density-cut", None, neighbours, cut, None,
                              report_outliers)  # fmt: skip
    found: dict[bytes, _Candidate] = {}
    for size in _size_grid(n):
        labels = np.asarray(_sparse_density(graph, size, neighbours).labels_, dtype=np.intp)
        if labels.max() >= 0 and labels.tobytes() not in found:
            found[labels.tobytes()] = scorer.candidate(size, labels)
    candidates = list(found.values()) or [_Candidate(None, np.zeros(n, dtype=np.intp), 1, math.nan)]
    step = ""
    if k is None:
        best = _best(candidates)
    else:
        nearest = min(abs(c.count - k) for c in candidates)
        best = _best([c for c in candidates if abs(c.count - k) == nearest])
        step = "" if nearest == 0 else "+nearest-count"
    method = ("one-group" if best.min_size is None else "density") + step
    return scorer.summary(idx, distances, best.labels, method, best.min_size, neighbours, None, k,
                          report_outliers)  # fmt: skip


def _sparse_density(graph: Any, min_size: int, neighbours: int) -> HDBSCAN:
    # The graph does not store an item's zero distance to itself, which the dense route counts
    # among its neighbours: one fewer gives the same core distance.
    model = HDBSCAN(
        metric="precomputed",
        min_cluster_size=min_size,
        min_samples=max(1, neighbours - 1),
        copy=True,
    )
    return model.fit(graph)


def _sparse_cut(graph: Any, cut: float, neighbours: int) -> IntArray:
    model = _sparse_density(graph, 2, neighbours)
    labels: IntArray = np.asarray(model.dbscan_clustering(cut, min_cluster_size=2), dtype=np.intp)
    if np.all(labels == OUTLIER):
        return np.arange(graph.shape[0], dtype=np.intp)
    return labels


class _SampleScore:
    """Outliers attached along the graph, silhouettes on the sampled items' full matrix."""

    def __init__(self, graph: Any, sample: IntArray, d: FloatArray) -> None:
        self.graph, self.sample, self.d = graph, sample, d

    def attach(self, labels: IntArray) -> IntArray:
        from scipy.sparse.csgraph import dijkstra

        grouped = np.flatnonzero(labels != OUTLIER)
        loose = np.flatnonzero(labels == OUTLIER)
        out = labels.copy()
        if loose.size and grouped.size:
            _, _, sources = dijkstra(
                self.graph, directed=False, indices=grouped, min_only=True,
                return_predecessors=True,
            )  # fmt: skip
            out[loose] = labels[sources[loose]]
        return out

    def silhouettes(self, labels: IntArray) -> FloatArray:
        """Silhouette of each sampled item within the sample (NaN where undefined)."""
        return _silhouettes(self.d, labels[self.sample])

    def candidate(self, min_size: int | None, labels: IntArray) -> _Candidate:
        values = self.silhouettes(self.attach(labels))
        mean = float(np.nanmean(values)) if np.any(~np.isnan(values)) else math.nan
        return _Candidate(min_size, labels, len(_group_ids(labels)), mean)

    def summary(
        self,
        index: IntArray,
        distances: npt.ArrayLike,
        raw: IntArray,
        method: str,
        min_size: int | None,
        neighbours: int,
        cut: float | None,
        requested_k: int | None,
        report_outliers: bool,
    ) -> Grouping:
        labels = _renumber(raw if report_outliers else self.attach(raw))
        sil = np.full(labels.shape, np.nan)
        sil[self.sample] = self.silhouettes(labels)
        medoids = _sparse_medoids(index, np.asarray(distances, dtype=np.float64), labels)
        return _grouping(
            labels, raw == OUTLIER, sil, lambda g, members: medoids[g],
            method, min_size, neighbours, cut, requested_k, report_outliers,
        )  # fmt: skip


def _sparse_medoids(index: IntArray, distances: FloatArray, labels: IntArray) -> dict[int, int]:
    """Per group, the member with the smallest mean distance to the neighbours it lists in its
    own group (members listing none count as farthest; lowest index on ties)."""
    safe = np.where(index >= 0, index, 0)
    same = (index >= 0) & (labels[safe] == labels[:, None])
    counts = same.sum(axis=1)
    totals = np.where(same, distances, 0.0).sum(axis=1)
    score = np.where(counts > 0, totals / np.maximum(counts, 1), np.inf)
    order = np.lexsort((np.arange(len(labels)), score, labels))
    out: dict[int, int] = {}
    for item in order.tolist():
        out.setdefault(int(labels[item]), item)
    return out

"""Flat groups from a precomputed distance matrix, and their agreement with known labels.

Every function takes a square, symmetric, non-negative distance array with a zero diagonal
(typically normalized compression distances) and returns frozen results.

Why not a plain dendrogram cut: on real, heterogeneous sources (eight system logs cut into
100-line chunks, NCD with zstd) some sources' chunks spread out, so an average-linkage cut at the
true number of groups spends groups on stray chunks and lumps whole sources together (adjusted
Rand index as low as 0.46). All three modes here therefore start from the density hierarchy of
HDBSCAN* (Campello, Moulavi & Sander 2013, "Density-based clustering based on hierarchical density
estimates", PAKDD), where stray items fall out of a group instead of founding one:

- automatic count: HDBSCAN* (excess-of-mass selection) is run over a grid of minimum group
  sizes, each result's outliers are attached, and the candidate with the highest mean silhouette
  wins (Rousseeuw 1987, "Silhouettes", J. Comput. Appl. Math. 20:53-65, proposes the average
  silhouette width for choosing the number of groups). Scoring density candidates rather than
  dendrogram cuts is what matters: the silhouette-best average-linkage cut of the logs above
  reaches only 0.84. A fixed size (or the size range over which a count persists) was rejected
  because groups of very different sizes then fall into noise: with 3 to 20 chunks per log the
  persistence rule kept 3 groups (ARI 0.49) where the silhouette rule keeps 9 (0.95);
- ``k=N``: the silhouette-best candidate with exactly N groups if the scan has one, since forcing
  a count by merging or splitting loses density information; otherwise the candidates with the
  fewest groups above N are merged by average linkage between groups (UPGMA, Sokal & Michener
  1958), or, when N exceeds every candidate, the largest ones are split by repeated two-medoid
  bisection of the group whose split lowers the k-medoids cost most (Kaufman & Rousseeuw 1990,
  "Finding Groups in Data"; alternating updates as in Park & Jun 2009), and the silhouette picks;
- ``cut=DISTANCE``: the horizontal cut of the same hierarchy at that height, i.e. DBSCAN* with
  epsilon = DISTANCE (Campello et al. 2013, section 3).

Items the density step leaves out (outliers) join the group of their nearest grouped item
(the 1-nearest-neighbour rule, Cover & Hart 1967) unless they are asked for as group -1.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from sklearn.cluster import HDBSCAN
from sklearn.metrics import adjusted_rand_score, silhouette_samples

from .distance import check_distances
from .formats import json_ready

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]

OUTLIER = -1
"""Group number of an outlier when outliers are reported rather than attached."""

# scikit-learn counts the item itself among its min_samples neighbours; with 1 or 2 the
# mutual-reachability distance equals the plain distance on every spanning-tree edge (plain single
# linkage, which chains through stray items), so 3 is the smallest value that smooths density.
_CORE_NEIGHBOURS = 3
# A geometric grid keeps the scan at a few seconds for a thousand items while still trying every
# small size, where counts change fastest.
_SIZE_GRID = 40
_TINY = 1e-12
_MAX_ROUNDS = 100


@dataclass(frozen=True)
class GroupSummary:
    """One group: its number, member count, medoid item and mean silhouette of its members."""

    index: int
    size: int
    medoid: int
    silhouette: float


@dataclass(frozen=True)
class Grouping:
    """A flat grouping of n items.

    ``assignment[i]`` is item i's group (0..k-1, numbered by first appearance) or ``OUTLIER``;
    ``is_outlier[i]`` says whether the density step left item i out (it is still in a group unless
    outliers were reported); ``silhouette`` is the mean silhouette (Rousseeuw 1987) over grouped
    items, NaN when undefined (fewer than two groups, or as many groups as items). ``method`` is
    "density" (or "one-group" when the density step found no structure), followed by "+merge" or
    "+split" when reaching ``k`` needed that step, or "density-cut" for a cut; ``min_size`` is the
    HDBSCAN* minimum group size used (None when no density grouping was used), ``core_neighbours``
    its density estimate's neighbour count, ``cut`` the height of a cut, ``requested_k`` the
    asked-for number of groups.
    """

    assignment: tuple[int, ...]
    is_medoid: tuple[bool, ...]
    is_outlier: tuple[bool, ...]
    groups: tuple[GroupSummary, ...]
    silhouette: float
    method: str
    min_size: int | None
    core_neighbours: int
    cut: float | None
    requested_k: int | None
    outliers_reported: bool

    @property
    def k(self) -> int:
        """Number of groups (outliers not counted)."""
        return len(self.groups)


@dataclass(frozen=True)
class Agreement:
    """Agreement of a grouping with known labels, over the items whose label is known.

    ``confusion[r][c]`` counts items with known label ``known_labels[r]`` (rows in order of first
    appearance) in group ``group_ids[c]`` (ascending; reported outliers form column -1).
    """

    adjusted_rand: float
    purity: float
    known_labels: tuple[str, ...]
    group_ids: tuple[int, ...]
    confusion: tuple[tuple[int, ...], ...]
    scored: int

    def as_json(self) -> dict[str, object]:
        """The scores (6 decimals), the items scored and the confusion table."""
        return dict(
            json_ready(
                {
                    "adjusted_rand": round(self.adjusted_rand, 6),
                    "purity": round(self.purity, 6),
                    "scored": self.scored,
                    "confusion": {
                        "labels": self.known_labels,
                        "groups": self.group_ids,
                        "counts": self.confusion,
                    },
                }
            )
        )


@dataclass(frozen=True)
class GroupingResult:
    """A grouping of named items, its agreement with their known labels (None when no item has
    one) and the measurement behind the distances.

    >>> d = np.array([[0, .1, .9, .9], [.1, 0, .9, .9], [.9, .9, 0, .1], [.9, .9, .1, 0]])
    >>> found = GroupingResult.of(["a", "b", "c", "d"], find_groups(d, k=2), ["x", "x", "y", None])
    >>> [row["group"] for row in found.as_json()["items"]], found.agreement.purity
    ([0, 0, 1, 1], 1.0)
    """

    labels: tuple[str, ...]
    grouping: Grouping
    agreement: Agreement | None = None
    compressor: str = ""
    conditional: str = ""

    @classmethod
    def of(
        cls,
        labels: Sequence[str],
        grouping: Grouping,
        classes: Sequence[str | None] | None = None,
        compressor: str = "",
        conditional: str = "",
    ) -> GroupingResult:
        """The result for `grouping` of the items named `labels`, scored against their known
        `classes` when any is known."""
        scores = None
        if classes is not None and any(c is not None for c in classes):
            scores = agreement(grouping.assignment, classes)
        return cls(tuple(labels), grouping, scores, compressor, conditional)

    def rows(self) -> Iterator[tuple[str, int, bool, bool]]:
        """(item, group, medoid, outlier) for every item, in input order."""
        g = self.grouping
        yield from zip(self.labels, g.assignment, g.is_medoid, g.is_outlier, strict=True)

    def to_frame(self) -> Any:
        """One pandas row per item: group, medoid, outlier (`convert.grouping_frame`)."""
        from .convert import grouping_frame

        return grouping_frame(self)

    def as_json(self) -> dict[str, object]:
        """Per item its group, medoid and outlier flags; per group its size, medoid item and
        mean silhouette (6 decimals; null when undefined); the count, method, mean silhouette,
        compressor, conditional, and the agreement with known labels when there is one."""
        g = self.grouping
        doc: dict[str, object] = {
            "items": [
                {"item": n, "group": group, "medoid": m, "outlier": o}
                for n, group, m, o in self.rows()
            ],
            "groups": [
                {
                    "group": s.index,
                    "size": s.size,
                    "medoid": self.labels[s.medoid],
                    "silhouette": round(s.silhouette, 6),
                }
                for s in g.groups
            ],
            "k": g.k,
            "method": g.method,
            "silhouette": round(g.silhouette, 6),
            "compressor": self.compressor,
            "conditional": self.conditional,
        }
        if self.agreement is not None:
            doc["agreement"] = self.agreement
        return dict(json_ready(doc))


def medoid(distances: npt.ArrayLike, members: Sequence[int]) -> int:
    """The member with the smallest summed distance to the other members (lowest index on ties).

    This is the medoid of Kaufman & Rousseeuw (1990), "Finding Groups in Data".
    """
    d = np.asarray(distances, dtype=np.float64)
    idx = np.asarray(members, dtype=np.intp)
    if idx.size == 0:
        raise ValueError("a medoid needs at least one member")
    return int(idx[np.argmin(d[np.ix_(idx, idx)].sum(axis=1))])


def find_groups(
    distances: npt.ArrayLike,
    *,
    k: int | None = None,
    cut: float | None = None,
    report_outliers: bool = False,
) -> Grouping:
    """Flat groups of the items of a distance matrix (methods in the module docstring).

    With neither ``k`` nor ``cut`` the number of groups is chosen from the data (at least two
    whenever the density step finds any structure, otherwise one group of everything). ``k``
    gives exactly that many groups (1 <= k <= n). ``cut`` cuts the density hierarchy at that
    height: items linked at mutual-reachability distances strictly below it form a group, items
    left alone are outliers, and every item stands alone when no two are linked. Outliers join their
    nearest group unless ``report_outliers`` is true, in which case their group is ``OUTLIER``
    (-1); with ``k`` above what the density step supports and too few grouped items to split,
    outliers are grouped like the others.
    """
    d = check_distances(distances, strict_diagonal=True)
    n = d.shape[0]
    if k is not None and cut is not None:
        raise ValueError("give k or cut, not both")
    if k is not None:
        if isinstance(k, bool) or not isinstance(k, numbers.Integral) or not 1 <= k <= n:
            raise ValueError(f"k must be an integer from 1 to the number of items ({n}), got {k!r}")
        k = int(k)
    if cut is not None and not (math.isfinite(cut) and cut >= 0):
        raise ValueError(f"cut must be a finite distance >= 0, got {cut!r}")
    neighbours = min(_CORE_NEIGHBOURS, n)

    if cut is not None:
        labels = _cut(d, cut, neighbours)
        return _summarise(d, labels, "density-cut", None, neighbours, cut, None, report_outliers)

    candidates = _candidates(d, neighbours) or [
        _Candidate(None, np.zeros(n, dtype=np.intp), 1, math.nan)
    ]
    best, step = (_best(candidates), "") if k is None else _with_count(d, candidates, k)
    method = ("one-group" if best.min_size is None else "density") + step
    return _summarise(d, best.labels, method, best.min_size, neighbours, None, k, report_outliers)


def agreement(assignment: Sequence[int], known: Sequence[str | None]) -> Agreement:
    """How well groups match known labels; items whose known label is None are left out.

    Scores: the adjusted Rand index (Hubert & Arabie 1985, "Comparing partitions", J.
    Classification 2:193-218; via ``sklearn.metrics.adjusted_rand_score``) and purity, the share
    of items in their group's most common known label (Manning, Raghavan & Schütze 2008,
    "Introduction to Information Retrieval", section 16.3). Reported outliers (group -1) count as
    one more group.
    """
    if len(assignment) != len(known):
        raise ValueError(f"{len(assignment)} group numbers but {len(known)} known labels")
    pairs = [(g, lab) for g, lab in zip(assignment, known, strict=True) if lab is not None]
    if not pairs:
        raise ValueError("no item has a known label")
    groups = [int(g) for g, _ in pairs]
    labels = [lab for _, lab in pairs]
    rows = tuple(dict.fromkeys(labels))
    cols = tuple(sorted(set(groups)))
    table = np.zeros((len(rows), len(cols)), dtype=np.int64)
    row_of = {lab: r for r, lab in enumerate(rows)}
    col_of = {g: c for c, g in enumerate(cols)}
    for g, lab in zip(groups, labels, strict=True):
        table[row_of[lab], col_of[g]] += 1
    return Agreement(
        adjusted_rand=float(adjusted_rand_score(labels, groups)),
        purity=float(table.max(axis=0).sum() / len(pairs)),
        known_labels=rows,
        group_ids=cols,
        confusion=tuple(tuple(int(x) for x in row) for row in table),
        scored=len(pairs),
    )


@dataclass(frozen=True)
class _Candidate:
    """A grouping with outliers at -1, and its mean silhouette once they are attached."""

    min_size: int | None
    labels: IntArray
    count: int
    silhouette: float


def _density(d: FloatArray, min_size: int, neighbours: int) -> HDBSCAN:
    model = HDBSCAN(
        metric="precomputed", min_cluster_size=min_size, min_samples=neighbours, copy=True
    )
    return model.fit(d)


def _scored(d: FloatArray, min_size: int | None, labels: IntArray) -> _Candidate:
    values = _silhouettes(d, _attach(d, labels))
    return _Candidate(min_size, labels, len(_group_ids(labels)), float(np.mean(values)))


def _best(candidates: Sequence[_Candidate]) -> _Candidate:
    """Highest silhouette (undefined counts as lowest); the smaller minimum size on ties."""
    return max(
        candidates,
        key=lambda c: (
            -math.inf if math.isnan(c.silhouette) else c.silhouette,
            -(c.min_size or 0),
        ),
    )


def _with_count(d: FloatArray, candidates: list[_Candidate], k: int) -> tuple[_Candidate, str]:
    """The best candidate with exactly k groups, made by merging or splitting when none has k."""
    exact = [c for c in candidates if c.count == k]
    if exact:
        return _best(exact), ""
    finer = [c for c in candidates if c.count > k]
    if finer:
        fewest = min(c.count for c in finer)
        merged = [
            _scored(d, c.min_size, _merge(d, c.labels, k)) for c in finer if c.count == fewest
        ]
        return _best(merged), "+merge"
    most = max(c.count for c in candidates)
    split = [
        _scored(d, c.min_size, _split_to(d, c.labels, k)) for c in candidates if c.count == most
    ]
    return _best(split), "+split"


def _candidates(d: FloatArray, neighbours: int) -> list[_Candidate]:
    """Distinct non-empty HDBSCAN* groupings over a geometric grid of minimum group sizes."""
    largest = d.shape[0] // 2  # a split needs two groups of at least the minimum size
    if largest < 2:
        return []
    found: dict[bytes, _Candidate] = {}
    for size in np.unique(np.round(np.geomspace(2, largest, _SIZE_GRID)).astype(int)).tolist():
        labels = np.asarray(_density(d, size, neighbours).labels_, dtype=np.intp)
        if labels.max() >= 0 and labels.tobytes() not in found:
            found[labels.tobytes()] = _scored(d, size, labels)
    return list(found.values())


def _cut(d: FloatArray, cut: float, neighbours: int) -> IntArray:
    n = d.shape[0]
    if n == 1:
        return np.zeros(1, dtype=np.intp)
    # Only the hierarchy matters for a cut, and it depends on the neighbour count alone.
    model = _density(d, 2, neighbours)
    labels: IntArray = np.asarray(model.dbscan_clustering(cut, min_cluster_size=2), dtype=np.intp)
    if np.all(labels == OUTLIER):
        # Below every core distance nothing is dense: as below a dendrogram's first merge, each
        # item stands alone.
        return np.arange(n, dtype=np.intp)
    return labels


def _group_ids(labels: IntArray) -> list[int]:
    return [int(g) for g in np.unique(labels) if g != OUTLIER]


def _merge(d: FloatArray, labels: IntArray, k: int) -> IntArray:
    """Join the two groups with the smallest mean distance between members until k remain."""
    labels = labels.copy()
    while len(ids := _group_ids(labels)) > k:
        members = [np.flatnonzero(labels == g) for g in ids]
        best = (math.inf, 0, 0)
        for a in range(len(ids)):
            for b in range(a + 1, len(ids)):
                mean = float(d[np.ix_(members[a], members[b])].mean())
                best = min(best, (mean, a, b))
        labels[members[best[2]]] = ids[best[1]]
    return labels


def _cost(d: FloatArray, members: IntArray) -> float:
    return float(d[np.ix_(members, members)].sum(axis=1).min())


def _bisect(d: FloatArray, members: IntArray) -> tuple[float, IntArray]:
    """Two-medoid split of ``members``: the cost it saves and the members of the second part."""
    sub = d[np.ix_(members, members)]
    first = int(np.argmin(sub.sum(axis=1)))
    medoids = (first, int(np.argmax(sub[first])))
    if medoids[0] == medoids[1]:
        medoids = (first, 1 if first == 0 else 0)
    # Ties can make alternating updates cycle among equal-cost splits, hence the bound.
    for _ in range(_MAX_ROUNDS):
        second = sub[medoids[1]] < sub[medoids[0]]
        second[list(medoids)] = (False, True)
        parts = (np.flatnonzero(~second), np.flatnonzero(second))
        new = tuple(int(p[np.argmin(sub[np.ix_(p, p)].sum(axis=1))]) for p in parts)
        if new == medoids:
            break
        medoids = (new[0], new[1])
    saved = _cost(d, members) - _cost(d, members[parts[0]]) - _cost(d, members[parts[1]])
    return saved, members[parts[1]]


def _split_to(d: FloatArray, labels: IntArray, k: int) -> IntArray:
    """Bisect the group whose two-medoid split saves most cost, until there are k groups.

    Outliers are split like grouped items only when there are too few grouped items for k.
    """
    if k > int(np.count_nonzero(labels != OUTLIER)):
        labels = _attach(d, labels)
    labels = labels.copy()
    candidates: dict[int, tuple[float, IntArray]] = {}
    while len(ids := _group_ids(labels)) < k:
        for g in ids:
            members = np.flatnonzero(labels == g)
            if g not in candidates and members.size > 1:
                candidates[g] = _bisect(d, members)
        g = max(candidates, key=lambda c: (candidates[c][0], -c))
        labels[candidates.pop(g)[1]] = max(ids) + 1
    return labels


def _attach(d: FloatArray, labels: IntArray) -> IntArray:
    """Give each outlier the group of its nearest grouped item (lowest index on ties)."""
    grouped = np.flatnonzero(labels != OUTLIER)
    loose = np.flatnonzero(labels == OUTLIER)
    out = labels.copy()
    if loose.size:
        nearest = grouped[np.argmin(d[np.ix_(loose, grouped)], axis=1)]
        out[loose] = labels[nearest]
    return out


def _renumber(labels: IntArray) -> IntArray:
    """Number groups 0, 1, ... in order of their first item, keeping outliers at -1."""
    order: dict[int, int] = {}
    out = np.full(labels.shape, OUTLIER, dtype=np.intp)
    for i, g in enumerate(labels.tolist()):
        if g != OUTLIER:
            out[i] = order.setdefault(g, len(order))
    return out


def _silhouettes(d: FloatArray, labels: IntArray) -> FloatArray:
    """Per-item silhouette over grouped items (NaN for outliers, or everywhere if undefined)."""
    values = np.full(labels.shape, np.nan)
    grouped = np.flatnonzero(labels != OUTLIER)
    count = len(_group_ids(labels))
    if 2 <= count <= grouped.size - 1:
        sub = d[np.ix_(grouped, grouped)]
        values[grouped] = silhouette_samples(sub, labels[grouped], metric="precomputed")
    return values


def _summarise(
    d: FloatArray,
    raw: IntArray,
    method: str,
    min_size: int | None,
    neighbours: int,
    cut: float | None,
    requested_k: int | None,
    report_outliers: bool,
) -> Grouping:
    labels = _renumber(raw if report_outliers else _attach(d, raw))
    return _grouping(
        labels, raw == OUTLIER, _silhouettes(d, labels),
        lambda g, members: medoid(d, members.tolist()),
        method, min_size, neighbours, cut, requested_k, report_outliers,
    )  # fmt: skip


def _grouping(
    labels: IntArray,
    is_outlier: npt.NDArray[np.bool_],
    sil: FloatArray,
    medoid_of: Callable[[int, IntArray], int],
    method: str,
    min_size: int | None,
    neighbours: int,
    cut: float | None,
    requested_k: int | None,
    report_outliers: bool,
) -> Grouping:
    """The grouping of final `labels`: each group's medoid (`medoid_of(group, members)`) and
    mean silhouette, the mean over grouped items. Silhouettes are NaN where not measured (the
    sparse route measures a sample; undefined everywhere with fewer than two groups): means are
    over the measured ones, NaN when there are none."""
    is_medoid = np.zeros(labels.shape, dtype=bool)
    summaries = []
    for g in _group_ids(labels):
        members = np.flatnonzero(labels == g)
        m = medoid_of(g, members)
        is_medoid[m] = True
        values = sil[members][~np.isnan(sil[members])]
        mean = float(values.mean()) if values.size else math.nan
        summaries.append(GroupSummary(g, int(members.size), m, mean))
    scored = sil[(labels != OUTLIER) & ~np.isnan(sil)]
    return Grouping(
        assignment=tuple(int(g) for g in labels),
        is_medoid=tuple(bool(x) for x in is_medoid),
        is_outlier=tuple(bool(x) for x in is_outlier),
        groups=tuple(summaries),
        silhouette=float(scored.mean()) if scored.size else math.nan,
        method=method,
        min_size=min_size,
        core_neighbours=neighbours,
        cut=cut,
        requested_k=requested_k,
        outliers_reported=report_outliers,
    )


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
    largest = n // 2
    sizes = np.unique(np.round(np.geomspace(2, max(largest, 2), _SIZE_GRID)).astype(int))
    for size in sizes.tolist() if largest >= 2 else []:
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

"""Flat groups from a full distance matrix (methods in the kinpress.groups docstring)."""

from __future__ import annotations

import math
import numbers
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from sklearn.cluster import HDBSCAN
from sklearn.metrics import silhouette_samples

from ..distance import check_distances
from .result import OUTLIER, FloatArray, Grouping, GroupSummary, IntArray

# scikit-learn counts the item itself among its min_samples neighbours; with 1 or 2 the
# mutual-reachability distance equals the plain distance on every spanning-tree edge (plain single
# linkage, which chains through stray items), so 3 is the smallest value that smooths density.
_CORE_NEIGHBOURS = 3
# A geometric grid keeps the scan at a few seconds for a thousand items while still trying every
# small size, where counts change fastest.
_SIZE_GRID = 40
# A lone dense group counts only when its members' mean silhouette against the rest is above
# this: Kaufman & Rousseeuw (1990, "Finding Groups in Data", ch. 2) read an average silhouette
# of 0.25 or less as no substantial structure (recalled from memory). The two or three items
# that persist longest in a set of equally unrelated items score near 0.
CORE_SILHOUETTE = 0.25
_TINY = 1e-12
_MAX_ROUNDS = 100


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
    """Flat groups of the items of a distance matrix (methods in the kinpress.groups docstring).

    With neither ``k`` nor ``cut`` the number of groups is chosen from the data (at least two
    whenever the density step finds a split; otherwise one dense group that stands clearly
    apart, the rest its outliers, where there is one; otherwise one group of everything). ``k``
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

    candidates = _candidates(d, neighbours)
    if not candidates:
        candidates = _one_core(d, neighbours)
        if k is not None:  # a count splits or merges the lone group and the rest, as two
            candidates = [_scored(d, c.min_size, (c.labels == OUTLIER).astype(np.intp))
                          for c in candidates]  # fmt: skip
    candidates = candidates or [_Candidate(None, np.zeros(n, dtype=np.intp), 1, math.nan)]
    best, step = (_best(candidates), "") if k is None else _with_count(d, candidates, k)
    method = ("one-group" if best.min_size is None else "density") + step
    return _summarise(d, best.labels, method, best.min_size, neighbours, None, k, report_outliers)


@dataclass(frozen=True)
class _Candidate:
    """A grouping with outliers at -1, and its mean silhouette once they are attached."""

    min_size: int | None
    labels: IntArray
    count: int
    silhouette: float


def _density(d: FloatArray, min_size: int, neighbours: int, root: bool = False) -> HDBSCAN:
    """HDBSCAN* on the matrix; with `root`, the whole hierarchy may be kept as one group."""
    model = HDBSCAN(metric="precomputed", min_cluster_size=min_size, min_samples=neighbours,
                    allow_single_cluster=root, copy=True)  # fmt: skip
    return model.fit(d)


def _size_grid(n: int) -> list[int]:
    """The minimum group sizes tried for n items: a geometric grid from 2 to n // 2 (a split
    needs two groups of at least the minimum size); none below 4 items."""
    largest = n // 2
    if largest < 2:
        return []
    return [int(s) for s in np.unique(np.round(np.geomspace(2, largest, _SIZE_GRID)).astype(int))]


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
    found: dict[bytes, _Candidate] = {}
    for size in _size_grid(d.shape[0]):
        labels = np.asarray(_density(d, size, neighbours).labels_, dtype=np.intp)
        if labels.max() >= 0 and labels.tobytes() not in found:
            found[labels.tobytes()] = _scored(d, size, labels)
    return list(found.values())


def _one_core(d: FloatArray, neighbours: int) -> list[_Candidate]:
    """Where no split of the hierarchy leaves two groups: the one dense group HDBSCAN* finds when
    it may keep the root, the rest outliers, if its members lie clearly nearer each other than
    the rest (their mean silhouette against the rest above CORE_SILHOUETTE); the clearest over
    the grid of minimum sizes, the smaller size on ties. Three files of one language among six
    that share nothing with anything form no split (each stray file leaves the hierarchy alone),
    so without this they vanished into one group of all nine."""
    best: tuple[float, _Candidate] | None = None
    for size in _size_grid(d.shape[0]):
        labels = np.asarray(_density(d, size, neighbours, root=True).labels_, dtype=np.intp)
        core = labels != OUTLIER
        if core.sum() < 2 or core.all():
            continue
        against_rest = silhouette_samples(d, np.where(core, 0, 1), metric="precomputed")
        clear = float(np.mean(against_rest[core]))
        if clear > CORE_SILHOUETTE and (best is None or clear > best[0]):
            best = (clear, _Candidate(size, np.where(core, 0, OUTLIER), 1, math.nan))
    return [] if best is None else [best[1]]


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

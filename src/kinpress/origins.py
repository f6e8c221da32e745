"""Classification by origin: which known source (system, language, author) an item came from.

A reference holds items whose origin is known. Two published decision rules are offered:

* ``knn``: the k nearest reference items under NCD vote, each with weight 1 / NCD, and a tie goes
  to the origin of the nearer neighbour (Jiang et al. 2023, "'Low-Resource' Text Classification:
  A Parameter-Free Classification Method with Compressors", Findings of ACL; their k = 2 ties
  counted a hit when either neighbour was right, so ties are broken by distance here instead).
* ``conditional`` (the default): each origin's reference items are joined into one corpus, and x
  is scored by how much better it compresses knowing that corpus than alone,
  score(x, origin) = C(x | corpus) / C(x), lower being better. This is the multiset view of
  Cohen & Vitanyi, "Normalized compression distance of multisets with applications" (IEEE TPAMI
  37(8), 2015): x is compared with the whole origin at once rather than with its members one by
  one. C(x | corpus) is x compressed by a compressor primed with the corpus where the compressor
  can be primed, C(corpus x) - C(corpus) otherwise.

A compressor sees only its window: a corpus longer than the window minus the longest item to score
is cut so that every reference item keeps the same number of leading bytes (longer ones are cut,
shorter ones kept whole), and a MeasurementWarning says so. Cutting keeps every item represented,
where a plain join would let the window see only the last few items.

Abstention (see Conformity): the origin with the best score accepts the item, or not, by a
conformal test (Vovk, Gammerman & Shafer 2005) calibrated on reference items held out as new data
would come: each origin's items are cut into contiguous blocks (later chunks of a log, files of
another folder), and block b of every origin is scored against the reference without block b.
Leave-one-out scores were too optimistic: neighbouring chunks of one log explain each other, and
new data drifts. The test is either the fit of the item to the best origin (its score against
the scores of that origin's own held-out items, on a scale from a typical own item to a typical
stranger) or the separation of the best origin from the next, whichever tells held-out items of a
left-out origin from the rest better on this reference. An item the best origin does not accept
is ambiguous when several origins fit it, unknown otherwise. Known items are refused at a rate of
at most the significance as long as new data drifts no more than the held-out blocks do; the
output says so, and warns when too few reference items make the asked rate impossible. A fixed
cut on the score can be given instead.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from typing import Any, Self

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.utils.validation import check_is_fitted

from .cache import SizeCache
from .compressors import Compressor
from .compressors import compressor as build_compressor
from .distance import cross_distances, measure_matrix, pair_distances
from .engine import Engine
from .formats import json_ready
from .items import InputError, Item, ItemLike, as_items

# Moved to items, where inputs become items; importable from here while callers move over.
from .items import reference_items as reference_items
from .measure import (
    Measurement,
    MeasurementWarning,
    Progress,
    content_digest,
    measure_conditional,
    ncd,
)

METHODS = ("conditional", "knn")
_VOTE_EPSILON = 1e-9
"""Added to a distance before 1 / d weighs a vote: an identical neighbour gets a finite weight."""


# -- the reference -----------------------------------------------------------------------------


@dataclass(frozen=True)
class _Reference:
    """Reference items, the origin names, and each item's origin as an index into them."""

    items: tuple[Item, ...]
    origins: tuple[str, ...]
    codes: np.ndarray

    @classmethod
    def of(cls, given: Sequence[ItemLike]) -> _Reference:
        items = as_items(given, "ref")
        missing = next((item.name for item in items if item.label is None), None)
        if missing is not None:
            raise InputError(f"reference item {missing} has no origin label")
        origins, codes = np.unique([str(item.label) for item in items], return_inverse=True)
        return cls(tuple(items), tuple(str(o) for o in origins), codes.astype(np.int64))

    def members(self, origin: int) -> np.ndarray:
        return np.flatnonzero(self.codes == origin)

    def check(self, *, calibrate: bool) -> None:
        if len(self.origins) < 2:
            raise InputError(f"need at least two origins in the reference, got {len(self.origins)}")
        if calibrate:
            counts = np.bincount(self.codes, minlength=len(self.origins))
            thin = [o for o, n in zip(self.origins, counts, strict=True) if n < 2]
            if thin:
                raise InputError(
                    "calibrating the abstention needs two reference items per origin; "
                    f"{', '.join(thin)} has one (give a threshold to classify without it)"
                )


# -- scores: per item, one number per origin, lower is better ----------------------------------


@dataclass(frozen=True)
class _Scores:
    """Per-origin scores, the origin the rule picks, and the nearest reference item by NCD.

    The conditional method leaves `nearest` and `distance` unset until a result needs them, since
    finding them costs NCD pairs that the decision itself does not.
    """

    scores: np.ndarray
    picked: np.ndarray
    nearest: np.ndarray | None = None
    distance: np.ndarray | None = None


def _knn_decision(distances: np.ndarray, codes: np.ndarray, origins: int, k: int) -> _Scores:
    """k nearest neighbours with 1/d-weighted votes; ties go to the origin of the nearer one.

    An origin's score is the distance to its nearest reference item (inf marks an excluded item).
    """
    order = np.argsort(distances, axis=1, kind="stable")
    scores = np.full((len(distances), origins), np.inf)
    for origin in range(origins):
        columns = codes == origin
        if columns.any():
            scores[:, origin] = distances[:, columns].min(axis=1)
    picked = np.empty(len(distances), dtype=np.int64)
    for row, neighbours in enumerate(order[:, :k]):
        near = neighbours[np.isfinite(distances[row, neighbours])]
        weights = 1.0 / (distances[row, near] + _VOTE_EPSILON)
        votes = np.bincount(codes[near], weights=weights, minlength=origins)
        tied = votes >= votes.max() * (1 - 1e-12)
        picked[row] = next(int(c) for c in codes[near] if tied[c])
    nearest = order[:, 0]
    return _Scores(scores, picked, nearest, distances[np.arange(len(distances)), nearest])


def _check_k(k: int, reference: _Reference) -> None:
    available = len(reference.items)
    if not 1 <= k <= available:
        raise ValueError(f"k must be between 1 and {available} reference items, got {k}")


def _knn_scores(
    targets: Sequence[Item], reference: _Reference, measurement: Measurement, k: int
) -> _Scores:
    _check_k(k, reference)
    distances = cross_distances(targets, reference.items, measurement)
    return _knn_decision(distances, reference.codes, len(reference.origins), k)


def _knn_fold_scores(
    reference: _Reference, measurement: Measurement, folds: np.ndarray
) -> np.ndarray:
    """Each reference item's NCD to the nearest item of every origin outside its own fold."""
    matrix = measure_matrix(reference.items, measurement)
    distances = np.array(matrix.distances)
    distances[folds[:, None] == folds[None, :]] = np.inf
    scores = np.full((len(folds), len(reference.origins)), np.inf)
    for origin in range(len(reference.origins)):
        scores[:, origin] = distances[:, reference.codes == origin].min(axis=1)
    return scores


def _corpus_budget(comp: Compressor, longest: int) -> int | None:
    """How many corpus bytes the compressor can see while compressing an item of `longest` bytes."""
    window = comp.window_bytes
    if window is None:
        return None
    if longest < window // 2:
        return window - longest
    warnings.warn(
        f"{comp.spec}: items of {longest:,} bytes fill most of its {window:,}-byte window;"
        " each origin's corpus is cut to half the window and scores drift towards 1",
        MeasurementWarning,
        stacklevel=4,
    )
    return window // 2


def corpus_bytes(datas: Sequence[bytes], budget: int | None) -> bytes:
    """The reference items joined, each cut to a common length so that the whole fits `budget`.

    The common length is the largest that fits (water-filling): items shorter than it are kept
    whole, longer ones keep their first that-many bytes. No budget joins everything.
    """
    total = sum(len(d) for d in datas)
    if budget is None or total <= budget:
        return b"".join(datas)
    lengths = sorted(len(d) for d in datas)
    share, used = 0, 0
    for position, length in enumerate(lengths):
        remaining = len(lengths) - position
        if used + length * remaining > budget:
            share = (budget - used) // remaining
            break
        used += length
    return b"".join(d[:share] for d in datas)


def _corpus(
    name: str, datas: Sequence[bytes], budget: int | None, origin: str, warn: bool = True
) -> Item:
    data = corpus_bytes(datas, budget)
    if warn and budget is not None and len(data) < sum(len(d) for d in datas):
        warnings.warn(
            f"corpus of {origin} cut from {sum(len(d) for d in datas):,} to {len(data):,} bytes"
            f" to fit the compressor's window (every item keeps its first bytes)",
            MeasurementWarning,
            stacklevel=4,
        )
    return Item(name, data, "origin corpus", label=origin)


def _origin_corpora(
    reference: _Reference, budget: int | None, held_out: np.ndarray | None = None
) -> list[Item]:
    """One synthetic item per origin: its reference items joined, less those marked `held_out`."""
    corpora = []
    for origin, name in enumerate(reference.origins):
        members = [int(m) for m in reference.members(origin)]
        if held_out is not None:
            members = [m for m in members if not held_out[m]]
        datas = [reference.items[m].data for m in members]
        corpora.append(_corpus(f"corpus {name}", datas, budget, name, warn=held_out is None))
    return corpora


def _conditional_ratios(
    targets: Sequence[Item],
    corpora: Sequence[Item],
    wanted: Sequence[tuple[int, int]],
    measurement: Measurement,
) -> np.ndarray:
    """C(target | corpus) / C(target) for each (target, corpus) index pair."""
    n = len(targets)
    pairs = [(n + c, t) for t, c in wanted]
    measured = measure_conditional([*targets, *corpora], pairs, measurement)
    singles = measured.sizes[np.array([t for t, _ in wanted], dtype=np.int64).reshape(-1)]
    return ncd(measured.conditional, singles)


def _nearest_in_origin(
    targets: Sequence[Item],
    reference: _Reference,
    picked: np.ndarray,
    measurement: Measurement,
    exclude_self: bool,
) -> tuple[np.ndarray, np.ndarray]:
    """The nearest reference item by NCD among those of each target's picked origin."""
    n = len(targets)
    pairs: list[tuple[int, int]] = []
    owners: list[tuple[int, int]] = []
    for t, origin in enumerate(picked):
        for m in reference.members(int(origin)):
            if not (exclude_self and m == t):
                pairs.append((t, n + int(m)))
                owners.append((t, int(m)))
    items = [*targets, *reference.items]
    found = pair_distances(items, pairs, measurement)
    nearest = np.zeros(n, dtype=np.int64)
    distance = np.full(n, np.inf)
    for (t, m), d in zip(owners, found, strict=True):
        if d < distance[t]:
            nearest[t], distance[t] = m, d
    return nearest, distance


def _conditional_scores(
    targets: Sequence[Item], reference: _Reference, measurement: Measurement, longest: int
) -> _Scores:
    corpora = _origin_corpora(reference, _corpus_budget(measurement.compressor, longest))
    m = len(reference.origins)
    wanted = [(t, o) for t in range(len(targets)) for o in range(m)]
    scores = _conditional_ratios(targets, corpora, wanted, measurement).reshape(len(targets), m)
    return _Scores(scores, scores.argmin(axis=1))


def _with_nearest(
    scores: _Scores,
    targets: Sequence[Item],
    reference: _Reference,
    measurement: Measurement,
    exclude_self: bool,
) -> _Scores:
    """Scores with the nearest reference item filled in, searched in the picked origin."""
    if scores.nearest is not None:
        return scores
    nearest, distance = _nearest_in_origin(
        targets, reference, scores.picked, measurement, exclude_self
    )
    return replace(scores, nearest=nearest, distance=distance)


# -- held-out folds: scores that imitate new data ----------------------------------------------


DEFAULT_SIGNIFICANCE = 0.05
DEFAULT_BLOCKS = 5


def reference_folds(codes: np.ndarray, blocks: int = DEFAULT_BLOCKS) -> np.ndarray:
    """Each reference item's fold: its origin's items, in reference order, cut into `blocks`
    contiguous runs (fewer when the origin has fewer items). Chunks of a log keep their order
    and files their folder order, so a fold is a later stretch of a log or files of another
    folder, as new items would be, not a neighbour of the items that explain it."""
    if blocks < 2:
        raise ValueError(f"blocks must be at least 2, got {blocks}")
    folds = np.zeros(len(codes), dtype=np.int64)
    for origin in np.unique(codes):
        members = np.flatnonzero(codes == origin)
        runs = min(blocks, len(members))
        folds[members] = (np.arange(len(members)) * runs) // len(members)
    return folds


@dataclass(frozen=True)
class FoldScores:
    """Scores of reference items held out fold by fold.

    For fold f, every origin's reference less the items of fold f explains the items of fold f:
    `scores[i, o]` is item i's score for origin o (C(x | corpus) / C(x), or NCD to the nearest
    item for knn), NaN for folds not measured. Holding out a fold of every origin at once keeps
    the comparison fair: an item's own origin and the others lose the same share of items (and
    a parallel corpus, the same task solved in several languages, does not leak the task).
    """

    origins: tuple[str, ...]
    codes: np.ndarray
    folds: np.ndarray
    scores: np.ndarray

    @property
    def measured(self) -> np.ndarray:
        return np.asarray(~np.isnan(self.scores).any(axis=1))


def _fold_scores(
    reference: _Reference,
    measurement: Measurement,
    method: str,
    blocks: int,
    longest: int,
    only: Sequence[int] | None = None,
) -> FoldScores:
    folds = reference_folds(reference.codes, blocks)
    n, m = len(reference.items), len(reference.origins)
    if method == "knn":
        scores = _knn_fold_scores(reference, measurement, folds)
        return FoldScores(reference.origins, reference.codes, folds, scores)
    budget = _corpus_budget(measurement.compressor, longest)
    corpora: list[Item] = []
    wanted: list[tuple[int, int]] = []
    for fold in sorted(set(folds.tolist()) if only is None else set(only)):
        held = folds == fold
        base = len(corpora)
        corpora += _origin_corpora(reference, budget, held)
        wanted += [(int(t), base + o) for t in np.flatnonzero(held) for o in range(m)]
    scores = np.full((n, m), np.nan)
    if wanted:
        found = _conditional_ratios(reference.items, corpora, wanted, measurement)
        for (t, c), value in zip(wanted, found, strict=True):
            scores[t, c % m] = value
    return FoldScores(reference.origins, reference.codes, folds, scores)


def fold_scores(
    reference: Sequence[Item],
    comp: str | Compressor,
    *,
    method: str = "conditional",
    blocks: int = DEFAULT_BLOCKS,
    folds: Sequence[int] | None = None,
    longest: int = 0,
    conditional: str = "auto",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> FoldScores:
    """Held-out scores of the reference (see FoldScores): all folds, or those in `folds`.

    `longest` is the longest item the corpora must leave room for in the compressor's window
    (the reference's own longest at least), so that a later classification of longer items
    reuses the same corpora and their cached sizes.
    """
    ref = _Reference.of(reference)
    ref.check(calibrate=True)
    measurement = _measurement(comp, method, conditional, engine, cache, progress)
    longest = max(longest, max(len(i.data) for i in ref.items))
    return _fold_scores(ref, measurement, method, blocks, longest, folds)


# -- conformal p-values -------------------------------------------------------------------------


TESTS = ("fit", "separation", "contrast")
"""The statistics an abstention can test (see Conformity); the reference chooses among them."""


def conformal_p_values(sample: np.ndarray, values: np.ndarray) -> np.ndarray:
    """(1 + #{sample >= v}) / (len(sample) + 1) for each v: larger statistics are stranger
    (Vovk, Gammerman & Shafer 2005, ch. 2)."""
    ordered = np.sort(sample)
    above = len(ordered) - np.searchsorted(ordered, values, side="left")
    return np.asarray((1 + above) / (len(ordered) + 1), dtype=float)


def _label_conditional(counts: np.ndarray, significance: float) -> np.ndarray:
    """Origins whose own calibration items alone give p-values down to half the rate."""
    return np.asarray(counts + 1 >= 2.0 / significance)


def _profile(scores: np.ndarray, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per origin, the median held-out score of its own items (centre) and how far above it the
    median score of the other origins' items on it lies (scale; up to 1, a score that explains
    nothing, where no other origin's items were scored)."""
    m = scores.shape[1]
    centre = np.empty(m)
    scale = np.empty(m)
    for origin in range(m):
        own, other = scores[codes == origin, origin], scores[codes != origin, origin]
        centre[origin] = np.median(own)
        stranger = np.median(other) if other.size else 1.0
        scale[origin] = max(stranger - centre[origin], 1e-3)
    return centre, scale


def _second_best(scores: np.ndarray, best: np.ndarray) -> np.ndarray:
    """Each row's lowest score other than at `best` (1, explaining nothing, with one origin)."""
    if scores.shape[1] == 1:
        return np.ones(len(scores))
    masked = np.where(np.arange(scores.shape[1])[None, :] == best[:, None], np.inf, scores)
    return np.asarray(masked.min(axis=1))


def _typical_other(scores: np.ndarray, own: np.ndarray) -> np.ndarray:
    """Each row's median score over the origins other than `own[row]` (1, explaining nothing,
    with one origin)."""
    if scores.shape[1] == 1:
        return np.ones(len(scores))
    others = np.where(np.arange(scores.shape[1])[None, :] == own[:, None], np.nan, scores)
    return np.asarray(np.nanmedian(others, axis=1))


def _statistics(
    scores: np.ndarray, centre: np.ndarray, scale: np.ndarray, own: np.ndarray
) -> dict[str, np.ndarray]:
    """Each test's statistic (larger is stranger) of each row for the origin `own[row]`: fit,
    -separation and contrast (see Conformity)."""
    rows = np.arange(len(scores))
    chosen = scores[rows, own]
    fit = (chosen - centre[own]) / scale[own]
    separation = (_second_best(scores, own) - chosen) / scale[own]
    lead = (_typical_other(scores, own) - chosen) / scale[own]
    return {"fit": fit, "separation": -separation, "contrast": fit - lead}


def _auc(positive: np.ndarray, values: np.ndarray) -> float:
    """ROC AUC of `values` for telling `positive` rows from the rest: the Mann-Whitney U of the
    positives' ranks (ties take their mean rank) over n_pos * n_neg."""
    from scipy.stats import rankdata

    ranks = rankdata(values)
    hits, misses = int(positive.sum()), int((~positive).sum())
    return float((ranks[positive].sum() - hits * (hits + 1) / 2) / (hits * misses))


@dataclass(frozen=True)
class _LeftOut:
    """The held-out scores with one origin left out of the reference: `known` rows are the
    other origins' items, `reduced` the scores on the kept origins, `relabel` the known rows'
    origins among those, `centre` and `scale` the kept origins' profile (see _profile)."""

    known: np.ndarray
    reduced: np.ndarray
    relabel: np.ndarray
    centre: np.ndarray
    scale: np.ndarray


def _leave_each_origin_out(scores: np.ndarray, codes: np.ndarray) -> Iterator[_LeftOut]:
    """Each origin left out in turn, where both it and the rest have held-out items."""
    m = scores.shape[1]
    for missing in range(m if m >= 2 else 0):
        keep = np.array([o for o in range(m) if o != missing])
        known = codes != missing
        if known.all() or not known.any():
            continue
        reduced = scores[:, keep]
        relabel = np.searchsorted(keep, codes[known])
        centre, scale = _profile(reduced[known], relabel)
        yield _LeftOut(known, reduced, relabel, centre, scale)


def novelty_aucs(scores: np.ndarray, codes: np.ndarray) -> tuple[float, float]:
    """How well fit and separation tell the held-out items of an origin missing from the
    reference from those of the others (ROC AUC, 1 = perfectly), each origin left out in turn."""
    fit_aucs, separation_aucs = [], []
    for out in _leave_each_origin_out(scores, codes):
        found = _statistics(out.reduced, out.centre, out.scale, out.reduced.argmin(axis=1))
        stranger = ~out.known
        fit_aucs.append(_auc(stranger, found["fit"]))
        separation_aucs.append(_auc(stranger, found["separation"]))
    if not fit_aucs:
        return float("nan"), float("nan")
    return float(np.mean(fit_aucs)), float(np.mean(separation_aucs))


def novelty_detection(
    scores: np.ndarray, codes: np.ndarray, significance: float
) -> dict[str, float]:
    """Per test, the share of held-out items of an origin missing from the reference that the
    test refuses at `significance`, each origin left out in turn: the others' held-out items
    calibrate, as they would for new data (pooled conformal p-values), and the left-out
    origin's items are scored on the rest. NaN with fewer than three origins."""
    refused: dict[str, list[float]] = {test: [] for test in TESTS}
    for out in _leave_each_origin_out(scores, codes) if scores.shape[1] >= 3 else ():
        known, strangers = out.reduced[out.known], out.reduced[~out.known]
        calibration = _statistics(known, out.centre, out.scale, out.relabel)
        strange = _statistics(strangers, out.centre, out.scale, strangers.argmin(axis=1))
        for test in TESTS:
            p = conformal_p_values(calibration[test], strange[test])
            refused[test].append(float(np.mean(p <= significance)))
    return {test: float(np.mean(v)) if v else float("nan") for test, v in refused.items()}


def _choose_test(detection: dict[str, float]) -> str:
    """The test that refused most held-out strangers; fit on ties or without a measure."""
    measured = {t: v for t, v in detection.items() if v == v}
    return max(TESTS, key=lambda t: (measured.get(t, -1.0), t == "fit")) if measured else "fit"


@dataclass(frozen=True)
class Conformity:
    """The abstention, calibrated on reference items held out as new data would come.

    For an item x with scores s(x, o) (lower is better), each origin o has

        fit(x, o) = (s(x, o) - centre[o]) / scale[o]

    0 for a typical held-out item of o, 1 for a typical held-out item of another origin scored
    on o (`centre`, `scale`: see `_profile`); and the best origin b (lowest score) has

        separation(x) = (second lowest score - s(x, b)) / scale[b]
        contrast(x)   = fit(x, b) - (median of the other origins' scores - s(x, b)) / scale[b]

    how much better b explains x than the next origin, and how typical of b x is less how much
    better b explains it than a typical other origin does (an item of an origin missing from
    the reference, explained by a kindred origin hardly better than by the rest, is strange on
    both counts). `test` is the one that decides whether b accepts x: "fit" (x is as typical
    of b as b's own held-out items), "separation" (b explains x as much better than the next
    as it does its own held-out items) or "contrast", chosen on the reference: the test that
    refuses most held-out items of an origin left out of it at the significance
    (`detection`, see novelty_detection; fit on ties).
    p-values are conformal (Vovk, Gammerman & Shafer 2005, "Algorithmic Learning in a Random
    World"): the share of held-out statistics at least as strange, label-conditional for an
    origin with 2 / significance - 1 held-out items or more (Mondrian, ch. 4.5 there), pooled
    over origins otherwise (10 items alone cannot give p below 1/11). If x comes from a known
    origin and is exchangeable with its held-out items, P(p <= significance) <= significance.
    """

    origins: tuple[str, ...]
    centre: np.ndarray
    scale: np.ndarray
    test: str
    test_calibration: np.ndarray
    codes: np.ndarray
    significance: float
    detection: tuple[tuple[str, float], ...]

    @classmethod
    def of(
        cls, scores: np.ndarray, codes: np.ndarray, origins: Sequence[str], significance: float
    ) -> Conformity:
        """Calibrate on held-out scores (one row per held-out item, `codes` their origins)."""
        centre, scale = _profile(scores, codes)
        found = _statistics(scores, centre, scale, codes)
        detection = novelty_detection(scores, codes, significance)
        test = _choose_test(detection)
        return cls(
            origins=tuple(origins),
            centre=centre,
            scale=scale,
            test=test,
            test_calibration=found[test],
            codes=codes,
            significance=significance,
            detection=tuple(detection.items()),
        )

    @property
    def label_conditional(self) -> np.ndarray:
        counts = np.bincount(self.codes, minlength=len(self.origins))
        return _label_conditional(counts, self.significance)

    def _against(self, calibration: np.ndarray, origin: int, values: np.ndarray) -> np.ndarray:
        own = self.label_conditional[origin]
        return conformal_p_values(calibration[self.codes == origin] if own else calibration, values)

    def p_values(self, scores: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Each item's p-value of the deciding test for every origin (the item taken as that
        origin's), the best origin, and the p-value for the best origin."""
        n, m = scores.shape
        p = np.zeros((n, m))
        for origin in range(m):
            own = np.full(n, origin)
            strange = _statistics(scores, self.centre, self.scale, own)[self.test]
            p[:, origin] = self._against(self.test_calibration, origin, strange)
        best = scores.argmin(axis=1)
        return p, best, p[np.arange(n), best]


@dataclass(frozen=True)
class Abstention:
    """How items were refused: conformal p-values at `significance`, or a given score cut.

    `calibration_scores` counts the held-out reference items behind the p-values; origins in
    `label_conditional` are tested against their own items only, the others against all;
    `smallest_rate` is the smallest significance those items can support (1 / (n + 1)); `test`
    is the deciding test and `detection` why it was chosen: each test's share of held-out items
    of a left-out origin refused at the significance (see Conformity).
    """

    significance: float | None
    threshold: float | None
    calibration_scores: int = 0
    label_conditional: tuple[str, ...] = ()
    smallest_rate: float | None = None
    blocks: int = DEFAULT_BLOCKS
    test: str | None = None
    detection: tuple[tuple[str, float], ...] = ()

    @property
    def guarantee(self) -> str:
        """What the refusals promise, and when the promise does not hold, in words."""
        if self.significance is None:
            return (
                f"an origin accepts an item whose score for it is at most {self.threshold:g}"
                " (given cut: no stated error rate)"
            )
        pooled = (
            "pooled over origins"
            if not self.label_conditional
            else f"per origin for {', '.join(self.label_conditional)}, pooled otherwise"
        )
        text = (
            f"items of origins in the reference are refused (unknown or ambiguous) at a rate of"
            f" at most {self.significance:g} (conformal p-values of the {self.test} test, Vovk et"
            f" al. 2005; {pooled}; from {self.calibration_scores} reference items held out in"
            f" {self.blocks} blocks), provided new items differ from the reference no more than"
            " its held-out blocks differ from the rest; data that drifts further is refused more"
            " often, and items of an origin missing from the reference are refused but without"
            " a stated rate"
        )
        if self.smallest_rate is not None and self.significance < self.smallest_rate:
            text += (
                f"; too few reference items for that rate: the smallest possible is"
                f" {self.smallest_rate:.3g}, so no item can be refused"
            )
        return text

    def as_json(self) -> dict[str, object]:
        """The fields by name and the guarantee in words; with a given cut `significance`,
        `test`, the AUCs and `smallest_rate` are null (no test was calibrated)."""
        return dict(
            json_ready(
                {
                    "significance": self.significance,
                    "threshold": self.threshold,
                    "test": self.test,
                    "detection": dict(self.detection),
                    "calibration_scores": self.calibration_scores,
                    "label_conditional": self.label_conditional,
                    "smallest_rate": self.smallest_rate,
                    "blocks": self.blocks,
                    "guarantee": self.guarantee,
                }
            )
        )


def _abstention(conformity: Conformity, blocks: int) -> Abstention:
    significance = conformity.significance
    if not 0 < significance < 1:
        raise ValueError(f"significance must lie between 0 and 1, got {significance}")
    count = len(conformity.codes)
    smallest = 1.0 / (count + 1)
    if significance < smallest:
        warnings.warn(
            f"{count} reference items give p-values no smaller than {smallest:.3g}: at"
            f" significance {significance:g} no item can be refused; use a rate of at least"
            f" {smallest:.3g} or more reference items",
            MeasurementWarning,
            stacklevel=3,
        )
    flags = conformity.label_conditional
    return Abstention(
        significance=significance,
        threshold=None,
        calibration_scores=count,
        label_conditional=tuple(
            o for o, flag in zip(conformity.origins, flags, strict=True) if flag
        ),
        smallest_rate=smallest,
        blocks=blocks,
        test=conformity.test,
        detection=conformity.detection,
    )


# -- decisions and results ----------------------------------------------------------------------


DECISIONS = ("named", "ambiguous", "unknown")


@dataclass(frozen=True)
class Prediction:
    """One classified item.

    `decision` is "named" when the best origin (lowest score, `best`) accepts the item
    (`predicted` is that origin); otherwise "ambiguous" when several origins fit it
    (`candidates`, best score first, each with a p-value above the significance;
    `predicted` is None) and "unknown" when fewer do. With a given cut, origins whose score is
    within it accept. `confidence` is the runner-up's score minus the best one; `credibility`
    the p-value of the deciding test for the best origin; `p_values` each origin's p-value of
    that test, the item taken as that origin's
    (see Conformity). `path` is where the item came from (`Item.source`: its file, '-' for
    standard input) and `hash` the hex BLAKE2b-128 of its bytes (`content_digest`, as the cache
    keys them), so a reviewer can find and check the very bytes classified.
    """

    item: str
    predicted: str | None
    decision: str
    candidates: tuple[str, ...]
    best: str
    confidence: float
    credibility: float | None
    nearest: str
    distance: float
    scores: tuple[tuple[str, float], ...]
    p_values: tuple[tuple[str, float], ...] | None
    path: str
    hash: str

    def as_json(self) -> dict[str, object]:
        """The fields by name; `predicted` says what the text does: the origin when one is
        named, else the decision ("ambiguous", with its `candidates`, or "unknown"), never null.
        `confidence` is null with a single origin (no runner-up); `credibility` and `p_values`
        are null with a given cut."""
        return dict(
            json_ready(
                {
                    "item": self.item,
                    "predicted": self.predicted or self.decision,
                    "decision": self.decision,
                    "candidates": self.candidates,
                    "best": self.best,
                    "confidence": self.confidence,
                    "credibility": self.credibility,
                    "nearest": self.nearest,
                    "distance": self.distance,
                    "scores": dict(self.scores),
                    "p_values": None if self.p_values is None else dict(self.p_values),
                    "path": self.path,
                    "hash": self.hash,
                }
            )
        )


@dataclass(frozen=True)
class _Decisions:
    """What the abstention says of each item: decision, candidate origins (best score first),
    the deciding test's p-values for every origin (None with a cut) and for the best origin."""

    decisions: list[str]
    candidates: list[list[int]]
    origin_p: np.ndarray | None
    test_p: np.ndarray | None


def _decisions(
    scores: np.ndarray, conformity: Conformity | None, threshold: float | None
) -> _Decisions:
    """Decide every item (see Prediction and Conformity)."""
    order = np.argsort(scores, axis=1, kind="stable")
    if conformity is None:
        accepted = scores <= threshold
        candidates = [[int(o) for o in row if accepted[t, o]] for t, row in enumerate(order)]
        decisions = [
            "unknown" if not c else "named" if len(c) == 1 else "ambiguous" for c in candidates
        ]
        return _Decisions(decisions, candidates, None, None)
    origin_p, best, test_p = conformity.p_values(scores)
    rate = conformity.significance
    decisions, candidates = [], []
    for t, row in enumerate(order):
        if test_p[t] > rate:
            decisions.append("named")
            candidates.append([int(best[t])])
            continue
        fitting = [int(o) for o in row if origin_p[t, o] > rate]
        decisions.append("ambiguous" if len(fitting) > 1 else "unknown")
        candidates.append(fitting if len(fitting) > 1 else [])
    return _Decisions(decisions, candidates, origin_p, test_p)


def _decide(
    scores: _Scores, decided: _Decisions, reference: _Reference, targets: Sequence[Item]
) -> list[Prediction]:
    if scores.nearest is None or scores.distance is None:
        raise ValueError("scores lack the nearest reference items")
    origins = reference.origins
    out = []
    for t, target in enumerate(targets):
        row = scores.scores[t]
        decision, candidates = decided.decisions[t], decided.candidates[t]
        ranked = np.sort(row)
        origin_p = decided.origin_p
        out.append(
            Prediction(
                item=target.name,
                predicted=origins[candidates[0]] if decision == "named" else None,
                decision=decision,
                candidates=tuple(origins[c] for c in candidates),
                best=origins[int(scores.picked[t])],
                confidence=float(ranked[1] - ranked[0]) if len(ranked) > 1 else float("inf"),
                credibility=None if decided.test_p is None else float(decided.test_p[t]),
                nearest=reference.items[int(scores.nearest[t])].name,
                distance=float(scores.distance[t]),
                scores=tuple((o, float(v)) for o, v in zip(origins, row, strict=True)),
                p_values=None
                if origin_p is None
                else tuple((o, float(p)) for o, p in zip(origins, origin_p[t], strict=True)),
                path=target.source,
                hash=content_digest(target.data).hex(),
            )
        )
    return out


@dataclass(frozen=True)
class Classification:
    """Predictions for unknown items, the abstention behind them and the measurement.

    `scores` holds one row per item and one column per origin (lower is better): NCD to the
    origin's nearest reference item for knn, C(x | corpus) / C(x) for conditional; `p_values`
    the deciding test's p-value of each (None with a given threshold; see Conformity).
    """

    predictions: tuple[Prediction, ...]
    origins: tuple[str, ...]
    scores: np.ndarray
    p_values: np.ndarray | None
    abstention: Abstention
    method: str
    k: int
    compressor: str
    conditional: str

    def as_json(self) -> list[dict[str, object]]:
        """One object per item (see Prediction.as_json)."""
        return list(json_ready(self.predictions))

    def counts(self) -> dict[str, int]:
        """How many items were named, ambiguous and unknown."""
        return {d: sum(p.decision == d for p in self.predictions) for d in DECISIONS}

    def to_frame(self) -> Any:
        """One pandas row per item: prediction, scores, p-values (`convert`)."""
        from .convert import classification_frame

        return classification_frame(self)


@dataclass(frozen=True)
class FoldReport:
    """Figures of held-out reference folds: the reference's own test of the whole method.

    Each measured item is decided with p-values from the other folds' items (cross-conformal,
    Vovk 2015, "Cross-conformal predictors", Ann. Math. Artif. Intell. 74): `accuracy` named
    right, `refusal_rate` unknown, `ambiguous_rate` several origins; `confusion[i, j]` counts
    items of origin i named j, the last two columns ambiguous and unknown. `left_out_unknown`
    is, per origin, the share of its items that come back unknown when the origin is missing
    from the reference (its items scored against the others, p-values from the others' items).
    `gap` is the `significance` quantile of the best foreign alpha minus the 1 - significance
    quantile of the own alpha: above 0, own and foreign scores part at that rate.
    """

    accuracy: float
    refusal_rate: float
    ambiguous_rate: float
    left_out_unknown: tuple[float, ...]
    confusion: np.ndarray
    gap: float
    items: int

    @property
    def left_out_unknown_rate(self) -> float:
        return float(np.mean(self.left_out_unknown))

    @property
    def separation(self) -> float:
        """Mean of named right and missing-origin unknown: one figure to rank compressors by."""
        return (self.accuracy + self.left_out_unknown_rate) / 2


def fold_report(
    folds: FoldScores,
    significance: float = DEFAULT_SIGNIFICANCE,
    threshold: float | None = None,
) -> FoldReport:
    """Decide every measured held-out reference item as a new one would be (see FoldReport)."""
    keep = folds.measured
    scores, codes, fold_of = folds.scores[keep], folds.codes[keep], folds.folds[keep]
    n, m = scores.shape
    origins = [folds.origins[o] for o in range(m)]
    confusion = np.zeros((m, m + 2), dtype=np.int64)
    for fold in np.unique(fold_of):
        rows = fold_of == fold
        conformity = None
        if threshold is None:
            conformity = Conformity.of(scores[~rows], codes[~rows], origins, significance)
        decided = _decisions(scores[rows], conformity, threshold)
        for truth, decision, candidates in zip(
            codes[rows], decided.decisions, decided.candidates, strict=True
        ):
            column = {"named": candidates[0] if candidates else 0, "ambiguous": m, "unknown": m + 1}
            confusion[truth, column[decision]] += 1
    left_out = []
    for origin in range(m):
        others = [o for o in range(m) if o != origin]
        mine, rest = codes == origin, codes != origin
        if not mine.any() or not rest.any():
            continue
        reduced = scores[:, others]
        relabel = np.searchsorted(others, codes[rest])
        conformity = None
        if threshold is None:
            names = [origins[o] for o in others]
            conformity = Conformity.of(reduced[rest], relabel, names, significance)
        decided = _decisions(reduced[mine], conformity, threshold)
        left_out.append(float(np.mean([d == "unknown" for d in decided.decisions])))
    total = max(n, 1)
    own = scores[np.arange(n), codes]
    foreign = np.where(np.arange(m)[None, :] == codes[:, None], np.inf, scores).min(axis=1)
    return FoldReport(
        accuracy=float(np.trace(confusion[:, :m]) / total),
        refusal_rate=float(confusion[:, m + 1].sum() / total),
        ambiguous_rate=float(confusion[:, m].sum() / total),
        left_out_unknown=tuple(left_out),
        confusion=confusion,
        gap=float(np.quantile(foreign, significance) - np.quantile(own, 1 - significance))
        if n
        else float("nan"),
        items=n,
    )


@dataclass(frozen=True)
class Evaluation:
    """The reference's own test: every item held out in turn with its fold (see FoldReport).

    `accuracy`, `refusal_rate` and `ambiguous_rate` are shares of all reference items;
    `left_out_unknown_rate` the mean over origins of the share of an origin's items refused when
    that origin is missing from the reference.
    """

    accuracy: float
    refusal_rate: float
    ambiguous_rate: float
    left_out_unknown_rate: float
    left_out_unknown: tuple[float, ...]
    origins: tuple[str, ...]
    confusion: np.ndarray
    abstention: Abstention

    def as_json(self) -> dict[str, object]:
        """The rates, per origin its missing-origin refusal rate, the confusion table (rows:
        true origins; columns: origins named, then ambiguous and unknown) and the abstention."""
        return dict(
            json_ready(
                {
                    "accuracy": self.accuracy,
                    "refusal_rate": self.refusal_rate,
                    "ambiguous_rate": self.ambiguous_rate,
                    "left_out_unknown_rate": self.left_out_unknown_rate,
                    "left_out_unknown": dict(zip(self.origins, self.left_out_unknown, strict=True)),
                    "origins": self.origins,
                    "confusion": {
                        "rows": self.origins,
                        "columns": [*self.origins, "ambiguous", "unknown"],
                        "counts": self.confusion,
                    },
                    "abstention": self.abstention,
                }
            )
        )


def _measurement(
    comp: str | Compressor,
    method: str,
    conditional: str,
    engine: Engine | None,
    cache: SizeCache | None,
    progress: Progress | None,
) -> Measurement:
    """The measurement of a classification: `conditional` "auto" primes where the compressor
    can for the conditional method and concatenates otherwise."""
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; use {' or '.join(METHODS)}")
    built = build_compressor(comp)
    if conditional == "auto":
        primed = method == "conditional" and built.primable
        conditional = "primed" if primed else "concat"
    return Measurement.of(
        built, conditional=conditional, engine=engine, cache=cache, progress=progress
    )


def _score(
    targets: Sequence[Item],
    reference: _Reference,
    measurement: Measurement,
    method: str,
    k: int,
    longest: int,
) -> _Scores:
    if method == "knn":
        return _knn_scores(targets, reference, measurement, k)
    return _conditional_scores(targets, reference, measurement, longest)


@dataclass(frozen=True)
class _Calibrated:
    """What a fitted classification keeps: the abstention and its calibration (None with a
    given threshold)."""

    abstention: Abstention
    conformity: Conformity | None

    def decide(self, scores: np.ndarray) -> _Decisions:
        return _decisions(scores, self.conformity, self.abstention.threshold)


def _calibrate(
    reference: _Reference,
    measurement: Measurement,
    method: str,
    significance: float | None,
    threshold: float | None,
    blocks: int,
    longest: int,
) -> _Calibrated:
    if threshold is not None:
        if significance is not None:
            raise ValueError("give a significance or a threshold, not both")
        return _Calibrated(Abstention(None, float(threshold), blocks=blocks), None)
    significance = DEFAULT_SIGNIFICANCE if significance is None else significance
    if not 0 < significance < 1:
        raise ValueError(f"significance must lie between 0 and 1, got {significance}")
    reference.check(calibrate=True)
    folds = _fold_scores(reference, measurement, method, blocks, longest)
    keep = folds.measured
    conformity = Conformity.of(
        folds.scores[keep], reference.codes[keep], reference.origins, significance
    )
    return _Calibrated(_abstention(conformity, blocks), conformity)


def classify(
    unknowns: Sequence[ItemLike],
    reference: Sequence[ItemLike],
    comp: str | Compressor = "zstd:level=19",
    *,
    method: str = "conditional",
    k: int = 1,
    significance: float | None = None,
    threshold: float | None = None,
    blocks: int = DEFAULT_BLOCKS,
    conditional: str = "auto",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> Classification:
    """The origin of each unknown item among the reference's labels, or unknown / ambiguous.

    `method` is "conditional" (C(x | origin corpus) / C(x), Cohen & Vitanyi 2015) or "knn"
    (weighted k nearest neighbours under NCD, Jiang et al. 2023). The best origin accepts an
    item when the deciding test's conformal p-value is above `significance` (default 0.05; see
    Conformity), calibrated on the reference held out in `blocks` contiguous blocks per origin;
    a given `threshold` replaces that test by score <= threshold (float("inf") accepts all).
    `conditional` "auto" primes where the compressor can for the conditional method and
    concatenates otherwise. The nearest reference item is searched among the best origin's.
    """
    unknowns = as_items(unknowns)
    if not unknowns:
        raise InputError("no items to classify")
    ref = _Reference.of(reference)
    ref.check(calibrate=False)
    if method == "knn":
        _check_k(k, ref)
    measurement = _measurement(comp, method, conditional, engine, cache, progress)
    longest = max(len(i.data) for i in [*unknowns, *ref.items])
    fitted = _calibrate(ref, measurement, method, significance, threshold, blocks, longest)
    scores = _with_nearest(
        _score(unknowns, ref, measurement, method, k, longest), unknowns, ref, measurement,
        exclude_self=False,
    )  # fmt: skip
    decided = fitted.decide(scores.scores)
    return Classification(
        predictions=tuple(_decide(scores, decided, ref, unknowns)),
        origins=ref.origins,
        scores=scores.scores,
        p_values=decided.origin_p,
        abstention=fitted.abstention,
        method=method,
        k=k,
        compressor=measurement.compressor.spec,
        conditional=measurement.conditional,
    )


def evaluate(
    reference: Sequence[ItemLike],
    comp: str | Compressor = "zstd:level=19",
    *,
    method: str = "conditional",
    significance: float | None = None,
    threshold: float | None = None,
    blocks: int = DEFAULT_BLOCKS,
    conditional: str = "auto",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> Evaluation:
    """The reference's own test (see FoldReport): each block of every origin held out in turn,
    scored against the rest and decided with p-values from the other blocks; then each origin in
    turn missing from the reference. Refusals and ambiguities count as errors in the accuracy.
    Arguments as for `classify` (knn scores by the nearest neighbour of each origin).
    """
    if threshold is not None and significance is not None:
        raise ValueError("give a significance or a threshold, not both")
    ref = _Reference.of(reference)
    ref.check(calibrate=True)
    measurement = _measurement(comp, method, conditional, engine, cache, progress)
    longest = max(len(i.data) for i in ref.items)
    folds = _fold_scores(ref, measurement, method, blocks, longest)
    rate = DEFAULT_SIGNIFICANCE if significance is None else significance
    report = fold_report(folds, rate, threshold)
    keep = folds.measured
    abstention = (
        Abstention(None, float(threshold), blocks=blocks)
        if threshold is not None
        else _abstention(
            Conformity.of(folds.scores[keep], ref.codes[keep], ref.origins, rate), blocks
        )
    )
    return Evaluation(
        accuracy=report.accuracy,
        refusal_rate=report.refusal_rate,
        ambiguous_rate=report.ambiguous_rate,
        left_out_unknown_rate=report.left_out_unknown_rate,
        left_out_unknown=report.left_out_unknown,
        origins=ref.origins,
        confusion=report.confusion,
        abstention=abstention,
    )


# -- scikit-learn ------------------------------------------------------------------------------


class CompressionClassifier(ClassifierMixin, BaseEstimator):  # type: ignore[misc]
    """A scikit-learn classifier of bytes or strings by compression (see the module docstring).

    Parameters are stored as given. `fit` keeps the training items as the reference, chooses the
    compressor when `compressor` is "auto" (as the command line does for classify, within
    `budget` seconds; kept in `compressor_`) and calibrates the conformal abstention at
    `significance` (unless a `threshold` is given). `predict` returns the class, or
    `unknown_label` for an item no class accepts or several do; `p_values(X)` gives each item's
    conformal p-value for every class (columns in `classes_` order), the estimator's counterpart
    of `predict_proba`. `engine` runs the compressions (default: a `LocalEngine` on every core of
    this machine; a `DaskEngine` spreads them over a cluster). `cache` is a path to a size cache
    file, opened for each fit and predict, so that the estimator can be cloned and pickled.
    """

    def __init__(
        self,
        compressor: str = "auto",
        k: int = 1,
        method: str = "conditional",
        conditional: str = "auto",
        significance: float | None = None,
        threshold: float | None = None,
        unknown_label: Any = None,
        budget: float = 600.0,
        engine: Engine | None = None,
        cache: str | None = None,
    ) -> None:
        self.compressor = compressor
        self.k = k
        self.method = method
        self.conditional = conditional
        self.significance = significance
        self.threshold = threshold
        self.unknown_label = unknown_label
        self.budget = budget
        self.engine = engine
        self.cache = cache

    def _measurement(self, cache: SizeCache | None) -> Measurement:
        return _measurement(
            self.compressor_, self.method, self.conditional, self.engine, cache, None
        )

    def _open_cache(self) -> SizeCache | None:
        return SizeCache(self.cache) if self.cache is not None else None

    def fit(self, X: Sequence[ItemLike], y: Sequence[Any]) -> Self:
        """Keep X as the reference labelled by y, choose the compressor, calibrate abstention."""
        items = as_items(X, "ref")
        if len(items) != len(y):
            raise ValueError(f"X has {len(items)} items but y has {len(y)} labels")
        classes, codes = np.unique(np.asarray(y), return_inverse=True)
        self.classes_ = classes
        names = tuple(str(k) for k in range(len(classes)))
        labelled = [replace(i, label=names[c]) for i, c in zip(items, codes, strict=True)]
        self.reference_ = _Reference(tuple(labelled), names, codes.astype(np.int64))
        self.reference_.check(calibrate=self.threshold is None)
        cache = self._open_cache()
        try:
            self.compressor_ = self.compressor
            if self.compressor == "auto":
                from .calibration import choose_for_job

                self.compressor_ = choose_for_job(
                    labelled,
                    "classify",
                    budget_seconds=self.budget,
                    engine=self.engine,
                    cache=cache,
                ).spec
            self.longest_ = max(len(i.data) for i in labelled)
            self.calibrated_ = _calibrate(
                self.reference_, self._measurement(cache), self.method, self.significance,
                self.threshold, DEFAULT_BLOCKS, self.longest_,
            )  # fmt: skip
        finally:
            if cache is not None:
                cache.close()
        return self

    def _scores(self, X: Sequence[ItemLike]) -> np.ndarray:
        check_is_fitted(self, "calibrated_")
        targets = as_items(X, "x")
        cache = self._open_cache()
        try:
            longest = max([self.longest_, *(len(t.data) for t in targets)])
            scores = _score(targets, self.reference_, self._measurement(cache), self.method,
                            self.k, longest)  # fmt: skip
        finally:
            if cache is not None:
                cache.close()
        return scores.scores

    def p_values(self, X: Sequence[ItemLike]) -> np.ndarray:
        """Conformal p-values of the deciding test, shaped (len(X), len(classes_)): how typical
        each input is of each class (see Conformity). Raises ValueError when fitted with a
        threshold."""
        p = self.calibrated_.decide(self._scores(X)).origin_p
        if p is None:
            raise ValueError("fitted with a threshold: no p-values")
        return p

    def predict(self, X: Sequence[ItemLike]) -> np.ndarray:
        """The class of each input, or `unknown_label` where it is unknown or ambiguous."""
        decided = self.calibrated_.decide(self._scores(X))
        named = np.array([d == "named" for d in decided.decisions], dtype=bool)
        picked = np.array([c[0] if d == "named" else 0 for d, c in
                           zip(decided.decisions, decided.candidates, strict=True)])  # fmt: skip
        if named.all():
            return np.asarray(self.classes_[picked])
        out = np.empty(len(named), dtype=object)
        out[:] = [
            self.classes_[c] if ok else self.unknown_label
            for c, ok in zip(picked, named, strict=True)
        ]
        return out

    def score(self, X: Sequence[ItemLike], y: Sequence[Any], sample_weight: Any = None) -> float:
        """Mean accuracy on (X, y); a refused item counts as wrong."""
        hits = np.array([p == t for p, t in zip(self.predict(X), y, strict=True)], dtype=float)
        return float(np.average(hits, weights=sample_weight))

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

Abstention: an item is returned as unknown (None) when its best score exceeds a threshold. The
threshold comes from the reference itself by leave-one-out: each reference item's score for its own
origin without itself ("own"), and its best score among the other origins ("foreign", what an item
of an origin missing from the reference would score). The threshold minimises the share of own
scores above it plus the share of foreign scores at or below it. One cut for all origins refuses
many items of a spread-out origin (code in languages that share idioms, a noisy log), so each
origin's cut is then raised, where needed, until `min_accepted` (default 0.9) of that origin's own
scores lie within it. Measured on real code (8 languages) this took refusals of known languages
from 28 % to 7.5 % while 90 % of the files of a language left out of the reference were still
refused (97 % before); on real logs it changed nothing. The cuts are reported and can be given.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Self

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.utils.validation import check_is_fitted

from .cache import SizeCache
from .compressors import Compressor
from .compressors import compressor as build_compressor
from .distance import (
    MeasurementWarning,
    Progress,
    conditional_sizes,
    content_digest,
    distance_matrix,
)
from .engine import Engine
from .items import InputError, InputWarning, Item, Split, load_items

METHODS = ("conditional", "knn")
_VOTE_EPSILON = 1e-9
"""Added to a distance before 1 / d weighs a vote: an identical neighbour gets a finite weight."""


# -- the reference -----------------------------------------------------------------------------


def reference_items(folder: str | os.PathLike[str], split: str | Split = "auto") -> list[Item]:
    """Items of `folder/<origin>/<files>`, each labelled with its subfolder's name.

    Names are `origin/item`, so equal file names in two origins stay apart. Files lying directly
    in `folder` belong to no origin: they are left out with an InputWarning.
    """
    root = Path(folder)
    if not root.is_dir():
        raise InputError(f"{root}: reference must be a folder with one subfolder per origin")
    entries = sorted(p for p in root.iterdir() if not p.name.startswith("."))
    loose = [p.name for p in entries if not p.is_dir()]
    if loose:
        warnings.warn(
            f"{root}: {len(loose)} files are not in an origin subfolder (first: {loose[0]});"
            " left out",
            InputWarning,
            stacklevel=2,
        )
    items: list[Item] = []
    for sub in (p for p in entries if p.is_dir()):
        for item in load_items([sub], split):
            items.append(replace(item, name=f"{sub.name}/{item.name}", label=sub.name))
    if not items:
        raise InputError(f"{root}: no origin subfolders with files")
    return items


@dataclass(frozen=True)
class _Reference:
    """Reference items, the origin names, and each item's origin as an index into them."""

    items: tuple[Item, ...]
    origins: tuple[str, ...]
    codes: np.ndarray

    @classmethod
    def of(cls, items: Sequence[Item]) -> _Reference:
        missing = next((item.name for item in items if item.label is None), None)
        if missing is not None:
            raise InputError(f"reference item {missing} has no origin label")
        origins, codes = np.unique([str(item.label) for item in items], return_inverse=True)
        return cls(tuple(items), tuple(str(o) for o in origins), codes.astype(np.int64))

    def members(self, origin: int) -> np.ndarray:
        return np.flatnonzero(self.codes == origin)

    def check(self, *, leave_one_out: bool) -> None:
        if len(self.origins) < 2:
            raise InputError(f"need at least two origins in the reference, got {len(self.origins)}")
        if leave_one_out:
            counts = np.bincount(self.codes, minlength=len(self.origins))
            thin = [o for o, n in zip(self.origins, counts, strict=True) if n < 2]
            if thin:
                raise InputError(
                    "leave-one-out needs two reference items per origin; "
                    f"{', '.join(thin)} has one (give a threshold to classify without it)"
                )


@dataclass(frozen=True)
class _Options:
    """How sizes are measured: compressor, conditional method and where the work runs."""

    comp: Compressor
    conditional: str
    engine: Engine | None
    jobs: int | None
    cache: SizeCache | None
    progress: Progress | None

    def sizes_kwargs(self, conditional: str | None = None) -> dict[str, Any]:
        return {
            "conditional": conditional or self.conditional,
            "engine": self.engine,
            "jobs": self.jobs,
            "cache": self.cache,
            "progress": self.progress,
        }


# -- NCD between chosen pairs, the same numbers distance_matrix gives --------------------------


def _pair_distances(
    items: Sequence[Item], pairs: Sequence[tuple[int, int]], options: _Options, conditional: str
) -> np.ndarray:
    """NCD of each unordered index pair, measured exactly as `distance_matrix` measures it.

    The item with the smaller C (ties by content hash) conditions the other, one compression per
    pair; identical contents are at distance 0 and values below 0 are clipped to 0.
    """
    kwargs = options.sizes_kwargs(conditional)
    sizes = conditional_sizes(items, [], options.comp, **kwargs).sizes
    digests = [content_digest(item.data) for item in items]
    order = [(int(sizes[k]), int.from_bytes(d[:8], "big")) for k, d in enumerate(digests)]
    directed = [(a, b) if order[a] <= order[b] else (b, a) for a, b in pairs]
    measured = conditional_sizes(items, directed, options.comp, **kwargs)
    targets = np.array([b for _, b in directed], dtype=np.int64).reshape(-1)
    ncd = measured.conditional / np.maximum(measured.sizes[targets], 1)
    same = np.array([digests[a] == digests[b] for a, b in directed], dtype=bool).reshape(-1)
    return np.where(same, 0.0, np.clip(ncd, 0.0, None))


def _cross_distances(
    rows: Sequence[Item], columns: Sequence[Item], options: _Options, conditional: str
) -> np.ndarray:
    """The (len(rows), len(columns)) block of the NCD matrix of rows + columns."""
    n = len(rows)
    pairs = [(i, n + j) for i in range(n) for j in range(len(columns))]
    found = _pair_distances([*rows, *columns], pairs, options, conditional)
    return found.reshape(n, len(columns))


def pairwise_distances(
    X: Sequence[bytes | str],
    Y: Sequence[bytes | str] | None = None,
    compressor: str | Compressor = "zstd:level=19",
    *,
    conditional: str = "concat",
    engine: Engine | None = None,
    jobs: int | None = None,
    cache: SizeCache | None = None,
) -> np.ndarray:
    """NCD between inputs, shaped (len(X), len(Y)), for scikit-learn's ``metric="precomputed"``.

    Without Y, the square matrix of `distance_matrix` (symmetric, zero diagonal, non-negative);
    with Y, the block of rows X and columns Y of the matrix of X + Y, measured the same way.
    Strings are encoded as UTF-8.
    """
    options = _Options(build_compressor(compressor), conditional, engine, jobs, cache, None)
    rows = as_items(X, "x")
    if Y is None:
        if len(rows) < 2:
            return np.zeros((len(rows), len(rows)))
        matrix = distance_matrix(rows, options.comp, **options.sizes_kwargs())
        return np.array(matrix.distances)
    return _cross_distances(rows, as_items(Y, "y"), options, conditional)


def as_items(values: Iterable[bytes | str], prefix: str = "x") -> list[Item]:
    """Items named prefix0, prefix1, ... from bytes, or from strings encoded as UTF-8."""
    out = []
    for k, value in enumerate(values):
        if isinstance(value, str):
            data = value.encode("utf-8")
        elif isinstance(value, bytes | bytearray | memoryview):
            data = bytes(value)
        else:
            raise TypeError(f"expected bytes or str, got {type(value).__name__} at position {k}")
        out.append(Item(f"{prefix}{k}", data, "input"))
    return out


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


def _check_k(k: int, reference: _Reference, leave_one_out: bool) -> None:
    available = len(reference.items) - (1 if leave_one_out else 0)
    if not 1 <= k <= available:
        raise ValueError(f"k must be between 1 and {available} reference items, got {k}")


def _knn_scores(
    targets: Sequence[Item], reference: _Reference, options: _Options, k: int
) -> _Scores:
    _check_k(k, reference, leave_one_out=False)
    distances = _cross_distances(targets, reference.items, options, options.conditional)
    return _knn_decision(distances, reference.codes, len(reference.origins), k)


def _knn_leave_one_out(reference: _Reference, options: _Options, k: int) -> _Scores:
    _check_k(k, reference, leave_one_out=True)
    matrix = distance_matrix(reference.items, options.comp, **options.sizes_kwargs())
    distances = np.array(matrix.distances)
    np.fill_diagonal(distances, np.inf)
    return _knn_decision(distances, reference.codes, len(reference.origins), k)


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


def _corpus(name: str, datas: Sequence[bytes], budget: int | None, origin: str) -> Item:
    data = corpus_bytes(datas, budget)
    if budget is not None and len(data) < sum(len(d) for d in datas):
        warnings.warn(
            f"corpus of {origin} cut from {sum(len(d) for d in datas):,} to {len(data):,} bytes"
            f" to fit the compressor's window (every item keeps its first bytes)",
            MeasurementWarning,
            stacklevel=4,
        )
    return Item(name, data, "origin corpus", label=origin)


def _origin_corpora(
    reference: _Reference, budget: int | None, leave_out: int | None = None
) -> list[Item]:
    """One synthetic item per origin: its reference items joined (less `leave_out`, if given)."""
    corpora = []
    for origin, name in enumerate(reference.origins):
        members = [int(m) for m in reference.members(origin) if m != leave_out]
        datas = [reference.items[m].data for m in members]
        suffix = "" if leave_out is None else f" without {reference.items[leave_out].name}"
        corpora.append(_corpus(f"corpus {name}{suffix}", datas, budget, name))
    return corpora


def _conditional_ratios(
    targets: Sequence[Item],
    corpora: Sequence[Item],
    wanted: Sequence[tuple[int, int]],
    options: _Options,
) -> np.ndarray:
    """C(target | corpus) / C(target) for each (target, corpus) index pair."""
    n = len(targets)
    pairs = [(n + c, t) for t, c in wanted]
    measured = conditional_sizes(
        [*targets, *corpora], pairs, options.comp, **options.sizes_kwargs()
    )
    singles = measured.sizes[np.array([t for t, _ in wanted], dtype=np.int64).reshape(-1)]
    ratios: np.ndarray = measured.conditional / np.maximum(singles, 1)
    return ratios


def _nearest_in_origin(
    targets: Sequence[Item],
    reference: _Reference,
    picked: np.ndarray,
    options: _Options,
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
    found = _pair_distances(items, pairs, options, options.conditional)
    nearest = np.zeros(n, dtype=np.int64)
    distance = np.full(n, np.inf)
    for (t, m), d in zip(owners, found, strict=True):
        if d < distance[t]:
            nearest[t], distance[t] = m, d
    return nearest, distance


def _conditional_scores(
    targets: Sequence[Item], reference: _Reference, options: _Options
) -> _Scores:
    longest = max(len(t.data) for t in targets)
    corpora = _origin_corpora(reference, _corpus_budget(options.comp, longest))
    m = len(reference.origins)
    wanted = [(t, o) for t in range(len(targets)) for o in range(m)]
    scores = _conditional_ratios(targets, corpora, wanted, options).reshape(len(targets), m)
    return _Scores(scores, scores.argmin(axis=1))


def _conditional_leave_one_out(reference: _Reference, options: _Options) -> _Scores:
    items = reference.items
    budget = _corpus_budget(options.comp, max(len(i.data) for i in items))
    m = len(reference.origins)
    corpora = _origin_corpora(reference, budget)
    wanted = []
    for t, own in enumerate(reference.codes):
        corpora.append(_origin_corpora(reference, budget, leave_out=t)[int(own)])
        wanted += [(t, m + t if o == own else o) for o in range(m)]
    scores = _conditional_ratios(items, corpora, wanted, options).reshape(len(items), m)
    return _Scores(scores, scores.argmin(axis=1))


def _with_nearest(
    scores: _Scores,
    targets: Sequence[Item],
    reference: _Reference,
    options: _Options,
    exclude_self: bool,
) -> _Scores:
    """Scores with the nearest reference item filled in, searched in the picked origin."""
    if scores.nearest is not None:
        return scores
    nearest, distance = _nearest_in_origin(targets, reference, scores.picked, options, exclude_self)
    return replace(scores, nearest=nearest, distance=distance)


# -- thresholds, decisions and results ----------------------------------------------------------


DEFAULT_MIN_ACCEPTED = 0.9


@dataclass(frozen=True)
class Threshold:
    """The abstention threshold on the best score, and how it was set.

    `value` is the cut shared by all origins; `per_origin`, when derived, the cut for each origin
    (`value` raised where fewer than `min_accepted` of its own scores were within it). `derived`
    is true when it came from leave-one-out on the reference; then `false_unknown` is the share of
    reference items whose own-origin score lies above their origin's cut (they would be refused)
    and `false_known` the share whose best foreign score lies at or below that origin's cut (an
    item of an origin missing from the reference would be taken for a known one).
    """

    value: float
    derived: bool
    false_unknown: float | None = None
    false_known: float | None = None
    per_origin: tuple[float, ...] | None = None

    def cuts(self, origins: int) -> np.ndarray:
        """The cut for each origin code."""
        if self.per_origin is None:
            return np.full(origins, self.value)
        return np.array(self.per_origin, dtype=float)

    def as_json(self, origins: Sequence[str] = ()) -> dict[str, object]:
        out: dict[str, object] = {
            "value": None if np.isinf(self.value) else self.value,
            "derived": self.derived,
            "false_unknown": self.false_unknown,
            "false_known": self.false_known,
        }
        if self.per_origin is not None and origins:
            out["per_origin"] = dict(zip(origins, self.per_origin, strict=True))
        return out


def choose_threshold(own: np.ndarray, foreign: np.ndarray) -> Threshold:
    """The cut between own-origin and foreign scores with the fewest errors of both kinds.

    Minimises mean(own > t) + mean(foreign <= t) over midpoints between observed scores (and
    just beyond both ends); among equal cuts the middle one is taken.
    """
    values = np.unique(np.concatenate([own, foreign]))
    candidates = np.concatenate([[values[0] - 1e-9], (values[:-1] + values[1:]) / 2, [values[-1]]])
    missed = (own[None, :] > candidates[:, None]).mean(axis=1)
    accepted = (foreign[None, :] <= candidates[:, None]).mean(axis=1)
    cost = missed + accepted
    best = np.flatnonzero(cost == cost.min())
    pick = int(best[len(best) // 2])
    return Threshold(float(candidates[pick]), True, float(missed[pick]), float(accepted[pick]))


def _threshold_of(loo: _Scores, codes: np.ndarray, min_accepted: float) -> Threshold:
    """The shared cut (choose_threshold), raised per origin to accept `min_accepted` of its own."""
    if not 0 <= min_accepted <= 1:
        raise ValueError(f"min_accepted must lie between 0 and 1, got {min_accepted}")
    rows = np.arange(len(codes))
    own = loo.scores[rows, codes]
    others = loo.scores.copy()
    others[rows, codes] = np.inf
    foreign, foreign_origin = others.min(axis=1), others.argmin(axis=1)
    shared = choose_threshold(own, foreign)
    cuts = np.full(loo.scores.shape[1], shared.value)
    if min_accepted > 0:
        for origin in range(len(cuts)):
            mine = own[codes == origin]
            if mine.size:
                cuts[origin] = max(shared.value, float(np.quantile(mine, min_accepted)))
    return Threshold(
        shared.value,
        True,
        false_unknown=float(np.mean(own > cuts[codes])),
        false_known=float(np.mean(foreign <= cuts[foreign_origin])),
        per_origin=tuple(float(c) for c in cuts),
    )


@dataclass(frozen=True)
class Prediction:
    """One classified item: the origin (None when refused), its margin, the nearest reference."""

    item: str
    predicted: str | None
    confidence: float
    nearest: str
    distance: float

    def as_json(self) -> dict[str, object]:
        return {
            "item": self.item,
            "predicted": self.predicted,
            "confidence": self.confidence,
            "nearest": self.nearest,
            "distance": self.distance,
        }


def _accepted(scores: _Scores, threshold: Threshold) -> np.ndarray:
    """True where the picked origin's score is within that origin's cut."""
    best: np.ndarray = scores.scores[np.arange(len(scores.picked)), scores.picked]
    return np.asarray(best <= threshold.cuts(scores.scores.shape[1])[scores.picked])


def _decide(
    scores: _Scores, threshold: Threshold, reference: _Reference, targets: Sequence[Item]
) -> list[Prediction]:
    """Refuse items whose picked score exceeds its cut; confidence = runner-up - picked."""
    if scores.nearest is None or scores.distance is None:
        raise ValueError("scores lack the nearest reference items")
    rows = np.arange(len(targets))
    best = scores.scores[rows, scores.picked]
    others = scores.scores.copy()
    others[rows, scores.picked] = np.inf
    margin = others.min(axis=1) - best
    accepted = _accepted(scores, threshold)
    return [
        Prediction(
            item=target.name,
            predicted=reference.origins[int(scores.picked[t])] if accepted[t] else None,
            confidence=float(margin[t]),
            nearest=reference.items[int(scores.nearest[t])].name,
            distance=float(scores.distance[t]),
        )
        for t, target in enumerate(targets)
    ]


@dataclass(frozen=True)
class Classification:
    """Predictions for unknown items, with the threshold and the measurement behind them.

    `scores` holds one row per item and one column per origin (lower is better): NCD to the
    origin's nearest reference item for knn, C(x | corpus) / C(x) for conditional.
    """

    predictions: tuple[Prediction, ...]
    origins: tuple[str, ...]
    scores: np.ndarray
    threshold: Threshold
    method: str
    k: int
    compressor: str
    conditional: str

    def as_json(self) -> list[dict[str, object]]:
        """One object per item: item, predicted, confidence, nearest, distance."""
        return [p.as_json() for p in self.predictions]


@dataclass(frozen=True)
class Evaluation:
    """Leave-one-out on the reference: each item classified by all the others.

    `confusion[i, j]` counts items of origin i predicted as origin j; the last column counts
    refusals. The threshold is derived from the same leave-one-out scores unless it was given,
    so the abstention rate is an in-sample figure.
    """

    accuracy: float
    abstention_rate: float
    origins: tuple[str, ...]
    confusion: np.ndarray
    threshold: Threshold
    predictions: tuple[Prediction, ...]

    def as_json(self) -> dict[str, object]:
        return {
            "accuracy": self.accuracy,
            "abstention_rate": self.abstention_rate,
            "origins": list(self.origins),
            "confusion": self.confusion.tolist(),
            "threshold": self.threshold.as_json(self.origins),
        }


def _options(
    comp: str | Compressor,
    method: str,
    conditional: str,
    engine: Engine | None,
    jobs: int | None,
    cache: SizeCache | None,
    progress: Progress | None,
) -> _Options:
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; use {' or '.join(METHODS)}")
    built = build_compressor(comp)
    if conditional == "auto":
        primed = method == "conditional" and built.primable
        conditional = "primed" if primed else "concat"
    return _Options(built, conditional, engine, jobs, cache, progress)


def _leave_one_out(reference: _Reference, options: _Options, method: str, k: int) -> _Scores:
    reference.check(leave_one_out=True)
    if method == "knn":
        return _knn_leave_one_out(reference, options, k)
    return _conditional_leave_one_out(reference, options)


def _score(
    targets: Sequence[Item], reference: _Reference, options: _Options, method: str, k: int
) -> _Scores:
    if method == "knn":
        return _knn_scores(targets, reference, options, k)
    return _conditional_scores(targets, reference, options)


def _threshold(
    reference: _Reference,
    options: _Options,
    method: str,
    k: int,
    given: float | None,
    min_accepted: float,
) -> Threshold:
    if given is not None:
        return Threshold(float(given), False)
    loo = _leave_one_out(reference, options, method, k)
    return _threshold_of(loo, reference.codes, min_accepted)


def classify(
    unknowns: Sequence[Item],
    reference: Sequence[Item],
    comp: str | Compressor = "zstd:level=19",
    *,
    method: str = "conditional",
    k: int = 1,
    threshold: float | None = None,
    min_accepted: float = DEFAULT_MIN_ACCEPTED,
    conditional: str = "auto",
    engine: Engine | None = None,
    jobs: int | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> Classification:
    """The origin of each unknown item among the reference's labels, or None when none fits.

    `method` is "conditional" (C(x | origin corpus) / C(x), Cohen & Vitanyi 2015) or "knn"
    (weighted k nearest neighbours under NCD, Jiang et al. 2023). `threshold` None derives the
    abstention threshold by leave-one-out on the reference, each origin's cut raised until
    `min_accepted` of its own reference items pass (0: one cut for all); float("inf") never
    abstains.
    `conditional` "auto" primes where the compressor can for the conditional method and
    concatenates otherwise. For the conditional method the nearest reference item is searched
    among the predicted origin's items only.
    """
    if not unknowns:
        raise InputError("no items to classify")
    ref = _Reference.of(reference)
    ref.check(leave_one_out=False)
    options = _options(comp, method, conditional, engine, jobs, cache, progress)
    cut = _threshold(ref, options, method, k, threshold, min_accepted)
    scores = _with_nearest(
        _score(unknowns, ref, options, method, k), unknowns, ref, options, exclude_self=False
    )
    return Classification(
        predictions=tuple(_decide(scores, cut, ref, unknowns)),
        origins=ref.origins,
        scores=scores.scores,
        threshold=cut,
        method=method,
        k=k,
        compressor=options.comp.spec,
        conditional=options.conditional,
    )


def evaluate(
    reference: Sequence[Item],
    comp: str | Compressor = "zstd:level=19",
    *,
    method: str = "conditional",
    k: int = 1,
    threshold: float | None = None,
    min_accepted: float = DEFAULT_MIN_ACCEPTED,
    conditional: str = "auto",
    engine: Engine | None = None,
    jobs: int | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> Evaluation:
    """Leave-one-out on the reference: accuracy, abstention rate and a confusion table.

    Refusals count as errors in the accuracy. Arguments as for `classify`.
    """
    ref = _Reference.of(reference)
    options = _options(comp, method, conditional, engine, jobs, cache, progress)
    loo = _with_nearest(
        _leave_one_out(ref, options, method, k), ref.items, ref, options, exclude_self=True
    )
    cut = (
        Threshold(float(threshold), False)
        if threshold is not None
        else _threshold_of(loo, ref.codes, min_accepted)
    )
    predictions = _decide(loo, cut, ref, ref.items)
    m = len(ref.origins)
    confusion = np.zeros((m, m + 1), dtype=np.int64)
    column = {name: j for j, name in enumerate(ref.origins)}
    for truth, prediction in zip(ref.codes, predictions, strict=True):
        confusion[truth, m if prediction.predicted is None else column[prediction.predicted]] += 1
    return Evaluation(
        accuracy=float(np.trace(confusion[:, :m]) / len(predictions)),
        abstention_rate=float(confusion[:, m].sum() / len(predictions)),
        origins=ref.origins,
        confusion=confusion,
        threshold=cut,
        predictions=tuple(predictions),
    )


# -- scikit-learn ------------------------------------------------------------------------------


class CompressionClassifier(ClassifierMixin, BaseEstimator):  # type: ignore[misc]
    """A scikit-learn classifier of bytes or strings by compression (see the module docstring).

    Parameters are stored as given; `fit` keeps the training items as the reference and sets
    `classes_`, `threshold_` (derived by leave-one-out unless `threshold` is given) and
    `class_thresholds_` (each class's cut, see `min_accepted` in `classify`). `predict`
    returns `unknown_label` for refused items. `cache` is a path to a size cache file, opened for
    each fit and predict, so that the estimator can be cloned and pickled.
    """

    def __init__(
        self,
        compressor: str = "zstd:level=19",
        k: int = 1,
        method: str = "conditional",
        conditional: str = "auto",
        threshold: float | None = None,
        min_accepted: float = DEFAULT_MIN_ACCEPTED,
        unknown_label: Any = None,
        jobs: int | None = None,
        cache: str | None = None,
    ) -> None:
        self.compressor = compressor
        self.k = k
        self.method = method
        self.conditional = conditional
        self.threshold = threshold
        self.min_accepted = min_accepted
        self.unknown_label = unknown_label
        self.jobs = jobs
        self.cache = cache

    def _run_options(self, cache: SizeCache | None) -> _Options:
        return _options(
            self.compressor, self.method, self.conditional, None, self.jobs, cache, None
        )

    def _open_cache(self) -> SizeCache | None:
        return SizeCache(self.cache) if self.cache is not None else None

    def fit(self, X: Sequence[bytes | str], y: Sequence[Any]) -> Self:
        """Keep X as the reference labelled by y and set the abstention threshold."""
        items = as_items(X, "ref")
        if len(items) != len(y):
            raise ValueError(f"X has {len(items)} items but y has {len(y)} labels")
        classes, codes = np.unique(np.asarray(y), return_inverse=True)
        self.classes_ = classes
        self.reference_ = _Reference(
            tuple(items), tuple(str(k) for k in range(len(classes))), codes.astype(np.int64)
        )
        self.reference_.check(leave_one_out=self.threshold is None)
        cache = self._open_cache()
        try:
            options = self._run_options(cache)
            cut = _threshold(
                self.reference_, options, self.method, self.k, self.threshold, self.min_accepted
            )
            self.threshold_ = cut.value
            self.class_thresholds_ = cut.cuts(len(classes))
        finally:
            if cache is not None:
                cache.close()
        return self

    def predict(self, X: Sequence[bytes | str]) -> np.ndarray:
        """The origin of each input, or `unknown_label` where its best score is above threshold_."""
        check_is_fitted(self, "class_thresholds_")
        targets = as_items(X, "x")
        cache = self._open_cache()
        try:
            options = self._run_options(cache)
            scores = _score(targets, self.reference_, options, self.method, self.k)
        finally:
            if cache is not None:
                cache.close()
        cut = Threshold(self.threshold_, False, per_origin=tuple(self.class_thresholds_))
        accepted = _accepted(scores, cut)
        if accepted.all():
            return np.asarray(self.classes_[scores.picked])
        out = np.empty(len(targets), dtype=object)
        out[:] = [
            self.classes_[c] if a else self.unknown_label
            for c, a in zip(scores.picked, accepted, strict=True)
        ]
        return out

    def score(self, X: Sequence[bytes | str], y: Sequence[Any], sample_weight: Any = None) -> float:
        """Mean accuracy on (X, y); a refused item counts as wrong."""
        hits = np.array([p == t for p, t in zip(self.predict(X), y, strict=True)], dtype=float)
        return float(np.average(hits, weights=sample_weight))

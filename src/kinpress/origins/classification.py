"""Decisions and results (see kinpress.origins): `classify` unknown items against a reference,
and `evaluate` the reference by its own held-out folds."""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ..cache import SizeCache
from ..compressors import Compressor
from ..engine import Engine
from ..formats import json_ready
from ..items import InputError, Item, ItemLike, as_items
from ..measure import Measurement, Progress, content_digest
from .conformal import Abstention, Conformity, _abstention, combined
from .scores import (
    DEFAULT_BLOCKS,
    DEFAULT_SIGNIFICANCE,
    STACK,
    FoldScores,
    _check_k,
    _fold_scores,
    _measurements,
    _Reference,
    _score,
    _Scores,
    _with_nearest,
)
from .views import Scoring

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
    keys them), so a reviewer can find and check the very bytes classified. `beyond_rate` marks
    a refused item a refusal warning counts (see Classification.concentrated): its best origin
    fits it by the separation test, and that origin's items were refused far beyond the rate.
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
    beyond_rate: bool = False

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
                    "beyond_rate": self.beyond_rate,
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
    """Decide every item (see Prediction and Conformity); `scores` may be a stack of views."""
    order = np.argsort(combined(scores), axis=1, kind="stable")
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
    scores: _Scores,
    decided: _Decisions,
    reference: _Reference,
    targets: Sequence[Item],
    beyond_rate: np.ndarray | None = None,
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
                beyond_rate=bool(beyond_rate is not None and beyond_rate[t]),
            )
        )
    return out


def scoring_words(scorings: Sequence[Scoring], compressors: Sequence[str]) -> str:
    """Each compressor's scoring in words (Scoring.description); for a stack, named by
    compressor, with how their views are joined."""
    if len(scorings) == 1:
        return scorings[0].description
    each = "; ".join(
        f"{spec}: {way.description}" for spec, way in zip(compressors, scorings, strict=True)
    )
    return (
        f"a stack of {len(scorings)} compressors, an origin's score the geometric mean over the"
        f" views of all and the tests weighing each view as one compressor's views: {each}"
    )


def _beyond_rate(refused: int, items: int, rate: float, origins: int) -> float | None:
    """The binomial chance of at least `refused` of `items` refused at `rate`
    (scipy.stats.binom.sf) where it is at most the rate shared among `origins` (Bonferroni: a
    run's chance of any false alarm is then at most the rate), else None: were the items as
    exchangeable with the held-out reference as the guarantee asks, the refused would be at most
    Binomial(items, rate)."""
    if not refused:
        return None
    from scipy.stats import binom

    p = float(binom.sf(refused - 1, items, rate))
    return p if p <= rate / origins else None


class RefusalWarning(UserWarning):
    """The items one origin fits best were refused far beyond the rate (see Concentrated)."""


@dataclass(frozen=True)
class Concentrated:
    """Refusals of the items one origin fits best, more than the rate allows (see
    `_concentrated`): `refused` of the `fitting` items whose best origin is `origin` were refused
    though the separation test takes them for it; `p` is the binomial chance of at least as
    many refusals at the significance."""

    origin: str
    refused: int
    fitting: int
    p: float

    def words(self, significance: float) -> str:
        return (
            f"{self.origin}: {self.refused} of the {self.fitting} items it fits best were refused,"
            f" more than a rate of {significance:g} allows (binomial p = {self.p:.1g}), though"
            f" the separation test takes them for {self.origin}: its new data may have drifted"
            " from the reference, or an origin like it is missing; deciding by the separation"
            ' test keeps such items (--decide-by separation; test="separation" in Python)'
        )


@dataclass(frozen=True)
class Classification:
    """Predictions for unknown items, the abstention behind them and the measurement.

    `scores` holds one row per item and one column per origin (lower is better): NCD to the
    origin's nearest reference item for knn, C(x | corpus) / C(x) for conditional, made
    comparable across origins as `scoring` says (see Scoring); `p_values` the
    deciding test's p-value of each (None with a given threshold; see Conformity).
    `concentrated` names origins whose best-fitting items were refused far beyond the rate
    while the separation test would take them (see Concentrated); empty when none were, when
    separation decides, or with a threshold. A stack of compressors (`compressor` their specs
    joined by STACK) decides on the views of all (see _stacked_calibration): `scores` are the
    geometric mean over them, `scorings` each compressor's scoring (`scoring` the first's),
    and the nearest reference items are the first compressor's.
    """

    predictions: tuple[Prediction, ...]
    origins: tuple[str, ...]
    scores: np.ndarray
    p_values: np.ndarray | None
    abstention: Abstention
    scoring: Scoring
    method: str
    k: int
    compressor: str
    conditional: str
    concentrated: tuple[Concentrated, ...] = ()
    scorings: tuple[Scoring, ...] = ()

    @property
    def compressors(self) -> tuple[str, ...]:
        """The spec of each compressor that scored the items (more than one for a stack)."""
        return tuple(self.compressor.split(STACK))

    @property
    def scoring_words(self) -> str:
        """How the scores were made, in words (see scoring_words)."""
        return scoring_words(self.scorings or (self.scoring,), self.compressors)

    def as_json(self) -> list[dict[str, object]]:
        """One object per item (see Prediction.as_json)."""
        return list(json_ready(self.predictions))

    def counts(self) -> dict[str, int]:
        """How many items were named, ambiguous and unknown."""
        return {d: sum(p.decision == d for p in self.predictions) for d in DECISIONS}

    def to_frame(self) -> Any:
        """One pandas row per item: prediction, scores, p-values (`convert`)."""
        from ..convert import classification_frame

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


def _scoring(
    content: np.ndarray,
    shaped: np.ndarray | None,
    codes: np.ndarray,
    origins: Sequence[str],
    choose: bool,
) -> Scoring:
    """How held-out scores become decision scores: chosen on them (see Scoring), or the
    content as measured."""
    if not choose:
        return Scoring.as_measured(origins)
    return Scoring.choose(content, shaped, codes, origins)


def _both_measured(folds: FoldScores, shaped: FoldScores | None) -> np.ndarray:
    """The held-out rows measured in the content and, when given, in the shape view."""
    return folds.measured if shaped is None else folds.measured & shaped.measured


Views = tuple[FoldScores, FoldScores | None]
"""A compressor's held-out scores of the content and, when measured, of the shape view."""


def _stacked_calibration(
    views: Sequence[Views], choose: bool
) -> tuple[tuple[Scoring, ...], np.ndarray, np.ndarray]:
    """Each compressor's scoring chosen on the held-out rows all of them measured (see
    _scoring), what the decision tests of them (`Scoring.stack`, joined by `_joined`) and their
    origins. For a stack the tests then weigh each compressor's views as they weigh one
    compressor's content and shape, so that what one compressor misses on data that has
    drifted (its own scores far above its held-out reference's) the other's views still
    count."""
    keep = np.logical_and.reduce([_both_measured(folds, shaped) for folds, shaped in views])
    ways, stacks = [], []
    codes = views[0][0].codes[keep]
    for folds, shaped in views:
        held = folds.scores[keep]
        held_shape = None if shaped is None else shaped.scores[keep]
        way = _scoring(held, held_shape, codes, folds.origins, choose)
        ways.append(way)
        stacks.append(way.stack(held, held_shape))
    return tuple(ways), _joined(stacks), codes


def _joined(stacks: Sequence[np.ndarray]) -> np.ndarray:
    """The decision scores of a stack's compressors as one (items, origins, views) stack; one
    compressor's as they are."""
    if len(stacks) == 1:
        return stacks[0]
    return np.concatenate([s if s.ndim == 3 else s[:, :, None] for s in stacks], axis=2)


def fold_report(
    folds: FoldScores,
    significance: float = DEFAULT_SIGNIFICANCE,
    threshold: float | None = None,
    shaped: FoldScores | None = None,
    choose: bool = True,
    test: str | None = None,
    stacked: Sequence[Views] = (),
) -> FoldReport:
    """Decide every measured held-out reference item as a new one would be (see FoldReport).

    With `choose` (the conditional method's scores) each decision also chooses the scoring (each
    view's footing, and whether the shape view's scores in `shaped` join in; see Scoring) from
    the items it calibrates on; `test` (one of DECIDERS) decides instead of the one each
    calibration would choose. `stacked` holds the views of further compressors of a stack,
    measured on the same folds, whose decision scores join the first's (see
    _stacked_calibration)."""
    views = [(folds, shaped), *stacked]
    if threshold is not None:
        _one_for_threshold(views)
    keep = np.logical_and.reduce([_both_measured(f, s) for f, s in views])
    codes, fold_of = folds.codes[keep], folds.folds[keep]
    measured = [(f.scores[keep], None if s is None else s.scores[keep]) for f, s in views]
    scores = measured[0][0]
    n, m = scores.shape
    origins = [folds.origins[o] for o in range(m)]
    choose = choose and threshold is None

    def decide(train: np.ndarray, rows: np.ndarray, columns: list[int]) -> _Decisions:
        """Calibrate on rows `train`, decide rows `rows`, on the origins in `columns`."""
        names = [origins[o] for o in columns]
        relabel = np.searchsorted(columns, codes[train])
        calibrations, decisions = [], []
        for view_scores, view_shapes in measured:
            content = view_scores[:, columns]
            shape = None if view_shapes is None else view_shapes[:, columns]
            way = _scoring(
                content[train], None if shape is None else shape[train], relabel, names, choose
            )
            calibrations.append(way.stack(content[train], None if shape is None else shape[train]))
            decisions.append(way.stack(content[rows], None if shape is None else shape[rows]))
        conformity = None
        if threshold is None:
            conformity = Conformity.of(_joined(calibrations), relabel, names, significance, test)
        return _decisions(_joined(decisions), conformity, threshold)

    confusion = np.zeros((m, m + 2), dtype=np.int64)
    everyone = list(range(m))
    for fold in np.unique(fold_of):
        rows = fold_of == fold
        decided = decide(~rows, rows, everyone)
        for truth, decision, candidates in zip(
            codes[rows], decided.decisions, decided.candidates, strict=True
        ):
            column = {"named": candidates[0] if candidates else 0, "ambiguous": m, "unknown": m + 1}
            confusion[truth, column[decision]] += 1
    left_out = []
    for origin in range(m):
        mine, rest = codes == origin, codes != origin
        if not mine.any() or not rest.any():
            continue
        decided = decide(rest, mine, [o for o in range(m) if o != origin])
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
    that origin is missing from the reference. `scoring` is the (first) compressor's scoring,
    `scorings` each compressor's of a stack (see Classification).
    """

    accuracy: float
    refusal_rate: float
    ambiguous_rate: float
    left_out_unknown_rate: float
    left_out_unknown: tuple[float, ...]
    origins: tuple[str, ...]
    confusion: np.ndarray
    abstention: Abstention
    scoring: Scoring
    scorings: tuple[Scoring, ...] = ()
    compressor: str = ""

    @property
    def scoring_words(self) -> str:
        """How the scores were made, in words (see scoring_words)."""
        return scoring_words(self.scorings or (self.scoring,), tuple(self.compressor.split(STACK)))

    @property
    def drifting(self) -> tuple[tuple[str, int, int, float], ...]:
        """Origins whose own held-out items were refused (unknown or ambiguous) far beyond the
        rate: (origin, refused, items, p), by the same binomial check as classify's refusal
        warning (_beyond_rate, see Concentrated).
        Such an origin's blocks differ from each other more than the rate was set for (which
        need not say how its later items will fare). Empty with a given threshold."""
        rate = self.abstention.significance
        if rate is None:
            return ()
        found = []
        for origin, row in zip(self.origins, self.confusion, strict=True):
            k, n = int(row[-2:].sum()), int(row.sum())
            p = _beyond_rate(k, n, rate, len(self.origins))
            if p is not None:
                found.append((origin, k, n, p))
        return tuple(found)

    def as_json(self) -> dict[str, object]:
        """The rates, per origin its missing-origin refusal rate, the confusion table (rows:
        true origins; columns: origins named, then ambiguous and unknown), the abstention, the
        compressor (a stack's specs joined by +) and the scoring (see Scoring: chosen on all
        held-out items, where each fold's decisions chose it on the other folds; `scorings`
        each compressor's)."""
        return dict(
            json_ready(
                {
                    "compressor": self.compressor,
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
                    "scoring": self.scoring,
                    "scorings": self.scorings,
                    "drifting": [
                        {"origin": o, "refused": k, "items": n, "p": p}
                        for o, k, n, p in self.drifting
                    ],
                }
            )
        )


@dataclass(frozen=True)
class _Calibrated:
    """What a fitted classification keeps: the abstention, its calibration (None with a given
    threshold) and how measured scores become decision scores (see Scoring)."""

    abstention: Abstention
    conformity: Conformity | None
    scorings: tuple[Scoring, ...]
    separation: Conformity | None = None

    @property
    def scoring(self) -> Scoring:
        """The first compressor's scoring (the only one but for a stack)."""
        return self.scorings[0]

    def decide(self, scores: np.ndarray) -> _Decisions:
        """Decide items by what the decision tests (`scoring.stack`)."""
        return _decisions(scores, self.conformity, self.abstention.threshold)


def _calibrate(
    reference: _Reference,
    measurements: Sequence[Measurement],
    method: str,
    significance: float | None,
    threshold: float | None,
    blocks: int,
    longest: int,
    test: str | None = None,
) -> _Calibrated:
    if threshold is not None:
        if significance is not None:
            raise ValueError("give a significance or a threshold, not both")
        _one_for_threshold(measurements)
        abstention = Abstention(None, float(threshold), blocks=blocks)
        return _Calibrated(abstention, None, (Scoring.as_measured(reference.origins),))
    significance = DEFAULT_SIGNIFICANCE if significance is None else significance
    if not 0 < significance < 1:
        raise ValueError(f"significance must lie between 0 and 1, got {significance}")
    reference.check(calibrate=True)
    views = [
        _both_views(reference, m, method, blocks, longest, _tag(measurements, m))
        for m in measurements
    ]
    ways, calibration, codes = _stacked_calibration(views, method == "conditional")
    conformity = Conformity.of(calibration, codes, reference.origins, significance, test)
    separation = (
        None
        if conformity.test == "separation"
        else Conformity.of(calibration, codes, reference.origins, significance, "separation")
    )
    return _Calibrated(_abstention(conformity, blocks), conformity, ways, separation)


def _tag(measurements: Sequence[Measurement], measurement: Measurement) -> str:
    """How a phase's name ends for `measurement` among `measurements`: its compressor's spec
    when they are a stack ("items, content, zstd:level=19"), nothing for one compressor."""
    return f", {measurement.compressor.spec}" if len(measurements) > 1 else ""


def _one_for_threshold(compressors: Sequence[object]) -> None:
    """A given score cut applies to one compressor's scores; a stack (one measurement or view
    per compressor) has no single score."""
    if len(compressors) > 1:
        raise ValueError("a given threshold cuts one compressor's scores: give one compressor")


def _concentrated(
    decided: _Decisions, stack: np.ndarray, fitted: _Calibrated, origins: Sequence[str]
) -> tuple[tuple[Concentrated, ...], np.ndarray]:
    """Origins whose best-fitting items the deciding test refused far beyond its rate while the
    separation test takes them (_beyond_rate): either that origin's new data drifted (a log's
    later chunks name things its first ones never did, in the same form: the separation test
    still finds them far nearer it than any other origin) or they come from an origin missing
    from the reference that resembles it. Only the user can tell which; the check says so, a
    RefusalWarning per origin to the caller of classify or predict. Returns the notes and which
    items they count."""
    counted = np.zeros(len(decided.decisions), dtype=bool)
    if fitted.separation is None or decided.test_p is None:
        return (), counted
    rate = fitted.separation.significance
    _, best, kept = fitted.separation.p_values(stack)
    refused = np.array([d != "named" for d in decided.decisions]) & (kept > rate)
    found = []
    for origin in range(len(origins)):
        fitting = best == origin
        k, n = int(refused[fitting].sum()), int(fitting.sum())
        p = _beyond_rate(k, n, rate, len(origins))
        if p is not None:
            found.append(Concentrated(origins[origin], k, n, p))
            counted |= fitting & refused
            warnings.warn(found[-1].words(rate), RefusalWarning, stacklevel=3)
    return tuple(found), counted


def _both_views(
    reference: _Reference,
    measurement: Measurement,
    method: str,
    blocks: int,
    longest: int,
    tag: str = "",
) -> tuple[FoldScores, FoldScores | None]:
    """Held-out scores of the content and, for the conditional method, of the shape view; `tag`
    ends each phase's name (a stack's compressor, see _tag)."""
    content = measurement.staged(
        "held-out reference" + (", content" if method == "conditional" else "") + tag
    )
    folds = _fold_scores(reference, content, method, blocks, longest)
    if method != "conditional":
        return folds, None
    shape = measurement.staged(f"held-out reference, shape{tag}")
    return folds, _fold_scores(reference.shaped(), shape, method, blocks, longest)


def _decision_scores(
    targets: Sequence[Item],
    reference: _Reference,
    measurement: Measurement,
    method: str,
    k: int,
    longest: int,
    scoring: Scoring,
    tag: str = "",
) -> tuple[_Scores, np.ndarray]:
    """The targets' scores as the decision uses them (see Scoring): the scores an origin is
    picked by (the lowest is best), and what the decision tests, the content's on its footing
    or, where the scoring uses the shape view, the stack of both views; `tag` ends each phase's
    name."""
    view = ", content" if scoring.uses_shape else ""
    told = measurement.staged(f"items{view}{tag}")
    measured = _score(targets, reference, told, method, k, longest)
    if not scoring.content.divided and not scoring.uses_shape:
        return measured, measured.scores
    shaped = None
    if scoring.uses_shape:
        from .views import shaped_items

        shape = measurement.staged(f"items, shape{tag}")
        shaped = _score(shaped_items(targets), reference.shaped(), shape, method, k, longest).scores
    stack = scoring.stack(measured.scores, shaped)
    common = combined(stack)
    return replace(measured, scores=common, picked=common.argmin(axis=1)), stack


def _stacked_decision_scores(
    targets: Sequence[Item],
    reference: _Reference,
    measurements: Sequence[Measurement],
    method: str,
    k: int,
    longest: int,
    scorings: Sequence[Scoring],
) -> tuple[_Scores, np.ndarray]:
    """_decision_scores of each compressor of a stack, joined as _stacked_calibration joins
    them: origins picked by the geometric mean over every view (`combined`)."""
    parts = [
        _decision_scores(targets, reference, m, method, k, longest, way, _tag(measurements, m))
        for m, way in zip(measurements, scorings, strict=True)
    ]
    if len(parts) == 1:
        return parts[0]
    stack = _joined([tested for _, tested in parts])
    common = combined(stack)
    return replace(parts[0][0], scores=common, picked=common.argmin(axis=1)), stack


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
    test: str | None = None,
) -> Classification:
    """The origin of each unknown item among the reference's labels, or unknown / ambiguous.

    `method` is "conditional" (C(x | origin corpus) / C(x), Cohen & Vitanyi 2015) or "knn"
    (weighted k nearest neighbours under NCD, Jiang et al. 2023). The best origin accepts an
    item when the deciding test's conformal p-value is above `significance` (default 0.05; see
    Conformity), calibrated on the reference held out in `blocks` contiguous blocks per origin;
    a given `threshold` replaces that test by score <= threshold (float("inf") accepts all).
    `conditional` "auto" primes where the compressor can for the conditional method and
    concatenates otherwise. The nearest reference item is searched among the best origin's.
    `test` (one of DECIDERS: "fit", "separation", "contrast", "mix") decides instead of the test
    the reference chooses; the rate still holds, but no share of a missing origin's items refused
    is estimated (Abstention.missing_refused is None).
    """
    if test is not None and threshold is not None:
        raise ValueError("give a test or a threshold, not both")
    unknowns = as_items(unknowns)
    if not unknowns:
        raise InputError("no items to classify")
    ref = _Reference.of(reference)
    ref.check(calibrate=False)
    if method == "knn":
        _check_k(k, ref)
    measurements = _measurements(comp, method, conditional, engine, cache, progress)
    longest = max(len(i.data) for i in [*unknowns, *ref.items])
    fitted = _calibrate(ref, measurements, method, significance, threshold, blocks, longest, test)
    measured, stack = _stacked_decision_scores(
        unknowns, ref, measurements, method, k, longest, fitted.scorings
    )
    # the nearest reference item by the first compressor of a stack
    nearest = measurements[0].staged("nearest reference items")
    scores = _with_nearest(measured, unknowns, ref, nearest, exclude_self=False)
    decided = fitted.decide(stack)
    concentrated, counted = _concentrated(decided, stack, fitted, ref.origins)
    return Classification(
        concentrated=concentrated,
        predictions=tuple(_decide(scores, decided, ref, unknowns, counted)),
        origins=ref.origins,
        scores=scores.scores,
        p_values=decided.origin_p,
        abstention=fitted.abstention,
        scoring=fitted.scoring,
        method=method,
        k=k,
        compressor=STACK.join(m.compressor.spec for m in measurements),
        conditional=STACK.join(m.conditional for m in measurements),
        scorings=fitted.scorings,
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
    test: str | None = None,
) -> Evaluation:
    """The reference's own test (see FoldReport): each block of every origin held out in turn,
    scored against the rest and decided with p-values from the other blocks; then each origin in
    turn missing from the reference. Refusals and ambiguities count as errors in the accuracy.
    Arguments as for `classify` (knn scores by the nearest neighbour of each origin).
    """
    if threshold is not None and significance is not None:
        raise ValueError("give a significance or a threshold, not both")
    if test is not None and threshold is not None:
        raise ValueError("give a test or a threshold, not both")
    ref = _Reference.of(reference)
    ref.check(calibrate=True)
    measurements = _measurements(comp, method, conditional, engine, cache, progress)
    longest = max(len(i.data) for i in ref.items)
    if threshold is None:
        views = [
            _both_views(ref, m, method, blocks, longest, _tag(measurements, m))
            for m in measurements
        ]
    else:  # a given cut: scores as measured, no shape view to choose
        _one_for_threshold(measurements)
        held = measurements[0].staged("held-out reference")
        views = [(_fold_scores(ref, held, method, blocks, longest), None)]
    rate = DEFAULT_SIGNIFICANCE if significance is None else significance
    choose = method == "conditional"
    (folds, shaped), stacked = views[0], views[1:]
    report = fold_report(folds, rate, threshold, shaped, choose, test, stacked)
    ways, calibration, codes = _stacked_calibration(views, choose and threshold is None)
    way = ways[0]
    abstention = (
        Abstention(None, float(threshold), blocks=blocks)
        if threshold is not None
        else _abstention(Conformity.of(calibration, codes, ref.origins, rate, test), blocks)
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
        scoring=way,
        scorings=ways,
        compressor=STACK.join(m.compressor.spec for m in measurements),
    )

"""The conformal abstention (see kinpress.origins): p-values from held-out reference scores,
the tests an origin accepts an item by, and how well each tells an origin missing from the
reference."""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from ..formats import json_ready
from ..measure import MeasurementWarning
from .scores import DEFAULT_BLOCKS

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


FLOOR = 1e-3
"""Scores are floored here before a geometric mean over views: a view whose bytes a corpus
predicts entirely (a shape of nothing but words) can measure 0 or a hair below."""


def combined(scores: np.ndarray) -> np.ndarray:
    """The scores an origin is picked by: a (items, origins) matrix as it is, or the geometric
    mean over the last axis of an (items, origins, views) stack, each floored at FLOOR."""
    if scores.ndim == 2:
        return scores
    return np.asarray(np.exp(np.log(np.maximum(scores, FLOOR)).mean(axis=2)))


def _profile(scores: np.ndarray, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per origin, the median held-out score of its own items (centre) and how far above it the
    median score of the other origins' items on it lies (scale; up to 1, a score that explains
    nothing, where no other origin's items were scored). A stack of views gets a profile per
    view: (origins, views) arrays."""
    if scores.ndim == 3:
        views = [_profile(scores[:, :, v], codes) for v in range(scores.shape[2])]
        return np.stack([c for c, _ in views], axis=1), np.stack([s for _, s in views], axis=1)
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
    -separation and contrast (see Conformity); of a stack of views, the largest of the views'
    statistics, each on its own profile."""
    if scores.ndim == 3:
        views = [
            _statistics(scores[:, :, v], centre[:, v], scale[:, v], own)
            for v in range(scores.shape[2])
        ]
        return {test: np.max([found[test] for found in views], axis=0) for test in TESTS}
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
        found = _statistics(
            out.reduced, out.centre, out.scale, combined(out.reduced).argmin(axis=1)
        )
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
        strange = _statistics(strangers, out.centre, out.scale, combined(strangers).argmin(axis=1))
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
    Scores of two views (an (items, origins, views) stack: content and shape, see Scoring) pick
    b by their geometric mean, and each test's statistic is the stranger of the two views', each
    view with its own centre and scale ((origins, views) arrays): an item of a missing origin
    tends to resemble a kindred origin in one view only (a README's code examples in content,
    its prose layout in shape), where a known item resembles its origin in both.
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
        n, m = scores.shape[:2]
        p = np.zeros((n, m))
        for origin in range(m):
            own = np.full(n, origin)
            strange = _statistics(scores, self.centre, self.scale, own)[self.test]
            p[:, origin] = self._against(self.test_calibration, origin, strange)
        best = combined(scores).argmin(axis=1)
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

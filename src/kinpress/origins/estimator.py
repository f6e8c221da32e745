"""The scikit-learn estimator of origins (see kinpress.origins)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from typing import Any, Self

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.utils.validation import check_is_fitted

from ..cache import SizeCache
from ..engine import Engine
from ..items import ItemLike, as_items
from ..measure import Measurement
from .classification import _calibrate, _concentrated, _stacked_decision_scores
from .conformal import check_test
from .scores import DEFAULT_BLOCKS, DEFAULT_SIGNIFICANCE, _measurements, _Reference


class CompressionClassifier(ClassifierMixin, BaseEstimator):  # type: ignore[misc]
    """A scikit-learn classifier of bytes or strings by compression (see kinpress.origins).

    Parameters are stored as given. `fit` keeps the training items as the reference, chooses the
    compressor when `compressor` is "auto" (as the command line does for classify, within
    `budget` seconds; kept in `compressor_`, possibly a stack such as
    "zstd:level=19+ppmd:order=32,memory=256", whose compressors' views are decided on together;
    a stack may be given too) and calibrates the conformal abstention at
    `significance` (unless a `threshold` is given), deciding by `test` (one of "fit",
    "separation", "contrast", "mix"; default: the one the reference chooses). `predict`
    returns the class, or `unknown_label` for an item no class accepts or several do;
    `p_values(X)` gives each item's conformal p-value for every class (columns in `classes_`
    order), the estimator's counterpart of `predict_proba`. `engine` runs the compressions
    (default: a `LocalEngine` on every core of this machine; a `DaskEngine` spreads them over a
    cluster). `cache` is a path to a size cache file, opened for each fit and predict, so that
    the estimator can be cloned and pickled.
    """

    def __init__(
        self,
        compressor: str = "auto",
        k: int = 1,
        method: str = "conditional",
        conditional: str = "auto",
        significance: float | None = None,
        threshold: float | None = None,
        test: str | None = None,
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
        self.test = test
        self.unknown_label = unknown_label
        self.budget = budget
        self.engine = engine
        self.cache = cache

    def _measurements(self, cache: SizeCache | None) -> tuple[Measurement, ...]:
        return _measurements(
            self.compressor_, self.method, self.conditional, self.engine, cache, None
        )

    def _open_cache(self) -> SizeCache | None:
        return SizeCache(self.cache) if self.cache is not None else None

    def fit(self, X: Sequence[ItemLike], y: Sequence[Any]) -> Self:
        """Keep X as the reference labelled by y, choose the compressor, calibrate abstention."""
        items = as_items(X, "ref")
        if len(items) != len(y):
            raise ValueError(f"X has {len(items)} items but y has {len(y)} labels")
        if self.test is not None and self.threshold is not None:
            raise ValueError("give a test or a threshold, not both")
        check_test(self.test)  # before -c auto measures anything
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
                from ..calibration import choose_for_job

                self.compressor_ = choose_for_job(
                    labelled,
                    "classify",
                    budget_seconds=self.budget,
                    engine=self.engine,
                    cache=cache,
                    significance=DEFAULT_SIGNIFICANCE
                    if self.significance is None
                    else self.significance,
                ).spec
            self.longest_ = max(len(i.data) for i in labelled)
            self.calibrated_ = _calibrate(
                self.reference_, self._measurements(cache), self.method, self.significance,
                self.threshold, DEFAULT_BLOCKS, self.longest_, self.test,
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
            _, tested = _stacked_decision_scores(targets, self.reference_,
                                                 self._measurements(cache), self.method, self.k,
                                                 longest, self.calibrated_.scorings)  # fmt: skip
        finally:
            if cache is not None:
                cache.close()
        return tested

    def p_values(self, X: Sequence[ItemLike]) -> np.ndarray:
        """Conformal p-values of the deciding test, shaped (len(X), len(classes_)): how typical
        each input is of each class (see Conformity). Raises ValueError when fitted with a
        threshold."""
        p = self.calibrated_.decide(self._scores(X)).origin_p
        if p is None:
            raise ValueError("fitted with a threshold: no p-values")
        return p

    def predict(self, X: Sequence[ItemLike]) -> np.ndarray:
        """The class of each input, or `unknown_label` where it is unknown or ambiguous; a
        RefusalWarning where the inputs one class fits best are refused far beyond the rate
        (see kinpress.origins.Concentrated)."""
        scores = self._scores(X)
        decided = self.calibrated_.decide(scores)
        _concentrated(decided, scores, self.calibrated_, [str(c) for c in self.classes_])
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

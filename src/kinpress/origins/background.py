"""Scores on a common footing (see kinpress.origins): each origin's score of an item divided by
its background, the median score it gives to held-out items of the other origins, when the
reference's own held-out items say that picks their origin better.

Why: C(x | corpus) / C(x) falls for every x as a corpus grows or holds generic material (prose,
common keywords), so an origin with a large or generic corpus explains strangers almost as well
as its own items and wins them. Dividing by how well the origin explains strangers in general
asks instead how much better it explains x than it explains items that are not its own. This is
the impostor-score normalisation of speaker verification (Z-norm: Auckenthaler, Carey &
Lloyd-Thomas 2000, "Score normalization for text-independent speaker verification systems",
Digital Signal Processing 10), reduced to a scale by the impostors' median: a shift by their mean
and a division by their spread picked worse on every data kind tried here. Whether it helps
depends on the compressor and the data (with an entropy coder that learns from the corpus it
mostly does not), so the reference decides: its held-out items, scored as new items are, are
classified both ways, and the normalisation is kept only when it names significantly more of them
right: of the items one way names right and the other does not, dividing must win more than a
fair coin would at 0.05 (one-sided sign test, common practice; a few items either way on a small
reference are noise, and keeping the measured scores is the published method).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..formats import json_ready

SIGN_TEST_LEVEL = 0.05
"""The sign test's level for dividing (common practice)."""


def backgrounds(scores: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """Per origin, the median of its scores of the other origins' held-out items (1, explaining
    nothing, where there are none); never below a thousandth."""
    m = scores.shape[1]
    out = np.ones(m)
    for origin in range(m):
        strangers = scores[codes != origin, origin]
        if strangers.size:
            out[origin] = max(float(np.median(strangers)), 1e-3)
    return out


def sign_test(gained: int, lost: int) -> float:
    """One-sided sign test: the chance of `gained` or more wins in `gained + lost` fair coin
    tosses (1 with no tosses)."""
    if gained + lost == 0:
        return 1.0
    from scipy.stats import binomtest

    return float(binomtest(gained, gained + lost, 0.5, alternative="greater").pvalue)


def paired_sign_test(tried: np.ndarray, kept: np.ndarray) -> float:
    """The sign test that one way (`tried`, True where it names an item right) names more right
    than another (`kept`): over the items only one of them names right."""
    return sign_test(int(np.sum(tried & ~kept)), int(np.sum(kept & ~tried)))


@dataclass(frozen=True)
class Background:
    """How scores were put on a common footing: `divisors` per origin (None: left as measured);
    the share of held-out reference items named right by the best score as measured
    (`accuracy_raw`) and divided by the backgrounds (`accuracy_divided`); and the one-sided
    sign test's p-value that dividing names more right (`p_value`, see the module)."""

    origins: tuple[str, ...]
    divisors: np.ndarray | None
    accuracy_raw: float
    accuracy_divided: float
    p_value: float = float("nan")

    @classmethod
    def choose(
        cls,
        scores: np.ndarray,
        codes: np.ndarray,
        origins: Sequence[str],
        significance: float = SIGN_TEST_LEVEL,
    ) -> Background:
        """Divide by the backgrounds when that names significantly more held-out items right."""
        divisors = backgrounds(scores, codes)
        raw = scores.argmin(axis=1) == codes
        divided = (scores / divisors).argmin(axis=1) == codes
        p = paired_sign_test(divided, raw)
        return cls(
            tuple(origins),
            divisors if p <= significance else None,
            float(np.mean(raw)) if len(codes) else 0.0,
            float(np.mean(divided)) if len(codes) else 0.0,
            float(p),
        )

    @classmethod
    def none(cls, origins: Sequence[str]) -> Background:
        """Scores left as measured (a given threshold, or the knn method)."""
        return cls(tuple(origins), None, float("nan"), float("nan"))

    @property
    def divided(self) -> bool:
        return self.divisors is not None

    def apply(self, scores: np.ndarray) -> np.ndarray:
        """The scores the decision uses: divided by each origin's background, or as they are."""
        return scores if self.divisors is None else scores / self.divisors

    @property
    def description(self) -> str:
        """In words, for the output."""
        if self.accuracy_raw != self.accuracy_raw:
            return "as measured"
        if self.divided:
            return (
                "divided by each origin's background (the median score it gives other origins'"
                f" held-out items): {self.accuracy_divided:.3f} of held-out reference items"
                f" named right, against {self.accuracy_raw:.3f} as measured (sign test"
                f" p = {self.p_value:.2g})"
            )
        return (
            f"as measured ({self.accuracy_raw:.3f} of held-out reference items named right;"
            f" divided by each origin's background, {self.accuracy_divided:.3f} would be, not"
            f" significantly more: sign test p = {self.p_value:.2g})"
        )

    def as_json(self) -> dict[str, object]:
        """Whether scores were divided, the divisors by origin (null when not), the two
        held-out accuracies and the sign test that decided it."""
        return dict(
            json_ready(
                {
                    "divided": self.divided,
                    "divisors": None
                    if self.divisors is None
                    else dict(zip(self.origins, self.divisors.tolist(), strict=True)),
                    "accuracy_as_measured": self.accuracy_raw,
                    "accuracy_divided": self.accuracy_divided,
                    "p_value": self.p_value,
                    "description": self.description,
                }
            )
        )

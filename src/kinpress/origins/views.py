"""Two views of an item (see kinpress.origins): its content, and its shape, the same bytes with
every run of ASCII letters written as one `w` and every run of digits as one `0`.

Why: what a compressor finds shared in the content is mostly words, names and prose, and those
cross kinds of file (a README full of code examples, documentation quoting the code it documents,
two languages calling the same library). The shape keeps what words hide: punctuation,
brackets, operators, indentation and line structure, the marks of a language or format. Masking
the words of a text so that a compression or n-gram model sees its structure is the text
distortion of authorship attribution (Stamatatos 2017, "Authorship attribution using text
distortion", EACL; his DV-SA with no word kept). An origin's score is then the geometric mean of
its two scores, each on its own footing (see Background), and an origin accepts an item that is
typical of it in either view (see Conformity): what a system writes keeps its shape while its
words and numbers move on (new package names, hosts, ids), so a later item of a known origin
stays typical in shape where its content has drifted. Where the shape is the weaker view (prose
in languages of one script, DNA, bytes with few ASCII letters) the reference shows it, and the
content alone is kept: the shape joins when, alone, it names at least as many of the reference's
held-out items right as the content alone does, or else when both views together name
significantly more right than the content alone (the sign test of Background).
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from ..formats import json_ready
from ..items import Item
from .background import SIGN_TEST_LEVEL, Background, paired_sign_test
from .conformal import combined

_LETTERS = re.compile(rb"[A-Za-z]+")
_DIGITS = re.compile(rb"[0-9]+")


def shape(data: bytes) -> bytes:
    """The shape view: runs of ASCII letters become b"w", runs of digits b"0"; every other byte
    (punctuation, spaces, line ends, bytes of other scripts) stays."""
    return _DIGITS.sub(b"0", _LETTERS.sub(b"w", data))


def shaped_items(items: Sequence[Item]) -> list[Item]:
    """The items in the shape view: same names, sources and labels."""
    return [replace(item, data=shape(item.data)) for item in items]


def shape_share(items: Sequence[Item]) -> float:
    """The shape view's bytes as a share of the items' (what it adds to a job's work)."""
    total = sum(len(item.data) for item in items)
    return sum(len(shape(item.data)) for item in items) / total if total else 0.0


@dataclass(frozen=True)
class Scoring:
    """How an item's scores for each origin are made from what was measured: the content's
    footing (`content`, see Background), and the shape's (`shape`, None when the content alone
    decides); `accuracy_content`, `accuracy_shape` and `accuracy_both` are the shares of
    held-out reference items named right by the content alone, the shape alone and both views,
    and `p_value` the sign test that both views name more right than the content alone (see the
    module)."""

    content: Background
    shape: Background | None
    accuracy_content: float = float("nan")
    accuracy_both: float = float("nan")
    p_value: float = float("nan")
    accuracy_shape: float = float("nan")

    @classmethod
    def choose(
        cls,
        content: np.ndarray,
        shaped: np.ndarray | None,
        codes: np.ndarray,
        origins: Sequence[str],
        significance: float = SIGN_TEST_LEVEL,
    ) -> Scoring:
        """Each view's footing, then the shape kept when, alone, it names at least as many
        held-out items right as the content alone, or else when both views name significantly
        more right than the content alone (`shaped` None: content alone)."""
        content_footing = Background.choose(content, codes, origins)
        if shaped is None:
            return cls(content_footing, None)
        shape_footing = Background.choose(shaped, codes, origins)
        alone = content_footing.apply(content).argmin(axis=1) == codes
        shape_alone = shape_footing.apply(shaped).argmin(axis=1) == codes
        both = cls(content_footing, shape_footing).apply(content, shaped).argmin(axis=1) == codes
        p = paired_sign_test(both, alone)
        keep = shape_alone.sum() >= alone.sum() or p <= significance

        def share(right: np.ndarray) -> float:
            return float(np.mean(right)) if len(codes) else 0.0

        return cls(
            content_footing,
            shape_footing if keep else None,
            share(alone),
            share(both),
            p,
            share(shape_alone),
        )

    @classmethod
    def as_measured(cls, origins: Sequence[str]) -> Scoring:
        """The content's scores as measured (a given threshold, or the knn method)."""
        return cls(Background.none(origins), None)

    @property
    def uses_shape(self) -> bool:
        return self.shape is not None

    def apply(self, content: np.ndarray, shaped: np.ndarray | None = None) -> np.ndarray:
        """The scores an origin is picked by, from the measured content scores and, when the
        shape is used, the measured shape scores (their geometric mean, see `stack`)."""
        return combined(self.stack(content, shaped))

    def stack(self, content: np.ndarray, shaped: np.ndarray | None = None) -> np.ndarray:
        """The scores the decision uses: the content's on its footing, an (items, origins)
        matrix; with the shape, an (items, origins, 2) stack of both views on their footings
        (see Conformity for how a stack is tested)."""
        scores = self.content.apply(content)
        if self.shape is None:
            return scores
        if shaped is None:
            raise ValueError("this scoring uses the shape view: give its scores")
        return np.stack([scores, self.shape.apply(shaped)], axis=2)

    @property
    def description(self) -> str:
        """In words, for the output."""
        text = f"content scores {self.content.description}"
        if self.accuracy_content != self.accuracy_content:
            return text
        figures = (
            f"of held-out reference items {self.accuracy_content:.3f} named right by the content"
            f" alone, {self.accuracy_shape:.3f} by the shape alone, {self.accuracy_both:.3f} by"
            f" both (sign test that both name more, p = {self.p_value:.2g})"
        )
        if self.shape is None:
            return (
                f"{text}; the shape view (letters and digits masked) not used, as it names fewer"
                f" right alone and both views not significantly more: {figures}"
            )
        why = (
            "it names as many right alone"
            if self.accuracy_shape >= self.accuracy_content
            else "both views name significantly more"
        )
        return (
            f"{text}; with the shape view (letters and digits masked), as {why}, its scores"
            f" {self.shape.description}: {figures}; an origin's score is the geometric mean of"
            " the two; the fit, separation and contrast tests take the more typical view, the"
            " mix weighs both views' statistics"
        )

    def as_json(self) -> dict[str, object]:
        """Each view's footing (`shape` null when unused), the held-out accuracies and the sign
        test that decided the shape with them, and the description."""
        return dict(
            json_ready(
                {
                    "content": self.content,
                    "shape": self.shape,
                    "accuracy_content": self.accuracy_content,
                    "accuracy_shape": self.accuracy_shape,
                    "accuracy_both": self.accuracy_both,
                    "p_value": self.p_value,
                    "description": self.description,
                }
            )
        )

"""The items no origin accepted, grouped by their own distances.

An item comes back unknown when no origin of the reference accepts it. Unknown items seldom come
alone: the chunks of a system missing from the reference, or the later files of an origin whose
data moved on, come back unknown together, and often resemble each other more than anything in
the reference. :func:`group_unknowns` measures the NCD of every pair of unknown items with the
classification's compressor, in the views its scores took (content, or content and shape
combined by their geometric mean as the scores are), and groups them as ``kinpress groups`` does
(HDBSCAN* with the count chosen by silhouette, see kinpress.groups); an item that fits no group
joins the group of its nearest grouped item, as there (kept alone on request: `outliers`). Each
group names the known origin its members fit best (Prediction.best), which tells the two
readings apart only for a person who knows the data: a group that fits one origin best may be
that origin's data moved on, or an origin like it missing from the reference. A group is
evidence to review, not a new origin found.

On the later chunks of the eight systems' logs in ../shared (10 reference chunks of six of them,
two missing in turn; bench_origins.py's rounds, -c auto), the unknown chunks grouped by system
with adjusted Rand index 0.66-1.00 by round (the two missing systems each one group, or
Zookeeper's two); on this machine's two sets of eight programs' logs 0.82-1.00, on UDHR texts
0.55-1.00 (Portuguese and Spanish one group in one round); on source files of 24 languages
(four missing, path order) 0.54-0.79 and manual pages of 20 languages (five missing)
0.32-0.82, where a missing language's files split into several groups or share one with a
kin's; on Rosetta Code programs 0.10-0.84, which group by the task they solve as much as by
their language. The shape view, where the scores took it, raised the 24 languages from a mean
of 0.60 to 0.66 and Rosetta Code's rounds from 0.62-0.69 to 0.68-0.84, and cost Loghub's
Spark and Zookeeper round 0.72 to 0.66.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, replace
from functools import cached_property

import numpy as np
import numpy.typing as npt

from ..cache import SizeCache
from ..engine import Engine
from ..formats import json_ready
from ..items import Item, ItemLike, as_items, escape_name
from ..measure import Progress, staged
from ..units import few_text
from .classification import Classification
from .views import shaped_items

SMALLEST = 3
"""Fewest unknown items worth grouping: two are one pair, whose distance the table shows."""


@dataclass(frozen=True)
class UnknownGroup:
    """Unknown items that resemble each other: `members` by name, the most typical first (by
    NCD to `medoid`, the one nearest the others, itself first), `fits` each known origin that
    members fit best with how many, most first, `spread` the median NCD between two members
    (near 1: they share little), and `silhouette` how much nearer the members lie to each other
    than to the next group (NaN with one group)."""

    members: tuple[str, ...]
    medoid: str
    fits: tuple[tuple[str, int], ...]
    spread: float
    silhouette: float

    def words(self) -> str:
        origin, count = self.fits[0]
        origin = escape_name(origin)
        fit = (
            f"all fit {origin} best" if count == len(self.members)
            else f"{count} of them fit {origin} best"
        )  # fmt: skip
        shown = few_text([escape_name(name) for name in self.members])
        return (
            f"{len(self.members)} items ({shown}), median NCD {self.spread:.3f} between two; {fit}"
        )


@dataclass(frozen=True)
class UnknownGroups:
    """The unknown items of a classification grouped by their own NCD (see the module).

    `groups` are largest first; `alone` the unknown items that fit no group, when they were
    asked to stay alone (else they are in the group of their nearest grouped item); `unknown`
    how many items were unknown; `compressor` what measured the pairs; `skipped` why no
    grouping was made (fewer than SMALLEST unknown items, or more pairs than `allowance`), else
    None;
    `method` the grouping's (kinpress.groups.Grouping.method: "one-group" when no split was
    found, whether the items are alike or share little: each group's `spread` tells); `shape`
    whether the distances are the geometric mean of the content's and the shape view's NCD, as
    where the classification scored both views (Classification.scoring).
    `assignment` maps each grouped item's index among the classified items to its group's
    number (1 for the largest), and each lone one to -1.
    """

    groups: tuple[UnknownGroup, ...]
    alone: tuple[str, ...]
    unknown: int
    compressor: str
    allowance: int
    assignment: tuple[tuple[int, int], ...] = ()
    skipped: str | None = None
    method: str = ""
    shape: bool = False

    @cached_property
    def _numbers(self) -> dict[int, int]:
        return dict(self.assignment)

    def group_of(self, index: int) -> int | None:
        """The group number of the classified item at `index` (-1 alone), None if it was not
        unknown or not grouped."""
        return self._numbers.get(index)

    @property
    def words(self) -> str:
        """The grouping in a paragraph: the summary, then a line per group; empty with fewer
        than SMALLEST unknown items (nothing to say)."""
        if self.unknown < SMALLEST:
            return ""
        lines = [self.summary]
        lines += [f"  group {n}: {group.words()}" for n, group in enumerate(self.groups, 1)]
        if self.alone:
            lines.append(f"  alone: {few_text([escape_name(name) for name in self.alone])}")
        return "\n".join(lines)

    @property
    def summary(self) -> str:
        """What was grouped, how, and what a group may mean, in one sentence or two (no item
        names: the text and the report each show those their own way)."""
        if self.skipped is not None:
            return f"Unknown items not grouped: {self.skipped}."
        count = len(self.groups)
        found = f" {count} groups" if count > 1 else " one group"
        if count == 1 and self.method.startswith("one-group"):
            found += ", no split found (the median NCD says how alike they are)"
        views = " (content and shape views, as the scores)" if self.shape else ""
        return (
            f"The {self.unknown} unknown items, grouped by their own NCD with {self.compressor}"
            f"{views}:"
            + found
            + (f", {len(self.alone)} alone" if self.alone else "")
            + ". A group may be an origin missing from the reference, or a known origin's data"
            " that moved on from its reference (the origin its items fit best), for a person"
            " who knows the data to tell; evidence to review, not a new origin found."
        )

    @property
    def count_words(self) -> str:
        """'in 2 groups, 1 alone' or 'in one group' for a summary line; empty when not
        grouped."""
        count = len(self.groups)
        if self.skipped is not None:
            return ""
        text = "in one group" if count == 1 else f"in {count} groups"
        return text + (f", {len(self.alone)} alone" if self.alone else "")

    def as_json(self) -> dict[str, object]:
        """The groups (number, members, medoid, fits, spread, silhouette), alone, counts, the
        grouping's method and why it was skipped; NaN written as null."""
        return dict(
            json_ready(
                {
                    "unknown": self.unknown,
                    "compressor": self.compressor,
                    "allowance": self.allowance,
                    "skipped": self.skipped,
                    "method": self.method,
                    "shape": self.shape,
                    "groups": [
                        {
                            "group": n,
                            "members": g.members,
                            "medoid": g.medoid,
                            "fits": dict(g.fits),
                            "spread": g.spread,
                            "silhouette": g.silhouette,
                        }
                        for n, g in enumerate(self.groups, 1)
                    ],
                    "alone": self.alone,
                }
            )
        )


def pair_allowance(classification: Classification) -> int:
    """The most pairs of unknown items grouping measures: as many as the sizes the
    classification itself measured, each item and held-out reference item against each origin,
    so that grouping at most doubles the work."""
    items = classification.abstention.calibration_scores + len(classification.predictions)
    return items * max(len(classification.origins), 1)


def group_unknowns(
    classification: Classification,
    unknowns: Sequence[ItemLike],
    *,
    distances: npt.ArrayLike | None = None,
    allowance: int | None = None,
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
    outliers: bool = False,
) -> UnknownGroups:
    """The unknown items of `classification` (of the items `unknowns`, in its order) grouped by
    their own NCD, measured with its compressor by concatenation, or taken from `distances`, a
    matrix of all the classified items in order (the report's, already measured). Where the
    classification scored the shape view too, the shape view's NCD is measured and the two
    combined by their geometric mean, as the scores are. No more than
    `allowance` pairs are measured (default pair_allowance); with more, or with fewer than
    SMALLEST unknown items, nothing is grouped and `skipped` says why. Items that fit no group
    join their nearest group as in ``kinpress groups``, or with `outliers` stay alone: on the
    benchmark's rounds (see the module) joining agreed better with the items' true origins
    (UDHR texts, Swedish and Turkish missing: 0.80 against 0.10, 11 of 20 pages alone; Rosetta
    Code 0.10-0.69 against 0.04-0.52; Loghub 0.72-1.00 against 0.76-0.90)."""
    from ..distance import check_distances, distance_matrix
    from ..groups import OUTLIER, find_groups

    items = as_items(unknowns)
    predictions = classification.predictions
    if len(items) != len(predictions):
        raise ValueError(f"{len(items)} items for a classification of {len(predictions)}")
    chosen = [i for i, p in enumerate(predictions) if p.decision == "unknown"]
    allowed = pair_allowance(classification) if allowance is None else allowance
    base = UnknownGroups((), (), len(chosen), classification.compressor, allowed)
    pairs = len(chosen) * (len(chosen) - 1) // 2
    if len(chosen) < SMALLEST:
        return replace(base, skipped=f"{len(chosen)} unknown, fewer than {SMALLEST}")
    shape = classification.scoring.uses_shape
    if (distances is None or shape) and pairs > allowed:
        why = (
            f"{len(chosen)} unknown items make {pairs:,} pairs, more than the {allowed:,} sizes"
            " the classification measured; run 'kinpress groups' on them to group them"
        )
        return replace(base, skipped=why)
    picked = [items[i] for i in chosen]

    def measured(view: list[Item], name: str) -> np.ndarray:
        told = staged(progress, f"unknown items, {name}")
        return distance_matrix(view, classification.compressors[0], engine=engine, cache=cache,
                               progress=told).distances  # fmt: skip

    if distances is None:
        d = measured(picked, "content")
    else:
        every = check_distances(distances, strict_diagonal=True)
        if every.shape[0] != len(items):
            raise ValueError(f"distances of {every.shape[0]} items for {len(items)} classified")
        d = every[np.ix_(chosen, chosen)]
    if shape:  # the views combined as the classification combines its scores
        d = np.sqrt(d * measured(shaped_items(picked), "shape"))
    grouping = find_groups(d, report_outliers=outliers)
    names = [predictions[i].item for i in chosen]
    groups, assignment = [], []
    by_size = sorted(grouping.groups, key=lambda g: (-g.size, g.index))
    for number, summary in enumerate(by_size, 1):
        members = [k for k, g in enumerate(grouping.assignment) if g == summary.index]
        # the most typical first: the medoid, then by NCD to it
        members.sort(key=lambda k: (k != summary.medoid, d[summary.medoid, k], k))
        fits = Counter(predictions[chosen[k]].best for k in members).most_common()
        inner = d[np.ix_(members, members)][np.triu_indices(len(members), 1)]
        spread = float(np.median(inner)) if inner.size else math.nan
        groups.append(UnknownGroup(tuple(names[k] for k in members), names[summary.medoid],
                                   tuple(fits), spread, summary.silhouette))  # fmt: skip
        assignment += [(chosen[k], number) for k in members]
    lone = [k for k, g in enumerate(grouping.assignment) if g == OUTLIER]
    assignment += [(chosen[k], -1) for k in lone]
    return UnknownGroups(tuple(groups), tuple(names[k] for k in lone), len(chosen),
                         classification.compressor, allowed, tuple(sorted(assignment)),
                         method=grouping.method, shape=shape)  # fmt: skip

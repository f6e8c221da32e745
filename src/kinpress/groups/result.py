"""Results of grouping (see kinpress.groups): groups, their agreement with known labels."""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from sklearn.metrics import adjusted_rand_score

from ..formats import json_ready

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]

OUTLIER = -1
"""Group number of an outlier when outliers are reported rather than attached."""


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
    "density" (or "one-group" when the density step found no group standing apart), followed by
    "+merge" or "+split" when reaching ``k`` needed that step, or "density-cut" for a cut;
    ``min_size`` is the HDBSCAN* minimum group size used (None when no density grouping was used),
    ``core_neighbours`` its density estimate's neighbour count, ``cut`` the height of a cut,
    ``requested_k`` the asked-for number of groups.
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
        from ..convert import grouping_frame

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

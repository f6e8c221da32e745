"""The report's data: the results of one comparison gathered in one `Report`, built by calling
the library's public functions (trees, groups, maps, neighbours) on a distance matrix."""

from __future__ import annotations

import platform
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING

from .._version import __version__
from ..distance import DistanceMatrix
from ..formats import json_ready
from ..groups import GroupingResult, find_groups
from ..items import Item
from ..maps import MapResult, classical_scaling
from ..neighbours import exact_neighbours
from ..trees import TreeResult, build_tree

if TYPE_CHECKING:
    from ..calibration import CalibrationReport
    from ..derived import DerivedReport, Family
    from ..origins import Classification, UnknownGroups

SIMILARITY_CAUTION = (
    "Similarity is evidence for a person to review, not proof: items share content through"
    " common sources, templates and formats as well as through copying or descent."
)
TREE_CAUTION = (
    "A tree from compression distances is a hypothesis to check, no substitute for model-based"
    " phylogenetics: whole-sequence distances mix gene order, composition, repeats and where a"
    " circular genome was opened."
)
NCD_CAUTION = (
    "An NCD near 1 means this compressor found nothing shared between the two items, not that"
    " they are unrelated: a window or block too small for the pair, or a relation the"
    " compressor cannot model, looks the same."
)
BOOTSTRAP_CAUTION = (
    "Bootstrap support says how stable a split is when the items are resampled, not whether it"
    " is true."
)
DERIVED_CAUTION = (
    "A finding is evidence for a person to review, not proof of copying: files share content"
    " through templates, licences, generated code and common sources."
)
ORIGIN_CAUTION = (
    "An origin is evidence for a person to review, not proof of where an item came from."
)
MAP_CAUTION = (
    "The map flattens the matrix into two axes: points close on the map may be far apart in the"
    " matrix (see how much of it the axes show); read distances from the matrix."
)

PASSAGE_CHARS = 600
"""Shared passages are shown up to this many characters of each file."""


@dataclass(frozen=True)
class ItemSummary:
    """One item as the report lists it: name, where it came from, bytes, kind, known label and
    its role (`compared`, or with a reference `reference` or `unknown`)."""

    name: str
    source: str
    size: int
    kind: str
    label: str | None
    role: str = "compared"


@dataclass(frozen=True)
class NearestItems:
    """An item's nearest other items with their distances, nearest first."""

    item: str
    neighbours: tuple[tuple[str, float], ...]

    def as_json(self) -> dict[str, object]:
        return dict(
            json_ready(
                {
                    "item": self.item,
                    "neighbours": [{"item": n, "ncd": round(d, 6)} for n, d in self.neighbours],
                }
            )
        )


@dataclass(frozen=True)
class SharedPassage:
    """The longest stretch a derived pair shares, as text of both files (cut at
    PASSAGE_CHARS, `cut` then true), with its byte offsets."""

    a: str
    b: str
    relation: str
    a_start: int
    a_end: int
    b_start: int
    b_end: int
    a_text: str
    b_text: str
    cut: bool


@dataclass(frozen=True)
class Provenance:
    """How to make the report again: the command, the seed and the versions that ran."""

    command: str
    seed: int
    versions: tuple[tuple[str, str], ...]

    def as_json(self) -> dict[str, object]:
        return {"command": self.command, "seed": self.seed, "versions": dict(self.versions)}


@dataclass(frozen=True)
class CompressorChoice:
    """The compressor used and why: `given` when named on the command line; with `-c auto`
    what calibration said (`reasons`), its report (`calibration`) and its warnings."""

    spec: str
    conditional: str
    strand: str
    given: bool
    reasons: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    calibration: CalibrationReport | None = None


@dataclass(frozen=True)
class Report:
    """One comparison, every result of it, and what a reader needs to judge them."""

    title: str
    items: tuple[ItemSummary, ...]
    left_out: tuple[str, ...]
    choice: CompressorChoice
    matrix: DistanceMatrix
    tree: TreeResult
    grouping: GroupingResult
    map: MapResult
    nearest: tuple[NearestItems, ...]
    provenance: Provenance
    cautions: tuple[str, ...]
    label_column: str | None = None
    derived: DerivedReport | None = None
    passages: tuple[SharedPassage, ...] = ()
    classification: Classification | None = None
    unknown_groups: UnknownGroups | None = None
    families: tuple[Family, ...] = ()
    """The derived findings' families (kinpress.derived.families), none without them."""

    def as_json(self) -> dict[str, object]:
        """title, items, left_out, compressor (spec, conditional, strand, given, reasons,
        warnings, calibration), matrix, tree, groups, map, nearest, provenance, cautions,
        label_column, and derived (findings, their families and same_source), passages and
        classification (with its unknown_groups) when present (null otherwise)."""
        derived = None
        if self.derived is not None:
            derived = {
                "findings": self.derived.findings,
                "families": self.families,
                "same_source": self.derived.same_source,
                "counts": self.derived.counts,
                "max_fpr": self.derived.max_fpr,
                "exhaustive": self.derived.exhaustive,
            }
        classification = None
        if self.classification is not None:
            c = self.classification
            classification = {
                "method": c.method,
                "compressor": c.compressor,
                "conditional": c.conditional,
                "origins": c.origins,
                "abstention": c.abstention,
                "scoring": c.scoring,
                "scorings": c.scorings or (c.scoring,),
                "scoring_words": c.scoring_words,
                "counts": c.counts(),
                "concentrated": [
                    {**asdict(n), "words": n.words(c.abstention.significance or 0.0)}
                    for n in c.concentrated
                ],
                "predictions": c.as_json(),
                "unknown_groups": self.unknown_groups,
            }
        return dict(
            json_ready(
                {
                    "title": self.title,
                    "items": self.items,
                    "left_out": self.left_out,
                    "compressor": self.choice,
                    "matrix": self.matrix,
                    "tree": self.tree,
                    "groups": self.grouping,
                    "map": self.map,
                    "nearest": self.nearest,
                    "provenance": self.provenance,
                    "cautions": self.cautions,
                    "label_column": self.label_column,
                    "derived": derived,
                    "passages": self.passages,
                    "classification": classification,
                }
            )
        )


def versions(spec: str) -> tuple[tuple[str, str], ...]:
    """kinpress, Python, numpy and every compressor library's version (the one in use first)."""
    import numpy

    from ..compressors import ADAPTERS, compressor
    from ..origins.scores import stacked

    used = compressor(stacked(spec)[0]).name if spec else ""  # a stack's first
    found = [("kinpress", __version__), ("python", platform.python_version())]
    found.append(("numpy", numpy.__version__))
    for name in sorted(ADAPTERS, key=lambda n: (n != used, n)):
        found.append((name, ADAPTERS[name].library_version()))
    return tuple(found)


def _kind(item: Item) -> str:
    from ..derived import kind_of

    if item.nucleotide:
        return "nucleotide sequence"
    if item.source == "-":
        return "standard input"
    suffix = kind_of(item)
    return f"{suffix} file" if suffix else "file without suffix"


def _passage(finding: object, by_name: dict[str, Item]) -> SharedPassage | None:
    stretches = getattr(finding, "stretches", ())
    a, b = by_name.get(getattr(finding, "a", "")), by_name.get(getattr(finding, "b", ""))
    if not stretches or a is None or b is None:
        return None
    s = stretches[0]
    a_bytes, b_bytes = a.data[s.a_start : s.a_end], b.data[s.b_start : s.b_end]
    cut = max(len(a_bytes), len(b_bytes)) > PASSAGE_CHARS
    return SharedPassage(
        a.name, b.name, str(getattr(finding, "relation", "")), s.a_start, s.a_end, s.b_start,
        s.b_end, a_bytes[:PASSAGE_CHARS].decode("utf-8", "replace"),
        b_bytes[:PASSAGE_CHARS].decode("utf-8", "replace"), cut,
    )  # fmt: skip


def build_report(
    items: Sequence[Item],
    dm: DistanceMatrix,
    choice: CompressorChoice,
    *,
    title: str = "kinpress report",
    tree: TreeResult | None = None,
    grouping: GroupingResult | None = None,
    k: int | None = None,
    neighbours: int = 5,
    left_out: Sequence[str] = (),
    derived: DerivedReport | None = None,
    passages: bool = False,
    classification: Classification | None = None,
    unknown_groups: UnknownGroups | None = None,
    roles: dict[str, str] | None = None,
    label_column: str | None = None,
    command: str = "",
    seed: int = 1,
) -> Report:
    """The report of `items` and their matrix `dm`: the tree (`tree`, else neighbour joining
    rooted at the midpoint, `trees.build_tree`), the groups (`grouping`, else
    `groups.find_groups` with `k`), the map (`maps.classical_scaling`), each item's
    `neighbours` nearest (`neighbours.exact_neighbours`), and the derived findings with their
    longest shared passage (`passages`) and the classification when given, with its unknown
    items grouped (`unknown_groups`, origins.group_unknowns). `roles` names items
    that are not simply compared (reference, unknown)."""
    if len(items) != len(dm) or any(
        item.name != label for item, label in zip(items, dm.labels, strict=True)
    ):
        raise ValueError("the items must be the matrix's, in its order")
    if tree is None:
        tree = TreeResult.of_matrix(build_tree(dm.labels, dm.distances, method="nj"), "nj", dm)
    if grouping is None:
        found = find_groups(dm.distances, k=k)
        grouping = GroupingResult.of(dm.labels, found, dm.classes, dm.compressor, dm.conditional)
    index, near = exact_neighbours(dm.distances, neighbours)
    nearest = tuple(
        NearestItems(name, tuple((dm.labels[j], float(d)) for j, d in zip(row, dist, strict=True)))
        for name, row, dist in zip(dm.labels, index, near, strict=True)
    )
    roles = roles or {}
    summaries = tuple(
        ItemSummary(i.name, i.source, len(i.data), _kind(i), i.label, roles.get(i.name, "compared"))
        for i in items
    )
    shown: list[SharedPassage] = []
    grouped: tuple[Family, ...] = ()
    if derived is not None:
        from ..derived import families

        grouped = families(derived.findings)
    if passages:
        by_name = {item.name: item for item in items}
        listed = [f for family in grouped for f in family.shown()]
        shown = [p for f in listed if (p := _passage(f, by_name)) is not None]
    cautions = [SIMILARITY_CAUTION, NCD_CAUTION, TREE_CAUTION, MAP_CAUTION]
    if tree.support is not None:
        cautions.append(BOOTSTRAP_CAUTION)
    if derived is not None:
        cautions.append(DERIVED_CAUTION)
    if classification is not None:
        cautions.append(ORIGIN_CAUTION)
    return Report(
        title=title,
        items=summaries,
        left_out=tuple(left_out),
        choice=choice,
        matrix=dm,
        tree=tree,
        grouping=grouping,
        map=classical_scaling(dm.labels, dm.distances),
        nearest=nearest,
        provenance=Provenance(command, seed, versions(dm.compressor)),
        cautions=tuple(cautions),
        label_column=label_column,
        derived=derived,
        passages=tuple(shown),
        classification=classification,
        unknown_groups=unknown_groups,
        families=grouped,
    )

"""Findings of copied and derived files, their relations and families (see kinpress.derived)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from ..evidence import (
    Stretch,
)
from ..formats import json_ready
from ..measure import (
    MatrixStats,
)

RELATIONS = ("identical", "near_copy", "a_contains_b", "b_contains_a", "partial_overlap")
"""Relations of a derived pair: one file holds the other's content, in order."""

SAME_SOURCE = "same_source"
"""Relation of a pair that compresses well together but shares too little in order (stretches short
of SPANNED and FOUND_IN_ORDER) to call either derived: files of one source (a system's logs, a
project's modules, a template's documents), or a rewrite that kept less than half of a file."""

SPANNED = 0.5
"""Derived only when stretches shared in order (see `evidence`) span at least this fraction of
the smaller file (whitespace aside): most of one file lies, in order, in the other, as in an
edited copy, an excerpt, an extension or a file of reordered blocks."""

FOUND_IN_ORDER = 0.35
"""... and at least this fraction of the smaller file's own fingerprints (not its repeats, not
the set's boilerplate) lie in those stretches and are found in the other file: what is particular
to it was carried over, not only the skeleton it shares with files of its source.

Measured on the related pairs (those passing the compression test) of real corpora: five of
texts, logs of eight systems and code of eight languages with copies, 1-10 % edits, excerpts,
extensions, reordered blocks, re-wrapped lines, CRLF and re-indentation among same-source log
chunks, sections and solutions; two time-ordered log corpora (derived files of earlier lines
among later chunks); two derivation-free corpora (benchmarks/bench_derived_real.py). The 154
derived pairs spanned 0.62-1.0 of the smaller file and found 0.41-1.0; the 223 same-source pairs
spanned at most 0.39 and found at most 0.45 (chunks of a log that repeats whole bursts of lines):
the span parts them, the share found keeps template siblings (demo share) out. Cuts of 0.45-0.55
and 0.3-0.35 gave the same findings there."""

COMMON_FILES = 5
"""A k-gram in at least this many files (or COMMON_SHARE of them, if more, at most COMMON_MOST) is
the set's boilerplate (a licence header, a template, a log line every chunk has) and never seeds
a stretch; files are counted where the k-gram occurs, picked by winnowing or not
(`passages.common_kgrams`). The files must also fall in at least this many groups of near copies
(`prefilter.near_copy_groups`): a module copied into a dozen services of a repository is all
common content, and counted by files alone none of its 66 pairs was even proposed."""

COMMON_SHARE = 0.02

COMMON_MOST = 20
"""... and a k-gram in this many files is boilerplate whatever the set's size: in Go's source
tree (8,146 files) one licence heads 70 files, 0.9 % of them, and 949 of the 10,541 findings
were pairs of those files sharing nothing else; a passage in 20 files would make 190 findings
of it alone, which tell a reviewer nothing about who copied from whom."""


def boilerplate_files(files: int) -> int:
    """In how many of `files` files a k-gram is the set's boilerplate: COMMON_FILES, or
    COMMON_SHARE of them where that is more, at most COMMON_MOST."""
    return min(COMMON_MOST, max(COMMON_FILES, math.ceil(COMMON_SHARE * files)))


COVERED = 0.7
"""e(x|y) >= COVERED: y explains most of x (what an edited copy or an excerpt gives)."""

SIMILAR_SIZE = 0.8
"""C(smaller) / C(larger) >= SIMILAR_SIZE: the two carry about the same amount of information."""


@dataclass(frozen=True)
class DerivedFinding:
    """One related pair: names, relation, explained fractions, score, fpr, and the stretches.

    `a_in_order` and `b_in_order` are the fractions of a and b (normalised bytes) that lie in
    stretches shared in order; `stretches` locate them in both files (see `evidence`), longest
    first. `a_path`, `b_path` say where each item came from (`Item.source`: its file, '-' for
    standard input) and `a_hash`, `b_hash` are the hex BLAKE2b-128 of its bytes
    (`content_digest`, as the cache keys them), so a reviewer opens and checks the very bytes
    compared.
    """

    a: str
    b: str
    relation: str
    a_explained_by_b: float
    b_explained_by_a: float
    score: float
    fpr: float
    a_in_order: float = 0.0
    b_in_order: float = 0.0
    stretches: tuple[Stretch, ...] = ()
    a_path: str = field(kw_only=True)
    b_path: str = field(kw_only=True)
    a_hash: str = field(kw_only=True)
    b_hash: str = field(kw_only=True)

    def as_json(self) -> dict[str, object]:
        """Names, relation, explained fractions, score, fpr, shares in order, the passages
        (offsets in both files), and where each item came from with the hash of its bytes."""
        return dict(
            json_ready(
                {
                    "a": self.a,
                    "b": self.b,
                    "relation": self.relation,
                    "a_explained_by_b": self.a_explained_by_b,
                    "b_explained_by_a": self.b_explained_by_a,
                    "score": self.score,
                    "fpr": self.fpr,
                    "a_shared_in_order": self.a_in_order,
                    "b_shared_in_order": self.b_in_order,
                    "passages": self.stretches,
                    "a_path": self.a_path,
                    "b_path": self.b_path,
                    "a_hash": self.a_hash,
                    "b_hash": self.b_hash,
                }
            )
        )


@dataclass(frozen=True)
class PairCounts:
    """Pairs possible n(n-1)/2, candidates proposed, pruned (possible - candidates), verified."""

    possible: int
    candidates: int
    pruned: int
    verified: int


@dataclass(frozen=True)
class NullSummary:
    """The null scores: how many pairs, the block size, quantiles, and the score cut they give.

    A score passes the `max_fpr` cut when it is above `cut` (infinity when no score can, with too
    few null pairs for so small a rate; null in JSON, which has no infinity).
    """

    pairs: int
    block_bytes: int
    median: float
    p90: float
    p99: float
    max: float
    cut: float

    def as_json(self) -> dict[str, object]:
        return dict(json_ready(dict(self.__dict__)))


@dataclass(frozen=True)
class EvidenceCuts:
    """What a related pair's stretches must reach to count as derived: span `spanned` of the
    smaller file and hold `found` of its fingerprints (SPANNED, FOUND_IN_ORDER). k-grams in at
    least `common_files` files were the set's boilerplate and seeded no stretch."""

    spanned: float
    found: float
    common_files: int

    def as_json(self) -> dict[str, object]:
        return dict(json_ready(dict(self.__dict__)))


@dataclass(frozen=True)
class DerivedReport:
    """Findings sorted by score (highest first), same-source pairs, counts, the null, the cuts.

    `findings` hold the derived pairs (RELATIONS); `same_source` the pairs that passed the
    compression test but share no stretch reaching the cuts (relation SAME_SOURCE).
    """

    findings: tuple[DerivedFinding, ...]
    counts: PairCounts
    null: NullSummary
    compressor: str
    max_fpr: float
    exhaustive: bool
    stats: MatrixStats
    same_source: tuple[DerivedFinding, ...] = ()
    cuts: EvidenceCuts | None = None

    def as_json(self) -> list[dict[str, object]]:
        """Per finding: see `DerivedFinding.as_json`."""
        return list(json_ready(self.findings))

    def to_frame(self, same_source: bool = False) -> Any:
        """One pandas row per finding (`convert.findings_frame`)."""
        from ..convert import findings_frame

        return findings_frame(self, same_source)


LISTED_PAIRS = 10
"""A family with more findings shows a reader (text, report) only those that join each of its
files to it most strongly (`Family.links`, one fewer than its files): Go's 24 generated
zgoarch_*.go files of one template made 276 findings, 552 lines of text."""


@dataclass(frozen=True)
class Family:
    """Files linked by findings (a connected component), and the findings inside it."""

    members: tuple[str, ...]
    findings: tuple[DerivedFinding, ...]

    def shown(self) -> tuple[DerivedFinding, ...]:
        """What a reader is shown: every finding, or with more than LISTED_PAIRS the links."""
        return self.findings if len(self.findings) <= LISTED_PAIRS else self.links()

    def as_json(self) -> dict[str, object]:
        """members, how many findings the family holds, and the pairs `shown` as [a, b]."""
        return {
            "members": list(self.members),
            "findings": len(self.findings),
            "shown": [[f.a, f.b] for f in self.shown()],
        }

    def links(self) -> tuple[DerivedFinding, ...]:
        """A maximum spanning tree of the family by score: the strongest findings that join
        every member (Kruskal's algorithm, highest score first, ties by the pair's names),
        len(members) - 1 of them, in the order of `findings`. A family of 24 generated files
        of one template holds 276 findings; these 23 say how each file joins it."""
        parent = {name: name for name in self.members}

        def root(name: str) -> str:
            while parent[name] != name:
                parent[name] = parent[parent[name]]
                name = parent[name]
            return name

        chosen = set()
        for k in sorted(
            range(len(self.findings)),
            key=lambda k: (-self.findings[k].score, self.findings[k].a, self.findings[k].b),
        ):
            a, b = root(self.findings[k].a), root(self.findings[k].b)
            if a != b:
                parent[a] = b
                chosen.add(k)
        return tuple(f for k, f in enumerate(self.findings) if k in chosen)


def relation(
    a_explained_by_b: float, b_explained_by_a: float, size_a: int, size_b: int, same: bool
) -> str:
    """The relation of a pair already judged related, from e(a|b), e(b|a), C(a) and C(b).

    With s the item of smaller C(x) and l the other, r = C(s) / C(l):
      identical        same bytes
      near_copy        e(s|l) >= COVERED and r >= SIMILAR_SIZE
      l_contains_s     e(s|l) >= COVERED and r < SIMILAR_SIZE (s is an excerpt of l, or l an
                       extension of s): reported as a_contains_b or b_contains_a
      partial_overlap  otherwise: they share a part, neither explains the other
    """
    if same:
        return "identical"
    a_small = size_a <= size_b
    small_explained = a_explained_by_b if a_small else b_explained_by_a
    if small_explained < COVERED:
        return "partial_overlap"
    if min(size_a, size_b) >= SIMILAR_SIZE * max(size_a, size_b):
        return "near_copy"
    return "b_contains_a" if a_small else "a_contains_b"


def families(findings: Sequence[DerivedFinding]) -> tuple[Family, ...]:
    """Connected components of the findings' graph, largest first, then by first member name."""
    parent: dict[str, str] = {}

    def root(name: str) -> str:
        parent.setdefault(name, name)
        while parent[name] != name:
            parent[name] = parent[parent[name]]
            name = parent[name]
        return name

    for finding in findings:
        parent[root(finding.a)] = root(finding.b)
    members: dict[str, list[str]] = {}
    for name in parent:
        members.setdefault(root(name), []).append(name)
    grouped = [
        Family(
            members=tuple(sorted(names)),
            findings=tuple(f for f in findings if root(f.a) == key),
        )
        for key, names in members.items()
    ]
    return tuple(sorted(grouped, key=lambda family: (-len(family.members), family.members[0])))

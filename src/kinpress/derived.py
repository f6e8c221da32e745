"""Copied or derived files: which pairs of items came from one another, and how.

For a pair (a, b) the fraction of a explained by b is

    e(a|b) = 1 - C(a|b) / C(a)        (C(a|b) = C(ba) - C(b) by concatenation)

near 1 when b holds all of a, near 0 when b tells the compressor nothing about a. Both directions
are measured. A pair is related when its score

    score(a, b) = max(e(a|b), e(b|a))

is unusually high for the set: the estimated false-positive rate

    fpr(s) = (1 + #{null pairs with score >= s}) / (1 + N)

is at most `max_fpr`, where the N null pairs are the set's own items set against block-shuffled
material of items of the same kind at matching sizes (see `find_derived`).

Compression says how much two files share, not how. A related pair is derived only when the two
share stretches in the same order that span SPANNED of the smaller file and hold FOUND_IN_ORDER of
its own fingerprints (see `evidence`), as written or with names aside (`names_aside`: a copy
with consistently renamed identifiers); derived pairs get a relation (see `relation`). Related
pairs without such stretches are SAME_SOURCE: logs of one system, modules of one project,
documents of one template share vocabulary, templates and repeated lines scattered over both
files, which compresses well together but is not copying.

A finding is evidence of shared content, for a person to review; it is not proof that one file
was copied from the other. Files of a common template, generated from one source, or quoting the
same third file can be related without either being derived from the other.
"""

from __future__ import annotations

import math
import os
import random
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
from datasketch import MinHash, MinHashLSHEnsemble

from .cache import SizeCache
from .compressors import Compressor
from .engine import Engine
from .evidence import (
    NO_EVIDENCE,
    Evidence,
    Stretch,
    evidence,
    names_aside,
    remapped,
    seed_print,
)
from .formats import json_ready
from .items import InputError, Item, ItemLike, as_items, uncompressed_name
from .measure import (
    MatrixStats,
    Measurement,
    Progress,
    content_digest,
    measure_conditional,
    ncd,
)
from .passages import Fingerprint, common_among

RELATIONS = ("identical", "near_copy", "a_contains_b", "b_contains_a", "partial_overlap")
"""Relations of a derived pair: one file holds the other's content, in order."""

SAME_SOURCE = "same_source"
"""Relation of a pair that compresses well together but shares no long stretch in order: files of
one source (a system's logs, a project's modules, a template's documents), not a derivation."""

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
"""A k-gram in at least this many files (or COMMON_SHARE of them, if more) is the set's boilerplate
(a licence header, a template, a log line every chunk has) and never seeds a stretch."""

COMMON_SHARE = 0.02

COVERED = 0.7
"""e(x|y) >= COVERED: y explains most of x (what an edited copy or an excerpt gives)."""

SIMILAR_SIZE = 0.8
"""C(smaller) / C(larger) >= SIMILAR_SIZE: the two carry about the same amount of information."""

BLOCK_BYTES = 64
"""Null material is cut into blocks of whole lines of about this many bytes, then shuffled."""

DONOR_OVERLAP = 0.5
"""A donor sharing this fraction of the smaller shingle set with a is a likely relative of a."""

MIN_KIND_DONORS = 3
"""Null material comes from files of the candidate's kind when the set has at least this many."""

_FNV_OFFSET = np.uint64(0xCBF29CE484222325)
_FNV_PRIME = np.uint64(0x100000001B3)
_BATCH = 1 << 12


@dataclass(frozen=True)
class Prefilter:
    """Candidate pairs from MinHash sketches of byte shingles, indexed for containment.

    Each item becomes the set S(x) of its `shingle`-byte substrings, hashed to 32 bits, and a
    `num_perm`-value MinHash of it, h_k(S) = min over s in S of (a_k s + b_k) mod 2^32 (odd a_k).
    An LSH Ensemble (Zhu et al. 2016; `num_part` size partitions, at most `rows` rows a band)
    proposes (x, y) when the containment |S(x) ∩ S(y)| / |S(x)| reaches about `containment`,
    queried from every item, so a short excerpt of a long file is proposed although the Jaccard
    index |S(x) ∩ S(y)| / |S(x) ∪ S(y)| of the two is small. Set sizes are rounded up to steps of
    5 % for the index's partitioning. Items with identical bytes are always proposed.

    16-byte shingles are rarely shared by unrelated files of one kind (shared words and short
    phrases are shorter), while an edit touches only the shingles that overlap it: with one edited
    word in ten (one edit in about 60 bytes, each breaking about 22 shingles) some three in five
    survive, so edited copies stay well above the threshold. Proposals are then checked on the
    sketches (see `candidate_pairs`).
    """

    shingle: int = 16
    containment: float = 0.3
    num_perm: int = 128
    num_part: int = 8
    rows: int = 4


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
        from .convert import findings_frame

        return findings_frame(self, same_source)


@dataclass(frozen=True)
class Family:
    """Files linked by findings (a connected component), and the findings inside it."""

    members: tuple[str, ...]
    findings: tuple[DerivedFinding, ...]


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


def shingle_hashes(data: bytes, shingle: int) -> np.ndarray:
    """Distinct 32-bit FNV-1a hashes of every `shingle`-byte substring (of all, when shorter)."""
    array = np.frombuffer(data, dtype=np.uint8)
    width = min(shingle, len(array))
    if width == 0:
        return np.zeros(0, dtype=np.uint32)
    windows = np.lib.stride_tricks.sliding_window_view(array, width)
    hashes = np.full(len(windows), _FNV_OFFSET, dtype=np.uint64)
    for column in range(width):
        hashes = (hashes ^ windows[:, column]) * _FNV_PRIME
    return np.unique((hashes ^ (hashes >> np.uint64(32))).astype(np.uint32))


@dataclass(frozen=True)
class Sketch:
    """An item's MinHash and the number of distinct shingles it summarises."""

    minhash: MinHash
    size: int


def sketches(items: Sequence[Item], prefilter: Prefilter, seed: int) -> list[Sketch]:
    """The MinHash of every item's shingle set (see `Prefilter`), permutations drawn from seed."""
    rng = np.random.default_rng(seed)
    multiply = rng.integers(0, 1 << 32, prefilter.num_perm, dtype=np.uint64).astype(np.uint32)
    multiply |= np.uint32(1)
    add = rng.integers(0, 1 << 32, prefilter.num_perm, dtype=np.uint64).astype(np.uint32)
    out = []
    for item in items:
        hashes = shingle_hashes(item.data, prefilter.shingle)
        values = np.full(prefilter.num_perm, np.iinfo(np.uint32).max, dtype=np.uint32)
        for start in range(0, len(hashes), _BATCH):
            chunk = hashes[start : start + _BATCH, None] * multiply + add
            np.minimum(values, chunk.min(axis=0), out=values)
        minhash = MinHash(seed=seed, hashvalues=values, scheme="affine32")
        out.append(Sketch(minhash, len(hashes)))
    return out


def _rounded(size: int) -> int:
    """Up to the next step of a 5 % geometric grid, so the index sees few distinct sizes."""
    return math.ceil(1.05 ** math.ceil(math.log(max(size, 1), 1.05) - 1e-9))


def _overlap(first: Sketch, second: Sketch) -> float:
    """Estimated |S ∩ T| / min(|S|, |T|) from the Jaccard estimate J: |S ∩ T| = J(|S|+|T|)/(1+J)."""
    jaccard = float(first.minhash.jaccard(second.minhash))
    shared = jaccard * (first.size + second.size) / (1 + jaccard)
    return shared / max(min(first.size, second.size), 1)


def candidate_pairs(
    sketched: Sequence[Sketch], digests: Sequence[bytes], prefilter: Prefilter
) -> set[tuple[int, int]]:
    """Index pairs (i < j) the prefilter proposes: containment either way, or the same bytes.

    The index's proposals are then checked on the sketches themselves: a pair is kept when its
    estimated overlap |S ∩ T| / min(|S|, |T|) is at least half the containment threshold (the
    margin absorbs the estimate's error), which drops most of the banding's chance collisions.
    """
    ensemble = MinHashLSHEnsemble(
        threshold=prefilter.containment,
        num_perm=prefilter.num_perm,
        num_part=prefilter.num_part,
        m=prefilter.rows,
    )
    ensemble.index([(k, s.minhash, _rounded(s.size)) for k, s in enumerate(sketched)])
    proposed = {
        (min(k, j), max(k, j))
        for k, s in enumerate(sketched)
        for j in ensemble.query(s.minhash, _rounded(s.size))
        if j != k
    }
    pairs = {
        (i, j)
        for i, j in proposed
        if _overlap(sketched[i], sketched[j]) >= prefilter.containment / 2
    }
    by_digest: dict[bytes, list[int]] = {}
    for k, digest in enumerate(digests):
        by_digest.setdefault(digest, []).append(k)
    for same in by_digest.values():
        pairs.update((i, j) for n, i in enumerate(same) for j in same[n + 1 :])
    return pairs


def _all_pairs(n: int) -> Iterator[tuple[int, int]]:
    return ((i, j) for i in range(n) for j in range(i + 1, n))


def line_blocks(data: bytes, size: int) -> list[bytes]:
    """Cut after the first line break at or beyond every `size` bytes (hard cuts in long lines)."""
    blocks: list[bytes] = []
    start = 0
    while start < len(data):
        end = data.find(b"\n", start + size - 1, start + 4 * size)
        stop = len(data) if start + size >= len(data) else (end + 1 if end >= 0 else start + size)
        blocks.append(data[start:stop])
        start = stop
    return blocks


def kind_of(item: Item) -> str:
    """The kind of file an item comes from: its source's suffix in lower case ('' if none), a
    suffix kinpress reads through (`items.uncompressed_name`) dropped. Items split from one file
    share its kind."""
    return os.path.splitext(uncompressed_name(os.path.basename(item.source.lower())))[1]


def _donor_pools(kinds: Sequence[str]) -> dict[str, list[int]]:
    """For each kind, the items of that kind when it has at least MIN_KIND_DONORS + 1 items
    (a donor other than the item itself), else every item: the null is made of files like the
    candidate where the set has enough of them."""
    by_kind: dict[str, list[int]] = {}
    for k, kind in enumerate(kinds):
        by_kind.setdefault(kind, []).append(k)
    everyone = list(range(len(kinds)))
    return {
        kind: members if len(members) > MIN_KIND_DONORS else everyone
        for kind, members in by_kind.items()
    }


def _null_material(
    a: int,
    length: int,
    data: Sequence[bytes],
    donors: Sequence[int],
    relative: Callable[[int], bool],
    rng: random.Random,
) -> bytes:
    """`length` bytes of donors' shuffled line blocks, donor after random donor.

    Donors are drawn from `donors`, other than a and not `relative` to it, each used once.
    """
    out = bytearray()
    used = {a}
    for _ in range(4 * len(donors)):
        if len(out) >= length:
            break
        donor = donors[rng.randrange(len(donors))]
        if donor in used or relative(donor):
            continue
        used.add(donor)
        blocks = line_blocks(data[donor], BLOCK_BYTES)
        rng.shuffle(blocks)
        out += b"".join(blocks)
    return bytes(out[:length])


@dataclass(frozen=True)
class _NullPlan:
    """Null items (appended after the real ones) and, for each, the real item it is set against."""

    items: tuple[Item, ...]
    partners: tuple[int, ...]


def _plan_null(
    items: Sequence[Item],
    pairs: Sequence[tuple[int, int]],
    sketched: Sequence[Sketch],
    count: int,
    rng: random.Random,
) -> _NullPlan:
    """Null pairs shaped like the pairs tested: a real item of a pair against material the size
    of its partner, from donors of the same kind (see `_donor_pools`) with other bytes, not
    sharing DONOR_OVERLAP of their shingles."""
    data = [item.data for item in items]
    digests = [content_digest(d) for d in data]
    kinds = [kind_of(item) for item in items]
    pools = _donor_pools(kinds)
    made: list[Item] = []
    partners: list[int] = []
    for k in range(count):
        first, second = pairs[rng.randrange(len(pairs))]
        a, b = (first, second) if rng.random() < 0.5 else (second, first)

        def relative(j: int, a: int = a) -> bool:
            same = digests[j] == digests[a]
            return same or _overlap(sketched[a], sketched[j]) >= DONOR_OVERLAP

        material = _null_material(a, len(data[b]), data, pools[kinds[a]], relative, rng)
        if material:
            made.append(Item(name=f"null#{k}", data=material, source="null model"))
            partners.append(a)
    return _NullPlan(items=tuple(made), partners=tuple(partners))


def _fpr(scores: np.ndarray, null_sorted: np.ndarray) -> np.ndarray:
    """(1 + #{null >= s}) / (1 + N) for each score s."""
    above = len(null_sorted) - np.searchsorted(null_sorted, scores, side="left")
    return np.asarray((1 + above) / (1 + len(null_sorted)), dtype=np.float64)


def _summary(null_sorted: np.ndarray, max_fpr: float) -> NullSummary:
    """Quantiles of the null scores and the cut: fpr(s) <= max_fpr exactly when s > cut.

    fpr(s) <= max_fpr needs #{null >= s} <= A = floor(max_fpr (1 + N)) - 1, so s must exceed
    the (N - A)-th smallest null score (every s passes when A >= N, none when A < 0).
    """
    size = int(null_sorted.size)
    allowed = math.floor(max_fpr * (1 + size) + 1e-9) - 1
    if allowed < 0:
        cut = math.inf
    elif allowed >= size:
        cut = -math.inf
    else:
        cut = float(null_sorted[size - allowed - 1])
    quantiles = np.quantile(null_sorted, [0.5, 0.9, 0.99, 1.0]) if size else [math.nan] * 4
    return NullSummary(
        pairs=size,
        block_bytes=BLOCK_BYTES,
        median=float(quantiles[0]),
        p90=float(quantiles[1]),
        p99=float(quantiles[2]),
        max=float(quantiles[3]),
        cut=cut,
    )


@dataclass(frozen=True)
class _Measured:
    """Both explained fractions of every candidate, C(x) of the real items, the null scores."""

    a_by_b: np.ndarray
    b_by_a: np.ndarray
    sizes: np.ndarray
    null_sorted: np.ndarray
    stats: MatrixStats

    @cached_property
    def scores(self) -> np.ndarray:
        """max(e(a|b), e(b|a)) of each candidate."""
        return np.asarray(np.maximum(self.a_by_b, self.b_by_a), dtype=np.float64)

    @cached_property
    def fprs(self) -> np.ndarray:
        """The estimated false-positive rate of each candidate's score (`_fpr`)."""
        return _fpr(self.scores, self.null_sorted)


def _measure(
    items: Sequence[Item],
    pairs: Sequence[tuple[int, int]],
    plan: _NullPlan,
    measurement: Measurement,
) -> _Measured:
    """e(x|y) = 1 - C(x|y) / C(x) both ways for the candidates and the null pairs, in one run."""
    n, m, z = len(items), len(pairs), len(plan.partners)
    null = [(n + k, a) for k, a in enumerate(plan.partners)]
    requested = [(j, i) for i, j in pairs] + [(i, j) for i, j in pairs]
    requested += null + [(a, b) for b, a in null]
    measured = measure_conditional([*items, *plan.items], requested, measurement)
    explained = 1.0 - ncd(measured.conditional, measured.sizes[measured.target])
    return _Measured(
        a_by_b=explained[:m],
        b_by_a=explained[m : 2 * m],
        sizes=measured.sizes[:n],
        null_sorted=np.sort(np.maximum(explained[2 * m : 2 * m + z], explained[2 * m + z :])),
        stats=measured.stats,
    )


def _related(
    pairs: Sequence[tuple[int, int]], measured: _Measured, max_fpr: float
) -> list[tuple[int, int]]:
    """The candidates that pass the compression test (identical ones are checked apart)."""
    passed = measured.fprs <= max_fpr
    return [pair for pair, ok in zip(pairs, passed.tolist(), strict=True) if ok]


@dataclass(frozen=True)
class _View:
    """The wanted items' fingerprints in one view of the files, the set's boilerplate hashes in
    that view, and where each byte of a view came from (None: the files as written)."""

    prints: dict[int, Fingerprint]
    ignore: np.ndarray
    maps: dict[int, tuple[np.ndarray, np.ndarray]] | None


def _view(items: Sequence[Item], wanted: set[int], common: int, names: bool) -> _View:
    """Fingerprints of the files as written, or with names aside (`names_aside`). Every item is
    fingerprinted once to count in how many files each hash occurs (common at `common` files);
    only the wanted ones are kept."""
    kept: dict[int, Fingerprint] = {}
    maps: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    distinct = []
    for k, item in enumerate(items):
        if names:
            text, starts, ends = names_aside(item.data)
            if k in wanted:
                maps[k] = (starts, ends)
        found = seed_print(text if names else item.data)
        distinct.append(np.unique(found.hashes))
        if k in wanted:
            kept[k] = found
    return _View(kept, common_among(distinct, common), maps if names else None)


def _is_derived(found: Evidence, a_smaller: bool, cuts: EvidenceCuts) -> bool:
    """The stretches span enough of the smaller file and hold enough of its fingerprints."""
    return found.covered(a_smaller) >= cuts.spanned and found.seeded(a_smaller) >= cuts.found


def _findings(
    items: Sequence[Item],
    pairs: Sequence[tuple[int, int]],
    measured: _Measured,
    digests: Sequence[bytes],
    max_fpr: float,
    judge: Callable[[int, int], tuple[Evidence, bool]],
    sought: set[tuple[int, int]],
) -> tuple[tuple[DerivedFinding, ...], tuple[DerivedFinding, ...]]:
    """Derived pairs (the same bytes, or pairs in `sought` whose stretches reach the cuts, as
    `judge` says) and same-source pairs (fpr at most max_fpr, stretches short of the cuts),
    each highest score first."""
    scores, fprs = measured.scores, measured.fprs
    derived: list[DerivedFinding] = []
    kin: list[DerivedFinding] = []
    for k, (i, j) in enumerate(pairs):
        same = digests[i] == digests[j]
        if not same and (i, j) not in sought:
            continue
        found, copied = judge(i, j)
        if not (same or copied or fprs[k] <= max_fpr):
            continue
        a_by_b, b_by_a = float(measured.a_by_b[k]), float(measured.b_by_a[k])
        sizes = int(measured.sizes[i]), int(measured.sizes[j])
        finding = DerivedFinding(
            a=items[i].name,
            b=items[j].name,
            relation=relation(a_by_b, b_by_a, *sizes, same) if same or copied else SAME_SOURCE,
            a_explained_by_b=a_by_b,
            b_explained_by_a=b_by_a,
            score=float(scores[k]),
            fpr=float(fprs[k]),
            a_in_order=1.0 if same else found.a_seeded,
            b_in_order=1.0 if same else found.b_seeded,
            stretches=found.stretches,
            a_path=items[i].source,
            b_path=items[j].source,
            a_hash=digests[i].hex(),
            b_hash=digests[j].hex(),
        )
        (derived if same or copied else kin).append(finding)

    def order(found: list[DerivedFinding]) -> tuple[DerivedFinding, ...]:
        return tuple(sorted(found, key=lambda f: (-f.score, f.a, f.b)))

    return order(derived), order(kin)


def find_derived(
    items: Sequence[ItemLike],
    compressor: Compressor | str = "zstd",
    *,
    exhaustive: bool = False,
    max_fpr: float = 0.01,
    seed: int = 0,
    null_pairs: int | None = None,
    prefilter: Prefilter | None = None,
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    progress: Progress | None = None,
) -> DerivedReport:
    """Pairs of items where one is copied from, or derived from, the other.

    1. Candidates: every pair with `exhaustive`, else the pairs the `Prefilter` proposes.
    2. Each candidate is measured both ways, e(a|b) = 1 - C(a|b)/C(a) and e(b|a), through
       `conditional_sizes` (engine and cache as for a matrix).
    3. The null: N = `null_pairs` (default ceil(3 / max_fpr): enough to tell an fpr at max_fpr
       from zero, each null pair being as costly as a real one) pairs drawn to the candidates'
       shapes. For a candidate (a, b) drawn at random, a (or b) is set against null material as
       long as b (or a): contents of files of a's kind (`kind_of`; every file where the set has
       fewer than MIN_KIND_DONORS + 1 of that kind) cut into blocks of whole lines (about
       BLOCK_BYTES) and shuffled, donor by donor, skipping donors with the same bytes as a or
       sharing DONOR_OVERLAP of their shingles with it. Blocks keep each donor's vocabulary, line
       structure and short phrases, so the null is "a file of a's kind, of b's size"; shuffling
       breaks every run longer than a block, which is what copying leaves.
    4. A candidate with fpr(score) <= max_fpr is related. The stretches shared in order of
       every related pair and every pair the prefilter proposes are found (`evidence`,
       boilerplate of COMMON_FILES or COMMON_SHARE of the files left out): a pair whose
       stretches reach the cuts (`EvidenceCuts`) in the files as written or with names aside
       (`names_aside`) is derived, with the relation of `relation`, even where the compression
       test did not relate it (a copy edited in one word in ten loses explained fraction faster
       than stretches; its fpr then exceeds max_fpr); a related pair short of the cuts is
       SAME_SOURCE. Identical bytes are always derived.

    max_fpr is a rate per pair verified for the compression test; the stretches then keep files
    of one source, which pass that test far more often than unrelated files, out of the
    findings. Findings are evidence for a person to review, not proof of copying; pairs longer
    together than the compressor's window look unrelated, as they do in a matrix.
    """
    if not 0 < max_fpr <= 1:
        raise ValueError(f"max_fpr must be in (0, 1], got {max_fpr}")
    items = as_items(items)
    if len(items) < 2:
        raise InputError(f"need at least two items to compare, got {len(items)}")
    measurement = Measurement.of(compressor, engine=engine, cache=cache, progress=progress)
    prefilter = prefilter or Prefilter()
    digests = [content_digest(item.data) for item in items]
    sketched = sketches(items, prefilter, seed)
    n = len(items)
    proposed = candidate_pairs(sketched, digests, prefilter)
    pairs = sorted(_all_pairs(n) if exhaustive else proposed)
    count = (null_pairs if null_pairs is not None else math.ceil(3 / max_fpr)) if pairs else 0
    plan = _plan_null(items, pairs, sketched, count, random.Random(seed))
    possible = n * (n - 1) // 2
    counts = PairCounts(possible, len(pairs), possible - len(pairs), len(pairs))
    if not pairs:
        empty = np.zeros(0)
        measured = _Measured(empty, empty, empty, empty, MatrixStats())
    else:
        measured = _measure(items, pairs, plan, measurement)
    sought = proposed | set(_related(pairs, measured, max_fpr))
    related = {k for pair in sought for k in pair}
    common = max(COMMON_FILES, math.ceil(COMMON_SHARE * n))
    written = _view(items, related, common, names=False)
    renamed = _view(items, related, common, names=True)
    cuts = EvidenceCuts(spanned=SPANNED, found=FOUND_IN_ORDER, common_files=common)

    def judge(i: int, j: int) -> tuple[Evidence, bool]:
        if digests[i] == digests[j]:
            return NO_EVIDENCE, True
        a_smaller = len(written.prints[i].norm) <= len(written.prints[j].norm)
        found = evidence(written.prints[i], written.prints[j], written.ignore)
        if _is_derived(found, a_smaller, cuts):
            return found, True
        aside = evidence(renamed.prints[i], renamed.prints[j], renamed.ignore)
        if _is_derived(aside, a_smaller, cuts):
            assert renamed.maps is not None
            return remapped(aside, renamed.maps[i], renamed.maps[j]), True
        return found, False

    derived, kin = _findings(items, pairs, measured, digests, max_fpr, judge, sought)
    return DerivedReport(
        findings=derived,
        counts=counts,
        null=_summary(measured.null_sorted, max_fpr),
        compressor=measurement.compressor.spec,
        max_fpr=max_fpr,
        exhaustive=exhaustive,
        stats=measured.stats,
        same_source=kin,
        cuts=cuts,
    )

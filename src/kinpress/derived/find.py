"""`find_derived` (see kinpress.derived): measure the candidates both ways against the null,
then read the verdict from the stretches shared in order."""

from __future__ import annotations

import random
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from ..cache import SizeCache
from ..compressors import Compressor
from ..engine import Engine
from ..evidence import (
    NO_EVIDENCE,
    NOISE,
    Evidence,
    evidence,
    names_aside,
    pattern_print,
    remapped,
    seed_print,
)
from ..items import InputError, Item, ItemLike, as_items
from ..measure import (
    MatrixStats,
    Measurement,
    Progress,
    content_digest,
    measure_conditional,
    ncd,
)
from ..passages import Fingerprint, common_kgrams
from .null import _fpr, _NullPlan, _plan_null, _summary, default_null_pairs
from .prefilter import Prefilter, Proposals, _all_pairs, near_copy_groups, propose
from .result import (
    COMMON_FILES,
    FOUND_IN_ORDER,
    SAME_SOURCE,
    SPANNED,
    DerivedFinding,
    DerivedReport,
    EvidenceCuts,
    PairCounts,
    boilerplate_files,
    relation,
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
    distinct, norms = [], []
    for k, item in enumerate(items):
        if names:
            text, starts, ends = names_aside(item.data)
            if k in wanted:
                maps[k] = (starts, ends)
        found = pattern_print(text) if names else seed_print(item.data)
        distinct.append(np.unique(found.hashes))
        norms.append(found.norm)
        if k in wanted:
            kept[k] = found
    groups = near_copy_groups(distinct, seed=0)  # copies of one file are a family's content
    ignore = common_kgrams(norms, distinct, NOISE, common, groups, COMMON_FILES)
    return _View(kept, ignore, maps if names else None)


def _is_derived(found: Evidence, a_smaller: bool, cuts: EvidenceCuts) -> bool:
    """The stretches span enough of the smaller file and hold enough of its fingerprints."""
    return found.covered(a_smaller) >= cuts.spanned and found.seeded(a_smaller) >= cuts.found


@dataclass(frozen=True)
class _Judge:
    """Whether a pair is derived: the same bytes, or stretches shared in order that reach the
    cuts in the files as written or with names aside (see `find_derived`, step 4)."""

    digests: Sequence[bytes]
    written: _View
    renamed: _View
    cuts: EvidenceCuts

    @classmethod
    def of(
        cls, items: Sequence[Item], digests: Sequence[bytes], sought: set[tuple[int, int]]
    ) -> _Judge:
        """The judge of the pairs in `sought`: their items' fingerprints in both views, with
        the set's boilerplate left out."""
        related = {k for pair in sought for k in pair}
        common = boilerplate_files(len(items))
        written = _view(items, related, common, names=False)
        renamed = _view(items, related, common, names=True)
        cuts = EvidenceCuts(spanned=SPANNED, found=FOUND_IN_ORDER, common_files=common)
        return cls(digests, written, renamed, cuts)

    def __call__(self, i: int, j: int) -> tuple[Evidence, bool]:
        """The evidence of pair (i, j) and whether it is derived."""
        digests, written, renamed, cuts = self.digests, self.written, self.renamed, self.cuts
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
    proposals: Proposals | None = None,
) -> DerivedReport:
    """Pairs of items where one is copied from, or derived from, the other.

    1. Candidates: every pair with `exhaustive`, else the pairs the `Prefilter` proposes
       (`propose`; `proposals` made beforehand with the same prefilter and seed are used as
       given).
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
       boilerplate (`boilerplate_files`) left out): a pair whose
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
    digests = [content_digest(item.data) for item in items]
    if proposals is None:
        proposals = propose(items, prefilter, seed)
    elif len(proposals.sketches) != len(items):
        raise ValueError(
            f"proposals of {len(proposals.sketches)} items given for {len(items)} items"
        )
    sketched = list(proposals.sketches)
    n = len(items)
    proposed = set(proposals.pairs)
    pairs = sorted(_all_pairs(n) if exhaustive else proposed)
    count = (null_pairs if null_pairs is not None else default_null_pairs(max_fpr)) if pairs else 0
    plan = _plan_null(items, pairs, sketched, count, random.Random(seed))
    possible = n * (n - 1) // 2
    counts = PairCounts(possible, len(pairs), possible - len(pairs), len(pairs))
    if not pairs:
        empty = np.zeros(0)
        measured = _Measured(empty, empty, empty, empty, MatrixStats())
    else:
        measured = _measure(items, pairs, plan, measurement)
    sought = proposed | set(_related(pairs, measured, max_fpr))
    judge = _Judge.of(items, digests, sought)
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
        cuts=judge.cuts,
    )

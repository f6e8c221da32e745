"""The prefilter (see kinpress.derived): MinHash sketches of byte shingles, candidate pairs by
LSH-ensemble containment."""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np
from datasketch import MinHash, MinHashLSH, MinHashLSHEnsemble

from ..items import Item

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


BOILERPLATE_SAMPLE = 1000
"""Files whose shingles are counted to find the set's boilerplate (all of them, if fewer)."""


def _permutations(seed: int, count: int) -> tuple[np.ndarray, np.ndarray]:
    """The (a_k, b_k) of `count` hash permutations h -> a_k h + b_k mod 2^32 (a_k odd)."""
    rng = np.random.default_rng(seed)
    multiply = rng.integers(0, 1 << 32, count, dtype=np.uint64).astype(np.uint32)
    multiply |= np.uint32(1)
    add = rng.integers(0, 1 << 32, count, dtype=np.uint64).astype(np.uint32)
    return multiply, add


def _minimums(hashes: np.ndarray, multiply: np.ndarray, add: np.ndarray) -> np.ndarray:
    """The MinHash values of a set of 32-bit hashes under the permutations."""
    values = np.full(len(multiply), np.iinfo(np.uint32).max, dtype=np.uint32)
    for start in range(0, len(hashes), _BATCH):
        chunk = hashes[start : start + _BATCH, None] * multiply + add
        np.minimum(values, chunk.min(axis=0), out=values)
    return values


NEAR_COPY = 0.7
"""Files whose hash sets have a Jaccard index of at least this are near copies of each other
(`near_copy_groups`): copies with a word in fifty edited stay near 0.9; two files that share a
licence are this alike only when it is over four fifths of each."""


def near_copy_groups(
    held: Sequence[np.ndarray], seed: int, threshold: float = NEAR_COPY
) -> np.ndarray:
    """Each file's group of near copies (`held[i]`: file i's distinct hashes): files joined
    where their estimated Jaccard index (a 64-value MinHash, proposals of an LSH index checked
    on it) is at least `threshold`, groups closed by transitivity. A passage is boilerplate only
    in files of several groups (`passages.boilerplate_among`)."""
    multiply, add = _permutations(seed, 64)
    labels = np.arange(len(held))
    sketched: dict[int, MinHash] = {}
    index = MinHashLSH(threshold=threshold, num_perm=64)
    for k, hashes in enumerate(held):
        if len(hashes):
            folded = (hashes ^ (hashes >> np.uint64(32))).astype(np.uint32)
            values = _minimums(np.asarray(folded, dtype=np.uint32), multiply, add)
            sketched[k] = MinHash(seed=seed, hashvalues=values, scheme="affine32")
            index.insert(k, sketched[k])

    def root(k: int) -> int:
        while labels[k] != k:
            labels[k] = labels[labels[k]]
            k = int(labels[k])
        return k

    for k, sketch in sketched.items():
        for j in index.query(sketch):
            if j != k and sketch.jaccard(sketched[j]) >= threshold:
                a, b = root(k), root(j)
                labels[max(a, b)] = min(a, b)
    return np.array([root(k) for k in range(len(held))])


def boilerplate(items: Sequence[Item], prefilter: Prefilter, seed: int) -> np.ndarray:
    """Sorted shingle hashes found in at least `boilerplate_files` of the files (the
    judge's boilerplate: a licence header, a template, a log line every chunk has) and in files
    of COMMON_FILES groups of near copies or more (`near_copy_groups`; a file copied into many
    places is a family, not boilerplate), counted on BOILERPLATE_SAMPLE files drawn at random
    (`seed`) when there are more."""
    from ..passages import boilerplate_among
    from .result import COMMON_FILES, boilerplate_files

    rng = np.random.default_rng(seed)
    chosen: list[int] = list(range(len(items)))
    if len(items) > BOILERPLATE_SAMPLE:
        chosen = sorted(rng.choice(len(items), BOILERPLATE_SAMPLE, replace=False).tolist())
    distinct = [shingle_hashes(items[k].data, prefilter.shingle) for k in chosen]
    groups = near_copy_groups(distinct, seed)
    return boilerplate_among(distinct, boilerplate_files(len(chosen)), groups, COMMON_FILES)


def sketches(items: Sequence[Item], prefilter: Prefilter, seed: int) -> list[Sketch]:
    """The MinHash of every item's shingle set (see `Prefilter`), permutations drawn from seed,
    the set's boilerplate (`boilerplate`) left out: on a real code tree every file opens with
    the same licence lines, and small files sharing little else were all proposed together."""
    multiply, add = _permutations(seed, prefilter.num_perm)
    common = boilerplate(items, prefilter, seed)
    out = []
    for item in items:
        hashes = shingle_hashes(item.data, prefilter.shingle)
        if len(common):
            hashes = hashes[~np.isin(hashes, common, assume_unique=True)]
        values = _minimums(hashes, multiply, add)
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
    # an item with no shingle but the set's boilerplate is proposed only with its same bytes
    kept = [(k, s) for k, s in enumerate(sketched) if s.size]
    proposed: set[tuple[int, int]] = set()
    if kept:
        ensemble = MinHashLSHEnsemble(
            threshold=prefilter.containment,
            num_perm=prefilter.num_perm,
            num_part=prefilter.num_part,
            m=prefilter.rows,
        )
        ensemble.index([(k, s.minhash, _rounded(s.size)) for k, s in kept])
        proposed = {
            (min(k, j), max(k, j))
            for k, s in kept
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


@dataclass(frozen=True)
class Proposals:
    """The prefilter's work on a set of items: each item's sketch (`sketches`), and the index
    pairs it proposes (`pairs`, see `candidate_pairs`)."""

    sketches: tuple[Sketch, ...]
    pairs: frozenset[tuple[int, int]]


def propose(items: Sequence[Item], prefilter: Prefilter | None = None, seed: int = 0) -> Proposals:
    """The pairs of `items` the prefilter proposes, and the sketches it proposed them from:
    what `find_derived` starts with, made beforehand where something must know the candidates
    first (-c auto's estimate of the job's time counts them)."""
    from ..measure import content_digest

    prefilter = prefilter or Prefilter()
    sketched = sketches(items, prefilter, seed)
    digests = [content_digest(item.data) for item in items]
    return Proposals(tuple(sketched), frozenset(candidate_pairs(sketched, digests, prefilter)))


def _all_pairs(n: int) -> Iterator[tuple[int, int]]:
    return ((i, j) for i in range(n) for j in range(i + 1, n))

"""Evidence of copying: stretches two files share in the same order, edits allowed.

Compression says how much two files share; it does not say how. A copied file shares long
stretches with its original, in the same order, broken only where it was edited. Files of one
source (chunks of one system's log, modules of one project, documents of one template) share many
short pieces (templates, imports, phrases) scattered over both files, and those pieces do not line
up into long stretches.

Both files are normalised (every ASCII whitespace byte dropped, see `passages.fingerprint`), so
re-wrapping, line endings and indentation change nothing. Seeds are the winnowed k-gram
fingerprints (Schleimer, Wilkerson & Aiken 2003) the two files have in common, except

- hashes in `ignore` (boilerplate common to many files of the set, `passages.common_kgrams`), and
- hashes a file holds more than SEED_REPEATS times (its own repeats, which match anywhere).

A stretch chains seeds in increasing order in both files, each at most GAP normalised bytes past the
previous one in each file, on diagonals (position in b minus position in a) at most DRIFT apart: an
edit inserts or deletes a few bytes and moves the diagonal by as many, while pieces that merely
recur in both files sit on unrelated diagonals. This is co-linear seed chaining as read aligners
use it (e.g. Li 2018, minimap2), kept to its simplest greedy form. The chain's ends are extended
byte by byte while the normalised bytes agree, and stretches shorter than GUARANTEE normalised
bytes (one seed or two) are dropped. Overlapping stretches are resolved longest first, so no byte
of either file counts twice.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace

import numpy as np

from .passages import Fingerprint, fingerprint

NOISE = 16
"""Seeds are shared k-grams of this many normalised bytes: longer than most words and short
phrases, short enough that an edit every 60 bytes (one word in ten) leaves most of them."""

GUARANTEE = 48
"""Winnowing window: every run of at least this many normalised bytes the files share holds a
seed (Schleimer et al. 2003), so a stretch of edited text keeps one seed per unedited run."""

SEED_REPEATS = 4
"""A k-gram a file holds more often than this is its own repetition, not a seed."""

GAP = 96
"""Consecutive seeds of a stretch lie at most this many normalised bytes apart in each file. In
text both files hold, seeds are at most GUARANTEE - NOISE + 1 = 33 bytes apart (the winnowing
guarantee); an edit removes the seeds overlapping it, about NOISE bytes more, so one edit between
two seeds stays within GAP while a stretch of skeleton shared by files of one template, whose
filled-in parts are longer, breaks."""

DRIFT = 12
"""Consecutive seeds of a stretch lie on diagonals at most this many bytes apart: a word replaced
by a longer or shorter one moves the diagonal by the difference."""


@dataclass(frozen=True)
class Stretch:
    """A stretch shared in order: byte offsets in the original files (end exclusive).

    `length` is the shorter of its two spans in normalised bytes; `seeds` the shared k-grams
    chained into it (many seeds close together: near verbatim; few: heavily edited).
    """

    a_start: int
    a_end: int
    b_start: int
    b_end: int
    length: int
    seeds: int

    def as_json(self) -> dict[str, int]:
        return dict(self.__dict__)


@dataclass(frozen=True)
class Evidence:
    """The stretches two files share (longest first) and the fraction of each they cover.

    Fractions are of normalised bytes. `longest` is the length of the longest stretch (0 if none).
    """

    stretches: tuple[Stretch, ...]
    a_covered: float
    b_covered: float
    a_seeded: float = 0.0
    b_seeded: float = 0.0

    @property
    def longest(self) -> int:
        return self.stretches[0].length if self.stretches else 0

    def covered(self, a_is_smaller: bool) -> float:
        return self.a_covered if a_is_smaller else self.b_covered

    def seeded(self, a_is_smaller: bool) -> float:
        return self.a_seeded if a_is_smaller else self.b_seeded


NO_EVIDENCE = Evidence((), 0.0, 0.0)


def seed_print(data: bytes) -> Fingerprint:
    """The fingerprint `evidence` expects: k = NOISE, guarantee GUARANTEE."""
    return fingerprint(data, NOISE, GUARANTEE)


def _in_stretches(
    fp: Fingerprint, other: Fingerprint, spans: list[tuple[int, int]], ignore: np.ndarray | None
) -> float:
    """Of fp's distinctive fingerprints (not its own repeats, not the set's boilerplate), the
    fraction that lie inside the stretches and are found in the other file too."""
    hashes, counts = np.unique(fp.hashes, return_counts=True)
    keep = counts <= SEED_REPEATS
    if ignore is not None and len(ignore):
        keep &= ~np.isin(hashes, ignore, assume_unique=True)
    distinctive = np.isin(fp.hashes, hashes[keep])
    total = int(distinctive.sum())
    if not total or not spans:
        return 0.0
    inside = np.zeros(len(fp.positions), dtype=bool)
    for start, end in spans:
        inside |= (fp.positions >= start) & (fp.positions + fp.noise <= end)
    shared = np.isin(fp.hashes, other.hashes)
    return int((distinctive & inside & shared).sum()) / total


def _seeds(a: Fingerprint, b: Fingerprint, ignore: np.ndarray | None) -> np.ndarray:
    """(position in a, position in b) of every shared, verified k-gram, sorted by a then b."""
    ha, ca = np.unique(a.hashes, return_counts=True)
    hb, cb = np.unique(b.hashes, return_counts=True)
    shared, ia, ib = np.intersect1d(ha, hb, assume_unique=True, return_indices=True)
    keep = (ca[ia] <= SEED_REPEATS) & (cb[ib] <= SEED_REPEATS)
    if ignore is not None and len(ignore):
        keep &= ~np.isin(shared, ignore, assume_unique=True)
    shared = shared[keep]
    if not len(shared):
        return np.zeros((0, 2), dtype=np.int64)
    in_a = np.isin(a.hashes, shared)
    in_b = np.isin(b.hashes, shared)
    pos_b: dict[int, list[int]] = {}
    for h, p in zip(b.hashes[in_b].tolist(), b.positions[in_b].tolist(), strict=True):
        pos_b.setdefault(h, []).append(p)
    pairs: list[tuple[int, int]] = []
    for h, p in zip(a.hashes[in_a].tolist(), a.positions[in_a].tolist(), strict=True):
        gram = a.norm[p : p + a.noise]
        pairs.extend((p, q) for q in pos_b[h] if b.norm[q : q + a.noise] == gram)
    if not pairs:
        return np.zeros((0, 2), dtype=np.int64)
    out = np.array(pairs, dtype=np.int64)
    return out[np.lexsort((out[:, 1], out[:, 0]))]


def _chains(seeds: np.ndarray) -> list[list[tuple[int, int]]]:
    """Greedy co-linear chains: each seed joins the live chain it continues best, else starts one.

    A chain is live while its last seed lies within GAP before the current one in a; the seed
    continues it when it lies after the last seed in both files, within GAP in b, and on a
    diagonal within DRIFT. Among several, the nearest diagonal wins.
    """
    chains: list[list[tuple[int, int]]] = []
    live: list[int] = []
    for pa, pb in seeds.tolist():
        live = [c for c in live if pa - chains[c][-1][0] <= GAP]
        best, best_drift = -1, DRIFT + 1
        for c in live:
            la, lb = chains[c][-1]
            if pa > la and lb < pb <= lb + GAP:
                drift = abs((pb - pa) - (lb - la))
                if drift < best_drift:
                    best, best_drift = c, drift
        if best >= 0:
            chains[best].append((pa, pb))
        else:
            chains.append([(pa, pb)])
            live.append(len(chains) - 1)
    return chains


def _extend(
    a: bytes, b: bytes, chain: list[tuple[int, int]], noise: int
) -> tuple[int, int, int, int]:
    """The chain's span in normalised bytes, its ends extended while the bytes agree."""
    a0, b0 = chain[0]
    a1, b1 = chain[-1][0] + noise, chain[-1][1] + noise
    while a0 > 0 and b0 > 0 and a[a0 - 1] == b[b0 - 1]:
        a0, b0 = a0 - 1, b0 - 1
    while a1 < len(a) and b1 < len(b) and a[a1] == b[b1]:
        a1, b1 = a1 + 1, b1 + 1
    return a0, a1, b0, b1


def _union(intervals: list[tuple[int, int]]) -> int:
    """Total length of the union of half-open intervals."""
    total, reach = 0, -1
    for start, end in sorted(intervals):
        if end > reach:
            total += end - max(start, reach)
            reach = end
    return total


def _overlap(taken: list[tuple[int, int]], start: int, end: int) -> int:
    return sum(max(0, min(end, e) - max(start, s)) for s, e in taken)


def evidence(
    a: Fingerprint, b: Fingerprint, ignore: np.ndarray | None = None, min_length: int = GUARANTEE
) -> Evidence:
    """The stretches a and b share in order (see the module docstring), and their coverage.

    Stretches are taken longest first; one lying mostly (half or more, in either file) on
    stretches already taken repeats them and is left out. Coverage is the union of the stretches
    taken, so no byte counts twice where their extended ends touch.
    """
    seeds = _seeds(a, b, ignore)
    if not len(seeds):
        return NO_EVIDENCE
    spans = []
    for chain in _chains(seeds):
        a0, a1, b0, b1 = _extend(a.norm, b.norm, chain, a.noise)
        length = min(a1 - a0, b1 - b0)
        if length >= min_length:
            spans.append((length, a0, a1, b0, b1, chain))
    spans.sort(key=lambda span: span[:5], reverse=True)
    taken_a: list[tuple[int, int]] = []
    taken_b: list[tuple[int, int]] = []
    stretches = []
    for length, a0, a1, b0, b1, chain in spans:
        if 2 * _overlap(taken_a, a0, a1) >= a1 - a0 or 2 * _overlap(taken_b, b0, b1) >= b1 - b0:
            continue
        taken_a.append((a0, a1))
        taken_b.append((b0, b1))
        count = len(chain)
        stretches.append(
            Stretch(
                a_start=int(a.offsets[a0]),
                a_end=int(a.offsets[a1 - 1]) + 1,
                b_start=int(b.offsets[b0]),
                b_end=int(b.offsets[b1 - 1]) + 1,
                length=length,
                seeds=count,
            )
        )
    return Evidence(
        stretches=tuple(stretches),
        a_covered=_union(taken_a) / max(len(a.norm), 1),
        b_covered=_union(taken_b) / max(len(b.norm), 1),
        a_seeded=_in_stretches(a, b, taken_a, ignore),
        b_seeded=_in_stretches(b, a, taken_b, ignore),
    )


_NAME = re.compile(rb"[A-Za-z_][A-Za-z0-9_]*")


def names_aside(data: bytes) -> tuple[bytes, np.ndarray, np.ndarray]:
    """data as a parameterised string (Baker, "Parameterized duplication in strings", 1996):
    every name (a word of letters, digits and underscores) is replaced by how many names back
    the same name last occurred, or by `#` where it occurs first, so a copy whose names were
    consistently renamed (identifiers, imports, a module prefix) reads the same as its original.
    Returns the text and, for each of its bytes, the start and end in data of what it stands for.
    """
    pieces: list[bytes] = []
    spans: list[tuple[int, int, int]] = []  # (start, end, length written) of each piece
    last: dict[bytes, int] = {}
    position = 0
    for count, match in enumerate(_NAME.finditer(data)):
        name = match.group()
        back = count - last[name] if name in last else 0
        last[name] = count
        code = b"#" if not back else b"@" + bytes([0x80 + min(back, 127)])
        pieces += [data[position : match.start()], code]
        spans += [(position, match.start(), match.start() - position)]
        spans += [(match.start(), match.end(), len(code))]
        position = match.end()
    pieces.append(data[position:])
    spans.append((position, len(data), len(data) - position))
    return b"".join(pieces), *_piece_maps(np.array(spans, dtype=np.int64).reshape(-1, 3))


def pattern_print(text: bytes) -> Fingerprint:
    """The fingerprint of a `names_aside` text that `evidence` expects: `seed_print`'s, keeping
    only the k-grams that hold a name met before (a back-reference code). A renamed copy is
    recognised by the pattern in which its names recur; a stretch of names each met for the
    first time carries no such pattern: two generated tables of distinct names (one constant per
    line, numbered in order) read alike with names aside though nothing was copied."""
    found = seed_print(text)
    norm = np.frombuffer(found.norm, dtype=np.uint8)
    starts = (norm[:-1] == ord("@")) & (norm[1:] >= 0x80)  # a code's first byte
    code = np.zeros(len(norm) + 1, dtype=np.int64)  # code[i]: codes starting before i
    code[1 : len(starts) + 1] = np.cumsum(starts)
    code[len(starts) + 1 :] = code[len(starts)]
    # a k-gram at p holds a code whose two bytes both lie in it: one starting in [p, p + k - 2]
    keep = code[found.positions + found.noise - 1] > code[found.positions]
    return replace(found, hashes=found.hashes[keep], positions=found.positions[keep])


def _piece_maps(spans: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per written byte, the start and end of what it stands for: a byte of text copied as it
    was stands for itself, a name's code for the whole name. `spans` holds (start, end, length
    written) per piece; pieces alternate text, code, text, ..., text."""
    start, end, written = spans[:, 0], spans[:, 1], spans[:, 2]
    is_code = np.zeros(len(spans), dtype=bool)
    is_code[1::2] = True
    piece = np.repeat(np.arange(len(spans)), written)
    within = np.arange(int(written.sum())) - np.repeat(np.cumsum(written) - written, written)
    starts = start[piece] + np.where(is_code[piece], 0, within)
    ends = np.where(is_code[piece], end[piece], starts + 1)
    return starts, ends


def remapped(
    found: Evidence, a_map: tuple[np.ndarray, np.ndarray], b_map: tuple[np.ndarray, np.ndarray]
) -> Evidence:
    """`found` (measured on `names_aside` texts) with its stretches in the original files."""

    def span(bounds: tuple[np.ndarray, np.ndarray], start: int, end: int) -> tuple[int, int]:
        return int(bounds[0][start]), int(bounds[1][end - 1])

    stretches = []
    for s in found.stretches:
        a_start, a_end = span(a_map, s.a_start, s.a_end)
        b_start, b_end = span(b_map, s.b_start, s.b_end)
        stretches.append(Stretch(a_start, a_end, b_start, b_end, s.length, s.seeds))
    return Evidence(
        tuple(stretches), found.a_covered, found.b_covered, found.a_seeded, found.b_seeded
    )

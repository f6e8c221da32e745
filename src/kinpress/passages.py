"""Passages two files share verbatim, found by winnowing k-gram hashes.

Compression tells how much two files share, not whether they share it as one copied passage or as
many small common pieces (templates, imports, licence phrases). This module finds the passages
themselves, so a pair can be judged by what it shares word for word.

Normalisation. Every ASCII whitespace byte (space, \\t, \\n, \\r, \\v, \\f) is removed, so
re-wrapped lines, CRLF against LF, tabs against spaces and re-indentation do not break a
passage. Each normalised byte remembers its offset in the original file, and passages are
reported in original offsets (a passage never starts or ends on whitespace).

Fingerprints: winnowing (Schleimer, Wilkerson & Aiken, "Winnowing: local algorithms for document
fingerprinting", SIGMOD 2003). Every k-gram (k = `noise` normalised bytes) is hashed; in every
window of w = t - k + 1 consecutive k-gram hashes (t = `guarantee`) the minimal hash is selected,
ties broken to the rightmost, each position recorded once. Its guarantee: every passage of at
least t normalised bytes shared by two documents contains a whole window of k-grams in both, and
the choice in a window depends on the window's bytes alone, so both select the same k-gram at the
same place in the passage: a seed on the passage's own diagonal; nothing shorter than k is ever
matched. About 2 / (w + 1) of the positions are selected in varied text. The paper's "robust"
variant, which keeps the previous window's choice among equal hashes, is not used: its choice
depends on bytes before the window, so two copies of a passage with a repeated k-gram can select
different occurrences of it, which shares the hash but not the place. The price is density in
runs of one repeated k-gram (``=====``, ``NNNN``, ``ATATAT``): one position in every period of
the run is selected.

Hashing: a polynomial hash in uint64 arithmetic (wrapping modulo 2^64) of random 64-bit values per
byte, h(s) = sum_j T[s_j] P^j, computed for all positions at once from prefix sums
S_i = sum_{j<i} T[x_j] P^j as (S_{i+k} - S_i) P^{-i} (P odd, so invertible modulo 2^64); the
stored k-gram hash is this value mixed by the splitmix64 finaliser (a bijection). Winnowing orders
k-grams by the upper 32 bits of the mixed hash. The windows' minima are computed by doubling
(log2 w vectorised passes).

Matching (`shared_passages`): seeds are pairs of selected positions whose hash occurs in both
files. Each seed is first extended by direct byte comparison, only as far as min_length needs
(at least the window): seeds that cannot reach min_length are dropped, and seeds on one diagonal
whose agreement reaches the next seed are chained into one stretch, so a long copy (about
2 n / w seeds) is extended once. A chain is then extended from its ends to the full, maximal
stretch: directly up to 256 bytes, beyond that by galloping and bisection on substring hashes
from the same prefix sums (about 2 log2 L vectorised passes for length L, all chains at once).
A one-to-one set is chosen greedily, longest first: a candidate overlapping (in either file)
passages already taken is cut to its free parts, re-queued if still long enough; every accepted
passage is checked on the bytes (a hash collision is cut to its truly equal parts).

Limits. A hash occurring so often in both files that it would give more than `HEAVY_PAIRS`
seeds (a template k-gram on every line of two logs, a long run, a two-letter alphabet) is paired
again on longer keys: the k-gram with the c = (t - k) // 2 bytes before it, and with the c bytes
after it; every passage of at least t bytes holds its seed with c bytes on one side at least,
so the guarantee stands. Only keys still that frequent (a k-gram and its context repeated
hundreds of times in both files) pair each occurrence on the more frequent side with the
2 `BAND` + 1 occurrences of about the same rank (scaled) on the other: copies are still found
whole (their other seeds, and the aligned ranks, carry them), but a passage seeded only by such
a key may be missed. Boilerplate shared by many files is better removed with `ignore` (see
`common_hashes`). Memory: the offsets take 8 bytes per normalised byte, fingerprints 16 bytes per
selected position (about 2 / (w + 1) of them, all of a long run), and matching builds 8-byte
prefix sums of both files when needed: files up to ~100 MB are practical.
"""

from __future__ import annotations

import hashlib
import heapq
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

NOISE = 24
"""k: k-gram length in normalised bytes. Without whitespace 24 bytes are four or five words, an
identifier with its call, or a log template's fixed words: longer than the words and short
phrases any two texts of one language share, so most seeds are worth extending (over all 780
pairs of 40 unrelated Rosetta solutions in Python, in Ruby or in Common Lisp, no seed of k = 24
extends to even 24 bytes; at k = 16 some do)."""

GUARANTEE = 64
"""t: every shared normalised passage of at least t bytes is found (window w = t - k + 1 = 41,
about 5 % of the positions selected). 64 normalised bytes are about one line of code or a dozen
words. Measured on the open datasets (normalised bytes): unrelated Rosetta solutions in one
language share passages of up to 57 (Java) to 129 (C, two sorts with one test harness); lines
1-500 of two Loghub systems at most 46; lines 1-500 and 1001-1500 of one system 70 to 171
(Android: 530, one stack trace repeated), and their passages of at least t cover 2 to 51 % of
the first chunk (HDFS 12 %; 30 % at k, t = 16, 48 and 3 % at 32, 96). So t = 64 finds every
passage of a line or more, while a verdict of copying should ask for longer passages or more
coverage than this chance sharing within one kind of file."""

HEAVY_PAIRS = 4096
"""A hash giving more seeds than this (occurrences in a times in b) is paired again by context."""

BAND = 4
"""Occurrences of a heavy hash on the rarer side paired with each one on the other: 2 BAND + 1."""

_MASK32 = np.uint64(0xFFFFFFFF)
_TABLE = np.frombuffer(hashlib.shake_256(b"kinpress passages table").digest(2048), dtype="<u8")
_TABLE = _TABLE.astype(np.uint64)
_P = int.from_bytes(hashlib.shake_256(b"kinpress passages base").digest(8), "little") | 1
_P_INV = 1
for _ in range(7):  # Newton's iteration doubles the correct low bits: 1 -> 128
    _P_INV = (_P_INV * (2 - _P * _P_INV)) % (1 << 64)
_CACHE_LIMIT = 1 << 21
_BLOCK = 1 << 22
"""Bytes compared at once, in blocks of seeds, when extending directly."""
_NEAR = 256
"""Passages are extended by direct comparison up to this many bytes, by hashes beyond."""
_FEW = 1 << 16
"""Up to this many bytes to compare, they are gathered one by one rather than as windows."""
_powers_cache: tuple[np.ndarray, np.ndarray] = (np.ones(1, np.uint64), np.ones(1, np.uint64))
_WHITESPACE = np.zeros(256, dtype=bool)
_WHITESPACE[[9, 10, 11, 12, 13, 32]] = True


@dataclass(frozen=True)
class Fingerprint:
    """One file's normalised text, where each normalised byte came from, and its winnowed hashes.

    norm: the file with every ASCII whitespace byte removed; offsets: int64, the original offset
    of each normalised byte; hashes: uint64, the selected k-gram hashes (may repeat); positions:
    int64, the start (in norm) of each selected k-gram, ascending; size: the original length;
    noise and guarantee: the k and t it was made with (fingerprints compare only at equal ones).
    """

    norm: bytes
    offsets: np.ndarray
    hashes: np.ndarray
    positions: np.ndarray
    size: int
    noise: int = NOISE
    guarantee: int = GUARANTEE


@dataclass(frozen=True)
class Passage:
    """A stretch shared verbatim after normalisation: offsets in the ORIGINAL files (end exclusive).

    length is the number of normalised bytes matched.
    """

    a_start: int
    a_end: int
    b_start: int
    b_end: int
    length: int

    def as_json(self) -> dict[str, int]:
        return {
            "a_start": self.a_start,
            "a_end": self.a_end,
            "b_start": self.b_start,
            "b_end": self.b_end,
            "length": self.length,
        }


def normalise(data: bytes) -> tuple[bytes, np.ndarray]:
    """data without ASCII whitespace, and the original offset (int64) of every byte kept."""
    array = np.frombuffer(data, dtype=np.uint8)
    offsets = np.flatnonzero(~_WHITESPACE[array]).astype(np.int64)
    return array[offsets].tobytes(), offsets


def _powers(n: int) -> tuple[np.ndarray, np.ndarray]:
    """P^0 .. P^(n-1) and P^0 .. P^-(n-1) modulo 2^64 (cached up to _CACHE_LIMIT entries)."""
    global _powers_cache
    if len(_powers_cache[0]) >= n:
        return _powers_cache[0][:n], _powers_cache[1][:n]
    size = max(n, min(2 * len(_powers_cache[0]), _CACHE_LIMIT))
    made = []
    for base in (_P, _P_INV):
        values = np.empty(size, dtype=np.uint64)
        values[0] = 1
        values[1:] = np.cumprod(np.full(size - 1, base, dtype=np.uint64))
        made.append(values)
    if size <= _CACHE_LIMIT:
        _powers_cache = (made[0], made[1])
    return made[0][:n], made[1][:n]


def prefix_hashes(norm: bytes) -> tuple[np.ndarray, np.ndarray]:
    """S (length n + 1, S_i = sum_{j<i} T[x_j] P^j) and the inverse powers P^-i (length n + 1).

    The hash of norm[i : i + L] is (S[i + L] - S[i]) * inverse[i] (uint64, wrapping).
    """
    n = len(norm)
    powers, inverse = _powers(n + 1)
    prefix = np.zeros(n + 1, dtype=np.uint64)
    np.cumsum(_TABLE[np.frombuffer(norm, dtype=np.uint8)] * powers[:n], out=prefix[1:])
    return prefix, inverse


def _mix(values: np.ndarray) -> np.ndarray:
    """The splitmix64 finaliser, a bijection of uint64 that spreads every bit over all bits."""
    values = values ^ (values >> np.uint64(30))
    values = values * np.uint64(0xBF58476D1CE4E5B9)
    values = values ^ (values >> np.uint64(27))
    values = values * np.uint64(0x94D049BB133111EB)
    return np.asarray(values ^ (values >> np.uint64(31)))


def kgram_hashes(norm: bytes, noise: int) -> np.ndarray:
    """The mixed hash of every `noise`-byte substring of norm (empty when norm is shorter)."""
    n = len(norm)
    if n < noise:
        return np.zeros(0, dtype=np.uint64)
    prefix, inverse = prefix_hashes(norm)
    return _mix((prefix[noise:] - prefix[: n - noise + 1]) * inverse[: n - noise + 1])


def _window_minima(keys: np.ndarray, width: int) -> np.ndarray:
    """min(keys[i : i + width]) for every window, by doubling: log2(width) vectorised passes."""
    span, current = 1, keys
    while 2 * span <= width:
        current = np.minimum(current[:-span], current[span:])
        span *= 2
    count = len(keys) - width + 1
    return np.asarray(np.minimum(current[:count], current[width - span : width - span + count]))


def winnow(hashes: np.ndarray, window: int) -> np.ndarray:
    """Positions selected by winnowing k-gram hashes in windows of `window`, ascending.

    In each window the rightmost minimal hash (hashes ordered by their upper 32 bits), each
    position once; a sequence shorter than a window is one window.
    """
    count = len(hashes)
    if count == 0:
        return np.zeros(0, dtype=np.int64)
    width = min(window, count)
    values = hashes >> np.uint64(32)
    index = np.arange(count, dtype=np.uint64)
    minima = _window_minima((values << np.uint64(32)) | (_MASK32 - index), width)
    picks = (_MASK32 - (minima & _MASK32)).astype(np.int64)
    return picks[np.concatenate(([True], picks[1:] != picks[:-1]))]


def fingerprint(data: bytes, noise: int = NOISE, guarantee: int = GUARANTEE) -> Fingerprint:
    """Normalise data and winnow its k-gram hashes (k = noise, window guarantee - noise + 1).

    Input shorter than `noise` normalised bytes has no hashes. Raises ValueError unless
    1 <= noise <= guarantee.
    """
    if not 1 <= noise <= guarantee:
        raise ValueError(f"need 1 <= noise <= guarantee, got {noise} and {guarantee}")
    if len(data) >= 1 << 32:
        raise ValueError(f"input of {len(data)} bytes is too large (at most 4 GiB)")
    norm, offsets = normalise(data)
    hashes = kgram_hashes(norm, noise)
    positions = winnow(hashes, guarantee - noise + 1)
    return Fingerprint(
        norm=norm,
        offsets=offsets,
        hashes=hashes[positions],
        positions=positions,
        size=len(data),
        noise=noise,
        guarantee=guarantee,
    )


_Index = tuple[np.ndarray, np.ndarray]


def _index(keys: np.ndarray, positions: np.ndarray) -> _Index:
    """(keys sorted, positions in that order)."""
    order = np.argsort(keys, kind="stable")
    return keys[order], positions[order]


def _banded(first: np.ndarray, second: np.ndarray) -> _Index:
    """Each occurrence on the more frequent side with the 2 BAND + 1 of about its rank (scaled)
    on the other."""
    swap = len(first) < len(second)
    many, few = (second, first) if swap else (first, second)
    rank = np.arange(len(many)) * len(few) // len(many)
    partner = rank[:, None] + np.arange(-BAND, BAND + 1)[None, :]
    valid = (partner >= 0) & (partner < len(few))
    pairs = (np.broadcast_to(many[:, None], partner.shape)[valid], few[partner[valid]])
    return (pairs[1], pairs[0]) if swap else pairs


def _pairs(
    a_index: _Index, b_index: _Index, keys: np.ndarray, band: bool
) -> tuple[_Index, np.ndarray]:
    """Pairs (position in a, position in b) of equal keys, and the heavy keys.

    A key with na occurrences in a and nb in b gives all na * nb pairs; when that exceeds
    HEAVY_PAIRS it is heavy, and gives rank-banded pairs when `band`, none otherwise.
    """
    (a_sorted, a_pos), (b_sorted, b_pos) = a_index, b_index
    a_lo, a_hi = np.searchsorted(a_sorted, keys), np.searchsorted(a_sorted, keys, "right")
    b_lo, b_hi = np.searchsorted(b_sorted, keys), np.searchsorted(b_sorted, keys, "right")
    na, nb = a_hi - a_lo, b_hi - b_lo
    light = na * nb <= HEAVY_PAIRS
    sizes = (na * nb)[light]
    group = np.repeat(np.arange(len(sizes)), sizes)
    local = np.arange(int(sizes.sum())) - np.repeat(np.cumsum(sizes) - sizes, sizes)
    width = nb[light][group]
    seeds_a = [a_pos[a_lo[light][group] + local // width]]
    seeds_b = [b_pos[b_lo[light][group] + local % width]]
    heavy = np.flatnonzero(~light)
    for g in heavy if band else ():
        pair_a, pair_b = _banded(a_pos[a_lo[g] : a_hi[g]], b_pos[b_lo[g] : b_hi[g]])
        seeds_a.append(pair_a)
        seeds_b.append(pair_b)
    return (np.concatenate(seeds_a), np.concatenate(seeds_b)), keys[heavy]


def _context_keys(side: _Side, fp: Fingerprint, chosen: np.ndarray, leftward: bool) -> _Index:
    """Keys of selected k-grams joined with the c = (t - k) // 2 bytes before (or after) them,
    and their positions; k-grams with fewer than c bytes there are left out."""
    context = (fp.guarantee - fp.noise) // 2
    positions, hashes = fp.positions[chosen], fp.hashes[chosen]
    if leftward:
        valid = positions >= context
        starts = positions[valid] - context
    else:
        valid = positions + fp.noise + context <= len(fp.norm)
        starts = positions[valid] + fp.noise
    around = side.hash(starts, np.full(len(starts), context, dtype=np.int64))
    return _mix(hashes[valid] * np.uint64(_P) + around), positions[valid]


def _seeds(
    a: Fingerprint, b: Fingerprint, sides: tuple[_Side, _Side], common: np.ndarray
) -> _Index:
    """Seed pairs (position in a, position in b) for the hashes in `common`.

    A hash with more than HEAVY_PAIRS pairs is paired again on longer keys: the k-gram with the
    c = (t - k) // 2 bytes before it, and with the c bytes after it. A shared passage of at least t
    bytes holds its seed's k-gram with at least t - k bytes around it, so at least c on one side:
    its seed is among these pairs. Keys that are still heavy are paired by rank (see `_banded`).
    """
    index_a, index_b = _index(a.hashes, a.positions), _index(b.hashes, b.positions)
    found, heavy = _pairs(index_a, index_b, common, band=False)
    seeds = [found]
    if len(heavy):
        in_a, in_b = np.isin(a.hashes, heavy), np.isin(b.hashes, heavy)
        for leftward in (True, False):
            keys_a = _context_keys(sides[0], a, in_a, leftward)
            keys_b = _context_keys(sides[1], b, in_b, leftward)
            both = np.intersect1d(keys_a[0], keys_b[0])
            seeds.append(_pairs(_index(*keys_a), _index(*keys_b), both, band=True)[0])
    return np.concatenate([s[0] for s in seeds]), np.concatenate([s[1] for s in seeds])


class _Side:
    """One file in matching: its normalised bytes as an array, and (when first needed) its
    prefix sums and inverse powers for substring hashes."""

    def __init__(self, norm: bytes) -> None:
        self.data = np.frombuffer(norm, dtype=np.uint8)
        self._norm = norm
        self._prefix: tuple[np.ndarray, np.ndarray] | None = None
        self._padded: tuple[np.ndarray, int] = (self.data, 0)

    def padded(self, width: int) -> tuple[np.ndarray, int]:
        """The bytes with at least `width` zero bytes before and after, and that padding."""
        if self._padded[1] < width:
            pad = np.zeros(width, dtype=np.uint8)
            self._padded = (np.concatenate((pad, self.data, pad)), width)
        return self._padded

    def windows(self, width: int) -> tuple[np.ndarray, int]:
        """Every `width` bytes of the padded data (see `padded`), and the padding."""
        padded, pad = self.padded(width)
        return np.lib.stride_tricks.sliding_window_view(padded, width), pad

    def hash(self, start: np.ndarray, length: np.ndarray) -> np.ndarray:
        """Hashes of norm[start : start + length], elementwise."""
        if self._prefix is None:
            self._prefix = prefix_hashes(self._norm)
        prefix, inverse = self._prefix
        return np.asarray((prefix[start + length] - prefix[start]) * inverse[start])


def _agree(
    a: _Side,
    b: _Side,
    ends: tuple[np.ndarray, np.ndarray],
    low: np.ndarray,
    high: np.ndarray,
    leftward: bool,
) -> np.ndarray:
    """Largest L in [low, high] with L bytes agreeing next to `ends` (in a, in b).

    The stretches run right from the ends (a[e : e + L]), or left of them when `leftward`
    (a[e - L : e]); low must be known to agree. Galloping, then bisection, on substring hashes:
    lengths low + 64, then doubling, are tried until one disagrees, then the last gap is halved,
    so a stretch of length L takes about 2 log2(L) passes; all seeds advance together.
    """
    low, high = low.copy(), high.copy()
    galloping = np.ones(len(low), dtype=bool)
    while True:
        active = np.flatnonzero(low < high)
        if not len(active):
            return low
        lo, hi, gallop = low[active], high[active], galloping[active]
        mid = np.where(gallop, np.minimum(hi, np.maximum(2 * lo, lo + 64)), (lo + hi + 1) // 2)
        start_a, start_b = ends[0][active], ends[1][active]
        if leftward:
            start_a, start_b = start_a - mid, start_b - mid
        same = a.hash(start_a, mid) == b.hash(start_b, mid)
        low[active] = np.where(same, mid, lo)
        high[active] = np.where(same, hi, mid - 1)
        galloping[active] = gallop & same


def _near(
    a: _Side, b: _Side, ends: tuple[np.ndarray, np.ndarray], cap: int, leftward: bool
) -> np.ndarray:
    """How many bytes (at most cap) agree next to `ends`, right of them or left when `leftward`.

    Compared directly, cap bytes a seed, in blocks of seeds. The files are padded at both ends,
    so the caller must clip the result to the room the files leave.
    """
    out = np.empty(len(ends[0]), dtype=np.int64)
    if len(out) * cap <= _FEW:  # few seeds: gather the bytes, no windows over the files
        steps = -np.arange(1, cap + 1) if leftward else np.arange(cap)
        (padded_a, pad), (padded_b, _) = a.padded(cap), b.padded(cap)
        differ = padded_a[ends[0][:, None] + (steps + pad)]
        differ = differ != padded_b[ends[1][:, None] + (steps + pad)]
        return np.where(differ.any(axis=1), differ.argmax(axis=1), cap)
    (windows_a, pad), (windows_b, _) = a.windows(cap), b.windows(cap)
    shift = pad - cap if leftward else pad
    rows = max(1, _BLOCK // cap)
    for first in range(0, len(out), rows):
        block = slice(first, first + rows)
        differ = windows_a[ends[0][block] + shift] != windows_b[ends[1][block] + shift]
        if leftward:
            differ = differ[:, ::-1]
        out[block] = np.where(differ.any(axis=1), differ.argmax(axis=1), cap)
    return out


def _reach(
    a: _Side, b: _Side, ends: tuple[np.ndarray, np.ndarray], room: np.ndarray, leftward: bool
) -> np.ndarray:
    """All the bytes agreeing next to `ends` (at most room): compared directly up to _NEAR
    bytes, found by galloping on substring hashes (see `_agree`) beyond."""
    near = np.minimum(_near(a, b, ends, _NEAR, leftward), room)
    beyond = np.flatnonzero(near >= _NEAR)
    if len(beyond):
        ends = (ends[0][beyond], ends[1][beyond])
        near[beyond] = _agree(a, b, ends, near[beyond], room[beyond], leftward)
    return np.asarray(near)


def _chains(seed_a: np.ndarray, seed_b: np.ndarray, reach: np.ndarray) -> np.ndarray:
    """Labels of seeds that lie in one agreeing stretch: same diagonal, each reaching the next.

    Seeds must come sorted by diagonal, then by position; reach is where each one's known
    agreement ends in a. A seed reaching the next seed's start shares its maximal passage.
    """
    diagonal = seed_b - seed_a
    linked = (diagonal[1:] == diagonal[:-1]) & (reach[:-1] >= seed_a[1:])
    return np.concatenate(([0], np.cumsum(~linked)))


def _extend(
    a: _Side, b: _Side, seeds: _Index, fp: Fingerprint, min_length: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Maximal agreeing stretches (start in a, start in b, length) around k-gram seeds.

    First both sides of each seed are searched only up to max(min_length, w) - k bytes (k, w of
    fp): seeds that cannot reach min_length are dropped, and seeds on one diagonal whose
    agreement reaches the next seed (selected positions are at most w apart) are chained. Only
    a chain's first seed is then searched left to the start of the files, and its last one right
    to the end, so a long copy is extended once, not once per seed.
    """
    noise = fp.noise
    cap = max(max(min_length, fp.guarantee - noise + 1) - noise, 1)
    order = np.lexsort((seeds[0], seeds[1] - seeds[0]))
    seed_a, seed_b = seeds[0][order], seeds[1][order]
    room_left = np.minimum(seed_a, seed_b)
    room_right = np.minimum(len(a.data) - seed_a, len(b.data) - seed_b) - noise
    left = np.minimum(_near(a, b, (seed_a, seed_b), cap, leftward=True), room_left)
    ends = (seed_a + noise, seed_b + noise)
    right = np.minimum(_near(a, b, ends, cap, leftward=False), room_right)
    chain = _chains(seed_a, seed_b, seed_a + noise + right)
    first = np.flatnonzero(np.concatenate(([True], chain[1:] != chain[:-1])))
    last = np.concatenate((first[1:] - 1, [len(chain) - 1]))
    span = seed_a[last] + noise + right[last] - seed_a[first] + left[first]
    live = span >= min_length
    first, last = first[live], last[live]
    left = _reach(a, b, (seed_a[first], seed_b[first]), room_left[first], leftward=True)
    ends = (seed_a[last] + noise, seed_b[last] + noise)
    right = _reach(a, b, ends, room_right[last], leftward=False)
    start_a = seed_a[first] - left
    return start_a, seed_b[first] - left, seed_a[last] + noise + right - start_a


def _runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Starts and ends (exclusive) of the runs of True in mask."""
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
    return edges[::2], edges[1::2]


def _free_runs(
    texts: tuple[bytes, bytes],
    taken: tuple[np.ndarray, np.ndarray],
    candidate: tuple[int, int, int],
    min_length: int,
) -> list[tuple[int, int, int]]:
    """The parts of a candidate free in both files and agreeing on the bytes, if long enough."""
    start_a, start_b, length = candidate
    usable = ~taken[0][start_a : start_a + length].astype(bool)
    usable &= ~taken[1][start_b : start_b + length].astype(bool)
    a_bytes = np.frombuffer(texts[0], dtype=np.uint8, count=length, offset=start_a)
    usable &= a_bytes == np.frombuffer(texts[1], dtype=np.uint8, count=length, offset=start_b)
    starts, ends = _runs(usable)
    return [
        (int(start - end), start_a + int(start), start_b + int(start))
        for start, end in zip(starts, ends, strict=True)
        if end - start >= min_length
    ]


def _select(
    texts: tuple[bytes, bytes], found: tuple[np.ndarray, np.ndarray, np.ndarray], min_length: int
) -> list[tuple[int, int, int]]:
    """A one-to-one set of (start in a, start in b, length), greedily longest first.

    Candidates are merged when equal (seeds of one passage). A candidate wholly inside passages
    already taken (in a or in b) is dropped; one partly overlapping them, or whose bytes disagree
    somewhere (a hash collision), is cut to its free, agreeing runs, re-queued when at least
    min_length long. Ties go to the earlier position in a, then in b.
    """
    text_a, text_b = texts
    starts_a, starts_b, lengths = found
    _, first = np.unique(starts_a * (len(text_b) + 1) + starts_b, return_index=True)
    first = first[np.lexsort((starts_b[first], starts_a[first], -lengths[first]))]
    columns = (-lengths[first]).tolist(), starts_a[first].tolist(), starts_b[first].tolist()
    pending = list(zip(*columns, strict=True))
    requeued: list[tuple[int, int, int]] = []
    taken_a, taken_b = bytearray(len(text_a)), bytearray(len(text_b))
    views = (np.frombuffer(taken_a, dtype=np.uint8), np.frombuffer(taken_b, dtype=np.uint8))
    chosen, k = [], 0
    while k < len(pending) or requeued:
        if requeued and (k == len(pending) or requeued[0] < pending[k]):
            negative, start_a, start_b = heapq.heappop(requeued)
        else:
            negative, start_a, start_b = pending[k]
            k += 1
        end_a, end_b = start_a - negative, start_b - negative
        if taken_a.find(0, start_a, end_a) < 0 or taken_b.find(0, start_b, end_b) < 0:
            continue
        if (
            taken_a.find(1, start_a, end_a) < 0
            and taken_b.find(1, start_b, end_b) < 0
            and text_a[start_a:end_a] == text_b[start_b:end_b]
        ):
            taken_a[start_a:end_a] = taken_b[start_b:end_b] = b"\x01" * -negative
            chosen.append((start_a, start_b, -negative))
            continue
        for item in _free_runs(texts, views, (start_a, start_b, -negative), min_length):
            heapq.heappush(requeued, item)
    return chosen


def shared_passages(
    a: Fingerprint, b: Fingerprint, *, min_length: int = GUARANTEE, ignore: np.ndarray | None = None
) -> list[Passage]:
    """Maximal passages of at least min_length normalised bytes shared by a and b, longest first.

    Seeds are the fingerprints whose hash is in both (and not in `ignore`, a sorted uint64 array
    of hashes to disregard as seeds, e.g. boilerplate common to many files, see `common_hashes`).
    Each seed is extended left and right while the normalised bytes agree, and seeds of one
    passage merged; a one-to-one set is kept, greedily longest first and non-overlapping in a and
    in b (a passage of a that matches several places of b is counted once), and checked on the
    bytes. Ties in length are ordered by position in a, then in b.

    Every shared passage of at least a.guarantee bytes is found unless a longer passage found
    overlaps it in a or in b, or its only seeds are hashes in `ignore` (or, see the module, a
    k-gram that with its context repeats hundreds of times in both files); passages shorter
    than the guarantee are found only when a selected fingerprint falls in them. Raises
    ValueError for fingerprints made with other k or t, or min_length < 1.
    """
    if (a.noise, a.guarantee) != (b.noise, b.guarantee):
        raise ValueError(
            f"fingerprints made with other settings: k={a.noise}, t={a.guarantee} against"
            f" k={b.noise}, t={b.guarantee}"
        )
    if min_length < 1:
        raise ValueError(f"min_length must be at least 1, got {min_length}")
    common = np.intersect1d(a.hashes, b.hashes)
    if ignore is not None and len(ignore) and len(common):
        at = np.minimum(np.searchsorted(ignore, common), len(ignore) - 1)
        common = common[ignore[at] != common]
    if not len(common):
        return []
    side_a, side_b = _Side(a.norm), _Side(b.norm)
    seeds = _seeds(a, b, (side_a, side_b), common)
    if not len(seeds[0]):
        return []
    found = _extend(side_a, side_b, seeds, a, min_length)
    chosen = _select((a.norm, b.norm), found, min_length)
    passages = [
        Passage(
            a_start=int(a.offsets[start_a]),
            a_end=int(a.offsets[start_a + length - 1]) + 1,
            b_start=int(b.offsets[start_b]),
            b_end=int(b.offsets[start_b + length - 1]) + 1,
            length=length,
        )
        for start_a, start_b, length in chosen
    ]
    return sorted(passages, key=lambda p: (-p.length, p.a_start, p.b_start))


def coverage(passages: Sequence[Passage], fp: Fingerprint, side: str) -> float:
    """Fraction of fp's normalised bytes covered by the passages on side 'a' or 'b'.

    Overlapping passages are counted once (union of intervals); 0.0 for an empty text.
    """
    if side not in ("a", "b"):
        raise ValueError(f"side must be 'a' or 'b', got {side!r}")
    if not len(fp.norm) or not passages:
        return 0.0
    spans = np.array(
        [(p.a_start, p.a_end) if side == "a" else (p.b_start, p.b_end) for p in passages],
        dtype=np.int64,
    )
    starts = np.searchsorted(fp.offsets, spans[:, 0])
    ends = np.searchsorted(fp.offsets, spans[:, 1])
    depth = np.zeros(len(fp.norm) + 1, dtype=np.int64)
    np.add.at(depth, starts, 1)
    np.add.at(depth, ends, -1)
    return float(np.count_nonzero(np.cumsum(depth[:-1]) > 0) / len(fp.norm))


def common_hashes(fingerprints: Sequence[Fingerprint], min_files: int) -> np.ndarray:
    """Sorted unique hashes that occur in at least min_files of the fingerprints (each file once).

    Given as `ignore` to `shared_passages`, they stop boilerplate shared by many files (licence
    headers, templates) from seeding passages; a passage of two files that runs through such
    boilerplate is still found from its other seeds.
    """
    return common_among([np.unique(fp.hashes) for fp in fingerprints], min_files)


def common_among(distinct: Sequence[np.ndarray], min_files: int) -> np.ndarray:
    """Sorted hashes found in at least min_files of the arrays, each array holding one file's
    distinct hashes (see `common_hashes`; this form needs only the hashes, not whole
    fingerprints): `boilerplate_among` with every file its own group."""
    return boilerplate_among(distinct, min_files)


def common_kgrams(
    norms: Sequence[bytes],
    selected: Sequence[np.ndarray],
    noise: int,
    min_files: int,
    groups: np.ndarray | None = None,
    min_groups: int = 1,
) -> np.ndarray:
    """Sorted hashes selected (winnowed) in some file that occur as k-grams, selected or not,
    in at least min_files of the normalised texts `norms` (`selected[i]`: file i's selected
    hashes) that are in files of at least `min_groups` groups of near copies (`groups`, see
    `boilerplate_among`). Winnowing picks a k-gram by the window around it, so a k-gram at the
    edge of a licence block is picked in some of the files holding it and not in others:
    counting picks (`common_among`) undercounts it, and it seeded stretches that then ran
    through the whole block."""
    if not selected:
        return np.zeros(0, dtype=np.uint64)
    union = np.unique(np.concatenate(selected))
    held = []
    for norm in norms:
        present = np.unique(kgram_hashes(norm, noise))
        at = np.searchsorted(union, present)
        inside = at < len(union)
        at, present = at[inside], present[inside]
        held.append(present[union[at] == present])
    return boilerplate_among(held, min_files, groups, min_groups)


def boilerplate_among(
    held: Sequence[np.ndarray],
    min_files: int,
    groups: np.ndarray | None = None,
    min_groups: int = 1,
) -> np.ndarray:
    """Sorted hashes in at least min_files of the arrays (`held[i]`: file i's distinct hashes)
    and, where `groups` gives each file's group of near copies (see
    kinpress.derived.prefilter.near_copy_groups), in files of at least `min_groups` groups:
    boilerplate is a passage of many files that are not copies of one another. A licence heads
    files of other content, each its own group; a file copied into a dozen places (one module
    vendored into every service of a repository) is one group, and counted by files its
    content was boilerplate and its copies were never proposed nor found."""
    held = list(held)
    sizes = np.array([len(h) for h in held], dtype=np.int64)
    if not sizes.sum():
        return np.zeros(0, dtype=np.uint64)
    values = np.concatenate(held).astype(np.uint64)
    found, counts = np.unique(values, return_counts=True)
    common = found[counts >= min_files]
    if groups is None or min_groups <= 1 or not len(common):
        return common
    owner = np.repeat(np.asarray(groups, dtype=np.int64), sizes)
    keep = np.isin(values, common)
    values, owner = values[keep], owner[keep]
    order = np.lexsort((owner, values))  # each (hash, group) once
    values, owner = values[order], owner[order]
    first = np.ones(len(values), dtype=bool)
    first[1:] = (values[1:] != values[:-1]) | (owner[1:] != owner[:-1])
    found, counts = np.unique(values[first], return_counts=True)
    return found[counts >= min_groups]

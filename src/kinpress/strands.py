"""DNA records deposited on the other strand: a cheap check before a one-strand comparison.

A record submitted as the reverse complement of its relatives shares almost nothing with them
as given, so with ``strand="one"`` every distance to it is near 1, as for an unrelated record.
The check compares shared k-mers (k = 12 by default) of record pairs both ways: x against y, and
x against the reverse complement of y. A pair is *flipped* when the sampled k-mers x shares
with revcomp(y) are at least ``MIN_SHARE`` (5 %) of the smaller sample and ``RATIO`` (4) times
those it shares with y as given (*same strand* the other way round). A record flipped against
more of the records it was compared with than on the same strand is named (with two such
records in a set, each is flipped against every other record but the two of them; a record in
a flipped pair is compared with a few more partners, so sparse sampling does not name its
forward partner too). No compression: k-mer sets, sampled by a hash so every record keeps the
same ones (Broder 1997's modulo sampling).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from .formats import json_ready
from .items import Item, is_nucleotide, reverse_complement
from .measure import MeasurementWarning

DEFAULT_K = 12
DEFAULT_PAIRS = 400
DEFAULT_PROBES = 8
DEFAULT_SAMPLE_BYTES = 256 << 10
MIN_SHARE = 0.05
RATIO = 4.0
_KEEP_ONE_IN = 4
_CODES = np.full(256, 4, dtype=np.uint64)
for _value, _letters in enumerate((b"Aa", b"Cc", b"Gg", b"TtUu")):
    _CODES[np.frombuffer(_letters, dtype=np.uint8)] = _value


def kmer_sample(letters: bytes, k: int = DEFAULT_K) -> np.ndarray:
    """The distinct k-mers of ``letters`` (2 bits a base; windows with other letters skipped)
    whose mixed value is 0 modulo ``_KEEP_ONE_IN``, sorted: the same k-mers are kept in every
    record, so counts of shared ones compare (Broder 1997)."""
    if not 0 < k <= 32:
        raise ValueError(f"k must be 1 to 32 (two bits a base in 64), got {k}")
    codes = _CODES[np.frombuffer(letters, dtype=np.uint8)]
    if len(codes) < k:
        return np.empty(0, dtype=np.uint64)
    count = len(codes) - k + 1
    values = np.zeros(count, dtype=np.uint64)
    valid = np.ones(count, dtype=bool)
    for j in range(k):  # k passes over the record rather than a k-column window array
        window = codes[j : j + count]
        valid &= window != 4
        values = (values << np.uint64(2)) | (window & np.uint64(3))
    values = values[valid]
    mixed = (values * np.uint64(0x9E3779B97F4A7C15)) >> np.uint64(40)
    return np.unique(values[mixed % np.uint64(_KEEP_ONE_IN) == 0])


@dataclass(frozen=True)
class FlippedPair:
    """Two records, and the shares of the first's sampled k-mers found in the second as given
    and in its reverse complement."""

    first: str
    second: str
    share_as_given: float
    share_reversed: float


@dataclass(frozen=True)
class StrandCheck:
    """What the check found: the records that look deposited on the other strand (``flipped``),
    the pairs behind them, and how many pairs were compared."""

    flipped: tuple[str, ...]
    pairs: tuple[FlippedPair, ...]
    pairs_checked: int
    k: int

    def as_json(self) -> dict[str, object]:
        """``{"flipped", "pairs", "pairs_checked", "k"}``."""
        document: dict[str, object] = json_ready(
            {
                "flipped": self.flipped,
                "pairs": [pair.__dict__ for pair in self.pairs],
                "pairs_checked": self.pairs_checked,
                "k": self.k,
            }
        )
        return document

    @property
    def message(self) -> str:
        """The warning: the records named, what was seen, what to do."""
        names = ", ".join(self.flipped)
        return (
            f"{names}: share far more {self.k}-mers with other records' reverse complements than"
            " as given (deposited on the other strand?); compared on one strand they look"
            " unrelated to the rest: use --strand both"
        )


def check_strands(
    items: Sequence[Item],
    *,
    k: int = DEFAULT_K,
    pairs: int = DEFAULT_PAIRS,
    probes: int = DEFAULT_PROBES,
    sample_bytes: int = DEFAULT_SAMPLE_BYTES,
    seed: int = 0,
) -> StrandCheck:
    """Compare up to ``pairs`` record pairs (all of them when few, else drawn by ``seed``) of the
    nucleotide items, each cut to ``sample_bytes``, as given and reverse-complemented (module
    rules); other items are left out. A record in a flipped pair is then compared with up to
    ``probes`` more partners drawn by the seed, so that when pairs are sampled sparsely the
    forward record of a flipped pair is not named with its reversed partner."""
    dna = [item for item in items if item.data and (item.nucleotide or is_nucleotide(item.data))]
    n = len(dna)
    if n < 2:
        return StrandCheck((), (), 0, k)
    rng = np.random.default_rng(seed)
    if n * (n - 1) // 2 <= pairs:
        chosen = list(combinations(range(n), 2))
    else:
        first = rng.integers(0, n, pairs)
        second = (first + rng.integers(1, n, pairs)) % n
        chosen = sorted({(min(a, b), max(a, b)) for a, b in zip(first, second, strict=True)})
    sketches: dict[int, tuple[np.ndarray, np.ndarray]] = {}

    def sketch(index: int) -> tuple[np.ndarray, np.ndarray]:
        if index not in sketches:
            letters = dna[index].data[:sample_bytes]
            sketches[index] = (kmer_sample(letters, k), kmer_sample(reverse_complement(letters), k))
        return sketches[index]

    flips = np.zeros(n, dtype=int)
    sames = np.zeros(n, dtype=int)
    found: list[tuple[int, int, FlippedPair]] = []
    compared: set[tuple[int, int]] = set()

    def compare(a: int, b: int) -> None:
        compared.add((min(a, b), max(a, b)))
        (forward_a, _), (forward_b, reverse_b) = sketch(a), sketch(b)
        smaller = max(min(len(forward_a), len(forward_b)), 1)
        given = len(np.intersect1d(forward_a, forward_b, assume_unique=True)) / smaller
        flipped = len(np.intersect1d(forward_a, reverse_b, assume_unique=True)) / smaller
        if flipped >= MIN_SHARE and flipped >= RATIO * given:
            flips[[a, b]] += 1
            found.append((a, b, FlippedPair(dna[a].name, dna[b].name, given, flipped)))
        elif given >= MIN_SHARE and given >= RATIO * flipped:
            sames[[a, b]] += 1

    for a, b in chosen:
        compare(a, b)
    probed: set[int] = set()
    # Probes find flipped pairs too, whose records need probing in turn.
    while waiting := sorted({i for first, second, _ in found for i in (first, second)} - probed):
        for suspect in waiting:
            probed.add(suspect)
            partners = [b for b in rng.permutation(n).tolist() if b != suspect]
            for b in partners[:probes]:
                if (min(suspect, b), max(suspect, b)) not in compared:
                    compare(suspect, b)
    named = {i for i in range(n) if flips[i] > sames[i]}
    flagged = tuple(dna[i].name for i in sorted(named))
    kept = tuple(pair for a, b, pair in found if a in named or b in named)
    return StrandCheck(flagged, kept, len(compared), k)


def warn_flipped_strands(items: Sequence[Item], **options: int) -> StrandCheck:
    """:func:`check_strands`, with a :class:`MeasurementWarning` naming the flipped records and
    suggesting ``--strand both`` when there are any; the check is returned either way."""
    check = check_strands(items, **options)
    if check.flipped:
        warnings.warn(check.message, MeasurementWarning, stacklevel=2)
    return check

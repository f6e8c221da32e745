"""Calibration controls: inputs with known answers, generated from a reported seed.

From the user's items where given, else from synthetic word text: identity (x, x); independence
(x against uniform random bytes, and against random symbols of x's alphabet, ACGT for DNA);
composition (x against a random permutation of its own symbols); a mutation ladder (x against
copies with 1 .. 50 % of symbols substituted) and block moves (x cut into 2, 4, 8 blocks put in
another order). The whole items, cut to at most ``normality_bytes``, are the pieces the
normality properties are checked on (:mod:`.measure`).

Beside them, known answers no compressor is told (:func:`known_answers`): digit strings whose
every block of digits is equally frequent yet a short rule makes them (the concatenated positive
integers, Champernowne 1933; the concatenated primes, Copeland & Erdős 1946), and strings a few
lines of code make that look random to every practical compressor (the decimal digits of pi, the
centre column of the rule-30 cellular automaton, Wolfram 1983, a seeded pseudo-random digit
stream). A compressor coding the first kind below log2(10) bits a digit sees their structure;
coding the second at about the random rate is its blind spot: the same as it would for data with
nothing to find.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache
from itertools import pairwise

import numpy as np

from ..items import Item, is_nucleotide

DEFAULT_SEED = 2005
DEFAULT_SAMPLES = 3
DEFAULT_SAMPLE_BYTES = 16 << 10
DEFAULT_NORMALITY_BYTES = 64 << 10
KNOWN_ANSWER_DIGITS = 16 << 10
KNOWN_ANSWER_BITS = 16 << 10
MUTATION_RATES = (0.01, 0.02, 0.05, 0.10, 0.20, 0.50)
BLOCK_COUNTS = (2, 4, 8)

_DNA = b"ACGT"
# Streams of the seed: each control draws from its own, so adding a candidate or a sample does
# not change the others.
_STREAM_SAMPLES, _STREAM_CONTROLS, _STREAM_SWEEP, _STREAM_TEXT = 1, 2, 3, 4
_STREAM_DIGITS = 5


def _rng(seed: int, *stream: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence([seed, *stream]))


def _alphabet(data: bytes, nucleotide: bool) -> bytes:
    """ACGT for DNA (rare ambiguity codes left out), else the distinct bytes of the data."""
    return _DNA if nucleotide else bytes(sorted(set(data)))


def _random_over(rng: np.random.Generator, alphabet: bytes | None, size: int) -> bytes:
    """Independent uniform symbols: bytes when ``alphabet`` is None, else over ``alphabet``."""
    if alphabet is None:
        return rng.bytes(size)
    symbols = np.frombuffer(alphabet, dtype=np.uint8)
    return symbols[rng.integers(0, len(symbols), size)].tobytes()


def _shuffled(rng: np.random.Generator, x: bytes) -> bytes:
    """x's own symbols in random order: the same frequencies, no shared order."""
    return rng.permutation(np.frombuffer(x, dtype=np.uint8)).tobytes()


def _mutated(rng: np.random.Generator, x: bytes, rate: float, alphabet: bytes) -> bytes:
    """x with round(rate·|x|) positions, drawn without replacement, set to a different symbol."""
    array = np.frombuffer(x, dtype=np.uint8).copy()
    count = round(rate * len(array))
    where = rng.choice(len(array), size=count, replace=False)
    symbols = np.frombuffer(alphabet, dtype=np.uint8)
    index = np.full(256, 0, dtype=np.int64)
    index[symbols] = np.arange(len(symbols))
    # A step of 1 .. k-1 along the alphabet never lands on the symbol it replaces.
    step = rng.integers(1, max(len(symbols), 2), count)
    array[where] = symbols[(index[array[where]] + step) % len(symbols)]
    return array.tobytes()


def _blocks_moved(rng: np.random.Generator, x: bytes, blocks: int) -> bytes:
    """x cut into ``blocks`` near-equal blocks put back in a random order other than the first."""
    edges = np.linspace(0, len(x), blocks + 1).astype(int)
    pieces = [x[a:b] for a, b in pairwise(edges.tolist())]
    order = np.arange(blocks)
    while np.array_equal(order, np.arange(blocks)):
        order = rng.permutation(blocks)
    return b"".join(pieces[k] for k in order)


def _word_text(rng: np.random.Generator, size: int, vocabulary: Sequence[bytes]) -> bytes:
    """Text of words drawn with Zipf-like frequencies: structure an ideal compressor can use."""
    weights = 1.0 / np.arange(1, len(vocabulary) + 1)
    picks = rng.choice(len(vocabulary), size=size // 3 + 1, p=weights / weights.sum())
    separators = rng.choice([b" ", b" ", b" ", b"\n"], size=len(picks))
    out = b"".join(vocabulary[k] + bytes(s) for k, s in zip(picks, separators, strict=True))
    return out[:size]


def _vocabulary(rng: np.random.Generator, words: int = 300) -> list[bytes]:
    letters = np.frombuffer(b"abcdefghijklmnopqrstuvwxyz", dtype=np.uint8)
    return [letters[rng.integers(0, 26, rng.integers(2, 10))].tobytes() for _ in range(words)]


# Known answers: made by a short rule, so their Kolmogorov complexity is a few hundred bits


def champernowne_digits(n: int) -> bytes:
    """The first ``n`` digits of 0.123456789101112...: the positive integers written one after
    another (Champernowne 1933, normal in base 10; OEIS A033307)."""
    out, length, k = [], 0, 1
    while length < n:
        text = str(k)
        out.append(text)
        length += len(text)
        k += 1
    return "".join(out)[:n].encode()


def copeland_erdos_digits(n: int) -> bytes:
    """The first ``n`` digits of 0.23571113171923...: the primes written one after another
    (Copeland & Erdős 1946, normal in base 10; OEIS A033308), from a sieve of Eratosthenes."""
    limit = 64
    while True:
        sieve = np.ones(limit, dtype=bool)
        sieve[:2] = False
        for k in range(2, math.isqrt(limit - 1) + 1):
            if sieve[k]:
                sieve[k * k :: k] = False
        text = "".join(str(p) for p in np.flatnonzero(sieve).tolist())
        if len(text) >= n:
            return text[:n].encode()
        limit *= 2


def _decimal(value: int, width: int) -> str:
    """``value`` as exactly ``width`` decimal digits (zero-padded), halved recursively so no
    conversion passes Python's 4,300-digit limit on int-to-str."""
    if width <= 2000:
        return f"{value:0{width}d}"
    low = width // 2
    high, rest = divmod(value, 10**low)
    return _decimal(high, width - low) + _decimal(rest, low)


def _arctan_inverse(x: int, unity: int) -> int:
    """arctan(1/x)·unity by its Taylor series in integers (each term truncated)."""
    total = term = unity // x
    square, k, sign = x * x, 1, -1
    while term:
        term //= square
        k += 2
        total += sign * (term // k)
        sign = -sign
    return total


@lru_cache(maxsize=4)
def pi_digits(n: int) -> bytes:
    """The first ``n`` decimal digits of pi, the 3 first (OEIS A000796), exact.

    Machin's formula pi = 16·arctan(1/5) - 4·arctan(1/239) in integer fixed point with 10 guard
    digits (each truncated term errs by under one unit in the last place; a few thousand terms
    stay far inside the guard). A digit-by-digit spigot (Rabinowitz & Wagon 1995; Gibbons 2006)
    gives the same digits but is quadratic in pure Python (10,000 digits took 40 s here), where
    this takes well under a second for 16,384; the tests check both against each other.
    """
    guard = 10
    unity = 10 ** (n - 1 + guard)
    pi = 4 * (4 * _arctan_inverse(5, unity) - _arctan_inverse(239, unity))
    return _decimal(pi // 10**guard, n).encode()


@lru_cache(maxsize=4)
def rule30_centre_bits(n: int) -> tuple[int, ...]:
    """The centre column of the rule-30 cellular automaton from one black cell, ``n`` steps
    (Wolfram 1983; OEIS A051023): each cell becomes left XOR (centre OR right). The row is one
    Python integer, the start cell at bit ``n`` so the pattern never reaches bit 0."""
    row, bits = 1 << n, []
    for _ in range(n):
        bits.append((row >> n) & 1)
        row = (row << 1) ^ (row | (row >> 1))
    return tuple(bits)


def seeded_digits(n: int, seed: int) -> bytes:
    """``n`` uniform decimal digits from NumPy's PCG64 generator, seeded: random-looking, yet the
    seed and a few lines reproduce every one."""
    digits = _rng(seed, _STREAM_DIGITS).integers(0, 10, n, dtype=np.uint8)
    return (digits + ord("0")).tobytes()


@dataclass(frozen=True)
class KnownAnswer:
    """A string a short rule makes, and what a compressor ought to see in it.

    ``symbols`` is how many digits or bits it holds and ``alphabet`` how many values each takes
    (10 digits as ASCII, or 2 for bits packed eight to a byte, first bit highest), so a coder
    that finds nothing spends log2(alphabet) bits a symbol. ``kind`` is ``"simple"`` (normal,
    yet a compressor can find the rule's regularities) or ``"random-looking"`` (no practical
    compressor finds the rule: its blind spot).
    """

    name: str
    kind: str
    source: str
    data: bytes
    symbols: int
    alphabet: int

    @property
    def uniform_bits(self) -> float:
        """log2(alphabet): bits a symbol of a coder that finds nothing."""
        return math.log2(self.alphabet)

    @property
    def order0_bits(self) -> float:
        """The string's own order-0 entropy in bits a symbol: what a coder that only counts
        symbols spends. Below log2(alphabet) on finite prefixes of normal numbers (16,384 digits
        of Copeland & Erdős's hold few even digits: primes end in 1, 3, 7 or 9)."""
        values = np.frombuffer(self.data, dtype=np.uint8)
        if self.alphabet == 2:
            values = np.unpackbits(values)[: self.symbols]
        counts = np.bincount(values)
        shares = counts[counts > 0] / counts.sum()
        return float(-(shares * np.log2(shares)).sum())


def known_answers(
    seed: int = DEFAULT_SEED, digits: int = KNOWN_ANSWER_DIGITS, bits: int = KNOWN_ANSWER_BITS
) -> tuple[KnownAnswer, ...]:
    """The known-answer strings: ``digits`` digits of each decimal one, ``bits`` bits of the
    rule-30 centre column packed into bytes; the seeded stream drawn from ``seed``."""
    packed = np.packbits(np.array(rule30_centre_bits(bits), dtype=np.uint8)).tobytes()
    return (
        KnownAnswer("champernowne", "simple", "Champernowne 1933; OEIS A033307",
                    champernowne_digits(digits), digits, 10),
        KnownAnswer("copeland-erdos", "simple", "Copeland & Erdős 1946; OEIS A033308",
                    copeland_erdos_digits(digits), digits, 10),
        KnownAnswer("pi", "random-looking", "Machin 1706; OEIS A000796",
                    pi_digits(digits), digits, 10),
        KnownAnswer("rule30", "random-looking", "Wolfram 1983; OEIS A051023", packed, bits, 2),
        KnownAnswer("seeded", "random-looking", f"NumPy PCG64, seed {seed}",
                    seeded_digits(digits, seed), digits, 10),
    )  # fmt: skip


@dataclass(frozen=True)
class Controls:
    """The inputs every candidate is measured on, made once so all see the same bytes.

    ``samples`` are pieces of the user's items (or synthetic word text), each with its
    independent, shuffled, mutated and block-moved partners; ``pieces`` are the (cut) items the
    normality properties are checked on; ``sweep_alphabet`` is what the size sweep draws from
    (None: uniform bytes); ``need`` is the size the two largest items make together;
    ``known`` are the known-answer strings (:func:`known_answers`), the same whatever the items.
    """

    seed: int
    samples: tuple[bytes, ...]
    uniform: tuple[bytes, ...]
    alphabet_random: tuple[bytes, ...]
    shuffled: tuple[bytes, ...]
    mutants: tuple[tuple[bytes, ...], ...]  # [rate][sample]
    block_moved: tuple[tuple[bytes, ...], ...]  # [block count][sample]
    pieces: tuple[bytes, ...]
    sweep_alphabet: bytes | None
    need: int | None
    inputs: dict[str, object]
    known: tuple[KnownAnswer, ...] = ()


def _pick_samples(
    items: Sequence[Item], rng: np.random.Generator, samples: int, sample_bytes: int
) -> tuple[list[bytes], list[bytes]]:
    """Up to ``samples`` distinct items, by the seed: a window of each for the controls, and
    the items themselves for the normality checks."""
    distinct = list({item.data: None for item in items if item.data})
    chosen = sorted(rng.choice(len(distinct), size=min(samples, len(distinct)), replace=False))
    windows = []
    for k in chosen:
        data = distinct[k]
        start = int(rng.integers(0, max(len(data) - sample_bytes, 0) + 1))
        windows.append(data[start : start + sample_bytes])
    return windows, [distinct[k] for k in chosen]


def _thirds(data: Sequence[bytes]) -> list[bytes]:
    """Three pieces, for when fewer than three items are given: distributivity needs three."""
    joined = b"".join(data)
    edges = np.linspace(0, len(joined), 4).astype(int)
    return [joined[a:b] for a, b in pairwise(edges.tolist())]


def _describe_inputs(items: Sequence[Item], nucleotide: bool) -> dict[str, object]:
    lengths = sorted((len(item.data) for item in items), reverse=True)
    return {
        "items": len(items),
        "total_bytes": sum(lengths),
        "largest_bytes": lengths[0] if lengths else None,
        "pair_bytes": sum(lengths[:2]) if lengths else None,
        "nucleotide": nucleotide,
    }


def make_controls(
    items: Sequence[Item] | None = None,
    *,
    seed: int = DEFAULT_SEED,
    samples: int = DEFAULT_SAMPLES,
    sample_bytes: int = DEFAULT_SAMPLE_BYTES,
    normality_bytes: int = DEFAULT_NORMALITY_BYTES,
) -> Controls:
    """The controls for ``items`` (their samples, sizes and alphabet), or generic ones.

    Samples are windows of at most ``sample_bytes`` of up to ``samples`` items chosen by the seed;
    normality is checked on those items cut to ``normality_bytes``.
    """
    items = [item for item in items or () if item.data]
    if items:
        nucleotide = all(item.nucleotide or is_nucleotide(item.data) for item in items)
        windows, whole = _pick_samples(items, _rng(seed, _STREAM_SAMPLES), samples, sample_bytes)
        pieces = [data[:normality_bytes] for data in whole]
        sweep_alphabet: bytes | None = _alphabet(b"".join(whole), nucleotide)
        lengths = sorted((len(item.data) for item in items), reverse=True)
        need: int | None = sum(lengths[:2])
    else:
        nucleotide = False
        text_rng = _rng(seed, _STREAM_TEXT)
        vocabulary = _vocabulary(text_rng)
        windows = [_word_text(text_rng, sample_bytes, vocabulary) for _ in range(samples)]
        pieces = [_word_text(text_rng, sample_bytes, vocabulary) for _ in range(3)]
        sweep_alphabet, need = None, None
    if len(pieces) < 3:
        pieces = _thirds(pieces)
    rng = _rng(seed, _STREAM_CONTROLS)
    alphabets = [_alphabet(x, nucleotide) for x in windows]
    return Controls(
        seed=seed,
        samples=tuple(windows),
        uniform=tuple(rng.bytes(len(x)) for x in windows),
        alphabet_random=tuple(
            _random_over(rng, a, len(x)) for x, a in zip(windows, alphabets, strict=True)
        ),
        shuffled=tuple(_shuffled(rng, x) for x in windows),
        mutants=tuple(
            tuple(_mutated(rng, x, rate, a) for x, a in zip(windows, alphabets, strict=True))
            for rate in MUTATION_RATES
        ),
        block_moved=tuple(
            tuple(_blocks_moved(rng, x, blocks) for x in windows) for blocks in BLOCK_COUNTS
        ),
        pieces=tuple(pieces),
        sweep_alphabet=sweep_alphabet,
        need=need,
        inputs={
            **_describe_inputs(items, nucleotide),
            "samples": len(windows),
            "sample_bytes": max((len(x) for x in windows), default=0),
            "normality_bytes": max(len(p) for p in pieces),
        },
        known=known_answers(seed),
    )

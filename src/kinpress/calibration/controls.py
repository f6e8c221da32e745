"""Calibration controls: inputs with known answers, generated from a reported seed.

From the user's items where given, else from synthetic word text: identity (x, x); independence
(x against uniform random bytes, and against random symbols of x's alphabet, ACGT for DNA);
composition (x against a random permutation of its own symbols); a mutation ladder (x against
copies with 1 .. 50 % of symbols substituted) and block moves (x cut into 2, 4, 8 blocks put in
another order). The whole items, cut to at most ``normality_bytes``, are the pieces the
normality properties are checked on (:mod:`.measure`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from itertools import pairwise

import numpy as np

from ..items import Item, is_nucleotide

DEFAULT_SEED = 2005
DEFAULT_SAMPLES = 3
DEFAULT_SAMPLE_BYTES = 16 << 10
DEFAULT_NORMALITY_BYTES = 64 << 10
MUTATION_RATES = (0.01, 0.02, 0.05, 0.10, 0.20, 0.50)
BLOCK_COUNTS = (2, 4, 8)

_DNA = b"ACGT"
# Streams of the seed: each control draws from its own, so adding a candidate or a sample does
# not change the others.
_STREAM_SAMPLES, _STREAM_CONTROLS, _STREAM_SWEEP, _STREAM_TEXT = 1, 2, 3, 4


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


@dataclass(frozen=True)
class Controls:
    """The inputs every candidate is measured on, made once so all see the same bytes.

    ``samples`` are pieces of the user's items (or synthetic word text), each with its
    independent, shuffled, mutated and block-moved partners; ``pieces`` are the (cut) items the
    normality properties are checked on; ``sweep_alphabet`` is what the size sweep draws from
    (None: uniform bytes); ``need`` is the size the two largest items make together.
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
    )

"""Calibration: measure how far each compressor is from an ideal one on controls with known answers.

Every distance here is the project's NCD by concatenation,

    NCD(x, y) = (C(ab) - C(a)) / C(b),   a, b = x, y ordered so that C(a) <= C(b)

(Li et al. 2004; Cilibrasi & Vitányi 2005, "Clustering by compression", IEEE TIT 51(4)). A normal
compressor gives NCD(x, x) ≈ 0 and NCD ≈ 1 for unrelated inputs; real ones fail in known ways:
once x and its partner no longer fit the window or block, identity distances jump towards 1
(Cebrián, Alfonseca & Ortega 2005, "Common pitfalls using the normalized compression distance",
Commun. Inf. Syst. 5(4)), and a coder that only counts symbols cannot tell x from a shuffle of x.

Controls, generated from a reported seed (from the user's items where given, else from synthetic
word text): identity (x, x); independence (x against uniform random bytes, and against random
symbols of x's alphabet, ACGT for DNA); composition (x against a random permutation of its own
symbols); a mutation ladder (x against copies with 1 .. 50 % of symbols substituted) and block
moves (x cut into 2, 4, 8 blocks put in another order); and a size sweep (NCD(x, x) of random data,
over the items' alphabet, for sizes doubling from 1 KiB). On whole items, cut to at most
`normality_bytes`, the four properties of a normal compressor (Cilibrasi & Vitányi 2005) are
checked and their violation rates reported.

Rules (the constants below hold the numbers):

* reliable size: a sweep size s is reliable while NCD(x, x) of random x of s bytes is at most
  ``RELIABLE_NCD`` (0.1) or, for a compressor whose identity bias is never that low (bzip2 sits at
  about 0.2 inside a block), at most ``BIAS_GROWTH`` (2) times its lowest value at smaller sizes,
  never above ``RELIABLE_CEILING`` (0.5); ``reliable_up_to_bytes`` is the largest size before the
  first one that is not. The pair x+x is twice the item: an LZ compressor needs only |x| of window
  (each byte of the copy lies |x| back), a block sorter needs all 2|x| in one block.
* resolution: the smallest ladder rate r at which, on every sample, NCD(x, mutated x) exceeds
  NCD(x, x) by more than ``RESOLUTION_MARGIN`` (0.02), and every larger rate does too.
* normality tolerance: a property counts as violated when it fails by more than
  ``TOLERANCE_BYTES`` (16) plus ``TOLERANCE_FRACTION`` (2 %) of its reference size (C(x) for
  idempotency and monotonicity, the larger of C(xy), C(yx) for symmetry, C(xz) + C(yz) for
  distributivity), which stands in for the paper's "up to O(log n)".
* recommendation: a compressor qualifies when the two largest items together fit its reliable size
  (so does every item and every pair, and each item's own x+x); among those the lowest quality
  score |identity bias| + max(shuffle similarity, 0) + (1 - monotonicity) + resolution (1 when
  none) + mutation distance (mean NCD to copies with 1-10 % substituted) wins; scores within
  ``QUALITY_TIE`` (0.02) of the best count as equal and the fastest of them is taken. The
  reliable-size test is conservative: an LZ match from y back into x may lie up to |x| + |y|
  back, while a block sorter needs only |x| + |y| <= its block, twice the item size the sweep
  reports. :func:`choose_compressor` also drops those whose whole job would
  overrun a time budget (estimated from the measured throughput).
"""

from __future__ import annotations

import math
import os
import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from itertools import combinations, pairwise, permutations

import numpy as np
from scipy import stats

from .cache import SizeCache
from .compressors import Compressor, compressor
from .engine import Engine
from .items import Item, is_nucleotide

__all__ = [
    "BLOCK_COUNTS",
    "DEFAULT_BUDGET_SECONDS",
    "DEFAULT_CANDIDATES",
    "DEFAULT_MAX_BYTES",
    "DEFAULT_SEED",
    "MUTATION_RATES",
    "RELIABLE_NCD",
    "REPORT_KEYS",
    "CalibrationReport",
    "CompressorCalibration",
    "Controls",
    "Normality",
    "SizeSweep",
    "calibrate",
    "calibrate_compressor",
    "choose_compressor",
    "estimate_job_seconds",
    "make_controls",
    "normality_violations",
    "size_sweep",
]

DEFAULT_CANDIDATES = (
    "zstd:level=3",
    "zstd:level=19",
    "zstd:level=19,window=27",
    "lzma:level=9",
    "brotli:level=11",
    "bz2:level=9",
    "zlib:level=9",
    "ppmd:order=16",
)
DEFAULT_SEED = 2005
DEFAULT_MAX_BYTES = 64 << 20
DEFAULT_SAMPLES = 3
DEFAULT_SAMPLE_BYTES = 16 << 10
DEFAULT_NORMALITY_BYTES = 64 << 10
DEFAULT_SWEEP_SECONDS = 5.0
DEFAULT_BUDGET_SECONDS = 600.0
REPORT_KEYS = ("seed", "inputs", "compressors", "recommended", "reasons")

MUTATION_RATES = (0.01, 0.02, 0.05, 0.10, 0.20, 0.50)
BLOCK_COUNTS = (2, 4, 8)
SWEEP_START = 1 << 10
RELIABLE_NCD = 0.1
RELIABLE_CEILING = 0.5
BIAS_GROWTH = 2.0
RESOLUTION_MARGIN = 0.02
TOLERANCE_BYTES = 16
TOLERANCE_FRACTION = 0.02
QUALITY_TIE = 0.02
RELATED_RATE = 0.10

_DNA = b"ACGT"
# Streams of the seed: each control draws from its own, so adding a candidate or a sample does
# not change the others.
_STREAM_SAMPLES, _STREAM_CONTROLS, _STREAM_SWEEP, _STREAM_TEXT = 1, 2, 3, 4


# Measuring


class _Meter:
    """A compressor that adds up the bytes it compressed and the seconds it took."""

    def __init__(self, comp: Compressor) -> None:
        self.comp = comp
        self.bytes = 0
        self.seconds = 0.0

    def size(self, data: bytes) -> int:
        started = time.perf_counter()
        result = self.comp.size(data)
        self.seconds += time.perf_counter() - started
        self.bytes += len(data)
        return result

    @property
    def mb_per_second(self) -> float:
        return self.bytes / 1e6 / max(self.seconds, 1e-9)


def _ncd(meter: _Meter, x: bytes, y: bytes, cx: int | None = None) -> float:
    """NCD(x, y) = (C(ab) - C(a)) / C(b), the smaller-C input first, as the matrix computes it."""
    cx = meter.size(x) if cx is None else cx
    cy = meter.size(y)
    (a, ca), (b, cb) = sorted(((x, cx), (y, cy)), key=lambda pair: pair[1])
    return (meter.size(a + b) - ca) / max(cb, 1)


def _identity(meter: _Meter, x: bytes) -> float:
    """NCD(x, x) = (C(xx) - C(x)) / C(x)."""
    cx = meter.size(x)
    return (meter.size(x + x) - cx) / max(cx, 1)


# Generating controls


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


# The size sweep


@dataclass(frozen=True)
class SizeSweep:
    """NCD(x, x) of random data by size, and the largest size still reliable (module rules).

    ``capped`` is true when the sweep stopped at its size or time cap rather than at a break, so
    ``reliable_up_to_bytes`` is a lower bound.
    """

    points: tuple[tuple[int, float], ...]
    reliable_up_to_bytes: int
    capped: bool


def _sweep_sizes(max_bytes: int, need: int | None) -> list[int]:
    """1 KiB doubling up to ``max_bytes``; with a ``need``, the steps below it and it itself."""
    top = min(max_bytes, need) if need else max_bytes
    sizes = [SWEEP_START << k for k in range(64) if SWEEP_START << k < top]
    return [*sizes, top] if top >= SWEEP_START else sizes


def _limit(floor: float | None, first: float) -> float:
    """The largest identity distance still counted reliable, given the lowest one so far."""
    lowest = first if floor is None else floor
    return min(RELIABLE_CEILING, max(RELIABLE_NCD, BIAS_GROWTH * lowest))


def size_sweep(
    comp: Compressor | str,
    *,
    seed: int = DEFAULT_SEED,
    max_bytes: int = DEFAULT_MAX_BYTES,
    alphabet: bytes | None = None,
    need: int | None = None,
    seconds: float = DEFAULT_SWEEP_SECONDS,
) -> SizeSweep:
    """Identity distance NCD(x, x) of random x (uniform bytes, or over ``alphabet``) for sizes
    doubling from 1 KiB until it breaks down (module rules) or reaches ``max_bytes``.

    With ``need`` (the size of the largest pair of a job) the sweep ends at that size instead.
    A step is skipped when, at twice the previous step's time, it would take the sweep past
    ``seconds`` (brotli at quality 11 and PPMd compress random data at a few MB/s): then the
    sweep is capped and its reliable size a lower bound. Below ``need`` that means a compressor
    too slow to show, within the calibration's time, that it holds the job's largest pair; with
    a few large items, sweeping every candidate up to the pair would cost more than the job.
    """
    meter = _Meter(compressor(comp))
    points: list[tuple[int, float]] = []
    reliable, floor, previous = 0, None, 0.0
    for size in _sweep_sizes(max_bytes, need):
        if points and meter.seconds + 2 * previous > seconds:
            return SizeSweep(tuple(points), reliable, capped=True)
        started = meter.seconds
        x = _random_over(_rng(seed, _STREAM_SWEEP, size), alphabet, size)
        distance = _identity(meter, x)
        previous = meter.seconds - started
        points.append((size, distance))
        if distance > _limit(floor, distance):
            return SizeSweep(tuple(points), reliable, capped=False)
        reliable = size
        floor = distance if floor is None else min(floor, distance)
    return SizeSweep(tuple(points), reliable, capped=True)


# Normality


@dataclass(frozen=True)
class Normality:
    """Violation rates (0..1) of the properties of a normal compressor (Cilibrasi & Vitányi
    2005, section II): idempotency C(xx) ≈ C(x), monotonicity C(xy) >= C(x), symmetry
    C(xy) ≈ C(yx), distributivity C(xy) + C(z) <= C(xz) + C(yz), each within the module's
    tolerance; ``checks`` counts the cases behind each rate."""

    idempotency: float
    monotonicity: float
    symmetry: float
    distributivity: float
    checks: int

    def as_json(self) -> dict[str, float | int]:
        return dict(self.__dict__)


def _tolerance(reference: float) -> float:
    return TOLERANCE_BYTES + TOLERANCE_FRACTION * reference


def _rate(failures: Sequence[bool]) -> float:
    return sum(failures) / len(failures) if failures else 0.0


def normality_violations(comp: Compressor | str, pieces: Sequence[bytes]) -> Normality:
    """Check the four properties on ``pieces``: every piece, every ordered pair, and every
    triple with each member as z."""
    return _normality(_Meter(compressor(comp)), pieces)


def _normality(meter: _Meter, pieces: Sequence[bytes]) -> Normality:
    single = [meter.size(p) for p in pieces]
    pair = {
        (i, j): meter.size(pieces[i] + pieces[j]) for i, j in permutations(range(len(pieces)), 2)
    }
    idempotent = [
        abs(meter.size(p + p) - c) > _tolerance(c) for p, c in zip(pieces, single, strict=True)
    ]
    monotone = [single[i] - size > _tolerance(single[i]) for (i, _), size in pair.items()]
    symmetric = [
        abs(pair[i, j] - pair[j, i]) > _tolerance(max(pair[i, j], pair[j, i]))
        for i, j in combinations(range(len(pieces)), 2)
    ]
    distributive = [
        pair[x, y] + single[z] - (pair[x, z] + pair[y, z]) > _tolerance(pair[x, z] + pair[y, z])
        for x, y, z in permutations(range(len(pieces)), 3)
        if x < y
    ]
    return Normality(
        idempotency=_rate(idempotent),
        monotonicity=_rate(monotone),
        symmetry=_rate(symmetric),
        distributivity=_rate(distributive),
        checks=len(idempotent) + len(monotone) + len(symmetric) + len(distributive),
    )


# One compressor


@dataclass(frozen=True)
class CompressorCalibration:
    """What the controls measured for one compressor; see the module docstring for the rules.

    identity_bias: mean NCD(x, x), ideal 0. independence: mean NCD of x against independent random
    strings, ideal 1 (above 1 is overshoot). shuffle_similarity: 1 - mean NCD(x, shuffled x),
    ideal 0. mutation_monotonicity: Spearman correlation of the mean distance with the mutation
    rate (0 included), ideal 1. mutation_resolution: smallest rate told from identity, or None.
    reliable_up_to_bytes: item size whose x+x is still compressed as a repeat (a lower bound when
    ``reliable_capped``). throughput_mb_s: MB (10^6 bytes) per second compressing the inputs'
    samples and pairs of them (each sample after another), one thread.
    """

    spec: str
    window_bytes: int | None
    identity_bias: float
    independence: float
    shuffle_similarity: float
    mutation_monotonicity: float
    mutation_resolution: float | None
    reliable_up_to_bytes: int
    reliable_capped: bool
    overhead_bytes: int
    throughput_mb_s: float
    normality: Normality
    size_sweep: tuple[tuple[int, float], ...]
    mutation_ladder: tuple[tuple[float, float], ...]
    block_moves: tuple[tuple[int, float], ...]
    seconds: float

    @property
    def mutation_distance(self) -> float:
        """Mean NCD of x to its copies with 1-10 % of symbols substituted: how much of the shared
        content the compressor finds between close relatives. C only ever overestimates the
        Kolmogorov complexity, so at equal rates the lower distance is nearer the ideal (the
        independence and shuffle controls guard against a compressor low on everything)."""
        near = [d for rate, d in self.mutation_ladder if 0 < rate <= RELATED_RATE]
        return float(np.mean(near)) if near else 1.0

    @property
    def quality(self) -> float:
        """|identity bias| + max(shuffle similarity, 0) + (1 - monotonicity) + resolution (1 if
        none) + mutation distance: lower is better. A negative shuffle similarity is overshoot
        (NCD above 1), which ``independence`` reports, not similarity."""
        resolution = 1.0 if self.mutation_resolution is None else self.mutation_resolution
        return (
            abs(self.identity_bias)
            + max(self.shuffle_similarity, 0.0)
            + (1.0 - self.mutation_monotonicity)
            + resolution
            + self.mutation_distance
        )

    def as_json(self) -> dict[str, object]:
        return {
            "spec": self.spec,
            "window_bytes": self.window_bytes,
            "identity_bias": self.identity_bias,
            "independence": self.independence,
            "shuffle_similarity": self.shuffle_similarity,
            "mutation_monotonicity": self.mutation_monotonicity,
            "mutation_resolution": self.mutation_resolution,
            "mutation_distance": self.mutation_distance,
            "reliable_up_to_bytes": self.reliable_up_to_bytes,
            "reliable_capped": self.reliable_capped,
            "overhead_bytes": self.overhead_bytes,
            "throughput_mb_s": self.throughput_mb_s,
            "normality": self.normality.as_json(),
            "quality": self.quality,
            "size_sweep": [list(point) for point in self.size_sweep],
            "mutation_ladder": [list(point) for point in self.mutation_ladder],
            "block_moves": [list(point) for point in self.block_moves],
            "seconds": self.seconds,
        }


def _spearman(rates: Sequence[float], distances: Sequence[float]) -> float:
    """Spearman's rho; 0 when the distances do not vary (no rank information)."""
    if len(set(distances)) < 2:
        return 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rho = float(stats.spearmanr(rates, distances).statistic)
    return 0.0 if math.isnan(rho) else rho


def _resolution(identity: Sequence[float], ladder: Sequence[Sequence[float]]) -> float | None:
    """Smallest rate whose distance, and every larger rate's, beats identity on every sample."""
    resolved = [
        all(d - i > RESOLUTION_MARGIN for d, i in zip(row, identity, strict=True)) for row in ladder
    ]
    for k, rate in enumerate(MUTATION_RATES):
        if all(resolved[k:]):
            return rate
    return None


def _mean(values: Sequence[float]) -> float:
    return float(np.mean(values)) if values else float("nan")


def calibrate_compressor(
    comp: Compressor | str,
    controls: Controls,
    *,
    max_bytes: int = DEFAULT_MAX_BYTES,
    sweep_seconds: float = DEFAULT_SWEEP_SECONDS,
) -> CompressorCalibration:
    """Measure one compressor on ``controls`` (see :func:`make_controls`) and run its size sweep."""
    started = time.perf_counter()
    comp = compressor(comp)
    meter = _Meter(comp)
    # The job's own unit of work, timed apart from the controls (random bytes and repeats
    # compress faster than real pairs): the samples, and each sample after a different one.
    job = _Meter(comp)
    c_samples = [job.size(x) for x in controls.samples]
    for k, x in enumerate(controls.samples):
        partner = controls.samples[(k + 1) % len(controls.samples)]
        job.size(partner + x if partner is not x else x[::-1] + x)
    identity = [
        (meter.size(x + x) - cx) / max(cx, 1)
        for x, cx in zip(controls.samples, c_samples, strict=True)
    ]

    def against(partners: Sequence[bytes]) -> list[float]:
        pairs = zip(controls.samples, partners, c_samples, strict=True)
        return [_ncd(meter, x, y, cx) for x, y, cx in pairs]

    independent = against(controls.uniform) + against(controls.alphabet_random)
    shuffled = against(controls.shuffled)
    ladder = [against(mutants) for mutants in controls.mutants]
    moved = [against(copies) for copies in controls.block_moved]
    normality = _normality(meter, controls.pieces)
    sweep = size_sweep(
        comp,
        seed=controls.seed,
        max_bytes=max_bytes,
        alphabet=controls.sweep_alphabet,
        need=controls.need,
        seconds=sweep_seconds,
    )
    means = [_mean(identity), *(_mean(row) for row in ladder)]
    return CompressorCalibration(
        spec=comp.spec,
        window_bytes=comp.window_bytes,
        identity_bias=_mean(identity),
        independence=_mean(independent),
        shuffle_similarity=1.0 - _mean(shuffled),
        mutation_monotonicity=_spearman([0.0, *MUTATION_RATES], means),
        mutation_resolution=_resolution(identity, ladder),
        reliable_up_to_bytes=sweep.reliable_up_to_bytes,
        reliable_capped=sweep.capped,
        overhead_bytes=comp.overhead_bytes,
        throughput_mb_s=job.mb_per_second,
        normality=normality,
        size_sweep=sweep.points,
        mutation_ladder=tuple(zip((0.0, *MUTATION_RATES), means, strict=True)),
        block_moves=tuple((k, _mean(row)) for k, row in zip(BLOCK_COUNTS, moved, strict=True)),
        seconds=time.perf_counter() - started,
    )


# The report and the choice


@dataclass(frozen=True)
class CalibrationReport:
    """Calibration of several compressors on one set of inputs, and which one to use."""

    seed: int
    inputs: dict[str, object]
    compressors: tuple[CompressorCalibration, ...]
    recommended: str | None
    reasons: tuple[str, ...]

    def as_json(self) -> dict[str, object]:
        """``{"seed", "inputs", "compressors": [{"spec", ...}], "recommended", "reasons"}``."""
        return {
            "seed": self.seed,
            "inputs": dict(self.inputs),
            "compressors": [result.as_json() for result in self.compressors],
            "recommended": self.recommended,
            "reasons": list(self.reasons),
        }

    def result(self, spec: str) -> CompressorCalibration:
        """The calibration of the compressor with this spec (any spelling)."""
        canonical = compressor(spec).spec
        for result in self.compressors:
            if result.spec == canonical:
                return result
        raise KeyError(spec)


def _size(n: float) -> str:
    """Bytes in round decimal units, as the reasons print them."""
    for unit, scale in (("MB", 1e6), ("KB", 1e3)):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{n:.0f} B"


def _binary(n: int) -> str:
    for unit, shift in (("GiB", 30), ("MiB", 20), ("KiB", 10)):
        if n >= 1 << shift and n % (1 << shift) == 0:
            return f"{n >> shift} {unit}"
    return _size(n)


def holds(result: CompressorCalibration, need: int | None) -> bool:
    """Whether a compressor holds a pair of `need` bytes: by its measured reliable size, or, when
    its sweep was stopped for time before reaching `need`, by its documented window (checked
    against the standards in the tests); a measured break always wins over the documentation."""
    if need is None or result.reliable_up_to_bytes >= need:
        return True
    return (
        result.reliable_capped and result.window_bytes is not None and result.window_bytes >= need
    )


def _too_small(result: CompressorCalibration, largest: int, need: int) -> str:
    window = f", documented window {_binary(result.window_bytes)}" if result.window_bytes else ""
    bound = "at least " if result.reliable_capped else ""
    return (
        f"{result.spec}: passed over: items up to {_size(largest)} (the two largest together "
        f"{_size(need)}) exceed its reliable size, {bound}{_size(result.reliable_up_to_bytes)}"
        f"{window}"
    )


def _summary(result: CompressorCalibration) -> str:
    resolution = (
        "no mutation rate told from identity"
        if result.mutation_resolution is None
        else f"tells {result.mutation_resolution:.0%} mutations from identity"
    )
    return (
        f"identity bias {result.identity_bias:.3f}, shuffle similarity "
        f"{result.shuffle_similarity:.3f}, monotonicity {result.mutation_monotonicity:.2f}, "
        f"{resolution}, distance {result.mutation_distance:.3f} to copies with 1-10 % "
        f"substituted, {result.throughput_mb_s:.3g} MB/s"
    )


def _tied(result: CompressorCalibration, fitting: Sequence[CompressorCalibration]) -> bool:
    """Whether ``result`` scores within QUALITY_TIE of the best of ``fitting``."""
    return result.quality <= min(r.quality for r in fitting) + QUALITY_TIE


def _best(fitting: Sequence[CompressorCalibration]) -> CompressorCalibration:
    """Lowest quality score; among scores within QUALITY_TIE of it, the fastest."""
    return max((r for r in fitting if _tied(r, fitting)), key=lambda r: r.throughput_mb_s)


@dataclass(frozen=True)
class _Need:
    """The sizes a job asks of a compressor: its largest item and its two largest together."""

    largest: int
    pair: int


def _need(inputs: dict[str, object]) -> _Need | None:
    largest, pair = inputs.get("largest_bytes"), inputs.get("pair_bytes")
    if isinstance(largest, int) and isinstance(pair, int):
        return _Need(largest, pair)
    return None


def _recommend(
    results: Sequence[CompressorCalibration],
    need: _Need | None,
    slow: Callable[[CompressorCalibration], str | None] = lambda _: None,
) -> tuple[str | None, tuple[str, ...]]:
    """The recommended spec and why, in plain words; ``slow`` says why a candidate is too slow
    for the job (None: quick enough)."""
    pair = need.pair if need else None
    fitting = [r for r in results if holds(r, pair)]
    verdicts = {r.spec: slow(r) for r in fitting}
    quick = [r for r in fitting if verdicts[r.spec] is None]
    reasons = [_too_small(r, need.largest, need.pair) for r in results if need and r not in fitting]
    reasons += [f"{r.spec}: passed over: {verdicts[r.spec]}" for r in fitting if r not in quick]
    if not quick:
        return _fallback(results, pair, fitting, reasons)
    best = _best(quick)
    scope = f"reaches the largest pair ({_size(pair)})" if pair else "no inputs to size"
    lead = f"{best.spec}: chosen: {scope}; {_summary(best)}; quality score {best.quality:.3f}"
    for other in quick:
        if other is best:
            continue
        if _tied(other, quick):
            why = f"as good (quality score {other.quality:.3f}) but slower"
        else:
            why = f"lower quality (score {other.quality:.3f} against {best.quality:.3f})"
        reasons.append(f"{other.spec}: passed over: {why}; {_summary(other)}")
    return best.spec, (lead, *reasons)


def _fallback(
    results: Sequence[CompressorCalibration],
    pair: int | None,
    fitting: Sequence[CompressorCalibration],
    reasons: list[str],
) -> tuple[str | None, tuple[str, ...]]:
    """Nothing both fits and is quick: the fastest that fits, else the one reaching furthest."""
    if fitting:
        best = max(fitting, key=lambda r: r.throughput_mb_s)
        lead = f"{best.spec}: chosen although over the time budget: it is the fastest that fits"
    elif results:
        best = max(results, key=lambda r: (r.reliable_up_to_bytes, -r.quality))
        lead = (
            f"{best.spec}: chosen although no candidate reaches the largest pair "
            f"({_size(pair or 0)}): it reaches furthest, {_size(best.reliable_up_to_bytes)}; "
            "distances of larger pairs drift towards 1, so consider splitting the items"
        )
    else:
        return None, tuple(reasons)
    return best.spec, (lead, *reasons)


def calibrate(
    items: Sequence[Item] | None = None,
    candidates: Sequence[str | Compressor] | None = None,
    *,
    seed: int = DEFAULT_SEED,
    max_bytes: int = DEFAULT_MAX_BYTES,
    samples: int = DEFAULT_SAMPLES,
    sample_bytes: int = DEFAULT_SAMPLE_BYTES,
    normality_bytes: int = DEFAULT_NORMALITY_BYTES,
    sweep_seconds: float = DEFAULT_SWEEP_SECONDS,
) -> CalibrationReport:
    """Calibrate ``candidates`` (default :data:`DEFAULT_CANDIDATES`) on controls made from
    ``items`` (or generic ones) and recommend one by quality (module rules), speed breaking ties.

    >>> report = calibrate(load_items(["genomes/"]))  # doctest: +SKIP
    >>> report.recommended, report.as_json()["reasons"]  # doctest: +SKIP
    """
    controls = make_controls(
        items,
        seed=seed,
        samples=samples,
        sample_bytes=sample_bytes,
        normality_bytes=normality_bytes,
    )
    results = tuple(
        calibrate_compressor(spec, controls, max_bytes=max_bytes, sweep_seconds=sweep_seconds)
        for spec in candidates or DEFAULT_CANDIDATES
    )
    inputs = {**controls.inputs, "max_bytes": max_bytes}
    recommended, reasons = _recommend(results, _need(inputs))
    return CalibrationReport(seed, inputs, results, recommended, reasons)


def _cores() -> int:
    return len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1


def estimate_job_seconds(
    result: CompressorCalibration,
    lengths: Sequence[int],
    jobs: int | None = None,
    strand: str = "one",
) -> float:
    """Wall time of a whole matrix by concatenation at the calibrated throughput.

    n items of T bytes in all: every item once, its x+x once, and the n(n-1)/2 pairs, each of two
    items: T + (n + 1)·T bytes, the pairs twice with ``strand="both"`` (each y is also tried
    reverse-complemented), spread over ``jobs`` cores (default: all).
    """
    n, total = len(lengths), sum(lengths)
    work = total + (n + 1) * total * (2 if strand == "both" else 1)
    return work / (result.throughput_mb_s * 1e6) / (jobs or _cores())


def _estimate(seconds: float) -> str:
    return "under 1 s" if seconds < 1 else f"about {_duration(seconds)}"


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def choose_compressor(
    items: Sequence[Item],
    *,
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    candidates: Sequence[str | Compressor] | None = None,
    seed: int = DEFAULT_SEED,
    jobs: int | None = None,
    strand: str = "one",
    max_bytes: int = DEFAULT_MAX_BYTES,
) -> tuple[str, CalibrationReport]:
    """The compressor for ``-c auto``: the best one (as :func:`calibrate` ranks them) among those
    whose estimated whole-job time (:func:`estimate_job_seconds`) is within ``budget_seconds``;
    quality is worth paying for only inside the budget. If none fits the budget, the fastest
    reliable one; the reasons say which and why.
    """
    report = calibrate(items, candidates, seed=seed, max_bytes=max_bytes)
    lengths = [len(item.data) for item in items]
    cores = jobs or _cores()

    def slow(result: CompressorCalibration) -> str | None:
        seconds = estimate_job_seconds(result, lengths, cores, strand)
        if seconds <= budget_seconds:
            return None
        return (
            f"the whole job would take {_estimate(seconds)} on {cores} cores, over the "
            f"{_duration(budget_seconds)} budget"
        )

    recommended, reasons = _recommend(report.compressors, _need(report.inputs), slow)
    if recommended is None:
        raise ValueError("no candidate compressors to choose from")
    chosen = report.result(recommended)
    estimate = (
        f"estimated job time with {recommended}: "
        f"{_estimate(estimate_job_seconds(chosen, lengths, cores, strand))} on {cores} cores "
        f"(budget {_duration(budget_seconds)})"
    )
    report = replace(report, recommended=recommended, reasons=(*reasons, estimate))
    return recommended, report


# The choice by task: what the job's own data shows


JOBS = ("matrix", "tree", "groups", "nearest", "derived", "classify")
LABELLED_JOBS = ("classify",)
LABELLED_CANDIDATES = (
    "zstd:level=3",
    "zstd:level=19",
    "lzma:level=9",
    "brotli:level=11",
    "ppmd:order=32",
    "bz2:level=9",
    "zlib:level=9",
)
MEASURED_FOLDS = (0, 2, 4)
REAL_PAIR_ITEMS = 8
SATURATED_SHARE = 0.25
MEASURING_SHARE = 0.25


@dataclass(frozen=True)
class TaskFigures:
    """What a candidate showed on the job's own data.

    Labelled jobs: on the reference held out fold by fold (see origins.FoldScores), `accuracy`
    the share of held-out items whose own origin scores best, `novelty` how well an origin left
    out is told from the others (the better ROC AUC of the fit and separation tests, see
    origins.Conformity), `merit` their sum, `items` held out. Both are free of any threshold, so
    they rank compressors finely where rates at a significance would all sit near 1 - rate.
    Unlabelled jobs: on all pairs of a sample of items, `saturation` the share of distances
    at or above 1 (nothing shared found) and `contrast` the mean over items of
    1 - nearest / median distance (how much nearer an item's nearest is than its typical one).
    """

    spec: str
    seconds: float
    accuracy: float | None = None
    novelty: float | None = None
    merit: float | None = None
    own_score: float | None = None
    items: int = 0
    saturation: float | None = None
    contrast: float | None = None

    def as_json(self) -> dict[str, object]:
        return dict(self.__dict__)

    def summary(self) -> str:
        if self.merit is not None:
            return (
                f"held-out reference: own origin best for {self.accuracy:.1%}, a missing origin"
                f" told apart with AUC {self.novelty:.3f}, merit {self.merit:.3f}, own score"
                f" {self.own_score:.3f} ({self.items} items, {self.seconds:.0f} s)"
            )
        return (
            f"sampled real pairs: {self.saturation:.0%} at or above 1, contrast"
            f" {self.contrast:.3f} ({self.items} items)"
        )


@dataclass(frozen=True)
class Choice:
    """The compressor chosen for a job, the controls and task figures behind it, and why."""

    spec: str
    job: str
    report: CalibrationReport
    task: tuple[TaskFigures, ...]
    reasons: tuple[str, ...]

    def as_json(self) -> dict[str, object]:
        return {
            "spec": self.spec,
            "job": self.job,
            "task": [t.as_json() for t in self.task],
            "reasons": list(self.reasons),
            "calibration": self.report.as_json(),
        }


def estimate_classify_seconds(
    result: CompressorCalibration,
    reference: Sequence[int],
    origins: int,
    targets: Sequence[int] = (),
    *,
    primed: bool = False,
    blocks: int = 5,
    jobs: int | None = None,
) -> float:
    """Wall time of classifying `targets` against a reference of `origins` origins, with the
    held-out calibration, at the calibrated throughput: every item (held-out reference items and
    targets) against every origin's corpus. Concatenation compresses corpus + item for each;
    priming compresses each corpus once per fold and the items alone (a lower bound)."""
    corpus = sum(reference) / max(origins, 1)
    if result.window_bytes is not None:
        corpus = min(corpus, result.window_bytes)
    items = [*reference, *targets]
    pairs = len(items) * origins
    mean = sum(items) / max(len(items), 1)
    work = pairs * mean + origins * (blocks + 1) * corpus if primed else pairs * (corpus + mean)
    return work / (result.throughput_mb_s * 1e6) / (jobs or _cores())


def _labelled_figures(
    items: Sequence[Item],
    spec: str,
    longest: int,
    engine: Engine | None,
    cache: SizeCache | None,
) -> TaskFigures:
    from .origins import fold_scores, novelty_aucs

    started = time.perf_counter()
    folds = fold_scores(
        items, spec, folds=MEASURED_FOLDS, longest=longest, engine=engine, cache=cache
    )
    keep = folds.measured
    scores, codes = folds.scores[keep], folds.codes[keep]
    accuracy = float(np.mean(scores.argmin(axis=1) == codes))
    own_score = float(np.median(scores[np.arange(len(codes)), codes]))
    novelty = max(novelty_aucs(scores, codes))
    novelty = 0.5 if novelty != novelty else novelty  # NaN: too few origins to leave one out
    return TaskFigures(
        spec=spec,
        seconds=time.perf_counter() - started,
        accuracy=accuracy,
        novelty=novelty,
        merit=accuracy + novelty,
        own_score=own_score,
        items=len(codes),
    )


def _choose_labelled(
    items: Sequence[Item],
    targets: Sequence[Item],
    report: CalibrationReport,
    budget_seconds: float,
    cores: int,
    engine: Engine | None,
    cache: SizeCache | None,
) -> tuple[str, tuple[TaskFigures, ...], list[str]]:
    labels = {item.label for item in items}
    lengths = [len(item.data) for item in items]
    longest = max([*lengths, *(len(t.data) for t in targets)])
    reasons: list[str] = []
    timed = []
    for result in report.compressors:
        if not holds(result, longest):
            reasons.append(
                f"{result.spec}: passed over: cannot hold the largest item ({_size(longest)})"
            )
            continue
        seconds = estimate_classify_seconds(
            result, lengths, len(labels), [len(t.data) for t in targets],
            primed=compressor(result.spec).primable, jobs=cores,
        )  # fmt: skip
        if seconds > budget_seconds:
            reasons.append(
                f"{result.spec}: passed over: the job would take {_estimate(seconds)} on {cores}"
                f" cores, over the {_duration(budget_seconds)} budget"
            )
            continue
        timed.append((seconds, result.spec))
    if not timed:
        fastest = max(report.compressors, key=lambda r: r.throughput_mb_s)
        reasons.insert(0, f"{fastest.spec}: chosen although over the budget: the fastest")
        return fastest.spec, (), reasons
    figures: list[TaskFigures] = []
    spent, allowance = 0.0, budget_seconds * MEASURING_SHARE
    n, m = len(lengths), len(labels)
    for seconds, spec in sorted(timed):
        # Measuring runs the reference part of the job on MEASURED_FOLDS of its folds.
        share = seconds * n / (n + len(targets)) * len(MEASURED_FOLDS) / 5
        if figures and spent + share > allowance:
            reasons.append(
                f"{spec}: passed over: measuring it too would take more than"
                f" {_duration(allowance)} ({MEASURING_SHARE:.0%} of the budget)"
            )
            continue
        spent += share
        figures.append(_labelled_figures(items, spec, longest, engine, cache))
    top = max(f.merit or 0.0 for f in figures)
    tie = 1.0 / max(figures[0].items, 1)
    tied = [f for f in figures if (f.merit or 0.0) >= top - tie]
    # Held-out figures saturate on easy references (every candidate 100 %), so among equals:
    # one primed with the corpus first (it measures C(x | corpus) directly, where concatenation
    # takes the difference of two sizes of the whole corpus, whose noise grows with it), then
    # the one that explains held-out items best by their own origin (lowest own score: a
    # compressor only ever overestimates what is shared, and one that finds little parts an
    # easy reference but not data that drifts), then the quickest (figures are in order of
    # estimated job time).
    best = min(tied, key=lambda f: (not compressor(f.spec).primable, f.own_score or 1.0))
    reasons.insert(
        0,
        f"{best.spec}: chosen: it tells the reference's {m} origins apart best on held-out"
        f" items (of those within one item of the best: primed ones first, then the lowest own"
        " score, then the quickest);"
        f" {best.summary()}",
    )
    for f in figures:
        if f is best:
            continue
        why = "separates as well but is slower" if f in tied else "separates the origins less"
        reasons.append(f"{f.spec}: passed over: {why}; {f.summary()}")
    return best.spec, tuple(figures), reasons


def _real_pair_figures(
    items: Sequence[Item], spec: str, seed: int, engine: Engine | None, cache: SizeCache | None
) -> TaskFigures:
    from .distance import distance_matrix

    started = time.perf_counter()
    rng = _rng(seed, _STREAM_SAMPLES)
    distinct = list({item.data: item for item in items if item.data}.values())
    chosen = sorted(rng.choice(len(distinct), min(REAL_PAIR_ITEMS, len(distinct)), replace=False))
    sample = [distinct[k] for k in chosen]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        matrix = distance_matrix(sample, spec, engine=engine, cache=cache)
    d = np.array(matrix.raw)
    n = len(sample)
    off = ~np.eye(n, dtype=bool)
    values = d[off].reshape(n, n - 1)
    median = np.maximum(np.median(values, axis=1), 1e-9)
    return TaskFigures(
        spec=spec,
        seconds=time.perf_counter() - started,
        saturation=float(np.mean(values >= 1.0)),
        contrast=float(np.mean(1.0 - values.min(axis=1) / median)),
        items=n,
    )


def _check_real_pairs(
    items: Sequence[Item],
    spec: str,
    report: CalibrationReport,
    seed: int,
    engine: Engine | None,
    cache: SizeCache | None,
    quick: Callable[[CompressorCalibration], bool],
) -> tuple[str, tuple[TaskFigures, ...], list[str]]:
    """The controls' choice, unless a sample of real pairs shows it finds nothing shared
    (more than SATURATED_SHARE of distances at or above 1) where the next candidates by quality
    do not: then the best of those by contrast."""
    if len({item.data for item in items}) < 3:
        return spec, (), []
    chosen = _real_pair_figures(items, spec, seed, engine, cache)
    figures = [chosen]
    reasons = [f"{spec}: {chosen.summary()}"]
    if (chosen.saturation or 0.0) <= SATURATED_SHARE:
        return spec, tuple(figures), reasons
    need = _need(report.inputs)
    others = sorted(
        (r for r in report.compressors
         if r.spec != spec and holds(r, need.pair if need else None) and quick(r)),
        key=lambda r: r.quality,
    )[:2]  # fmt: skip
    for other in others:
        figures.append(_real_pair_figures(items, other.spec, seed, engine, cache))
    better = [f for f in figures[1:] if (f.saturation or 0.0) <= SATURATED_SHARE]
    if not better:
        return spec, tuple(figures), reasons
    best = max(better, key=lambda f: f.contrast or 0.0)
    reasons = [
        f"{best.spec}: chosen over {spec}: on real pairs of these items {spec} found nothing"
        f" shared for {chosen.saturation:.0%} of them; {best.summary()}",
        *(f"{f.spec}: {f.summary()}" for f in figures if f is not best),
    ]
    return best.spec, tuple(figures), reasons


def choose_for_job(
    items: Sequence[Item],
    job: str = "matrix",
    *,
    targets: Sequence[Item] = (),
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    candidates: Sequence[str | Compressor] | None = None,
    seed: int = DEFAULT_SEED,
    jobs: int | None = None,
    strand: str = "one",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
) -> Choice:
    """The compressor ``-c auto`` uses for a job of kind ``job`` (one of JOBS) on ``items``.

    Every job first calibrates the candidates on controls (:func:`calibrate`), which guard
    against windows too small and report biases and speed. A labelled job (classify: ``items``
    is the labelled reference, ``targets`` the items to classify) then ranks the candidates
    whose whole job fits ``budget_seconds`` by how well they separate the reference's own
    origins held out fold by fold (origins.fold_report): named right and refused when their
    origin is missing; within one item of the best, the quickest wins. Measuring may take a
    quarter of the budget (MEASURING_SHARE); the held-out sizes are
    measured through the size cache, so the winner's calibration reuses them. An unlabelled
    job (matrix, tree, groups, derived) takes :func:`choose_compressor`'s choice unless a sample
    of real pairs shows that it finds nothing shared (see ``_check_real_pairs``). The budget is
    checked against a full matrix's time even for nearest, which measures far fewer pairs: on a
    large set that favours the quicker compressors, as a large set needs.
    """
    if job not in JOBS:
        raise ValueError(f"unknown job {job!r}; use one of {', '.join(JOBS)}")
    cores = jobs or _cores()
    if job in LABELLED_JOBS:
        report = calibrate(
            items, candidates or LABELLED_CANDIDATES, seed=seed, samples=2, sweep_seconds=1.0
        )
        spec, figures, reasons = _choose_labelled(
            items, targets, report, budget_seconds, cores, engine, cache
        )
        return Choice(spec, job, replace(report, recommended=spec, reasons=tuple(reasons)),
                      figures, tuple(reasons))  # fmt: skip
    spec, report = choose_compressor(
        items, budget_seconds=budget_seconds, candidates=candidates, seed=seed, jobs=cores,
        strand=strand,
    )  # fmt: skip
    lengths = [len(item.data) for item in items]

    def quick(result: CompressorCalibration) -> bool:
        return estimate_job_seconds(result, lengths, cores, strand) <= budget_seconds

    chosen, figures, extra = _check_real_pairs(items, spec, report, seed, engine, cache, quick)
    kept = (*extra, *report.reasons) if chosen == spec else (*extra, *report.reasons[1:])
    return Choice(chosen, job, replace(report, recommended=chosen, reasons=kept), figures,
                  kept)  # fmt: skip


# The ``-c auto`` resolution: a choice per job, kept in the size cache


def resolve_auto(
    items: Sequence[Item],
    job: str,
    *,
    targets: Sequence[Item] = (),
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    strand: str = "one",
    engine: Engine,
    cache: SizeCache | None = None,
    say: Callable[[str], None] = lambda message: None,
) -> str:
    """The spec ``-c auto`` uses for ``job`` on ``items``: :func:`choose_for_job`'s choice
    (classify: ``items`` is the labelled reference, ``targets`` the unknowns), said through
    ``say``, with a MeasurementWarning when even it cannot hold the largest pair of items.

    The choice is kept in ``cache``, keyed by the items' contents (and labels for a labelled
    job), the job, the candidates (with their library versions), the seed, the budget, the
    cores of ``engine`` and the strand, so a rerun does not calibrate again.
    """
    import hashlib
    import json

    from .distance import MeasurementWarning, content_digest

    labelled = job in LABELLED_JOBS
    cores = engine.jobs
    candidates = LABELLED_CANDIDATES if labelled else DEFAULT_CANDIDATES
    lines = [
        *sorted(
            content_digest(item.data).hex() + (f"\t{item.label}" if labelled else "")
            for item in items
        ),
        *(compressor(spec).cache_key for spec in candidates),
        f"seed={DEFAULT_SEED} budget={budget_seconds} cores={cores} strand={strand}",
        f"job={job} targets={len(targets)}:{sum(len(t.data) for t in targets)} ranked=merit"
        if labelled
        else "job=unlabelled",
    ]
    key = "auto:" + hashlib.blake2b("\n".join(lines).encode(), digest_size=16).hexdigest()
    stored = cache.get_choice(key) if cache is not None else None
    if stored is None:
        say(f"auto: calibrating the compressors on these inputs for {job} ...")
        choice = choose_for_job(items, job, targets=targets, budget_seconds=budget_seconds,
                                jobs=cores, strand=strand, engine=engine, cache=cache)  # fmt: skip
        pair = int(sum(sorted((len(item.data) for item in items), reverse=True)[:2]))
        result = choice.report.result(choice.spec)
        # A labelled choice leads with its task figures; an unlabelled one with the controls'
        # comparison when there was one, else with the time estimate that settled it.
        lead = labelled or " chosen over " in choice.reasons[0]
        stored = json.dumps(
            {
                "spec": choice.spec,
                "why": choice.reasons[0] if lead else choice.reasons[-1],
                "holds": labelled or holds(result, pair),
                "reliable": result.reliable_up_to_bytes,
                "pair": pair,
            }
        )
        if cache is not None:
            cache.put_choice(key, stored)
    else:
        say("auto: the choice for these inputs is in the cache")
    chosen = json.loads(stored)
    say(f"auto: chose {chosen['spec']}: {chosen['why']}")
    if not chosen["holds"]:
        warnings.warn(
            f"{chosen['spec']}: reliable up to {chosen['reliable']:,} bytes, below the largest"
            f" pair of items ({chosen['pair']:,} bytes); their distances drift towards 1",
            MeasurementWarning,
            stacklevel=2,
        )
    return str(chosen["spec"])


def calibration_report(
    items: Sequence[Item] | None,
    candidates: Sequence[str],
    *,
    seed: int = DEFAULT_SEED,
    max_bytes: int = DEFAULT_MAX_BYTES,
    budget_seconds: float | None = None,
    jobs: int | None = None,
    cache: SizeCache | None = None,
    say: Callable[[str], None] = lambda message: None,
) -> CalibrationReport:
    """What ``kinpress calibrate`` reports: :func:`calibrate`, or with ``budget_seconds`` (which
    needs ``items``) :func:`choose_compressor`, whose recommendation is the best compressor
    whose whole matrix of the items is estimated to fit the budget on ``jobs`` cores.

    The report is kept in ``cache``, keyed by the items' contents, the candidates (with their
    library versions), the seed, the size cap, the budget and the cores, so a rerun does not
    measure again (its throughputs are those of the first run).
    """
    import hashlib
    import json

    from .distance import content_digest

    if budget_seconds is not None and not items:
        raise ValueError("a budget weighs the run time of the inputs' matrix: give inputs")
    lines = [
        *sorted(content_digest(item.data).hex() for item in items or ()),
        *(compressor(spec).cache_key for spec in candidates),
        f"seed={seed} max_bytes={max_bytes} budget={budget_seconds} cores={jobs}",
    ]
    key = "calibrate:" + hashlib.blake2b("\n".join(lines).encode(), digest_size=16).hexdigest()
    stored = cache.get_choice(key) if cache is not None else None
    if stored is not None:
        say("calibrate: the report for these inputs is in the cache")
        return _report_from_json(stored)
    if budget_seconds is None or not items:
        report = calibrate(items, candidates, seed=seed, max_bytes=max_bytes)
    else:
        _, report = choose_compressor(items, budget_seconds=budget_seconds, candidates=candidates,
                                      seed=seed, jobs=jobs, max_bytes=max_bytes)  # fmt: skip
    if cache is not None:
        cache.put_choice(key, json.dumps(report.as_json()))
    return report


def _report_from_json(text: str) -> CalibrationReport:
    """The report :meth:`CalibrationReport.as_json` wrote (its derived figures recomputed)."""
    import json

    doc = json.loads(text)
    derived = {"mutation_distance", "quality"}
    results = []
    for entry in doc["compressors"]:
        fields = {k: v for k, v in entry.items() if k not in derived}
        fields["normality"] = Normality(**fields["normality"])
        for curve in ("size_sweep", "mutation_ladder", "block_moves"):
            fields[curve] = tuple(tuple(point) for point in fields[curve])
        results.append(CompressorCalibration(**fields))
    return CalibrationReport(doc["seed"], doc["inputs"], tuple(results), doc["recommended"],
                             tuple(doc["reasons"]))  # fmt: skip

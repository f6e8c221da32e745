"""Calibration measurements: each compressor's bias figures on the controls, its size sweep and
its normality violations.

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
* known answers: a compressor codes a known-answer string in 8·C(x)/symbols bits a symbol, and
  reports how far that is below log2(alphabet), what a coder that finds nothing spends (3.3219
  bits a digit, 1 a bit). It sees structure there when it is below the string's own order-0
  entropy (what counting symbols gets; on finite prefixes a little below log2(alphabet)) by more
  than ``STRUCTURE_MARGIN`` (3 %) of log2(alphabet).
  On the random-looking ones (pi, rule 30, a seeded stream) no practical compressor does: a
  distance near 1 says only that the compressor found nothing shared, not that nothing is.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import combinations, permutations

import numpy as np
from scipy import stats

from ..compressors import Compressor, compressor
from ..measure import conditional_of, conditions, content_digest, ncd
from .controls import (
    _STREAM_SWEEP,
    BLOCK_COUNTS,
    DEFAULT_SEED,
    MUTATION_RATES,
    Controls,
    KnownAnswer,
    _random_over,
    _rng,
)

DEFAULT_MAX_BYTES = 64 << 20
DEFAULT_SWEEP_SECONDS = 5.0
REPORT_KEYS = ("seed", "inputs", "compressors", "recommended", "reasons")
SWEEP_START = 1 << 10
RELIABLE_NCD = 0.1
RELIABLE_CEILING = 0.5
BIAS_GROWTH = 2.0
RESOLUTION_MARGIN = 0.02
TOLERANCE_BYTES = 16
TOLERANCE_FRACTION = 0.02
STRUCTURE_MARGIN = 0.03
RELATED_RATE = 0.10


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


def _concat_ncd(meter: _Meter, a: bytes, ca: int, b: bytes, cb: int) -> float:
    """NCD(a, b) with a conditioning b by concatenation: (C(ab) - C(a)) / C(b)."""
    joined = np.asarray(meter.size(a + b))
    return float(ncd(conditional_of(joined, np.asarray(ca), "concat"), np.asarray(cb)))


def _ncd(meter: _Meter, x: bytes, y: bytes, cx: int | None = None) -> float:
    """NCD(x, y) as the matrix computes it: the input that conditions the other
    (`measure.conditions`: smaller C, ties by content hash) first."""
    cx = meter.size(x) if cx is None else cx
    cy = meter.size(y)
    if conditions(cx, content_digest(x), cy, content_digest(y)):
        return _concat_ncd(meter, x, cx, y, cy)
    return _concat_ncd(meter, y, cy, x, cx)


def _identity(meter: _Meter, x: bytes) -> float:
    """NCD(x, x) = (C(xx) - C(x)) / C(x)."""
    cx = meter.size(x)
    return _concat_ncd(meter, x, cx, x, cx)


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


# Known answers


@dataclass(frozen=True)
class BlindSpot:
    """How one compressor codes one known-answer string (:class:`.controls.KnownAnswer`).

    ``bits_per_symbol`` is 8·C(x) / symbols; ``uniform_bits`` is log2(alphabet), what a coder
    that finds nothing spends; ``below`` is their difference (positive: below the random rate).
    ``order0_bits`` is the string's own symbol-count entropy, and ``sees_structure`` whether
    the compressor got below it by more than ``STRUCTURE_MARGIN`` of ``uniform_bits``: found
    more than symbol counts. On a ``"random-looking"`` string, not seeing any is the blind spot.
    """

    control: str
    kind: str
    source: str
    symbols: int
    uniform_bits: float
    order0_bits: float
    bits_per_symbol: float

    @property
    def below(self) -> float:
        return self.uniform_bits - self.bits_per_symbol

    @property
    def sees_structure(self) -> bool:
        return self.order0_bits - self.bits_per_symbol > STRUCTURE_MARGIN * self.uniform_bits

    def as_json(self) -> dict[str, object]:
        return {
            "control": self.control,
            "kind": self.kind,
            "source": self.source,
            "symbols": self.symbols,
            "uniform_bits": self.uniform_bits,
            "order0_bits": self.order0_bits,
            "bits_per_symbol": self.bits_per_symbol,
            "below": self.below,
            "sees_structure": self.sees_structure,
        }


def blind_spot(comp: Compressor | str, known: KnownAnswer) -> BlindSpot:
    """Bits a symbol ``comp`` spends on the known-answer string ``known``."""
    size = compressor(comp).size(known.data)
    return BlindSpot(known.name, known.kind, known.source, known.symbols, known.uniform_bits,
                     known.order0_bits, 8 * size / known.symbols)  # fmt: skip


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
    samples and pairs of them (each sample after another), one thread. blind_spots: bits a
    symbol on the known-answer strings (:class:`BlindSpot`).
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
    blind_spots: tuple[BlindSpot, ...] = ()

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
            "blind_spots": [spot.as_json() for spot in self.blind_spots],
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
    spots = tuple(blind_spot(comp, known) for known in controls.known)
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
        blind_spots=spots,
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

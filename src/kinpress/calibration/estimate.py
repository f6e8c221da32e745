"""Job-time estimates: a whole unlabelled job at a compressor's calibrated throughput
(:func:`estimate_job_seconds`: the matrix, bootstrap replicates, derived's null) and a
classification against a reference (:func:`estimate_classify_seconds`), from its unit of work
timed on the job's own corpus and items (:func:`time_classify_unit`), with the words the reasons
use for them. ``cores`` is the number of cores an estimate assumes the work spreads over
(default: every core this process may use), not where any work runs."""

from __future__ import annotations

import os
import time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from ..compressors import Compressor, Continued, Primed
from ..units import duration_text
from .measure import CompressorCalibration


def _cores() -> int:
    return len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1


@dataclass(frozen=True)
class ProposedPairs:
    """The pairs a job measures in place of a matrix's (derived: its prefilter's candidates, or
    every pair with --exhaustive), each both ways: how many (`pairs`), and the bytes their
    concatenations feed the compressor (`fed`: each pair's two items, twice)."""

    pairs: int
    fed: int

    @classmethod
    def of(cls, pairs: Iterable[tuple[int, int]], lengths: Sequence[int]) -> ProposedPairs:
        found = list(pairs)
        return cls(len(found), sum(2 * (lengths[i] + lengths[j]) for i, j in found))

    @classmethod
    def every(cls, lengths: Sequence[int]) -> ProposedPairs:
        """Every pair of the items, both ways, counted without listing them."""
        n = len(lengths)
        return cls(n * (n - 1) // 2, 2 * (n - 1) * sum(lengths))


def estimate_job_seconds(
    result: CompressorCalibration,
    lengths: Sequence[int],
    cores: int | None = None,
    strand: str = "one",
    *,
    replicates: int = 0,
    null_pairs: int = 0,
    proposed: ProposedPairs | None = None,
) -> float:
    """Wall time of a whole job by concatenation at the calibrated throughput.

    n items of T bytes in all: every item once, its x+x once, and the n(n-1)/2 pairs, each of two
    items: T + (n + 1)·T bytes, the pairs twice with ``strand="both"`` (each y is also tried
    reverse-complemented); a job that measures the ``proposed`` pairs in their place, T and
    their bytes (derived: on Go's source tree, 60 thousand of 33 million pairs, both ways).
    Each of ``replicates`` bootstrap replicates is a whole matrix again (items resampled to their
    own lengths, so the same bytes); each of ``null_pairs`` (derived's null) is measured both
    ways against material of a partner's size: two concatenations of two mean items and the
    material once, 5·T/n bytes. All spread over ``cores`` cores (default: all).
    """
    n, total = len(lengths), sum(lengths)
    both = 2 if strand == "both" else 1
    pairs = (n + 1) * total if proposed is None else proposed.fed
    matrix = total + pairs * both
    work = matrix * (1 + replicates) + null_pairs * 5 * total / max(n, 1)
    return work / (result.throughput_mb_s * 1e6) / (cores or _cores())


def _job_words(replicates: int, null_pairs: int, proposed: ProposedPairs | None = None) -> str:
    """What the estimate counts beyond the matrix, or in its place, in words ("" when
    nothing)."""
    extra = [f"{replicates:,} bootstrap replicates"] if replicates else []
    extra += [f"{null_pairs:,} null pairs"] if null_pairs else []
    if proposed is not None:
        pairs = "pair" if proposed.pairs == 1 else "pairs"
        return (
            f" (the {proposed.pairs:,} {pairs} to check, both ways"
            + "".join(f", and {e}" for e in extra)
            + ")"
        )
    return f" (the matrix and {' and '.join(extra)})" if extra else ""


def _estimate(seconds: float) -> str:
    return "under 1 s" if seconds < 1 else f"about {duration_text(seconds)}"


UNIT_CORPUS_BYTES = 1 << 19
"""The most corpus bytes `time_classify_unit` compresses; a longer corpus is timed on its first
this-many bytes and the times scaled by length."""


@dataclass(frozen=True)
class ClassifyUnit:
    """What a classification's unit of work costs with one compressor, timed on the job's own
    bytes: `prepare`, seconds to make one origin's corpus ready (priming it, or compressing it
    alone for concatenation's C(y) and keeping the state after it where the adapter can, see
    Compressor.after); `pair`, seconds per item against a ready corpus (the primed size of x, or
    C(corpus + x)); `near`, seconds per NCD of an item and a reference item (the
    search for each item's nearest reference item in its origin: C(yx) of two items)."""

    prepare: float
    pair: float
    near: float = 0.0


def time_classify_unit(
    comp: Compressor, corpus: bytes, items: Sequence[bytes], data_size: int = 0
) -> ClassifyUnit:
    """Time `comp` on a real corpus and items as a classification would use them (primed when
    the compressor can be, from its state after the corpus where it keeps one): the corpus
    prepared once, each item against it once and after another item once, the quickest of each
    (what else the machine did only adds time). A corpus over UNIT_CORPUS_BYTES is timed on its
    first that-many bytes, the times scaled by (corpus + item) length. Why not the calibrated
    throughput: it is measured on a few samples of a few kB, where a context model's or a large
    window's fixed cost weighs far more than on a corpus of hundreds of kB (PPMd order 32 on 24
    languages of code: 2.4 MB/s there, 5.6 MB/s on 180 kB, so a job of 6 minutes was put at 24
    and passed over)."""
    timed = corpus[:UNIT_CORPUS_BYTES]
    mean = sum(len(x) for x in items) / max(len(items), 1)
    scale = (len(corpus) + mean) / max(len(timed) + mean, 1)
    comp.size(timed[:256])  # library and context set up outside the timing
    started = time.perf_counter()
    ready: Primed | Continued
    if comp.primable:
        ready = comp.primed(timed, data_size or int(mean))
    else:  # C(y), then the state after y where the adapter keeps it (Compressor.after)
        comp.size(timed)
        ready = comp.after(timed)
    prepare = time.perf_counter() - started
    times, near = [], []
    for k, x in enumerate(items):
        started = time.perf_counter()
        ready.size(x)
        times.append(time.perf_counter() - started)
        started = time.perf_counter()
        comp.size(items[k - 1] + x)
        near.append(time.perf_counter() - started)
    return ClassifyUnit(prepare * scale, min(times, default=0.0) * scale, min(near, default=0.0))


def estimate_classify_seconds(
    result: CompressorCalibration,
    reference: Sequence[int],
    origins: int,
    targets: Sequence[int] = (),
    *,
    primed: bool = False,
    blocks: int = 3,
    cores: int | None = None,
    shape: float = 0.0,
    unit: ClassifyUnit | None = None,
    shape_unit: ClassifyUnit | None = None,
) -> float:
    """Wall time of classifying `targets` against a reference of `origins` origins, with the
    held-out calibration: every item (held-out reference items and targets) against every
    origin's corpus, each corpus made ready once per fold and once whole. With a `unit` timed on
    the job's data (see time_classify_unit), at its cost, adding each target's NCD to every
    reference item of one origin (the search for its nearest); else at the calibrated
    throughput, where concatenation compresses corpus + item for each and priming each corpus
    once per fold and the items alone (a lower bound). ``primed``: the compressor is primed with
    each corpus, or keeps its state after it (Compressor.continues), so an item's cost does not
    grow with the corpus. The shape view (see origins.views) repeats the scoring: at the cost of
    `shape_unit`, its unit of work timed on the shape view's corpus and items, or else on bytes
    ``shape`` times the size (0: no shape view), which holds where a pair's cost follows its
    bytes but not where a kept state's does (PPMd's shape view took as long as its content on
    24 languages, on about half the bytes). Spread over ``cores`` cores (default: all)."""
    items = [*reference, *targets]
    pairs = len(items) * origins
    corpora = origins * (blocks + 1)
    corpus = sum(reference) / max(origins, 1)
    if result.window_bytes is not None:
        corpus = min(corpus, result.window_bytes)
    mean = sum(items) / max(len(items), 1)
    if unit is not None:
        # A held-out reference item meets its fold's corpora, (blocks - 1) / blocks of a whole
        # one; by concatenation its pairs cost that much less.
        fold = 1.0 if primed else ((blocks - 1) / blocks * corpus + mean) / (corpus + mean)
        held = len(reference) * origins * fold + len(targets) * origins
        scored = held * unit.pair + corpora * unit.prepare
        if shape_unit is not None:
            scored += held * shape_unit.pair + corpora * shape_unit.prepare
        else:
            scored *= 1 + shape
        nearest = len(targets) * len(reference) / max(origins, 1) * unit.near
        return (scored + nearest) / (cores or _cores())
    work = pairs * mean + corpora * corpus if primed else pairs * (corpus + mean)
    return work * (1 + shape) / (result.throughput_mb_s * 1e6) / (cores or _cores())

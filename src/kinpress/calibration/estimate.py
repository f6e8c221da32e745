"""Job-time estimates at a compressor's calibrated throughput: a whole unlabelled job
(:func:`estimate_job_seconds`: the matrix, bootstrap replicates, derived's null) and a
classification against a reference (:func:`estimate_classify_seconds`), with the words the
reasons use for them. ``cores`` is the number of cores an estimate assumes the work spreads over
(default: every core this process may use), not where any work runs."""

from __future__ import annotations

import os
from collections.abc import Sequence

from ..units import duration_text
from .measure import CompressorCalibration


def _cores() -> int:
    return len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1


def estimate_job_seconds(
    result: CompressorCalibration,
    lengths: Sequence[int],
    cores: int | None = None,
    strand: str = "one",
    *,
    replicates: int = 0,
    null_pairs: int = 0,
) -> float:
    """Wall time of a whole job by concatenation at the calibrated throughput.

    n items of T bytes in all: every item once, its x+x once, and the n(n-1)/2 pairs, each of two
    items: T + (n + 1)·T bytes, the pairs twice with ``strand="both"`` (each y is also tried
    reverse-complemented). Each of ``replicates`` bootstrap replicates is a whole matrix again
    (items resampled to their own lengths, so the same bytes); each of ``null_pairs`` (derived's
    null) is measured both ways against material of a partner's size: two concatenations of two
    mean items and the material once, 5·T/n bytes. All spread over ``cores`` cores (default: all).
    """
    n, total = len(lengths), sum(lengths)
    matrix = total + (n + 1) * total * (2 if strand == "both" else 1)
    work = matrix * (1 + replicates) + null_pairs * 5 * total / max(n, 1)
    return work / (result.throughput_mb_s * 1e6) / (cores or _cores())


def _job_words(replicates: int, null_pairs: int) -> str:
    """What the estimate counts beyond the matrix, in words ("" when nothing)."""
    extra = [f"{replicates:,} bootstrap replicates"] if replicates else []
    extra += [f"{null_pairs:,} null pairs"] if null_pairs else []
    return f" (the matrix and {' and '.join(extra)})" if extra else ""


def _estimate(seconds: float) -> str:
    return "under 1 s" if seconds < 1 else f"about {duration_text(seconds)}"


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
) -> float:
    """Wall time of classifying `targets` against a reference of `origins` origins, with the
    held-out calibration, at the calibrated throughput: every item (held-out reference items and
    targets) against every origin's corpus. Concatenation compresses corpus + item for each;
    priming compresses each corpus once per fold and the items alone (a lower bound). The shape
    view (see origins.views) repeats all of it on bytes ``shape`` times the size (0: no shape
    view). Spread over ``cores`` cores (default: all)."""
    corpus = sum(reference) / max(origins, 1)
    if result.window_bytes is not None:
        corpus = min(corpus, result.window_bytes)
    items = [*reference, *targets]
    pairs = len(items) * origins
    mean = sum(items) / max(len(items), 1)
    work = pairs * mean + origins * (blocks + 1) * corpus if primed else pairs * (corpus + mean)
    return work * (1 + shape) / (result.throughput_mb_s * 1e6) / (cores or _cores())

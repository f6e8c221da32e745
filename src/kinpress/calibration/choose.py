"""The calibration's choice: which compressor a job should use, and why, in plain words.

* recommendation: a compressor qualifies when the two largest items together fit its reliable size
  (so does every item and every pair, and each item's own x+x); among those the lowest quality
  score |identity bias| + max(shuffle similarity, 0) + (1 - monotonicity) + resolution (1 when
  none) + mutation distance (mean NCD to copies with 1-10 % substituted) wins; scores within
  ``QUALITY_TIE`` (0.02) of the best count as equal and the fastest of them is taken. The
  reliable-size test is conservative: an LZ match from y back into x may lie up to |x| + |y|
  back, while a block sorter needs only |x| + |y| <= its block, twice the item size the sweep
  reports. :func:`choose_compressor` also drops those whose whole job would
  overrun a time budget (estimated from the measured throughput).
* by task: :func:`.job.choose_for_job` goes on from the controls' choice to the job's own data
  (held-out separation of a labelled reference; real pairs of unlabelled items).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

from ..compressors import AUTO_CANDIDATES, Compressor
from ..items import Item
from ..measure import Progress
from ..units import duration_text, size_text
from .controls import (
    DEFAULT_NORMALITY_BYTES,
    DEFAULT_SAMPLE_BYTES,
    DEFAULT_SAMPLES,
    DEFAULT_SEED,
    make_controls,
)
from .estimate import ProposedPairs, _cores, _estimate, _job_words
from .estimate import estimate_classify_seconds as estimate_classify_seconds  # re-exported
from .estimate import estimate_job_seconds as estimate_job_seconds  # re-exported
from .measure import (
    DEFAULT_MAX_BYTES,
    DEFAULT_SWEEP_SECONDS,
    CalibrationReport,
    CompressorCalibration,
    calibrate_compressor,
)

# What the registry holds at import, for callers that list the candidates; the choosing functions
# read the registry itself when called.
DEFAULT_CANDIDATES = AUTO_CANDIDATES["unlabelled"]
DEFAULT_BUDGET_SECONDS = 600.0
QUALITY_TIE = 0.02


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
    window = f", documented window {size_text(result.window_bytes)}" if result.window_bytes else ""
    bound = "at least " if result.reliable_capped else ""
    reliable = size_text(result.reliable_up_to_bytes)
    return (
        f"{result.spec}: passed over: items up to {size_text(largest)} (the two largest together "
        f"{size_text(need)}) exceed its reliable size, {bound}{reliable}{window}"
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
    scope = f"reaches the largest pair ({size_text(pair)})" if pair else "no inputs to size"
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
            f"({size_text(pair or 0)}): it reaches furthest,"
            f" {size_text(best.reliable_up_to_bytes)}; "
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
    progress: Progress | None = None,
) -> CalibrationReport:
    """Calibrate ``candidates`` (default: the registry's unlabelled ``AUTO_CANDIDATES``) on
    controls made from ``items`` (or generic ones) and recommend one by quality (module rules),
    speed breaking ties; ``progress`` is told as each candidate is done.

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
    specs = list(candidates or AUTO_CANDIDATES["unlabelled"])
    measured = []
    for spec in specs:
        measured.append(
            calibrate_compressor(spec, controls, max_bytes=max_bytes, sweep_seconds=sweep_seconds)
        )
        if progress is not None:
            progress("compressors (auto: on controls)", len(measured), len(specs))
    results = tuple(measured)
    inputs = {**controls.inputs, "max_bytes": max_bytes}
    recommended, reasons = _recommend(results, _need(inputs))
    return CalibrationReport(seed, inputs, results, recommended, reasons)


def choose_compressor(
    items: Sequence[Item],
    *,
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    candidates: Sequence[str | Compressor] | None = None,
    seed: int = DEFAULT_SEED,
    cores: int | None = None,
    strand: str = "one",
    max_bytes: int = DEFAULT_MAX_BYTES,
    replicates: int = 0,
    null_pairs: int = 0,
    proposed: ProposedPairs | None = None,
    progress: Progress | None = None,
) -> tuple[str, CalibrationReport]:
    """The compressor for ``-c auto``: the best one (as :func:`calibrate` ranks them) among those
    whose estimated whole-job time (:func:`estimate_job_seconds`, with ``replicates`` bootstrap
    matrices, ``null_pairs`` of derived's null, and the ``proposed`` pairs in place of the
    matrix's where the job measures fewer) is within ``budget_seconds``;
    quality is worth paying for only inside the budget. If none fits the budget, the fastest
    reliable one; the reasons say which and why. ``cores`` is the cores the estimate assumes
    (default: every core this process may use); ``progress`` goes to :func:`calibrate`.
    """
    report = calibrate(items, candidates, seed=seed, max_bytes=max_bytes, progress=progress)
    lengths = [len(item.data) for item in items]
    cores = cores or _cores()

    words = _job_words(replicates, null_pairs, proposed)

    def seconds_of(result: CompressorCalibration) -> float:
        return estimate_job_seconds(
            result, lengths, cores, strand, replicates=replicates, null_pairs=null_pairs,
            proposed=proposed,
        )  # fmt: skip

    def slow(result: CompressorCalibration) -> str | None:
        seconds = seconds_of(result)
        if seconds <= budget_seconds:
            return None
        return (
            f"the whole job{words} would take {_estimate(seconds)} on {cores} cores, over the "
            f"{duration_text(budget_seconds)} budget"
        )

    recommended, reasons = _recommend(report.compressors, _need(report.inputs), slow)
    if recommended is None:
        raise ValueError("no candidate compressors to choose from")
    chosen = report.result(recommended)
    estimate = (
        f"estimated job time with {recommended}{words}: "
        f"{_estimate(seconds_of(chosen))} on"
        f" {cores} cores "
        f"(budget {duration_text(budget_seconds)})"
    )
    report = replace(report, recommended=recommended, reasons=(*reasons, estimate))
    return recommended, report


# The choice by task: what the job's own data shows

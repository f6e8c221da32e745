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
* by task: :func:`choose_for_job` goes on from the controls' choice to the job's own data
  (held-out separation of a labelled reference; real pairs of unlabelled items).
"""

from __future__ import annotations

import os
import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from ..cache import SizeCache
from ..compressors import AUTO_CANDIDATES, Compressor, compressor
from ..engine import Engine, LocalEngine
from ..items import Item
from ..units import duration_text, size_text
from .controls import (
    _STREAM_SAMPLES,
    DEFAULT_NORMALITY_BYTES,
    DEFAULT_SAMPLE_BYTES,
    DEFAULT_SAMPLES,
    DEFAULT_SEED,
    _rng,
    make_controls,
)
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
) -> CalibrationReport:
    """Calibrate ``candidates`` (default: the registry's unlabelled ``AUTO_CANDIDATES``) on
    controls made from ``items`` (or generic ones) and recommend one by quality (module rules),
    speed breaking ties.

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
        for spec in candidates or AUTO_CANDIDATES["unlabelled"]
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
    mean items and the material once, 5·T/n bytes. All spread over ``jobs`` cores (default: all).
    """
    n, total = len(lengths), sum(lengths)
    matrix = total + (n + 1) * total * (2 if strand == "both" else 1)
    work = matrix * (1 + replicates) + null_pairs * 5 * total / max(n, 1)
    return work / (result.throughput_mb_s * 1e6) / (jobs or _cores())


def _job_words(replicates: int, null_pairs: int) -> str:
    """What the estimate counts beyond the matrix, in words ("" when nothing)."""
    extra = [f"{replicates:,} bootstrap replicates"] if replicates else []
    extra += [f"{null_pairs:,} null pairs"] if null_pairs else []
    return f" (the matrix and {' and '.join(extra)})" if extra else ""


def _estimate(seconds: float) -> str:
    return "under 1 s" if seconds < 1 else f"about {duration_text(seconds)}"


def choose_compressor(
    items: Sequence[Item],
    *,
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    candidates: Sequence[str | Compressor] | None = None,
    seed: int = DEFAULT_SEED,
    jobs: int | None = None,
    strand: str = "one",
    max_bytes: int = DEFAULT_MAX_BYTES,
    replicates: int = 0,
    null_pairs: int = 0,
) -> tuple[str, CalibrationReport]:
    """The compressor for ``-c auto``: the best one (as :func:`calibrate` ranks them) among those
    whose estimated whole-job time (:func:`estimate_job_seconds`, with ``replicates`` bootstrap
    matrices and ``null_pairs`` of derived's null) is within ``budget_seconds``;
    quality is worth paying for only inside the budget. If none fits the budget, the fastest
    reliable one; the reasons say which and why.
    """
    report = calibrate(items, candidates, seed=seed, max_bytes=max_bytes)
    lengths = [len(item.data) for item in items]
    cores = jobs or _cores()

    extra = {"replicates": replicates, "null_pairs": null_pairs}
    words = _job_words(replicates, null_pairs)

    def slow(result: CompressorCalibration) -> str | None:
        seconds = estimate_job_seconds(result, lengths, cores, strand, **extra)
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
        f"{_estimate(estimate_job_seconds(chosen, lengths, cores, strand, **extra))} on"
        f" {cores} cores "
        f"(budget {duration_text(budget_seconds)})"
    )
    report = replace(report, recommended=recommended, reasons=(*reasons, estimate))
    return recommended, report


# The choice by task: what the job's own data shows


JOBS = ("matrix", "tree", "groups", "nearest", "derived", "classify")
LABELLED_JOBS = ("classify",)
LABELLED_CANDIDATES = AUTO_CANDIDATES["labelled"]
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
    from ..origins import fold_scores, novelty_aucs

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
                f"{result.spec}: passed over: cannot hold the largest item ({size_text(longest)})"
            )
            continue
        seconds = estimate_classify_seconds(
            result, lengths, len(labels), [len(t.data) for t in targets],
            primed=compressor(result.spec).primable, jobs=cores,
        )  # fmt: skip
        if seconds > budget_seconds:
            reasons.append(
                f"{result.spec}: passed over: the job would take {_estimate(seconds)} on {cores}"
                f" cores, over the {duration_text(budget_seconds)} budget"
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
                f" {duration_text(allowance)} ({MEASURING_SHARE:.0%} of the budget)"
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
    from ..distance import distance_matrix

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
    strand: str = "one",
    engine: Engine | None = None,
    cache: SizeCache | None = None,
    replicates: int = 0,
    null_pairs: int = 0,
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
    large set that favours the quicker compressors, as a large set needs. The job's time is
    estimated on the ``engine``'s workers (default: a `LocalEngine` on every core), where the
    measuring runs too, and counts ``replicates`` bootstrap matrices (tree --bootstrap) and
    ``null_pairs`` of derived's null beside the matrix.
    """
    if job not in JOBS:
        raise ValueError(f"unknown job {job!r}; use one of {', '.join(JOBS)}")
    engine = engine or LocalEngine()
    cores = engine.jobs
    if job in LABELLED_JOBS:
        report = calibrate(
            items,
            candidates or AUTO_CANDIDATES["labelled"],
            seed=seed,
            samples=2,
            sweep_seconds=1.0,
        )
        spec, figures, reasons = _choose_labelled(
            items, targets, report, budget_seconds, cores, engine, cache
        )
        return Choice(spec, job, replace(report, recommended=spec, reasons=tuple(reasons)),
                      figures, tuple(reasons))  # fmt: skip
    spec, report = choose_compressor(
        items, budget_seconds=budget_seconds, candidates=candidates, seed=seed, jobs=cores,
        strand=strand, replicates=replicates, null_pairs=null_pairs,
    )  # fmt: skip
    lengths = [len(item.data) for item in items]

    def quick(result: CompressorCalibration) -> bool:
        seconds = estimate_job_seconds(result, lengths, cores, strand, replicates=replicates,
                                       null_pairs=null_pairs)  # fmt: skip
        return seconds <= budget_seconds

    chosen, figures, extra = _check_real_pairs(items, spec, report, seed, engine, cache, quick)
    kept = (*extra, *report.reasons) if chosen == spec else (*extra, *report.reasons[1:])
    return Choice(chosen, job, replace(report, recommended=chosen, reasons=kept), figures,
                  kept)  # fmt: skip

"""The choice for a job from the job's own data: :func:`choose_for_job` goes on from the
controls' choice (:mod:`.choose`) to held-out separation of a labelled reference, or to real pairs
of unlabelled items, within the job's time budget."""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

import numpy as np

from ..cache import SizeCache
from ..compressors import AUTO_CANDIDATES, AUTO_STACKS, Compressor, compressor
from ..engine import Engine, LocalEngine
from ..items import Item
from ..measure import Progress, check_pair_count, staged
from ..origins.scores import DEFAULT_BLOCKS, DEFAULT_SIGNIFICANCE, STACK, stacked
from ..units import duration_text, size_text
from .choose import (
    DEFAULT_BUDGET_SECONDS,
    _need,
    calibrate,
    choose_compressor,
    holds,
)
from .controls import (
    _STREAM_SAMPLES,
    DEFAULT_SEED,
    _rng,
)
from .estimate import ClassifyUnit, ProposedPairs, _estimate, time_classify_unit
from .estimate import estimate_classify_seconds as estimate_classify_seconds  # re-exported
from .estimate import estimate_job_seconds as estimate_job_seconds  # re-exported
from .measure import (
    CalibrationReport,
    CompressorCalibration,
)

if TYPE_CHECKING:
    from ..origins import FoldScores
    from ..origins.classification import Views

JOBS = ("matrix", "tree", "groups", "nearest", "derived", "classify")
LABELLED_JOBS = ("classify",)
LABELLED_CANDIDATES = AUTO_CANDIDATES["labelled"]
LABELLED_STACKS = tuple(
    STACK.join(compressor(spec).spec for spec in members) for members in AUTO_STACKS["labelled"]
)
"""The stacks auto ranks beside the labelled candidates (see AUTO_STACKS), as specs."""
MEASURED_FOLDS = tuple(range(DEFAULT_BLOCKS))
"""The held-out folds of the reference a labelled candidate is measured on: all of them (three).
On two (the first and last), the figures of a 20-file reference moved by whole items from one
split to the next, and on 24 languages of code auto picked compressors that let a missing
language through: 0.64-0.77 unknown by run, 0.80 on three (bench_origins.py
--debian-code; offline replays, 4 missing rotated 0.67 and 0.81, random draws 0.81 and 0.87).
Not a gain everywhere: on this machine's 21 kinds of file one run fell from 0.56 to 0.45 (zstd 19
in place of PPMd in three rounds; the middle block, whose neighbours on both sides are in the
corpus, favours LZ matching), where an offline replay of 20 kinds rose from 0.43 to 0.54."""
TIE_ITEMS = 2
"""Candidates whose merit is within TIE_ITEMS / (items held out) of the best tie. Merit adds two
figures that each move by whole items: an item named right or not moves the accuracy by 1/n; a
missing origin's item refused or not moves the refused share by about 1/n and the AUC by up to
as much, halved in the novelty. One item's worth in each is 2/n. With 1/n (one item of the
accuracy only), two of 60 held-out log chunks let PPMd order 32 (unprimed) pass zstd 19 on
Loghub, and PPMd refused the later chunks of known systems at 0.087 (zstd 19: 0.013). Offline,
with three blocks, against 1/n: Loghub refusals 0.037 to 0.013, missing unknown on 24 languages
and Rosetta within 0.02 either way (0.828 to 0.828 and 0.873 to 0.870; 0.881 to 0.875 and 0.818
to 0.801)."""
REAL_PAIR_ITEMS = 8
SATURATED_SHARE = 0.25


@dataclass(frozen=True)
class TaskFigures:
    """What a candidate showed on the job's own data.

    Labelled jobs: on the reference held out fold by fold (see origins.FoldScores), `accuracy`
    the share of held-out items whose own origin scores best, `novelty` how well the held-out
    items of an origin left out of the reference are told from the others' (each origin left
    out in turn): the mean of `refused`, the share of them the abstention refuses at
    `significance` by the test the classification would choose (origins.novelty_detection), and
    `auc`, the better ROC AUC of the fit and separation tests (origins.novelty_aucs), free of
    any threshold, which steadies a count that moves by whole items on a small reference;
    `merit` is accuracy plus novelty, `items` the items held out, `divided` whether the content
    scores are divided by the origins' backgrounds and `shape` whether the shape view joins in,
    as the classification will decide them (see origins.Scoring; `own_score` is the median own
    score as measured); `measured_rows` and `right_rows` the held-out rows measured and those
    named right (by their place in the reference), for paired comparisons (not in as_json).
    Unlabelled jobs: on all pairs of a sample of items, `saturation` the share of distances
    at or above 1 (nothing shared found) and `contrast` the mean over items of
    1 - nearest / median distance (how much nearer an item's nearest is than its typical one).
    """

    spec: str
    seconds: float
    accuracy: float | None = None
    novelty: float | None = None
    refused: float | None = None
    auc: float | None = None
    merit: float | None = None
    significance: float | None = None
    own_score: float | None = None
    items: int = 0
    saturation: float | None = None
    contrast: float | None = None
    divided: bool | None = None
    shape: bool | None = None
    measured_rows: tuple[int, ...] = field(default=(), repr=False)
    right_rows: tuple[int, ...] = field(default=(), repr=False)

    def as_json(self) -> dict[str, object]:
        """The figures by name (not the rows behind them)."""
        skip = ("measured_rows", "right_rows")
        return {k: v for k, v in self.__dict__.items() if k not in skip}

    def summary(self) -> str:
        if self.merit is not None:
            return (
                f"held-out reference: own origin best for {self.accuracy:.1%}; a missing"
                f" origin's items refused at {self.significance:g} for {self.refused:.1%}, told"
                f" apart with AUC {self.auc:.3f}; merit {self.merit:.3f}, own score"
                f" {self.own_score:.3f}"
                + (", content scores divided by the origins' backgrounds" if self.divided else "")
                + (", with the shape view" if self.shape else "")
                + f" ({self.items} items, {self.seconds:.0f} s)"
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


def _labelled_figures(
    items: Sequence[Item],
    spec: str,
    longest: int,
    engine: Engine | None,
    cache: SizeCache | None,
    significance: float,
    progress: Progress | None = None,
    kept: dict[str, Views] | None = None,
) -> TaskFigures:
    """`spec`'s held-out figures on the reference `items` (see TaskFigures); a stack's from
    each of its compressors' measuring. Each compressor's views go to `kept` when given, by
    spec, for the stacks ranked after (_stack_figures)."""
    started = time.perf_counter()
    views = []
    for part in stacked(spec):
        views.append(_held_out_views(items, part, longest, engine, cache, progress))
        if kept is not None:
            kept[compressor(part).spec] = views[-1]
    return _views_figures(spec, views, time.perf_counter() - started, significance)


def _held_out_views(
    items: Sequence[Item],
    spec: str | Compressor,
    longest: int,
    engine: Engine | None,
    cache: SizeCache | None,
    progress: Progress | None = None,
) -> Views:
    """One compressor's held-out scores of the reference's content and shape views, measured
    on MEASURED_FOLDS as the classification's calibration measures them."""
    from ..origins import fold_scores
    from ..origins.views import shaped_items

    def held_out(given: Sequence[Item], view: str) -> FoldScores:
        told = staged(progress, f"auto trying {spec}: held-out reference, {view}")
        return fold_scores(given, spec, folds=MEASURED_FOLDS, longest=longest, engine=engine,
                           cache=cache, progress=told)  # fmt: skip

    return held_out(items, "content"), held_out(shaped_items(items), "shape")


def _views_figures(
    spec: str, views: Sequence[Views], seconds: float, significance: float
) -> TaskFigures:
    """The held-out figures of `spec` from its compressors' `views` (one each; a stack has more
    than one), as its classification's calibration would decide them."""
    from ..origins import novelty_aucs, novelty_detection
    from ..origins.classification import _both_measured, _stacked_calibration
    from ..origins.conformal import combined

    # the scoring and decision scores the classification's calibration would make of them
    ways, scores, codes = _stacked_calibration(views, choose=True)
    keep = np.logical_and.reduce([_both_measured(folds, shaped) for folds, shaped in views])
    owns = [folds.scores[keep][np.arange(len(codes)), codes] for folds, _ in views]
    # a stack's own score: the geometric mean of its compressors' (as `combined` joins views)
    own = owns[0] if len(owns) == 1 else np.exp(np.mean(np.log(owns), axis=0))
    right = combined(scores).argmin(axis=1) == codes
    accuracy = float(np.mean(right))
    own_score = float(np.median(own))
    rows = np.flatnonzero(keep)
    # NaN with too few origins to leave one out: no better than chance, nothing refused
    auc = max(novelty_aucs(scores, codes))
    auc = 0.5 if auc != auc else auc
    detected = [v for v in novelty_detection(scores, codes, significance).values() if v == v]
    refused = max(detected) if detected else 0.0
    novelty = (auc + refused) / 2
    return TaskFigures(
        spec=spec,
        seconds=seconds,
        accuracy=accuracy,
        novelty=novelty,
        refused=refused,
        auc=auc,
        merit=accuracy + novelty,
        significance=significance,
        own_score=own_score,
        items=len(codes),
        divided=any(way.content.divided for way in ways),
        shape=any(way.uses_shape for way in ways),
        measured_rows=tuple(int(r) for r in rows),
        right_rows=tuple(int(r) for r in rows[right]),
    )


def _choose_labelled(
    items: Sequence[Item],
    targets: Sequence[Item],
    report: CalibrationReport,
    budget_seconds: float,
    cores: int,
    engine: Engine | None,
    cache: SizeCache | None,
    significance: float,
    progress: Progress | None = None,
) -> tuple[str, tuple[TaskFigures, ...], list[str]]:
    """The labelled choice in three steps: the candidates that hold the largest item and whose
    job fits the budget (:func:`_within_budget`), their held-out figures within the measuring
    allowance (:func:`_measure_labelled`), and the best of those (:func:`_pick_labelled`)."""
    lengths = [len(item.data) for item in items]
    longest = max([*lengths, *(len(t.data) for t in targets)])
    reasons: list[str] = []
    timed = _within_budget(items, targets, report, budget_seconds, cores, longest, reasons)
    if not timed:
        fastest = max(report.compressors, key=lambda r: r.throughput_mb_s)
        reasons.insert(0, f"{fastest.spec}: chosen although over the budget: the fastest")
        return fastest.spec, (), reasons
    figures = _measure_labelled(
        items, len(targets), timed, budget_seconds, longest, engine, cache, significance, reasons,
        progress,
    )  # fmt: skip
    best = _pick_labelled(figures, len({item.label for item in items}), reasons)
    return best.spec, tuple(figures), reasons


def _within_budget(
    items: Sequence[Item],
    targets: Sequence[Item],
    report: CalibrationReport,
    budget_seconds: float,
    cores: int,
    longest: int,
    reasons: list[str],
) -> list[tuple[float, str]]:
    """(estimated seconds, spec) of the candidates that hold the largest item and whose whole
    classification fits the budget; why each other one is passed over goes to ``reasons``."""
    from ..origins.views import shape_share, shaped_items

    shape = shape_share([*items, *targets])
    shaped = (shaped_items(items), shaped_items(targets)) if shape else None
    timed = []
    for result in report.compressors:
        if not holds(result, longest):
            reasons.append(
                f"{result.spec}: passed over: cannot hold the largest item ({size_text(longest)})"
            )
            continue
        seconds = candidate_seconds(result, items, targets, cores, longest, shape, shaped)
        if seconds > budget_seconds:
            reasons.append(
                f"{result.spec}: passed over: the job would take {_estimate(seconds)} on {cores}"
                f" cores, over the {duration_text(budget_seconds)} budget"
            )
            continue
        timed.append((seconds, result.spec))
    return timed


def candidate_seconds(
    result: CompressorCalibration,
    items: Sequence[Item],
    targets: Sequence[Item],
    cores: int,
    longest: int,
    shape: float,
    shaped: tuple[list[Item], list[Item]] | None,
) -> float:
    """A labelled candidate's whole classification of `targets` against the reference `items`,
    estimated as auto weighs it against the budget: from its unit of work timed on the job's
    own corpus and items (:func:`classify_unit`), and, where the shape view joins in
    (`shape`, its share; `shaped`, the reference and targets in that view), the shape view's
    own unit, on `cores` cores."""
    comp = compressor(result.spec)
    return estimate_classify_seconds(
        result, [len(item.data) for item in items], len({item.label for item in items}),
        [len(t.data) for t in targets], primed=comp.primable or comp.continues, cores=cores,
        shape=shape, unit=classify_unit(comp, items, targets, longest),
        shape_unit=shaped and classify_unit(comp, *shaped, longest),
    )  # fmt: skip


UNIT_ITEMS = 3
"""Reference items `classify_unit` times against the corpus."""


def classify_unit(
    comp: Compressor, items: Sequence[Item], targets: Sequence[Item], longest: int
) -> ClassifyUnit:
    """The classification's unit of work timed with `comp` (see time_classify_unit) on the
    reference's own bytes: the corpus of the origin whose reference bytes are nearest the mean
    origin's, as the compressor's window lets it be (origins.scores.corpus_room and
    corpus_bytes), and the UNIT_ITEMS reference items nearest the mean length of every item.
    The job scores every item against every origin's corpus, so its cost is the sum over
    origins: the mean origin's, not the median's, times their number. pip's 20 vendored
    projects as a reference (34 KB to 4.2 MB each, median 179 KB, mean 520 KB): lzma 9 timed on
    the median origin put the content view at 99 s, on the mean one at 477 s; measuring it took
    1,179 s (both views), and the run 22 minutes against a 10-minute budget. lzma's cost per
    item then grew faster than its corpus (2.2 times the bytes, 6.5 times the time): its kept
    state had left most of a corpus of megabytes to be encoded again with each item, since fixed
    (see compressors.lzma)."""
    from ..origins.scores import corpus_bytes, corpus_room

    by_origin: dict[object, list[bytes]] = {}
    for item in items:
        by_origin.setdefault(item.label, []).append(item.data)
    totals = {origin: sum(map(len, datas)) for origin, datas in by_origin.items()}
    mean = sum(totals.values()) / max(len(totals), 1)
    typical = min(sorted(totals, key=str), key=lambda origin: abs(totals[origin] - mean))
    corpus = corpus_bytes(by_origin[typical], corpus_room(comp, longest))
    length = sum(len(x.data) for x in [*items, *targets]) / max(len(items) + len(targets), 1)
    nearest = sorted(items, key=lambda item: abs(len(item.data) - length))[:UNIT_ITEMS]
    return time_classify_unit(comp, corpus, [item.data for item in nearest], longest)


def _measure_labelled(
    items: Sequence[Item],
    targets: int,
    timed: Sequence[tuple[float, str]],
    budget_seconds: float,
    longest: int,
    engine: Engine | None,
    cache: SizeCache | None,
    significance: float,
    reasons: list[str],
    progress: Progress | None = None,
) -> list[TaskFigures]:
    """Held-out figures of the ``timed`` candidates, quickest first, while the job's worst case
    still fits the budget (the first is always measured); those left out go to ``reasons``.
    A candidate whose measuring took longer than its estimate counts at that pace, its rest too.

    Measuring a candidate runs the reference part of its job (its held-out folds); the winner's
    classification reuses those sizes (its calibration is then done) and adds the rest. So the
    job takes at most every measured candidate's measuring plus the largest rest of one of them,
    and a candidate is measured only if that stays within ``budget_seconds``. The measuring thus
    takes what the winner's rest leaves of the budget, not a fixed share: with half of a 10-min
    budget, PPMd order 32 on 24 languages of code (estimated 7-9 min, of which 3-4 measuring,
    beside about 2 min for the quicker candidates) was measured or not as the machine's speed
    drifted by a fifth, and zstd 19 won where PPMd names more (bench_origins.py
    --debian-code)."""
    figures: list[TaskFigures] = []
    spent = rest = 0.0
    n = len(items)
    views: dict[str, Views] = {}
    rests: dict[str, float] = {}
    for seconds, spec in sorted(timed):
        share = seconds * n / (n + targets) * len(MEASURED_FOLDS) / DEFAULT_BLOCKS
        worst = spent + share + max(rest, seconds - share)
        if figures and worst > budget_seconds:
            reasons.append(
                f"{spec}: passed over: measuring it too could bring the job to"
                f" {_estimate(worst)}, over the {duration_text(budget_seconds)} budget (each"
                " candidate measured, then the rest of the slowest one's classification, at the"
                " pace measuring showed where it was slower than estimated)"
            )
            continue
        measured = _labelled_figures(
            items, spec, longest, engine, cache, significance, progress, views
        )
        # What measuring took tells how far the estimate undershot this candidate's job: its
        # rest is scaled as its share was (never down: sizes the cache held cost nothing here,
        # but the rest's will be computed). PPMd order 32 on pip's 20 vendored projects: the
        # job took 1.6 times its estimate, every part of it alike.
        slower = max(1.0, measured.seconds / share) if share > 0 else 1.0
        rests[spec] = (seconds - share) * slower
        spent, rest = spent + share * slower, max(rest, rests[spec])
        figures.append(measured)
    return figures + _stack_figures(figures, views, rests, spent, budget_seconds, significance,
                                    reasons)  # fmt: skip


def _stack_figures(
    figures: Sequence[TaskFigures],
    views: dict[str, Views],
    rests: dict[str, float],
    spent: float,
    budget_seconds: float,
    significance: float,
    reasons: list[str],
) -> list[TaskFigures]:
    """Held-out figures of each stack (LABELLED_STACKS) whose compressors were all measured and
    whose classification fits the budget: the measuring done, then the rest of every one of its
    compressors' jobs. Its figures join its compressors' views; nothing is compressed again."""
    seconds = {f.spec: f.seconds for f in figures}
    out = []
    for spec in LABELLED_STACKS:
        parts = [compressor(part).spec for part in stacked(spec)]
        if not all(part in views for part in parts):
            continue
        worst = spent + sum(rests[part] for part in parts)
        if worst > budget_seconds:
            reasons.append(
                f"{spec}: passed over: classifying with each of its compressors could bring the"
                f" job to {_estimate(worst)}, over the {duration_text(budget_seconds)} budget"
            )
            continue
        took = sum(seconds[part] for part in parts)
        out.append(_views_figures(spec, [views[part] for part in parts], took, significance))
    return out


def _pick_labelled(figures: Sequence[TaskFigures], m: int, reasons: list[str]) -> TaskFigures:
    """The best of the measured ``figures`` (of a reference of ``m`` origins): its reason first
    in ``reasons``, then why each other one was passed over.

    A stack measured (LABELLED_STACKS) is the choice unless a single compressor separates the
    held-out reference significantly better (_better_than_stack); otherwise the stack is set
    aside and the best single compressor is chosen as below."""
    stacks = [f for f in figures if len(stacked(f.spec)) > 1]
    if stacks:
        stack = max(stacks, key=lambda f: f.merit or 0.0)
        singles = [f for f in figures if len(stacked(f.spec)) == 1]
        better = {f.spec: why for f in singles if (why := _better_than_stack(f, stack, singles))}
        if not better:
            reasons.insert(
                0,
                f"{stack.spec}: chosen: no single compressor separates the reference's {m}"
                " origins significantly better on held-out items, and a stack's views miss less"
                f" of what drifts; {stack.summary()}",
            )
            reasons.extend(
                f"{f.spec}: passed over: "
                + (
                    "a stack of its compressors and others is chosen"
                    if f in stacks
                    else "not significantly better than the stack on held-out items"
                )
                + f"; {f.summary()}"
                for f in figures
                if f is not stack
            )
            return stack
        best = _pick_labelled(singles, m, reasons)
        named = best.spec if best.spec in better else next(iter(better))
        reasons.extend(
            f"{f.spec}: passed over: {named} separates the origins significantly better"
            f" ({better[named]}); {f.summary()}"
            for f in stacks
        )
        return best
    top = max(f.merit or 0.0 for f in figures)
    tie = TIE_ITEMS / max(figures[0].items, 1)
    tied = [f for f in figures if (f.merit or 0.0) >= top - tie]
    # Held-out figures saturate on easy references (every candidate 100 %), so among equals:
    # one primed with the corpus first (it measures C(x | corpus) directly, where concatenation
    # takes the difference of two sizes of the whole corpus, whose noise grows with it), then
    # the one that explains held-out items best by their own origin (lowest own score: a
    # compressor only ever overestimates what is shared, and one that finds little parts an
    # easy reference but not data that drifts), then the quickest (figures are in order of
    # estimated job time). PPMd's concatenation adds x's code after the corpus's model, as
    # direct as priming, but ranking it with the primed ones refused 10 % of later chunks of
    # known programs on this machine's logs (zstd 19: 2.5 %), where it raised a missing
    # language's unknown share on 24 languages of code from 0.817 to 0.836 (bench_origins.py).
    best = min(tied, key=_tie_key)
    reasons.insert(
        0,
        f"{best.spec}: chosen: it tells the reference's {m} origins apart best on held-out"
        " items (of those within an item's worth in each figure of the best: primed ones first,"
        " then the lowest own score, then the quickest);"
        f" {best.summary()}",
    )
    for f in figures:
        if f is best:
            continue
        why = _tie_broken(f, best) if f in tied else "separates the origins less"
        reasons.append(f"{f.spec}: passed over: {why}; {f.summary()}")
    return best


def _better_than_stack(
    single: TaskFigures, stack: TaskFigures, singles: Sequence[TaskFigures]
) -> str | None:
    """Why `single` separates the held-out reference significantly better than `stack`, or
    None: it names more held-out items right by an exact sign test on the items one of the two
    names right and the other not (McNemar's test), or refuses more of a missing origin's items
    by Fisher's exact test on the counts, one-sided, each at DEFAULT_SIGNIFICANCE shared among
    the two figures of every single candidate (Bonferroni). The stack goes first otherwise, as a
    prior: the held-out figures of several candidates saturate and move by whole items, and the
    best of them beats the rest by chance on most references, while a reference cannot show how
    its later data drifts, and drift hits compressors unlike. With default options
    (bench_origins.py, the stack chosen in every round): this machine's second set of logs
    0.996 named right / 0.004 refused / 1.000 of missing chunks unknown, where auto had chosen
    zstd 3 in three rounds of four (0.879 / 0.121 / 1.000: it beat the stack's held-out figures
    by two or three items, not significant by the sign test, and refused 15 % of a drifted
    program's later chunks); Rosetta 0.983 / 0.017 / 0.894 (0.963 / 0.035 / 0.912), its random
    splits 0.961 / 0.019 / 0.758 (0.950 / 0.033 / 0.725); 24 languages 0.960 / 0.040 / 0.824
    (0.962 / 0.038 / 0.817), random 0.960 / 0.040 / 0.929 (0.958 / 0.042 / 0.933); Loghub, the
    first machine log set and UDHR as before or better; this machine's 21 kinds of file 0.928 /
    0.050 / 0.575, a little worse (0.938 / 0.043 / 0.579). Ranked by merit with the stack only
    first among equals, the best of seven held-out figures pushed it out of the band there."""
    from scipy.stats import binomtest, fisher_exact

    rate = DEFAULT_SIGNIFICANCE / (2 * max(len(singles), 1))
    common = set(single.measured_rows) & set(stack.measured_rows)
    mine, theirs = set(single.right_rows) & common, set(stack.right_rows) & common
    gained, lost = len(mine - theirs), len(theirs - mine)
    if gained > lost:
        p = binomtest(gained, gained + lost, 0.5, alternative="greater").pvalue
        if p <= rate:
            return f"{gained} held-out items more named right, {lost} fewer: sign test p = {p:.2g}"
    n, k, k_stack = (
        single.items,
        round((single.refused or 0) * single.items),
        round((stack.refused or 0) * stack.items),
    )
    if k > k_stack and n:
        p = fisher_exact([[k, n - k], [k_stack, stack.items - k_stack]], "greater").pvalue
        if p <= rate:
            return f"a missing origin's items refused {k} of {n} against {k_stack}: p = {p:.2g}"
    return None


def _tie_key(f: TaskFigures) -> tuple[bool, float]:
    """How _pick_labelled orders tied single compressors, least first: unprimed after primed,
    then by own score (then the quickest, by the figures' order)."""
    return not compressor(f.spec).primable, f.own_score or 1.0


def _tie_broken(passed: TaskFigures, best: TaskFigures) -> str:
    """Why ``passed``, tied with ``best`` in merit, lost: the first component of _tie_key that
    told them apart (see _pick_labelled)."""
    merit = (passed.merit or 0.0) - (best.merit or 0.0)
    level = (
        f"separates {merit:.3f} better in merit, within an item's worth" if merit > 0
        else "separates as well (within an item's worth)"
    )  # fmt: skip
    (unprimed, own), (best_unprimed, best_own) = _tie_key(passed), _tie_key(best)
    if unprimed > best_unprimed:
        return f"{level}, but cannot be primed with the corpus"
    if own > best_own:
        return (
            f"{level}, but explains held-out items by their own origin less well (own score"
            f" {passed.own_score:.3f} against {best.own_score:.3f})"
        )
    return f"{level}, but is slower"


def _real_pair_figures(
    items: Sequence[Item],
    spec: str,
    seed: int,
    engine: Engine | None,
    cache: SizeCache | None,
    progress: Progress | None = None,
) -> TaskFigures:
    from ..distance import distance_matrix

    started = time.perf_counter()
    rng = _rng(seed, _STREAM_SAMPLES)
    distinct = list({item.data: item for item in items if item.data}.values())
    chosen = sorted(rng.choice(len(distinct), min(REAL_PAIR_ITEMS, len(distinct)), replace=False))
    sample = [distinct[k] for k in chosen]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        told = staged(progress, f"auto trying {spec}: a sample of real pairs")
        matrix = distance_matrix(sample, spec, engine=engine, cache=cache, progress=told)
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
    progress: Progress | None = None,
) -> tuple[str, tuple[TaskFigures, ...], list[str]]:
    """The controls' choice, unless a sample of real pairs shows it finds nothing shared
    (more than SATURATED_SHARE of distances at or above 1) where the next candidates by quality
    do not: then the best of those by contrast."""
    if len({item.data for item in items}) < 3:
        return spec, (), []
    chosen = _real_pair_figures(items, spec, seed, engine, cache, progress)
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
        figures.append(_real_pair_figures(items, other.spec, seed, engine, cache, progress))
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


def check_job_inputs(items: Sequence[Item], job: str) -> None:
    """Raise InputError where ``items`` cannot serve a job of kind ``job``, before anything is
    measured: a labelled reference that cannot be held out (origins.check_reference), or fewer
    than two items to compare."""
    if job in LABELLED_JOBS:
        from ..origins import check_reference

        check_reference(items, auto=True)
    else:
        check_pair_count(items)


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
    significance: float = DEFAULT_SIGNIFICANCE,
    progress: Progress | None = None,
    proposed: ProposedPairs | None = None,
) -> Choice:
    """The compressor ``-c auto`` uses for a job of kind ``job`` (one of JOBS) on ``items``.

    Every job first calibrates the candidates on controls (:func:`calibrate`), which guard
    against windows too small and report biases and speed. A labelled job (classify: ``items``
    is the labelled reference, ``targets`` the items to classify) then ranks the candidates
    whose whole job fits ``budget_seconds`` by how well they separate the reference's own
    origins held out fold by fold (origins.fold_report): named right, and refused at
    ``significance`` when their origin is missing; among those within TIE_ITEMS items' worth of
    the best, a primed one, then the lowest own score, then the quickest wins (_pick_labelled).
    Candidates are measured while the job's worst case (each measured, then the rest of the
    slowest one's classification) fits the budget (_measure_labelled); the held-out sizes are
    measured through the size cache, so the winner's calibration reuses them. An unlabelled
    job (matrix, tree, groups, derived) takes :func:`choose_compressor`'s choice unless a sample
    of real pairs shows that it finds nothing shared (see ``_check_real_pairs``). The budget is
    checked against a full matrix's time even for nearest, which measures far fewer pairs: on a
    large set that favours the quicker compressors, as a large set needs. The job's time is
    estimated on the ``engine``'s workers (default: a `LocalEngine` on every core), where the
    measuring runs too, and counts ``replicates`` bootstrap matrices (tree --bootstrap) and
    ``null_pairs`` of derived's null beside the matrix, and ``proposed``, the pairs a job that
    measures fewer than the matrix's measures in their place (derived). ``progress`` is told
    how the measuring goes, each phase named by the candidate and what it measures ("pairs
    (auto trying lzma: held-out reference, content)").
    """
    if job not in JOBS:
        raise ValueError(f"unknown job {job!r}; use one of {', '.join(JOBS)}")
    engine = engine or LocalEngine()
    cores = engine.jobs
    check_job_inputs(items, job)  # before anything is measured
    if job in LABELLED_JOBS:
        report = calibrate(
            items,
            candidates or AUTO_CANDIDATES["labelled"],
            seed=seed,
            samples=2,
            sweep_seconds=1.0,
            progress=progress,
        )
        spec, figures, reasons = _choose_labelled(
            items, targets, report, budget_seconds, cores, engine, cache, significance, progress
        )
        return Choice(spec, job, replace(report, recommended=spec, reasons=tuple(reasons)),
                      figures, tuple(reasons))  # fmt: skip
    spec, report = choose_compressor(
        items, budget_seconds=budget_seconds, candidates=candidates, seed=seed, cores=cores,
        strand=strand, replicates=replicates, null_pairs=null_pairs, proposed=proposed,
        progress=progress,
    )  # fmt: skip
    lengths = [len(item.data) for item in items]

    def quick(result: CompressorCalibration) -> bool:
        seconds = estimate_job_seconds(result, lengths, cores, strand, replicates=replicates,
                                       null_pairs=null_pairs, proposed=proposed)  # fmt: skip
        return seconds <= budget_seconds

    chosen, figures, extra = _check_real_pairs(
        items, spec, report, seed, engine, cache, quick, progress
    )
    kept = (*extra, *report.reasons) if chosen == spec else (*extra, *report.reasons[1:])
    return Choice(chosen, job, replace(report, recommended=chosen, reasons=kept), figures,
                  kept)  # fmt: skip

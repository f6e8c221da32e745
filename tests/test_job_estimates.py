"""Job-time estimates count all the work a job does (tree --bootstrap replicates, derived's null),
and progress off a terminal says something every few seconds even while no report arrives."""

from __future__ import annotations

import io
import time
from pathlib import Path
from typing import Any

import pytest

from conftest import DATASETS
from kinpress import calibration, cli
from kinpress.calibration import (
    CompressorCalibration,
    Normality,
    ProposedPairs,
    estimate_job_seconds,
)
from kinpress.calibration.choose import choose_compressor
from kinpress.cli import Console
from kinpress.cli._console import _Pace
from kinpress.derived import default_null_pairs, propose
from kinpress.items import Item, load_items

GENOMES = DATASETS / "karsvell-frogs" / "genomes"


def _calibrated(throughput_mb_s: float) -> CompressorCalibration:
    """A calibration with only a throughput that matters: the estimate reads nothing else."""
    return CompressorCalibration(
        spec="zstd:level=3", window_bytes=None, identity_bias=0.0, independence=1.0,
        shuffle_similarity=0.0, mutation_monotonicity=1.0, mutation_resolution=0.01,
        reliable_up_to_bytes=1 << 30, reliable_capped=False, overhead_bytes=0,
        throughput_mb_s=throughput_mb_s, normality=Normality(0.0, 0.0, 0.0, 0.0, 0),
        size_sweep=(), mutation_ladder=(), block_moves=(), seconds=0.0,
    )  # fmt: skip


def test_bootstrap_replicates_each_count_as_a_whole_matrix() -> None:
    # Each replicate resamples the items to their own lengths and measures a whole matrix again
    # (support.bootstrap_support), so N replicates make the job N + 1 matrices.
    result = _calibrated(1.0)
    lengths = [1000, 2000, 3000]
    alone = estimate_job_seconds(result, lengths, 1)
    with_ten = estimate_job_seconds(result, lengths, 1, replicates=10)
    assert alone == pytest.approx((6000 + 4 * 6000) / 1e6)  # the module's own account
    assert with_ten == pytest.approx(11 * alone)
    both = estimate_job_seconds(result, lengths, 1, "both", replicates=10)
    assert both == pytest.approx(11 * estimate_job_seconds(result, lengths, 1, "both"))


def test_derived_null_pairs_add_their_measurement() -> None:
    # derived's default null: ceil(3 / max_fpr) pairs (derived.find_derived), each measured both
    # ways against material of a partner's size: 5 mean items of bytes a pair.
    assert default_null_pairs(0.01) == 300 and default_null_pairs(0.05) == 60
    result = _calibrated(1.0)
    lengths = [1000, 2000, 3000]
    alone = estimate_job_seconds(result, lengths, 1)
    with_null = estimate_job_seconds(result, lengths, 1, null_pairs=300)
    assert with_null - alone == pytest.approx(300 * 5 * 2000 / 1e6)


def test_a_budget_the_matrix_fits_but_its_replicates_do_not_is_said_so() -> None:
    items = [Item(f"t{k}", bytes(range(256)) * 16 * (k + 1), "") for k in range(3)]
    _, plain = choose_compressor(items, candidates=["zlib:level=1"], budget_seconds=600)
    assert "bootstrap" not in plain.reasons[-1]
    _, report = choose_compressor(items, candidates=["zlib:level=1"], budget_seconds=600,
                                  replicates=10, null_pairs=300)  # fmt: skip
    assert "(the matrix and 10 bootstrap replicates and 300 null pairs)" in report.reasons[-1]
    # derived's job: the pairs its prefilter proposes, both ways, in place of the matrix
    proposed = ProposedPairs.of([(0, 2)], [len(item.data) for item in items])
    _, derived = choose_compressor(items, candidates=["zlib:level=1"], budget_seconds=600,
                                   null_pairs=300, proposed=proposed)  # fmt: skip
    assert "(the 1 pair to check, both ways, and 300 null pairs)" in derived.reasons[-1]


def test_derived_counts_the_pairs_its_prefilter_proposes_not_the_matrix() -> None:
    # Go's source tree: every pair of 8,146 files put the job at 30.9 h; the prefilter proposed
    # 60 thousand of the 33 million pairs and the run took 19 minutes. The estimate counts the
    # proposed pairs, each both ways (C(ab) and C(ba): both items twice), in the matrix's place.
    result = _calibrated(1.0)
    lengths = [1000, 2000, 3000, 4000]
    proposed = ProposedPairs.of([(0, 1), (2, 3)], lengths)
    assert proposed == ProposedPairs(2, 2 * (1000 + 2000) + 2 * (3000 + 4000))
    found = estimate_job_seconds(result, lengths, 1, proposed=proposed)
    assert found == pytest.approx((10_000 + proposed.fed) / 1e6)
    assert found < estimate_job_seconds(result, lengths, 1)
    every = ProposedPairs.every(lengths)
    all_pairs = [(i, j) for i in range(4) for j in range(i + 1, 4)]
    assert every == ProposedPairs.of(all_pairs, lengths)


def _fake_auto(calls: list[dict[str, object]]) -> object:
    def auto_choice(items: object, job: str, **options: object) -> tuple[str, None]:
        calls.append({"job": job, **options})
        return "zstd:level=1", None

    return auto_choice


def test_auto_on_the_command_line_counts_bootstrap_and_null(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    calls: list[dict[str, object]] = []
    monkeypatch.setattr(calibration, "auto_choice", _fake_auto(calls))
    tree = ["tree", str(GENOMES), "-c", "auto", "--no-cache", "--quiet", "--strand", "both"]
    assert cli.main([*tree, "--bootstrap", "2", "-o", str(tmp_path / "t.nwk")]) == 0
    assert cli.main(["derived", str(GENOMES), "-c", "auto", "--no-cache", "--quiet",
                     "--max-fpr", "0.05", "-o", str(tmp_path / "d.txt")]) == 0  # fmt: skip
    assert [(c["job"], c["replicates"], c["null_pairs"]) for c in calls] == [
        ("tree", 2, 0), ("derived", 0, 60),
    ]  # fmt: skip
    # derived's estimate counts the pairs its prefilter proposes (those it then checks)
    items = load_items([GENOMES])
    expected = ProposedPairs.of(propose(items).pairs, [len(item.data) for item in items])
    assert calls[1]["proposed"] == expected
    assert expected.pairs < len(items) * (len(items) - 1) // 2


class _FakeClock:
    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now


def test_progress_lines_come_at_most_once_an_interval_by_the_clock() -> None:
    clock, stream = _FakeClock(), io.StringIO()  # not a terminal
    console = Console(quiet=False, stream=stream, line_seconds=1e6, clock=clock)
    with console.progress() as update:
        assert update is not None
        update("pairs", 0, 100)
        clock.now = 0.5
        update("pairs", 10, 100)  # under the interval since the start: nothing
        assert stream.getvalue() == ""
    console = Console(quiet=False, stream=stream, line_seconds=2.0, clock=clock)
    clock.now = 10.0
    with console.progress() as update:
        assert update is not None
        update("pairs", 0, 100)
        clock.now = 13.0
        update("pairs", 30, 100)
        clock.now = 14.0
        update("pairs", 40, 100)  # 1 s after the last line: nothing
    lines = stream.getvalue().splitlines()
    assert lines == ["kinpress: pairs: 30 of 100 done (30%), about 7 s left"]


def test_a_long_silence_still_prints_a_line_off_a_terminal() -> None:
    stream = io.StringIO()
    console = Console(quiet=False, stream=stream, line_seconds=0.02)
    with console.progress() as update:
        assert update is not None
        update("replicates", 0, 4)
        time.sleep(0.2)  # one replicate running: no report comes
    text = stream.getvalue()
    assert "replicates: 0 of 4 done, still working" in text
    quiet = io.StringIO()
    with Console(quiet=True, stream=quiet, line_seconds=0.02).progress() as update:
        time.sleep(0.05)
    assert update is None and quiet.getvalue() == ""


class _Clock:
    """A clock that a compression moves on by one second per MB it reads (plus a fixed 0.01 s
    per call): time_classify_unit's timings become exact."""

    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now

    def spend(self, data: bytes) -> None:
        self.now += 0.01 + len(data) / 1e6


def _clocked(monkeypatch: pytest.MonkeyPatch, spec: str) -> tuple[_Clock, Any]:
    from kinpress.calibration import estimate
    from kinpress.compressors import compressor

    clock = _Clock()
    monkeypatch.setattr(estimate.time, "perf_counter", clock)
    comp = compressor(spec)
    real_size, real_primed = comp.size, comp.primed

    def size(data: bytes) -> int:
        clock.spend(data)
        return real_size(data)

    def primed(reference: bytes, data_size: int = 0) -> Any:
        clock.spend(reference)
        ready = real_primed(reference, data_size)
        real = ready.size

        def ready_size(data: bytes) -> int:
            clock.spend(data)
            return real(data)

        ready.size = ready_size  # type: ignore[method-assign]
        return ready

    comp.size = size  # type: ignore[method-assign]
    comp.primed = primed  # type: ignore[method-assign]
    return clock, comp


def test_a_classification_unit_is_timed_as_the_job_does_it(monkeypatch: pytest.MonkeyPatch) -> None:
    # The module's own account, on a clock each compression moves by 0.01 s + 1 s per MB: by
    # concatenation an item costs C(corpus + x); primed, the corpus is read once and each item
    # alone, as from a state kept after the corpus; the nearest-item search costs C(y + x) of
    # two items either way. A corpus over
    # UNIT_CORPUS_BYTES is timed on its first that-many bytes and scaled by length.
    from kinpress.calibration.estimate import UNIT_CORPUS_BYTES, time_classify_unit

    corpus, items = b"ab" * 50_000, [b"x" * 1000, b"y" * 3000]
    _, bz2 = _clocked(monkeypatch, "bz2:level=1")  # it keeps no state after a prefix
    assert not bz2.continues
    unit = time_classify_unit(bz2, corpus, items)
    assert unit.pair == pytest.approx(0.01 + 101_000 / 1e6)  # the quicker of the two items
    assert unit.prepare == pytest.approx(0.01 + 100_000 / 1e6)
    assert unit.near == pytest.approx(0.01 + 4_000 / 1e6)
    _, zstd = _clocked(monkeypatch, "zstd:level=3")
    assert zstd.primable
    primed = time_classify_unit(zstd, corpus, items)
    assert primed.pair == pytest.approx(0.01 + 1_000 / 1e6)
    assert primed.prepare == pytest.approx(0.01 + 100_000 / 1e6)
    # an adapter that keeps its state after the corpus (Compressor.after, as PPMd and lzma do): the
    # corpus compressed alone for C(y) and once into the state, then each item alone
    clock, kept = _clocked(monkeypatch, "lzma:level=1")

    class Kept:
        def __init__(self, prefix: bytes) -> None:
            clock.spend(prefix)

        def size(self, data: bytes) -> int:
            clock.spend(data)
            return 0

    kept.after = Kept  # type: ignore[method-assign]
    continued = time_classify_unit(kept, corpus, items)
    assert continued.prepare == pytest.approx(2 * (0.01 + 100_000 / 1e6))
    assert continued.pair == pytest.approx(0.01 + 1_000 / 1e6)
    large = b"ab" * UNIT_CORPUS_BYTES
    _, bz2 = _clocked(monkeypatch, "bz2:level=1")
    scaled = time_classify_unit(bz2, large, items)
    timed = UNIT_CORPUS_BYTES + 2000  # the mean item
    assert scaled.pair == pytest.approx(
        (0.01 + (UNIT_CORPUS_BYTES + 1000) / 1e6) * (len(large) + 2000) / timed
    )


def test_a_classification_estimate_counts_folds_targets_and_the_nearest_search() -> None:
    # 3 origins of 4 reference items of 1 kB (corpus 4 kB), 2 targets of 1 kB, 3 blocks: held-out
    # items meet corpora of two thirds, so by concatenation their pairs cost (2/3 * 4000 + 1000)
    # / 5000 of a whole one; each corpus is made ready blocks + 1 times; each target is compared
    # with the 4 items of one origin. One core.
    from kinpress.calibration.estimate import ClassifyUnit, estimate_classify_seconds

    unit = ClassifyUnit(prepare=2.0, pair=1.0, near=0.5)
    result = _calibrated(1.0)
    concat = estimate_classify_seconds(result, [1000] * 12, 3, [1000] * 2, cores=1, unit=unit)
    fold = (2 / 3 * 4000 + 1000) / 5000
    assert concat == pytest.approx(12 * 3 * fold * 1.0 + 2 * 3 * 1.0 + 3 * 4 * 2.0 + 2 * 4 * 0.5)
    primed = estimate_classify_seconds(
        result, [1000] * 12, 3, [1000] * 2, cores=1, unit=unit, primed=True, shape=0.5
    )
    assert primed == pytest.approx((12 * 3 + 2 * 3 + 3 * 4 * 2.0) * 1.5 + 2 * 4 * 0.5)
    # the shape view at its own timed unit, not at its share of the bytes
    shaped = ClassifyUnit(prepare=1.0, pair=0.75)
    both = estimate_classify_seconds(
        result, [1000] * 12, 3, [1000] * 2, cores=1, unit=unit, primed=True, shape=0.5,
        shape_unit=shaped,
    )  # fmt: skip
    assert both == pytest.approx(
        (12 * 3 + 2 * 3) * (1.0 + 0.75) + 3 * 4 * (2.0 + 1.0) + 2 * 4 * 0.5
    )


def test_auto_for_a_labelled_job_times_the_job_not_the_samples() -> None:
    # The calibrated throughput comes from a few samples of a few kB; told it is a thousand
    # times slower than it is, the budget check still lets a quick compressor through, because
    # it times the job's own corpus and items.
    from dataclasses import replace

    from kinpress.calibration import job

    items = [
        Item(f"{origin}{k}", (origin * 40 + f" line {k} " * 30).encode(), "", label=origin)
        for origin in ("alpha", "beta", "gamma")
        for k in range(6)
    ]
    _, report = choose_compressor(items, candidates=["zlib:level=6"])
    slow = replace(report, compressors=tuple(
        replace(r, throughput_mb_s=r.throughput_mb_s / 1000) for r in report.compressors
    ))  # fmt: skip
    sizes = [len(i.data) for i in items]
    lengths_only = calibration.estimate_classify_seconds(slow.compressors[0], sizes, 3, sizes)
    reasons: list[str] = []
    kept = job._within_budget(items, items, slow, lengths_only / 10, 2, max(sizes), reasons)
    assert [spec for _, spec in kept] == [report.compressors[0].spec], reasons
    assert kept[0][0] < lengths_only / 10


def test_candidates_are_measured_while_the_jobs_worst_case_fits_the_budget(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # Measuring a candidate runs the reference's share of its job; the winner's classification
    # reuses it and adds the rest. The job's worst case is every measured candidate's share plus
    # the largest rest (job._measure_labelled), and it must stay within the budget.
    from kinpress.calibration import job

    measured: list[str] = []

    def figures(items: object, spec: str, *rest: object) -> job.TaskFigures:
        measured.append(spec)
        return job.TaskFigures(spec=spec, seconds=0.0)

    monkeypatch.setattr(job, "_labelled_figures", figures)
    items = [Item(f"r{k}", b"x", "", label=str(k % 4)) for k in range(40)]
    targets = 60  # the reference is 40 / 100 of the pairs: a job of s seconds shares 0.4 s
    timed = [(10.0, "a"), (100.0, "b"), (400.0, "c"), (550.0, "d"), (90.0, "e")]
    reasons: list[str] = []
    job._measure_labelled(items, targets, timed, 600.0, 1, None, None, 0.05, reasons)
    # by hand, quickest first: a 4 + 6 = 10; e 4 + 36 + 54 = 94; b 40 + 40 + 60 = 140;
    # c 80 + 160 + 240 = 480; d 240 + 220 + 330 = 790 > 600, passed over
    assert measured == ["a", "e", "b", "c"]
    assert len(reasons) == 1 and reasons[0].startswith("d: passed over: measuring it too")
    assert "13 min" in reasons[0] and "over the 10 min budget" in reasons[0]

    def worst(chosen: list[str]) -> float:
        jobs = [s for s, spec in timed if spec in chosen]
        return sum(0.4 * s for s in jobs) + max(0.6 * s for s in jobs)

    assert worst(measured) <= 600 < worst([*measured, "d"])
    # the quickest is measured even when its job alone is over the budget
    measured.clear()
    job._measure_labelled(items, targets, [(900.0, "slow")], 600.0, 1, None, None, 0.05, [])
    assert measured == ["slow"]


def test_a_candidate_slower_than_its_estimate_counts_at_the_pace_measuring_showed(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # The estimate times a unit of work; the job adds what the unit does not hold (PPMd on
    # pip's vendored projects took 1.6 times its estimate). Measuring a candidate is its share
    # of the job, timed: where it took longer than estimated, its share and its rest count at
    # that pace when the next candidate's worst case is weighed; never quicker (sizes the cache
    # held cost nothing, the rest's will not be cached).
    from kinpress.calibration import job

    measured: list[str] = []
    timed = [(150.0, "a"), (400.0, "b")]
    pace = {"a": 3.0, "b": 1.0}

    def figures(items: object, spec: str, *rest: object) -> job.TaskFigures:
        measured.append(spec)
        share = 0.4 * {s: t for t, s in timed}[spec]  # the reference: 40 of every 100 pairs
        return job.TaskFigures(spec=spec, seconds=share * pace[spec])

    monkeypatch.setattr(job, "_labelled_figures", figures)
    items = [Item(f"r{k}", b"x", "", label=str(k % 4)) for k in range(40)]
    reasons: list[str] = []
    job._measure_labelled(items, 60, timed, 600.0, 1, None, None, 0.05, reasons)
    # a: share 60, measured in 180, rest 90 * 3 = 270; b: 180 + 160 + max(270, 240) = 610 >
    # 600, passed over, where as estimated 60 + 160 + 240 = 460 would have fitted
    assert measured == ["a"] and reasons[0].startswith("b: passed over: measuring it too")
    assert "at the pace measuring showed" in reasons[0]
    # measured quicker than estimated (its sizes cached), a counts as estimated: b fits
    pace["a"] = 0.0
    measured.clear()
    job._measure_labelled(items, 60, timed, 600.0, 1, None, None, 0.05, [])
    assert measured == ["a", "b"]


def test_steady_reports_are_not_crowded_out_by_the_watch() -> None:
    # The watch wakes every interval; while reports keep coming it stays quiet, so the lines
    # are the reports' own, which say how long is left.
    pace = _Pace(5.0, 0.0)
    assert not pace.report(1.0, True)  # under the interval since the start
    assert not pace.silence(5.0)  # a report came 4 s ago
    assert pace.report(6.0, True)  # a line, with the time left
    assert not pace.silence(10.0)  # 4 s after that line
    assert not pace.report(10.5, True)
    assert not pace.silence(15.0)  # a line 9 s ago, but a report 4.5 s ago
    assert pace.report(15.5, True)
    # a long tile: no report for over an interval, so the watch says work goes on
    assert pace.silence(21.0)
    assert not pace.silence(23.0)  # at most one line an interval
    # a phase's start or end (nothing countable) does not keep the watch quiet
    assert not pace.report(26.5, False)
    assert pace.silence(27.0)


def test_the_time_left_is_reckoned_from_the_rate_since_a_phase_began() -> None:
    # Sizes found in the cache count as done at once: 40 of 100 at the first report is not
    # 40 done in no time (which would say "about 0 s left").
    clock, stream = _FakeClock(), io.StringIO()
    console = Console(quiet=False, stream=stream, line_seconds=2.0, clock=clock)
    with console.progress() as update:
        assert update is not None
        clock.now = 3.0
        update("pairs (items)", 40, 100)  # the phase's first report: no rate yet
        clock.now = 6.0
        update("pairs (items)", 50, 100)  # 10 in 3 s: 50 more take 15 s
    lines = stream.getvalue().splitlines()
    assert lines == [
        "kinpress: pairs (items): 40 of 100 done (40%)",
        "kinpress: pairs (items): 50 of 100 done (50%), about 15 s left",
    ]


def test_a_classification_unit_is_timed_on_the_mean_origins_corpus(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # Every item meets every origin's corpus, so the job's cost is the sum over origins: the
    # unit is timed on the origin nearest the mean reference bytes, not the median (pip's 20
    # vendored projects, 34 KB to 4.2 MB: lzma 9 timed on the median put the content view at
    # 99 s, on the mean at 477 s; measuring it took 1,179 s).
    from kinpress import compressor
    from kinpress.calibration import job

    sizes = {"a": 10_000, "b": 20_000, "c": 30_000, "d": 40_000, "e": 900_000}
    items = [Item(f"{o}{k}", bytes([65 + k]) * (n // 4), "", label=o)
             for o, n in sizes.items() for k in range(4)]  # fmt: skip
    timed: list[bytes] = []

    def fake(comp: object, corpus: bytes, datas: object, longest: int = 0) -> object:
        timed.append(corpus)
        return None

    monkeypatch.setattr(job, "time_classify_unit", fake)
    job.classify_unit(compressor("zstd:level=3"), items, [], 900_000 // 4)
    assert len(timed[0]) == 40_000  # d: nearest the mean of 200 KB (the median is c's 30 KB)

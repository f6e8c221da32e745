"""Job-time estimates count all the work a job does (tree --bootstrap replicates, derived's null),
and progress off a terminal says something every few seconds even while no report arrives."""

from __future__ import annotations

import io
import time
from pathlib import Path

import pytest

from conftest import DATASETS
from kinpress import calibration, cli
from kinpress.calibration import CompressorCalibration, Normality, estimate_job_seconds
from kinpress.calibration.choose import choose_compressor
from kinpress.cli import Console
from kinpress.derived import default_null_pairs
from kinpress.items import Item

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

"""Calibration: the controls find the failures they are for, and the limits the manuals state."""

from __future__ import annotations

import json
import zlib
from pathlib import Path

import numpy as np
import pytest

from kinpress.calibration import (
    REPORT_KEYS,
    CalibrationReport,
    CompressorCalibration,
    calibrate,
    choose_compressor,
    estimate_job_seconds,
    make_controls,
    normality_violations,
    size_sweep,
)
from kinpress.compressors import Compressor, Param
from kinpress.items import Item
from kinpress.plots import plot_calibration


class HuffmanOnly(Compressor):
    """An order-0 coder: deflate with strategy Z_HUFFMAN_ONLY finds no matches, only codes
    symbol frequencies (zlib manual, deflateInit2)."""

    name = "huffman"
    summary = "deflate Huffman coding only, no string matching"
    params = (Param("level", 9, 9, 9, "zlib level"),)
    window_source = "none: order-0 coding has no window"

    @property
    def window_bytes(self) -> None:
        return None

    @staticmethod
    def library_version() -> str:
        return "zlib-" + zlib.ZLIB_RUNTIME_VERSION

    def size(self, data: bytes) -> int:
        stream = zlib.compressobj(9, zlib.DEFLATED, -15, 9, zlib.Z_HUFFMAN_ONLY)
        return len(stream.compress(data)) + len(stream.flush())


def _items(pieces: list[bytes], nucleotide: bool = False) -> list[Item]:
    return [Item(f"item{k}", data, "test", nucleotide=nucleotide) for k, data in enumerate(pieces)]


def _find(report: CalibrationReport, name: str) -> CompressorCalibration:
    return next(r for r in report.compressors if r.spec.startswith(name))


def _random(n: int, seed: int) -> bytes:
    return np.random.default_rng(seed).bytes(n)


def _dna(n: int, seed: int) -> bytes:
    return np.frombuffer(b"ACGT", dtype=np.uint8)[
        np.random.default_rng(seed).integers(0, 4, n)
    ].tobytes()


# Documented limits: the item size L whose x+x the compressor still compresses as a repeat.
# For LZ coders the copy lies |x| back, so L is the window; bzip2 needs both copies in one block,
# so L is half the block. The sweep doubles from 1 KiB, so it must report the largest ladder step
# R with R <= L <= 2R (L can equal 2R when L is itself a power of two that the coder just misses).
DOCUMENTED_ITEM_LIMITS = [
    # RFC 1951 section 2: distances up to 32 KiB; zlib keeps 262 bytes of lookahead
    # (MAX_DIST = 2^15 - 262 in zlib's deflate.h, from memory; measured edge 32,506 in
    # /work/shared/compressor-facts.md section 5b).
    ("zlib:level=9", 32768 - 262),
    # bzip2 manual, -1 .. -9: block size 100 k .. 900 k; level 1 instead of 9 to stay fast.
    ("bz2:level=1", 100_000 // 2),
    # xz(1) manual, preset table: -0 uses a 256 KiB dictionary (preset 0 instead of 9 for speed).
    ("lzma:level=0", 256 << 10),
    # RFC 7932 section 9.1: window = 2^lgwin - 16; lgwin 16 to stay small.
    ("brotli:level=11,window=16", (1 << 16) - 16),
    # RFC 8878 section 3.1.1.1.2 (window descriptor) and libzstd's level table
    # (ZSTD_defaultCParameters: level 1 has windowLog 19 = 512 KiB).
    ("zstd:level=1", 1 << 19),
]


@pytest.mark.parametrize(("spec", "limit"), DOCUMENTED_ITEM_LIMITS)
def test_reliable_size_agrees_with_documented_limit(spec: str, limit: int) -> None:
    sweep = size_sweep(spec, max_bytes=4 * limit)
    reliable = sweep.reliable_up_to_bytes
    assert not sweep.capped, sweep.points
    assert reliable <= limit <= 2 * reliable, (spec, reliable, sweep.points)


def test_sweep_stops_at_need_when_items_say_how_large_pairs_get() -> None:
    sweep = size_sweep("zstd:level=19", max_bytes=1 << 20, need=40_000)
    assert sweep.points[-1][0] == 40_000
    assert sweep.reliable_up_to_bytes == 40_000
    assert sweep.capped


def test_independent_random_data_gives_independence_near_one_for_every_compressor() -> None:
    # Cilibrasi & Vitányi 2005: NCD of unrelated strings is about 1 (up to a small epsilon);
    # measured 0.9966 (bzip2) to 1.0066 (PPMd) in compressor-facts.md section 5a.
    # Samples of 16 KiB: smaller ones let bzip2's fixed stream cost pull the value down (0.90 at
    # 4 KiB).
    items = _items([_random(16_384, seed) for seed in (1, 2)])
    report = calibrate(items, samples=2, max_bytes=1 << 15)
    for result in report.compressors:
        assert abs(result.independence - 1.0) < 0.05, (result.spec, result.independence)


def test_order0_coder_cannot_tell_x_from_its_shuffle_but_lz_bwt_ppm_can(
    text_corpus: bytes,
) -> None:
    # Cebrián, Alfonseca & Ortega 2005 on what a compressor must see for NCD: an order-0 coder
    # only counts symbols, so a shuffle of x (same counts) looks as related to x as x itself.
    items = _items([text_corpus[:12_000], text_corpus[500_000:512_000]])
    candidates = [HuffmanOnly(), "zstd:level=19", "lzma:level=9", "bz2:level=9", "ppmd:order=16"]
    report = calibrate(items, candidates, samples=2, sample_bytes=8192, max_bytes=1 << 15)
    order0 = _find(report, "huffman")
    identity, shuffle = order0.identity_bias, 1 - order0.shuffle_similarity
    assert identity > 0.9 and shuffle > 0.9
    assert abs(identity - shuffle) < 0.05
    for name in ("zstd", "lzma", "bz2", "ppmd"):
        result = _find(report, name)
        gap = (1 - result.shuffle_similarity) - result.identity_bias
        assert gap > 0.5, (result.spec, gap)


def test_recommendation_for_600_kb_items_is_neither_zlib_nor_bz2(text_corpus: bytes) -> None:
    # Window facts from RFC 1951 (32 KiB) and the bzip2 manual (900 k block at -9): a pair of
    # 600 KB items fits neither; zstd -19 (8 MiB) and xz -9 (64 MiB) hold it.
    size = 600_000
    items = _items([text_corpus[k * size : (k + 1) * size] for k in range(3)])
    candidates = ["zlib:level=9", "bz2:level=9", "zstd:level=19", "lzma:level=9"]
    spec, report = choose_compressor(items, candidates=candidates)
    assert spec in ("zstd:level=19", "lzma:level=9,extreme=0")
    assert report.recommended == spec
    passed_over = [reason for reason in report.reasons if "exceed its reliable size" in reason]
    assert {reason.partition(":")[0] for reason in passed_over} == {"zlib", "bz2"}
    assert any("32 KiB" in reason for reason in passed_over)
    assert "estimated job time" in report.reasons[-1]


def test_a_tight_budget_picks_the_fastest_reliable_compressor_and_says_why() -> None:
    items = _items([_dna(4000, seed) for seed in range(4)], nucleotide=True)
    candidates = ["zstd:level=3", "brotli:level=11"]
    spec, report = choose_compressor(items, candidates=candidates, budget_seconds=1e-9)
    assert spec == "zstd:level=3"
    assert any("over the" in reason and "budget" in reason for reason in report.reasons)


def test_job_time_estimate_counts_the_work_of_the_whole_matrix() -> None:
    # The engine's work, by the module's own account: each item once, then n(n-1)/2 pairs and n
    # self pairs of two items each, the pairs twice when both strands are tried.
    items = _items([_dna(3000, seed) for seed in range(3)], nucleotide=True)
    result = calibrate(items, ["zstd:level=3"], samples=2, sample_bytes=2048).compressors[0]
    lengths = [1000, 2000, 3000]
    rate = result.throughput_mb_s * 1e6
    one = estimate_job_seconds(result, lengths, 1)
    assert one == pytest.approx((6000 + 4 * 6000) / rate)
    assert estimate_job_seconds(result, lengths, 2) == pytest.approx(one / 2)
    both = estimate_job_seconds(result, lengths, 1, strand="both")
    assert both == pytest.approx((6000 + 2 * 4 * 6000) / rate)


def test_mutation_ladder_is_monotone_for_zstd_and_lzma_on_dna() -> None:
    # Expectation from the definition: more substitutions leave less shared content, so the
    # distance must rank with the rate (Spearman rho = 1 for an ideal compressor).
    items = _items([_dna(12_000, seed) for seed in (3, 4)], nucleotide=True)
    report = calibrate(items, ["zstd:level=19", "lzma:level=9"], samples=2, sample_bytes=8192)
    for result in report.compressors:
        assert result.mutation_monotonicity > 0.99, (result.spec, result.mutation_ladder)
        assert result.mutation_resolution is not None and result.mutation_resolution <= 0.05


def test_normality_rates_are_fractions_and_zlib_loses_idempotency_beyond_its_window(
    text_corpus: bytes,
) -> None:
    # Cilibrasi & Vitányi 2005, section II (idempotency C(xx) = C(x)); Cebrián et al. 2005:
    # deflate stops being idempotent once x is longer than its 32 KiB window (RFC 1951).
    pieces = [text_corpus[k * 48_000 : (k + 1) * 48_000] for k in range(3)]
    beyond = normality_violations("zlib:level=9", pieces)
    assert beyond.idempotency == 1.0
    assert normality_violations("zstd:level=19", pieces).idempotency == 0.0
    rates = beyond.as_json()
    for key in ("idempotency", "monotonicity", "symmetry", "distributivity"):
        assert 0.0 <= rates[key] <= 1.0
    assert beyond.checks == 3 + 6 + 3 + 3


def test_controls_are_reproducible_from_the_seed(text_corpus: bytes) -> None:
    items = _items([text_corpus[:20_000], text_corpus[40_000:60_000]])
    first = make_controls(items, seed=7, sample_bytes=4096)
    assert first == make_controls(items, seed=7, sample_bytes=4096)
    assert first != make_controls(items, seed=8, sample_bytes=4096)
    rates = [sum(a != b for a, b in zip(x, m, strict=True)) / len(x)
             for x, m in zip(first.samples, first.mutants[2], strict=True)]  # fmt: skip
    assert rates == pytest.approx([0.05] * len(rates), abs=1e-3)
    assert [sorted(x) for x in first.shuffled] == [sorted(x) for x in first.samples]


@pytest.fixture(scope="module")
def small_report() -> CalibrationReport:
    candidates = ["zlib:level=9", "bz2:level=1", "lzma:level=0", "brotli:level=5,window=16"]
    return calibrate(None, candidates, samples=2, sample_bytes=4096, max_bytes=1 << 19)


def test_report_json_has_exactly_the_documented_keys(small_report: CalibrationReport) -> None:
    document = json.loads(json.dumps(small_report.as_json()))
    assert set(document) == {"seed", "inputs", "compressors", "recommended", "reasons"}
    assert tuple(document) == REPORT_KEYS
    keys = {
        "spec", "identity_bias", "independence", "shuffle_similarity", "mutation_monotonicity",
        "mutation_resolution", "reliable_up_to_bytes", "overhead_bytes", "throughput_mb_s",
        "normality",
    }  # fmt: skip
    for row in document["compressors"]:
        assert keys <= set(row)
    assert document["recommended"] in {row["spec"] for row in document["compressors"]}


def test_plot_calibration_writes_a_png(small_report: CalibrationReport, tmp_path: Path) -> None:
    path = tmp_path / "calibration.png"
    plot_calibration(small_report, path, title="generic controls")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert path.stat().st_size > 20_000


def test_mutation_distance_shows_how_much_shared_content_a_compressor_finds() -> None:
    # An order-0 coder sees no shared content between a text and its lightly mutated copy
    # (Cilibrasi & Vitanyi 2005: only symbol statistics), so NCD stays near 1; LZ and PPM coders
    # find the copy, and their mutation distance is what the recommendation rewards.
    items = _items([_dna(12_000, seed) for seed in (5, 6)], nucleotide=True)
    report = calibrate(items, [HuffmanOnly(), "lzma:level=9", "ppmd:order=16"], samples=2,
                       sample_bytes=8192)  # fmt: skip
    order0, lzma, ppmd = report.compressors
    assert order0.mutation_distance > 0.9
    assert lzma.mutation_distance < 0.5 and ppmd.mutation_distance < 0.6
    assert report.recommended != order0.spec
    assert "mutation_distance" in lzma.as_json()


def test_a_sweep_stopped_for_time_falls_back_on_the_documented_window() -> None:
    from dataclasses import replace

    from kinpress.calibration import holds, size_sweep

    # A slow compressor is not swept up to a large pair: the time guard stops it early.
    sweep = size_sweep("brotli:level=11", need=8 << 20, seconds=0.5)
    assert sweep.capped and sweep.reliable_up_to_bytes < 8 << 20
    items = _items([_dna(4000, seed) for seed in range(2)], nucleotide=True)
    zstd = calibrate(items, ["zstd:level=3"], samples=1, sample_bytes=2048).compressors[0]
    # RFC 8878 and libzstd's table: level 3 has a 2 MiB window, which holds a 1 MB pair.
    capped = replace(zstd, reliable_up_to_bytes=4096, reliable_capped=True)
    assert holds(capped, 1_000_000)
    assert not holds(capped, 4_000_000)  # beyond the documented window
    broken = replace(capped, reliable_capped=False)  # a measured break wins
    assert not holds(broken, 1_000_000)
    assert not holds(replace(capped, window_bytes=None), 1_000_000)  # no window documented

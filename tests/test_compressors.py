"""Compressor adapters: specs, overheads, and the documented windows checked by behaviour."""

from __future__ import annotations

import lzma as stdlib_lzma
import os
import subprocess
import sys
import threading
import time
from pathlib import Path
from typing import Any

import pytest
import zstandard
from hypothesis import given
from hypothesis import strategies as st

from conftest import random_bytes
from kinpress.calibration import calibrate
from kinpress.compressors import (
    ADAPTERS,
    AUTO_CANDIDATES,
    Compressor,
    SpecError,
    compressor,
    kept,
    parse_spec,
)
from kinpress.items import Item


def self_distance(comp: Compressor, x: bytes) -> float:
    """NCD(x, x) = (C(xx) - C(x)) / C(x)."""
    return (comp.size(x + x) - comp.size(x)) / comp.size(x)


def independent_distance(comp: Compressor, x: bytes, y: bytes) -> float:
    cx, cy = comp.size(x), comp.size(y)
    return (comp.size(x + y) - min(cx, cy)) / max(cx, cy)


def test_auto_candidates_are_distinct_specs_of_registered_adapters() -> None:
    assert set(AUTO_CANDIDATES) == {"unlabelled", "labelled"}
    for specs in AUTO_CANDIDATES.values():
        assert len({compressor(spec).spec for spec in specs}) == len(specs)
        for spec in specs:
            assert parse_spec(spec)[0] is ADAPTERS[spec.partition(":")[0]]


def test_auto_reads_its_candidates_from_the_registry(monkeypatch: pytest.MonkeyPatch) -> None:
    # The one list a new adapter joins: calibration takes it from the registry when called.
    monkeypatch.setitem(AUTO_CANDIDATES, "unlabelled", ("zlib:level=1", "bz2:level=1"))
    items = [Item(f"x{k}", random_bytes(2000, seed=k), "test") for k in range(3)]
    report = calibrate(items, sweep_seconds=0.5)
    assert [r.spec for r in report.compressors] == [
        compressor(spec).spec for spec in AUTO_CANDIDATES["unlabelled"]
    ]
    assert [r.spec.partition(":")[0] for r in report.compressors] == ["zlib", "bz2"]


def test_every_adapter_has_a_level_and_a_canonical_spec() -> None:
    for name, cls in ADAPTERS.items():
        comp = cls()
        assert comp.spec.startswith(name)
        assert compressor(comp.spec).spec == comp.spec
        assert compressor(f"{name}:level={cls.params[0].low}").settings[cls.params[0].name] == (
            cls.params[0].low
        )


def test_spec_parses_keys_and_aliases() -> None:
    assert compressor("zstd:level=19,window=27").spec == "zstd:level=19,window=27"
    assert compressor("lzma:level=9,extreme=1").spec == "lzma:level=9,extreme=1"
    assert compressor("ppmd:order=6").spec == compressor("ppmd:level=6").spec
    assert compressor("brotli:quality=5,lgwin=18").spec == "brotli:level=5,window=18"
    assert compressor("xz:preset=3").name == "lzma"
    assert compressor(" ZSTD:LEVEL=3 ").spec == "zstd:level=3"


@pytest.mark.parametrize(
    ("spec", "message"),
    [
        ("gzipper", "valid names: zstd, brotli, lzma, bz2, zlib, ppmd"),
        ("zstd:speed=3", "valid keys: level, window"),
        ("zstd:level=23", "out of range 1-22"),
        ("brotli:window=25", "out of range 10-24"),
        ("zlib:level=high", "whole number"),
        ("bz2:level", "key=value"),
    ],
)
def test_bad_spec_says_what_is_valid(spec: str, message: str) -> None:
    with pytest.raises(SpecError, match=message):
        compressor(spec)


@given(st.sampled_from(sorted(ADAPTERS)), st.data())
def test_any_in_range_level_is_accepted(name: str, data: st.DataObject) -> None:
    param = ADAPTERS[name].params[0]
    level = data.draw(st.integers(param.low, param.high))
    cls, settings = parse_spec(f"{name}:level={level}")
    assert cls(**settings).settings[param.name] == level


def test_headers_and_checksums_are_stripped() -> None:
    # Container sizes of empty input, for comparison, from the formats' own layouts: a zstd frame
    # has a 4-byte magic number (RFC 8878 section 3.1.1); zlib adds a 2-byte header and a 4-byte
    # Adler-32 (RFC 1950); the xz container adds stream header and footer of 12 bytes each.
    assert compressor("zstd").overhead_bytes == len(zstandard.ZstdCompressor().compress(b"")) - 4
    assert compressor("zlib").overhead_bytes == 2  # raw deflate: one empty final block
    assert compressor("lzma").overhead_bytes == 1  # raw LZMA2: the end marker only
    assert compressor("lzma").overhead_bytes < len(stdlib_lzma.compress(b"")) - 24
    for name in ADAPTERS:
        assert compressor(name).overhead_bytes <= 14, name


def test_windows_are_the_documented_ones() -> None:
    # RFC 1951 section 2: deflate distances reach back at most 32 KiB.
    assert compressor("zlib").window_bytes == 32768
    # bzip2 manual, "-1 (or --fast) to -9 (or --best): set the block size to 100 k, 200 k ..
    # 900 k" (k = 1000 in bzip2's code, recalled from memory).
    assert [compressor(f"bz2:level={k}").window_bytes for k in (1, 5, 9)] == [
        100_000,
        500_000,
        900_000,
    ]
    # RFC 7932 section 9.1: the sliding window size is (1 << WBITS) - 16.
    assert compressor("brotli:window=16").window_bytes == 65536 - 16
    assert compressor("brotli:window=24").window_bytes == (1 << 24) - 16
    # RFC 8878 section 3.1.1.1.2: Window_Size = 2^Window_Log; the level's window_log from the
    # library's own parameter table (zstandard.ZstdCompressionParameters.from_level).
    for level in (1, 3, 9, 19, 22):
        expected = 1 << zstandard.ZstdCompressionParameters.from_level(level).window_log
        assert compressor(f"zstd:level={level}").window_bytes == expected
    assert compressor("zstd:level=3,window=27").window_bytes == 1 << 27


def _lzma2_dictionary(preset: int) -> int:
    """Dictionary size liblzma itself encodes for a preset (LZMA2 property byte, xz file format
    specification section 5.3.1: size = (2 | (b & 1)) << (b // 2 + 11))."""
    props = stdlib_lzma._encode_filter_properties(
        {"id": stdlib_lzma.FILTER_LZMA2, "preset": preset}
    )
    b = props[0]
    return (2 | (b & 1)) << (b // 2 + 11)


@pytest.mark.parametrize("preset", range(10))
def test_lzma_windows_match_the_xz_manual_presets(preset: int) -> None:
    # xz(1) manual, preset table (from memory): DictSize -0 256 KiB, -1 1 MiB, -2 2 MiB,
    # -3/-4 4 MiB, -5/-6 8 MiB, -7 16 MiB, -8 32 MiB, -9 64 MiB; and liblzma agrees.
    manual = [256 << 10, 1 << 20, 2 << 20, 4 << 20, 4 << 20, 8 << 20, 8 << 20, 16 << 20,
              32 << 20, 64 << 20]  # fmt: skip
    assert compressor(f"lzma:level={preset}").window_bytes == manual[preset]
    assert _lzma2_dictionary(preset) == manual[preset]


def test_identity_distance_breaks_beyond_deflate_window() -> None:
    # RFC 1951: a second copy further back than 32 KiB cannot be referenced.
    comp = compressor("zlib:level=6")
    assert self_distance(comp, random_bytes(16 << 10)) < 0.05
    assert self_distance(comp, random_bytes(64 << 10)) > 0.95


def test_identity_distance_breaks_beyond_bzip2_block() -> None:
    # bzip2 manual: level 1 sorts blocks of 100 k; x + x must fit in one block.
    comp = compressor("bz2:level=1")
    inside = self_distance(comp, random_bytes(30_000))
    beyond = self_distance(comp, random_bytes(150_000))
    assert inside < 0.35  # block sorting is never idempotent; 0.24 measured here
    assert beyond > 0.9


def test_identity_distance_breaks_beyond_xz_preset_dictionary() -> None:
    # xz manual: preset -0 has a 256 KiB dictionary.
    comp = compressor("lzma:level=0")
    assert self_distance(comp, random_bytes(100_000)) < 0.05
    assert self_distance(comp, random_bytes(400_000)) > 0.9


def test_identity_distance_breaks_beyond_zstd_level_window() -> None:
    # RFC 8878 windows: level 1 has window_log 19 (512 KiB) in libzstd's table.
    comp = compressor("zstd:level=1")
    assert comp.window_bytes == 1 << 19
    assert self_distance(comp, random_bytes(200_000)) < 0.05
    assert self_distance(comp, random_bytes(1_000_000)) > 0.95
    # The window key widens it and long-distance matching finds the far copy.
    assert self_distance(compressor("zstd:level=1,window=22"), random_bytes(1_000_000)) < 0.05


def test_identity_distance_breaks_at_brotli_window_edge() -> None:
    # RFC 7932 section 9.1: window = 2^lgwin - 16 bytes.
    comp = compressor("brotli:level=5,window=16")
    edge = comp.window_bytes
    assert self_distance(comp, random_bytes(edge)) < 0.05
    assert self_distance(comp, random_bytes(edge + 64)) > 0.95


def test_independent_random_strings_are_at_distance_one() -> None:
    # Li et al. 2004: NCD of incompressible, independent strings is about 1.
    x, y = random_bytes(20_000, seed=1), random_bytes(20_000, seed=2)
    for name in ADAPTERS:
        d = independent_distance(compressor(name), x, y)
        assert 0.95 < d < 1.1, (name, d)


def test_primed_size_approximates_concatenation(text_corpus: bytes) -> None:
    comp = compressor("zstd:level=19")
    for k in range(5):
        y = text_corpus[k * 40_000 : k * 40_000 + 16_000]
        x = text_corpus[k * 40_000 + 8_000 : k * 40_000 + 24_000]  # overlaps y by half
        concat = comp.size(y + x) - comp.size(y)
        primed = comp.primed(y).size(x)
        assert abs(primed - concat) <= 0.1 * concat + 16
        assert primed < 0.7 * comp.size(x)  # the overlap is found through the dictionary


def test_zstd_priming_reaches_a_large_reference() -> None:
    # libzstd loads only a suffix of a dictionary unless its tables are wide enough.
    reference = random_bytes(4 << 20)
    comp = compressor("zstd:level=3")
    assert comp.primed(reference).size(reference[:100_000]) < 1_000


def test_zlib_priming_sees_only_the_last_window(text_corpus: bytes) -> None:
    # RFC 1951: a preset dictionary is history, and history reaches back 32 KiB.
    comp = compressor("zlib:level=9")
    reference = text_corpus[:50_000]
    x = text_corpus[60_000:70_000]
    assert comp.primed(reference).size(x) == comp.primed(reference[-32768:]).size(x)


@pytest.mark.parametrize("name", sorted(ADAPTERS))
def test_sizes_after_a_prefix_are_the_concatenations_sizes(name: str, text_corpus: bytes) -> None:
    # Compressor.after may keep the state after the prefix (PPMd forks from it), but what it
    # measures is concatenation's C(yx), to the byte.
    comp = compressor(name)
    prefix = text_corpus[:60_000]
    xs = [text_corpus[80_000:86_000], b"", b"x", random_bytes(3_000), text_corpus[:5_000]]
    assert comp.prefixed_sizes(prefix, xs) == [comp.size(prefix + x) for x in xs]
    assert comp.prefixed_sizes(prefix, xs[:1]) == [comp.size(prefix + xs[0])]


KEEPING = ["ppmd:order=32", "lzma:level=9"]
"""Adapters that keep their state after a prefix in a helper process (see compressors.kept)."""


@pytest.mark.skipif(not kept.AVAILABLE, reason="a state is kept (forked) only on Linux")
@pytest.mark.parametrize("spec", KEEPING)
def test_sizes_after_a_prefix_come_from_the_kept_state(
    spec: str, text_corpus: bytes, monkeypatch: pytest.MonkeyPatch
) -> None:
    comp = compressor(spec)
    assert comp.continues
    prefix = text_corpus[:200_000]
    xs = [text_corpus[300_000 + 7_000 * k :][:7_000] for k in range(4)]
    whole = [comp.size(prefix + x) for x in xs]

    def refuse(data: bytes) -> int:
        raise AssertionError("compressed whole in this process")

    monkeypatch.setattr(comp, "size", refuse)
    # the helper process keeps the state after the prefix and answers for each item
    assert comp.prefixed_sizes(prefix, xs) == whole
    ready = comp.after(prefix)
    assert [ready.size(x) for x in xs] == whole  # one at a time, as the job's unit is timed
    # a short prefix: the helper soon compresses prefix + item whole instead of forking
    short = [comp.after(b"a").sizes(xs)]
    monkeypatch.undo()
    assert short == [[comp.size(b"a" + x) for x in xs]]
    assert any(h.process.poll() is None for found in kept._helpers.values() for h in found)


@pytest.mark.skipif(not kept.AVAILABLE, reason="a state is kept (forked) only on Linux")
def test_threads_after_other_prefixes_each_borrow_a_helper_of_their_own(
    text_corpus: bytes, monkeypatch: pytest.MonkeyPatch
) -> None:
    # lzma runs on the local engine's threads: with one helper a process, two threads took
    # turns at it (one core of two) and made it feed their prefixes again at each turn.
    monkeypatch.setattr(kept, "_helpers", {})  # this test's own helpers, gone with it
    comp = compressor("lzma:level=6")
    prefixes = [text_corpus[:60_000], text_corpus[100_000:160_000]]
    xs = [text_corpus[200_000 + 3_000 * k :][:3_000] for k in range(6)]
    readies = [comp.after(prefix) for prefix in prefixes]
    start = threading.Barrier(2)
    got: dict[int, list[list[int]]] = {}

    def work(k: int) -> None:
        start.wait()
        got[k] = [readies[k].sizes(xs[:3]), readies[k].sizes(xs[3:])]

    threads = [threading.Thread(target=work, args=(k,)) for k in range(2)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    for k, prefix in enumerate(prefixes):
        assert got[k] == [[comp.size(prefix + x) for x in part] for part in (xs[:3], xs[3:])]
    (found,) = kept._helpers.values()
    assert len(found) == 2 and not any(h.busy for h in found)
    # each prefix is held by a helper, which a later call on it borrows without feeding it again
    assert {h.holding[0] for h in found} == set(prefixes)  # type: ignore[index]
    fed: list[bytes] = []
    asked = kept.Helper.ask

    def ask(helper: kept.Helper, message: bytes, answers: int) -> list[int]:
        fed.append(message[:1])
        return asked(helper, message, answers)

    monkeypatch.setattr(kept.Helper, "ask", ask)
    # a new state after an equal corpus (a run cut into tiles makes one per tile) feeds nothing
    again = comp.after(bytes(bytearray(prefixes[1])))  # equal bytes, another object
    assert again.sizes(xs[:2]) == [comp.size(prefixes[1] + x) for x in xs[:2]]
    assert fed == [b"X"]


def test_the_kept_lzma_state_holds_its_prefix_encoded(text_corpus: bytes) -> None:
    # liblzma takes a whole input into its window at once and encodes one chunk of it per call
    # (as observed of the standard library's lzma module): a prefix fed whole left most of it
    # to be encoded by every forked copy again, with its item, as slow as compressing
    # prefix + item whole (1.3 s an item on a 4.6 MB corpus). The helper's recipe feeds it in
    # pieces, so what the prefix gives out once fed is all of its compressed size but the LZMA2
    # chunk being filled, at most 64 KiB (liblzma's LZMA2_CHUNK_MAX; recalled from memory).
    from kinpress.compressors.lzma import _RECIPE

    comp = compressor("lzma:level=9")
    prefix = text_corpus[:1_500_000]
    space: dict[str, Any] = {}
    exec(_RECIPE, space)
    feed, finish = space["new"](9, 1 << 21)
    given = feed(prefix)
    assert given >= comp.size(prefix) - (1 << 16)  # fed whole: 32,768 of 297,240 bytes
    assert given + finish() == comp.size(prefix)  # the same bytes as compressing it whole


@pytest.mark.skipif(not kept.AVAILABLE, reason="a state is kept (forked) only on Linux")
def test_lzma_keeps_the_dictionary_compressing_whole_would_have(text_corpus: bytes) -> None:
    # lzma sizes its dictionary to the input (the next power of two): items that take
    # prefix + item across a power of two are sent apart, with the larger dictionary.
    comp = compressor("lzma:level=9")
    prefix = text_corpus[: (1 << 17) - 3_000]
    xs = [text_corpus[200_000:201_000], text_corpus[210_000:216_000], b"", b"y" * 5_000]
    assert comp.prefixed_sizes(prefix, xs) == [comp.size(prefix + x) for x in xs]


@pytest.mark.skipif(not kept.AVAILABLE, reason="a state is kept (forked) only on Linux")
@pytest.mark.parametrize("spec", KEEPING)
def test_sizes_come_whole_when_the_helper_is_gone(
    spec: str, text_corpus: bytes, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(kept, "_helpers", {})  # this test's own helpers, gone with it
    comp = compressor(spec)
    prefix, xs = text_corpus[:50_000], [text_corpus[60_000:64_000], text_corpus[70_000:71_000]]
    assert comp.prefixed_sizes(prefix, xs) == [comp.size(prefix + x) for x in xs]
    ((helper,),) = kept._helpers.values()
    helper.process.kill()
    helper.process.wait()
    assert comp.prefixed_sizes(prefix, xs) == [comp.size(prefix + x) for x in xs]
    # a failed recipe starts no more helpers: its sizes come whole from then on
    assert helper.broken and all(kept.borrow(r) is None for (_, r) in kept._helpers)


@pytest.mark.skipif(not kept.AVAILABLE, reason="a state is kept (forked) only on Linux")
def test_ppmd_helper_ends_with_the_process_that_started_it(tmp_path: Path) -> None:
    # Ctrl-C reaches the helper too; it ignores it and ends when its parent's pipe closes, so
    # an interrupted or finished run leaves no process behind.
    script = (
        "from kinpress.compressors import compressor, kept\n"
        "compressor('ppmd:order=4').prefixed_sizes(b'abc' * 1000, [b'x', b'y'])\n"
        "print(next(iter(kept._helpers.values()))[0].process.pid, flush=True)\n"
        "import os, signal; os.kill(os.getpid(), signal.SIGKILL)\n"
    )
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True)
    pid = int(done.stdout.split()[0])
    for _ in range(50):
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return
        time.sleep(0.1)
    raise AssertionError(f"helper {pid} outlived its parent")


@pytest.mark.parametrize("name", ["brotli", "lzma", "bz2", "ppmd"])
def test_unprimable_compressors_say_so(name: str) -> None:
    comp = compressor(name)
    assert not comp.primable
    with pytest.raises(SpecError, match="cannot be primed"):
        comp.primed(b"reference")


def test_cache_key_changes_with_every_setting() -> None:
    keys = {
        compressor(s).cache_key for s in ("zstd:level=3", "zstd:level=4", "zstd:level=3,window=20")
    }
    assert len(keys) == 3
    assert compressor("zstd").cache_key.endswith(
        "@libzstd-" + ".".join(map(str, zstandard.ZSTD_VERSION))
    )

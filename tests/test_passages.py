"""Shared passages by winnowing: the paper's guarantee and selection rule, an exact reference, real
texts re-wrapped, real unrelated code and logs, offsets, boilerplate hashes."""

from __future__ import annotations

import difflib
import itertools
import random
import textwrap
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from kinpress.passages import (
    GUARANTEE,
    NOISE,
    Passage,
    boilerplate_among,
    common_hashes,
    coverage,
    fingerprint,
    kgram_hashes,
    normalise,
    shared_passages,
    winnow,
)

SETTINGS = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
WHITESPACE = b" \t\n\r\v\f"


def norm(data: bytes) -> bytes:
    return bytes(b for b in data if b not in WHITESPACE)


def check_passages(a: bytes, b: bytes, passages: list[Passage], min_length: int) -> None:
    """Every passage is long enough, equal after normalisation on both sides, of its stated length,
    starts and ends on non-whitespace, and the set is one-to-one (disjoint in a and in b)."""
    for p in passages:
        assert p.length >= min_length
        assert norm(a[p.a_start : p.a_end]) == norm(b[p.b_start : p.b_end])
        assert len(norm(a[p.a_start : p.a_end])) == p.length
        for data, start, end in ((a, p.a_start, p.a_end), (b, p.b_start, p.b_end)):
            assert data[start] not in WHITESPACE and data[end - 1] not in WHITESPACE
    assert [p.length for p in passages] == sorted((p.length for p in passages), reverse=True)
    for side in ("a", "b"):
        spans = sorted((getattr(p, f"{side}_start"), getattr(p, f"{side}_end")) for p in passages)
        assert all(end <= start for (_, end), (start, _) in itertools.pairwise(spans))


# --- winnowing itself -----------------------------------------------------------------------


def winnowing_reference(hashes: np.ndarray, window: int) -> list[int]:
    """Schleimer et al. 2003, winnowing as defined there: in each window of consecutive hashes
    the minimal one, the rightmost on a tie, each position recorded once. Hashes are compared by
    their upper 32 bits, as in the module."""
    values = [int(h) >> 32 for h in hashes]
    if not values:
        return []
    window = min(window, len(values))
    chosen: list[int] = []
    for i in range(len(values) - window + 1):
        smallest = min(values[i : i + window])
        pick = max(j for j in range(i, i + window) if values[j] == smallest)
        if not chosen or chosen[-1] != pick:
            chosen.append(pick)
    return chosen


@SETTINGS
@given(
    st.lists(st.integers(0, 3), max_size=120),
    st.integers(1, 20),
    st.integers(0, 2**32 - 1),
)
def test_winnow_is_the_papers_winnowing(levels: list[int], window: int, seed: int) -> None:
    # Few distinct values give many ties, where the rightmost choice matters.
    low = np.random.default_rng(seed).integers(0, 2**32, len(levels), dtype=np.uint64)
    hashes = (np.array(levels, dtype=np.uint64) << np.uint64(32)) | low
    assert winnow(hashes, window).tolist() == winnowing_reference(hashes, window)


def test_density_is_two_over_window_plus_one() -> None:
    # Schleimer et al. 2003, section 4: on random input winnowing selects a fraction
    # d = 2 / (w + 1) of the positions.
    fp = fingerprint(np.random.default_rng(3).bytes(300_000))
    window = GUARANTEE - NOISE + 1
    density = len(fp.positions) / (len(fp.norm) - NOISE + 1)
    assert density == pytest.approx(2 / (window + 1), rel=0.05)


def test_a_copy_with_long_runs_is_one_passage() -> None:
    # Inside a run of one k-gram every window's rightmost minimum is new: one position in every
    # period of the run is selected, and such a hash is paired by rank between the files. The
    # copy is still found whole, runs and all, in its place.
    rng = np.random.default_rng(9)
    parts = [rng.bytes(500), b"=" * 5000, rng.bytes(300), b"AT" * 3000, rng.bytes(200)]
    a = b"".join(parts)
    fa = fingerprint(a)
    run = np.flatnonzero(np.frombuffer(fa.norm, dtype=np.uint8) == ord("="))
    in_run = fa.positions[(fa.positions >= run[0]) & (fa.positions + NOISE <= run[-1] + 1)]
    assert len(in_run) > 0.9 * (len(run) - NOISE + 1)
    b = rng.bytes(700) + a + rng.bytes(100)
    passages = shared_passages(fa, fingerprint(b))
    check_passages(a, b, passages, GUARANTEE)
    assert [(p.a_start, p.b_start, p.length) for p in passages] == [(0, 700, len(fa.norm))]


def test_kgram_hash_is_the_polynomial_of_its_bytes_only() -> None:
    # The vectorised prefix-sum hash equals a direct hash of each k-gram on its own: the same
    # k-gram anywhere (here at 0, 1000 and in another text) has the same hash, others differ.
    rng = np.random.default_rng(4)
    gram = rng.bytes(NOISE)
    text = gram + rng.bytes(1000 - NOISE) + gram + rng.bytes(500)
    hashes = kgram_hashes(text, NOISE)
    alone = kgram_hashes(gram, NOISE)
    assert hashes[0] == hashes[1000] == alone[0]
    assert len(np.unique(hashes)) == len(hashes) - 1


def test_fingerprint_fields() -> None:
    data = "  line one\r\n\tline  two é\n".encode()
    fp = fingerprint(data, noise=4, guarantee=8)
    assert fp.norm == norm(data)
    assert bytes(data[int(i)] for i in fp.offsets) == fp.norm
    assert fp.offsets.dtype == np.int64 and fp.positions.dtype == np.int64
    assert fp.hashes.dtype == np.uint64 and fp.size == len(data)
    assert np.all(np.diff(fp.positions) > 0)
    assert np.array_equal(fp.hashes, kgram_hashes(fp.norm, 4)[fp.positions])


@pytest.mark.parametrize("data", [b"", b" \n\t ", b"x" * (NOISE - 1), b"a b" * 5])
def test_empty_or_short_input(data: bytes) -> None:
    fp = fingerprint(data)
    assert len(fp.hashes) == len(fp.positions) == 0
    assert shared_passages(fp, fp) == []
    assert coverage([], fp, "a") == 0.0


def test_text_shorter_than_a_window_is_one_window() -> None:
    data = b"abcdefghijklmnopqrstuvwxyz0123456789"
    fp = fingerprint(data)
    assert len(fp.positions) == 1
    passages = shared_passages(fp, fp, min_length=len(data))
    assert [p.as_json() for p in passages] == [
        {"a_start": 0, "a_end": len(data), "b_start": 0, "b_end": len(data), "length": len(data)}
    ]


def test_bad_settings() -> None:
    with pytest.raises(ValueError, match="noise"):
        fingerprint(b"abc", noise=10, guarantee=5)
    with pytest.raises(ValueError, match="other settings"):
        shared_passages(fingerprint(b"a" * 100), fingerprint(b"a" * 100, noise=20))
    with pytest.raises(ValueError, match="min_length"):
        shared_passages(fingerprint(b"a" * 100), fingerprint(b"a" * 100), min_length=0)
    with pytest.raises(ValueError, match="side"):
        coverage([], fingerprint(b"abc"), "c")


# --- the guarantee, and an exact reference -------------------------------------------------

ALPHABETS = [bytes(range(256)), b"abcdefgh \n", b"ab \t\r\n"]


def scatter(rng: random.Random, letters: bytes, whitespace: float) -> bytes:
    """letters with whitespace bytes inserted before each one at the given rate."""
    out = bytearray()
    for letter in letters:
        while rng.random() < whitespace:
            out.append(rng.choice(WHITESPACE))
        out.append(letter)
    return bytes(out)


def random_text(rng: random.Random, size: int, alphabet: bytes) -> bytes:
    return bytes(rng.choice(alphabet) for _ in range(size))


@SETTINGS
@given(
    seed=st.integers(0, 2**32 - 1),
    alphabet=st.sampled_from(ALPHABETS),
    sizes=st.tuples(st.integers(0, 3000), st.integers(0, 3000)),
    extra=st.integers(0, 2 * GUARANTEE),
    whitespace=st.sampled_from([0.0, 0.1, 0.5]),
    kt=st.sampled_from([(NOISE, GUARANTEE), (8, 20), (16, 16), (4, 40)]),
)
# A repeated k-gram inside the passage: only a tie rule of the window's own bytes selects the same
# occurrence in both (the paper's robust rule does not).
@example(seed=1906097, alphabet=ALPHABETS[2], sizes=(5, 0), extra=9, whitespace=0.0, kt=(4, 40))
# The passage's only seeds are hashes repeated ~170 times in both: paired again by context.
@example(seed=2764, alphabet=ALPHABETS[2], sizes=(2760, 2524), extra=3, whitespace=0.0, kt=(4, 40))
def test_a_planted_passage_of_t_bytes_is_always_found(
    seed: int,
    alphabet: bytes,
    sizes: tuple[int, int],
    extra: int,
    whitespace: float,
    kt: tuple[int, int],
) -> None:
    noise, guarantee = kt
    rng = random.Random(seed)
    letters = bytes(rng.choice(norm(alphabet)) for _ in range(guarantee + extra))
    texts, spans = [], []
    for size in sizes:
        background = random_text(rng, size, alphabet)
        cut = rng.randint(0, size)
        passage = scatter(rng, letters, whitespace)  # spaced differently in a and in b
        texts.append(background[:cut] + b"\n" + passage + b"\n" + background[cut:])
        lead = len(passage) - len(passage.lstrip(WHITESPACE))  # spans from first to last letter
        spans.append((cut + 1 + lead, cut + 1 + len(passage.rstrip(WHITESPACE))))
    a, b = texts
    fa, fb = fingerprint(a, noise, guarantee), fingerprint(b, noise, guarantee)
    passages = shared_passages(fa, fb, min_length=guarantee)
    check_passages(a, b, passages, guarantee)
    (a_start, a_end), (b_start, b_end) = spans
    covered = any(
        p.a_start <= a_start and a_end <= p.a_end and p.b_start <= b_start and b_end <= p.b_end
        for p in passages
    )
    # Found, or (one-to-one) taken by a longer passage overlapping it in a or in b; with random
    # bytes around it, chance agreements that long do not happen, so it must be found.
    overlap_a = [p.a_start < a_end and a_start < p.a_end for p in passages]
    overlap_b = [p.b_start < b_end and b_start < p.b_end for p in passages]
    taken = any(
        p.length >= len(letters) and (in_a or in_b)
        for p, in_a, in_b in zip(passages, overlap_a, overlap_b, strict=True)
    )
    assert covered or (taken and alphabet != ALPHABETS[0]), (spans, passages)


def longest_common_substring(a: bytes, b: bytes) -> int:
    matcher = difflib.SequenceMatcher(None, a, b, autojunk=False)
    return int(matcher.find_longest_match(0, len(a), 0, len(b)).size)


@SETTINGS
@given(
    seed=st.integers(0, 2**32 - 1),
    alphabet=st.sampled_from([b"ab", b"abc \n", b"abcdefghij"]),
    sizes=st.tuples(st.integers(0, 400), st.integers(0, 400)),
    planted=st.integers(0, 2 * GUARANTEE),
)
def test_longest_passage_is_the_longest_common_substring(
    seed: int, alphabet: bytes, sizes: tuple[int, int], planted: int
) -> None:
    rng = random.Random(seed)
    common = random_text(rng, planted, alphabet)
    a, b = (random_text(rng, size, alphabet) for size in sizes)
    a = a[: len(a) // 2] + common + a[len(a) // 2 :]
    b = b[: len(b) // 3] + common + b[len(b) // 3 :]
    exact = longest_common_substring(norm(a), norm(b))
    passages = shared_passages(fingerprint(a), fingerprint(b), min_length=NOISE)
    check_passages(a, b, passages, NOISE)
    longest = passages[0].length if passages else 0
    assert longest <= exact
    if exact >= GUARANTEE:
        assert longest == exact


def test_one_passage_of_a_is_matched_once_in_b() -> None:
    rng = np.random.default_rng(5)
    passage, x, y, z = (rng.bytes(n) for n in (500, 300, 300, 300))
    a = x + passage + y
    b = passage + z + passage
    fa, fb = fingerprint(a), fingerprint(b)
    passages = shared_passages(fa, fb)
    check_passages(a, b, passages, GUARANTEE)
    assert len(passages) == 1 and passages[0].length == len(norm(passage))
    assert coverage(passages, fb, "b") == pytest.approx(len(norm(passage)) / len(fb.norm))
    assert coverage(passages + passages, fa, "a") == coverage(passages, fa, "a")


def test_overlapping_candidates_are_cut_to_their_free_parts() -> None:
    # a = X Y Z and b = X Y ... Y Z: X Y is taken first; Y Z overlaps it in a, and what is left
    # of it, Z, is still a passage of its own.
    rng = np.random.default_rng(6)
    x, y, z, filler = (rng.bytes(n) for n in (300, 400, 200, 100))
    a, b = x + y + z, x + y + filler + y + z
    passages = shared_passages(fingerprint(a), fingerprint(b))
    check_passages(a, b, passages, GUARANTEE)
    lengths = [p.length for p in passages]
    assert lengths == [len(norm(x + y)), len(norm(z))]
    assert passages[1].b_end == len(b)


def test_a_copy_of_a_file_of_repeated_lines_is_found_whole() -> None:
    # Every line's template k-gram occurs thousands of times in both files: such hashes are
    # paired by rank, not all with all, and the copy is still one passage.
    rng = random.Random(7)
    lines = [
        f"INFO worker pool: task finished normally id={rng.randrange(10**6)}\n"
        if rng.random() < 0.9
        else "INFO worker pool: heartbeat, nothing to report\n"
        for _ in range(4000)
    ]
    a = "".join(lines).encode()
    b = b"header line\n" + a.replace(b"\n", b"\r\n")
    fa, fb = fingerprint(a), fingerprint(b)
    passages = shared_passages(fa, fb)
    check_passages(a, b, passages, GUARANTEE)
    assert passages[0].length == len(fa.norm)
    assert coverage(passages, fa, "a") == 1.0


# --- offsets ----------------------------------------------------------------------------------


def test_offsets_map_back_with_multibyte_text_and_whitespace_at_the_edges() -> None:
    passage = "Größe der Straße: 日本語のテキストと ελληνικά γράμματα, naïve café. " * 2
    a = ("ASCII only here 123\n \t " + passage + " \r\n\t" + "then other words").encode()
    b = ("!!\u00a0其他\n" + passage.replace(" ", "\n  ") + "\f\v" + "#end").encode()
    passages = shared_passages(fingerprint(a), fingerprint(b))
    check_passages(a, b, passages, GUARANTEE)
    assert len(passages) == 1
    p = passages[0]
    assert a[p.a_start : p.a_end] == passage.strip().encode()
    assert b[p.b_start : p.b_end] == passage.replace(" ", "\n  ").strip().encode()
    assert p.length == len(norm(passage.encode()))
    assert a[p.a_start : p.a_end].decode().startswith("Größe")


def test_normalise_keeps_every_other_byte_and_its_offset() -> None:
    data = bytes(range(256)) * 3
    kept, offsets = normalise(data)
    assert kept == norm(data) and len(kept) == 3 * 250
    assert [data[int(i)] for i in offsets] == list(kept)


# --- boilerplate common to many files ----------------------------------------------------------


def test_common_hashes_remove_a_shared_header_but_not_a_pair_passage() -> None:
    rng = np.random.default_rng(8)
    header = b"/* Licensed under the terms of the project licence; see the LICENCE file. */\n" * 4
    pair = rng.bytes(400)  # shared by files 0 and 1 only
    files = [header + rng.bytes(1500) for _ in range(5)]
    files[0] += pair + rng.bytes(300)
    files[1] += rng.bytes(200) + pair
    fps = [fingerprint(data) for data in files]
    header_hashes = set(kgram_hashes(norm(header), NOISE).tolist())

    boilerplate = common_hashes(fps, 3)
    assert len(boilerplate) > 0 and set(boilerplate.tolist()) <= header_hashes
    assert np.all(np.diff(boilerplate.astype(np.float64)) >= 0)
    assert len(common_hashes(fps, 6)) == 0
    assert np.array_equal(common_hashes([fps[0], fps[0]], 2), np.unique(fps[0].hashes))
    assert len(common_hashes([fingerprint(header * 2)], 2)) == 0  # one file counts once

    before = shared_passages(fps[0], fps[1])
    after = shared_passages(fps[0], fps[1], ignore=boilerplate)
    assert {p.length for p in before} == {len(norm(header)), len(norm(pair))}
    assert [p.length for p in after] == [len(norm(pair))]
    assert shared_passages(fps[2], fps[3], ignore=boilerplate) == []
    assert len(shared_passages(fps[2], fps[3])) == 1


# --- real files (open datasets beside the repository) -------------------------------------------


@pytest.mark.shared
def test_real_text_rewrapped_is_one_passage(shared_data: Path) -> None:
    # The Universal Declaration of Human Rights (texts/eng.txt) re-wrapped to 37 columns, CRLF
    # line ends, tab indentation: only whitespace changed, so one passage covers it all.
    original = (shared_data / "texts" / "eng.txt").read_bytes()
    lines = textwrap.wrap(original.decode("utf-8"), width=37)
    rewrapped = "\r\n".join("\t" * (k % 3) + line for k, line in enumerate(lines)).encode()
    fa, fb = fingerprint(original), fingerprint(rewrapped)
    passages = shared_passages(fa, fb)
    check_passages(original, rewrapped, passages, GUARANTEE)
    assert len(passages) == 1 and passages[0].length == len(fa.norm) == len(fb.norm)
    assert coverage(passages, fa, "a") >= 0.95 and coverage(passages, fb, "b") >= 0.95


@pytest.mark.shared
def test_real_text_edited_is_covered_by_few_passages(shared_data: Path) -> None:
    # The same text re-wrapped, with one word in every ~1000 bytes replaced: the passages
    # between the edits still cover nearly all of both files.
    original = (shared_data / "texts" / "eng.txt").read_bytes()
    words = original.decode("utf-8").split()
    edits = range(100, len(words), 170)
    for k in edits:
        words[k] = "EDITED"
    edited = "\n".join(textwrap.wrap(" ".join(words), width=61)).encode()
    fa, fb = fingerprint(original), fingerprint(edited)
    passages = shared_passages(fa, fb)
    check_passages(original, edited, passages, GUARANTEE)
    assert len(passages) <= len(edits) + 1
    assert coverage(passages, fa, "a") >= 0.95 and coverage(passages, fb, "b") >= 0.95


@pytest.mark.shared
@pytest.mark.parametrize("language", ["c", "go", "java", "python"])
def test_unrelated_solutions_in_one_language_share_no_long_passage(
    shared_data: Path, language: str
) -> None:
    # Rosetta Code solutions of 40 different tasks in one language (code/<language>). Longest
    # passage measured over all 780 pairs: c 129 normalised bytes (bubble sort and insertion
    # sort, one test harness), go 82 (the same two), java 57, python none found at 24 bytes.
    files = sorted((shared_data / "code" / language).iterdir())
    data = [path.read_bytes() for path in files]
    fps = [fingerprint(d) for d in data]
    longest = 0
    for i, j in itertools.combinations(range(len(fps)), 2):
        passages = shared_passages(fps[i], fps[j], min_length=NOISE)
        check_passages(data[i], data[j], passages, NOISE)
        longest = max([longest, *(p.length for p in passages)])
    assert longest < 200
    # and one solution pasted into another is found whole
    pasted = fingerprint(data[1] + b"\n" + data[0])
    found = shared_passages(fps[0], pasted)
    assert found[0].length == len(fps[0].norm)


def log_chunk(shared_data: Path, system: str, first: int, last: int) -> bytes:
    lines = (shared_data / "logs" / f"{system}.log").read_bytes().splitlines(keepends=True)
    return b"".join(lines[first - 1 : last])


@pytest.mark.shared
def test_logs_of_other_systems_share_no_passage(shared_data: Path) -> None:
    # Lines 1-500 of the eight Loghub systems: the longest passage any two share measured 46
    # normalised bytes, below the guarantee t = 64.
    systems = sorted(path.stem for path in (shared_data / "logs").glob("*.log"))
    assert len(systems) >= 2
    fps = {system: fingerprint(log_chunk(shared_data, system, 1, 500)) for system in systems}
    for x, y in itertools.combinations(systems, 2):
        assert shared_passages(fps[x], fps[y]) == [], (x, y)


@pytest.mark.shared
def test_chunks_of_one_log_share_only_short_passages(shared_data: Path) -> None:
    # HDFS lines 1-500 and 1001-1500: one system's templates with the same IP addresses, so
    # single lines agree up to the block id. Measured: longest 104 normalised bytes, passages of
    # at least t covering 12 % of the first chunk.
    a, b = log_chunk(shared_data, "HDFS", 1, 500), log_chunk(shared_data, "HDFS", 1001, 1500)
    fa, fb = fingerprint(a), fingerprint(b)
    passages = shared_passages(fa, fb)
    check_passages(a, b, passages, GUARANTEE)
    assert passages and GUARANTEE <= passages[0].length < 200
    assert coverage(passages, fa, "a") < 0.3


def test_coverage_is_the_union_of_intervals_over_normalised_bytes() -> None:
    fp = fingerprint(b"ab cd\tef\n")  # normalised: abcdef, 6 bytes
    first = Passage(a_start=0, a_end=2, b_start=3, b_end=5, length=2)  # ab | cd
    second = Passage(a_start=1, a_end=5, b_start=6, b_end=8, length=3)  # bcd | ef
    assert coverage([first, second], fp, "a") == pytest.approx(4 / 6)
    assert coverage([first, second], fp, "b") == pytest.approx(4 / 6)
    assert coverage([second], fp, "b") == pytest.approx(2 / 6)
    assert coverage([first, second, first], fp, "a") == pytest.approx(4 / 6)


def test_common_kgrams_counts_a_block_in_every_file_winnowing_picks_or_not() -> None:
    # Six files open with one licence block, then text of their own. Winnowing picks a k-gram
    # by the window around it, so k-grams at the block's end are picked in some files only:
    # counted by picks (common_among) some fall below 5 files and would seed stretches that
    # run through the block; counted where they occur (common_kgrams), every picked k-gram of
    # the block is in all six.
    from kinpress.passages import common_among, common_kgrams

    rng = random.Random(4)
    block = " ".join(rng.choice(["grant", "licence", "notice", "copy", "terms"]) for _ in range(80))

    def own() -> str:  # words of random letters: no file shares them
        return " ".join("".join(rng.choices("abcdefghijklmnopqrstuvwxyz", k=7)) for _ in range(90))

    files = [(block + "\n" + own()).encode() for _ in range(6)]
    prints = [fingerprint(f, 16, 48) for f in files]
    picked = [np.unique(p.hashes) for p in prints]
    inside = set(kgram_hashes(normalise(block.encode())[0], 16).tolist())
    by_picks = set(common_among(picked, 5).tolist())
    by_kgrams = set(common_kgrams([p.norm for p in prints], picked, 16, 5).tolist())
    picked_inside = inside & set(np.concatenate(picked).tolist())
    assert picked_inside <= by_kgrams and by_picks <= by_kgrams
    assert picked_inside - by_picks  # some of the block's k-grams were undercounted by picks
    assert not (by_kgrams - inside)  # the files' own text is never boilerplate


def test_boilerplate_is_in_many_files_that_are_not_copies_of_one_another() -> None:
    # Hashes 0-9 head six files that hold 90 hashes of their own each (a licence); hashes
    # 100-189 are all of six other files (one file copied six times: one group of near
    # copies). Both are in six files; only the licence is in files of five groups or more.
    licence = np.arange(10, dtype=np.uint64)
    own = [np.arange(1000 + 100 * k, 1090 + 100 * k, dtype=np.uint64) for k in range(6)]
    licensed = [np.concatenate([licence, mine]) for mine in own]
    copies = [np.arange(100, 190, dtype=np.uint64) for _ in range(6)]
    groups = np.array([0, 1, 2, 3, 4, 5, 6, 6, 6, 6, 6, 6])
    found = boilerplate_among(licensed + copies, 5, groups, min_groups=5)
    assert found.tolist() == licence.tolist()
    assert len(boilerplate_among(licensed + copies, 5)) == 10 + 90  # by files alone, both
    assert boilerplate_among(licensed + copies, 7, groups, min_groups=5).size == 0
    assert boilerplate_among([], 2).size == 0

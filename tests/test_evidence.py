"""Evidence of copying: stretches shared in order, on real texts, logs and code.

Real data from ../shared/datasets-real (UDHR texts, Loghub logs, Rosetta Code solutions; see its
SOURCES.md). Bounds on same-source pairs were measured on these files and are asserted with margin.
"""

from __future__ import annotations

import random
import re
import textwrap
from pathlib import Path

import numpy as np

from kinpress.derived import FOUND_IN_ORDER, SPANNED
from kinpress.evidence import GUARANTEE, evidence, seed_print
from kinpress.passages import common_hashes


def _edited(text: str, rate: float, rng: random.Random) -> str:
    """A `rate` share of the words replaced by other words."""
    words = re.split(r"(\s+)", text)
    for k in range(0, len(words), 2):
        if rng.random() < rate:
            words[k] = rng.choice(("alpha", "beta", "gamma", "delta", "x", "sigma_two"))
    return "".join(words)


def _squeeze(data: bytes) -> bytes:
    return re.sub(rb"\s+", b"", data)


def test_edited_rewrapped_and_reencoded_copies_are_shared_in_order(shared_data: Path) -> None:
    text = (shared_data / "texts" / "eng.txt").read_text()[1500:6500]
    original = seed_print(text.encode())
    rng = random.Random(5)
    wrapped = "\n".join(textwrap.wrap(" ".join(text.split()), 57))
    variants = {
        "crlf": text.replace("\n", "\r\n"),
        "tabs": text.replace("  ", "\t"),
        "rewrapped": wrapped,
        "edited 5 %": _edited(text, 0.05, rng),
    }
    for name, variant in variants.items():
        found = evidence(original, seed_print(variant.encode()))
        assert found.a_covered >= 0.95 and found.b_covered >= 0.95, name
        floor = 0.6 if name.startswith("edited") else 0.95
        assert found.a_seeded >= floor, (name, found.a_seeded)
    # Verbatim (whitespace aside): the stretch's bytes are the same text in both files.
    found = evidence(original, seed_print(wrapped.encode()))
    s = found.stretches[0]
    assert _squeeze(text.encode()[s.a_start : s.a_end]) == _squeeze(
        wrapped.encode()[s.b_start : s.b_end]
    )


def test_reordered_blocks_are_each_a_stretch(shared_data: Path) -> None:
    lines = (shared_data / "logs" / "OpenSSH.log").read_text().splitlines(keepends=True)[:120]
    blocks = ["".join(lines[k : k + 6]) for k in range(0, 120, 6)]
    random.Random(2).shuffle(blocks)
    found = evidence(seed_print("".join(lines).encode()), seed_print("".join(blocks).encode()))
    assert found.a_covered >= 0.9 and len(found.stretches) >= 10


def test_chunks_of_one_real_log_share_no_long_stretch(shared_data: Path) -> None:
    # Same templates, hosts and repeated lines, nothing copied: measured at most 0.09 of the
    # chunks' fingerprints found in order. A copy with one word in twenty replaced stays derived.
    for path in sorted((shared_data / "logs").glob("*.log")):
        lines = path.read_text().splitlines(keepends=True)
        early, late = "".join(lines[:200]), "".join(lines[1000:1200])
        found = evidence(seed_print(early.encode()), seed_print(late.encode()))
        assert max(found.a_seeded, found.b_seeded) <= 0.2, path.name
        assert max(found.a_covered, found.b_covered) < SPANNED, path.name
        copy = evidence(
            seed_print(early.encode()), seed_print(_edited(early, 0.05, random.Random(1)).encode())
        )
        assert copy.a_seeded >= FOUND_IN_ORDER + 0.1 and copy.a_covered >= SPANNED + 0.1, path.name


def test_solutions_in_one_language_share_little(shared_data: Path) -> None:
    # Rosetta Code solutions of different tasks in one language: idioms, no copying. Measured
    # (k=16, t=48) over 45 pairs a language: at most 0.07 of fingerprints in order.
    for language in ("python", "java", "c", "go"):
        files = sorted((shared_data / "code" / language).iterdir())[:8]
        prints = [seed_print(f.read_bytes()) for f in files]
        for i in range(len(prints)):
            for j in range(i + 1, len(prints)):
                found = evidence(prints[i], prints[j])
                assert max(found.a_seeded, found.b_seeded) <= 0.2, (files[i].name, files[j].name)


def test_scattered_common_phrases_make_no_stretch() -> None:
    # The same 40 phrases of 22 bytes in both files, in different orders, between different
    # filler: every phrase holds a shared k-gram, but none line up, so no stretch forms.
    rng = random.Random(9)
    phrases = [bytes(rng.choice(b"abcdefghij") for _ in range(22)) for _ in range(40)]

    def filler() -> bytes:
        return bytes(rng.choice(b"KLMNOPQRSTUVWXYZ") for _ in range(30))

    a = b"".join(p + filler() for p in phrases)
    rng.shuffle(phrases)
    b = b"".join(p + filler() for p in phrases)
    found = evidence(seed_print(a), seed_print(b))
    assert found.stretches == () and found.a_seeded == 0.0
    assert GUARANTEE > 22


def test_boilerplate_common_to_many_files_seeds_nothing() -> None:
    rng = random.Random(4)

    def noise(n: int) -> bytes:
        return bytes(rng.choice(b"abcdefghijklmnopqrstuvwxyz ") for _ in range(n))

    header = b"".join(b"# " + noise(60) + b"\n" for _ in range(8))  # one header, six files
    copied = noise(900)
    files = [header + noise(1500) for _ in range(6)]
    files[0] += copied
    files[1] += copied
    prints = [seed_print(f) for f in files]
    ignore = common_hashes(prints, 5)
    assert len(ignore) > 0
    plain = evidence(prints[2], prints[3])
    assert plain.longest >= 0.9 * len(_squeeze(header))
    kept = evidence(prints[2], prints[3], ignore)
    assert kept.stretches == ()
    pair = evidence(prints[0], prints[1], ignore)
    # The copied 900 bytes are about 37 % of each file's distinctive (non-header) content.
    assert pair.longest >= 0.9 * len(_squeeze(copied))
    assert np.isclose(pair.a_seeded, 900 / 2400, atol=0.06)


def test_names_aside_lines_up_a_consistently_renamed_copy(shared_data: Path) -> None:
    # Baker's parameterised strings: a name becomes how many names back it last occurred, so
    # renaming every `total` to `acc_v2` changes nothing, while other code stays other code.
    from kinpress.evidence import names_aside, remapped

    files = sorted((shared_data / "code" / "python").iterdir())
    original = files[3].read_bytes()
    names = sorted(set(re.findall(rb"\b[a-z_][a-z0-9_]{3,}\b", original)))[:4]
    copy = original
    for name in names:
        copy = re.sub(rb"\b" + name + rb"\b", name + b"_v2", copy)
    text, starts, ends = names_aside(original)
    copy_text, copy_starts, copy_ends = names_aside(copy)
    assert text == copy_text and len(starts) == len(ends) == len(text)
    found = evidence(seed_print(text), seed_print(copy_text))
    assert found.a_covered >= 0.95 and found.a_seeded >= 0.95
    s = remapped(found, (starts, ends), (copy_starts, copy_ends)).stretches[0]
    assert s.a_end - s.a_start >= 0.9 * len(original.strip())
    assert s.b_end <= len(copy) and copy[s.b_start : s.b_end].strip()
    other = names_aside(files[4].read_bytes())[0]
    assert evidence(seed_print(text), seed_print(other)).a_covered < 0.2


def _table(rng: random.Random, skips: int) -> bytes:
    """A generated table: a header, then one constant of a distinct made-up name per line,
    numbered in order from 0 with a few numbers skipped (as generated syscall or opcode tables
    are)."""
    syllables = ["ka", "lo", "mi", "ne", "ru", "sa", "ti", "vo", "xe", "zu", "pe", "do"]
    numbers = sorted(rng.sample(range(160 + skips), 160))
    lines = [b"// generated by tablegen from defs.h; do not edit", b"", b"const ("]
    for n in numbers:
        name = "T_" + "".join(rng.choice(syllables) for _ in range(4)).upper()
        lines.append(f"\t{name:<28} = {n}".encode())
    return b"\n".join([*lines, b")", b""])


def test_names_aside_finds_no_stretch_in_two_tables_of_distinct_names() -> None:
    # With names aside, two generated tables of different constants read alike (each name is
    # met for the first time, the numbers run in order in both), though no line of one is in
    # the other; such pairs were called derived (seen on generated system-call tables of a real
    # code tree). Only k-grams holding a name met before seed a stretch there (pattern_print),
    # and a consistently renamed copy still lines up whole (the test above, and below).
    from kinpress.evidence import names_aside, pattern_print

    rng = random.Random(7)
    first, second = _table(rng, 6), _table(rng, 9)
    one, other = names_aside(first)[0], names_aside(second)[0]
    assert evidence(seed_print(one), seed_print(other)).a_covered >= SPANNED  # the old way
    found = evidence(pattern_print(one), pattern_print(other))
    assert found.stretches == () and found.a_seeded == 0.0
    # a table whose names recur (each constant used again below it) copied with names renamed
    uses = b"".join(b"\tcheck(" + re.escape(n) + b")\n" for n in re.findall(rb"T_\w+", first))
    renamed = re.sub(rb"T_(\w+)", rb"U_\1", first + uses)
    copied = evidence(
        pattern_print(names_aside(first + uses)[0]), pattern_print(names_aside(renamed)[0])
    )
    assert copied.a_covered >= 0.9 and copied.a_seeded >= 0.9

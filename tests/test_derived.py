"""Finding copied or derived files: relation rules, the null, the prefilter, a generated corpus.

The corpus is generated here with a fixed seed: prose-like and log-like files of one shared,
Zipf-weighted invented vocabulary (so unrelated files share words, phrases and line shapes), and
pairs made from an original by a known transformation, which is the ground truth.
"""

from __future__ import annotations

import hashlib
import math
import random
import re
import textwrap
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from kinpress import SizeCache
from kinpress.derived import (
    COMMON_MOST,
    COMMON_SHARE,
    COVERED,
    RELATIONS,
    DerivedFinding,
    DerivedReport,
    boilerplate_files,
    families,
    find_derived,
    line_blocks,
    propose,
    relation,
    shingle_hashes,
)
from kinpress.derived.prefilter import near_copy_groups
from kinpress.items import Item, load_items

_SYLLABLES = (
    "ka",
    "ri",
    "so",
    "ten",
    "mar",
    "vel",
    "dun",
    "ash",
    "or",
    "ith",
    "bel",
    "cor",
    "dra",
    "fen",
    "gal",
    "hor",
    "lin",
    "mos",
    "nar",
    "pel",
    "qua",
    "ros",
    "sel",
    "tor",
    "ul",
    "vin",
    "wen",
    "yar",
    "zor",
    "an",
    "el",
    "in",
    "on",
    "un",
    "ber",
    "cal",
    "dor",
    "er",
    "fal",
    "gor",
)
_LEVELS = ("INFO", "INFO", "INFO", "DEBUG", "WARN", "ERROR")


def vocabulary(rng: random.Random, size: int = 1200) -> list[str]:
    """Invented words of one to three syllables, most frequent first."""
    words: dict[str, None] = {}
    while len(words) < size:
        words["".join(rng.choice(_SYLLABLES) for _ in range(rng.choice((1, 2, 2, 3))))] = None
    return list(words)


@dataclass(frozen=True)
class Kind:
    """What files of a corpus share: the vocabulary and its Zipf weights (1 / (rank + 2.7))."""

    words: list[str]
    weights: list[float]

    @classmethod
    def make(cls, seed: int) -> Kind:
        words = vocabulary(random.Random(seed))
        return cls(words, [1 / (rank + 2.7) for rank in range(len(words))])

    def draw(self, rng: random.Random, n: int, topic: list[str]) -> list[str]:
        """n words, a quarter of them from the file's own topic words."""
        common = rng.choices(self.words, self.weights, k=n)
        return [rng.choice(topic) if rng.random() < 0.25 else w for w in common]

    def topic(self, rng: random.Random) -> list[str]:
        return rng.sample(self.words[100:], 25)


def prose(kind: Kind, rng: random.Random, size: int, width: int = 72) -> bytes:
    """Paragraphs of sentences, wrapped at `width`, until about `size` bytes."""
    topic, out = kind.topic(rng), []
    while sum(len(p) for p in out) < size:
        sentences = []
        for _ in range(rng.randint(3, 6)):
            words = kind.draw(rng, rng.randint(6, 16), topic)
            sentences.append(" ".join(words).capitalize() + rng.choice(".....?!"))
        out.append(textwrap.fill(" ".join(sentences), width) + "\n\n")
    return "".join(out).encode()


def log_text(kind: Kind, rng: random.Random, size: int) -> bytes:
    """Service log lines with timestamps, levels, a few fields and words, about `size` bytes."""
    topic, out = kind.topic(rng), []
    service = "-".join(rng.sample(kind.words[:60], 2))
    clock = rng.randrange(86_400_000)
    while sum(len(line) for line in out) < size:
        clock += rng.randrange(1, 5_000)
        seconds, millis = divmod(clock, 1000)
        stamp = f"2024-05-17T{seconds // 3600 % 24:02d}:{seconds // 60 % 60:02d}:{seconds % 60:02d}"
        words = " ".join(kind.draw(rng, rng.randint(3, 9), topic))
        field = rng.choice(kind.words[:40])
        out.append(
            f"{stamp}.{millis:03d}Z {rng.choice(_LEVELS):5} {service}[{rng.randrange(90, 999)}]: "
            f"{words} {field}={rng.randrange(10_000)} req={rng.getrandbits(32):08x}\n"
        )
    return "".join(out).encode()


def fresh(kind: Kind, rng: random.Random, size: int, log: bool) -> bytes:
    return log_text(kind, rng, size) if log else prose(kind, rng, size)


def edited(kind: Kind, rng: random.Random, data: bytes, rate: float) -> bytes:
    """A `rate` share of the words (at least one) replaced, deleted or doubled."""
    tokens = re.split(rb"(\s+)", data)
    words = [k for k, token in enumerate(tokens) if token.strip()]
    for k in rng.sample(words, max(1, round(rate * len(words)))):
        action = rng.randrange(3)
        tokens[k] = (rng.choice(kind.words).encode(), b"", tokens[k] + b" " + tokens[k])[action]
    return b"".join(tokens)


def lines_slice(data: bytes, start: float, length: float) -> bytes:
    lines = data.splitlines(keepends=True)
    first = int(start * len(lines))
    return b"".join(lines[first : first + max(1, int(length * len(lines)))])


def excerpt(rng: random.Random, data: bytes) -> bytes:
    """A run of whole lines, 25-60 % of the file."""
    length = rng.uniform(0.25, 0.6)
    return lines_slice(data, rng.uniform(0, 1 - length), length)


def extended(kind: Kind, rng: random.Random, data: bytes, log: bool) -> bytes:
    """The file with 50-120 % new material before it, after it, or in its middle."""
    extra = fresh(kind, rng, int(len(data) * rng.uniform(0.5, 1.2)), log)
    where = rng.choice(("before", "after", "middle"))
    if where == "before":
        return extra + data
    if where == "after":
        return data + extra
    lines = data.splitlines(keepends=True)
    half = len(lines) // 2
    return b"".join(lines[:half]) + extra + b"".join(lines[half:])


def reordered(rng: random.Random, data: bytes) -> bytes:
    """Blocks of 3-8 lines in shuffled order."""
    lines, blocks = data.splitlines(keepends=True), []
    while lines:
        cut = rng.randint(3, 8)
        blocks.append(b"".join(lines[:cut]))
        lines = lines[cut:]
    rng.shuffle(blocks)
    return b"".join(blocks)


def rewrapped(rng: random.Random, data: bytes) -> bytes:
    """Prose paragraphs refilled at another width (48-64 or 84-100 columns)."""
    width = rng.choice((rng.randint(48, 64), rng.randint(84, 100)))
    paragraphs = data.decode().split("\n\n")
    return "\n\n".join(textwrap.fill(" ".join(p.split()), width) for p in paragraphs).encode()


def shared_part(kind: Kind, rng: random.Random, data: bytes, log: bool) -> bytes:
    """Half of the file (its first or second half) joined to new material of the same size."""
    half = lines_slice(data, rng.choice((0.0, 0.5)), 0.5)
    return half + fresh(kind, rng, len(half), log)


@dataclass(frozen=True)
class Corpus:
    """Items, the true derived pairs by name with their transformation, and which contain which."""

    items: list[Item]
    truth: dict[frozenset[str], str]
    contains: dict[frozenset[str], tuple[str, str]]


TRANSFORMS = {
    "copy": 3,
    "edit": 8,
    "excerpt": 6,
    "extend": 6,
    "reorder": 4,
    "rewrap": 4,
    "shared": 3,
}


def make_corpus(
    seed: int, unrelated: int, per_transform: dict[str, int], size: tuple[int, int]
) -> Corpus:
    """`unrelated` independent files plus one original and one derived file per transformation.

    Files are prose or logs (rewrapped files are always prose), `size` bytes (uniform range).
    Each original has exactly one derived file, so the truth is exactly the listed pairs.
    """
    rng = random.Random(seed)
    kind = Kind.make(seed)
    items: list[Item] = []
    truth: dict[frozenset[str], str] = {}
    contains: dict[frozenset[str], tuple[str, str]] = {}

    def add(name: str, data: bytes) -> str:
        items.append(Item(name=name, data=data, source=name))
        return name

    for k in range(unrelated):
        log = rng.random() < 0.5
        add(f"file{k:05d}.{'log' if log else 'txt'}", fresh(kind, rng, rng.randint(*size), log))
    derive: dict[str, Callable[[bytes, bool], bytes]] = {
        "copy": lambda d, log: d,
        "edit": lambda d, log: edited(kind, rng, d, rng.uniform(0.01, 0.10)),
        "excerpt": lambda d, log: excerpt(rng, d),
        "extend": lambda d, log: extended(kind, rng, d, log),
        "reorder": lambda d, log: reordered(rng, d),
        "rewrap": lambda d, log: rewrapped(rng, d),
        "shared": lambda d, log: shared_part(kind, rng, d, log),
    }
    for transform, count in per_transform.items():
        for k in range(count):
            log = transform != "rewrap" and rng.random() < 0.5
            original = fresh(kind, rng, rng.randint(*size), log)
            a = add(f"{transform}{k:04d}-orig.{'log' if log else 'txt'}", original)
            b = add(f"{transform}{k:04d}-derived.{'log' if log else 'txt'}", derive[transform](
                original, log))  # fmt: skip
            truth[frozenset((a, b))] = transform
            if transform in ("excerpt", "extend"):
                contains[frozenset((a, b))] = (a, b) if transform == "excerpt" else (b, a)
    random.Random(seed + 1).shuffle(items)
    return Corpus(items, truth, contains)


def small_corpus() -> Corpus:
    """116 files of 2-4 KB: 48 unrelated and 34 derived pairs (every transformation)."""
    return make_corpus(7, 48, TRANSFORMS, (2000, 4000))


@pytest.fixture(scope="module")
def corpus() -> Corpus:
    return small_corpus()


@pytest.fixture(scope="module")
def cache(tmp_path_factory: pytest.TempPathFactory) -> SizeCache:
    return SizeCache(tmp_path_factory.mktemp("derived") / "sizes.sqlite")


@pytest.fixture(scope="module")
def exhaustive(corpus: Corpus, cache: SizeCache) -> DerivedReport:
    return find_derived(corpus.items, exhaustive=True, cache=cache)


@pytest.fixture(scope="module")
def prefiltered(corpus: Corpus, cache: SizeCache, exhaustive: DerivedReport) -> DerivedReport:
    # After the exhaustive run, so every candidate pair comes from the cache.
    return find_derived(corpus.items, cache=cache)


def pair(finding: DerivedFinding) -> frozenset[str]:
    return frozenset((finding.a, finding.b))


def container(finding: DerivedFinding) -> str | None:
    """The name the finding says contains the other, if it is a containment."""
    return {"a_contains_b": finding.a, "b_contains_a": finding.b}.get(finding.relation)


def test_relation_rules_follow_explained_fractions_and_sizes() -> None:
    assert relation(1.0, 1.0, 500, 500, True) == "identical"
    assert relation(0.9, 0.88, 500, 480, False) == "near_copy"
    # b is a third of a and fully explained by it: a contains b (b an excerpt or a an extension).
    assert relation(0.35, 0.98, 1500, 500, False) == "a_contains_b"
    assert relation(0.98, 0.35, 500, 1500, False) == "b_contains_a"
    assert relation(0.5, 0.45, 1000, 900, False) == "partial_overlap"
    assert relation(0.4, COVERED - 0.01, 1500, 500, False) == "partial_overlap"


def test_families_are_connected_components() -> None:
    def link(a: str, b: str) -> DerivedFinding:
        return DerivedFinding(a, b, "near_copy", 0.9, 0.9, 0.9, 0.001, a_path=a, b_path=b,
                              a_hash="", b_hash="")  # fmt: skip

    found = families([link("x", "y"), link("p", "q"), link("y", "z")])
    assert [f.members for f in found] == [("x", "y", "z"), ("p", "q")]
    assert len(found[0].findings) == 2


def test_a_familys_links_are_its_maximum_spanning_tree_by_score() -> None:
    def link(a: str, b: str, score: float) -> DerivedFinding:
        return DerivedFinding(a, b, "near_copy", score, score, score, 0.001, a_path=a,
                              b_path=b, a_hash="", b_hash="")  # fmt: skip

    # four files, all six pairs: the strongest three that join them (Kruskal)
    found = [link("a", "b", 0.9), link("a", "c", 0.5), link("a", "d", 0.6),
             link("b", "c", 0.8), link("b", "d", 0.4), link("c", "d", 0.7)]  # fmt: skip
    (family,) = families(found)
    assert [(f.a, f.b) for f in family.links()] == [("a", "b"), ("b", "c"), ("c", "d")]
    (chain,) = families(found[:1] + found[3:4])  # a tree already: all of it
    assert chain.links() == chain.findings
    # against a reference library: SciPy's minimum spanning tree of the negated scores
    # (scipy.sparse.csgraph.minimum_spanning_tree) weighs the same as the links, on 9 files
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import minimum_spanning_tree

    rng = random.Random(9)
    names = [f"f{k}" for k in range(9)]
    scored = [link(names[i], names[j], rng.uniform(0.3, 1.0))
              for i in range(9) for j in range(i + 1, 9) if rng.random() < 0.6]  # fmt: skip
    (family,) = families(scored)
    weights = np.zeros((9, 9))
    for f in scored:
        weights[names.index(f.a), names.index(f.b)] = -f.score
    tree = minimum_spanning_tree(csr_matrix(weights))
    assert len(family.links()) == 8
    assert sum(f.score for f in family.links()) == pytest.approx(-tree.sum())


def test_line_blocks_cut_after_line_breaks_and_keep_every_byte() -> None:
    data = b"".join(b"line %d with some words\n" % k for k in range(40)) + b"tail"
    blocks = line_blocks(data, 64)
    assert b"".join(blocks) == data
    assert all(block.endswith(b"\n") and len(block) >= 64 for block in blocks[:-1])
    no_breaks = bytes(range(11, 256)) * 4  # 980 bytes without a line break: hard cuts
    assert [len(b) for b in line_blocks(no_breaks, 64)] == [64] * 15 + [20]


def test_shingles_of_an_excerpt_are_a_subset() -> None:
    text = prose(Kind.make(1), random.Random(2), 3000)
    whole, part = shingle_hashes(text, 16), shingle_hashes(text[1000:2000], 16)
    assert set(part.tolist()) <= set(whole.tolist())
    assert len(shingle_hashes(b"short", 16)) == 1


def test_derived_pairs_found_with_precision_recall_and_direction(
    corpus: Corpus, prefiltered: DerivedReport
) -> None:
    found = {pair(f): f for f in prefiltered.findings}
    true_found = [p for p in found if p in corpus.truth]
    precision, recall = len(true_found) / len(found), len(true_found) / len(corpus.truth)
    assert precision >= 0.9 and recall >= 0.9, (precision, recall)
    right = [
        p for p, (big, _) in corpus.contains.items() if p in found and container(found[p]) == big
    ]
    assert len(right) / len(corpus.contains) >= 0.9
    copies = [p for p, t in corpus.truth.items() if t == "copy"]
    assert all(found[p].relation == "identical" for p in copies)
    assert all(f.relation in RELATIONS for f in prefiltered.findings)
    keys = {"a", "b", "relation", "a_explained_by_b", "b_explained_by_a", "score", "fpr"}
    keys |= {"a_shared_in_order", "b_shared_in_order", "passages"}
    keys |= {"a_path", "b_path", "a_hash", "b_hash"}
    assert all(set(row) == keys for row in prefiltered.as_json())
    # The passages locate what was copied: inside both files, in order, and (edits aside) the
    # same text; a reviewer can open both files at these offsets.
    data = {item.name: item.data for item in corpus.items}
    for f in prefiltered.findings:
        if f.relation == "identical":
            continue
        assert f.stretches, f
        for s in f.stretches:
            a, b = data[f.a][s.a_start : s.a_end], data[f.b][s.b_start : s.b_end]
            assert 0 <= s.a_start < s.a_end <= len(data[f.a]) and s.b_end <= len(data[f.b])
            assert a.split()[0] == b.split()[0] and a.split()[-1] == b.split()[-1], s


def test_unrelated_pairs_are_flagged_at_about_max_fpr(
    corpus: Corpus, exhaustive: DerivedReport
) -> None:
    # Exhaustive: every unrelated same-kind pair is tested against the null, so the share of
    # them reported is the realised false-positive rate, which max_fpr bounds (with slack for
    # the estimate from the default ceil(3 / max_fpr) = 300 null pairs).
    assert exhaustive.counts.verified == exhaustive.counts.possible == 116 * 115 // 2
    assert exhaustive.null.pairs == 300
    unrelated = exhaustive.counts.possible - len(corpus.truth)
    false = [f for f in exhaustive.findings if pair(f) not in corpus.truth]
    assert len(false) / unrelated <= 1.5 * exhaustive.max_fpr
    assert all(0 < f.fpr <= exhaustive.max_fpr for f in exhaustive.findings)
    assert all(f.score > exhaustive.null.cut for f in exhaustive.findings)
    assert all(f.relation == "partial_overlap" for f in false)


def test_a_stricter_max_fpr_reports_a_subset(
    corpus: Corpus, cache: SizeCache, prefiltered: DerivedReport
) -> None:
    # Both runs draw the same 1,000 null pairs (same seed and shapes): the second takes all its
    # sizes from the cache.
    loose = find_derived(corpus.items, cache=cache, max_fpr=0.05, null_pairs=1000)
    strict = find_derived(corpus.items, cache=cache, max_fpr=0.003, null_pairs=1000)
    assert {pair(f) for f in strict.findings} <= {pair(f) for f in loose.findings}
    assert all(f.fpr <= 0.003 or f.relation == "identical" for f in strict.findings)
    assert strict.null.cut >= loose.null.cut
    assert strict.stats.pairs_computed == 0


def test_prefilter_misses_under_two_percent_of_true_pairs_found_exhaustively(
    corpus: Corpus, exhaustive: DerivedReport, prefiltered: DerivedReport
) -> None:
    by_all = {pair(f) for f in exhaustive.findings} & corpus.truth.keys()
    by_prefilter = {pair(f) for f in prefiltered.findings}
    assert len(by_all - by_prefilter) / len(by_all) < 0.02
    counts = prefiltered.counts
    assert counts.possible == counts.candidates + counts.pruned
    assert counts.pruned > 0.9 * counts.possible


def test_unrelated_random_bytes_give_no_candidates() -> None:
    items = [Item(f"r{k}", random.Random(k).randbytes(3000), "random") for k in range(4)]
    report = find_derived(items)
    assert report.findings == () and report.counts.candidates == 0 and report.null.pairs == 0


def test_bad_arguments_are_refused() -> None:
    items = [Item("a", b"x" * 100, "a"), Item("b", b"y" * 100, "b")]
    with pytest.raises(ValueError, match="max_fpr"):
        find_derived(items, max_fpr=0)
    with pytest.raises(ValueError, match="two items"):
        find_derived(items[:1])


@pytest.mark.shared
def test_same_task_in_other_languages_is_mostly_not_derived(shared_data: Path) -> None:
    # Open datasets (../shared/datasets-real/code, Rosetta Code via ad-si/RosettaGit): 40 tasks
    # solved in 8 languages. Solutions of one task in two languages share names and literals
    # but neither is derived from the other.
    folder = shared_data / "code"
    rows = (line.split("\t") for line in (folder / "labels.tsv").read_text().splitlines()[1:])
    labels = {Path(row[0]).name: (row[1], row[2]) for row in rows}
    report = find_derived(load_items([folder], split="file"))
    cross = [
        f
        for f in report.findings
        if labels[f.a][1] == labels[f.b][1] and labels[f.a][0] != labels[f.b][0]
    ]
    same_task_pairs = sum(
        1
        for x in labels
        for y in labels
        if x < y and labels[x][1] == labels[y][1] and labels[x][0] != labels[y][0]
    )
    assert len(cross) / same_task_pairs <= 0.02
    assert all(f.relation == "partial_overlap" for f in cross)


def test_the_null_is_made_of_files_of_the_candidates_kind() -> None:
    # A null of other kinds (prose for a log, logs for code) lacks what files of one kind share,
    # so a kind's pairs would pass it too often: where the set has at least four files of a
    # kind, null material for its files comes from that kind only.
    from kinpress.derived import _donor_pools, _null_material, kind_of

    def item(name: str) -> Item:
        return Item(name=name, data=name.encode() * 40 + b"\n", source=f"/share/{name}")

    items = [item(f"m{k}.py") for k in range(5)] + [item(f"d{k}.txt") for k in range(2)]
    items.append(Item(name="x", data=b"y\n", source="/logs/day1.log.gz"))
    kinds = [kind_of(i) for i in items]
    assert kinds[:5] == [".py"] * 5 and kinds[5] == ".txt" and kinds[7] == ".log"
    pools = _donor_pools(kinds)
    assert pools[".py"] == [0, 1, 2, 3, 4] and pools[".txt"] == list(range(8))
    data = [i.data for i in items]
    material = _null_material(0, 600, data, pools[".py"], lambda j: False, random.Random(1))
    assert material and b"d0.txt" not in material and b"m0.py" not in material
    assert b"m1.py" in material or b"m2.py" in material


def test_findings_say_where_each_file_came_from_and_the_hash_of_its_bytes(tmp_path: Path) -> None:
    rng = random.Random(5)
    kind = Kind.make(5)
    original = prose(kind, rng, 3000)
    files = {"notes.txt": original, "copy of notes.txt": original[:1500],
             "other.txt": prose(kind, rng, 3000)}  # fmt: skip
    for name, data in files.items():
        (tmp_path / name).write_bytes(data)
    found = find_derived(load_items([tmp_path]), "zlib:level=9", exhaustive=True)
    [finding] = found.findings
    row = finding.as_json()
    for side in ("a", "b"):
        name = row[side]
        assert row[f"{side}_path"] == str(tmp_path / name)
        # reference: hashlib's BLAKE2b (RFC 7693) at 16 bytes, the digest the cache keys on
        assert row[f"{side}_hash"] == hashlib.blake2b(files[name], digest_size=16).hexdigest()


def test_two_generated_tables_of_distinct_names_are_not_derived() -> None:
    # Generated tables (one constant per line, numbered in order) of different names share no
    # line, yet with names aside they read alike; on a real code tree such pairs were reported
    # derived. With the k-grams that hold no recurring name left out there, they are not,
    # while a copy of one table with its names renamed is still found.
    from test_evidence import _table

    rng = random.Random(11)
    tables = [_table(rng, skips) for skips in (5, 8, 12)]
    uses = b"".join(b"\tregister(" + n + b")\n" for n in re.findall(rb"T_\w+", tables[0]))
    tables[0] += uses  # its names recur below the table
    files = {f"table{k}.go": t for k, t in enumerate(tables)}
    files["vendored.go"] = re.sub(rb"T_(\w+)", rb"V_\1", tables[0])
    items = [Item(name, data, name) for name, data in files.items()]
    found = find_derived(items, "zlib:level=9", exhaustive=True)
    assert {(f.a, f.b) for f in found.findings} == {("table0.go", "vendored.go")}


class _MadeUpCode:
    """Small source files of made-up names: a package of two to `most` one-line functions."""

    def __init__(self, seed: int) -> None:
        self.rng = random.Random(seed)

    def word(self) -> str:
        return "".join(
            self.rng.choice("bdfgklmnprstvz") + self.rng.choice("aeiou") for _ in range(4)
        )

    def function(self) -> str:  # one to three arguments, a mixed expression
        rng = self.rng
        args = [self.word()[:4] for _ in range(rng.randint(1, 3))]
        terms = [rng.choice([*args, str(rng.randrange(99))]) for _ in range(rng.randint(2, 4))]
        expression = "".join(t + rng.choice([" + ", " * ", " - ", " / "]) for t in terms)[:-3]
        return f"func {self.word()}({', '.join(args)} int) int {{ return {expression} }}"

    def file(self, most: int = 5) -> bytes:
        lines = [self.function() for _ in range(self.rng.randint(2, most))]
        return ("package " + self.word() + "\n\n" + "\n".join(lines) + "\n").encode()


def test_a_licence_header_every_file_opens_with_proposes_no_pairs() -> None:
    # On a real code tree every file opens with the same licence lines; in small files they
    # are most of the shingles, so the prefilter proposed nearly every pair of them (17 million
    # of Go's source tree's 33 million: hours of measuring). Shingles in 5 files or 2 % of them
    # are the set's boilerplate, left out of the sketches as the judge leaves them out, so only
    # the copy is proposed.
    header = textwrap.dedent("""\
        // Copyright 2031 The Quendle Authors. All rights reserved.
        // Use of this source code is governed by a permissive licence
        // that can be found in the LICENCE file of the repository.

        """).encode()
    code = _MadeUpCode(3)
    files = [header + code.file() for _ in range(60)]
    files.append(files[7].replace(b"return ", b"return  "))  # a copy, spaces added
    items = [Item(f"f{k}.go", data, f"f{k}.go") for k, data in enumerate(files)]
    found = find_derived(items, "zlib:level=9")
    assert found.counts.candidates <= 5  # of 1,830 pairs
    assert {(f.a, f.b) for f in found.findings} == {("f7.go", "f60.go")}


def test_a_licence_in_a_few_dozen_files_of_a_large_set_is_boilerplate() -> None:
    # In Go's source tree one licence heads 70 of 8,146 files: under 2 % of them, so it was not
    # boilerplate, and 949 findings were pairs of those files sharing nothing else. A passage
    # in COMMON_MOST files is boilerplate whatever the set's size. Here 30 of 2,600 files open
    # with one licence longer than their code (2 % of 2,600 is 52); the prefilter, counting on
    # 1,000 of the files, proposes their pairs, and the judge tells they share only it.
    licence = textwrap.dedent("""\
        // Copyright (c) 2029 Ferrow Systems and the Tallis contributors.
        // Permission is granted, free of charge, to any person obtaining a copy of this
        // software, to deal in it without restriction, including the rights to use, copy,
        // modify, merge, publish and distribute it, subject to the following conditions:
        // the above notice and this permission notice shall be included in all copies.
        // THE SOFTWARE IS PROVIDED "AS IS", WITHOUT WARRANTY OF ANY KIND, EXPRESS OR
        // IMPLIED. IN NO EVENT SHALL THE AUTHORS BE LIABLE FOR ANY CLAIM OR DAMAGES.

        """).encode()
    assert boilerplate_files(2600) == COMMON_MOST < 30 < math.ceil(COMMON_SHARE * 2600)
    code = _MadeUpCode(5)
    files = [(licence if k < 30 else b"") + code.file(most=12) for k in range(2600)]
    files.append(files[100] + code.file())  # an extension of one file, to show the rest works
    items = [Item(f"m{k}.go", data, f"m{k}.go") for k, data in enumerate(files)]
    found = find_derived(items, "zlib:level=9")
    assert {(f.a, f.b) for f in found.findings} == {("m100.go", "m2600.go")}
    assert found.counts.candidates >= 30 * 29 // 2  # the licence's pairs were judged


def test_a_file_copied_into_a_dozen_places_is_found_and_a_licence_is_not() -> None:
    # One module vendored into every service of a repository: its k-grams are in a dozen files,
    # as many as a licence's, and counted as boilerplate its copies were never proposed nor
    # found (0 of 66 pairs). A common passage is boilerplate only where the files holding it
    # hold other content besides (passages.boilerplate_among); here 30 other files open with one
    # licence and share nothing else, and none of their pairs is found.
    licence = textwrap.dedent("""\
        // Copyright (c) 2033 Orrin Valley Cooperative. Redistribution and use in source and
        // binary forms, with or without modification, are permitted provided that the notice
        // above is kept. This software is provided as is, without warranty of any kind.

        """).encode()
    code = _MadeUpCode(11)
    shared = code.file(most=40)
    rng = random.Random(11)
    copies = []
    for _ in range(12):
        lines = shared.split(b"\n")
        k = rng.randrange(len(lines))
        lines[k] += b" // local change"
        copies.append(b"\n".join(lines))
    others = [(licence if k < 30 else b"") + code.file(most=12) for k in range(140)]
    files = copies + others
    items = [Item(f"s{k}.go", data, f"s{k}.go") for k, data in enumerate(files)]
    assert boilerplate_files(len(items)) <= 12  # the copies' k-grams are common enough
    found = {tuple(sorted((f.a, f.b))) for f in find_derived(items, "zlib:level=9").findings}
    copied = {tuple(sorted((f"s{i}.go", f"s{j}.go"))) for i in range(12) for j in range(i + 1, 12)}
    assert found == copied


def test_near_copies_are_grouped_and_files_sharing_a_licence_are_not() -> None:
    # Four copies of one file with a word in fifty changed are one group (Jaccard near 0.9);
    # files opening with one licence and holding code of their own, and an excerpt of a
    # third of the copied file, are each their own.
    rng = random.Random(4)
    words = [f"w{rng.randrange(10**6)}" for _ in range(600)]
    copies = []
    for _ in range(4):
        edited = [w if rng.random() > 0.02 else "edit" for w in words]
        copies.append(np.unique(shingle_hashes(" ".join(edited).encode(), 16)))
    licence = " ".join(f"l{k}" for k in range(40))
    licensed = [
        np.unique(shingle_hashes((licence + " ".join(rng.choices(words, k=60))).encode(), 16))
        for _ in range(3)
    ]
    excerpt = np.unique(shingle_hashes(" ".join(words[:200]).encode(), 16))
    groups = near_copy_groups([*copies, *licensed, excerpt, np.zeros(0, dtype=np.uint32)], 0)
    assert len(set(groups[:4].tolist())) == 1
    assert len(set(groups[3:].tolist())) == 6


def test_proposals_made_beforehand_give_the_same_findings() -> None:
    # The command line proposes candidates before -c auto (whose estimate counts them) and
    # hands them to find_derived, which then does not propose again.
    code = _MadeUpCode(21)
    files = [code.file(most=10) for _ in range(30)]
    files.append(files[3] + code.file())
    items = [Item(f"p{k}.go", data, f"p{k}.go") for k, data in enumerate(files)]
    made = propose(items)
    given = find_derived(items, "zlib:level=9", proposals=made)
    own = find_derived(items, "zlib:level=9")
    assert given.findings == own.findings and given.counts == own.counts
    assert {(f.a, f.b) for f in given.findings} == {("p3.go", "p30.go")}
    with pytest.raises(ValueError, match="proposals of 31 items given for 30 items"):
        find_derived(items[:30], "zlib:level=9", proposals=made)

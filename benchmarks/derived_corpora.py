"""Real-data corpora with known derived pairs and same-source hard negatives, for `find_derived`.

Every builder is reproducible from its seed and returns a `RealCorpus`: the items, the truth (the
derived pairs by name, with how each was made and the relation expected), and the source of every
file, so that the pairs of one source that are not derived (the hard negatives: chunks of one log,
modules of one project, sections of one document) can be listed.

Data are read at run time, never stored in the repository:

- `mixed_corpus`, `same_source_corpus`, `rosetta_language_corpus`: the open datasets in
  ../shared/datasets-real (UDHR texts in 14 languages, Loghub samples of 8 system logs, Rosetta
  Code solutions in 8 languages); see SOURCES.md there.
- `code_tree_corpus`: Python sources installed on this machine (the running interpreter's standard
  library and site-packages, which came from the package registries).
- `go_tree_corpus`: a Go source tree given by path (Debian's golang-1.19-src, fetched from the
  package registry by fetch_debian_code.sh), never used while developing the derived findings.

Truth labels are by construction: a derived file is made from its original by a stated
transformation; every other pair is unrelated by construction (disjoint log line ranges, distinct
solutions, disjoint text sections). Real vendored pairs in `code_tree_corpus` are the one
exception: they are found by module path and kept as true only when they share substantial
content by an independent line measure (`line_containment`), and sibling negatives sharing more
than template-sized passages are left out (see `code_tree_corpus`).

Import from tests and benchmarks with benchmarks/ on sys.path::

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
    from derived_corpora import mixed_corpus
"""

from __future__ import annotations

import hashlib
import random
import re
import sysconfig
import textwrap
from collections import Counter
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

from kinpress.items import Item

SHARED_DATA = Path(__file__).resolve().parents[2] / "shared" / "datasets-real"

LOGS = ("Android", "Apache", "HDFS", "Hadoop", "Linux", "OpenSSH", "Spark", "Zookeeper")

CONTAINMENT = "contains"
"""Expected relation of excerpts and extensions: the `container` file holds the other one."""


class Derivation(NamedTuple):
    """A true derived pair: how it was made, the relation expected, which file contains which.

    `relation` is "identical", "near_copy", "contains" (then `container` names the file that
    holds the other: the original of an excerpt, the extension of an original) or
    "partial_overlap".
    """

    transformation: str
    relation: str
    container: str | None = None


@dataclass
class RealCorpus:
    """Items, the true derived pairs, and the source (log, language, project) of every file."""

    items: list[Item] = field(default_factory=list)
    truth: dict[frozenset[str], Derivation] = field(default_factory=dict)
    source: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    ignore: set[frozenset[str]] = field(default_factory=set)
    """Pairs left out of scoring: their label is uncertain (see `code_tree_corpus`)."""

    def add(self, name: str, data: bytes, source: str) -> str:
        if name in self.source:
            raise ValueError(f"duplicate name {name}")
        self.items.append(Item(name=name, data=data, source=name, label=source))
        self.source[name] = source
        return name

    def derive(self, original: str, derived: str, how: Derivation) -> None:
        self.truth[frozenset((original, derived))] = how

    def same_source_pairs(self) -> set[frozenset[str]]:
        """Pairs of one source that are not derived: the hard negatives."""
        by_source: dict[str, list[str]] = {}
        for name, src in self.source.items():
            by_source.setdefault(src, []).append(name)
        pairs = set()
        for names in by_source.values():
            for i, a in enumerate(names):
                for b in names[i + 1 :]:
                    pairs.add(frozenset((a, b)))
        return pairs - self.truth.keys()

    def mark_shared_passages(self, limit: float = 0.25) -> RealCorpus:
        """Leave out of scoring (`ignore`) every pair not derived by construction that shares
        `limit` of the smaller file's runs of three lines (`line_containment`): real data hold
        such pairs (Rosetta sort solutions share one test harness copied between tasks), and
        calling their finding false would be unfair."""
        windows = [line_windows(item.data) for item in self.items]
        for i, a in enumerate(self.items):
            for j in range(i + 1, len(self.items)):
                wa, wb = windows[i], windows[j]
                if not wa or not wb or len(wa & wb) < limit * min(len(wa), len(wb)):
                    continue
                pair = frozenset((a.name, self.items[j].name))
                if pair not in self.truth:
                    self.ignore.add(pair)
        # A derived copy of either file shares that passage too (renamed names break its lines
        # apart, so the line check above misses it): its pair with the other file is left out.
        partners: dict[str, set[str]] = {}
        for pair in self.truth:
            x, y = tuple(pair)
            partners.setdefault(x, set()).add(y)
            partners.setdefault(y, set()).add(x)
        for pair in list(self.ignore):
            x, y = tuple(pair)
            for a, b in ((x, y), (y, x)):
                self.ignore.update(frozenset((c, b)) for c in partners.get(a, ()) if c != b)
        return self

    def shuffled(self, seed: int) -> RealCorpus:
        random.Random(seed).shuffle(self.items)
        return self


# --------------------------------------------------------------------------------------------
# Transformations


def _tokens(data: bytes) -> list[bytes]:
    return re.split(rb"(\s+)", data)


def edited(rng: random.Random, data: bytes, rate: float, donor: Sequence[bytes]) -> bytes:
    """A `rate` share of the tokens (at least one) substituted, deleted, or with one inserted.

    Substituted and inserted tokens are drawn from `donor` (tokens of the same source), so an
    edit looks like the file's own material.
    """
    tokens = _tokens(data)
    words = [k for k, token in enumerate(tokens) if token.strip()]
    for k in rng.sample(words, max(1, round(rate * len(words)))):
        action = rng.randrange(3)
        if action == 0:
            tokens[k] = rng.choice(donor)
        elif action == 1:
            tokens[k] = b""
        else:
            tokens[k] = tokens[k] + b" " + rng.choice(donor)
    return b"".join(tokens)


def excerpt(rng: random.Random, data: bytes) -> bytes:
    """A contiguous run of whole lines, 30-60 % of the file's lines."""
    lines = data.splitlines(keepends=True)
    length = max(1, round(rng.uniform(0.3, 0.6) * len(lines)))
    first = rng.randrange(0, len(lines) - length + 1)
    return b"".join(lines[first : first + length])


def extended(rng: random.Random, data: bytes, extra: bytes) -> bytes:
    """`extra` put before or after the file (a line break kept between them)."""
    if not data.endswith(b"\n"):
        data += b"\n"
    if not extra.endswith(b"\n"):
        extra += b"\n"
    return extra + data if rng.random() < 0.5 else data + extra


def reordered(rng: random.Random, data: bytes, separator: bytes | None = None) -> bytes:
    """Blocks in shuffled order: blocks split at `separator` (paragraph lines of texts, blank
    lines of code), or runs of 5-15 lines.

    At least two blocks change place; a file of one block is returned with its two halves
    swapped.
    """
    if separator is not None and data.count(separator) >= 2:
        blocks = [b + separator for b in data.split(separator) if b.strip()]
    else:
        lines, blocks = data.splitlines(keepends=True), []
        while lines:
            cut = rng.randint(5, 15)
            blocks.append(b"".join(lines[:cut]))
            lines = lines[cut:]
    if not blocks[-1].endswith(b"\n"):
        blocks[-1] += b"\n"
    if len(blocks) < 2:
        lines = data.splitlines(keepends=True)
        return b"".join(lines[len(lines) // 2 :] + lines[: len(lines) // 2])
    order = list(range(len(blocks)))
    while order == sorted(order):
        rng.shuffle(order)
    return b"".join(blocks[k] for k in order)


def rewrapped(rng: random.Random, data: bytes) -> bytes:
    """Each line (a paragraph) refilled at 56-80 columns, paragraphs then separated by a blank."""
    width = rng.randint(56, 80)
    paragraphs = data.decode().splitlines()
    return "\n\n".join(textwrap.fill(p, width) for p in paragraphs if p.strip()).encode() + b"\n"


def crlf(data: bytes) -> bytes:
    """Every line ending CRLF."""
    return data.replace(b"\r\n", b"\n").replace(b"\n", b"\r\n")


def reindented(rng: random.Random, data: bytes) -> bytes:
    """Leading whitespace rewritten: tabs to spaces, or each indent level to another width."""
    lines = data.decode(errors="surrogateescape").splitlines(keepends=True)
    if any(line.startswith("\t") for line in lines):
        width = rng.choice((2, 4, 8))
        out = [re.sub(r"^\t+", lambda m: " " * width * len(m.group()), ln) for ln in lines]
    else:
        widths = [len(ln) - len(ln.lstrip(" ")) for ln in lines if ln.strip()]
        step = min((w for w in widths if w), default=4)
        new = rng.choice([w for w in (2, 3, 4, 8) if w != step] + ["\t"])

        def fix(line: str) -> str:
            spaces = len(line) - len(line.lstrip(" "))
            levels, rest = divmod(spaces, step)
            unit = new if isinstance(new, str) else " " * new
            return unit * levels + " " * rest + line[spaces:]

        out = [fix(ln) for ln in lines]
    return "".join(out).encode(errors="surrogateescape")


EDIT_RATES = {"edit1": 0.01, "edit5": 0.05, "edit10": 0.10}

EXPECTED = {
    "copy": "identical",
    "edit1": "near_copy",
    "edit5": "near_copy",
    "edit10": "near_copy",
    "excerpt": CONTAINMENT,
    "extension": CONTAINMENT,
    "reorder": "near_copy",
    "rewrap": "near_copy",
    "crlf": "near_copy",
    "reindent": "near_copy",
}

LOG_TRANSFORMS = ("copy", "edit1", "edit5", "edit10", "excerpt", "extension", "reorder", "crlf")
TEXT_TRANSFORMS = (*LOG_TRANSFORMS, "rewrap")
CODE_TRANSFORMS = (*LOG_TRANSFORMS, "reindent")


@dataclass
class _Maker:
    """Derives a file from an original; `extra` gives unused material of the same source."""

    rng: random.Random
    donor: Sequence[bytes]
    extra: Callable[[int], bytes]
    separator: bytes | None = None

    def __call__(self, transformation: str, data: bytes) -> bytes:
        rng = self.rng
        if transformation == "copy":
            return data
        if transformation in EDIT_RATES:
            return edited(rng, data, EDIT_RATES[transformation], self.donor)
        if transformation == "excerpt":
            return excerpt(rng, data)
        if transformation == "extension":
            return extended(rng, data, self.extra(round(len(data) * rng.uniform(0.6, 1.5))))
        if transformation == "reorder":
            return reordered(rng, data, self.separator)
        if transformation == "rewrap":
            return rewrapped(rng, data)
        if transformation == "crlf":
            return crlf(data)
        if transformation == "reindent":
            return reindented(rng, data)
        raise ValueError(f"unknown transformation {transformation}")


def _add_pair(
    corpus: RealCorpus, make: _Maker, transformation: str, original: tuple[str, bytes, str],
    derived_name: str,
) -> None:  # fmt: skip
    name, data, source = original
    corpus.add(name, data, source)
    new = make(transformation, data)
    corpus.add(derived_name, new, source)
    relation = EXPECTED[transformation]
    container = None
    if relation == CONTAINMENT:
        container = name if transformation == "excerpt" else derived_name
    corpus.derive(name, derived_name, Derivation(transformation, relation, container))


def _plan(rng: random.Random, transforms: Sequence[str], count: int) -> list[str]:
    """`count` transformations, each of `transforms` about equally often, in random order."""
    start = rng.randrange(len(transforms))
    plan = [transforms[(start + k) % len(transforms)] for k in range(count)]
    rng.shuffle(plan)
    return plan


# --------------------------------------------------------------------------------------------
# Line ranges of one document, handed out without overlap


class Ranges:
    """Non-overlapping line ranges of one document, allocated at random offsets."""

    def __init__(self, lines: Sequence[bytes], rng: random.Random) -> None:
        self.lines, self.rng = lines, rng
        self.free: list[tuple[int, int]] = [(0, len(lines))]

    def take(self, length: int) -> tuple[int, int] | None:
        """A free range of `length` lines (or None): first-fit among shuffled free gaps."""
        gaps = [g for g in self.free if g[1] - g[0] >= length]
        if not gaps:
            return None
        lo, hi = self.rng.choice(gaps)
        start = self.rng.randrange(lo, hi - length + 1)
        self.free.remove((lo, hi))
        self.free += [g for g in ((lo, start), (start + length, hi)) if g[1] > g[0]]
        return start, start + length

    def text(self, span: tuple[int, int]) -> bytes:
        return b"".join(self.lines[span[0] : span[1]])

    def take_bytes(self, size: int, per_line: float) -> bytes:
        """Unused material of about `size` bytes (whole lines), less if the document is used up."""
        want = max(1, round(size / per_line))
        while want > 0:
            span = self.take(want)
            if span is not None:
                return self.text(span)
            want //= 2
        return b""

    def taker(self, per_line: float) -> Callable[[int], bytes]:
        """`take_bytes` with the document's mean line length, as `_Maker.extra` wants it."""
        return lambda size: self.take_bytes(size, per_line)


def _read_lines(path: Path) -> list[bytes]:
    return [ln if ln.endswith(b"\n") else ln + b"\n" for ln in path.read_bytes().splitlines(True)]


def _vocabulary(data: Iterable[bytes]) -> list[bytes]:
    return sorted({t for chunk in data for t in chunk.split() if t})


# --------------------------------------------------------------------------------------------
# (a) mixed corpus: logs, texts and code of the open datasets


def _require_shared(root: Path) -> Path:
    if not root.is_dir():
        raise FileNotFoundError(f"open datasets not found at {root}")
    return root


def _log_part(
    corpus: RealCorpus, rng: random.Random, root: Path, pairs: int, negatives: int
) -> None:
    """Per log: originals (100-300 lines) with their derived files, then disjoint other chunks."""
    plan = _plan(rng, LOG_TRANSFORMS, pairs)
    per_log: dict[str, list[str]] = {log: [] for log in LOGS}
    for k, transformation in enumerate(plan):
        per_log[LOGS[(k + rng.randrange(len(LOGS))) % len(LOGS)]].append(transformation)
    serial = iter(rng.sample(range(1000), 1000))
    for log in LOGS:
        lines = _read_lines(root / "logs" / f"{log}.log")
        ranges = Ranges(lines, rng)
        per_line = sum(map(len, lines)) / len(lines)
        make = _Maker(rng, _vocabulary(lines), ranges.taker(per_line))
        source = f"log:{log}"
        for transformation in per_log[log]:
            span = ranges.take(rng.randint(100, 300))
            assert span is not None
            original = (f"logs/{log}-{next(serial):03d}.log", ranges.text(span), source)
            _add_pair(corpus, make, transformation, original, f"logs/{log}-{next(serial):03d}.log")
        for _ in range(negatives):
            span = ranges.take(rng.randint(100, 300)) or ranges.take(100)
            if span is None:
                corpus.notes.append(f"{log}: log used up, fewer negatives")
                break
            corpus.add(f"logs/{log}-{next(serial):03d}.log", ranges.text(span), source)


def _text_part(
    corpus: RealCorpus, rng: random.Random, root: Path, pairs: int, negatives: int
) -> None:
    """UDHR sections of 8-20 lines; other sections of every language are the negatives."""
    languages = sorted(p.stem for p in (root / "texts").glob("*.txt"))
    ranges = {lang: Ranges(_read_lines(root / "texts" / f"{lang}.txt"), rng) for lang in languages}
    serial = iter(rng.sample(range(1000), 1000))
    for transformation in _plan(rng, TEXT_TRANSFORMS, pairs):
        lang = rng.choice(languages)
        r = ranges[lang]
        per_line = sum(map(len, r.lines)) / len(r.lines)
        span = r.take(rng.randint(8, 20))
        assert span is not None, lang
        make = _Maker(rng, _vocabulary(r.lines), r.taker(per_line), separator=b"\n")
        original = (f"texts/{lang}-{next(serial):03d}.txt", r.text(span), f"text:{lang}")
        _add_pair(corpus, make, transformation, original, f"texts/{lang}-{next(serial):03d}.txt")
    for k in range(negatives):
        lang = languages[k % len(languages)]
        span = ranges[lang].take(rng.randint(8, 20)) or ranges[lang].take(6)
        if span is None:
            continue
        name = f"texts/{lang}-{next(serial):03d}.txt"
        corpus.add(name, ranges[lang].text(span), f"text:{lang}")


def rosetta(root: Path) -> dict[str, list[Path]]:
    """Rosetta solutions by language folder, sorted, files with duplicate bytes left out."""
    seen: set[bytes] = set()
    out: dict[str, list[Path]] = {}
    for folder in sorted(p for p in (root / "code").iterdir() if p.is_dir()):
        for path in sorted(folder.iterdir()):
            digest = hashlib.sha256(path.read_bytes()).digest()
            if digest not in seen:
                seen.add(digest)
                out.setdefault(folder.name, []).append(path)
    return out


def _code_part(
    corpus: RealCorpus, rng: random.Random, root: Path, pairs: int, negatives: int
) -> None:
    """Rosetta solutions: originals with derived files; other solutions of each language."""
    pool = {lang: rng.sample(paths, len(paths)) for lang, paths in rosetta(root).items()}
    languages = sorted(pool)
    for transformation in _plan(rng, CODE_TRANSFORMS, pairs):
        lang = rng.choice(languages)
        path = pool[lang].pop()
        donor = _vocabulary(p.read_bytes() for p in pool[lang][:10])

        def extra(size: int, lang: str = lang) -> bytes:
            return pool[lang].pop().read_bytes() if pool[lang] else b""

        make = _Maker(rng, donor, extra, separator=b"\n\n")
        original = (f"code/{lang}/{path.name}", path.read_bytes(), f"code:{lang}")
        _add_pair(corpus, make, transformation, original, f"code/{lang}/copy-of-{path.name}")
    for k in range(negatives):
        lang = languages[k % len(languages)]
        if pool[lang]:
            path = pool[lang].pop()
            corpus.add(f"code/{lang}/{path.name}", path.read_bytes(), f"code:{lang}")


def mixed_corpus(
    seed: int,
    root: Path = SHARED_DATA,
    *,
    log_pairs: int = 12,
    text_pairs: int = 8,
    code_pairs: int = 12,
    log_negatives: int = 7,
    text_negatives: int = 28,
    code_negatives: int = 56,
) -> RealCorpus:
    """Logs, texts and code of the open datasets: ~32 derived pairs among ~200 files.

    Originals are random excerpts: log chunks of 100-300 lines at random offsets, UDHR sections
    of 8-20 lines, whole Rosetta solutions. Each has one derived file, made by one of copy,
    1 / 5 / 10 % token edits, an excerpt (30-60 % of its lines), an extension (unused material
    of the same source, 60-150 % of its size, before or after), reordered blocks (paragraphs,
    blank-line blocks of code, runs of log lines), re-wrapped paragraphs (texts), CRLF line
    ends, re-indentation (code). The negatives are other chunks of the same logs (line ranges
    disjoint from every original and every extension's material), other sections of every
    language, other solutions in each language. Derived file names carry no hint for logs and
    texts; code copies are named copy-of-<original> as a person would.
    """
    root = _require_shared(root)
    rng = random.Random(seed)
    corpus = RealCorpus()
    _log_part(corpus, rng, root, log_pairs, log_negatives)
    _text_part(corpus, rng, root, text_pairs, text_negatives)
    _code_part(corpus, rng, root, code_pairs, code_negatives)
    return corpus.mark_shared_passages().shuffled(seed + 1)


def time_ordered_log_corpus(
    seed: int, root: Path = SHARED_DATA, *, pairs: int = 16, negatives: int = 10
) -> RealCorpus:
    """Logs in time order: originals from the first half of each log, derived files of them, and
    negatives from the second half (later lines, a drift of the same system)."""
    root = _require_shared(root)
    rng = random.Random(seed)
    corpus = RealCorpus()
    plan = _plan(rng, LOG_TRANSFORMS, pairs)
    serial = iter(rng.sample(range(1000), 1000))
    for k, log in enumerate(LOGS):
        lines = _read_lines(root / "logs" / f"{log}.log")
        early = Ranges(lines[: len(lines) // 2], rng)
        late = Ranges(lines[len(lines) // 2 :], rng)
        per_line = sum(map(len, lines)) / len(lines)
        make = _Maker(rng, _vocabulary(lines), early.taker(per_line))
        for transformation in plan[k :: len(LOGS)]:
            span = early.take(rng.randint(100, 200))
            assert span is not None
            original = (f"logs/{log}-{next(serial):03d}.log", early.text(span), f"log:{log}")
            _add_pair(corpus, make, transformation, original, f"logs/{log}-{next(serial):03d}.log")
        for _ in range(negatives):
            span = late.take(rng.randint(60, 120))
            if span is None:
                break
            corpus.add(f"logs/{log}-{next(serial):03d}.log", late.text(span), f"log:{log}")
    return corpus.mark_shared_passages().shuffled(seed + 1)


# --------------------------------------------------------------------------------------------
# (c) same-source corpus: no derived pair at all


def same_source_corpus(
    seed: int,
    root: Path = SHARED_DATA,
    *,
    log_chunks: int = 9,
    solutions: int = 12,
    text_sections: int = 3,
) -> RealCorpus:
    """Derivation-free: disjoint chunks of each log, distinct solutions per language, disjoint
    sections of each UDHR translation. Every finding is false; their number, against the pairs
    verified, is the realised false-positive rate."""
    root = _require_shared(root)
    rng = random.Random(seed)
    corpus = RealCorpus()
    serial = iter(rng.sample(range(10000), 10000))
    for log in LOGS:
        ranges = Ranges(_read_lines(root / "logs" / f"{log}.log"), rng)
        for _ in range(log_chunks):
            span = ranges.take(rng.randint(100, 200)) or ranges.take(50)
            if span is not None:
                corpus.add(f"logs/{log}-{next(serial):04d}.log", ranges.text(span), f"log:{log}")
    for lang, paths in rosetta(root).items():
        for path in rng.sample(paths, min(solutions, len(paths))):
            corpus.add(f"code/{lang}/{path.name}", path.read_bytes(), f"code:{lang}")
    for path in sorted((root / "texts").glob("*.txt")):
        ranges = Ranges(_read_lines(path), rng)
        for _ in range(text_sections):
            span = ranges.take(rng.randint(10, 25))
            if span is not None:
                name = f"texts/{path.stem}-{next(serial):04d}.txt"
                corpus.add(name, ranges.text(span), f"text:{path.stem}")
    return corpus.mark_shared_passages().shuffled(seed + 1)


# --------------------------------------------------------------------------------------------
# Independent line measure (for labels of real trees and for reading false findings)


def _norm_lines(data: bytes) -> list[bytes]:
    return [b" ".join(ln.split()) for ln in data.splitlines() if ln.strip()]


def line_windows(data: bytes, width: int = 3) -> set[bytes]:
    """Runs of `width` consecutive non-blank lines, whitespace-normalised, as a set."""
    lines = _norm_lines(data)
    if len(lines) < width:
        return {b"\n".join(lines)} if lines else set()
    return {b"\n".join(lines[k : k + width]) for k in range(len(lines) - width + 1)}


def line_containment(a: bytes, b: bytes, width: int = 3) -> float:
    """Share of the smaller file's line windows found in the other: 0 = no shared 3-line run,
    1 = one file's every run of three lines is in the other (an independent check, not the
    method under test)."""
    wa, wb = line_windows(a, width), line_windows(b, width)
    if not wa or not wb:
        return 0.0
    return len(wa & wb) / min(len(wa), len(wb))


def _installed_roots() -> tuple[Path, Path]:
    paths = sysconfig.get_paths()
    return Path(paths["stdlib"]), Path(paths["purelib"])


# --------------------------------------------------------------------------------------------
# (b) code tree: installed Python projects, real vendored copies, synthetic vendorings

VENDOR_DIRS = ("pip/_vendor", "setuptools/_vendor", "pkg_resources/_vendor")
SIBLING_PROJECTS = (
    "rich", "pygments", "pyparsing", "packaging", "click", "jinja2", "tornado", "yaml", "dask",
    "distributed", "toolz", "zict",
)  # fmt: skip
STDLIB_PACKAGES = ("encodings", "email", "asyncio", "importlib", "json", "unittest", "xml/dom")
SYNTHETIC_PROJECTS = ("click", "jinja2", "tornado", "yaml", "dask", "distributed", "toolz", "zict")
SYNTHETIC = ("vendor_imports", "vendor_renamed", "vendor_version")
MIN_BYTES, MAX_BYTES = 1500, 40_000
TRUE_LINES = 0.5
"""Real vendored pairs (same module path) sharing at least this line containment are true."""
SIBLING_LINES = 0.25
"""Siblings sharing this line containment with another chosen file of another path are dropped."""


@dataclass(frozen=True)
class Module:
    """An installed source file: where it is, its name in the corpus, its project, its module
    path below the project's root folder (the same for a vendored copy and its original)."""

    path: Path
    name: str
    project: str
    module: str


def _is_test(path: Path) -> bool:
    return "test" in path.parts[-2] or path.name.startswith("test")


def installed_modules() -> list[Module]:
    """Python files of the running interpreter's site-packages (with vendored folders) and
    standard library packages, MIN_BYTES to MAX_BYTES, tests left out."""
    stdlib, purelib = _installed_roots()
    roots = [(purelib / v, f"site/{v}") for v in VENDOR_DIRS]
    roots += [(purelib, "site")]
    out: list[Module] = []
    for root, prefix in roots:
        if not root.is_dir():
            continue
        wanted = SIBLING_PROJECTS if prefix == "site" else None
        for top in sorted(p for p in root.iterdir() if p.is_dir() or p.suffix == ".py"):
            if (wanted is not None and top.name not in wanted) or top.name == "__init__.py":
                continue
            files = [top] if top.is_file() else sorted(top.rglob("*.py"))
            out += [
                Module(f, f"{prefix}/{f.relative_to(root)}", top.name.removesuffix(".py"),
                       str(f.relative_to(root)))
                for f in files
                if MIN_BYTES <= f.stat().st_size <= MAX_BYTES and not _is_test(f)
            ]  # fmt: skip
    for package in STDLIB_PACKAGES:
        folder = stdlib / package
        if folder.is_dir():
            out += [
                Module(f, f"stdlib/{f.relative_to(stdlib)}", f"stdlib:{package}",
                       f"stdlib/{f.relative_to(stdlib)}")
                for f in sorted(folder.rglob("*.py"))
                if MIN_BYTES <= f.stat().st_size <= MAX_BYTES and "test" not in str(f.parent)
            ]  # fmt: skip
    return out


def expected_relation(a: bytes, b: bytes, names: tuple[str, str]) -> Derivation:
    """The relation a real vendored pair should get, from bytes and line containment."""
    if a == b:
        return Derivation("vendored_real", "identical")
    if min(len(a), len(b)) >= 0.8 * max(len(a), len(b)):
        return Derivation("vendored_real", "near_copy")
    if line_containment(a, b) >= 0.7:
        return Derivation("vendored_real", CONTAINMENT, names[0] if len(a) > len(b) else names[1])
    return Derivation("vendored_real", "partial_overlap")


_IMPORT = re.compile(rb"^(\s*)(from|import)\s+([\w.]+)(.*)$", re.M)


def vendor_imports(data: bytes, project: str, package: str) -> bytes:
    """Imports of `project` (absolute, and relative ones inside `package`) rewritten to
    `myproj._vendor.<project>...`, the way vendoring tools rewrite them."""
    target = b"myproj._vendor"
    proj = project.encode()

    def fix(m: re.Match[bytes]) -> bytes:
        indent, kind, mod, rest = m.groups()
        if kind == b"from" and mod.startswith(b"."):
            dots = len(mod) - len(mod.lstrip(b"."))
            base = package.encode().split(b".")[: max(1, package.count(".") + 2 - dots)]
            mod = b".".join([target, *base, *([mod.lstrip(b".")] if mod.strip(b".") else [])])
        elif mod == proj or mod.startswith(proj + b"."):
            if kind == b"import" and b" as " not in rest and mod == proj:
                return indent + b"from " + target + b" import " + proj + rest
            mod = target + b"." + mod
        return indent + kind + b" " + mod + rest

    return _IMPORT.sub(fix, data)


def top_level_defs(data: bytes) -> list[tuple[str, int, int]]:
    """Top-level functions and classes: (name, first line, last line), 0-based, decorators in."""
    import ast

    tree = ast.parse(data)
    out = []
    for node in tree.body:
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef | ast.ClassDef):
            first = min([node.lineno, *(d.lineno for d in node.decorator_list)]) - 1
            out.append((node.name, first, (node.end_lineno or node.lineno) - 1))
    return out


def renamed(rng: random.Random, data: bytes, defs: list[tuple[str, int, int]]) -> bytes:
    """Three to five top-level names renamed consistently (whole words, every occurrence)."""
    names = [name for name, _, _ in defs if len(name) > 3]
    for name in rng.sample(names, min(len(names), rng.randint(3, 5))):
        new = ("Vendored" + name) if name[0].isupper() else ("mp_" + name.lstrip("_"))
        data = re.sub(rb"\b" + re.escape(name.encode()) + rb"\b", new.encode(), data)
    return data


def version_apart(rng: random.Random, data: bytes, defs: list[tuple[str, int, int]]) -> bytes:
    """A version apart: one or two small functions removed, two edited (5 % token edits), one
    added (an existing one, renamed and edited); at most ~15 % of the lines removed."""
    lines = data.splitlines(keepends=True)
    budget = 0.15 * len(lines)
    order = rng.sample(defs, len(defs))
    removed = [d for d in order if d[2] - d[1] + 1 <= budget][: rng.randint(1, 2)]
    edited_defs = [d for d in order if d not in removed][:2]
    donor = _vocabulary(lines)
    for _, first, last in edited_defs:
        block = edited(rng, b"".join(lines[first : last + 1]), 0.05, donor)
        lines[first : last + 1] = [block] + [b""] * (last - first)
    added = b""
    if edited_defs:
        name, first, last = edited_defs[-1]
        added = b"\n\n" + b"".join(lines[first : last + 1]).replace(
            name.encode(), (name + "_compat").encode()
        )
    for _, first, last in removed:
        lines[first : last + 1] = [b""] * (last - first + 1)
    return b"".join(lines) + added


def synthetic_vendoring(rng: random.Random, module: Module, how: str) -> bytes | None:
    """A vendored copy of `module` made by `how` (see SYNTHETIC), or None if it does not parse."""
    data = module.path.read_bytes()
    try:
        defs = top_level_defs(data)
    except (SyntaxError, ValueError):
        return None
    if len(defs) < 4:
        return None
    package = ".".join(Path(module.module).with_suffix("").parts[:-1])
    out = vendor_imports(data, module.project, package)
    if how in ("vendor_renamed", "vendor_version"):
        out = renamed(rng, out, defs)
    if how == "vendor_version":
        out = version_apart(rng, out, top_level_defs(out))
    return out


class _Chosen:
    """Files chosen so far, with their 3-line windows for the sibling overlap check."""

    def __init__(self, corpus: RealCorpus) -> None:
        self.corpus = corpus
        self.windows: dict[str, set[bytes]] = {}
        self.module: dict[str, str] = {}

    def overlaps(self, data: bytes, module: str, limit: float) -> bool:
        """Whether `data` shares `limit` of its line windows with a chosen file of another path
        (or has no window at all)."""
        mine = line_windows(data)
        return not mine or any(
            len(mine & w) >= limit * min(len(mine), len(w))
            for name, w in self.windows.items()
            if self.module[name] != module and w
        )

    def add(self, name: str, data: bytes, project: str, module: str, kind: str = "py") -> str:
        self.corpus.add(name, data, f"{kind}:{project}")
        self.windows[name] = line_windows(data)
        self.module[name] = module
        return name


def _real_clusters(modules: Sequence[Module]) -> list[list[Module]]:
    """Module paths present in two or more places (a vendored folder and the original, or two
    vendored folders) where some two copies share TRUE_LINES of their line windows."""
    by_path: dict[str, list[Module]] = {}
    for m in modules:
        if m.name.startswith("site/"):
            by_path.setdefault(m.module, []).append(m)
    out = []
    for group in by_path.values():
        data = [m.path.read_bytes() for m in group]
        if len(group) > 1 and any(
            line_containment(data[i], data[j]) >= TRUE_LINES
            for i in range(len(group))
            for j in range(i + 1, len(group))
        ):
            out.append(group)
    return out


def _label_real(chosen: _Chosen, names: Sequence[str]) -> None:
    """True pairs among copies of one module path (TRUE_LINES or more), the others ignored."""
    data = {n: bytes(chosen.corpus.items[k].data) for k, n in _positions(chosen.corpus, names)}
    for i, a in enumerate(names):
        for b in names[i + 1 :]:
            if line_containment(data[a], data[b]) >= TRUE_LINES:
                chosen.corpus.derive(a, b, expected_relation(data[a], data[b], (a, b)))
            else:
                chosen.corpus.ignore.add(frozenset((a, b)))


def _positions(corpus: RealCorpus, names: Sequence[str]) -> list[tuple[int, str]]:
    where = {item.name: k for k, item in enumerate(corpus.items)}
    return [(where[n], n) for n in names]


def code_tree_corpus(
    seed: int, *, clusters: int = 12, synthetic: int = 12, files: int = 220
) -> RealCorpus:
    """Modules of installed Python projects with real and synthetic vendored copies.

    Read at run time from the running interpreter's site-packages and standard library
    (`installed_modules`; never stored in the repository). Three parts:

    1. Real vendored copies: `clusters` module paths found both in a vendored folder (pip's,
       setuptools', pkg_resources') and in the original project or another vendored folder,
       every copy included. Two copies are a true pair when at least TRUE_LINES of the smaller
       one's runs of three lines (whitespace-normalised) are in the other: that much verbatim
       shared code is copying, not a shared idiom. Copies of one path sharing less (a rewrite
       several versions apart) are neither true nor false: left out of scoring (`ignore`).
    2. Synthetic vendorings: `synthetic` modules of projects not vendored here, each copied to
       myproj/_vendor/<project>/... with imports rewritten; some also with 3-5 top-level names
       renamed; some a version apart (functions removed, edited, added). True by construction.
    3. Siblings, the hard negatives: other modules of the same projects (licence header,
       imports, idioms) and of standard library packages, among them encodings/*.py written
       from one template. A sibling is dropped when it shares SIBLING_LINES of its line windows
       with a chosen file of another module path: generated codecs whose decoding tables share
       the ASCII half (128 identical table lines) are such pairs; both are outputs of one
       generator, not one copied from the other, but they do share long verbatim passages, so
       no label would be fair and they are kept out instead.
    """
    rng = random.Random(seed)
    modules = installed_modules()
    corpus = RealCorpus()
    chosen = _Chosen(corpus)
    found = _real_clusters(modules)
    if not found:
        corpus.notes.append("no vendored folders installed: no real vendored pairs")
    for group in rng.sample(found, min(clusters, len(found))):
        names = [chosen.add(m.name, m.path.read_bytes(), m.project, m.module) for m in group]
        _label_real(chosen, names)
    _synthetic_part(chosen, rng, modules, synthetic)
    _sibling_part(chosen, rng, modules, files)
    return corpus.mark_shared_passages().shuffled(seed + 1)


def _synthetic_part(
    chosen: _Chosen, rng: random.Random, modules: Sequence[Module], count: int
) -> None:
    pool = [m for m in modules if m.project in SYNTHETIC_PROJECTS and m.name.startswith("site/")]
    rng.shuffle(pool)
    plan = _plan(rng, SYNTHETIC, count)
    while plan and pool:
        module = pool.pop()
        how = plan[-1]
        copy = synthetic_vendoring(rng, module, how)
        data = module.path.read_bytes()
        if copy is None or copy == data or chosen.overlaps(data, module.module, SIBLING_LINES):
            continue
        plan.pop()
        a = chosen.add(module.name, data, module.project, module.module)
        b = chosen.add(f"myproj/_vendor/{module.module}", copy, module.project, module.module)
        chosen.corpus.derive(a, b, Derivation(how, "near_copy"))
    if plan:
        chosen.corpus.notes.append(f"{len(plan)} synthetic vendorings not made (no module)")


def _sibling_part(
    chosen: _Chosen, rng: random.Random, modules: Sequence[Module], files: int
) -> None:
    """Siblings of the chosen projects first, then of standard library packages."""
    used = {m for m in chosen.module.values()}
    projects = {chosen.corpus.source[n].removeprefix("py:") for n in chosen.module}
    pool = [m for m in modules if m.module not in used]
    rng.shuffle(pool)
    pool.sort(key=lambda m: m.project not in projects and not m.project.startswith("stdlib:"))
    per_project: dict[str, int] = {}
    dropped = 0
    for m in pool:
        if len(chosen.corpus.items) >= files:
            break
        cap = 20 if m.project == "stdlib:encodings" else 10
        if m.module in used or per_project.get(m.project, 0) >= cap:
            continue
        data = m.path.read_bytes()
        if chosen.overlaps(data, m.module, SIBLING_LINES):
            dropped += 1
            continue
        chosen.add(m.name, data, m.project, m.module)
        used.add(m.module)
        per_project[m.project] = per_project.get(m.project, 0) + 1
    chosen.corpus.notes.append(f"{dropped} siblings dropped for sharing long passages")


# --------------------------------------------------------------------------------------------
# One language of Rosetta solutions, with vendored-style copies among its other solutions

_KEYWORDS = frozenset(
    " ".join((
        "and as assert async await break class continue def del elif else except False finally",
        "for from global if import in is lambda None nonlocal not or pass raise return True try",
        "while with yield self print range len list dict str int float main func package var",
        "const type struct public static void string begin end then float64 float32 int64",
        "int32 byte rune bool error make append strings fmt math",
    )).split()
)  # fmt: skip


def renamed_identifiers(rng: random.Random, data: bytes, count: int = 4) -> bytes:
    """`count` identifiers used at least twice (4+ letters, no keyword) renamed consistently."""
    words = Counter(re.findall(rb"\b[A-Za-z_][A-Za-z0-9_]{3,}\b", data))
    names = sorted(w for w, n in words.items() if n >= 2 and w.decode() not in _KEYWORDS)
    for name in rng.sample(names, min(count, len(names))):
        data = re.sub(rb"\b" + re.escape(name) + rb"\b", b"vnd_" + name, data)
    return data


def rewritten_imports(data: bytes) -> bytes:
    """Python imports moved under `myproj._vendor` (`import x` -> `import myproj._vendor.x as x`
    when bare, `from x import` -> `from myproj._vendor.x import`)."""

    def fix(m: re.Match[bytes]) -> bytes:
        indent, kind, mod, rest = m.groups()
        if mod.startswith(b"."):
            return m.group(0)
        if kind == b"import" and not rest.strip():
            return indent + b"import myproj._vendor." + mod + b" as " + mod.split(b".")[-1]
        return indent + kind + b" myproj._vendor." + mod + rest

    return _IMPORT.sub(fix, data)


_GO_IMPORT = re.compile(rb'^(\s*(?:import\s+)?(?:\w+\s+)?)"([\w./-]+)"(\s*)$', re.M)


def rewritten_go_imports(data: bytes) -> bytes:
    """Go import paths moved under myproj/_vendor/ (`"fmt"` -> `"myproj/_vendor/fmt"`)."""
    return _GO_IMPORT.sub(
        lambda m: m.group(1) + b'"myproj/_vendor/' + m.group(2) + b'"' + m.group(3), data
    )


REWRITE_IMPORTS: dict[str, Callable[[bytes], bytes]] = {
    "python": rewritten_imports,
    "go": rewritten_go_imports,
}


def rosetta_language_corpus(
    seed: int, root: Path = SHARED_DATA, *, language: str = "python", copies: int = 8
) -> RealCorpus:
    """All solutions of one Rosetta language; `copies` of them also copied with imports
    rewritten (Python, Go: `REWRITE_IMPORTS`) and 3-5 identifiers renamed. The other
    solutions, of the same language and site conventions, are the negatives."""
    root = _require_shared(root)
    rng = random.Random(seed)
    corpus = RealCorpus()
    paths = rosetta(root)[language]
    for k, path in enumerate(rng.sample(paths, len(paths))):
        data = path.read_bytes()
        name = corpus.add(f"code/{language}/{path.name}", data, f"code:{language}")
        if k < copies:
            copy = renamed_identifiers(rng, data, rng.randint(3, 5))
            if language in REWRITE_IMPORTS:
                copy = REWRITE_IMPORTS[language](copy)
            other = corpus.add(f"vendor/{language}/{path.name}", copy, f"code:{language}")
            how = "copy" if copy == data else "vendor_renamed"
            corpus.derive(name, other, Derivation(how, EXPECTED.get(how, "near_copy")))
    return corpus.mark_shared_passages().shuffled(seed + 1)


# --------------------------------------------------------------------------------------------
# (g) a code tree never seen while developing: Go's standard library and commands

GO_TRANSFORMS = ("vendor", "vendor_renamed", "vendor_version", "excerpt", "extension")


def go_source_files(root: Path) -> list[tuple[Path, str, str]]:
    """(path, path below root, package: its folder) of every .go file below `root`
    (a Go source tree's src/), MIN_BYTES to MAX_BYTES, tests and test data left out."""
    out = []
    for path in sorted(root.rglob("*.go")):
        rel = path.relative_to(root)
        if "testdata" in rel.parts or path.name.endswith("_test.go"):
            continue
        if MIN_BYTES <= path.stat().st_size <= MAX_BYTES:
            out.append((path, str(rel), str(rel.parent)))
    return out


def go_version_apart(rng: random.Random, data: bytes) -> bytes:
    """Two stretches of 20-60 lines with 5 % of their tokens edited, and a tenth of the lines
    removed at one place: a copy a version apart."""
    lines = data.splitlines(keepends=True)
    donor = _vocabulary(lines)
    for _ in range(2):
        first = rng.randrange(len(lines))
        last = min(len(lines), first + rng.randint(20, 60))
        lines[first:last] = [edited(rng, b"".join(lines[first:last]), 0.05, donor)]
    first = rng.randrange(len(lines))
    del lines[first : first + max(1, len(lines) // 10)]
    return b"".join(lines)


def go_tree_corpus(root: Path, seed: int, *, synthetic: int = 20, files: int = 220) -> RealCorpus:
    """Files of a Go source tree (`root`: go-1.19/src of Debian's golang-1.19-src, fetched by
    fetch_debian_code.sh): `synthetic` of them with a derived copy (vendored to
    third_party/example.com/vendored/... with import paths rewritten, also with 3-5 identifiers
    renamed, also a version apart; an excerpt; an extension by other files of its package, 0.6-1.5
    times its length), the rest
    siblings of the same packages (the hard negatives: licence lines, imports, idioms; many
    architecture variants copied and edited from one another, and generated tables). As in
    `code_tree_corpus`, a file sharing SIBLING_LINES of its line windows with a chosen one is not
    chosen, and pairs sharing a quarter of them are left out of scoring
    (`mark_shared_passages`)."""
    rng = random.Random(seed)
    pool = go_source_files(root)
    rng.shuffle(pool)
    corpus = RealCorpus()
    chosen = _Chosen(corpus)
    plan = _plan(rng, GO_TRANSFORMS, synthetic)
    packages = set()
    consumed: set[str] = set()
    for path, rel, package in pool:
        if not plan:
            break
        if rel in consumed:
            continue
        data = path.read_bytes()
        if len(re.findall(rb"^func ", data, re.M)) < 4 or chosen.overlaps(data, rel, SIBLING_LINES):
            continue
        how = plan.pop()
        original = chosen.add(rel, data, package, rel, "go")
        packages.add(package)
        if how.startswith("vendor"):
            copy = rewritten_go_imports(data)
            if how != "vendor":
                copy = renamed_identifiers(rng, copy, rng.randint(3, 5))
            if how == "vendor_version":
                copy = go_version_apart(rng, copy)
            derived = chosen.add(
                f"third_party/example.com/vendored/{rel}", copy, package, rel, "go"
            )
            corpus.derive(original, derived, Derivation(how, "near_copy"))
        elif how == "excerpt":
            derived = chosen.add(f"snippets/{rel}", excerpt(rng, data), package, rel, "go")
            corpus.derive(original, derived, Derivation(how, CONTAINMENT, original))
        else:
            # 0.6-1.5 times its length of other files of the package, as mixed_corpus extends
            want = round(len(data) * rng.uniform(0.6, 1.5))
            extra = b""
            for _, donor, _ in (t for t in pool if t[2] == package and t[1] != rel):
                if len(extra) >= want:
                    break
                if donor not in chosen.module and donor not in consumed:
                    consumed.add(donor)  # never chosen after: it is inside the extension
                    extra += (root / donor).read_bytes()
            grown = extended(rng, data, extra[:want].rsplit(b"\n", 1)[0] + b"\n")
            derived = chosen.add(f"extended/{rel}", grown, package, rel, "go")
            corpus.derive(original, derived, Derivation(how, CONTAINMENT, derived))
    if plan:
        corpus.notes.append(f"{len(plan)} derived copies not made (no file)")
    per_package: Counter[str] = Counter()
    for path, rel, package in sorted(pool, key=lambda t: t[2] not in packages):
        if len(corpus.items) >= files:
            break
        if rel in chosen.module or rel in consumed or per_package[package] >= 12:
            continue
        data = path.read_bytes()
        if not chosen.overlaps(data, rel, SIBLING_LINES):
            chosen.add(rel, data, package, rel, "go")
            per_package[package] += 1
    return corpus.mark_shared_passages().shuffled(seed + 1)


# --------------------------------------------------------------------------------------------
# (v) two releases of real projects, years apart: the later version of each module derived from
# the earlier by its authors' own edits

VERSIONS = (
    ("requests", "2.22.0", "2.31.0"), ("urllib3", "1.24.3", "1.26.16"),
    ("rich", "10.0.0", "13.4.2"), ("packaging", "20.0", "23.1"), ("click", "7.0", "8.1.3"),
    ("jinja2", "2.10", "3.1.2"),
    ("attrs", "19.3.0", "23.1.0"), ("idna", "2.8", "3.4"), ("chardet", "3.0.4", "5.1.0"),
    ("tomli", "1.0.0", "2.0.1"), ("markdown", "3.1", "3.4.1"), ("tenacity", "6.0.0", "8.2.2"),
)  # fmt: skip
"""Projects of PyPI with an earlier and a later release (2 to 4 years apart), which
fetch_pypi_versions.sh downloads as wheels."""


def _wheel_modules(wheel: Path) -> dict[str, bytes]:
    """The non-empty Python files of a wheel, by path inside it."""
    import zipfile

    with zipfile.ZipFile(wheel) as archive:
        return {
            name: data
            for name in archive.namelist()
            if name.endswith(".py") and ".dist-info/" not in name
            and (data := archive.read(name)).strip()
        }  # fmt: skip


def _wheel(folder: Path, project: str, version: str) -> Path:
    found = [
        p for p in folder.glob("*.whl")
        if p.name.lower().startswith(f"{project}-{version}-")
    ]  # fmt: skip
    if len(found) != 1:
        raise SystemExit(f"{folder}: no wheel of {project} {version}; run fetch_pypi_versions.sh")
    return found[0]


def versions_corpus(folder: Path, seed: int) -> RealCorpus:
    """Every Python file of two releases of each project of VERSIONS (wheels in `folder`, which
    fetch_pypi_versions.sh fills), named old/... and new/....

    A module path in both releases is a true pair when TRUE_LINES or more of the smaller file's
    own runs of three lines are in the other (the authors edited it, it was not rewritten); below
    that the pair is left out of scoring (a rewrite: neither true nor false). Own runs: not those
    in files of PROJECT_COMMON or more module paths of the project, its licence header and
    common imports (tenacity's after.py kept its 16 lines of licence and rewrote every line of
    code: 0.50 of its runs in the new release, 0.0 of its own). Other pairs sharing
    a quarter of their line windows (probers of one template, a module moved to another path)
    are left out too (`mark_shared_passages`); every other finding is false. Nothing is made:
    the edits are the authors' own, over 2 to 4 years (type hints, reformatting, renamed and
    moved functions, new features)."""
    corpus = RealCorpus()
    for project, before, after in VERSIONS:
        old = _wheel_modules(_wheel(folder, project, before))
        new = _wheel_modules(_wheel(folder, project, after))
        for path, data in old.items():
            corpus.add(f"old/{project}/{path}", data, f"py:{project}")
        for path, data in new.items():
            corpus.add(f"new/{project}/{path}", data, f"py:{project}")
        paths: dict[bytes, set[str]] = {}
        for modules in (old, new):
            for path, data in modules.items():
                for window in line_windows(data):
                    paths.setdefault(window, set()).add(path)
        common = {w for w, where in paths.items() if len(where) >= PROJECT_COMMON}
        for path in sorted(old.keys() & new.keys()):
            a, b = f"old/{project}/{path}", f"new/{project}/{path}"
            mine, theirs = line_windows(old[path]) - common, line_windows(new[path]) - common
            shared = len(mine & theirs) / max(1, min(len(mine), len(theirs)))
            if mine and theirs and shared >= TRUE_LINES:
                how = expected_relation(old[path], new[path], (a, b))
                corpus.derive(a, b, how._replace(transformation="version_apart"))
            else:
                corpus.ignore.add(frozenset((a, b)))
    return corpus.mark_shared_passages().shuffled(seed)


PROJECT_COMMON = 3
"""A run of three lines in files of this many module paths of one project is its boilerplate
for versions_corpus's labels."""

"""`find_derived` on real data with known truth: precision, recall, direction, false findings.

Corpora of benchmarks/derived_corpora.py, each run with default options, no cache: the
compressor `kinpress derived` would choose by default (`-c auto`, chosen per corpus and seed;
--compressor SPEC fixes one), then `find_derived(items, spec)`:

  (a) mixed_corpus, 5 seeds: log chunks, UDHR sections and Rosetta solutions with ~32 derived
      pairs among ~200 files; goals precision >= 0.95, recall >= 0.95, direction >= 0.9.
  (b) code_tree_corpus, 3 seeds: modules of installed Python projects, real vendored copies and
      synthetic vendorings among sibling modules; goals precision >= 0.9, recall >= 0.9.
  (c) same_source_corpus: no derived pair at all; goal findings <= max_fpr x pairs verified
      (plus sampling error: the printed bound is A V + 2 sqrt(A V) + 1).
  (r) rosetta_language_corpus, 2 seeds each of Python and Go: the 40 solutions of the language
      with 8 vendored-style copies (imports rewritten, identifiers renamed); goal: every copy
      found, no neighbour reported.
  (d) time_ordered_log_corpus, 1 seed (optional, with --corpora ...,d): originals from the
      first half of each log, negatives from the second half.
  (g) go_tree_corpus, 3 seeds (optional, with --corpora ...,g --go-tree DIR): files of Go 1.19's
      source tree (a code tree never used while developing; benchmarks/fetch_debian_code.sh
      fetches it), 20 derived copies (vendored with import paths rewritten, also renamed, also a
      version apart; excerpts; extensions) among siblings of the same packages.
  (v) versions_corpus (optional, with --corpora ...,v --versions DIR): every Python file of two
      releases, 2 to 4 years apart, of 12 projects of PyPI (fetch_pypi_versions.sh downloads the
      wheels): each module's later release is its earlier one edited by its authors (type hints,
      reformatting, moved and renamed code), true where most of its own lines (licence and
      common imports aside) carried over, among all the other modules of both releases.

Recall counts a true pair found in report.findings with any relation; precision is the share
of findings that are true pairs. Direction: excerpts and extensions found as a containment
pointing the right way, among those found. report.same_source is counted when the attribute
exists. False findings are listed with names, relation, scores and the independent 3-line
window containment (`line_containment`: share of the smaller file's runs of three lines found
in the other), so one can see what goes wrong.

    python benchmarks/bench_derived_real.py [--corpora a,b,c,r,d] [--seeds-a 11,12,13,14,15]
        [--seeds-b 21,22,23] [--json figures.json]

Baseline: main as of 6052ceb (derived.py before passage evidence), 2 shared cores, seeds pooled:

    corpus          files true find  prec  recall  dir   verif false bound  secs
    (a) mixed        1002  160  391  0.407  0.994  1.000  873  232  15.6  278
    (b) code_tree     660   90  255  0.353  1.000  n/a    857  165  15.4   72
    (c) same_source   210    0   65  -      -      -      120   65   4.4   39
    (r) python         96   16   16  1.000  1.000  -       16    0   2.0    1
    (r) go             96   16   19  0.842  1.000  -      175    3   5.4    1
    (d) time_logs     100   16   56  0.268  0.938  1.000  245   41   6.6   26

With stretches shared in order (evidence.py; main as of ecb966e, same seeds):

    corpus          files true find  prec  recall  dir   verif false bound  secs
    (a) mixed        1002  160  160  1.000  1.000  1.000  873    0  15.6  198
    (b) code_tree     660   90   93  0.968  1.000  n/a    857    3  15.4   52
    (c) same_source   210    0    0  -      -      -      120    0   4.4   26
    (r) python         96   16   16  1.000  1.000  -       16    0   2.0    1
    (r) go             96   16   16  1.000  1.000  -      175    0   5.4    1
    (d) time_logs     100   16   16  1.000  1.000  1.000  245    0   6.6   25

The 3 false findings of (b) are stdlib bz2_codec.py / zlib_codec.py (one template, near copies).

(v), two releases of 12 projects never used while developing (main as of the near-copy groups,
seed 71): 590 files, 133 true pairs, 137 findings, precision 0.971, recall 1.000, 800 pairs
verified, 15 s. The 4 "false" findings: tomli's 254-byte _types.py, half of it the 3-line licence
the project's 4 modules share (3 pairs; 8 files of 590 are under the boilerplate count), and
packaging's __init__.py of the later release, which took over what __about__.py of the earlier
one held (a move the labels' path rule does not follow). With labels counting the licence lines
too, 8 more pairs were "true" (tenacity's after.py kept its licence and rewrote all its code).

With the command line's default compressor (auto per corpus and seed; before, the library's
zstd level 3 for all): auto chose lzma level 9, brotli level 11 or zstd level 19 on all but one
code-tree seed, and every figure above is unchanged (mixed 1.000 / 1.000 / 1.000, 243 verified;
code tree 0.968 / 1.000; derivation-free 0 findings; Rosetta 16 / 16 twice, no neighbour):
the stretches shared in order, not the compressor, decide the findings.

(g), Go 1.19's source tree, never seen while developing (main as of the prefilter's boilerplate,
seeds 61-63 pooled): 660 files, 60 true, 65 findings, precision 0.923, recall 1.000, direction
0.917, 144 pairs verified, 15 s. The 5 "false" findings by the corpus's labels are architecture
variants of one file (runtime/signal_mipsx.go and signal_riscv64.go: the same code with the
registers renamed; zerrors_linux_mips.go and _amd64.go; syscall_linux_*.go of two trees), which
history made by copying and editing, but which share too few 3-line runs verbatim for the line
measure to label them. Before the prefilter left boilerplate out and names aside needed a
recurring name, an earlier build of this corpus also gave two generated system-call tables as
derived, and about 1,600 pairs were verified per seed instead of 50.
Before (the baseline), recall was not the problem; precision was: in (a) 223 of 232 false
findings were two disjoint chunks of one log sharing no run of three lines; in (b) 117 of 165
were encodings/*_codec.py written from one template; (c) reported 65 of 120 verified
same-source pairs where max_fpr = 0.01 allows ~1.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from derived_corpora import (
    RealCorpus,
    code_tree_corpus,
    go_tree_corpus,
    line_containment,
    mixed_corpus,
    rosetta_language_corpus,
    same_source_corpus,
    time_ordered_log_corpus,
    versions_corpus,
)

from kinpress import Item, LocalEngine
from kinpress.calibration import ProposedPairs, auto_choice
from kinpress.derived import (
    DerivedFinding,
    DerivedReport,
    Proposals,
    default_null_pairs,
    find_derived,
    propose,
)

DIRECTED = ("excerpt", "extension")
"""Transformations whose direction is scored (real vendored pairs a version apart are not)."""

SEEDS_A = (11, 12, 13, 14, 15)
SEEDS_B = (21, 22, 23)
SEED_C = 31
SEED_D = 41
SEEDS_R = (51, 52)
SEEDS_G = (61, 62, 63)
SEED_V = 71


@dataclass
class Score:
    """Figures of one run, or of several runs summed."""

    name: str
    files: int = 0
    truth: int = 0
    findings: int = 0
    true_found: int = 0
    verified: int = 0
    ignored: int = 0
    same_source: int = 0
    same_source_true: int = 0
    directions: int = 0
    directions_right: int = 0
    seconds: float = 0.0
    max_fpr: float = 0.01
    per_transformation: Counter[str] = field(default_factory=Counter)
    per_transformation_found: Counter[str] = field(default_factory=Counter)
    false: list[str] = field(default_factory=list)
    false_kinds: Counter[str] = field(default_factory=Counter)
    missed: list[str] = field(default_factory=list)
    specs: Counter[str] = field(default_factory=Counter)

    @property
    def spec(self) -> str:
        return ", ".join(f"{k} x{n}" if n > 1 else k for k, n in self.specs.items())

    @spec.setter
    def spec(self, value: str) -> None:
        self.specs[value] += 1

    def add(self, other: Score) -> None:
        self.specs.update(other.specs)
        for key in (
            "files",
            "truth",
            "findings",
            "true_found",
            "verified",
            "same_source",
            "ignored",
        ):
            setattr(self, key, getattr(self, key) + getattr(other, key))
        self.same_source_true += other.same_source_true
        self.directions += other.directions
        self.directions_right += other.directions_right
        self.seconds += other.seconds
        self.per_transformation += other.per_transformation
        self.per_transformation_found += other.per_transformation_found
        self.false += other.false
        self.false_kinds += other.false_kinds
        self.missed += other.missed

    @property
    def precision(self) -> float:
        return self.true_found / self.findings if self.findings else 1.0

    @property
    def recall(self) -> float:
        return self.true_found / self.truth if self.truth else 1.0

    @property
    def direction(self) -> float:
        return self.directions_right / self.directions if self.directions else math.nan

    @property
    def fpr_bound(self) -> float:
        expected = self.max_fpr * self.verified
        return expected + 2 * math.sqrt(expected) + 1


def container(finding: DerivedFinding) -> str | None:
    return {"a_contains_b": finding.a, "b_contains_a": finding.b}.get(finding.relation)


def describe(f: DerivedFinding, corpus: RealCorpus, data: dict[str, bytes]) -> str:
    lc = line_containment(data[f.a], data[f.b])
    src = "same source" if corpus.source[f.a] == corpus.source[f.b] else "other sources"
    return (
        f"    {f.a}  {f.b}  {f.relation}  e(a|b)={f.a_explained_by_b:.3f} "
        f"e(b|a)={f.b_explained_by_a:.3f} score={f.score:.3f} fpr={f.fpr:.4f} "
        f"sizes={len(data[f.a])}/{len(data[f.b])} lines3={lc:.2f} ({src})"
    )


COMPRESSOR = "auto"
"""The compressor of every run (--compressor): auto chooses one per corpus as `kinpress derived`
does by default (auto_choice for the derived job, with its null's pairs); a spec fixes it."""


def chosen_spec(items: list[Item], proposals: Proposals) -> str:
    """COMPRESSOR, or with auto the spec the command line's default would choose for derived
    (its job's time counting the pairs the prefilter proposes, as the command line does)."""
    if COMPRESSOR != "auto":
        return COMPRESSOR
    null = default_null_pairs(0.01)
    proposed = ProposedPairs.of(proposals.pairs, [len(item.data) for item in items])
    spec, _ = auto_choice(
        items, "derived", engine=LocalEngine(), null_pairs=null, proposed=proposed
    )
    return spec


def evaluate(name: str, corpus: RealCorpus) -> Score:
    """Run find_derived with default options on the corpus and score it against the truth."""
    started = time.perf_counter()
    proposals = propose(corpus.items)
    spec = chosen_spec(list(corpus.items), proposals)
    report: DerivedReport = find_derived(corpus.items, spec, proposals=proposals)
    score = Score(name, files=len(corpus.items), truth=len(corpus.truth))
    score.spec = spec
    score.seconds = time.perf_counter() - started
    score.max_fpr = report.max_fpr
    score.verified = report.counts.verified
    data = {item.name: item.data for item in corpus.items}
    found = {frozenset((f.a, f.b)): f for f in report.findings}
    score.ignored = sum(1 for p in found if p in corpus.ignore)
    score.findings = len(found) - score.ignored
    same = getattr(report, "same_source", None)
    if same is not None:
        score.same_source = len(same)
        score.same_source_true = sum(1 for f in same if frozenset((f.a, f.b)) in corpus.truth)
    for pair, how in corpus.truth.items():
        kind = corpus.source[next(iter(pair))].split(":")[0]
        key = f"{kind}:{how.transformation}"
        score.per_transformation[key] += 1
        finding = found.get(pair)
        if finding is None:
            a, b = sorted(pair)
            score.missed.append(f"    {how.transformation}: {a}  {b}")
            continue
        score.true_found += 1
        score.per_transformation_found[key] += 1
        if how.transformation in DIRECTED:
            score.directions += 1
            right = container(finding) == how.container
            score.directions_right += right
            if not right:
                score.missed.append(f"    WRONG DIRECTION {how.transformation}: {finding.a}  "
                                    f"{finding.b}  {finding.relation}")  # fmt: skip
    false = [f for p, f in found.items() if p not in corpus.truth and p not in corpus.ignore]
    score.false = [describe(f, corpus, data) for f in false]
    for f in false:
        kinds = sorted(corpus.source[n] if corpus.source[f.a] == corpus.source[f.b] else
                       corpus.source[n].split(":")[0] for n in (f.a, f.b))  # fmt: skip
        score.false_kinds[" ~ ".join(dict.fromkeys(kinds))] += 1
    return score


def show(score: Score, goals: tuple[float, float] | None, fpr: bool) -> None:
    print(f"  {score.name}: {score.files} files, {score.truth} true pairs, {score.verified} "
          f"verified, {score.findings} findings ({score.ignored} more on unlabeled "
          f"pairs), {score.seconds:.1f} s, {score.spec}")  # fmt: skip
    if goals:
        print(f"    precision {score.precision:.3f} (goal >= {goals[0]})  recall "
              f"{score.recall:.3f} (goal >= {goals[1]})  direction {score.direction:.3f} "
              f"(goal >= 0.9, {score.directions} containments found)")  # fmt: skip
    if fpr:
        print(f"    false findings {score.findings - score.true_found} vs bound "
              f"{score.fpr_bound:.1f} = A V + 2 sqrt(A V) + 1 at A = {score.max_fpr}")  # fmt: skip
    print(f"    same_source: {score.same_source} (true derived pairs among them: "
          f"{score.same_source_true})")  # fmt: skip
    if score.truth:
        rows = ", ".join(
            f"{t} {score.per_transformation_found[t]}/{n}"
            for t, n in sorted(score.per_transformation.items())
        )
        print(f"    per transformation: {rows}")
    for line in score.false:
        print(line.replace("    ", "    FALSE ", 1))
    for line in score.missed:
        print(line if "WRONG" in line else line.replace("    ", "    MISSED ", 1))


def run(
    label: str, builder: Callable[[int], RealCorpus], seeds: tuple[int, ...],
    goals: tuple[float, float] | None, fpr: bool,
) -> Score:  # fmt: skip
    total = Score(label)
    print(f"== {label}")
    for seed in seeds:
        corpus = builder(seed)
        for note in corpus.notes:
            print(f"  note (seed {seed}): {note}")
        score = evaluate(f"{label} seed {seed}", corpus)
        show(score, goals, fpr)
        total.add(score)
        sys.stdout.flush()
    return total


def summary(totals: list[tuple[Score, str]]) -> None:
    print("\n== summary (all seeds of each corpus pooled)")
    head = (f"{'corpus':<12}{'files':>7}{'true':>6}{'find':>6}{'prec':>7}{'recall':>8}{'dir':>7}"
            f"{'verif':>8}{'false':>7}{'bound':>7}{'same_src':>9}{'secs':>7}  goal")  # fmt: skip
    print(head)
    for s, goal in totals:
        print(
            f"{s.name:<12}{s.files:>7}{s.truth:>6}{s.findings:>6}{s.precision:>7.3f}"
            f"{s.recall:>8.3f}{s.direction:>7.3f}{s.verified:>8}{s.findings - s.true_found:>7}"
            f"{s.fpr_bound:>7.1f}{s.same_source:>9}{s.seconds:>7.1f}  {goal}"
        )
    print("\ncompressors (auto: chosen per corpus and seed, as the command line's default)")
    for s, _ in totals:
        print(f"  {s.name}: {s.spec}")
    print("\nrecall per kind of file and transformation (all seeds pooled)")
    for s, _ in totals:
        rows = ", ".join(
            f"{t} {s.per_transformation_found[t]}/{n}"
            for t, n in sorted(s.per_transformation.items())
        )
        print(f"  {s.name}: {rows}")
    print("\nfalse findings by source (one source, or the kinds of two sources; seeds pooled)")
    for s, _ in totals:
        rows = ", ".join(f"{k} {n}" for k, n in s.false_kinds.most_common())
        print(f"  {s.name}: {rows or 'none'}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--corpora", default="a,b,c,r", help="which of a,b,c,r,d,g,v to run")
    parser.add_argument("--go-tree", type=Path, help="g: a Go source tree (go-1.19/src)")
    parser.add_argument(
        "--versions", type=Path, help="v: the wheels fetch_pypi_versions.sh downloaded"
    )
    parser.add_argument("--seeds-a", default=",".join(map(str, SEEDS_A)))
    parser.add_argument("--seeds-b", default=",".join(map(str, SEEDS_B)))
    parser.add_argument("--json", type=Path, help="also write the pooled figures to this new file")
    parser.add_argument(
        "--compressor", default="auto", help="auto (the default's choice per corpus) or a spec"
    )
    args = parser.parse_args()
    global COMPRESSOR
    COMPRESSOR = args.compressor
    if args.json is not None and args.json.exists():
        parser.error(f"{args.json} exists: not overwritten")
    wanted = set(args.corpora.split(","))
    seeds_a = tuple(int(s) for s in args.seeds_a.split(","))
    seeds_b = tuple(int(s) for s in args.seeds_b.split(","))
    totals: list[tuple[Score, str]] = []
    if "a" in wanted:
        totals.append((run("mixed", mixed_corpus, seeds_a, (0.95, 0.95), False),
                       "prec >= 0.95, recall >= 0.95, dir >= 0.9"))  # fmt: skip
    if "b" in wanted:
        totals.append((run("code_tree", code_tree_corpus, seeds_b, (0.9, 0.9), False),
                       "prec >= 0.9, recall >= 0.9, dir >= 0.9"))  # fmt: skip
    if "c" in wanted:
        totals.append((run("same_source", same_source_corpus, (SEED_C,), None, True),
                       "false <= bound"))  # fmt: skip
    if "r" in wanted:
        for language in ("python", "go"):
            builder = partial(rosetta_language_corpus, language=language)
            totals.append((run(f"rosetta_{language}", builder, SEEDS_R, (0.9, 0.9), False),
                           "copies found, no neighbour (false = 0)"))  # fmt: skip
    if "d" in wanted:
        totals.append((run("time_logs", time_ordered_log_corpus, (SEED_D,), (0.95, 0.95), True),
                       "prec >= 0.95, recall >= 0.95 (optional)"))  # fmt: skip
    if "g" in wanted:
        if args.go_tree is None or not args.go_tree.is_dir():
            parser.error("g needs --go-tree DIR: a Go source tree's src/ folder")
        builder = partial(go_tree_corpus, args.go_tree)
        totals.append((run("go_tree", builder, SEEDS_G, (0.9, 0.9), False),
                       "prec >= 0.9, recall >= 0.9, dir >= 0.9 (never seen)"))  # fmt: skip
    if "v" in wanted:
        if args.versions is None or not args.versions.is_dir():
            parser.error("v needs --versions DIR: the wheels fetch_pypi_versions.sh downloaded")
        builder = partial(versions_corpus, args.versions)
        totals.append((run("versions", builder, (SEED_V,), (0.9, 0.9), False),
                       "prec >= 0.9, recall >= 0.9 (never seen; real edits)"))  # fmt: skip
    summary(totals)
    if args.json is not None:
        args.json.write_text(json.dumps([figures(s) for s, _ in totals], indent=1) + "\n")


def figures(s: Score) -> dict[str, object]:
    """Pooled figures of one corpus, for comparing runs."""
    return {
        "corpus": s.name,
        "compressors": dict(s.specs),
        "files": s.files,
        "true_pairs": s.truth,
        "findings": s.findings,
        "precision": s.precision,
        "recall": s.recall,
        "direction": None if math.isnan(s.direction) else s.direction,
        "verified": s.verified,
        "false": s.findings - s.true_found,
        "fpr_bound": s.fpr_bound,
        "same_source": s.same_source,
        "seconds": s.seconds,
        "recall_per_transformation": {
            t: s.per_transformation_found[t] / n for t, n in sorted(s.per_transformation.items())
        },
    }


if __name__ == "__main__":
    main()

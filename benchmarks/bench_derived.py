"""Prefilter against exhaustive checking for `find_derived` on a generated corpus.

The corpus is tests/test_derived.py's generator: prose-like and log-like files of 2-4 KB sharing
one vocabulary, with a few hundred derived pairs (copies, edits, excerpts, extensions, reordered
blocks, re-wrapped lines, shared halves). Goal (issue: derived files): the prefilter misses under
2 % of the true derived pairs that exhaustive checking finds.

  1. All files, default (prefiltered) run: candidates, pruned pairs, the prefilter's own time,
     recall of the true pairs among candidates and among findings, and precision.
  2. Exhaustive time on all files, estimated from a measured random sample of pairs (both
     directions, no cache) times the number of pairs, and the speed-up of the prefilter.
  3. A subset small enough to check exhaustively: true pairs found exhaustively that the
     prefiltered run misses.

    python benchmarks/bench_derived.py [--files 5000] [--subset 300] [--sample 3000]
"""

from __future__ import annotations

import argparse
import random
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from kinpress import SizeCache, conditional_sizes
from kinpress.derived import (
    DerivedReport,
    Prefilter,
    candidate_pairs,
    find_derived,
    sketches,
)
from kinpress.measure import content_digest
from test_derived import TRANSFORMS, Corpus, make_corpus

SIZE = (2000, 4000)


def build(files: int, seed: int) -> Corpus:
    """`files` files of which about 11 % form derived pairs, every transformation in proportion."""
    scale = max(1, round(files * 0.055 / sum(TRANSFORMS.values())))
    per = {name: count * scale for name, count in TRANSFORMS.items()}
    return make_corpus(seed, files - 2 * sum(per.values()), per, SIZE)


def true_found(report: DerivedReport, corpus: Corpus) -> set[frozenset[str]]:
    return {frozenset((f.a, f.b)) for f in report.findings} & corpus.truth.keys()


def full_run(corpus: Corpus, cache: SizeCache) -> float:
    items = corpus.items
    names = [item.name for item in items]
    started = time.perf_counter()
    prefilter = Prefilter()
    proposed = candidate_pairs(
        sketches(items, prefilter, 0), [content_digest(i.data) for i in items], prefilter
    )
    prefilter_seconds = time.perf_counter() - started
    proposed_names = {frozenset((names[i], names[j])) for i, j in proposed}
    started = time.perf_counter()
    report = find_derived(items, cache=cache)
    seconds = time.perf_counter() - started
    found = true_found(report, corpus)
    print(f"files {len(items)}, true derived pairs {len(corpus.truth)}")
    print(
        f"prefilter: {report.counts.candidates} candidates of {report.counts.possible} pairs"
        f" ({report.counts.pruned} pruned) in {prefilter_seconds:.1f} s;"
        f" true pairs among candidates {len(proposed_names & corpus.truth.keys())}"
    )
    print(
        f"default run: {seconds:.1f} s, {len(report.findings)} findings, true pairs found"
        f" {len(found)} (recall {len(found) / len(corpus.truth):.3f},"
        f" precision {len(found) / max(len(report.findings), 1):.3f}),"
        f" null cut {report.null.cut:.3f}"
    )
    return seconds


def exhaustive_estimate(corpus: Corpus, sample: int, seconds: float) -> None:
    n = len(corpus.items)
    rng = random.Random(1)
    pairs = [tuple(rng.sample(range(n), 2)) for _ in range(sample)]
    requested = [(j, i) for i, j in pairs] + [(i, j) for i, j in pairs]
    started = time.perf_counter()
    conditional_sizes(corpus.items, requested)
    per_pair = (time.perf_counter() - started) / sample
    total = per_pair * n * (n - 1) // 2
    print(
        f"exhaustive (estimated from {sample} measured pairs, both directions):"
        f" {per_pair * 1e3:.2f} ms a pair, {total / 3600:.1f} h for all pairs;"
        f" speed-up of the default run about {total / seconds:,.0f}x"
    )


def subset_check(corpus: Corpus, size: int, cache: SizeCache) -> None:
    rng = random.Random(2)
    pairs = sorted(corpus.truth, key=sorted)
    chosen = {name for p in rng.sample(pairs, min(len(pairs), size // 10)) for name in p}
    derived = {name for p in corpus.truth for name in p}
    others = [item.name for item in corpus.items if item.name not in derived]
    chosen.update(rng.sample(others, size - len(chosen)))
    items = [item for item in corpus.items if item.name in chosen]
    sub = Corpus(items, {p: t for p, t in corpus.truth.items() if p <= chosen}, {})
    started = time.perf_counter()
    everything = find_derived(items, exhaustive=True, cache=cache)
    all_seconds = time.perf_counter() - started
    started = time.perf_counter()
    filtered = find_derived(items, cache=cache)
    by_all, by_filter = true_found(everything, sub), true_found(filtered, sub)
    missed = by_all - by_filter
    print(
        f"subset of {len(items)} files ({len(sub.truth)} true pairs): exhaustive found"
        f" {len(by_all)} in {all_seconds:.1f} s; the prefilter missed {len(missed)}"
        f" ({len(missed) / max(len(by_all), 1):.1%}; goal < 2 %)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--files", type=int, default=5000)
    parser.add_argument("--subset", type=int, default=300)
    parser.add_argument("--sample", type=int, default=3000)
    parser.add_argument("--seed", type=int, default=11)
    args = parser.parse_args()
    corpus = build(args.files, args.seed)
    with tempfile.TemporaryDirectory() as folder:
        cache = SizeCache(Path(folder) / "sizes.sqlite")
        seconds = full_run(corpus, cache)
        exhaustive_estimate(corpus, args.sample, seconds)
        subset_check(corpus, args.subset, cache)
        cache.close()


if __name__ == "__main__":
    main()

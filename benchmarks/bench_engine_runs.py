"""Runs of one local engine after another, as a classification's phases come (held-out
reference, items, nearest search, each in content and shape): the worker processes kept from
run to run (`LocalEngine`'s default) against a new engine, so new workers, for every run. For
compressors that do not release the GIL (PPMd), whose tiles run in worker processes. Both ways
measured in the same run, with the same sizes (checked); the ratio is the speed-up.

Each run is a phase's worth of small work: RUN_ITEMS items of 3 kB from this Python's standard
library sources, every one against one corpus of 40 kB (a prefix kept, as an origin's corpus
is). A run on new workers pays for starting Python and kinpress in each and the compressor's
helper processes, about a third of a second on the development machine; a small PPMd
classification (6 origins, 280 items) took 6.4 s before the workers were kept and 4.0 s after.

Then the speed-up of `--jobs` workers over one on a run of items against several corpora, for
the compressors that keep their state after a corpus (lzma on threads, PPMd in processes): near
the number of workers is the goal. Each thread borrows a helper process of its own (see
compressors.kept); with one helper a process, lzma's threads took turns at it (a small lzma 9
classification took 10.1 s, then 5.9 s, as estimated). Measured 2026-12-05, 2 workers: lzma 9
0.88 before, 1.68-1.75 after, 2.21 once runs were cut only where their items pass a tile
(engine.tiles._run_cuts); PPMd order 32 1.2-1.6; kept workers 3.1-3.75 times quicker a run.

    python benchmarks/bench_engine_runs.py [--runs N] [--jobs J]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from bench_passages import sources  # the standard library's sources, as text

from kinpress import LocalEngine
from kinpress.engine import SizeJob, plan_tiles

SPEC = "ppmd:order=32,memory=256"
RUN_ITEMS = 40
CORPUS = 40_000
ITEM = 3_000


def one_run(engine: LocalEngine, items: list[bytes], job: SizeJob) -> dict[object, np.ndarray]:
    first = [0] * (len(items) - 1)
    second = list(range(1, len(items)))
    tiles = plan_tiles(items, first, second, engine.jobs, prefix_once=True)
    return {tile: sizes for tile, sizes in engine.run(items, job, tiles)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=10, help="runs each way (default 10)")
    parser.add_argument("--jobs", type=int, default=2, help="worker processes (default 2)")
    args = parser.parse_args()
    text = sources(max(CORPUS + ITEM * RUN_ITEMS * args.runs, 4 * 60_000 + ITEM * 60))
    runs = []
    for r in range(args.runs):  # each run its own items, as each phase has
        start = CORPUS + ITEM * RUN_ITEMS * r
        items = [text[start + ITEM * k : start + ITEM * (k + 1)] for k in range(RUN_ITEMS)]
        runs.append([text[:CORPUS], *items])
    job = SizeJob(SPEC, method="concat")
    started = time.perf_counter()
    fresh = []
    for items in runs:
        with LocalEngine(args.jobs) as engine:
            fresh.append(one_run(engine, items, job))
    fresh_seconds = time.perf_counter() - started
    started = time.perf_counter()
    with LocalEngine(args.jobs) as engine:
        kept = [one_run(engine, items, job) for items in runs]
    kept_seconds = time.perf_counter() - started
    for a, b in zip(fresh, kept, strict=True):
        if a.keys() != b.keys() or any(not np.array_equal(a[t], b[t]) for t in a):
            raise SystemExit("sizes on kept workers differ from those on new ones")
    per = 1000 / args.runs
    print(f"{SPEC}, {args.runs} runs of {RUN_ITEMS} items against a {CORPUS // 1000} kB corpus,"
          f" {args.jobs} workers")  # fmt: skip
    print(f"  new workers every run  {fresh_seconds * per:8.0f} ms/run")
    print(f"  workers kept           {kept_seconds * per:8.0f} ms/run")
    print(f"  ratio                  {fresh_seconds / kept_seconds:8.2f}")
    spread(text, args.jobs)


def spread(text: bytes, jobs: int) -> None:
    """One run of 4 corpora of 60 kB, each against 60 items of 3 kB, on one worker and on
    `jobs`: the sizes must agree; the ratio is the speed-up."""
    corpora = [text[k * 60_000 : (k + 1) * 60_000] for k in range(4)]
    base = len(corpora) * 60_000
    items = [*corpora, *(text[base + ITEM * k : base + ITEM * (k + 1)] for k in range(60))]
    first = [c for c in range(len(corpora)) for _ in range(60)]
    second = [len(corpora) + k for _ in corpora for k in range(60)]
    print(f"\none run, 4 corpora of 60 kB x 60 items of {ITEM // 1000} kB: 1 worker against {jobs}")
    for spec in ("lzma:level=9", SPEC):
        job = SizeJob(spec, method="concat")
        seconds, got = [], []
        for workers in (1, jobs):
            with LocalEngine(workers) as engine:
                one_run(engine, items[:2] + items[-2:], job)  # workers and helpers started
                started = time.perf_counter()
                tiles = plan_tiles(items, first, second, engine.jobs, prefix_once=True)
                got.append(dict(engine.run(items, job, tiles)))
                seconds.append(time.perf_counter() - started)
        by_pair = [
            {
                (f, p): int(n)
                for t, sizes in run.items()
                for f, p, n in zip(t.first, t.second, sizes, strict=True)
            }
            for run in got
        ]
        if by_pair[0] != by_pair[1]:
            raise SystemExit(f"{spec}: sizes on {jobs} workers differ from those on one")
        ratio = seconds[0] / seconds[1]
        print(f"  {spec:28s} {seconds[0]:6.2f} s  {seconds[1]:6.2f} s  ratio {ratio:5.2f}")


if __name__ == "__main__":
    main()

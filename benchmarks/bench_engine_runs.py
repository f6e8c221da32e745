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
    text = sources(CORPUS + ITEM * RUN_ITEMS * args.runs)
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


if __name__ == "__main__":
    main()

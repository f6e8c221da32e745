"""Time kinpress's neighbour joining against Biopython's, measured in the same run.

Run with ``python benchmarks/bench_nj.py``. Biopython's pure-Python NJ is the baseline at a
size where it finishes in seconds; at larger sizes its time is extrapolated by the n³ scaling
both implementations share, and printed as an estimate.
"""

from __future__ import annotations

import os
import platform
import time
from collections.abc import Callable

import numpy as np
import numpy.typing as npt
from Bio.Phylo.TreeConstruction import DistanceMatrix, DistanceTreeConstructor

from kinpress.trees import neighbour_joining

BASELINE_SIZE = 200
OUR_SIZES = (BASELINE_SIZE, 500, 2000)


def random_distances(n: int, seed: int) -> npt.NDArray[np.float64]:
    rng = np.random.default_rng(seed)
    d = rng.uniform(0.2, 1.0, (n, n))
    d = (d + d.T) / 2
    np.fill_diagonal(d, 0.0)
    return d


def seconds(run: Callable[[], object], repeats: int) -> float:
    """Best wall time of ``repeats`` runs; the minimum is the least disturbed by other load."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return best


def ours(n: int) -> float:
    labels = [f"item{i}" for i in range(n)]
    d = random_distances(n, seed=n)
    return seconds(lambda: neighbour_joining(labels, d), repeats=3 if n <= 500 else 1)


def biopython(n: int) -> float:
    labels = [f"item{i}" for i in range(n)]
    d = random_distances(n, seed=n)
    matrix = DistanceMatrix(labels, [[float(v) for v in d[i, : i + 1]] for i in range(n)])
    return seconds(lambda: DistanceTreeConstructor().nj(matrix), repeats=1)


def main() -> None:
    print(
        f"python {platform.python_version()}, numpy {np.__version__}, "
        f"{os.cpu_count()} CPUs, {platform.machine()}"
    )
    baseline = biopython(BASELINE_SIZE)
    print(f"biopython nj  n={BASELINE_SIZE:5d}  {baseline:9.3f} s")
    timings = {n: ours(n) for n in OUR_SIZES}
    for n, t in timings.items():
        estimate = baseline * (n / BASELINE_SIZE) ** 3
        kind = "measured" if n == BASELINE_SIZE else "n³ estimate"
        print(
            f"kinpress nj   n={n:5d}  {t:9.3f} s   biopython/kinpress {estimate / t:8.1f}× "
            f"({kind} biopython {estimate:,.0f} s)"
        )
    small, large = OUR_SIZES[1], OUR_SIZES[2]
    print(
        f"kinpress scaling n={small}→{large}: {timings[large] / timings[small]:.1f}× "
        f"(n³ predicts {(large / small) ** 3:.0f}×)"
    )


if __name__ == "__main__":
    main()

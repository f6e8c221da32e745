"""Past the full matrix: nearest neighbours and groups of 10^3 to 10^5 generated log chunks.

Items are invented log chunks of 1-4 KB from a few hundred invented sources (tests/
scale_corpus.py, fixed seed). For each n, a child process (so that its peak memory is its own)
finds every item's 10 nearest neighbours and the groups from them (`neighbours.sparse_groups`,
what `kinpress groups` does when the full matrix would not fit), and reports:

- seconds, pairs measured (and their fraction of all pairs), peak resident memory;
- recall of the true 10 nearest on a sample of queries, each query measured against every item
  (exhaustive for that query only);
- adjusted Rand index of the groups against the sources, and against the groups of the full
  matrix where n allows (10^3 here).

Goals (issue: past the full matrix), printed beside the figures:
  100,000 items in under 30 min and 4 GB, under 1 % of pairs, recall >= 0.9, ARI >= 0.9;
  20,000 items in under 5 min.

`--matrix-memory` measures instead the full matrix's peak memory per cell at n = 1,600 and
5,000 small items (goal: at most 12 bytes a cell), as the growth of the child's peak resident
memory over its state just before the matrix, divided by n^2.

    python benchmarks/bench_scale.py --sizes 1000 10000 [--queries 2000] [--spec zstd:level=3]
    python benchmarks/bench_scale.py --matrix-memory
"""

from __future__ import annotations

import argparse
import json
import random
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from kinpress.compressors import compressor
from kinpress.distance import distance_matrix
from kinpress.items import Item
from kinpress.measure import conditional_sizes
from kinpress.neighbours import recall, sparse_groups
from scale_corpus import log_chunks

K = 10


def sources_for(n: int) -> int:
    """A few hundred sources; fewer for small n, so that a source has some 30 chunks."""
    return max(10, min(300, n // 30))


def peak_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def exhaustive_rows(items: list[Item], queries: list[int], spec: str) -> np.ndarray:
    """Each query's NCD to every item, measured as the matrix measures it (smaller C(x) first)."""
    comp = compressor(spec)
    single = np.array(comp.sizes([item.data for item in items]), dtype=np.int64)
    rows = np.empty((len(queries), len(items)))
    others = np.arange(len(items))
    batch = max(1, 2_000_000 // len(items))  # a few calls: each measures every C(x) again
    for start in range(0, len(queries), batch):
        chunk = queries[start : start + batch]
        pairs = []
        for q in chunk:
            q_first = (single[q] < single) | ((single[q] == single) & (q < others))
            small = np.where(q_first, q, others)
            large = np.where(q_first, others, q)
            pairs.append(np.stack([small, large], axis=1))
        measured = conditional_sizes(items, np.concatenate(pairs), spec)
        ncd = measured.conditional / np.maximum(single[measured.target], 1)
        rows[start : start + len(chunk)] = np.clip(ncd, 0, None).reshape(len(chunk), -1)
    return rows


def child(n: int, queries: int, spec: str, dense: bool) -> dict[str, object]:
    from sklearn.metrics import adjusted_rand_score

    chunks, owner = log_chunks(n, sources_for(n))
    items = [Item(name=f"chunk{k:06d}", data=d, source="generated") for k, d in enumerate(chunks)]
    del chunks
    started = time.perf_counter()
    found = sparse_groups(items, spec)
    seconds = time.perf_counter() - started
    peak = peak_bytes()
    nb = found.neighbours
    out: dict[str, object] = {
        "n": n,
        "sources": sources_for(n),
        "seconds": seconds,
        "search_seconds": nb.stats.seconds,
        "pairs": nb.pairs,
        "fraction": nb.fraction,
        "sample_pairs": found.sample_pairs_computed,
        "rounds": nb.rounds,
        "peak_mb": peak / 2**20,
        "groups": found.grouping.k,
        "ari_sources": adjusted_rand_score(owner, found.grouping.assignment),
    }
    rng = random.Random(1)
    asked = sorted(rng.sample(range(n), min(queries, n)))
    started = time.perf_counter()
    rows = exhaustive_rows(items, asked, spec)
    out["recall"] = recall(nb.index, rows, asked, K)
    out["queries"] = len(asked)
    out["exhaustive_seconds"] = time.perf_counter() - started
    if dense:
        from kinpress.groups import find_groups

        full = find_groups(distance_matrix(items, spec).distances)
        out["ari_dense"] = adjusted_rand_score(full.assignment, found.grouping.assignment)
        out["dense_groups_ari_sources"] = adjusted_rand_score(owner, full.assignment)
    return out


def memory_child(n: int) -> dict[str, float]:
    """Peak bytes per cell of a full matrix of n small items (zlib level 1, no cache)."""
    rng = random.Random(1)
    words = [bytes(rng.choice(b"abcdefghij") for _ in range(5)) for _ in range(300)]
    items = [
        Item(name=f"i{k}", data=b" ".join(rng.choice(words) for _ in range(12)), source="t")
        for k in range(n)
    ]
    distance_matrix(items[:50], "zlib:level=1")  # imports, thread pool, compressor contexts
    before = peak_bytes()
    started = time.perf_counter()
    dm = distance_matrix(items, "zlib:level=1")
    after = peak_bytes()
    from kinpress.formats import write_matrix

    write_matrix(dm, "/dev/null", "tsv")
    written = peak_bytes()
    return {
        "n": n,
        "seconds": time.perf_counter() - started,
        "per_cell": (after - before) / n / n,
        "per_cell_with_writing": (written - before) / n / n,
    }


def run_child(argv: list[str]) -> dict[str, object]:
    done = subprocess.run(
        [sys.executable, __file__, "--child", *argv], check=True, capture_output=True, text=True
    )
    result: dict[str, object] = json.loads(done.stdout.strip().splitlines()[-1])
    return result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000])
    parser.add_argument("--queries", type=int, default=2000, help="recall queries per n")
    parser.add_argument("--spec", default="zstd:level=3")
    parser.add_argument("--matrix-memory", action="store_true")
    parser.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        if args.child[0] == "memory":
            print(json.dumps(memory_child(int(args.child[1]))))
        else:
            n, queries, spec, dense = args.child
            print(json.dumps(child(int(n), int(queries), spec, dense == "1")))
        return
    if args.matrix_memory:
        for n in (1600, 5000):
            r = run_child(["memory", str(n)])
            print(
                f"full matrix, n = {n}: {r['per_cell']:.1f} bytes a cell at its peak"
                f" ({r['per_cell_with_writing']:.1f} once written as TSV) in {r['seconds']:.0f} s"
                "; goal <= 12"
            )
        return
    print(f"{args.spec}, k = {K}; goals: 10^5 in < 30 min and < 4 GB, < 1 % of pairs,")
    print("recall >= 0.9, ARI >= 0.9 against the sources; 2 x 10^4 in < 5 min")
    for n in args.sizes:
        r = run_child([str(n), str(args.queries), args.spec, "1" if n <= 2000 else "0"])
        dense = (
            f"; ARI vs full-matrix groups {r['ari_dense']:.3f} (those vs sources"
            f" {r['dense_groups_ari_sources']:.3f})"
            if "ari_dense" in r
            else "; full matrix not computed at this n"
        )
        print(
            f"n = {n:,} ({r['sources']} sources): {r['seconds']:.0f} s (search"
            f" {r['search_seconds']:.0f} s, {r['rounds']} rounds), {r['pairs']:,} pairs"
            f" = {100 * float(r['fraction']):.3f} % of all (+{r['sample_pairs']:,} for the"
            f" silhouette sample), peak {r['peak_mb']:.0f} MB; recall@10 {r['recall']:.3f} on"
            f" {r['queries']} queries; {r['groups']} groups, ARI vs sources"
            f" {r['ari_sources']:.3f}{dense}",
            flush=True,
        )


if __name__ == "__main__":
    main()

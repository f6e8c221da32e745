"""How well `-c auto` foresees the time of the job it chooses for: estimate / measured.

For each demo set (and the open sets in ../shared/datasets-real when present) the calibration
chooses a compressor and estimates the whole matrix's wall time; the matrix is then computed with
that compressor, uncached, on all cores, and the two are compared. A ratio near 1 is the goal;
below 1 the estimate is optimistic (the budget could be overrun).

    python benchmarks/bench_auto_estimate.py
"""

from __future__ import annotations

import time
import warnings
from pathlib import Path

from kinpress import distance_matrix, load_items
from kinpress.calibration import choose_compressor, estimate_job_seconds
from kinpress.engine import available_cores

ROOT = Path(__file__).resolve().parents[1]
SHARED = ROOT.parent / "shared" / "datasets-real"
SETS = [
    ("demo frogs", [ROOT / "datasets" / "karsvell-frogs" / "genomes"], "auto"),
    ("demo logs, 200 lines", [ROOT / "datasets" / "quendle-logs" / "logs"], "lines:200"),
    ("real mitogenomes", [SHARED / "genomes" / "mitogenomes"], "auto"),
    ("real logs, 100 lines", [SHARED / "logs"], "lines:100"),
    ("real texts", [SHARED / "texts"], "auto"),
]


def main() -> None:
    cores = available_cores()
    print(f"cores: {cores}")
    print(f"{'set':22s} {'chosen':28s} {'estimate':>9s} {'measured':>9s} {'ratio':>6s}")
    for name, paths, split in SETS:
        if not all(p.exists() for p in paths):
            print(f"{name:22s} (not found: skipped)")
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            items = load_items(paths, split)
            spec, report = choose_compressor(items)
        estimate = estimate_job_seconds(report.result(spec), [len(i.data) for i in items], cores)
        started = time.perf_counter()
        distance_matrix(items, spec)
        measured = time.perf_counter() - started
        print(f"{name:22s} {spec:28s} {estimate:8.2f}s {measured:8.2f}s {estimate / measured:6.2f}")


if __name__ == "__main__":
    main()

"""How well `-c auto` foresees the time of the job it chooses for: estimate / measured.

For each demo set (and the open sets in ../shared/datasets-real when present) the calibration
chooses a compressor and estimates the whole matrix's wall time; the matrix is then computed with
that compressor, uncached, on all cores, and the two are compared. A ratio near 1 is the goal;
below 1 the estimate is optimistic (the budget could be overrun).

Then a classification (the first round of bench_origins.py's protocols on ../shared's logs and
code, and with --debian-code DIR its 24 languages): for the slow, strong candidates auto weighs
against its budget, the estimate from the unit of work timed on the job's own corpus and items
(what auto uses) and from the calibrated throughput (what it used before), each over the
classification measured uncached.

With --given REFERENCE ITEMS, also a reference and items of the user's kind, whole (origins of
very different sizes, as a project's vendored libraries are, weigh on the estimate).

    python benchmarks/bench_auto_estimate.py [--debian-code DIR] [--skip-matrix]
        [--given REFERENCE ITEMS] [--specs SPEC ...]
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import Any

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


LABELLED_SPECS = ("zstd:level=19", "bz2:level=9", "lzma:level=9", "ppmd:order=32,memory=256")


def classify_rows(
    debian: Path | None,
    given: tuple[Path, Path] | None = None,
    specs: Sequence[str] = LABELLED_SPECS,
) -> None:
    """Estimate / measured for classifications (see the module); `given`, a reference folder
    (one subfolder per origin) and a folder of items to classify, whole."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import bench_origins as bench

    from kinpress.calibration import calibrate, estimate_classify_seconds
    from kinpress.calibration.job import candidate_seconds
    from kinpress.compressors import compressor
    from kinpress.origins import classify, reference_items
    from kinpress.origins.views import shape_share, shaped_items

    sets: list[tuple[str, Any, Any, int | None]] = []
    if (SHARED / "logs").exists():
        sets.append(("real logs", bench.log_origins(SHARED / "logs"), 10, None))
        sets.append(("real code", bench.shared_code(), 20, None))
    if debian is not None:
        sets.append(("24 languages", bench.code_origins(bench.debian_code(debian)), 20, 4))
    if given is not None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref, later = reference_items(given[0]), load_items([given[1]])
        sets.append((given[0].name, ref, later, None))
    cores = available_cores()
    print(f"\n{'classify, round 1':22s} {'compressor':28s} {'unit':>9s} {'rate':>9s}"
          f" {'measured':>9s} {'unit/m':>6s} {'rate/m':>6s}")  # fmt: skip
    for name, origins, reference, missing in sets:
        if isinstance(reference, int):
            ref, later, _ = bench.rounds(origins, reference, missing)[0]
        else:  # given: the reference and the items as they are
            ref, later = origins, reference
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            report = calibrate(ref, candidates=list(specs))
        lengths, targets = [len(i.data) for i in ref], [len(t.data) for t in later]
        longest = max([*lengths, *targets])
        shape = shape_share([*ref, *later])
        shaped = (shaped_items(ref), shaped_items(later)) if shape else None
        labels = len({i.label for i in ref})
        for result in report.compressors:
            comp = compressor(result.spec)
            common = dict(primed=comp.primable or comp.continues, cores=cores, shape=shape)
            rate = estimate_classify_seconds(result, lengths, labels, targets, **common)
            # as auto weighs it against the budget (calibration.job._within_budget)
            unit = candidate_seconds(result, ref, later, cores, longest, shape, shaped)
            started = time.perf_counter()
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                classify(later, ref, result.spec)
            measured = time.perf_counter() - started
            print(f"{name:22s} {result.spec:28s} {unit:8.1f}s {rate:8.1f}s {measured:8.1f}s"
                  f" {unit / measured:6.2f} {rate / measured:6.2f}", flush=True)  # fmt: skip


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--debian-code", type=Path, help="the folder fetch_debian_code.sh filled")
    parser.add_argument("--skip-matrix", action="store_true", help="only the classifications")
    parser.add_argument(
        "--given", nargs=2, type=Path, metavar=("REFERENCE", "ITEMS"),
        help="also a reference folder (a subfolder per origin) and a folder of items to classify",
    )  # fmt: skip
    parser.add_argument("--specs", nargs="+", default=list(LABELLED_SPECS))
    args = parser.parse_args()
    if not args.skip_matrix:
        matrix_rows()
    classify_rows(args.debian_code, args.given and tuple(args.given), args.specs)


def matrix_rows() -> None:
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

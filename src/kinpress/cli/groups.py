"""kinpress groups: flat groups of the items, from the full matrix or nearest neighbours."""

from __future__ import annotations

import argparse
import dataclasses
import sys
from collections.abc import Sequence
from typing import Any

from ..distance import TooLarge, check_matrix_memory
from ..formats import emit
from ..items import escape_name
from . import _options
from ._common import (
    Check,
    as_usage_errors,
    compute_matrix,
    load,
    matrix_for,
    opened_cache,
    resolve_spec,
    write_json,
)
from ._console import Console, duration
from ._options import UsageError, budget_seconds
from .tree import inputs_or_matrix, refuse_measuring


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "groups",
        help="flat groups of the items (the number chosen from the data, or --k)",
        description="Group the items by their NCD matrix: density-based groups (HDBSCAN*) with "
        "the count chosen by silhouette, or exactly --k groups, or a --cut distance. Items "
        "that fit no group join their nearest one unless --outliers.",
        example=[
            "kinpress groups logs/ --split lines:200 -o groups.tsv",
            "kinpress groups logs/ --split lines:200 --k 8 --labels truth.tsv --json",
            "kinpress groups --matrix dist.json --cut 0.8",
        ],
    )
    inputs_or_matrix(parser)
    how = parser.add_argument_group("groups")
    how.add_argument("--k", type=int, metavar="N", help="exactly N groups")
    how.add_argument("--cut", type=float, metavar="DISTANCE", help="groups joined below DISTANCE")
    how.add_argument(
        "--outliers", action="store_true", help="report outliers as group -1 instead of joining"
    )
    _options.output(parser, "the TSV of groups", "a JSON report instead of the TSV")


@dataclasses.dataclass(frozen=True)
class _Grouped:
    """What the groups report says of the items grouped, whichever route grouped them."""

    labels: tuple[str, ...]
    classes: tuple[str | None, ...] | None
    compressor: str
    conditional: str


def _sparse_grouping(
    args: argparse.Namespace, console: Console, check: Check
) -> tuple[_Grouped, Any] | None:
    """Groups from nearest neighbours when the full matrix of the inputs would not fit in memory
    or in --budget seconds (said on stderr), else None: the matrix route (the loaded items are
    left in args.loaded_items)."""
    from ..distance import estimate_matrix_seconds
    from ..neighbours import SAMPLE_ITEMS, sparse_groups

    if args.matrix or not args.inputs:
        return None
    items = load(args)
    check([item.name for item in items])
    try:
        check_matrix_memory(items)
        reason = None
    except TooLarge as error:
        reason = str(error).split(":", 1)[0]
    spec = resolve_spec(args, items, console)
    budget = budget_seconds(args)
    if reason is None:
        seconds = estimate_matrix_seconds(items, spec, args.engine.jobs)
        if seconds <= budget:
            args.loaded_items = items
            return None
        reason = (
            f"a full matrix of {len(items):,} items would take about {duration(seconds)},"
            f" over the --budget of {duration(budget)}"
        )
    console.say(
        f"groups: {reason}; grouping from each item's 10 nearest neighbours instead"
        f" (HDBSCAN* on their graph, silhouettes on"
        f" {min(SAMPLE_ITEMS, max(2, len(items) // 4))} sampled items)"
    )
    with as_usage_errors(), opened_cache(args) as cache, console.progress() as progress:
        found = sparse_groups(
            items, spec, k=args.k, cut=args.cut, report_outliers=args.outliers,
            conditional=args.conditional, strand=args.strand, engine=args.engine, cache=cache,
            progress=progress,
        )  # fmt: skip
    nb = found.neighbours
    console.say(
        f"nearest: {nb.pairs:,} pairs measured of {nb.possible:,} ({nb.fraction:.2%}),"
        f" {found.sample_pairs_computed:,} more for the sample, in {nb.stats.seconds:.1f} s"
    )
    classes = tuple(item.label for item in items) if any(i.label for i in items) else None
    return _Grouped(nb.labels, classes, nb.compressor, nb.conditional), found.grouping


def _rounded(value: float) -> float | None:
    return None if value != value else round(float(value), 6)  # NaN: undefined silhouette


def _confusion_text(scores: Any) -> str:
    head = ["known \\ group", *(str(g) for g in scores.group_ids)]
    body = [
        [label, *(str(int(c)) for c in row)]
        for label, row in zip(scores.known_labels, scores.confusion, strict=True)
    ]
    widths = [max(len(r[k]) for r in [head, *body]) for k in range(len(head))]
    return "\n".join(
        "  ".join(
            cell.rjust(w) if k else cell.ljust(w)
            for k, (cell, w) in enumerate(zip(row, widths, strict=True))
        )
        for row in [head, *body]
    )


def _report(dm: _Grouped, grouping: Any, scores: Any) -> dict[str, Any]:
    report: dict[str, Any] = {
        "items": [
            {"item": n, "group": int(g), "medoid": bool(m), "outlier": bool(o)}
            for n, g, m, o in zip(
                dm.labels,
                grouping.assignment,
                grouping.is_medoid,
                grouping.is_outlier,
                strict=True,
            )
        ],
        "groups": [
            {
                "group": g.index,
                "size": g.size,
                "medoid": dm.labels[g.medoid],
                "silhouette": _rounded(g.silhouette),
            }
            for g in grouping.groups
        ],
        "k": grouping.k,
        "method": grouping.method,
        "silhouette": _rounded(grouping.silhouette),
        "compressor": dm.compressor,
        "conditional": dm.conditional,
    }
    if scores is not None:
        report["agreement"] = {
            "adjusted_rand": round(scores.adjusted_rand, 6),
            "purity": round(scores.purity, 6),
            "scored": scores.scored,
            "confusion": {
                "labels": list(scores.known_labels),
                "groups": [int(g) for g in scores.group_ids],
                "counts": [[int(c) for c in row] for row in scores.confusion],
            },
        }
    return report


def run(args: argparse.Namespace, console: Console) -> int:
    from ..groups import agreement, find_groups

    if args.k is not None and args.cut is not None:
        raise UsageError("give --k or --cut, not both")
    refuse_measuring(args, budget_beyond_auto=True)  # a matrix over budget goes the sparse way

    def check(labels: Sequence[str]) -> None:
        if args.k is not None and args.k > len(labels):
            raise UsageError(f"--k {args.k}: more groups than the {len(labels)} items")

    found = _sparse_grouping(args, console, check)
    if found is None:
        loaded = getattr(args, "loaded_items", None)
        if loaded is None:
            matrix, _ = matrix_for(args, console, check=check)
        else:
            matrix, _ = compute_matrix(args, console, items=loaded)
        with as_usage_errors():
            grouping = find_groups(
                matrix.distances, k=args.k, cut=args.cut, report_outliers=args.outliers
            )
        dm = _Grouped(matrix.labels, matrix.classes, matrix.compressor, matrix.conditional)
    else:
        dm, grouping = found
    rows = ["item\tgroup\tmedoid\toutlier"]
    for name, group, is_medoid, outlier in zip(
        dm.labels, grouping.assignment, grouping.is_medoid, grouping.is_outlier, strict=True
    ):
        rows.append(
            f"{escape_name(name)}\t{group}\t{'yes' if is_medoid else 'no'}"
            f"\t{'yes' if outlier else 'no'}"
        )
    tsv = "\n".join(rows) + "\n"
    outliers = int(sum(grouping.is_outlier))
    console.say(
        f"groups: {grouping.k} by {grouping.method}; mean silhouette {grouping.silhouette:.3f};"
        f" {outliers} outliers {'reported' if args.outliers else 'joined their nearest group'}"
    )
    scores = None
    if dm.classes is not None and any(c is not None for c in dm.classes):
        scores = agreement(list(grouping.assignment), list(dm.classes))
        console.say(
            f"against known labels ({scores.scored} items): adjusted Rand index"
            f" {scores.adjusted_rand:.3f}, purity {scores.purity:.3f}"
        )
        if not args.json and not args.quiet:
            print(_confusion_text(scores), file=sys.stderr)
    if args.json:
        write_json(args, _report(dm, grouping, scores))
    else:
        emit(tsv, args.output)
    return 0

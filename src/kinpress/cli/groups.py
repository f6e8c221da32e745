"""kinpress groups: flat groups of the items, from the full matrix or nearest neighbours."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from typing import TYPE_CHECKING

from ..distance import TooLarge, check_matrix_memory
from ..formats import emit, group_lines
from ..items import Labels
from ..units import duration_text
from . import _options
from ._common import (
    Check,
    as_usage_errors,
    check_strands,
    compute_matrix,
    known_labels,
    load,
    matrix_for,
    opened_cache,
    resolve_spec,
    write_json,
)
from ._console import Console
from ._options import UsageError, budget_seconds
from .tree import inputs_or_matrix, refuse_measuring

if TYPE_CHECKING:
    from ..groups import Agreement, GroupingResult

SILHOUETTE_LEGEND = (
    "silhouette: from -1 to 1, how much nearer an item lies to its own group than to the next"
    " group (1: far apart, 0: between two, below 0: nearer another), averaged over the items"
)
AGREEMENT_LEGEND = (
    "adjusted Rand index: how the groups agree with the known labels, 1 exactly, 0 no better"
    " than chance; purity: the share of labelled items whose group's most common label is theirs"
)
"""What the scores on stderr mean, said under them."""


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


def _sparse_grouping(
    args: argparse.Namespace, console: Console, labels: Labels | None, check: Check
) -> GroupingResult | None:
    """Groups from nearest neighbours when the full matrix of the inputs would not fit in memory
    or in --budget seconds (said on stderr), else None: the matrix route (the loaded items are
    left in args.loaded_items)."""
    from ..distance import estimate_matrix_seconds
    from ..groups import GroupingResult
    from ..neighbours import SAMPLE_ITEMS, sparse_groups

    if args.matrix or not args.inputs:
        return None
    items = load(args, labels)
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
            f"a full matrix of {len(items):,} items would take about {duration_text(seconds)},"
            f" over the --budget of {duration_text(budget)}"
        )
    console.say(
        f"groups: {reason}; grouping from each item's 10 nearest neighbours instead"
        f" (HDBSCAN* on their graph, silhouettes on"
        f" {min(SAMPLE_ITEMS, max(2, len(items) // 4))} sampled items)"
    )
    check_strands(args, items)
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
    classes = [item.label for item in items]
    return GroupingResult.of(nb.labels, found.grouping, classes, nb.compressor, nb.conditional)


def _confusion_text(scores: Agreement) -> str:
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


def run(args: argparse.Namespace, console: Console) -> int:
    from ..groups import GroupingResult, find_groups

    if args.k is not None and args.cut is not None:
        raise UsageError("give --k or --cut, not both")
    refuse_measuring(args, budget_beyond_auto=True)  # a matrix over budget goes the sparse way

    def check(labels: Sequence[str]) -> None:
        if args.k is not None and args.k > len(labels):
            raise UsageError(f"--k {args.k}: more groups than the {len(labels)} items")

    labels = known_labels(args)
    result = _sparse_grouping(args, console, labels, check)
    if result is None:
        loaded = getattr(args, "loaded_items", None)
        if loaded is None:
            matrix, _ = matrix_for(args, console, labels, check=check)
        else:
            matrix, _ = compute_matrix(args, console, labels, items=loaded)
        with as_usage_errors():
            grouping = find_groups(
                matrix.distances, k=args.k, cut=args.cut, report_outliers=args.outliers
            )
        result = GroupingResult.of(
            matrix.labels, grouping, matrix.classes, matrix.compressor, matrix.conditional
        )
    grouping = result.grouping
    outliers = int(sum(grouping.is_outlier))
    silhouette = (
        f"mean silhouette {grouping.silhouette:.3f}"
        if grouping.silhouette == grouping.silhouette
        else "no silhouette (one group)"
        if grouping.k < 2
        else "no silhouette measured"
    )
    console.say(
        f"groups: {grouping.k} by {grouping.method}; {silhouette};"
        f" {outliers:,} outlier{'' if outliers == 1 else 's'}"
        f" {'reported' if args.outliers else 'joined their nearest group'}"
    )
    scores = result.agreement
    if scores is not None:
        console.say(
            f"against known labels ({scores.scored} items): adjusted Rand index"
            f" {scores.adjusted_rand:.3f}, purity {scores.purity:.3f}"
        )
        if not args.json and not args.quiet:
            print(_confusion_text(scores), file=sys.stderr)
    console.say(SILHOUETTE_LEGEND)
    if scores is not None:
        console.say(AGREEMENT_LEGEND)
    if args.json:
        write_json(args, result.as_json())
    else:
        emit(group_lines(result), args.output)
    return 0

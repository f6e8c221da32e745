"""kinpress matrix: the normalized compression distance between every pair of items."""

from __future__ import annotations

import argparse

from ..formats import MATRIX_FORMATS, format_for, write_matrix
from . import _options
from ._common import check_plot, compute_matrix, known_labels, load
from ._console import Console
from ._options import UsageError


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "matrix",
        help="the normalized compression distance between every pair of items",
        description="Compute NCD(x,y) = max(C(x|y), C(y|x)) / max(C(x), C(y)) for every pair of "
        "items (files, sequence records or chunks) and write the matrix.",
        example=[
            "kinpress matrix genomes/ -c zstd:level=19 -o dist.tsv",
            "kinpress matrix genomes.fasta --split records --format phylip -o dist.phy",
            "kinpress matrix logs/ --split lines:200 --format json -o dist.json",
        ],
    )
    _options.inputs(parser)
    _options.measuring(parser)
    out = _options.output(
        parser,
        "the matrix",
        "the matrix as JSON (the same as --format json)",
        plot="also draw a heatmap in tree order",
    )
    out.add_argument(
        "--format", choices=MATRIX_FORMATS, help="default: from the file extension, else tsv"
    )


def run(args: argparse.Namespace, console: Console) -> int:
    if args.json and args.format not in (None, "json"):
        raise UsageError(f"--json and --format {args.format}: give one")
    fmt = format_for(args.output, "json" if args.json else args.format)
    check_plot(args.plot)
    title = _options.plot_title(args)
    _options.refuse_budget_without_auto(args)
    labels = known_labels(args)  # a missing labels file is reported before the check below
    if fmt != "json" and not args.plot:
        _options.refuse_given(args, ("labels",), f"only the JSON matrix and the --plot carry"
                              f" labels, not {fmt}; add --json or --plot")  # fmt: skip
    items = load(args, labels)
    dm, _ = compute_matrix(args, console, labels, items=items)
    write_matrix(dm, args.output, fmt)
    if args.plot:
        from ..plots import plot_heatmap
        from ..trees import build_tree

        # Average-linkage leaf order puts near items side by side, so groups show as blocks.
        tree = build_tree(dm.labels, dm.distances, method="average")
        legend = "class" if labels is None else labels.column
        plot_heatmap(dm, args.plot, tree=tree, title=title, legend_title=legend)
    return 0

"""kinpress nearest: each item's k nearest items, without computing every pair."""

from __future__ import annotations

import argparse
import itertools

from ..formats import emit
from ..items import escape_name
from . import _options
from ._common import (
    as_usage_errors,
    check_strands,
    known_labels,
    load,
    opened_cache,
    resolve_spec,
    write_json,
)
from ._console import Console

LEGEND = (
    "rank: 1 for an item's nearest neighbour; ncd: the normalized compression distance"
    " max(C(x|y), C(y|x)) / max(C(x), C(y)), near 0 for the same content, near 1 for unrelated"
    " (a little above 1 happens: compressors are not ideal)"
)
"""What the columns of the TSV mean, said on stderr beside it."""


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "nearest",
        help="each item's k nearest items, without computing every pair",
        description="Find each item's k nearest other items by NCD without the full matrix: "
        "candidates from MinHash sketches of the items' bytes, refined by exploring neighbours "
        "of neighbours, every reported distance measured exactly as 'kinpress matrix' would. "
        "Writes item, rank, neighbour and NCD per line.",
        example=[
            "kinpress nearest logs/ --split lines:40 -c zstd:level=3 -o nearest.tsv",
            "kinpress nearest share/ --k 5 --json -o nearest.json",
        ],
    )
    _options.inputs(parser)
    _options.measuring(parser)
    how = parser.add_argument_group("neighbours")
    how.add_argument("--k", type=int, default=10, metavar="N", help="neighbours per item (10)")
    _options.output(parser, "the neighbours", "JSON instead of TSV")


def run(args: argparse.Namespace, console: Console) -> int:
    from ..neighbours import nearest_neighbours

    _options.refuse_budget_without_auto(args)
    items = load(args, known_labels(args))
    check_strands(args, items)
    spec = resolve_spec(args, items, console)
    with as_usage_errors(), opened_cache(args) as cache, console.progress() as progress:
        found = nearest_neighbours(
            items, spec, k=args.k, conditional=args.conditional, strand=args.strand,
            engine=args.engine, cache=cache, progress=progress,
        )  # fmt: skip
    s = found.stats
    console.say(
        f"nearest: {found.k} per item for {len(found)} items, {found.compressor}"
        f" ({found.conditional}): {found.pairs:,} pairs measured of {found.possible:,}"
        f" ({found.fraction:.2%}; {s.pairs_computed:,} computed, {s.pairs_from_cache:,} from"
        f" cache)"
        + (", every pair (small set)" if found.exhaustive else "")
        + f" in {s.seconds:.1f} s"
    )
    known = [item.label for item in items]
    if any(label is not None for label in known):
        same = [
            known[int(j)] == known[i]
            for i in range(len(items))
            if known[i] is not None
            for j in found.index[i]
            if j >= 0 and known[int(j)] is not None
        ]
        if same:
            console.say(f"against known labels: {sum(same) / len(same):.1%} of neighbours share"
                        " their item's label")  # fmt: skip
    if args.json:
        write_json(args, found.as_json())
        return 0
    console.say(LEGEND)
    header = ["item\trank\tneighbour\tncd\n"]
    rows = (f"{escape_name(a)}\t{r}\t{escape_name(b)}\t{d:.6f}\n" for a, r, b, d in found.rows())
    emit(itertools.chain(header, rows), args.output)
    return 0

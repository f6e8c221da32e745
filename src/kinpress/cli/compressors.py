"""kinpress compressors: the compressors, their settings and limits."""

from __future__ import annotations

import argparse

from ..compressors import ADAPTERS, describe
from ..formats import emit
from ..units import size_text
from . import _options
from ._common import table, write_json
from ._console import Console


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "compressors",
        help="list the compressors, their settings and limits",
        description="List the compressors: default spec, levels, window or block limit, "
        "whether they can be primed, and the fixed bytes each adds to every size.",
        example=["kinpress compressors", "kinpress compressors --json"],
    )
    _options.output(parser, "the list", "a JSON list of objects")


def run(args: argparse.Namespace, console: Console) -> int:
    rows = [describe(cls()) for cls in ADAPTERS.values()]
    if args.json:
        write_json(args, [row.as_json() for row in rows])
        return 0
    header = ("name", "default spec", "levels", "window/block", "primed", "overhead")
    listing = [header] + [
        (
            r.name,
            r.spec,
            f"{r.levels[0]}-{r.levels[1]}",
            "none" if r.window_bytes is None else size_text(r.window_bytes),
            "yes" if r.primed else "no",
            f"{r.overhead_bytes} B",
        )
        for r in rows
    ]
    notes = [
        f"{r.name}: {r.summary}. Keys: {', '.join(f'{p.name} {p.low}-{p.high}' for p in r.keys)}."
        f" Limit: {r.window_source}.\n"
        for r in rows
    ]
    emit([table(listing), "\n", *notes], args.output)
    return 0

"""kinpress tree: a tree of the items from their compression distances."""

from __future__ import annotations

import argparse
import difflib
from collections.abc import Sequence
from typing import TYPE_CHECKING

from ..compressors import compressor
from ..distance import DistanceMatrix
from ..formats import emit
from . import _options
from ._common import as_usage_errors, check_plot, known_labels, matrix_for, write_json
from ._console import Console
from ._options import UsageError

if TYPE_CHECKING:
    from ..items import Item
    from ..trees import Node, Resampling


def inputs_or_matrix(parser: argparse.ArgumentParser) -> None:
    """Inputs to measure, or a matrix saved by `kinpress matrix`, and the measuring options."""
    _options.inputs(parser, nargs="*")
    parser.add_argument("--matrix", metavar="FILE", help="a matrix written by 'kinpress matrix'")
    _options.measuring(parser)


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "tree",
        help="a tree of the items from their compression distances",
        description="Build a tree (Newick) from the NCD matrix of the inputs, or from a saved "
        "matrix: neighbour joining (default, midpoint-rooted unless --outgroup) or a "
        "hierarchical linkage. A tree from compression distances is a hypothesis to check, "
        "not a phylogeny on its own.",
        example=[
            "kinpress tree genomes/ --outgroup danio_rerio -o tree.nwk --plot tree.png",
            "kinpress tree --matrix dist.phy --method average -o tree.nwk",
            "kinpress tree genomes/ --bootstrap 100 -o tree.nwk",
        ],
    )
    inputs_or_matrix(parser)
    shape = parser.add_argument_group("tree")
    _options.tree_shape(shape)
    shape.add_argument("--seed", type=int, default=1, help="bootstrap random seed (default 1)")
    _options.output(
        parser,
        "the Newick tree",
        "a JSON report (the Newick tree in it) instead of the Newick tree",
        plot="draw the tree",
    )


def _outgroup(text: str | None, labels: Sequence[str]) -> list[str] | None:
    """The --outgroup names, each checked against the item names."""
    if not text:
        return None
    wanted = [t.strip() for t in text.split(",") if t.strip()]
    missing = [t for t in wanted if t not in labels]
    if missing:
        close = difflib.get_close_matches(missing[0], labels, n=3)
        hint = f"; did you mean {', '.join(close)}?" if close else ""
        raise UsageError(f"--outgroup: no item named {missing[0]!r}{hint}")
    return wanted


def refuse_measuring(args: argparse.Namespace, budget_beyond_auto: bool = False) -> None:
    """Options that say how to measure do nothing when a saved matrix is read; so does --budget
    with a compressor named, unless the command uses it for more (`budget_beyond_auto`)."""
    if args.matrix:
        _options.refuse_given(args, _options.MEASURING, "does nothing with --matrix: a saved"
                              " matrix is read as it is, not measured")  # fmt: skip
    elif not budget_beyond_auto:
        _options.refuse_budget_without_auto(args)


def classes(dm: DistanceMatrix) -> dict[str, str] | None:
    if dm.classes is None:
        return None
    return {n: c for n, c in zip(dm.labels, dm.classes, strict=True) if c is not None}


def _refuse_useless(args: argparse.Namespace) -> None:
    """Refuse options that cannot work or would do nothing with the others given."""
    if args.bootstrap and args.matrix:
        raise UsageError("--bootstrap resamples the items, so it needs inputs, not --matrix")
    refuse_measuring(args)
    if not args.bootstrap:
        _options.refuse_given(args, ("seed", "block_fraction"), "does nothing without --bootstrap")
    if not args.plot:
        _options.refuse_given(args, ("labels",), "colours the leaves of --plot; give --plot")
    check_plot(args.plot)
    _options.plot_title(args)


def _tree(
    args: argparse.Namespace,
    console: Console,
    dm: DistanceMatrix,
    items: Sequence[Item],
    outgroup: list[str] | None,
) -> tuple[Node, Resampling | None]:
    """The tree of `dm`, with its bootstrap support when asked for, and how that was counted."""
    from ..support import bootstrap_support
    from ..trees import Resampling, build_tree, outgroup_root

    support = None
    with as_usage_errors():
        tree = build_tree(dm.labels, dm.distances, method=args.method, outgroup=outgroup)
        if args.bootstrap:
            support = Resampling(args.bootstrap, args.block_fraction, args.seed)
            with console.progress() as progress:
                tree = bootstrap_support(
                    tree,
                    items,
                    compressor(dm.compressor),
                    replicates=support.replicates,
                    block_fraction=support.block_fraction,
                    seed=support.seed,
                    method=args.method,
                    conditional=args.conditional,
                    strand=args.strand,
                    engine=args.engine,
                    progress=progress,
                )
    if outgroup is not None and args.bootstrap:
        tree = outgroup_root(tree, outgroup)
    return tree, support


def run(args: argparse.Namespace, console: Console) -> int:
    from ..trees import TreeResult

    _refuse_useless(args)

    def check(labels: Sequence[str]) -> None:
        _outgroup(args.outgroup, labels)

    labels = known_labels(args)
    dm, items = matrix_for(args, console, labels, check=check)
    outgroup = _outgroup(args.outgroup, dm.labels)
    tree, support = _tree(args, console, dm, items, outgroup)
    result = TreeResult.of_matrix(tree, args.method, dm, outgroup, support)
    fit = (
        f"path lengths correlate with distances at r = {result.fit:.3f}"
        if result.fit == result.fit
        else "not measured (fewer than three leaves, or all distances equal)"
    )
    console.say(f"tree: {args.method}, {result.leaves} leaves, rooted {result.rooting}; fit: {fit}")
    if args.plot:
        from ..plots import plot_tree

        plot_tree(
            tree,
            args.plot,
            classes=classes(dm),
            title=_options.plot_title(args),
            scale_label="NCD",
            legend_title="class" if labels is None else labels.column,
        )
    if args.json:
        write_json(args, result.as_json())
    else:
        emit(result.newick + "\n", args.output)
    return 0

"""kinpress derived: files copied from, or derived from, other files."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from ..formats import FINDING_FORMATS, emit, write_findings
from ..items import escape_name
from . import _options
from ._common import as_usage_errors, load, opened_cache, resolve_spec
from ._console import Console
from ._options import UsageError

if TYPE_CHECKING:
    from ..derived import DerivedFinding

DERIVED_CAUTION = (
    "A finding is evidence for a person to review, not proof of copying: files can share content"
    " through common templates, licences, generated code or a common source."
)

LEGEND = (
    "explained: 1 - C(a|b)/C(a), how much of a the other file tells the compressor (0: nothing,"
    " 1: all of it), and of b; score: the larger of the two; fpr: the estimated share of"
    " unrelated pairs of the same kind (the set's files against block-shuffled ones) scoring as"
    " high; shared in order: the share of each file lying in stretches both hold in the same order"
)
"""What each number of the text listing means, printed under it."""


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "derived",
        help="find files copied from or derived from other files",
        description="For every candidate pair, how much of a is explained by b and of b by a "
        "(1 - C(a|b)/C(a)), judged against a null of files of the same kind from the set with "
        "their content block-shuffled. A related pair is derived when the two share long "
        "stretches in the same order (whitespace ignored, edits allowed): identical, near_copy, "
        "a_contains_b, b_contains_a or partial_overlap. Related pairs without such stretches "
        "are files of one source (logs of one system, modules of one project, one template), "
        "counted but listed only with --same-source. A MinHash prefilter proposes candidates "
        "unless --exhaustive. " + DERIVED_CAUTION,
        example=[
            "kinpress derived exports/ --json -o findings.json",
            "kinpress derived exports/ --format tsv -o findings.tsv",
            "kinpress derived big-share/ --exhaustive",
        ],
    )
    _options.inputs(parser)
    _options.measuring(parser, labels=False)
    judge = parser.add_argument_group("judging")
    judge.add_argument("--exhaustive", action="store_true", help="check all pairs, no prefilter")
    judge.add_argument(
        "--max-fpr",
        type=float,
        default=0.01,
        metavar="RATE",
        help="relate pairs whose estimated false-positive rate is at most RATE (default 0.01);"
        " pairs are derived when they also share stretches in order, or share enough of them"
        " whatever the rate",
    )
    judge.add_argument("--seed", type=int, default=0, help="seed of the null and the sketches")
    out = _options.output(parser, "the findings", "a JSON list of findings (--format json)")
    out.add_argument(
        "--format",
        choices=FINDING_FORMATS,
        help="a table of findings, one row each (tsv, csv), or json; default: a text listing"
        " by family",
    )
    out.add_argument(
        "--same-source",
        action="store_true",
        help="also list related pairs that share too little in order to call either derived"
        " (files of one source)",
    )


def run(args: argparse.Namespace, console: Console) -> int:
    from ..derived import families, find_derived

    if args.json and args.format not in (None, "json"):
        raise UsageError(f"--json and --format {args.format}: give one")
    _options.refuse_budget_without_auto(args)
    items = load(args, None)
    proposals, proposed = None, None
    if args.compressor == "auto" and len(items) >= 2:
        # auto weighs the job's time against --budget: the pairs the prefilter proposes, not
        # every pair (on Go's source tree 60 thousand of 33 million, 19 minutes, not 30 hours)
        from ..calibration import ProposedPairs
        from ..derived import propose

        console.say("derived: the prefilter chooses the pairs to check ...")
        with console.progress():  # a heartbeat: on Go's source tree this takes about 45 s
            proposals = propose(items, seed=args.seed)
        lengths = [len(item.data) for item in items]
        proposed = (
            ProposedPairs.every(lengths)
            if args.exhaustive
            else ProposedPairs.of(proposals.pairs, lengths)
        )
    spec = resolve_spec(args, items, console, proposed=proposed)
    with as_usage_errors(), opened_cache(args) as cache, console.progress() as progress:
        report = find_derived(
            items,
            spec,
            exhaustive=args.exhaustive,
            max_fpr=args.max_fpr,
            seed=args.seed,
            engine=args.engine,
            cache=cache,
            progress=progress,
            proposals=proposals,
        )
    c = report.counts
    console.say(
        f"derived: {len(report.findings):,} findings among {c.possible:,} pairs; {c.candidates:,}"
        f" candidates checked, {c.pruned:,} pruned by the prefilter"
        + (" (exhaustive)" if report.exhaustive else "")
        + f"; related where the false-positive rate is at most {report.max_fpr:g}"
    )
    kin = len(report.same_source)
    if kin:
        pairs = "pair shares" if kin == 1 else "pairs share"
        console.say(
            f"derived: {kin:,} more related {pairs} too little in order to call either derived:"
            " files of one source" + ("" if args.same_source else " (--same-source lists them)")
        )
    shown = report.findings + (report.same_source if args.same_source else ())
    fmt = "json" if args.json else args.format
    if fmt is not None:
        write_findings(shown, args.output, fmt)
        return 0
    lines = []
    for number, family in enumerate(families(report.findings), start=1):
        lines.append(f"family {number}: {', '.join(map(escape_name, family.members))}")
        shown = family.shown()
        lines += [f"  {line}" for f in shown for line in _finding_lines(f)]
        if len(shown) < len(family.findings):
            lines.append(
                f"  ... and {len(family.findings) - len(shown):,} more pairs among these"
                f" {len(family.members)} files: above, each file with the one it is most like"
                " (every pair: --format tsv or --json)"
            )
    if args.same_source and report.same_source:
        lines += ["", "same source, too little in order to call either derived:"]
        lines += [f"  {line}" for f in report.same_source for line in _finding_lines(f)]
    lines += [LEGEND] if lines else ["no derived pairs found"]
    lines += ["", DERIVED_CAUTION]
    emit("\n".join(lines) + "\n", args.output)
    return 0


def _finding_lines(f: DerivedFinding) -> list[str]:
    """A finding as two lines: the relation and scores, then where the shared stretches are."""
    head = (
        f"{escape_name(f.a)}  {f.relation}  {escape_name(f.b)}   explained: a by b"
        f" {f.a_explained_by_b:.2f}, b by a {f.b_explained_by_a:.2f};"
        f" score {f.score:.3f}, fpr {f.fpr:.2g}"
    )
    if f.relation == "identical":
        return [head]
    where = f"shared in order: {f.a_in_order:.0%} of a, {f.b_in_order:.0%} of b"
    if f.stretches:
        s = f.stretches[0]
        where += (
            f"; longest stretch {s.length} bytes (whitespace aside), a bytes"
            f" {s.a_start}-{s.a_end}, b bytes {s.b_start}-{s.b_end}"
        )
    return [head, f"    {where}"]

"""Option builders, each declared once and shared by the commands that take the option.

A command module calls the builders it needs beside its own options; `given` and `option_name`
let a command name an option the user gave that does nothing in the combination asked for.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable, Sequence

from ..cache import default_cache_path
from ..items import DEFAULT_MAX_FILE_BYTES
from ..measure import CONDITIONALS, STRANDS

DEFAULT_COMPRESSOR = "auto"
DEFAULT_BUDGET_SECONDS = 600.0

Group = argparse.ArgumentParser | argparse._ArgumentGroup


class UsageError(Exception):
    """A command line that cannot be carried out as given."""


def examples(*lines: str) -> str:
    return "examples:\n" + "\n".join(f"  {line}" for line in lines)


def command(
    subparsers: argparse._SubParsersAction[argparse.ArgumentParser],
    name: str,
    *,
    help: str,
    description: str,
    example: Sequence[str],
) -> argparse.ArgumentParser:
    """A command's parser, with its examples and the options every command takes."""
    parser = subparsers.add_parser(
        name,
        help=help,
        description=description,
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=examples(*example),
    )
    common(parser)
    parser.set_defaults(command_parser=parser)
    return parser


def common(parser: argparse.ArgumentParser) -> None:
    # SUPPRESS: a command's copy, when not given, must not reset the global option to False.
    quiet = "no progress bar or summary"
    parser.add_argument("-q", "--quiet", action="store_true", default=argparse.SUPPRESS, help=quiet)
    debug = "show a traceback on errors"
    parser.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=debug)


def inputs(parser: argparse.ArgumentParser, nargs: str = "+") -> None:
    parser.add_argument("inputs", nargs=nargs, metavar="INPUT", help="files, folders, or - (stdin)")


def budget(group: Group) -> None:
    group.add_argument(
        "--budget",
        type=float,
        metavar="SECONDS",
        help="the run time to aim for (default 600): with -c auto the choice may aim for it; "
        "groups: a full matrix estimated to take longer goes the nearest-neighbour way; "
        "calibrate: the recommendation is the best whose whole matrix of the inputs fits it",
    )


def budget_seconds(args: argparse.Namespace) -> float:
    return DEFAULT_BUDGET_SECONDS if args.budget is None else float(args.budget)


def measuring(
    parser: argparse.ArgumentParser, conditional: str = "concat", labels: bool = True
) -> None:
    """Options of every command that computes distances from inputs: how to measure and read."""
    group = parser.add_argument_group("measuring")
    group.add_argument(
        "-c",
        "--compressor",
        default=DEFAULT_COMPRESSOR,
        metavar="SPEC",
        help=f"NAME[:key=value,...] or auto (calibrate on the inputs and choose); default "
        f"{DEFAULT_COMPRESSOR}; classify and report --reference also take a stack, SPEC+SPEC,"
        " decided on the views of both; see 'kinpress compressors'",
    )
    budget(group)
    group.add_argument(
        "--conditional",
        choices=(*CONDITIONALS, "auto") if conditional == "auto" else CONDITIONALS,
        default=conditional,
        help="C(x|y) as C(yx)-C(y) (concat) or x compressed primed with y (primed)"
        + ("; auto: primed where the compressor can be" if conditional == "auto" else "")
        + f"; default {conditional}",
    )
    group.add_argument(
        "--strand",
        choices=STRANDS,
        default="one",
        help="both: condition nucleotide sequences on the better of y and its reverse complement",
    )
    reading(group)
    if labels:
        group.add_argument(
            "--labels",
            metavar="FILE[:COLUMN]",
            help="known labels: a TSV or CSV of item<TAB>label, or with :COLUMN the column of "
            "that name in a table with a header (items without one are named on stderr)",
        )
    running(parser)


def byte_size(text: str) -> int:
    """A size given as bytes or with a binary unit: 4096, 512K, 200M, 2G (K = 1024 bytes)."""
    units = {"": 1, "K": 1 << 10, "M": 1 << 20, "G": 1 << 30, "T": 1 << 40}
    number, unit = text.strip().upper().removesuffix("B").removesuffix("I"), ""
    if number and number[-1] in units:
        number, unit = number[:-1], number[-1]
    try:
        value = float(number)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a size (e.g. 4096, 512K, 2G)") from None
    return int(value * units[unit])


def reading(group: Group) -> None:
    """How inputs are read: into items, links below folders, the size limit of one input."""
    group.add_argument(
        "--split",
        default="auto",
        help="auto (records for sequence files, whole file otherwise), records, file, "
        "lines:N or bytes:N",
    )
    group.add_argument(
        "--follow-links",
        action="store_true",
        help="below folders, read symbolic links wherever they lead (default: only links to "
        "files inside the folder; the others are skipped with a warning)",
    )
    group.add_argument(
        "--max-file-size",
        type=byte_size,
        default=DEFAULT_MAX_FILE_BYTES,
        metavar="SIZE",
        help="refuse an input holding more than SIZE bytes after decompression (default 1G; "
        "units K, M, G)",
    )


def tree_shape(group: Group) -> None:
    """How a tree is built and supported: --method, --outgroup, --bootstrap, --block-fraction
    (tree and report; each command declares its own --seed, which seeds more in a report)."""
    group.add_argument(
        "--method",
        choices=("nj", "average", "complete", "single"),
        default="nj",
        help="nj: neighbour joining (default); average: UPGMA; complete, single: linkage",
    )
    group.add_argument("--outgroup", metavar="LABELS", help="root on these items (comma list)")
    group.add_argument(
        "--bootstrap", type=int, default=0, metavar="N", help="support from N block replicates"
    )
    group.add_argument(
        "--block-fraction",
        type=float,
        default=0.02,
        metavar="F",
        help="bootstrap block size as a fraction of each item (default 0.02)",
    )


def abstention(group: Group) -> None:
    """How an item is accepted or refused by origin: --significance and --decide-by (classify
    and report; classify adds --threshold instead of both)."""
    group.add_argument(
        "--significance",
        type=float,
        metavar="RATE",
        help="refuse an origin when the item's p-value for it is at most RATE: the rate at "
        "which items of known origins may be refused (default 0.05)",
    )
    group.add_argument(
        "--decide-by",
        choices=("fit", "separation", "contrast", "mix"),
        metavar="TEST",
        help="the test that accepts or refuses an item: fit, separation, contrast or mix "
        "(default: the one that refuses most held-out items of an origin left out of the "
        "reference; separation keeps more later items whose content drifted while their form "
        "held, the mix finds more strangers); the rate still holds. A warning says when the "
        "items one origin fits best are refused far beyond the rate",
    )


def running(parser: argparse.ArgumentParser) -> None:
    """Where the work runs (--jobs, --cluster) and the size cache."""
    group = parser.add_argument_group("running")
    group.add_argument("--jobs", type=int, metavar="N", help="worker count (default: all cores)")
    group.add_argument(
        "--cluster",
        metavar="ADDRESS",
        help="run on the Dask cluster whose scheduler is at ADDRESS (tcp://host:8786) instead of "
        "this machine's cores; needs the dask extra",
    )
    group.add_argument(
        "--cache", metavar="PATH", help=f"size cache (default {default_cache_path()})"
    )
    group.add_argument("--no-cache", action="store_true", help="compute everything afresh")


def output(
    parser: argparse.ArgumentParser, what: str, json: str, plot: str | None = None
) -> argparse._ArgumentGroup:
    """-o and --json, the same for every command: --json selects JSON, -o says where (default
    stdout); with `plot`, --plot FILE draws a picture as well and --title TEXT heads it
    (`plot_title` reads it)."""
    group = parser.add_argument_group("output")
    group.add_argument(
        "-o", "--output", metavar="FILE", help=f"write {what} here (default: stdout)"
    )
    group.add_argument("--json", action="store_true", help=json)
    if plot is not None:
        group.add_argument("--plot", metavar="FILE", help=f"{plot} (.png, .svg or .pdf)")
        group.add_argument("--title", metavar="TEXT", help="a title over the --plot")
    return group


def plot_title(args: argparse.Namespace) -> str | None:
    """The --title of the --plot; a usage error when there is no --plot to head."""
    if not args.plot:
        refuse_given(args, ("title",), "heads the --plot; give --plot")
    return str(args.title) if args.title else None


VALUE_RULES: dict[str, tuple[Callable[[float], bool], str]] = {
    "jobs": (lambda v: v >= 1, "at least 1"),
    "k": (lambda v: v >= 1, "at least 1"),
    "cut": (lambda v: v >= 0, "0 or more"),
    "bootstrap": (lambda v: v >= 0, "0 or more"),
    "block_fraction": (lambda v: 0 < v <= 1, "above 0 and at most 1"),
    "budget": (lambda v: v > 0, "a number of seconds above 0"),
    "max_fpr": (lambda v: 0 < v <= 1, "above 0 and at most 1"),
    "significance": (lambda v: 0 < v < 1, "a rate between 0 and 1"),
    "max_bytes": (lambda v: v > 0, "above 0"),
    "max_file_size": (lambda v: v > 0, "above 0"),
}
"""Option values checked before any work: the option's destination, its rule, the rule in
words."""


def check_values(args: argparse.Namespace) -> None:
    """Each option's value by its rule, and no size cache named when --no-cache turns it off."""
    for dest, (allowed, words) in VALUE_RULES.items():
        value = getattr(args, dest, None)
        if value is not None and not allowed(value):
            raise UsageError(f"--{dest.replace('_', '-')} {value}: give {words}")
    if getattr(args, "no_cache", False) and getattr(args, "cache", None):
        raise UsageError("--cache: names the size cache, which --no-cache turns off; give one")


MEASURING = ("compressor", "budget", "conditional", "strand", "split", "follow_links",
             "max_file_size", "jobs", "cluster", "cache", "no_cache")  # fmt: skip
"""What says how inputs are read and measured: nothing, when a saved matrix is read instead."""


def given(args: argparse.Namespace, dest: str) -> bool:
    """Whether the command line set this option to something other than its default."""
    parser: argparse.ArgumentParser = args.command_parser
    return bool(getattr(args, dest, None) != parser.get_default(dest))


def option_name(args: argparse.Namespace, dest: str) -> str:
    """The option as the user writes it (its long form), for messages."""
    parser: argparse.ArgumentParser = args.command_parser
    for action in parser._actions:
        if action.dest == dest and action.option_strings:
            return action.option_strings[-1]
    return dest


def refuse_budget_without_auto(args: argparse.Namespace) -> None:
    """--budget aims the -c auto choice; with a compressor named it would do nothing."""
    if args.compressor != "auto":
        refuse_given(args, ("budget",), f"aims the -c auto choice; with -c {args.compressor} it"
                     " does nothing")  # fmt: skip


def refuse_given(args: argparse.Namespace, dests: Sequence[str], why: str) -> None:
    """A usage error naming the first of `dests` given, which `why` says does nothing."""
    for dest in dests:
        if given(args, dest):
            raise UsageError(f"{option_name(args, dest)}: {why}")

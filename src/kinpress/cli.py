"""The kinpress command line: parse arguments, call the library, print. Nothing else."""

from __future__ import annotations

import argparse
import dataclasses
import difflib
import hashlib
import itertools
import json
import os
import sys
import time
import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from functools import partial
from typing import TYPE_CHECKING, Any, TextIO

from .cache import CacheError, SizeCache, default_cache_path
from .compressors import ADAPTERS, SpecError, compressor, describe
from .distance import DistanceMatrix, TooLarge, check_matrix_memory, distance_matrix
from .engine import ClusterError, DaskEngine, Engine, LocalEngine
from .formats import MATRIX_FORMATS, emit, format_for, json_text, read_matrix, write_matrix
from .items import DEFAULT_MAX_FILE_BYTES, InputError, Item, escape_name, load_items, read_labels
from .measure import CONDITIONALS, STRANDS, MeasurementWarning, Progress

if TYPE_CHECKING:
    from .derived import DerivedFinding

DEFAULT_COMPRESSOR = "auto"


class UsageError(Exception):
    """A command line that cannot be carried out as given."""


def _human(n: int | None) -> str:
    if n is None:
        return "none"
    if n > 16 and (n + 16) & (n + 15) == 0:
        return f"{_human(n + 16)} - 16 B"
    for unit, size in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= size and n % size == 0:
            return f"{n // size} {unit}"
    for unit, size in (("MB", 10**6), ("kB", 10**3)):
        if n >= size:
            return f"{n / size:g} {unit}"
    return f"{n} B"


class _ShowVersion(argparse.Action):
    """--version, looking the version up only when asked (importlib.metadata is slow to load)."""

    def __init__(self, option_strings: Sequence[str], dest: str, help: str | None = None) -> None:
        super().__init__(option_strings, dest, nargs=0, help=help)

    def __call__(self, parser: argparse.ArgumentParser, *args: object) -> None:
        from . import __version__

        parser.exit(message=f"kinpress {__version__}\n")


def _examples(*lines: str) -> str:
    return "examples:\n" + "\n".join(f"  {line}" for line in lines)


def _common(parser: argparse.ArgumentParser) -> None:
    # SUPPRESS: a command's copy, when not given, must not reset the global option to False.
    quiet = "no progress bar or summary"
    parser.add_argument("--quiet", action="store_true", default=argparse.SUPPRESS, help=quiet)
    debug = "show a traceback on errors"
    parser.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=debug)


def _matrix_options(parser: argparse.ArgumentParser, conditional: str = "concat") -> None:
    """Options of every command that computes distances from inputs."""
    group = parser.add_argument_group("measuring")
    group.add_argument(
        "-c",
        "--compressor",
        default=DEFAULT_COMPRESSOR,
        metavar="SPEC",
        help=f"NAME[:key=value,...] or auto (calibrate on the inputs and choose); default "
        f"{DEFAULT_COMPRESSOR}; see 'kinpress compressors'",
    )
    group.add_argument(
        "--budget",
        type=float,
        default=600.0,
        metavar="SECONDS",
        help="with -c auto: the run time the choice may aim for; groups: a full matrix "
        "estimated to take longer goes the nearest-neighbour way (default 600)",
    )
    group.add_argument(
        "--conditional",
        choices=(*CONDITIONALS, "auto") if conditional == "auto" else CONDITIONALS,
        default=conditional,
        help="C(x|y) as C(yx)-C(y) (concat) or x compressed primed with y (primed)"
        + ("; auto: primed where the compressor can be" if conditional == "auto" else "")
        + f"; default {conditional}",
    )
    group.add_argument(
        "--split",
        default="auto",
        help="auto (records for sequence files, whole file otherwise), records, file, "
        "lines:N or bytes:N",
    )
    group.add_argument(
        "--strand",
        choices=STRANDS,
        default="one",
        help="both: condition nucleotide sequences on the better of y and its reverse complement",
    )
    group.add_argument("--labels", metavar="FILE", help="TSV of item<TAB>label: known labels")
    _reading_options(group)
    run = parser.add_argument_group("running")
    run.add_argument("--jobs", type=int, metavar="N", help="worker count (default: all cores)")
    run.add_argument(
        "--cluster",
        metavar="ADDRESS",
        help="run on the Dask cluster whose scheduler is at ADDRESS (tcp://host:8786) instead of "
        "this machine's cores; needs the dask extra",
    )
    run.add_argument("--cache", metavar="PATH", help=f"size cache (default {default_cache_path()})")
    run.add_argument("--no-cache", action="store_true", help="compute everything afresh")


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


def _reading_options(group: argparse._ArgumentGroup) -> None:
    """How inputs are read: links below folders, and the size limit of one input."""
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


def _inputs_or_matrix(parser: argparse.ArgumentParser) -> None:
    """Inputs to measure, or a matrix saved by `kinpress matrix`, and the measuring options."""
    parser.add_argument("inputs", nargs="*", metavar="INPUT", help="files, folders, or - (stdin)")
    parser.add_argument("--matrix", metavar="FILE", help="a matrix written by 'kinpress matrix'")
    _matrix_options(parser)


def _nearest_parser(commands: Any) -> None:
    nearest = commands.add_parser(
        "nearest",
        help="each item's k nearest items, without computing every pair",
        description="Find each item's k nearest other items by NCD without the full matrix: "
        "candidates from MinHash sketches of the items' bytes, refined by exploring neighbours "
        "of neighbours, every reported distance measured exactly as 'kinpress matrix' would. "
        "Writes item, rank, neighbour and NCD per line.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress nearest logs/ --split lines:40 -c zstd:level=3 -o nearest.tsv",
            "kinpress nearest share/ --k 5 --json -o nearest.json",
        ),
    )
    nearest.add_argument("inputs", nargs="+", metavar="INPUT", help="files, folders, or - (stdin)")
    _matrix_options(nearest)
    how = nearest.add_argument_group("neighbours")
    how.add_argument("--k", type=int, default=10, metavar="N", help="neighbours per item (10)")
    nout = nearest.add_argument_group("output")
    nout.add_argument("-o", "--output", metavar="FILE", help="write here (default: stdout)")
    nout.add_argument("--json", action="store_true", help="JSON instead of TSV")
    _common(nearest)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="kinpress",
        description="How related are these sequences, logs or files? Measured by compressing them.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress compressors",
            "kinpress matrix genomes/ -o dist.phy",
            "kinpress matrix logs/ --split lines:200 --format json -o dist.json",
        ),
    )
    parser.add_argument("--version", action=_ShowVersion, help="print the version and exit")
    _common(parser)
    parser.set_defaults(quiet=False, debug=False)
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")

    listing = commands.add_parser(
        "compressors",
        help="list the compressors, their settings and limits",
        description="List the compressors: default spec, levels, window or block limit, "
        "whether they can be primed, and the fixed bytes each adds to every size.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples("kinpress compressors", "kinpress compressors --json"),
    )
    listing.add_argument("--json", action="store_true", help="a JSON list of objects")
    _common(listing)

    matrix = commands.add_parser(
        "matrix",
        help="the normalized compression distance between every pair of items",
        description="Compute NCD(x,y) = max(C(x|y), C(y|x)) / max(C(x), C(y)) for every pair of "
        "items (files, sequence records or chunks) and write the matrix.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress matrix genomes/ -c zstd:level=19 -o dist.tsv",
            "kinpress matrix genomes.fasta --split records --format phylip -o dist.phy",
            "kinpress matrix logs/ --split lines:200 --format json -o dist.json",
        ),
    )
    matrix.add_argument("inputs", nargs="+", metavar="INPUT", help="files, folders, or - (stdin)")
    _matrix_options(matrix)
    out = matrix.add_argument_group("output")
    out.add_argument("-o", "--output", metavar="FILE", help="write here (default: stdout)")
    out.add_argument(
        "--plot", metavar="FILE", help="also draw a heatmap in tree order (.png, .svg or .pdf)"
    )
    out.add_argument(
        "--format", choices=MATRIX_FORMATS, help="default: from the file extension, else tsv"
    )
    _common(matrix)

    tree = commands.add_parser(
        "tree",
        help="a tree of the items from their compression distances",
        description="Build a tree (Newick) from the NCD matrix of the inputs, or from a saved "
        "matrix: neighbour joining (default, midpoint-rooted unless --outgroup) or a "
        "hierarchical linkage. A tree from compression distances is a hypothesis to check, "
        "not a phylogeny on its own.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress tree genomes/ --outgroup danio_rerio -o tree.nwk --plot tree.png",
            "kinpress tree --matrix dist.phy --method average -o tree.nwk",
            "kinpress tree genomes/ --bootstrap 100 -o tree.nwk",
        ),
    )
    _inputs_or_matrix(tree)
    shape = tree.add_argument_group("tree")
    shape.add_argument(
        "--method",
        choices=("nj", "average", "complete", "single"),
        default="nj",
        help="nj: neighbour joining (default); average: UPGMA; complete, single: linkage",
    )
    shape.add_argument("--outgroup", metavar="LABELS", help="root on these items (comma list)")
    shape.add_argument(
        "--bootstrap", type=int, default=0, metavar="N", help="support from N block replicates"
    )
    shape.add_argument(
        "--block-fraction",
        type=float,
        default=0.02,
        metavar="F",
        help="bootstrap block size as a fraction of each item (default 0.02)",
    )
    shape.add_argument("--seed", type=int, default=1, help="bootstrap random seed (default 1)")
    tout = tree.add_argument_group("output")
    tout.add_argument("-o", "--output", metavar="FILE", help="write the Newick tree here")
    tout.add_argument("--plot", metavar="FILE", help="draw the tree (.png, .svg or .pdf)")
    tout.add_argument("--json", action="store_true", help="a JSON report on stdout")
    _common(tree)

    groups = commands.add_parser(
        "groups",
        help="flat groups of the items (the number chosen from the data, or --k)",
        description="Group the items by their NCD matrix: density-based groups (HDBSCAN*) with "
        "the count chosen by silhouette, or exactly --k groups, or a --cut distance. Items "
        "that fit no group join their nearest one unless --outliers.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress groups logs/ --split lines:200 -o groups.tsv",
            "kinpress groups logs/ --split lines:200 --k 8 --labels truth.tsv --json",
            "kinpress groups --matrix dist.json --cut 0.8",
        ),
    )
    _inputs_or_matrix(groups)
    how = groups.add_argument_group("groups")
    how.add_argument("--k", type=int, metavar="N", help="exactly N groups")
    how.add_argument("--cut", type=float, metavar="DISTANCE", help="groups joined below DISTANCE")
    how.add_argument(
        "--outliers", action="store_true", help="report outliers as group -1 instead of joining"
    )
    gout = groups.add_argument_group("output")
    gout.add_argument("-o", "--output", metavar="FILE", help="write the TSV here")
    gout.add_argument("--json", action="store_true", help="a JSON report on stdout")
    _common(groups)

    _nearest_parser(commands)

    calibration = commands.add_parser(
        "calibrate",
        help="measure each compressor's bias on controls and recommend one for your data",
        description="Measure each compressor on controls (x against itself, against unrelated "
        "data, against its own shuffled symbols, against mutated copies, and identity across "
        "sizes) made from your inputs when given, and recommend the one to trust.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress calibrate",
            "kinpress calibrate genomes/ --json -o calib.json",
            "kinpress calibrate logs/ -c zlib:level=9 -c zstd:level=19 --plot calib.png",
        ),
    )
    calibration.add_argument("inputs", nargs="*", metavar="INPUT", help="files, folders, or -")
    calibration.add_argument(
        "-c", "--compressor", action="append", metavar="SPEC", help="compressor to calibrate "
        "(repeat; default: a handful of strong and fast ones)"
    )  # fmt: skip
    calibration.add_argument("--split", default="auto", help="how inputs become items, as matrix")
    _reading_options(calibration.add_argument_group("reading"))
    calibration.add_argument("--seed", type=int, default=2005, help="controls' seed (default 2005)")
    calibration.add_argument(
        "--max-bytes", type=int, default=64 << 20, metavar="N",
        help="cap of the size sweep in bytes (default 64 MiB)",
    )  # fmt: skip
    cout = calibration.add_argument_group("output")
    cout.add_argument("-o", "--output", metavar="FILE", help="write the report here")
    cout.add_argument("--json", action="store_true", help="the report as JSON")
    cout.add_argument("--plot", metavar="FILE", help="draw identity vs size and vs mutation")
    _common(calibration)

    origin = commands.add_parser(
        "classify",
        help="name the origin of unknown streams from a reference of known ones",
        description="Classify unknown items by origin against a reference folder with one "
        "subfolder per origin (or a folder and --labels): by how much better each compresses "
        "given an origin's whole reference (conditional, default) or by nearest neighbours "
        "under NCD (knn). Every origin tests every item with a conformal p-value calibrated on "
        "the reference held out in blocks: an item is named when one origin accepts it, "
        "ambiguous when several do, unknown when none does; items of known origins are refused "
        "at a rate of at most --significance while new data drifts no more than the held-out "
        "blocks do. With -c auto the compressor is the one that separates the reference's own "
        "origins best. An origin is evidence to review, not proof.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress classify --reference known/ unknown1.bin unknown2.log --json",
            "kinpress classify --reference known/ --evaluate",
            "kinpress classify --reference chunks/ --labels origins.tsv new.log --split lines:100",
            "kinpress classify --reference known/ new/ --significance 0.01",
        ),
    )
    origin.add_argument("inputs", nargs="*", metavar="INPUT", help="unknown files, folders or -")
    origin.add_argument(
        "--reference",
        required=True,
        metavar="FOLDER",
        help="known/<origin>/<files>, or a folder labelled by --labels",
    )
    _matrix_options(origin, conditional="auto")
    decide = origin.add_argument_group("deciding")
    decide.add_argument("--method", choices=("conditional", "knn"), default="conditional",
                        help="conditional (default) or knn")  # fmt: skip
    decide.add_argument("--k", type=int, default=1, metavar="N", help="neighbours for knn")
    decide.add_argument("--significance", type=float, metavar="RATE",
                        help="refuse an origin when the item's p-value for it is at most RATE: "
                        "the rate at which items of known origins may be refused "
                        "(default 0.05)")  # fmt: skip
    decide.add_argument("--threshold", type=float, metavar="SCORE",
                        help="instead of p-values, accept an origin when the item's score for "
                        "it is at most SCORE (no stated error rate)")  # fmt: skip
    decide.add_argument("--evaluate", action="store_true",
                        help="test the reference on itself, block by block, instead")  # fmt: skip
    oout = origin.add_argument_group("output")
    oout.add_argument("-o", "--output", metavar="FILE", help="write the result here")
    oout.add_argument("--json", action="store_true", help="a JSON list of predictions")
    _common(origin)

    derived = commands.add_parser(
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
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=_examples(
            "kinpress derived exports/ --json -o findings.json",
            "kinpress derived big-share/ --exhaustive",
        ),
    )
    derived.add_argument("inputs", nargs="+", metavar="INPUT", help="files, folders, or - (stdin)")
    _matrix_options(derived)
    judge = derived.add_argument_group("judging")
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
    dout = derived.add_argument_group("output")
    dout.add_argument(
        "--same-source",
        action="store_true",
        help="also list related pairs that share no long stretch (one source, nothing copied)",
    )
    dout.add_argument("-o", "--output", metavar="FILE", help="write the findings here")
    dout.add_argument("--json", action="store_true", help="a JSON list of findings")
    _common(derived)
    return parser


class Console:
    """Progress and messages on stderr, nothing with --quiet. On a terminal progress is a bar;
    elsewhere (a log file, a batch job) a line every LINE_SECONDS while work goes on."""

    LINE_SECONDS = 10.0

    def __init__(self, quiet: bool, stream: TextIO | None = None) -> None:
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.interactive = not quiet and self.stream.isatty()

    def say(self, message: str) -> None:
        if not self.quiet:
            print(f"kinpress: {message}", file=self.stream)

    @contextmanager
    def progress(self) -> Iterator[Progress | None]:
        if self.quiet:
            yield None
        elif not self.interactive:
            yield self._lines()
        else:
            with self._bar() as update:
                yield update

    def _lines(self) -> Progress:
        """A progress callback that writes one line every LINE_SECONDS, the first after that."""
        last = [time.monotonic()]
        started: dict[str, float] = {}

        def update(phase: str, done: int, total: int) -> None:
            now = time.monotonic()
            begun = started.setdefault(phase, now)
            if now - last[0] < self.LINE_SECONDS or not 0 < done < total:
                return
            last[0] = now
            left = (now - begun) * (total - done) / done
            self.say(
                f"{phase}: {done:,} of {total:,} done ({done / total:.0%}), about"
                f" {_duration(left)} left"
            )

        return update

    @contextmanager
    def _bar(self) -> Iterator[Progress]:
        from rich.console import Console as RichConsole
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeRemainingColumn

        bar = Progress(
            "{task.description}",
            BarColumn(),
            MofNCompleteColumn(),
            TimeRemainingColumn(),
            console=RichConsole(file=self.stream),
            transient=True,
        )
        tasks: dict[str, Any] = {}

        def update(phase: str, done: int, total: int) -> None:
            if phase not in tasks:
                tasks[phase] = bar.add_task(phase, total=total)
            bar.update(tasks[phase], completed=done)

        with bar:
            yield update


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


_VALUE_RULES: dict[str, tuple[Callable[[float], bool], str]] = {
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


def _check_values(args: argparse.Namespace) -> None:
    for dest, (allowed, words) in _VALUE_RULES.items():
        value = getattr(args, dest, None)
        if value is not None and not allowed(value):
            raise UsageError(f"--{dest.replace('_', '-')} {value}: give {words}")


def _read_paths(args: argparse.Namespace) -> list[str]:
    """The files and folders this command reads (inputs, reference, labels, a saved matrix)."""
    paths = list(getattr(args, "inputs", None) or [])
    paths += [getattr(args, key, None) for key in ("reference", "labels", "matrix")]
    return [p for p in paths if p and p != "-"]


def _written_paths(args: argparse.Namespace) -> list[tuple[str, str]]:
    """(option, path) of every file this command writes: its output, picture and size cache."""
    written = [("-o", getattr(args, "output", None)), ("--plot", getattr(args, "plot", None))]
    if not getattr(args, "no_cache", True):
        written.append(("--cache", args.cache))
    return [(option, path) for option, path in written if path and path != "-"]


def _check_request(args: argparse.Namespace) -> None:
    """What can be checked before any work: option values, and that nothing written is, or lies
    inside, anything read (an output inside an input folder would be read as an input, or
    overwrite one) and that every output can be written where it is asked to go."""
    _check_values(args)
    read = _read_paths(args)
    for option, path in _written_paths(args):
        real = os.path.realpath(path)
        for source in read:
            origin = os.path.realpath(source)
            if real == origin:
                raise UsageError(f"{option} {path}: is also an input; refusing to overwrite it")
            if os.path.isdir(origin) and os.path.commonpath([origin, real]) == origin:
                raise UsageError(
                    f"{option} {path}: lies inside the input folder {source}, where it would be"
                    " read as an input or overwrite one; write it elsewhere"
                )
        if option != "--cache":
            _check_writable(option, path)


def _check_writable(option: str, path: str) -> None:
    if os.path.exists(path) and not os.path.isfile(path):  # a device or a pipe
        if not os.access(path, os.W_OK):
            raise UsageError(f"{option} {path}: cannot be written")
        return
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise UsageError(f"{option} {path}: folder {folder} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise UsageError(f"{option} {path}: folder {folder} is not writable")


def _input_options(args: argparse.Namespace) -> dict[str, Any]:
    """How inputs are read: links below folders, and the most bytes one input may hold."""
    return {"follow_links": args.follow_links, "max_file_bytes": args.max_file_size}


def _load(args: argparse.Namespace) -> list[Item]:
    return load_items(args.inputs, args.split, args.labels, **_input_options(args))


@contextmanager
def _opened_cache(args: argparse.Namespace) -> Iterator[SizeCache | None]:
    """The size cache the command line names (None with --no-cache), closed afterwards."""
    if args.no_cache:
        yield None
        return
    cache = SizeCache(args.cache or default_cache_path())
    try:
        yield cache
    finally:
        cache.close()


@contextmanager
def _opened_engine(args: argparse.Namespace) -> Iterator[Engine]:
    """This machine's cores (--jobs) or a Dask cluster (--cluster), closed afterwards."""
    jobs, cluster = getattr(args, "jobs", None), getattr(args, "cluster", None)
    if jobs is not None and jobs < 1:
        raise UsageError(f"--jobs {jobs}: the worker count must be at least 1")
    if cluster is None:
        yield LocalEngine(jobs)
        return
    if jobs is not None:
        raise UsageError("--jobs counts this machine's workers; a --cluster brings its own")
    with DaskEngine(cluster) as engine:
        yield engine


@contextmanager
def _as_usage_errors() -> Iterator[None]:
    """Library ValueErrors about the user's request become usage errors (exit 2, one line)."""
    try:
        yield
    except (InputError, SpecError):
        raise
    except ValueError as error:
        raise UsageError(str(error)) from None


Check = Callable[[Sequence[str]], None]
"""Checks a command makes on the item names before any work (an outgroup, a group count)."""


def compute_matrix(
    args: argparse.Namespace,
    console: Console,
    check: Check | None = None,
    items: list[Item] | None = None,
) -> tuple[DistanceMatrix, list[Item]]:
    """Load the inputs (unless `items` are given) and compute their matrix as the command line
    asks, reporting on stderr; `check` sees the item names before anything is computed."""
    if items is None:
        items = _load(args)
        if check is not None:
            check([item.name for item in items])
    check_matrix_memory(items)
    comp = compressor(resolve_compressor(args, items, console))
    with _opened_cache(args) as cache, console.progress() as progress:
        dm = distance_matrix(
            items,
            comp,
            conditional=args.conditional,
            strand=args.strand,
            engine=args.engine,
            cache=cache,
            progress=progress,
        )
    console.say(summary(dm, args.engine))
    return dm, items


def resolve_compressor(
    args: argparse.Namespace,
    items: Sequence[Item],
    console: Console,
    targets: Sequence[Item] = (),
) -> str:
    """The spec to use: as given, or with auto the one calibration.choose_for_job picks for this
    command's job (classify: `items` is the labelled reference, `targets` the unknowns).

    The choice is kept in the cache, keyed by the items' contents, the job, the candidates (with
    their library versions), the seed, the budget and the cores, so a rerun does not calibrate
    again.
    """
    if args.compressor != "auto":
        return str(args.compressor)
    from .calibration import (
        DEFAULT_CANDIDATES,
        DEFAULT_SEED,
        LABELLED_CANDIDATES,
        LABELLED_JOBS,
        choose_for_job,
        holds,
    )
    from .measure import content_digest

    job = args.command
    labelled = job in LABELLED_JOBS
    cores = args.engine.jobs  # where the job will run: this machine's cores or the cluster's
    key = (
        "auto:"
        + hashlib.blake2b(
            "\n".join(
                [
                    *sorted(
                        content_digest(item.data).hex() + (f"\t{item.label}" if labelled else "")
                        for item in items
                    ),
                    *(
                        compressor(spec).cache_key
                        for spec in (LABELLED_CANDIDATES if labelled else DEFAULT_CANDIDATES)
                    ),
                    f"seed={DEFAULT_SEED} budget={args.budget} cores={cores} strand={args.strand}",
                    f"job={job} targets={len(targets)}:{sum(len(t.data) for t in targets)}"
                    " ranked=merit"
                    if labelled
                    else "job=unlabelled",
                ]
            ).encode(),
            digest_size=16,
        ).hexdigest()
    )
    with _opened_cache(args) as cache:
        stored = cache.get_choice(key) if cache is not None else None
        if stored is None:
            console.say(f"auto: calibrating the compressors on these inputs for {job} ...")
            choice = choose_for_job(
                items, job, targets=targets, budget_seconds=args.budget,
                strand=args.strand, engine=args.engine, cache=cache,
            )  # fmt: skip
            pair = int(sum(sorted((len(item.data) for item in items), reverse=True)[:2]))
            result = choice.report.result(choice.spec)
            stored = json.dumps(
                {
                    "spec": choice.spec,
                    "why": choice.reasons[0]
                    if labelled or " chosen over " in choice.reasons[0]
                    else choice.reasons[-1],
                    "holds": labelled or holds(result, pair),
                    "reliable": result.reliable_up_to_bytes,
                    "pair": pair,
                }
            )
            if cache is not None:
                cache.put_choice(key, stored)
        else:
            console.say("auto: the choice for these inputs is in the cache")
    choice_json = json.loads(stored)
    console.say(f"auto: chose {choice_json['spec']}: {choice_json['why']}")
    if not choice_json["holds"]:
        warnings.warn(
            f"{choice_json['spec']}: reliable up to {choice_json['reliable']:,} bytes, below the"
            f" largest pair of items ({choice_json['pair']:,} bytes); their distances drift"
            " towards 1",
            MeasurementWarning,
            stacklevel=2,
        )
    args.compressor = choice_json["spec"]
    return str(choice_json["spec"])


def matrix_for(
    args: argparse.Namespace, console: Console, check: Check | None = None
) -> tuple[DistanceMatrix, list[Item]]:
    """The matrix a command works on: read with --matrix FILE, else computed from the inputs;
    `check` sees the item names first."""
    if args.matrix:
        if args.inputs:
            raise UsageError("give inputs or --matrix FILE, not both")
        dm = read_matrix(args.matrix)
        if check is not None:
            check(dm.labels)
        if args.labels:
            known = read_labels(args.labels)
            dm = dataclasses.replace(dm, classes=tuple(known.get(n) for n in dm.labels))
        return dm, []
    if not args.inputs:
        raise UsageError("give inputs to compare, or --matrix FILE")
    return compute_matrix(args, console, check)


def summary(dm: DistanceMatrix, engine: Engine | None = None) -> str:
    """The one-line account of a run: what was computed, what came from the cache, how fast."""
    s = dm.stats
    mb = s.bytes_compressed / 1e6
    rate = f" ({mb / s.seconds:.1f} MB/s)" if s.seconds > 0 and mb > 0 else ""
    extra = []
    if s.clipped_below_zero:
        extra.append(f"{s.clipped_below_zero} negative distances clipped to 0")
    if s.identical_items:
        extra.append(f"{s.identical_items} items identical to another")
    if isinstance(engine, DaskEngine) and s.pairs_computed + s.singles_computed:
        extra.append(f"on the Dask cluster at {engine.address} ({engine.jobs} worker threads)")
    tail = "; " + "; ".join(extra) if extra else ""
    how = dm.conditional + (", both strands" if dm.strand == "both" else "")
    return (
        f"{len(dm)} items, {dm.compressor} ({how}): {s.pairs_computed} pairs computed, "
        f"{s.pairs_from_cache} from cache; {mb:.1f} MB compressed in {s.seconds:.1f} s{rate}{tail}"
    )


def run_compressors(args: argparse.Namespace, console: Console) -> int:
    rows = [describe(cls()) for cls in ADAPTERS.values()]
    if args.json:
        print(json_text([row.as_json() for row in rows]), end="")
        return 0
    header = ("name", "default spec", "levels", "window/block", "primed", "overhead")
    table = [header] + [
        (
            r.name,
            r.spec,
            f"{r.levels[0]}-{r.levels[1]}",
            _human(r.window_bytes),
            "yes" if r.primed else "no",
            f"{r.overhead_bytes} B",
        )
        for r in rows
    ]
    widths = [max(len(row[k]) for row in table) for k in range(len(header))]
    for row in table:
        print("  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip())
    print()
    for r in rows:
        keys = ", ".join(f"{p.name} {p.low}-{p.high}" for p in r.keys)
        print(f"{r.name}: {r.summary}. Keys: {keys}. Limit: {r.window_source}.")
    return 0


def _check_plot(path: str | None) -> None:
    """Refuse a picture name we cannot write before any work is done."""
    if path:
        from .plots import figure_format

        try:
            figure_format(path)
        except ValueError as error:
            raise UsageError(f"--plot {path}: {error}") from None


def run_matrix(args: argparse.Namespace, console: Console) -> int:
    fmt = format_for(args.output, args.format)
    _check_plot(args.plot)
    dm, _ = compute_matrix(args, console)
    write_matrix(dm, args.output, fmt)
    if args.plot:
        from .plots import plot_heatmap
        from .trees import build_tree, leaf_order

        # Average-linkage leaf order puts near items side by side, so groups show as blocks.
        order = leaf_order(build_tree(dm.labels, dm.distances, method="average"))
        plot_heatmap(dm, args.plot, order=order)
    return 0


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


def run_tree(args: argparse.Namespace, console: Console) -> int:
    from .support import bootstrap_support
    from .trees import build_tree, fit_correlation, outgroup_root, to_newick

    if args.bootstrap and args.matrix:
        raise UsageError("--bootstrap resamples the items, so it needs inputs, not --matrix")
    _check_plot(args.plot)

    def check(labels: Sequence[str]) -> None:
        _outgroup(args.outgroup, labels)

    dm, items = matrix_for(args, console, check=check)
    outgroup = _outgroup(args.outgroup, dm.labels)
    with _as_usage_errors():
        tree = build_tree(dm.labels, dm.distances, method=args.method, outgroup=outgroup)
        if args.bootstrap:
            with console.progress() as progress:
                tree = bootstrap_support(
                    tree,
                    items,
                    compressor(dm.compressor),
                    replicates=args.bootstrap,
                    block_fraction=args.block_fraction,
                    seed=args.seed,
                    method=args.method,
                    conditional=args.conditional,
                    strand=args.strand,
                    engine=args.engine,
                    progress=None if progress is None else partial(progress, "replicates"),
                )
    if outgroup is not None and args.bootstrap:
        tree = outgroup_root(tree, outgroup)
    fit = fit_correlation(tree, dm.labels, dm.distances)
    rooting = (
        f"on {', '.join(outgroup)}"
        if outgroup
        else "at the midpoint"
        if args.method == "nj"
        else "by construction"
    )
    console.say(
        f"tree: {args.method}, {len(dm)} leaves, rooted {rooting}; fit: path lengths correlate"
        f" with distances at r = {fit:.3f}"
    )
    newick = to_newick(tree) + "\n"
    if args.output:
        emit(newick, args.output)
    if args.plot:
        from .plots import plot_tree

        plot_tree(tree, args.plot, classes=_classes(dm), scale_label="NCD")
    if args.json:
        report = {
            "newick": newick.strip(),
            "method": args.method,
            "rooting": rooting,
            "outgroup": outgroup,
            "leaves": len(dm),
            "fit": round(fit, 6),
            "bootstrap": None
            if not args.bootstrap
            else {
                "replicates": args.bootstrap,
                "block_fraction": args.block_fraction,
                "seed": args.seed,
            },
            "compressor": dm.compressor,
            "conditional": dm.conditional,
            "strand": dm.strand,
        }
        emit(json_text(report), None)
    elif not args.output:
        emit(newick, None)
    return 0


def _sparse_grouping(
    args: argparse.Namespace, console: Console, check: Check
) -> tuple[_Grouped, Any] | None:
    """Groups from nearest neighbours when the full matrix of the inputs would not fit in memory
    or in --budget seconds (said on stderr), else None: the matrix route (the loaded items are
    left in args.loaded_items)."""
    from .distance import estimate_matrix_seconds
    from .neighbours import SAMPLE_ITEMS, sparse_groups

    if args.matrix or not args.inputs:
        return None
    items = _load(args)
    check([item.name for item in items])
    try:
        check_matrix_memory(items)
        reason = None
    except TooLarge as error:
        reason = str(error).split(":", 1)[0]
    spec = resolve_compressor(args, items, console)
    if reason is None:
        seconds = estimate_matrix_seconds(items, spec, args.engine.jobs)
        if seconds <= args.budget:
            args.loaded_items = items
            return None
        reason = (
            f"a full matrix of {len(items):,} items would take about {_duration(seconds)},"
            f" over the --budget of {_duration(args.budget)}"
        )
    console.say(
        f"groups: {reason}; grouping from each item's 10 nearest neighbours instead"
        f" (HDBSCAN* on their graph, silhouettes on"
        f" {min(SAMPLE_ITEMS, max(2, len(items) // 4))} sampled items)"
    )
    with _as_usage_errors(), _opened_cache(args) as cache, console.progress() as progress:
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


@dataclasses.dataclass(frozen=True)
class _Grouped:
    """What the groups report says of the items grouped, whichever route grouped them."""

    labels: tuple[str, ...]
    classes: tuple[str | None, ...] | None
    compressor: str
    conditional: str


def run_groups(args: argparse.Namespace, console: Console) -> int:
    from .groups import agreement, find_groups

    if args.k is not None and args.cut is not None:
        raise UsageError("give --k or --cut, not both")

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
        with _as_usage_errors():
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
    table = "\n".join(rows) + "\n"
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
    if args.output:
        emit(table, args.output)
    if args.json:
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
        emit(json_text(report), None)
    elif not args.output:
        emit(table, None)
    return 0


def run_nearest(args: argparse.Namespace, console: Console) -> int:
    from .neighbours import nearest_neighbours

    items = _load(args)
    spec = resolve_compressor(args, items, console)
    with _as_usage_errors(), _opened_cache(args) as cache, console.progress() as progress:
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
        emit(json_text(found.as_json()), args.output)
        return 0
    header = ["item\trank\tneighbour\tncd\n"]
    rows = (f"{escape_name(a)}\t{r}\t{escape_name(b)}\t{d:.6f}\n" for a, r, b, d in found.rows())
    emit(itertools.chain(header, rows), args.output)
    return 0


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


def run_calibrate(args: argparse.Namespace, console: Console) -> int:
    from .calibration import DEFAULT_CANDIDATES, calibrate

    _check_plot(args.plot)
    items = load_items(args.inputs, args.split, **_input_options(args)) if args.inputs else None
    candidates = args.compressor or list(DEFAULT_CANDIDATES)
    for spec in candidates:
        compressor(spec)  # a bad spec fails before any work
    report = calibrate(items, candidates, seed=args.seed, max_bytes=args.max_bytes)
    if args.json:
        emit(json_text(report.as_json()), args.output)
    else:
        emit(_calibration_text(report), args.output)
    if args.plot:
        from .plots import plot_calibration

        plot_calibration(report, args.plot)
    return 0


def _calibration_text(report: Any) -> str:
    header = ("compressor", "identity", "independent", "shuffle", "monotone", "resolves",
              "related", "reliable to", "MB/s")  # fmt: skip
    rows = [header]
    for r in report.compressors:
        rows.append(
            (
                r.spec,
                f"{r.identity_bias:.3f}",
                f"{r.independence:.3f}",
                f"{r.shuffle_similarity:.3f}",
                f"{r.mutation_monotonicity:.2f}",
                "-" if r.mutation_resolution is None else f"{r.mutation_resolution:.0%}",
                f"{r.mutation_distance:.3f}",
                ("≥" if r.reliable_capped else "") + _human(r.reliable_up_to_bytes),
                f"{r.throughput_mb_s:.3g}",
            )
        )
    widths = [max(len(row[k]) for row in rows) for k in range(len(header))]
    lines = [
        "  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip() for row in rows
    ]
    lines += ["", f"recommended: {report.recommended}", *(f"  {r}" for r in report.reasons)]
    lines += [
        "",
        "identity: mean NCD(x,x), ideal 0; independent: NCD of unrelated data, ideal 1; shuffle:"
        " 1 - NCD(x, shuffled x), ideal 0; monotone: rank correlation of distance with mutation"
        f" rate, ideal 1; resolves: smallest mutation rate told from identity; related: mean NCD to"
        f" copies with 1-10 % substituted, lower finds more shared content (seed {report.seed})",
    ]
    return "\n".join(lines) + "\n"


def run_classify(args: argparse.Namespace, console: Console) -> int:
    from .origins import classify, evaluate, reference_items

    if args.significance is not None and args.threshold is not None:
        raise UsageError("give --significance or --threshold, not both")
    if args.labels:
        reference = load_items([args.reference], args.split, args.labels, **_input_options(args))
        missing = [i.name for i in reference if i.label is None]
        if missing:
            raise UsageError(f"{args.labels}: no label for reference item {missing[0]}")
    else:
        reference = reference_items(args.reference, args.split, **_input_options(args))
    if not args.evaluate and not args.inputs:
        raise UsageError("give unknown inputs to classify, or --evaluate")
    unknowns = [] if args.evaluate else load_items(args.inputs, args.split, **_input_options(args))
    spec = resolve_compressor(args, reference, console, targets=unknowns)
    options: dict[str, Any] = {
        "method": args.method,
        "significance": args.significance,
        "threshold": args.threshold,
        "conditional": args.conditional,
        "engine": args.engine,
    }
    with _as_usage_errors(), _opened_cache(args) as cache, console.progress() as progress:
        if args.evaluate:
            result = evaluate(reference, spec, cache=cache, progress=progress, **options)
        else:
            found = classify(unknowns, reference, spec, k=args.k, cache=cache,
                             progress=progress, **options)  # fmt: skip
    if args.evaluate:
        emit(_evaluation_text(result) if not args.json else json_text(result.as_json()),
             args.output)  # fmt: skip
        return 0
    counts = found.counts()
    console.say(
        f"classify: {found.method} with {found.compressor}; {counts['named']} named,"
        f" {counts['ambiguous']} ambiguous, {counts['unknown']} unknown; "
        + found.abstention.guarantee
    )
    if args.json:
        emit(json_text(found.as_json()), args.output)
    else:
        rows = [("item", "origin", "p-value", "confidence", "nearest", "distance")]
        for p in found.predictions:
            origin = p.predicted or p.decision
            if p.decision == "ambiguous":
                origin += f" ({' or '.join(p.candidates)})"
            credibility = "-" if p.credibility is None else f"{p.credibility:.3f}"
            rows.append((escape_name(p.item), escape_name(origin), credibility,
                         f"{p.confidence:.3f}", escape_name(p.nearest or "-"),
                         f"{p.distance:.3f}"))  # fmt: skip
        lines = [
            _table(rows).rstrip("\n"),
            "",
            f"p-value: of the {found.abstention.test} test for the best origin (below"
            f" {found.abstention.significance} it does not accept the item: fit, how typical the"
            " item is of that origin's own held-out items; separation, how much better it explains"
            " the item than the next origin does, against its own items); confidence: the"
            " runner-up's score minus the best one (scores: C(x | origin) / C(x), lower is"
            " better).",
            f"Abstention: {found.abstention.guarantee}.",
            ORIGIN_CAUTION,
        ]
        emit("\n".join(lines) + "\n", args.output)
    return 0


ORIGIN_CAUTION = (
    "An origin is evidence for a person to review, not proof of where an item came from."
)


def _table(rows: Sequence[Sequence[str]]) -> str:
    widths = [max(len(row[k]) for row in rows) for k in range(len(rows[0]))]
    return (
        "\n".join(
            "  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip()
            for row in rows
        )
        + "\n"
    )


def _evaluation_text(result: Any) -> str:
    missing = ", ".join(
        f"{o} {r:.0%}" for o, r in zip(result.origins, result.left_out_unknown, strict=True)
    )
    head = [
        f"held-out blocks of the reference ({result.abstention.blocks} per origin):"
        f" named right {result.accuracy:.3f}, refused {result.refusal_rate:.3f},"
        f" ambiguous {result.ambiguous_rate:.3f}",
        f"each origin missing from the reference in turn: its items refused"
        f" {result.left_out_unknown_rate:.3f} ({missing})",
        f"abstention: {result.abstention.guarantee}",
        "",
    ]
    rows = [("true \\ predicted", *result.origins, "ambiguous", "unknown")]
    rows += [(o, *(str(int(c)) for c in row)) for o, row in zip(
        result.origins, result.confusion, strict=True)]  # fmt: skip
    return "\n".join(head) + "\n" + _table(rows)


def run_derived(args: argparse.Namespace, console: Console) -> int:
    from .derived import families, find_derived

    items = _load(args)
    spec = resolve_compressor(args, items, console)
    with _as_usage_errors(), _opened_cache(args) as cache, console.progress() as progress:
        report = find_derived(
            items,
            spec,
            exhaustive=args.exhaustive,
            max_fpr=args.max_fpr,
            seed=args.seed,
            engine=args.engine,
            cache=cache,
            progress=progress,
        )
    c = report.counts
    console.say(
        f"derived: {len(report.findings)} findings among {c.possible} pairs; {c.candidates}"
        f" candidates checked, {c.pruned} pruned by the prefilter"
        + (" (exhaustive)" if report.exhaustive else "")
        + f"; related where the false-positive rate is at most {report.max_fpr:g}"
    )
    kin = len(report.same_source)
    if kin:
        pairs = "pair shares" if kin == 1 else "pairs share"
        console.say(
            f"derived: {kin} more related {pairs} no long stretch in order: files of one"
            " source, nothing copied" + ("" if args.same_source else " (--same-source lists them)")
        )
    shown = report.findings + (report.same_source if args.same_source else ())
    if args.json:
        emit(json_text([f.as_json() for f in shown]), args.output)
        return 0
    lines = []
    for number, family in enumerate(families(report.findings), start=1):
        lines.append(f"family {number}: {', '.join(map(escape_name, family.members))}")
        lines += [f"  {line}" for f in family.findings for line in _finding_lines(f)]
    if args.same_source and report.same_source:
        lines += ["", "same source, nothing copied:"]
        lines += [f"  {line}" for f in report.same_source for line in _finding_lines(f)]
    if not lines:
        lines.append("no derived pairs found")
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


DERIVED_CAUTION = (
    "A finding is evidence for a person to review, not proof of copying: files can share content"
    " through common templates, licences, generated code or a common source."
)


def _classes(dm: DistanceMatrix) -> dict[str, str] | None:
    if dm.classes is None:
        return None
    return {n: c for n, c in zip(dm.labels, dm.classes, strict=True) if c is not None}


COMMANDS: dict[str, Callable[[argparse.Namespace, Console], int]] = {
    "compressors": run_compressors,
    "matrix": run_matrix,
    "tree": run_tree,
    "groups": run_groups,
    "nearest": run_nearest,
    "calibrate": run_calibrate,
    "classify": run_classify,
    "derived": run_derived,
}


def _show_warning(
    message: Warning | str,
    category: type[Warning],
    filename: str,
    lineno: int,
    file: TextIO | None = None,
    line: str | None = None,
) -> None:
    print(f"kinpress: warning: {message}", file=sys.stderr)


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    console = Console(args.quiet)
    warnings.showwarning = _show_warning
    try:
        _check_request(args)
        with _opened_engine(args) as args.engine:
            return COMMANDS[args.command](args, console)
    except (InputError, SpecError, UsageError, CacheError) as error:
        if args.debug:
            raise
        print(f"kinpress: error: {error}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # The reader went away (| head): stop quietly, without a second error at exit.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except KeyboardInterrupt:
        print(
            "kinpress: interrupted; finished tiles are in the cache, rerun to resume",
            file=sys.stderr,
        )
        return 130
    except (ClusterError, TooLarge) as error:
        if args.debug:
            raise
        print(f"kinpress: error: {error}", file=sys.stderr)
        return 1
    except OSError as error:
        if args.debug:
            raise
        print(
            f"kinpress: error: {error.filename or ''}: {error.strerror or error}", file=sys.stderr
        )
        return 1
    except Exception as error:
        if args.debug:
            raise
        print(
            f"kinpress: internal error: {type(error).__name__}: {error} "
            "(run again with --debug for the traceback)",
            file=sys.stderr,
        )
        return 1


if __name__ == "__main__":
    sys.exit(main())

"""The kinpress command line: parse arguments, call the library, print. Nothing else."""

from __future__ import annotations

import argparse
import json
import os
import sys
import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any, TextIO

from . import __version__
from .cache import SizeCache, default_cache_path
from .compressors import ADAPTERS, SpecError, compressor, describe
from .distance import CONDITIONALS, STRANDS, DistanceMatrix, Progress, distance_matrix
from .engine import LocalEngine
from .formats import MATRIX_FORMATS, format_for, write_matrix
from .items import InputError, Item, load_items

DEFAULT_COMPRESSOR = "zstd:level=19"


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


def _examples(*lines: str) -> str:
    return "examples:\n" + "\n".join(f"  {line}" for line in lines)


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--quiet", action="store_true", help="no progress bar or summary")
    parser.add_argument("--debug", action="store_true", help="show a traceback on errors")


def _matrix_options(parser: argparse.ArgumentParser) -> None:
    """Options of every command that computes a distance matrix from inputs."""
    group = parser.add_argument_group("measuring")
    group.add_argument(
        "-c",
        "--compressor",
        default=DEFAULT_COMPRESSOR,
        metavar="SPEC",
        help=f"NAME[:key=value,...] (default {DEFAULT_COMPRESSOR}); see 'kinpress compressors'",
    )
    group.add_argument(
        "--conditional",
        choices=CONDITIONALS,
        default="concat",
        help="C(x|y) as C(yx)-C(y) (concat, default) or x compressed primed with y (primed)",
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
    run = parser.add_argument_group("running")
    run.add_argument("--jobs", type=int, metavar="N", help="worker count (default: all cores)")
    run.add_argument("--cache", metavar="PATH", help=f"size cache (default {default_cache_path()})")
    run.add_argument("--no-cache", action="store_true", help="compute everything afresh")


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
    parser.add_argument("--version", action="version", version=f"kinpress {__version__}")
    _common(parser)
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
        "--format", choices=MATRIX_FORMATS, help="default: from the file extension, else tsv"
    )
    _common(matrix)
    return parser


class Console:
    """Progress and messages on stderr; quiet when asked or when stderr is not a terminal."""

    def __init__(self, quiet: bool, stream: TextIO | None = None) -> None:
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.interactive = not quiet and self.stream.isatty()

    def say(self, message: str) -> None:
        if not self.quiet:
            print(f"kinpress: {message}", file=self.stream)

    @contextmanager
    def progress(self) -> Iterator[Progress | None]:
        if not self.interactive:
            yield None
            return
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


def _load(args: argparse.Namespace) -> list[Item]:
    inputs = list(args.inputs)
    output = getattr(args, "output", None)
    if output and output != "-":
        real = os.path.realpath(output)
        if any(os.path.isfile(p) and os.path.realpath(p) == real for p in inputs):
            raise UsageError(f"{output}: is also an input; refusing to overwrite it")
    return load_items(inputs, args.split, args.labels, exclude=[output] if output else [])


def _cache(args: argparse.Namespace) -> SizeCache | None:
    if args.no_cache:
        return None
    return SizeCache(args.cache or default_cache_path())


def compute_matrix(args: argparse.Namespace, console: Console) -> DistanceMatrix:
    """Load the inputs and compute their matrix as the command line asks, reporting on stderr."""
    items = _load(args)
    comp = compressor(args.compressor)
    cache = _cache(args)
    try:
        with console.progress() as progress:
            dm = distance_matrix(
                items,
                comp,
                conditional=args.conditional,
                strand=args.strand,
                engine=LocalEngine(args.jobs),
                cache=cache,
                progress=progress,
            )
    finally:
        if cache is not None:
            cache.close()
    console.say(summary(dm))
    return dm


def summary(dm: DistanceMatrix) -> str:
    """The one-line account of a run: what was computed, what came from the cache, how fast."""
    s = dm.stats
    mb = s.bytes_compressed / 1e6
    rate = f" ({mb / s.seconds:.1f} MB/s)" if s.seconds > 0 and mb > 0 else ""
    extra = []
    if s.clipped_below_zero:
        extra.append(f"{s.clipped_below_zero} negative distances clipped to 0")
    if s.identical_items:
        extra.append(f"{s.identical_items} items identical to another")
    tail = "; " + "; ".join(extra) if extra else ""
    how = dm.conditional + (", both strands" if dm.strand == "both" else "")
    return (
        f"{len(dm)} items, {dm.compressor} ({how}): {s.pairs_computed} pairs computed, "
        f"{s.pairs_from_cache} from cache; {mb:.1f} MB compressed in {s.seconds:.1f} s{rate}{tail}"
    )


def run_compressors(args: argparse.Namespace, console: Console) -> int:
    rows = [describe(cls()) for cls in ADAPTERS.values()]
    if args.json:
        keys = ("name", "spec", "levels", "window_bytes", "primed", "overhead_bytes")
        print(json.dumps([{k: row[k] for k in keys} for row in rows], indent=1))
        return 0
    header = ("name", "default spec", "levels", "window/block", "primed", "overhead")
    table = [header] + [
        (
            str(r["name"]),
            str(r["spec"]),
            "{}-{}".format(*r["levels"]),  # type: ignore[str-format]
            _human(r["window_bytes"]),  # type: ignore[arg-type]
            "yes" if r["primed"] else "no",
            f"{r['overhead_bytes']} B",
        )
        for r in rows
    ]
    widths = [max(len(row[k]) for row in table) for k in range(len(header))]
    for row in table:
        print("  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip())
    print()
    for r in rows:
        keys = ", ".join(f"{k} {v['range'][0]}-{v['range'][1]}" for k, v in r["keys"].items())  # type: ignore[attr-defined]
        print(f"{r['name']}: {r['summary']}. Keys: {keys}. Limit: {r['window_source']}.")
    return 0


def run_matrix(args: argparse.Namespace, console: Console) -> int:
    fmt = format_for(args.output, args.format)
    dm = compute_matrix(args, console)
    write_matrix(dm, args.output, fmt)
    return 0


COMMANDS: dict[str, Callable[[argparse.Namespace, Console], int]] = {
    "compressors": run_compressors,
    "matrix": run_matrix,
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
        return COMMANDS[args.command](args, console)
    except (InputError, SpecError, UsageError) as error:
        if args.debug:
            raise
        print(f"kinpress: error: {error}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # The reader went away (| head): stop quietly, without a second error at exit.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except KeyboardInterrupt:
        print("kinpress: interrupted; finished tiles are in the cache, rerun to resume",
              file=sys.stderr)
        return 130
    except OSError as error:
        if args.debug:
            raise
        print(f"kinpress: error: {error.filename or ''}: {error.strerror or error}",
              file=sys.stderr)
        return 1
    except Exception as error:
        if args.debug:
            raise
        print(f"kinpress: internal error: {type(error).__name__}: {error} "
              "(run again with --debug for the traceback)", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())

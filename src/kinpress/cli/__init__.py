"""The kinpress command line: parse arguments, call the library, print. Nothing else.

One module per command (add_parser declares its options, run carries it out), the option
builders shared by them in _options, and here the registry, main and the exit codes: 0 done,
1 failed while working, 2 a command line that cannot be carried out, 130 interrupted.
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from collections.abc import Sequence
from types import ModuleType
from typing import TextIO

from ..cache import CacheError
from ..compressors import SpecError
from ..distance import TooLarge
from ..engine import ClusterError
from ..items import InputError
from . import calibrate, classify, compressors, derived, groups, matrix, nearest, report, tree
from ._common import check_paths, opened_engine
from ._console import Console
from ._options import UsageError, byte_size, check_values, common, examples

__all__ = ["COMMANDS", "Console", "UsageError", "build_parser", "byte_size", "main"]

COMMANDS: dict[str, ModuleType] = {
    "compressors": compressors,
    "matrix": matrix,
    "tree": tree,
    "groups": groups,
    "nearest": nearest,
    "calibrate": calibrate,
    "classify": classify,
    "derived": derived,
    "report": report,
}
"""Each command's name and its module, in the order --help lists them."""


class _ShowVersion(argparse.Action):
    """--version, looking the version up only when asked (importlib.metadata is slow to load)."""

    def __init__(self, option_strings: Sequence[str], dest: str, help: str | None = None) -> None:
        super().__init__(option_strings, dest, nargs=0, help=help)

    def __call__(self, parser: argparse.ArgumentParser, *args: object) -> None:
        from .. import __version__

        parser.exit(message=f"kinpress {__version__}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="kinpress",
        description="How related are these sequences, logs or files? Measured by compressing them.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=examples(
            "kinpress compressors",
            "kinpress matrix genomes/ -o dist.phy",
            "kinpress matrix logs/ --split lines:200 --format json -o dist.json",
        ),
    )
    parser.add_argument("--version", action=_ShowVersion, help="print the version and exit")
    common(parser)
    parser.set_defaults(quiet=False, debug=False)
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in COMMANDS.values():
        module.add_parser(subparsers)
    return parser


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
    args, unknown = parser.parse_known_args(argv)
    if unknown:
        # The command's own usage, which lists the options it does take.
        (getattr(args, "command_parser", None) or parser).error(
            f"unrecognized arguments: {' '.join(unknown)}"
        )
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    console = Console(args.quiet)
    warnings.showwarning = _show_warning
    try:
        check_values(args)
        check_paths(args)
        with opened_engine(args) as args.engine:
            return int(COMMANDS[args.command].run(args, console))
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

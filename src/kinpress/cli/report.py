"""kinpress report: one self-contained HTML page of a comparison (or its data as JSON)."""

from __future__ import annotations

import argparse
import shlex
import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any, TypeVar

from ..formats import emit
from ..items import InputWarning, Item, Labels, escape_name, load_items, reference_items
from . import _options
from ._common import (
    as_usage_errors,
    compute_matrix,
    input_options,
    known_labels,
    opened_cache,
    resolve_choice,
    warn_unlabelled,
    write_json,
)
from ._console import Console
from ._options import UsageError, budget_seconds
from .tree import _outgroup

if TYPE_CHECKING:
    from ..calibration import CalibrationReport

T = TypeVar("T")


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "report",
        help="one self-contained HTML page of a comparison",
        description="Compare the inputs and write one HTML page that opens offline in any "
        "browser: what was compared and left out, the compressor and why, the distance matrix "
        "in tree order beside the tree, the groups with their medoids, a map of the items, "
        "each item's nearest items, and with --derived the copied files, with --reference the "
        "origin of each input. Similarity is evidence to review, not proof.",
        example=[
            "kinpress report genomes/ --strand both -o report.html",
            "kinpress report logs/ --split lines:100 -o logs.html",
            "kinpress report share/ --derived --passages -o share.html",
            "kinpress report --reference known/ unknown/ -o origins.html",
        ],
    )
    _options.inputs(parser, nargs="*")
    parser.add_argument(
        "--reference",
        metavar="FOLDER",
        help="known/<origin>/<files>: classify the inputs by origin (they and the reference "
        "items are compared together)",
    )
    _options.measuring(parser)
    what = parser.add_argument_group("report")
    what.add_argument("--title", help="the page's title (default: kinpress report)")
    _options.tree_shape(what)
    what.add_argument("--k", type=int, metavar="N", help="exactly N groups (default: chosen)")
    what.add_argument(
        "--neighbours", type=int, default=5, metavar="N", help="nearest items listed per item"
    )
    what.add_argument("--derived", action="store_true", help="add copied and derived files")
    what.add_argument(
        "--passages",
        action="store_true",
        help="with --derived, show each finding's longest shared passage side by side",
    )
    what.add_argument(
        "--seed",
        type=int,
        default=1,
        help="seed of the bootstrap and of --derived's null and sketches (default 1)",
    )
    _options.abstention(parser.add_argument_group("origins (with --reference)"))
    _options.output(parser, "the HTML page", "the report's data as JSON instead of the page")


def rerun_command(args: argparse.Namespace, spec: str | None = None) -> str:
    """The command line that makes this report again: the inputs and every option given, with
    `spec` (what ``-c auto`` chose) named in place of auto, so that a rerun measures the same
    way on any machine (the choice weighs the cores and the budget)."""
    parser: argparse.ArgumentParser = args.command_parser
    words = ["kinpress", "report"]
    named = spec is not None and args.compressor == "auto"
    for action in parser._actions:
        if not action.option_strings or action.dest in ("help", "quiet", "debug"):
            continue
        if named and action.dest == "budget":
            continue  # a budget only weighs the choice, which the command now names
        value = getattr(args, action.dest)
        if named and action.dest == "compressor":
            words += [action.option_strings[-1], str(spec)]
            continue
        if not _options.given(args, action.dest):
            continue
        if action.nargs == 0:
            words.append(action.option_strings[-1])
        else:
            words += [action.option_strings[-1], str(value)]
    return shlex.join([*words, *args.inputs])


@contextmanager
def _recorded(kept: list[str], kind: type[Warning] = Warning) -> Iterator[None]:
    """Warnings of `kind` raised inside kept as text, and all of them shown as usual after."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for w in caught:
        if issubclass(w.category, kind):
            kept.append(str(w.message))
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)


class _Recorder(Console):
    """The console, keeping what calibration says for the report."""

    def __init__(self, console: Console) -> None:
        super().__init__(console.quiet, console.stream)
        self.said: list[str] = []

    def say(self, message: str) -> None:
        self.said.append(message)
        super().say(message)


def _checks(args: argparse.Namespace) -> None:
    if args.passages and not args.derived:
        raise UsageError("--passages shows the shared passages of --derived findings; give both")
    if not args.bootstrap:
        _options.refuse_given(args, ("block_fraction",), "does nothing without --bootstrap")
    if args.reference is None and not args.inputs:
        raise UsageError("give inputs to compare (and --reference FOLDER to classify them)")
    if args.neighbours < 1:
        raise UsageError(f"--neighbours {args.neighbours}: give at least 1")
    _options.refuse_budget_without_auto(args)
    if args.reference is None:
        _options.refuse_given(args, ("significance", "decide_by"), "decides origins; give "
                              "--reference FOLDER of known origins")  # fmt: skip


def _items(
    args: argparse.Namespace, labels: Labels | None, left_out: list[str]
) -> tuple[list[Item], list[Item]]:
    """The reference items (none without --reference) and the inputs, InputWarnings kept."""
    if args.reference is None:
        with _recorded(left_out, InputWarning):
            items = load_items(args.inputs, args.split, labels, **input_options(args))
        if labels is not None:  # said on stderr, not in the list of what was left out
            warn_unlabelled(labels, labels.missing(items), len(items))
        return [], items
    with _recorded(left_out, InputWarning):
        if labels is not None:
            reference = load_items([args.reference], args.split, labels, **input_options(args))
        else:
            reference = reference_items(args.reference, args.split, **input_options(args))
        unknowns = load_items(args.inputs, args.split, **input_options(args)) if args.inputs else []
    taken = {item.name for item in reference}
    clash = next((item.name for item in unknowns if item.name in taken), None)
    if clash is not None:
        raise UsageError(f"{escape_name(clash)}: an input and a reference item share this name")
    return reference, unknowns


def _calibration(
    args: argparse.Namespace, items: Sequence[Item], labelled: bool
) -> CalibrationReport:
    """The calibration table behind a -c auto choice (kept in the size cache, so a rerun or an
    earlier `kinpress calibrate` of the same inputs measures nothing again); a labelled choice
    weighs no matrix against the budget, so its table has no budget either."""
    from ..calibration import calibration_report
    from ..compressors import AUTO_CANDIDATES

    candidates = AUTO_CANDIDATES["labelled" if labelled else "unlabelled"]
    budget = None if labelled else budget_seconds(args)
    with opened_cache(args) as cache:
        return calibration_report(
            items, candidates, budget_seconds=budget, cores=args.engine.jobs, cache=cache
        )


def _reasons(said: Sequence[str]) -> tuple[str, ...]:
    """What -c auto said of its choice, without its notes on progress."""
    return tuple(m.removeprefix("auto: ") for m in said if m.startswith("auto: chose"))


def _with_progress(console: Console, work: Callable[[Any], T]) -> T:
    with as_usage_errors(), console.progress() as progress:
        return work(progress)


def run(args: argparse.Namespace, console: Console) -> int:
    from ..compressors import compressor
    from ..origins.scores import stacked
    from ..report import CompressorChoice, build_report, render_html
    from ..support import bootstrap_support
    from ..trees import Resampling, TreeResult, build_tree, outgroup_root

    _checks(args)
    left_out: list[str] = []
    labels = known_labels(args)
    reference, unknowns = _items(args, labels, left_out)
    items = [*reference, *unknowns]
    if len(items) < 3:
        raise UsageError(f"{len(items)} items: a report needs at least 3 to compare")
    if args.k is not None and args.k > len(items):
        raise UsageError(f"--k {args.k}: more groups than the {len(items)} items")
    outgroup = _outgroup(args.outgroup, [item.name for item in items])
    given = args.compressor != "auto"
    recorder = _Recorder(console)
    auto_warnings: list[str] = []
    calibration = None
    with _recorded(auto_warnings):
        if reference:
            spec, table = resolve_choice(args, reference, recorder, targets=unknowns,
                                         job="classify")  # fmt: skip
        else:
            job = "derived" if args.derived else "tree"
            spec, table = resolve_choice(args, items, recorder, job=job)
    command = rerun_command(args, spec)
    # A stack (classify's -c auto may choose one) scores the classification; the matrix, the
    # tree and derived findings are measured with its first compressor.
    single = str(stacked(spec)[0])
    args.compressor = single
    if not given:
        # the table behind the choice; a choice kept by an earlier version has none
        calibration = table or _calibration(args, reference or items, bool(reference))
    dm, _ = compute_matrix(args, console, None, items=items)
    with as_usage_errors():
        tree = build_tree(dm.labels, dm.distances, method=args.method, outgroup=outgroup)
    support = None
    if args.bootstrap:
        support = Resampling(args.bootstrap, args.block_fraction, args.seed)
        tree = _with_progress(console, lambda progress: bootstrap_support(
            tree, items, compressor(single), replicates=args.bootstrap,
            block_fraction=args.block_fraction, seed=args.seed, method=args.method,
            conditional=args.conditional, strand=args.strand, engine=args.engine,
            progress=progress,
        ))  # fmt: skip
        if outgroup is not None:
            tree = outgroup_root(tree, outgroup)
    tree_result = TreeResult.of_matrix(tree, args.method, dm, outgroup, support)
    derived = None
    if args.derived:
        from ..derived import find_derived

        with opened_cache(args) as cache:
            derived = _with_progress(console, lambda progress: find_derived(
                items, single, seed=args.seed, engine=args.engine, cache=cache, progress=progress,
            ))  # fmt: skip
    classification = grouped = None
    if reference and unknowns:
        from ..origins import classify, group_unknowns

        conditional = args.conditional if _options.given(args, "conditional") else "auto"
        with opened_cache(args) as cache:
            classification = _with_progress(console, lambda progress: classify(
                unknowns, reference, spec, conditional=conditional, engine=args.engine,
                cache=cache, progress=progress, significance=args.significance,
                test=args.decide_by,
            ))  # fmt: skip
            # the unknown items' content distances are in the matrix already; where the scores
            # took the shape view, its pairs are measured beside them
            own = dm.distances[len(reference) :, len(reference) :]
            grouped = _with_progress(console, lambda progress: group_unknowns(
                classification, unknowns, distances=own, engine=args.engine, cache=cache,
                progress=progress,
            ))  # fmt: skip
    roles = {item.name: "reference" for item in reference}
    roles.update({item.name: "unknown" for item in unknowns} if reference else {})
    column = labels.column if labels is not None else ("origin" if reference else None)
    choice = CompressorChoice(
        spec, dm.conditional, dm.strand, given, _reasons(recorder.said), tuple(auto_warnings),
        calibration,
    )  # fmt: skip
    with as_usage_errors():
        report = build_report(
            items, dm, choice, title=args.title or "kinpress report", tree=tree_result,
            k=args.k, neighbours=args.neighbours, left_out=left_out, derived=derived,
            passages=args.passages, classification=classification, unknown_groups=grouped,
            roles=roles,
            label_column=column, command=command, seed=args.seed,
        )  # fmt: skip
    if args.json:
        write_json(args, report.as_json())
    else:
        emit(render_html(report), args.output)
    where = "standard output" if args.output in (None, "-") else args.output
    console.say(f"report: {len(items)} items, {'JSON' if args.json else 'HTML'} to {where}")
    return 0

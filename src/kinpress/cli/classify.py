"""kinpress classify: the origin of unknown items, from a reference of known ones."""

from __future__ import annotations

import argparse
from typing import Any

from ..formats import emit
from ..items import InputError, escape_name, load_items
from . import _options
from ._common import (
    as_usage_errors,
    input_options,
    known_labels,
    opened_cache,
    resolve_spec,
    table,
    write_json,
)
from ._console import Console
from ._options import UsageError

ORIGIN_CAUTION = (
    "An origin is evidence for a person to review, not proof of where an item came from."
)

LEGEND = (
    "origin: the one named, or ambiguous (the origins that fit) or unknown (none does);"
    " p-value: how well the best origin accepts the item (- with --threshold); confidence: how"
    " far the runner-up's score lies behind the best one's (0: a tie); nearest, distance: the"
    " closest reference item and its NCD"
)
"""What each column of the text table means, printed under it."""


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
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
        "origins best. The unknown items are then grouped by their own NCD: a group may be an "
        "origin missing from the reference, or a known one's data that moved on. An origin is "
        "evidence to review, not proof.",
        example=[
            "kinpress classify --reference known/ unknown1.bin unknown2.log --json",
            "kinpress classify --reference known/ --evaluate",
            "kinpress classify --reference chunks/ --labels origins.tsv new.log --split lines:100",
            "kinpress classify --reference known/ new/ --significance 0.01",
        ],
    )
    parser.add_argument("inputs", nargs="*", metavar="INPUT", help="unknown files, folders or -")
    parser.add_argument(
        "--reference",
        required=True,
        metavar="FOLDER",
        help="known/<origin>/<files>, or a folder labelled by --labels",
    )
    _options.measuring(parser, conditional="auto")
    decide = parser.add_argument_group("deciding")
    decide.add_argument("--method", choices=("conditional", "knn"), default="conditional",
                        help="conditional (default) or knn")  # fmt: skip
    decide.add_argument("--k", type=int, default=1, metavar="N", help="neighbours for knn")
    _options.abstention(decide)
    decide.add_argument("--threshold", type=float, metavar="SCORE",
                        help="instead of p-values, accept an origin when the item's score for "
                        "it is at most SCORE (no stated error rate)")  # fmt: skip
    decide.add_argument("--evaluate", action="store_true",
                        help="test the reference on itself, block by block, instead")  # fmt: skip
    _options.output(parser, "the result", "a JSON list of predictions")


def run(args: argparse.Namespace, console: Console) -> int:
    from ..origins import classify, evaluate, group_unknowns, reference_items

    if args.significance is not None and args.threshold is not None:
        raise UsageError("give --significance or --threshold, not both")
    if args.decide_by is not None and args.threshold is not None:
        raise UsageError("give --decide-by or --threshold, not both")
    if args.evaluate and args.inputs:
        raise UsageError("give unknown inputs to classify or --evaluate, not both")
    if args.evaluate or args.method != "knn":
        _options.refuse_given(args, ("k",), "counts neighbours for --method knn when classifying;"
                              " it does nothing " + ("with --evaluate" if args.evaluate else
                              "with the conditional method"))  # fmt: skip
    _options.refuse_budget_without_auto(args)
    labels = known_labels(args)
    if labels is not None:
        reference = load_items([args.reference], args.split, labels, **input_options(args))
        missing = labels.missing(reference)
        if missing:
            raise UsageError(
                f"{args.labels}: no label for reference item {missing[0]}"
                + (f" (nor for {len(missing) - 1} more)" if len(missing) > 1 else "")
            )
    else:
        reference = reference_items(args.reference, args.split, **input_options(args))
    if not args.evaluate and not args.inputs:
        raise UsageError("give unknown inputs to classify, or --evaluate")
    unknowns = [] if args.evaluate else load_items(args.inputs, args.split, **input_options(args))
    if not args.evaluate and not unknowns:  # before -c auto calibrates, not after
        named = ", ".join(str(path) for path in args.inputs[:3])
        more = f" (and {len(args.inputs) - 3} more)" if len(args.inputs) > 3 else ""
        raise InputError(f"no items to classify in {named}{more}")
    spec = resolve_spec(args, reference, console, targets=unknowns)
    options: dict[str, Any] = {
        "method": args.method,
        "significance": args.significance,
        "threshold": args.threshold,
        "test": args.decide_by,
        "conditional": args.conditional,
        "engine": args.engine,
    }
    with as_usage_errors(), opened_cache(args) as cache, console.progress() as progress:
        if args.evaluate:
            result = evaluate(reference, spec, cache=cache, progress=progress, **options)
        else:
            found = classify(unknowns, reference, spec, k=args.k, cache=cache,
                             progress=progress, **options)  # fmt: skip
            grouped = group_unknowns(found, unknowns, engine=args.engine, cache=cache,
                                     progress=progress)  # fmt: skip
    if args.evaluate:
        if args.json:
            write_json(args, result.as_json())
        else:
            emit(_evaluation_text(result), args.output)
        return 0
    counts = found.counts()
    # One line here; the guarantee's conditions and how scores were made comparable are in the
    # output (under the table, or the JSON's abstention and scoring), not repeated.
    abstention = found.abstention
    if abstention.significance is None:
        rule = f"a given cut at {abstention.threshold:g} (no stated error rate)"
    else:
        test = "the mix of tests" if abstention.test == "mix" else f"the {abstention.test} test"
        rule = f"refused: at most {abstention.significance:g} of known origins' items ({test})"
        absent = abstention.missing_refused
        if absent is not None:  # the one line many read: how an absent origin would fare
            named = "; most named as a known one" if absent < 0.5 else ""
            rule += f", about {absent:.0%} of a missing origin's (estimated{named})"
        rule += ", as the output explains"
    together = f" ({grouped.count_words})" if grouped.count_words else ""
    console.say(
        f"classify: {found.method} with {found.compressor}; {counts['named']} named,"
        f" {counts['ambiguous']} ambiguous, {counts['unknown']} unknown{together}; {rule}"
    )
    if args.json:
        rows = found.as_json()
        for index, row in enumerate(rows):
            row["unknown_group"] = grouped.group_of(index)
        write_json(args, rows)
    else:
        emit(_classification_text(found, grouped), args.output)
    return 0


def _classification_text(found: Any, grouped: Any) -> str:
    from ..origins.conformal import test_words  # not at start-up: origins loads scikit-learn

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
        table(rows).rstrip("\n"),
        LEGEND,
        "",
        f"p-value: of {test_words(found.abstention.test)} for the best origin (below"
        f" {found.abstention.significance} it does not accept the item: fit, how typical the"
        " item is of that origin's own held-out items; separation, how much better it explains"
        " the item than the next origin does, against its own items; contrast, fit less how"
        " much better it explains the item than a typical other origin does); an origin's"
        " score is"
        " C(x | origin) / C(x), lower is better, made comparable across origins as the next"
        " line says.",
        f"Scores: {found.scoring_words}.",
        f"Abstention: {found.abstention.guarantee}.",
        *(f"Warning: {note.words(found.abstention.significance)}." for note in found.concentrated),
        *([grouped.words] if grouped.words else []),
        ORIGIN_CAUTION,
    ]
    return "\n".join(lines) + "\n"


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
        f"scores: {result.scoring_words}",
        *(
            f"warning: {origin}: {k} of its {n} held-out items were refused, more than a rate of"
            f" {result.abstention.significance:g} allows (binomial p = {p:.1g}): its blocks"
            " differ from each other more than the rate was set for; more reference items of"
            " it, or deciding by the separation test (--decide-by separation), may keep more"
            for origin, k, n, p in result.drifting
        ),
        "",
    ]
    rows = [("true \\ predicted", *result.origins, "ambiguous", "unknown")]
    rows += [(o, *(str(int(c)) for c in row)) for o, row in zip(
        result.origins, result.confusion, strict=True)]  # fmt: skip
    return "\n".join(head) + "\n" + table(rows)

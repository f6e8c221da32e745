"""kinpress calibrate: each compressor's bias on controls, and the one to trust."""

from __future__ import annotations

import argparse
from typing import Any

from ..compressors import compressor
from ..formats import emit
from ..items import load_items
from ..units import size_text
from . import _options
from ._common import check_plot, input_options, opened_cache, write_json
from ._console import Console
from ._options import budget_seconds


def add_parser(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = _options.command(
        subparsers,
        "calibrate",
        help="measure each compressor's bias on controls and recommend one for your data",
        description="Measure each compressor on controls (x against itself, against unrelated "
        "data, against its own shuffled symbols, against mutated copies, and identity across "
        "sizes) made from your inputs when given, and recommend the one to trust.",
        example=[
            "kinpress calibrate",
            "kinpress calibrate genomes/ --json -o calib.json",
            "kinpress calibrate logs/ -c zlib:level=9 -c zstd:level=19 --plot calib.png",
        ],
    )
    _options.inputs(parser, nargs="*")
    parser.add_argument(
        "-c", "--compressor", action="append", metavar="SPEC", help="compressor to calibrate "
        "(repeat; default: a handful of strong and fast ones)"
    )  # fmt: skip
    parser.add_argument("--seed", type=int, default=2005, help="controls' seed (default 2005)")
    parser.add_argument(
        "--max-bytes", type=int, default=64 << 20, metavar="N",
        help="cap of the size sweep in bytes (default 64 MiB)",
    )  # fmt: skip
    _options.budget(parser)
    _options.reading(parser.add_argument_group("reading"))
    _options.running(parser)
    _options.output(
        parser, "the report", "the report as JSON", plot="draw identity vs size and vs mutation"
    )


def run(args: argparse.Namespace, console: Console) -> int:
    from ..calibration import DEFAULT_CANDIDATES, calibration_report

    check_plot(args.plot)
    title = _options.plot_title(args)
    weighs_time = ("budget", "jobs", "cluster")
    if not args.inputs:
        _options.refuse_given(args, weighs_time, "weighs the run time of a matrix of the inputs;"
                              " give inputs")  # fmt: skip
    items = load_items(args.inputs, args.split, **input_options(args)) if args.inputs else None
    candidates = args.compressor or list(DEFAULT_CANDIDATES)
    for spec in candidates:
        compressor(spec)  # a bad spec fails before any work
    timed = any(_options.given(args, dest) for dest in weighs_time)
    with opened_cache(args) as cache:
        report = calibration_report(
            items, candidates, seed=args.seed, max_bytes=args.max_bytes,
            budget_seconds=budget_seconds(args) if timed else None,
            cores=args.engine.jobs if timed else None, cache=cache, say=console.say,
        )  # fmt: skip
    if args.json:
        write_json(args, report.as_json())
    else:
        emit(_calibration_text(report), args.output)
    if args.plot:
        from ..plots import plot_calibration

        plot_calibration(report, args.plot, title=title)
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
                ("≥" if r.reliable_capped else "") + size_text(r.reliable_up_to_bytes),
                f"{r.throughput_mb_s:.3g}",
            )
        )
    widths = [max(len(row[k]) for row in rows) for k in range(len(header))]
    lines = [
        "  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip() for row in rows
    ]
    lines += _blind_spot_lines(report)
    lines += ["", f"recommended: {report.recommended}", *(f"  {r}" for r in report.reasons)]
    lines += [
        "",
        "identity: mean NCD(x,x), ideal 0; independent: NCD of unrelated data, ideal 1; shuffle:"
        " 1 - NCD(x, shuffled x), ideal 0; monotone: rank correlation of distance with mutation"
        f" rate, ideal 1; resolves: smallest mutation rate told from identity; related: mean NCD to"
        f" copies with 1-10 % substituted, lower finds more shared content (seed {report.seed})",
    ]
    return "\n".join(lines) + "\n"


def _blind_spot_lines(report: Any) -> list[str]:
    """Bits a symbol on the known-answer strings, one column each, and what they mean."""
    known = [spot for spot in report.compressors[0].blind_spots] if report.compressors else []
    if not known:
        return []
    header = ("bits a symbol", *(f"{s.control} ({s.kind})" for s in known))
    rows = [
        header,
        ("a coder finding nothing", *(f"{s.uniform_bits:.4f}" for s in known)),
        ("counting symbols", *(f"{s.order0_bits:.4f}" for s in known)),
    ]
    for r in report.compressors:
        rows.append((r.spec, *(f"{s.bits_per_symbol:.3f}" + ("*" if s.sees_structure else "")
                               for s in r.blind_spots)))  # fmt: skip
    widths = [max(len(row[k]) for row in rows) for k in range(len(header))]
    lines = ["", "known answers: strings a short rule makes (digits, or bits for rule30)"]
    lines += [
        "  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip() for row in rows
    ]
    lines += [
        "* below counting symbols by more than 3 % of the random rate: the compressor sees"
        " structure. Champernowne's and Copeland & Erdős's digits are normal (every block of"
        " digits equally frequent in the limit), so counting digits calls them nearly random;"
        " pi, rule 30 and a seeded stream are made by a few lines of code, and a compressor"
        " coding them at about the random rate (no *) cannot see that rule: its blind spot."
        " So an NCD near 1 does not prove two items unrelated, only that this compressor"
        " found nothing shared.",
    ]
    return lines

"""What the commands share between parsing and printing: loading, the cache and engine the
command line names, the matrix of the inputs, checks made before any work, text layout."""

from __future__ import annotations

import argparse
import dataclasses
import os
import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

from ..cache import SizeCache, default_cache_path
from ..compressors import SpecError, compressor
from ..distance import DistanceMatrix, check_matrix_memory, distance_matrix
from ..engine import DaskEngine, Engine, LocalEngine
from ..formats import emit, json_text, read_matrix
from ..items import (
    InputError,
    InputWarning,
    Item,
    Labels,
    escape_name,
    label_spec,
    load_items,
    read_label_table,
)
from ..units import few_text
from ._console import Console
from ._options import UsageError, budget_seconds

if TYPE_CHECKING:
    from ..calibration.estimate import ProposedPairs
    from ..calibration.measure import CalibrationReport


def table(rows: Sequence[Sequence[str]]) -> str:
    """Rows as left-aligned columns two spaces apart, one line each."""
    widths = [max(len(row[k]) for row in rows) for k in range(len(rows[0]))]
    return (
        "\n".join(
            "  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip()
            for row in rows
        )
        + "\n"
    )


def write_json(args: argparse.Namespace, value: object) -> None:
    """The one JSON convention: to -o when given, else stdout."""
    emit(json_text(value), args.output)


def input_options(args: argparse.Namespace) -> dict[str, Any]:
    """How inputs are read: links below folders, and the most bytes one input may hold."""
    return {"follow_links": args.follow_links, "max_file_bytes": args.max_file_size}


def known_labels(args: argparse.Namespace) -> Labels | None:
    """The label table --labels FILE[:COLUMN] names (None without it): the column given, else
    the second."""
    spec = getattr(args, "labels", None)
    return None if not spec else read_label_table(*label_spec(spec))


def warn_unlabelled(labels: Labels, names: Sequence[str], total: int) -> None:
    """One warning naming how many of `total` items `labels` leaves without a label, and the
    first few: they are left out of any scoring against the labels."""
    if not names:
        return
    shown = few_text([escape_name(name) for name in names])
    warnings.warn(
        f"{labels.source}: no {labels.column} for {len(names)} of {total} items: {shown}",
        InputWarning,
        stacklevel=2,
    )


def load(args: argparse.Namespace, labels: Labels | None) -> list[Item]:
    """The inputs as items, labelled by `labels` (see `known_labels`), unlabelled ones warned of."""
    items = load_items(args.inputs, args.split, labels, **input_options(args))
    if labels is not None:
        warn_unlabelled(labels, labels.missing(items), len(items))
    return items


@contextmanager
def opened_cache(args: argparse.Namespace) -> Iterator[SizeCache | None]:
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
def opened_engine(args: argparse.Namespace) -> Iterator[Engine]:
    """This machine's cores (--jobs) or a Dask cluster (--cluster), closed afterwards."""
    jobs, cluster = getattr(args, "jobs", None), getattr(args, "cluster", None)
    if jobs is not None and jobs < 1:
        raise UsageError(f"--jobs {jobs}: the worker count must be at least 1")
    if cluster is None:
        with LocalEngine(jobs) as local:
            yield local
        return
    if jobs is not None:
        raise UsageError("--jobs counts this machine's workers; a --cluster brings its own")
    with DaskEngine(cluster) as engine:
        yield engine


@contextmanager
def as_usage_errors() -> Iterator[None]:
    """Library ValueErrors about the user's request become usage errors (exit 2, one line)."""
    try:
        yield
    except (InputError, SpecError):
        raise
    except ValueError as error:
        raise UsageError(str(error)) from None


def check_plot(path: str | None) -> None:
    """Refuse a picture name we cannot write before any work is done."""
    if path:
        from ..plots import figure_format

        try:
            figure_format(path)
        except ValueError as error:
            raise UsageError(f"--plot {path}: {error}") from None


def resolve_spec(
    args: argparse.Namespace,
    items: Sequence[Item],
    console: Console,
    targets: Sequence[Item] = (),
    job: str | None = None,
    proposed: ProposedPairs | None = None,
) -> str:
    """The compressor spec to use: as given, or with auto the one calibration chose for this
    command's job (`job`, default the command's name; see calibration.auto_choice), its time
    counting --bootstrap replicates, derived's null and the `proposed` pairs a job measures in
    place of the matrix's."""
    return resolve_choice(args, items, console, targets, job, proposed)[0]


def resolve_choice(
    args: argparse.Namespace,
    items: Sequence[Item],
    console: Console,
    targets: Sequence[Item] = (),
    job: str | None = None,
    proposed: ProposedPairs | None = None,
) -> tuple[str, CalibrationReport | None]:
    """resolve_spec's spec, and with auto the calibration table behind the choice (None for a
    given compressor, or a choice an earlier version kept without its table)."""
    if args.compressor != "auto":
        return str(args.compressor), None
    from ..calibration import auto_choice
    from ..origins import DEFAULT_SIGNIFICANCE

    job = job or args.command
    null_pairs = 0
    if job == "derived":
        from ..derived import default_null_pairs

        null_pairs = default_null_pairs(getattr(args, "max_fpr", None) or 0.01)
    # classify's abstention refuses at --significance; auto ranks by what is refused at it
    given = getattr(args, "significance", None)
    with opened_cache(args) as cache, console.progress() as progress:
        args.compressor, table = auto_choice(
            items, job, targets=targets, budget_seconds=budget_seconds(args),
            strand=args.strand, engine=args.engine, cache=cache, say=console.say,
            replicates=getattr(args, "bootstrap", 0) or 0, null_pairs=null_pairs,
            significance=DEFAULT_SIGNIFICANCE if given is None else given, progress=progress,
            proposed=proposed,
        )  # fmt: skip
    return str(args.compressor), table


def check_strands(args: argparse.Namespace, items: Sequence[Item]) -> None:
    """Under --strand one, warn of DNA records that look deposited on the other strand (a
    k-mer check of record pairs, no compression; see kinpress.strands)."""
    if args.strand == "one" and any(item.nucleotide for item in items):
        from ..strands import warn_flipped_strands

        warn_flipped_strands(items)


Check = Callable[[Sequence[str]], None]
"""Checks a command makes on the item names before any work (an outgroup, a group count)."""


def compute_matrix(
    args: argparse.Namespace,
    console: Console,
    labels: Labels | None,
    check: Check | None = None,
    items: list[Item] | None = None,
) -> tuple[DistanceMatrix, list[Item]]:
    """Load the inputs labelled by `labels` (unless `items` are given) and compute their matrix
    as the command line asks, reporting on stderr; `check` sees the item names before anything
    is computed."""
    if items is None:
        items = load(args, labels)
        if check is not None:
            check([item.name for item in items])
    check_matrix_memory(items)
    check_strands(args, items)
    comp = compressor(resolve_spec(args, items, console))
    with opened_cache(args) as cache, console.progress() as progress:
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


def matrix_for(
    args: argparse.Namespace, console: Console, labels: Labels | None, check: Check | None = None
) -> tuple[DistanceMatrix, list[Item]]:
    """The matrix a command works on: read with --matrix FILE, else computed from the inputs;
    its classes from `labels` when given; `check` sees the item names first."""
    if args.matrix:
        if args.inputs:
            raise UsageError("give inputs or --matrix FILE, not both")
        dm = read_matrix(args.matrix)
        if check is not None:
            check(dm.labels)
        if labels is not None:
            classes = tuple(labels.label_of(name) for name in dm.labels)
            dm = dataclasses.replace(dm, classes=classes)
            unlabelled = [n for n, c in zip(dm.labels, classes, strict=True) if c is None]
            warn_unlabelled(labels, unlabelled, len(dm))
        return dm, []
    if not args.inputs:
        raise UsageError("give inputs to compare, or --matrix FILE")
    return compute_matrix(args, console, labels, check)


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
        f"{len(dm):,} items, {dm.compressor} ({how}): {s.pairs_computed:,} pairs computed, "
        f"{s.pairs_from_cache:,} from cache; {mb:.1f} MB compressed in {s.seconds:.1f} s"
        f"{rate}{tail}"
    )


def _read_paths(args: argparse.Namespace) -> list[str]:
    """The files and folders this command reads (inputs, reference, labels, a saved matrix)."""
    paths = list(getattr(args, "inputs", None) or [])
    paths += [getattr(args, key, None) for key in ("reference", "matrix")]
    if getattr(args, "labels", None):
        paths.append(label_spec(args.labels)[0])
    return [p for p in paths if p and p != "-"]


def _written_paths(args: argparse.Namespace) -> list[tuple[str, str]]:
    """(option, path) of every file this command writes: its output, picture and size cache."""
    written = [("-o", getattr(args, "output", None)), ("--plot", getattr(args, "plot", None))]
    if not getattr(args, "no_cache", True):
        written.append(("--cache", args.cache))
    return [(option, path) for option, path in written if path and path != "-"]


def check_paths(args: argparse.Namespace) -> None:
    """That nothing written is, or lies inside, anything read (an output inside an input folder
    would be read as an input, or overwrite one) and that every output can be written where it
    is asked to go."""
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

"""The ``-c auto`` resolution and the calibrate command's report, each kept in the size cache:
:func:`resolve_auto` (a choice per job, made by :func:`.choose.choose_for_job`; with its
calibration table, :func:`auto_choice`) and
:func:`calibration_report` (what ``kinpress calibrate`` reports)."""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence

from ..cache import SizeCache
from ..compressors import AUTO_CANDIDATES, compressor
from ..engine import Engine
from ..items import Item
from ..measure import Progress
from ..origins.scores import DEFAULT_SIGNIFICANCE, stacked
from .choose import DEFAULT_BUDGET_SECONDS, calibrate, choose_compressor, holds
from .controls import DEFAULT_SEED
from .estimate import ProposedPairs
from .job import LABELLED_JOBS, LABELLED_STACKS, Choice, check_job_inputs, choose_for_job
from .measure import (
    DEFAULT_MAX_BYTES,
    BlindSpot,
    CalibrationReport,
    CompressorCalibration,
    Normality,
)


def resolve_auto(
    items: Sequence[Item],
    job: str,
    *,
    targets: Sequence[Item] = (),
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    strand: str = "one",
    engine: Engine,
    cache: SizeCache | None = None,
    say: Callable[[str], None] = lambda message: None,
    replicates: int = 0,
    null_pairs: int = 0,
    significance: float = DEFAULT_SIGNIFICANCE,
    progress: Progress | None = None,
    proposed: ProposedPairs | None = None,
) -> str:
    """The spec ``-c auto`` uses for ``job`` on ``items`` (see :func:`auto_choice`)."""
    return auto_choice(
        items, job, targets=targets, budget_seconds=budget_seconds, strand=strand,
        engine=engine, cache=cache, say=say, replicates=replicates, null_pairs=null_pairs,
        significance=significance, progress=progress, proposed=proposed,
    )[0]  # fmt: skip


def auto_choice(
    items: Sequence[Item],
    job: str,
    *,
    targets: Sequence[Item] = (),
    budget_seconds: float = DEFAULT_BUDGET_SECONDS,
    strand: str = "one",
    engine: Engine,
    cache: SizeCache | None = None,
    say: Callable[[str], None] = lambda message: None,
    replicates: int = 0,
    null_pairs: int = 0,
    significance: float = DEFAULT_SIGNIFICANCE,
    progress: Progress | None = None,
    proposed: ProposedPairs | None = None,
) -> tuple[str, CalibrationReport | None]:
    """The spec ``-c auto`` uses for ``job`` on ``items``, and the calibration table behind it
    (None for a choice kept by an earlier version, which did not keep its table):
    :func:`choose_for_job`'s choice
    (classify: ``items`` is the labelled reference, ``targets`` the unknowns, ``significance``
    the rate its abstention refuses at; ``replicates`` and ``null_pairs`` the job's work beyond
    its matrix, ``proposed`` the pairs it measures in place of the matrix's), said through
    ``say``, the measuring told to ``progress``, with a
    MeasurementWarning when even it cannot hold the largest pair of items.

    The choice is kept in ``cache``, keyed by the items' contents (and labels for a labelled
    job), the job, the candidates (with their library versions), the seed, the budget, the
    cores of ``engine``, the strand, the work beyond the matrix and a labelled job's
    significance, so a rerun does not calibrate again.
    """
    import json

    from ..measure import MeasurementWarning

    check_job_inputs(items, job)  # said before "calibrating", not after it
    cores = engine.jobs
    key = _auto_key(
        items, job, targets, budget_seconds, cores, strand, replicates, null_pairs, significance,
        proposed,
    )  # fmt: skip
    stored = cache.get_choice(key) if cache is not None else None
    table: CalibrationReport | None = None
    if stored is None:
        say(f"auto: calibrating the compressors on these inputs for {job} ...")
        choice = choose_for_job(items, job, targets=targets, budget_seconds=budget_seconds,
                                strand=strand, engine=engine, cache=cache,
                                replicates=replicates, null_pairs=null_pairs,
                                significance=significance, progress=progress,
                                proposed=proposed)  # fmt: skip
        stored = _choice_json(choice, items, job in LABELLED_JOBS)
        table = choice.report
        if cache is not None:
            cache.put_choice(key, stored)
    else:
        say("auto: the choice for these inputs is in the cache")
    chosen = json.loads(stored)
    if table is None and "report" in chosen:
        table = _report_from_json(json.dumps(chosen["report"]))
    why = str(chosen["why"])
    # The reasons name their spec first ("SPEC: chosen: ...", "SPEC: chosen over X: ..."):
    # said once here.
    lead = f"{chosen['spec']}: chosen"
    said = why[len(lead) :] if why.startswith(lead) else f": {why}"
    say(f"auto: chose {chosen['spec']}{said}")
    if not chosen["holds"]:
        warnings.warn(
            f"{chosen['spec']}: reliable up to {chosen['reliable']:,} bytes, below the largest"
            f" pair of items ({chosen['pair']:,} bytes); their distances drift towards 1",
            MeasurementWarning,
            stacklevel=2,
        )
    return str(chosen["spec"]), table


def _auto_key(
    items: Sequence[Item],
    job: str,
    targets: Sequence[Item],
    budget_seconds: float,
    cores: int,
    strand: str,
    replicates: int,
    null_pairs: int,
    significance: float = DEFAULT_SIGNIFICANCE,
    proposed: ProposedPairs | None = None,
) -> str:
    """The size-cache key of :func:`resolve_auto`'s choice (what its docstring lists)."""
    import hashlib

    from ..measure import content_digest

    labelled = job in LABELLED_JOBS
    candidates = AUTO_CANDIDATES["labelled" if labelled else "unlabelled"]
    lines = [
        *sorted(
            content_digest(item.data).hex() + (f"\t{item.label}" if labelled else "")
            for item in items
        ),
        *(compressor(spec).cache_key for spec in candidates),
        *(f"stack {spec}" for spec in (LABELLED_STACKS if labelled else ())),
        f"seed={DEFAULT_SEED} budget={budget_seconds} cores={cores} strand={strand}"
        + (f" replicates={replicates} null_pairs={null_pairs}" if replicates or null_pairs else "")
        + ("" if proposed is None else f" proposed={proposed.pairs}:{proposed.fed}"),
        f"job={job} targets={len(targets)}:{sum(len(t.data) for t in targets)}"
        f" ranked=named-right+missing-refused significance={significance}"
        if labelled
        else "job=unlabelled",
    ]
    return "auto:" + hashlib.blake2b("\n".join(lines).encode(), digest_size=16).hexdigest()


def _choice_json(choice: Choice, items: Sequence[Item], labelled: bool) -> str:
    """What :func:`resolve_auto` keeps of a choice: the spec, the reason that settled it,
    whether it holds the largest pair of ``items`` (with the sizes a warning names), and the
    calibration table behind it (what a report shows)."""
    import json

    pair = int(sum(sorted((len(item.data) for item in items), reverse=True)[:2]))
    # a stack's table row is its first compressor's (each holds the largest item: see holds)
    result = choice.report.result(str(stacked(choice.spec)[0]))
    # A labelled choice leads with its task figures; an unlabelled one with the controls'
    # comparison when there was one, else with the time estimate that settled it.
    lead = labelled or " chosen over " in choice.reasons[0]
    return json.dumps(
        {
            "spec": choice.spec,
            "why": choice.reasons[0] if lead else choice.reasons[-1],
            "holds": labelled or holds(result, pair),
            "reliable": result.reliable_up_to_bytes,
            "pair": pair,
            "report": choice.report.as_json(),
        }
    )


def calibration_report(
    items: Sequence[Item] | None,
    candidates: Sequence[str],
    *,
    seed: int = DEFAULT_SEED,
    max_bytes: int = DEFAULT_MAX_BYTES,
    budget_seconds: float | None = None,
    cores: int | None = None,
    cache: SizeCache | None = None,
    say: Callable[[str], None] = lambda message: None,
) -> CalibrationReport:
    """What ``kinpress calibrate`` reports: :func:`calibrate`, or with ``budget_seconds`` (which
    needs ``items``) :func:`choose_compressor`, whose recommendation is the best compressor
    whose whole matrix of the items is estimated to fit the budget on ``cores`` cores (the cores
    the estimate assumes; default: every core this process may use).

    The report is kept in ``cache``, keyed by the items' contents, the candidates (with their
    library versions), the seed, the size cap, the budget and the cores, so a rerun does not
    measure again (its throughputs are those of the first run).
    """
    import hashlib
    import json

    from ..measure import content_digest

    if budget_seconds is not None and not items:
        raise ValueError("a budget weighs the run time of the inputs' matrix: give inputs")
    lines = [
        *sorted(content_digest(item.data).hex() for item in items or ()),
        *(compressor(spec).cache_key for spec in candidates),
        f"seed={seed} max_bytes={max_bytes} budget={budget_seconds} cores={cores}",
        "known-answers",  # a report kept before they were added is measured again
    ]
    key = "calibrate:" + hashlib.blake2b("\n".join(lines).encode(), digest_size=16).hexdigest()
    stored = cache.get_choice(key) if cache is not None else None
    if stored is not None:
        say("calibrate: the report for these inputs is in the cache")
        return _report_from_json(stored)
    if budget_seconds is None or not items:
        report = calibrate(items, candidates, seed=seed, max_bytes=max_bytes)
    else:
        _, report = choose_compressor(items, budget_seconds=budget_seconds, candidates=candidates,
                                      seed=seed, cores=cores, max_bytes=max_bytes)  # fmt: skip
    if cache is not None:
        cache.put_choice(key, json.dumps(report.as_json()))
    return report


def _report_from_json(text: str) -> CalibrationReport:
    """The report :meth:`CalibrationReport.as_json` wrote (its derived figures recomputed)."""
    import json

    doc = json.loads(text)
    derived = {"mutation_distance", "quality"}
    spot_derived = {"below", "sees_structure"}
    results = []
    for entry in doc["compressors"]:
        fields = {k: v for k, v in entry.items() if k not in derived}
        fields["normality"] = Normality(**fields["normality"])
        for curve in ("size_sweep", "mutation_ladder", "block_moves"):
            fields[curve] = tuple(tuple(point) for point in fields[curve])
        fields["blind_spots"] = tuple(
            BlindSpot(**{k: v for k, v in spot.items() if k not in spot_derived})
            for spot in fields.get("blind_spots", ())
        )
        results.append(CompressorCalibration(**fields))
    return CalibrationReport(doc["seed"], doc["inputs"], tuple(results), doc["recommended"],
                             tuple(doc["reasons"]))  # fmt: skip

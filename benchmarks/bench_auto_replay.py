"""Auto's labelled choice replayed: every candidate's held-out figures beside what it then did.

For each round of bench_origins.py's protocols (time-ordered log chunks, code in name order,
texts; --draws N adds random splits of the code sets), every labelled candidate of `-c auto`
(AUTO_CANDIDATES["labelled"] and the stacks of AUTO_STACKS, or --specs) is measured as auto
measures it on the round's
reference (calibration.job's held-out figures: accuracy, a missing origin's items refused, AUC,
own score) and then classifies the round's later items with default options otherwise: known
items named right and refused, a missing origin's items unknown. The rows go to --out as JSON
lines. The table gives, per set, what auto's rule (calibration.job._pick_labelled, applied to
all candidates, the time budget left aside) picks in each round and the figures that follow,
beside each candidate fixed for every round and the best candidate of each round in hindsight
(most known items named right plus missing items unknown): how far the choice falls short of
what the candidates offered.

--replay FILE reads such rows instead of measuring and prints the table again: change the rule
in calibration/job.py and see at once what it would have chosen on every stored round. A rule
that wins here on one set and loses on the others is tuned to that set (issue 10: develop
against several protocols and data kinds, never one split).

    python benchmarks/bench_auto_replay.py [--logs DIR ...] [--debian-code DIR] [--draws N]
        [--only-machine] [--specs SPEC ...] [--cache PATH] [--out FILE]
    python benchmarks/bench_auto_replay.py --replay FILE

Measured 2026-12-05 (one machine, shared sets and this machine's two sets of logs): the rule
chose as the bench_origins.py default did (Loghub 0.988 named right / 0.013 refused / 1.000
unknown; machine logs 0.975 / 0.025 / 1.000 and 0.879 / 0.121 / 1.000, zstd 3 chosen in three
rounds there and refusing a drifted system's later chunks; Rosetta 0.962 / 0.035 / 0.912).
"""

from __future__ import annotations

import argparse
import json
import sys
import time
import warnings
from collections import defaultdict
from pathlib import Path

import numpy as np
from bench_origins import (
    CODE_SIZES,
    SHARED,
    code_origins,
    debian_code,
    frozen,
    log_origins,
    random_rounds,
    rounds,
    shared_code,
    text_origins,
)

from kinpress import Item, SizeCache
from kinpress.calibration.job import (
    LABELLED_CANDIDATES,
    LABELLED_STACKS,
    TaskFigures,
    _labelled_figures,
    _pick_labelled,
)
from kinpress.compressors import compressor
from kinpress.origins import classify

Plan = list[tuple[list[Item], list[Item], set[str]]]


def plans(args: argparse.Namespace) -> list[tuple[str, Plan]]:
    """(set name, rounds) of every set asked for."""
    out: list[tuple[str, Plan]] = []
    if SHARED.is_dir() and not args.only_machine:
        code = shared_code()
        out.append(("Loghub logs", rounds(log_origins(SHARED / "logs"), 10, None)))
        out.append(("Rosetta code", rounds(code, 20, None)))
        if args.draws:
            out.append(("Rosetta code, random", random_rounds(code, 20, None, args.draws)))
        out.append(("UDHR texts", rounds(text_origins(SHARED / "texts"), 10, None)))
    for folder in args.logs or []:
        out.append((f"logs in {folder}", rounds(log_origins(folder), 10, None)))
    if args.debian_code:
        patterns = debian_code(args.debian_code)
        origins = frozen("debian", lambda: code_origins(patterns, sizes=CODE_SIZES), args.files)
        out.append(("24 languages", rounds(origins, 20, 4)))
        if args.draws:
            out.append(("24 languages, random", random_rounds(origins, 20, 4, args.draws)))
    return out


def measure(args: argparse.Namespace) -> list[dict[str, object]]:
    # a stack's spec as auto names it (its compressors' specs joined by +), its figures from
    # its compressors' measuring (cached), as auto ranks it
    given = args.specs or [*LABELLED_CANDIDATES, *LABELLED_STACKS]
    specs = [s if s in LABELLED_STACKS else compressor(s).spec for s in given]
    rows: list[dict[str, object]] = []
    out = open(args.out, "a") if args.out else None  # noqa: SIM115 - closed below
    try:
        with SizeCache(args.cache) as cache:
            for name, plan in plans(args):
                for index, (ref, later, _missing) in enumerate(plan):
                    labels = {i.label for i in ref}
                    longest = max(len(i.data) for i in [*ref, *later])
                    for spec in specs:
                        started = time.perf_counter()
                        figures = _labelled_figures(ref, spec, longest, None, cache, 0.05)
                        got = classify(later, ref, spec, cache=cache)
                        pairs = list(zip(later, got.predictions, strict=True))
                        known = [(t, p) for t, p in pairs if t.label in labels]
                        strange = [p for t, p in pairs if t.label not in labels]
                        row: dict[str, object] = {
                            "set": name,
                            "round": index,
                            "spec": spec,
                            "origins": len(labels),
                            "figures": figures.as_json(),
                            # the rows a stack is compared on (see job._better_than_stack)
                            "measured_rows": figures.measured_rows,
                            "right_rows": figures.right_rows,
                            "right": float(np.mean([p.predicted == t.label for t, p in known])),
                            "refused": float(np.mean([p.decision != "named" for _, p in known])),
                            "unknown": (
                                float(np.mean([p.decision != "named" for p in strange]))
                                if strange else None
                            ),
                            "seconds": time.perf_counter() - started,
                        }  # fmt: skip
                        rows.append(row)
                        if out is not None:
                            out.write(json.dumps(row) + "\n")
                            out.flush()
                        print(
                            f"  {name} round {index} {spec}: right {row['right']:.3f}, refused"
                            f" {row['refused']:.3f}, merit {figures.merit:.3f}",
                            file=sys.stderr,
                            flush=True,
                        )
    finally:
        if out is not None:
            out.close()
    return rows


def figures_of(row: dict[str, object]) -> TaskFigures:
    rows: dict[str, tuple[int, ...]] = {
        key: tuple(row.get(key) or ())  # type: ignore[arg-type]
        for key in ("measured_rows", "right_rows")
    }
    return TaskFigures(**row["figures"], **rows)  # type: ignore[arg-type]


def table(rows: list[dict[str, object]]) -> None:
    by_round: dict[tuple[str, int], list[dict[str, object]]] = defaultdict(list)
    for row in rows:
        by_round[(str(row["set"]), int(row["round"]))].append(row)  # type: ignore[call-overload]
    sets = list(dict.fromkeys(name for name, _ in by_round))
    specs = list(dict.fromkeys(str(row["spec"]) for row in rows))

    def mean(picked: list[dict[str, object]], key: str) -> str:
        values = [float(p[key]) for p in picked if p[key] is not None]  # type: ignore[arg-type]
        return f"{np.mean(values):.3f}" if values else "  -  "

    print(f"{'set / setting':34s} right  refused unknown  rounds' picks")
    for name in sets:
        keys = sorted(k for k in by_round if k[0] == name)
        print(name)
        choices: list[dict[str, object]] = []
        for key in keys:
            candidates = by_round[key]
            origins = int(candidates[0]["origins"])  # type: ignore[call-overload]
            best = _pick_labelled([figures_of(c) for c in candidates], origins, [])
            choices.append(next(c for c in candidates if c["spec"] == best.spec))
        hindsight = [
            max(by_round[key], key=lambda c: float(c["right"]) + float(c["unknown"] or 0.0))  # type: ignore[arg-type]
            for key in keys
        ]
        for label, picked in [("auto's rule", choices), ("best in hindsight", hindsight)]:
            names = ", ".join(str(p["spec"]).split(",")[0] for p in picked)
            print(
                f"  {label:32s} {mean(picked, 'right')}  {mean(picked, 'refused')}  "
                f"{mean(picked, 'unknown')}  {names}"
            )
        for spec in specs:
            fixed = [c for key in keys for c in by_round[key] if c["spec"] == spec]
            if len(fixed) == len(keys):
                print(
                    f"  {spec:32s} {mean(fixed, 'right')}  {mean(fixed, 'refused')}  "
                    f"{mean(fixed, 'unknown')}"
                )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--logs", type=Path, nargs="*", help="folders of *.log files")
    parser.add_argument("--debian-code", type=Path, help="a folder fetch_debian_code.sh filled")
    parser.add_argument("--files", type=Path, help="bench_origins.py's frozen file lists")
    parser.add_argument("--draws", type=int, default=0, help="also N random splits of code")
    parser.add_argument("--only-machine", action="store_true", help="skip ../shared")
    parser.add_argument("--specs", nargs="*", help="candidates (default: auto's labelled ones)")
    parser.add_argument("--cache", default="/tmp/kinpress-bench-origins.sqlite")
    parser.add_argument("--out", type=Path, help="append the rows to this JSON-lines file")
    parser.add_argument("--replay", type=Path, help="rows of an earlier run: no measuring")
    args = parser.parse_args()
    warnings.simplefilter("ignore")
    if args.replay:
        rows = [json.loads(line) for line in args.replay.read_text().splitlines() if line]
    else:
        rows = measure(args)
    table(rows)


if __name__ == "__main__":
    main()

"""A stack of compressors: classification on the views of several compressors at once, and the
-c auto choice that ranks stacks beside single compressors (see kinpress.origins)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from conftest import held_out_decision_scores, origin_items
from kinpress import cli
from kinpress.calibration import choose_for_job
from kinpress.calibration.job import LABELLED_STACKS, TaskFigures, _pick_labelled
from kinpress.origins import (
    STACK,
    CompressionClassifier,
    Conformity,
    classify,
    evaluate,
    stacked,
)

STACKED = "zstd:level=19+zlib:level=9,window=15"
"""Two quick compressors of different windows: the stack the tests classify with."""


REFERENCE = origin_items(range(4), range(6), "r")
UNKNOWNS = origin_items(range(5), range(6, 9), "u")  # origin 4 is not in the reference


def test_a_spec_splits_into_its_stack() -> None:
    assert stacked(STACKED) == ("zstd:level=19", "zlib:level=9,window=15")
    assert stacked("zstd:level=19") == ("zstd:level=19",)
    assert STACK.join(stacked(STACKED)) == STACKED


def test_a_stack_calibrates_on_the_views_of_each_of_its_compressors() -> None:
    found = classify(UNKNOWNS, REFERENCE, STACKED)
    assert found.compressor == STACKED and found.compressors == stacked(STACKED)
    assert found.conditional == "primed+primed" and len(found.scorings) == 2
    assert found.p_values is not None and found.p_values.shape == (len(UNKNOWNS), 4)
    # Recomputed from the public functions: each compressor's held-out scores of both views, on
    # the footing each chooses (Scoring), joined as further views; the deciding test chosen on
    # that stack is the classification's, with the same share of left-out origins refused.
    longest = max(len(i.data) for i in [*UNKNOWNS, *REFERENCE])
    joined, codes, _ = held_out_decision_scores(REFERENCE, STACKED, longest=longest)
    assert joined.shape[2] >= 2
    conformity = Conformity.of(joined, codes, found.origins, 0.05)
    assert found.abstention.test == conformity.test
    assert dict(found.abstention.detection) == pytest.approx(dict(conformity.detection))
    # and the decisions are sound: known items named right, the missing origin's refused
    pairs = list(zip(found.predictions, UNKNOWNS, strict=True))
    assert all(p.predicted == t.label for p, t in pairs if t.label != "o4")
    assert all(p.decision != "named" for p, t in pairs if t.label == "o4")
    assert "a stack of 2 compressors" in found.scoring_words
    assert "; zlib:level=9,window=15: content scores" in found.scoring_words


def test_a_stack_of_one_compressor_twice_decides_as_that_compressor_alone() -> None:
    # Each view doubled: the same geometric mean, the same typical view, the same p-values.
    alone = classify(UNKNOWNS, REFERENCE, "zstd:level=19")
    twice = classify(UNKNOWNS, REFERENCE, "zstd:level=19+zstd:level=19")
    assert [p.decision for p in twice.predictions] == [p.decision for p in alone.predictions]
    assert [p.best for p in twice.predictions] == [p.best for p in alone.predictions]
    assert twice.abstention.test == alone.abstention.test
    assert twice.p_values is not None and alone.p_values is not None
    assert np.allclose(twice.p_values, alone.p_values)


def test_a_stack_needs_the_conditional_method_and_takes_no_score_cut() -> None:
    with pytest.raises(ValueError, match="conditional method only"):
        classify(UNKNOWNS, REFERENCE, STACKED, method="knn")
    with pytest.raises(ValueError, match="give one compressor"):
        classify(UNKNOWNS, REFERENCE, STACKED, threshold=0.9)
    with pytest.raises(ValueError, match="give one compressor"):
        evaluate(REFERENCE, STACKED, threshold=0.9)


def test_evaluate_and_the_estimator_take_a_stack() -> None:
    result = evaluate(REFERENCE, STACKED)
    assert result.compressor == STACKED and len(result.scorings) == 2
    assert result.accuracy >= 0.9
    assert "a stack of 2 compressors" in result.scoring_words
    assert result.as_json()["compressor"] == STACKED and len(result.as_json()["scorings"]) == 2
    model = CompressionClassifier(compressor=STACKED, unknown_label="?")
    model.fit([i.data for i in REFERENCE], [i.label for i in REFERENCE])
    predicted = model.predict([i.data for i in UNKNOWNS])
    truth = [i.label if i.label != "o4" else "?" for i in UNKNOWNS]
    assert np.mean(predicted == np.array(truth, dtype=object)) >= 0.9
    assert model.p_values([i.data for i in UNKNOWNS]).shape == (len(UNKNOWNS), 4)


def _figures(spec: str, right: range | set[int], refused: float = 1.0) -> TaskFigures:
    """Held-out figures of 60 items, those in `right` named right."""
    accuracy = len(right) / 60
    return TaskFigures(spec=spec, seconds=1.0, accuracy=accuracy, refused=refused, auc=1.0,
                       novelty=(1.0 + refused) / 2, merit=accuracy + (1.0 + refused) / 2,
                       significance=0.05, own_score=0.3, items=60,
                       measured_rows=tuple(range(60)), right_rows=tuple(sorted(right)))  # fmt: skip


def test_auto_takes_the_stack_unless_a_single_compressor_is_significantly_better() -> None:
    stack = _figures(LABELLED_STACKS[0], range(57))
    # three held-out items more named right, none fewer: sign test p = 1/8, not significant
    near = _figures("bz2:level=9", range(60))
    reasons: list[str] = []
    assert _pick_labelled([near, stack], 6, reasons) is stack
    assert reasons[0].startswith(f"{LABELLED_STACKS[0]}: chosen: no single compressor")
    assert reasons[1].startswith("bz2:level=9: passed over: not significantly better")
    # eight more and none fewer: p = 1/256, below 0.05 shared among two figures of two
    # candidates; the stack is set aside and the singles ranked as always
    stack = _figures(LABELLED_STACKS[0], range(52))
    far, other = _figures("zstd:level=19", range(60)), _figures("zlib:level=9", range(50))
    reasons = []
    assert _pick_labelled([far, other, stack], 6, reasons) is far
    assert reasons[0].startswith("zstd:level=19: chosen")
    assert reasons[-1].startswith(
        f"{LABELLED_STACKS[0]}: passed over: zstd:level=19 separates the origins significantly"
        " better (8 held-out items more named right, 0 fewer: sign test p = 0.0039)"
    )
    # the same gain with four items lost: p = 0.19, the stack stays
    both_ways = _figures("zstd:level=19", range(4, 60))
    assert _pick_labelled([both_ways, other, stack], 6, []) is stack
    # a missing origin's items refused 60 of 60 against 30 (Fisher's exact test): set aside
    loose = _figures(LABELLED_STACKS[0], range(60), refused=0.5)
    assert _pick_labelled([_figures("lzma:level=9", range(60)), loose], 6, []).spec == (
        "lzma:level=9"
    )


def test_auto_ranks_the_stack_of_the_candidates_it_measured() -> None:
    members = stacked(LABELLED_STACKS[0])
    choice = choose_for_job(REFERENCE, "classify", targets=UNKNOWNS, candidates=list(members))
    specs = [f.spec for f in choice.task]
    assert specs[-1] == LABELLED_STACKS[0] and set(specs[:-1]) == set(members)
    # its figures join its members' held-out views: nothing of its own is compressed, so its
    # measuring time is theirs
    figures = {f.spec: f for f in choice.task}
    assert figures[LABELLED_STACKS[0]].seconds == pytest.approx(
        sum(figures[m].seconds for m in members)
    )
    # every figure is named in the reasons, the chosen one first
    assert choice.reasons[0].startswith(f"{choice.spec}: chosen")
    assert all(any(r.startswith(f"{s}: ") for r in choice.reasons) for s in specs)
    # one member alone: no stack to rank
    alone = choose_for_job(REFERENCE, "classify", targets=UNKNOWNS, candidates=[members[0]])
    assert [f.spec for f in alone.task] == [members[0]]


def test_the_command_line_classifies_with_a_stack_and_refuses_one_elsewhere(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    known = tmp_path / "known"
    for item in REFERENCE:
        (known / str(item.label)).mkdir(parents=True, exist_ok=True)
        (known / str(item.label) / f"{item.name}.log").write_bytes(item.data)
    paths = []
    for item in UNKNOWNS[:6]:
        paths.append(tmp_path / f"{item.name}.log")
        paths[-1].write_bytes(item.data)
    argv = ["classify", "--reference", str(known), "-c", STACKED, "--no-cache", *map(str, paths)]
    assert cli.main(argv) == 0
    out, _ = capsys.readouterr()
    assert "Scores: a stack of 2 compressors" in out
    assert cli.main(["matrix", "-c", STACKED, "--no-cache", *map(str, paths)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err[-1].startswith("kinpress: error:") and "classify and report --reference" in err[-1]
    assert "Traceback" not in "\n".join(err)


def test_a_report_with_a_reference_classifies_with_the_stack_and_measures_with_its_first(
    tmp_path: Path,
) -> None:
    known = tmp_path / "known"
    for item in REFERENCE[::2]:
        (known / str(item.label)).mkdir(parents=True, exist_ok=True)
        (known / str(item.label) / f"{item.name}.log").write_bytes(item.data)
    new = tmp_path / "new"
    new.mkdir()
    for item in UNKNOWNS[::3]:
        (new / f"{item.name}.log").write_bytes(item.data)
    data, page = tmp_path / "r.json", tmp_path / "r.html"
    argv = ["report", "--reference", str(known), str(new), "-c", STACKED, "--no-cache",
            "--quiet"]  # fmt: skip
    assert cli.main([*argv, "--json", "-o", str(data)]) == 0
    doc = json.loads(data.read_text())
    assert doc["classification"]["compressor"] == STACKED
    assert len(doc["classification"]["scorings"]) == 2
    assert doc["matrix"]["compressor"] == "zstd:level=19"
    assert cli.main([*argv, "-o", str(page)]) == 0
    html = page.read_text()
    assert "items compared by compression with\n    <code>zstd:level=19</code>" in html
    assert "A stack of compressors: the origins are decided on the views of all" in html


def test_each_phase_of_a_stack_names_its_compressor() -> None:
    phases: set[str] = set()
    classify(UNKNOWNS, REFERENCE, STACKED, progress=lambda phase, done, total: phases.add(phase))
    zstd, zlib = stacked(STACKED)
    assert any(p.endswith(f"(held-out reference, content, {zstd})") for p in phases), phases
    assert any(p.endswith(f"(held-out reference, shape, {zlib})") for p in phases), phases
    assert any(p.startswith("pairs (items") and p.endswith(f", {zlib})") for p in phases), phases
    assert any(p.endswith("(nearest reference items)") for p in phases), phases
    assert not any("))" in p for p in phases), phases

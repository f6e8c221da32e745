"""The classify command on the demo logs: known systems named, a stranger refused."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from conftest import DATASETS
from kinpress import cli

LOGS = DATASETS / "quendle-logs" / "logs"
FAST = ["-c", "zstd:level=19", "--no-cache", "--quiet", "--split", "lines:100"]


def _blocks(name: str, parity: int) -> str:
    """Every other 200-line block of a demo log; the systems change phase part way through
    (datasets/quendle-logs/phases.tsv), so reference and unknowns interleave."""
    lines = (LOGS / f"{name}.log").read_text().splitlines(keepends=True)
    return "".join(
        "".join(lines[k : k + 200]) for k in range(0, len(lines), 200) if (k // 200) % 2 == parity
    )


@pytest.fixture
def reference(tmp_path: Path) -> Path:
    """known/<system>/even.log from three demo systems; the fourth system stays out."""
    root = tmp_path / "known"
    for name in ("brisquet", "tarnwheel", "fenmeter"):
        (root / name).mkdir(parents=True)
        (root / name / "even.log").write_text(_blocks(name, 0))
    return root


def _odd_blocks(name: str, tmp_path: Path) -> Path:
    path = tmp_path / f"{name}-later.log"
    path.write_text(_blocks(name, 1))
    return path


def test_known_systems_are_named_and_a_stranger_is_unknown(
    reference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Ground truth: the demo generator's file-to-system map (datasets/quendle-logs/labels.tsv).
    unknowns = [_odd_blocks(n, tmp_path) for n in ("tarnwheel", "fenmeter", "siltcache")]
    code = cli.main(["classify", "--reference", str(reference), *map(str, unknowns), "--json",
                     *FAST])  # fmt: skip
    assert code == 0
    found = json.loads(capsys.readouterr().out)
    assert {tuple(sorted(p)) for p in found} == {
        ("best", "candidates", "confidence", "credibility", "decision", "distance", "hash",
         "item", "nearest", "p_values", "path", "predicted", "scores")
    }  # fmt: skip
    assert {p["decision"] for p in found} <= {"named", "ambiguous", "unknown"}
    assert all(set(p["p_values"]) == {"brisquet", "fenmeter", "tarnwheel"} for p in found)
    for name, expected in (
        ("tarnwheel", "tarnwheel"),
        ("fenmeter", "fenmeter"),
        ("siltcache", "unknown"),
    ):
        predicted = [p["predicted"] for p in found if p["item"].startswith(f"{name}-later.log#")]
        assert len(predicted) == 10
        # siltcache is not in the reference and must come back unknown
        assert sum(p == expected for p in predicted) >= 8, (name, predicted)


def test_text_output_states_the_guarantee_and_the_caution(
    reference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unknowns = [_odd_blocks(n, tmp_path) for n in ("brisquet", "siltcache")]
    argv = ["classify", "--reference", str(reference), *map(str, unknowns), "-c", "zstd:level=19",
            "--no-cache", "--split", "lines:100", "--significance", "0.1"]  # fmt: skip
    assert cli.main(argv) == 0
    out, err = capsys.readouterr()
    assert "refused (unknown or ambiguous) at a rate of at most 0.1" in out and "at most 0.1" in err
    # the terminal gets one short line; the rate's conditions are said once, in the output
    summary = [line for line in err.splitlines() if line.startswith("kinpress: classify:")]
    assert len(summary) == 1 and "provided new items" not in summary[0]
    assert "named" in summary[0] and len(summary[0]) < 250
    assert out.count("provided new items differ from the reference") == 1
    assert "evidence for a person to review, not proof" in out
    assert out.splitlines()[0].split() == ["item", "origin", "p-value", "confidence", "nearest",
                                           "distance"]  # fmt: skip
    assert re.search(r"^siltcache-later\.log#1 +unknown ", out, re.MULTILINE)


def test_significance_and_threshold_together_are_a_usage_error(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    argv = ["classify", "--reference", str(reference), "x.log", *FAST,
            "--significance", "0.05", "--threshold", "0.8"]  # fmt: skip
    assert cli.main(argv) == 2
    assert "not both" in capsys.readouterr().err
    assert cli.main(["classify", "--reference", str(reference), "x.log", *FAST,
                     "--significance", "2"]) == 2  # fmt: skip
    assert "--significance 2.0: give a rate between 0 and 1" in capsys.readouterr().err


def test_evaluate_reports_accuracy_refusals_and_a_confusion_table(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(reference), "--evaluate", "--json",
                     *FAST]) == 0  # fmt: skip
    report = json.loads(capsys.readouterr().out)
    assert report["accuracy"] >= 0.9
    assert report["refusal_rate"] <= 0.1
    assert report["confusion"]["columns"][-2:] == ["ambiguous", "unknown"]
    assert set(report["left_out_unknown"]) == set(report["origins"])
    assert "at most 0.05" in report["abstention"]["guarantee"]
    chunks = sum(-(-len(p.read_text().splitlines()) // 100) for p in reference.glob("*/even.log"))
    assert sum(map(sum, report["confusion"]["counts"])) == chunks
    assert cli.main(["classify", "--reference", str(reference), "--evaluate", *FAST]) == 0
    text = capsys.readouterr().out
    assert text.startswith("held-out blocks of the reference (3 per origin): named right")


def test_classify_needs_unknowns_or_evaluate(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(reference), *FAST]) == 2
    assert "--evaluate" in capsys.readouterr().err


def test_only_empty_unknowns_are_an_error_before_auto_calibrates(
    reference: Path,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    import kinpress.calibration.auto as auto

    def calibrating(*args: object, **kwargs: object) -> None:
        raise AssertionError("auto calibrated for inputs that hold nothing to classify")

    monkeypatch.setattr(auto, "choose_for_job", calibrating)
    empty = tmp_path / "empty.log"
    empty.write_bytes(b"")
    argv = ["classify", "--reference", str(reference), str(empty), "--no-cache", "--quiet"]
    assert cli.main(argv) == 2  # -c auto, the default
    err = capsys.readouterr().err
    assert "empty.log: empty file; left out" in err
    assert err.strip().splitlines()[-1] == f"kinpress: error: no items to classify in {empty}"


def test_a_reference_that_is_not_a_folder_is_an_error(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(tmp_path / "none"), "x.log", *FAST]) == 2
    assert "reference must be a folder" in capsys.readouterr().err


@pytest.mark.parametrize("estimate", [0.93, 0.12])
def test_the_summary_line_says_how_a_missing_origin_would_fare(
    reference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch, estimate: float,
) -> None:  # fmt: skip
    # The one line on the terminal carries the reference's estimate of the share of a missing
    # origin's items refused, and where it is low, that most would be named as a known origin.
    from kinpress.origins.conformal import Abstention

    monkeypatch.setattr(Abstention, "missing_refused", property(lambda self: estimate))
    unknowns = [_odd_blocks("brisquet", tmp_path)]
    argv = ["classify", "--reference", str(reference), *map(str, unknowns), "-c", "zstd:level=19",
            "--no-cache", "--split", "lines:100"]  # fmt: skip
    assert cli.main(argv) == 0
    summary = [ln for ln in capsys.readouterr().err.splitlines() if "kinpress: classify:" in ln]
    assert len(summary) == 1 and len(summary[0]) < 250
    assert "at most 0.05 of known origins' items" in summary[0]
    assert f"about {estimate:.0%} of a missing origin's (estimated" in summary[0]
    assert ("most named as a known one" in summary[0]) == (estimate < 0.5)


def test_a_reference_that_cannot_serve_is_refused_before_auto_measures(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # An origin of one item cannot be held out: said at once, not after -c auto has measured.
    (reference / "lonely").mkdir()
    (reference / "lonely" / "only.log").write_text(_blocks("siltcache", 0)[:2000])
    unknown = reference / "brisquet" / "even.log"
    argv = ["classify", "--reference", str(reference), str(unknown), "--no-cache", "--split",
            "lines:100"]  # fmt: skip
    assert cli.main(argv) == 2
    err = capsys.readouterr().err
    assert "auto: calibrating" not in err
    assert "lonely has one (give a threshold and a compressor to classify without it)" in err
    # with a compressor and a threshold nothing is held out, and the origin of one item serves
    argv += ["-c", "zstd:level=19", "--threshold", "0.9", "--quiet"]
    assert cli.main(argv) == 0


def test_decide_by_forces_the_deciding_test(
    reference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A user whose later data drifts may prefer the separation test to the reference's choice;
    # the rate still holds, but no missing origin's share is estimated for a test not chosen.
    unknowns = [_odd_blocks(n, tmp_path) for n in ("tarnwheel", "siltcache")]
    argv = ["classify", "--reference", str(reference), *map(str, unknowns), "-c", "zstd:level=19",
            "--no-cache", "--split", "lines:100", "--json"]  # fmt: skip
    assert cli.main([*argv, "--decide-by", "separation"]) == 0
    out, err = capsys.readouterr()
    assert "(the separation test)" in err and "missing origin's" not in err
    found = json.loads(out)
    assert sum(p["predicted"] == "tarnwheel" for p in found) >= 8
    evaluate = ["classify", "--reference", str(reference), "--evaluate", "--json", *FAST]
    assert cli.main([*evaluate, "--decide-by", "fit"]) == 0
    assert json.loads(capsys.readouterr().out)["abstention"]["test"] == "fit"
    assert cli.main([*argv, "--decide-by", "fit", "--threshold", "0.9"]) == 2
    assert "give --decide-by or --threshold, not both" in capsys.readouterr().err
    with pytest.raises(SystemExit) as stop:  # not a test: argparse refuses it
        cli.main([*argv, "--decide-by", "vote"])
    assert stop.value.code == 2


def test_classify_in_python_takes_a_test() -> None:
    from kinpress import Item, classify

    def text(origin: int, seed: int) -> bytes:
        log = _blocks(("brisquet", "tarnwheel", "fenmeter")[origin], 0)
        return log[seed * 3000 : seed * 3000 + 3000].encode()

    reference = [Item(f"r{o}-{s}", text(o, s), "demo", label=str(o)) for o in range(3)
                 for s in range(4)]  # fmt: skip
    unknowns = [Item("u", text(1, 5), "demo")]
    result = classify(unknowns, reference, "zstd:level=19", test="contrast", significance=0.1)
    assert result.abstention.test == "contrast" and result.abstention.missing_refused is None
    with pytest.raises(ValueError, match="unknown test"):
        classify(unknowns, reference, "zstd:level=19", test="vote")
    with pytest.raises(ValueError, match="not both"):
        classify(unknowns, reference, "zstd:level=19", test="fit", threshold=0.9)

"""The classify command on the demo logs: known systems named, a stranger refused."""

from __future__ import annotations

import json
import os
import random
import re
import warnings
from pathlib import Path

import pytest

from conftest import DATASETS
from kinpress import Item, cli

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
        ("best", "beyond_rate", "candidates", "confidence", "credibility", "decision",
         "distance", "hash", "item", "nearest", "p_values", "path", "predicted", "scores",
         "unknown_group")
    }  # fmt: skip
    # The unknown chunks grouped by their own NCD, numbered from 1: the stranger's by its two
    # phases (datasets/quendle-logs/phases.tsv: serving to line 1200, then resharding; its odd
    # blocks give chunks 1-6 of serving and 7-10 of resharding)
    assert all((p["unknown_group"] is None) == (p["decision"] != "unknown") for p in found)
    stranger = [p["unknown_group"] for p in found if p["item"].startswith("siltcache-later")]
    assert stranger == [stranger[0]] * 6 + [stranger[6]] * 4 and stranger[0] != stranger[6]
    assert {stranger[0], stranger[6]} == {1, 2}
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
    # the unknown chunks grouped, in the output and counted on the summary line
    assert re.search(r"^The \d+ unknown items, grouped by their own NCD", out, re.MULTILINE)
    assert re.search(r"^  group 1: \d+ items \(siltcache-later\.log#", out, re.MULTILINE)
    assert re.search(r"10 unknown \(in 2 groups\)", err)  # the stranger's two phases


def test_files_of_one_name_are_shown_by_their_place(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A code tree holds many __init__.py: names made unique by number (__init__.py~2) tell a
    # reader nothing, so files of one name are named by their path below their folder
    # (load_items), the unknown ones and the nearest reference ones alike, in the text and the
    # JSON; a file of a name of its own keeps its name.
    root = tmp_path / "known"
    for name in ("brisquet", "tarnwheel", "fenmeter"):
        lines = _blocks(name, 0).splitlines(keepends=True)
        for k in range(6):  # known/<system>/<part>/chunk.log: six files of one name each
            folder = root / name / f"part{k}"
            folder.mkdir(parents=True)
            (folder / "chunk.log").write_text("".join(lines[k * 100 : (k + 1) * 100]))
    new = tmp_path / "new"
    for folder, name in (("east", "tarnwheel"), ("west", "fenmeter")):
        (new / folder).mkdir(parents=True)
        (new / folder / "later.log").write_text("".join(_blocks(name, 1).splitlines(True)[:100]))
    (new / "alone.log").write_text("".join(_blocks("brisquet", 1).splitlines(True)[:100]))
    argv = ["classify", "--reference", str(root), str(new), "-c", "zstd:level=19",
            "--no-cache", "--quiet"]  # fmt: skip
    assert cli.main(argv) == 0
    rows = {line.split()[0]: line.split() for line in capsys.readouterr().out.splitlines()[1:4]}
    names = {os.path.join("east", "later.log"), os.path.join("west", "later.log"), "alone.log"}
    assert set(rows) == names
    for row in rows.values():  # system/partK/chunk.log
        nearest = row[-2].split("/", 1)
        assert re.fullmatch(r"part\d", nearest[1].split(os.sep)[0]), row
        assert nearest[1].endswith("chunk.log") and "~" not in row[-2]
    assert cli.main([*argv, "--json"]) == 0
    found = json.loads(capsys.readouterr().out)
    assert {p["item"] for p in found} == names


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
    assert "lonely has one: add a file, cut files into parts (--split lines:N), or give" in err
    assert "a threshold and a compressor to classify without it" in err
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


def _words(seed: int) -> list[str]:
    r = random.Random(seed)
    return ["".join(r.choice("bcdfghklmnprstvz") + r.choice("aeiou") for _ in range(3))
            for _ in range(200)]  # fmt: skip


def _chunk(system: str, vocabulary: list[str], k: int) -> str:
    """60 lines an invented system writes, with words from `vocabulary`."""
    r = random.Random(k * 1000 + len(system))
    w = lambda: r.choice(vocabulary)  # noqa: E731
    lines = {
        "kiln": lambda: f"kiln[{400 + k}]: valve {w()} opened by {w()} for {w()} {w()}",
        "sluice": lambda: f"[sluice] level={r.randrange(100)} gate={w()} state=OPEN",
        "ferry": lambda: f'{{"svc": "ferry", "msg": "docked {w()}", "n": {r.randrange(999)}}}',
    }[system]
    return "".join(lines() + "\n" for _ in range(60))


def _drifting_logs(root: Path, drift: bool) -> tuple[Path, Path]:
    """Invented logs of three systems, 9 reference chunks each and 10 others drawn alike, each
    between two reference ones; with `drift` the kiln's others name valves and crews the
    reference never did, in the same form (as a package manager's log names new packages)."""
    known, later = root / "known", root / "later"
    later.mkdir(parents=True)
    for seed, system in enumerate(("kiln", "sluice", "ferry")):
        (known / system).mkdir(parents=True)
        for k in range(0, 18, 2):
            (known / system / f"{k:02d}.log").write_text(_chunk(system, _words(seed), k))
        vocabulary = _words(99) if drift and system == "kiln" else _words(seed)
        for k in range(1, 21, 2):
            (later / f"{system}-{k:02d}.log").write_text(_chunk(system, vocabulary, k))
    return known, later


def test_refusals_concentrated_on_one_origin_are_called_out(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The mix weighs the content view apart, so it refuses later kiln chunks whose words are all
    # new though their form is the kiln's; 10 of 10 refused is far beyond a rate of 0.05
    # (binomial tail 0.05^10). The output says so and names the way to keep them.
    from kinpress.origins import RefusalWarning, classify, reference_items

    known, later = _drifting_logs(tmp_path / "drift", drift=True)
    reference = reference_items(known)
    items = sorted(later.iterdir())
    unknowns = [Item(p.name, p.read_bytes(), str(p)) for p in items]
    with pytest.warns(RefusalWarning, match=r"kiln: 10 of the 10 items it fits best"):
        found = classify(unknowns, reference, "zstd:level=19", test="mix")
    assert [(c.origin, c.refused, c.fitting) for c in found.concentrated] == [("kiln", 10, 10)]
    marked = {p.item for p in found.predictions if p.beyond_rate}
    assert marked == {f"kiln-{k:02d}.log" for k in range(1, 21, 2)}
    assert found.concentrated[0].p == pytest.approx(0.05**10)
    kept = classify(unknowns, reference, "zstd:level=19", test="separation")
    assert all(p.decision == "named" for p in kept.predictions) and kept.concentrated == ()
    argv = ["classify", "--reference", str(known), str(later), "-c", "zstd:level=19",
            "--no-cache", "--decide-by", "mix"]  # fmt: skip
    assert cli.main(argv) == 0
    err = capsys.readouterr().err
    assert "kinpress: warning: kiln: 10 of the 10 items it fits best were refused" in err
    assert "deciding by the separation test keeps such items (--decide-by separation;" in err
    assert cli.main([*argv, "--quiet", "--json"]) == 0  # JSON marks the items counted
    rows = json.loads(capsys.readouterr().out)
    assert sum(r["beyond_rate"] for r in rows) == 10
    assert all(r["beyond_rate"] == r["item"].startswith("kiln") for r in rows)
    saved = tmp_path / "found.tsv"  # a saved result carries it too
    assert cli.main([*argv, "--quiet", "-o", str(saved)]) == 0
    assert "\nWarning: kiln: 10 of the 10 items it fits best were refused" in saved.read_text()
    # the report says it too, in its data and on the page
    data, page = tmp_path / "r.json", tmp_path / "r.html"
    report = ["report", "--reference", str(known), str(later), "-c", "zstd:level=19",
              "--no-cache", "--quiet", "--decide-by", "mix"]  # fmt: skip
    assert cli.main([*report, "--json", "-o", str(data)]) == 0
    noted = json.loads(data.read_text())["classification"]["concentrated"]
    assert [(n["origin"], n["refused"], n["fitting"]) for n in noted] == [("kiln", 10, 10)]
    assert cli.main([*report, "-o", str(page)]) == 0
    assert "Warning: kiln: 10 of the 10 items it fits best were refused" in page.read_text()
    # the estimator's predict warns alike
    from kinpress.origins import CompressionClassifier

    model = CompressionClassifier("zstd:level=19", test="mix", unknown_label="?")
    model.fit([i.data for i in reference], [i.label for i in reference])
    with pytest.warns(RefusalWarning, match=r"kiln: 10 of the 10 items it fits best"):
        guessed = model.predict([i.data for i in unknowns])
    assert sum(g == "?" for g in guessed) >= 10
    # without the drift nothing is called out
    known, later = _drifting_logs(tmp_path / "steady", drift=False)
    steady = [Item(p.name, p.read_bytes(), str(p)) for p in sorted(later.iterdir())]
    with warnings.catch_warnings():
        warnings.simplefilter("error", RefusalWarning)
        quiet = classify(steady, reference_items(known), "zstd:level=19", test="mix")
    assert quiet.concentrated == ()


def test_evaluate_names_an_origin_whose_blocks_are_refused_beyond_the_rate(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The kiln's reference changes its words two thirds of the way through (its last block is
    # held out against the first two): the mix refuses that block far beyond a rate of 0.05.
    from kinpress.origins import evaluate, reference_items

    for drift in (True, False):
        known = tmp_path / f"known-{drift}"
        for seed, system in enumerate(("kiln", "sluice", "ferry")):
            (known / system).mkdir(parents=True)
            for k in range(12):
                vocabulary = _words(99) if drift and system == "kiln" and k >= 8 else _words(seed)
                (known / system / f"{k:02d}.log").write_text(_chunk(system, vocabulary, k))
        result = evaluate(reference_items(known), "zstd:level=19", test="mix")
        names = [origin for origin, *_ in result.drifting]
        assert names == (["kiln"] if drift else []), result.drifting
    argv = ["classify", "--reference", str(tmp_path / "known-True"), "--evaluate", "-c",
            "zstd:level=19", "--no-cache", "--quiet", "--decide-by", "mix"]  # fmt: skip
    assert cli.main(argv) == 0
    out = capsys.readouterr().out
    assert re.search(r"warning: kiln: \d+ of its 12 held-out items were refused", out)
    assert cli.main([*argv, "--json"]) == 0
    noted = json.loads(capsys.readouterr().out)["drifting"]
    assert [n["origin"] for n in noted] == ["kiln"] and noted[0]["items"] == 12

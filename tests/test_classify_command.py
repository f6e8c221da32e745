"""The classify command on the demo logs: known systems named, a stranger refused."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from conftest import DATASETS
from kinpress import cli

LOGS = DATASETS / "quendle-logs" / "logs"
FAST = ["-c", "zstd:level=19", "--no-cache", "--quiet", "--split", "lines:200"]


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
        ("confidence", "distance", "item", "nearest", "predicted")
    }
    for name, expected in (
        ("tarnwheel", "tarnwheel"),
        ("fenmeter", "fenmeter"),
        ("siltcache", None),
    ):
        predicted = [p["predicted"] for p in found if p["item"].startswith(f"{name}-later.log#")]
        assert len(predicted) == 5
        # expected None: siltcache is not in the reference and must come back unknown
        assert sum(p == expected for p in predicted) >= 4, (name, predicted)


def test_a_spread_out_origin_gets_its_own_cut_and_keeps_its_items(
    reference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # At zstd level 9 the noisy JSON-lines system (brisquet) and fenmeter score above the cut
    # shared by all origins; their own cuts are raised and their later chunks are still named.
    unknowns = [_odd_blocks(n, tmp_path) for n in ("brisquet", "fenmeter", "siltcache")]
    argv = ["classify", "--reference", str(reference), *map(str, unknowns), "--json",
            "-c", "zstd:level=9", "--no-cache", "--split", "lines:200"]  # fmt: skip
    assert cli.main(argv) == 0
    out, err = capsys.readouterr()
    assert "raised for brisquet" in err and "keeps 90% of its own reference items" in err
    found = json.loads(out)
    for name, expected in (("brisquet", "brisquet"), ("fenmeter", "fenmeter"), ("siltcache", None)):
        predicted = [p["predicted"] for p in found if p["item"].startswith(f"{name}-later.log#")]
        assert sum(p == expected for p in predicted) >= 4, (name, predicted)
    # Leave-one-out on the reference: one cut for all (--min-accepted 0) refuses more.
    evaluate = ["classify", "--reference", str(reference), "--evaluate", "--json",
                "-c", "zstd:level=9", "--no-cache", "--quiet", "--split", "lines:200"]  # fmt: skip
    rates = []
    for share in ("0.9", "0"):
        assert cli.main([*evaluate, "--min-accepted", share]) == 0
        rates.append(json.loads(capsys.readouterr().out)["abstention_rate"])
    assert rates[0] < rates[1]


def test_evaluate_reports_accuracy_and_a_confusion_table(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(reference), "--evaluate", "--json",
                     *FAST]) == 0  # fmt: skip
    report = json.loads(capsys.readouterr().out)
    assert report["accuracy"] >= 0.9
    assert report["confusion"]["columns"][-1] == "unknown"
    cuts = report["threshold"]["per_origin"]
    assert set(cuts) == set(report["origins"])
    assert all(c >= report["threshold"]["value"] for c in cuts.values())
    chunks = sum(-(-len(p.read_text().splitlines()) // 200) for p in reference.glob("*/even.log"))
    assert sum(map(sum, report["confusion"]["counts"])) == chunks


def test_a_share_outside_zero_to_one_is_a_usage_error(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    argv = ["classify", "--reference", str(reference), "--evaluate", *FAST, "--min-accepted", "2"]
    assert cli.main(argv) == 2
    assert "--min-accepted 2.0: give a share between 0 and 1" in capsys.readouterr().err


def test_classify_needs_unknowns_or_evaluate(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(reference), *FAST]) == 2
    assert "--evaluate" in capsys.readouterr().err


def test_a_reference_that_is_not_a_folder_is_an_error(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(tmp_path / "none"), "x.log", *FAST]) == 2
    assert "reference must be a folder" in capsys.readouterr().err

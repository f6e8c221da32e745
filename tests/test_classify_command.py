"""The classify command on the demo logs: known systems named, a stranger refused."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from conftest import DATASETS
from kinpress import cli

LOGS = DATASETS / "quendle-logs" / "logs"
# The default compressor (zstd level 19, primed): at level 9 the noisy JSON-lines system's own
# scores rise above the single reference-wide threshold and its chunks are refused.
FAST = ["--no-cache", "--quiet", "--split", "lines:200"]


@pytest.fixture
def reference(tmp_path: Path) -> Path:
    """known/<system>/first-half.log from three demo systems; the fourth stays out."""
    root = tmp_path / "known"
    for name in ("brisquet", "tarnwheel", "fenmeter"):
        lines = (LOGS / f"{name}.log").read_text().splitlines(keepends=True)
        (root / name).mkdir(parents=True)
        (root / name / "first.log").write_text("".join(lines[:1000]))
    return root


def _second_half(name: str, tmp_path: Path) -> Path:
    lines = (LOGS / f"{name}.log").read_text().splitlines(keepends=True)
    path = tmp_path / f"{name}-later.log"
    path.write_text("".join(lines[-400:]))
    return path


def test_known_systems_are_named_and_a_stranger_is_unknown(
    reference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Ground truth: the demo generator's file-to-system map (datasets/quendle-logs/labels.tsv).
    unknowns = [_second_half(n, tmp_path) for n in ("tarnwheel", "fenmeter", "siltcache")]
    code = cli.main(["classify", "--reference", str(reference), *map(str, unknowns), "--json",
                     *FAST])  # fmt: skip
    assert code == 0
    found = json.loads(capsys.readouterr().out)
    assert {tuple(sorted(p)) for p in found} == {
        ("confidence", "distance", "item", "nearest", "predicted")
    }
    by_file = {p["item"].partition("#")[0]: p["predicted"] for p in found}
    assert by_file["tarnwheel-later.log"] == "tarnwheel"
    assert by_file["fenmeter-later.log"] == "fenmeter"
    assert by_file["siltcache-later.log"] is None  # not in the reference


def test_evaluate_reports_accuracy_and_a_confusion_table(
    reference: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["classify", "--reference", str(reference), "--evaluate", "--json",
                     *FAST]) == 0  # fmt: skip
    report = json.loads(capsys.readouterr().out)
    assert report["accuracy"] >= 0.9
    assert report["confusion"]["columns"][-1] == "unknown"
    assert sum(map(sum, report["confusion"]["counts"])) == 15  # 3 systems x 5 chunks


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

"""The calibrate command and -c auto, end to end on the demo frogs."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from conftest import DATASETS
from kinpress import cli

GENOMES = DATASETS / "karsvell-frogs" / "genomes"
QUICK = ["-c", "zlib:level=9", "-c", "zstd:level=3", "-c", "bz2:level=9", "--quiet"]


def test_calibrate_report_passes_over_compressors_too_small_for_the_pairs(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    plot = tmp_path / "calib.png"
    assert cli.main(["calibrate", str(GENOMES), *QUICK, "--json", "--plot", str(plot)]) == 0
    report = json.loads(capsys.readouterr().out)
    assert list(report) == ["seed", "inputs", "compressors", "recommended", "reasons"]
    assert [c["spec"] for c in report["compressors"]] == [
        "zlib:level=9,window=15", "zstd:level=3", "bz2:level=9",
    ]  # fmt: skip
    # 16 kB genomes, 33 kB pairs: past deflate's 32 KiB window (RFC 1951) for the pair
    assert report["recommended"] == "zstd:level=3"
    assert any(r.startswith("zlib") and "passed over" in r for r in report["reasons"])
    assert plot.read_bytes()[:4] == b"\x89PNG"


def test_calibrate_text_names_the_recommendation(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["calibrate", str(GENOMES), *QUICK]) == 0
    out = capsys.readouterr().out
    assert "recommended: zstd:level=3" in out
    assert out.splitlines()[0].split()[:2] == ["compressor", "identity"]


def test_auto_compressor_is_chosen_and_used(capsys: pytest.CaptureFixture[str]) -> None:
    code = cli.main(["matrix", str(GENOMES), "-c", "auto", "--budget", "60", "--no-cache",
                     "--format", "json"])  # fmt: skip
    captured = capsys.readouterr()
    assert code == 0
    chosen = json.loads(captured.out)["compressor"]
    assert f"auto: chose {chosen}" in captured.err
    assert not chosen.startswith(("zlib", "bz2"))  # their windows are too small for the pairs


def test_calibrate_rejects_a_bad_spec_before_any_work(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["calibrate", "-c", "zstd:level=40"]) == 2
    assert "out of range" in capsys.readouterr().err


def test_auto_is_the_default_and_its_choice_is_cached(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    cache = tmp_path / "c.sqlite"
    args = ["matrix", str(GENOMES), "--cache", str(cache), "--format", "json", "--budget", "60"]
    assert cli.main(args) == 0
    first = capsys.readouterr()
    assert "auto: calibrating" in first.err
    assert cli.main(args) == 0
    again = capsys.readouterr()
    assert "auto: the choice for these inputs is in the cache" in again.err
    assert json.loads(again.out)["compressor"] == json.loads(first.out)["compressor"]


def test_auto_warns_when_even_its_choice_cannot_hold_the_largest_pair(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    import kinpress.calibration.auto as calibration  # where resolve_auto looks it up

    class Result:
        reliable_up_to_bytes = 1000
        reliable_capped = False
        window_bytes = 32768

    class Report:
        def result(self, spec: str) -> Result:
            return Result()

        def as_json(self) -> dict[str, object]:  # kept with the choice, for a report's table
            return {}

    class Choice:
        spec = "zlib:level=9"
        report = Report()
        reasons = ("estimated job time with zlib:level=9: under 1 s",)

    monkeypatch.setattr(calibration, "choose_for_job", lambda *a, **k: Choice())
    assert cli.main(["matrix", str(GENOMES), "--no-cache", "--format", "json"]) == 0
    err = capsys.readouterr().err
    assert "warning: zlib:level=9: reliable up to 1,000 bytes, below the largest pair" in err


def test_classify_auto_chooses_by_the_task_and_says_why(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    logs = DATASETS / "quendle-logs" / "logs"
    for name in ("brisquet", "tarnwheel", "fenmeter"):
        (tmp_path / "known" / name).mkdir(parents=True)
        lines = (logs / f"{name}.log").read_text().splitlines(keepends=True)
        (tmp_path / "known" / name / "first.log").write_text("".join(lines[:1000]))
    cache = str(tmp_path / "c.sqlite")
    argv = ["classify", "--reference", str(tmp_path / "known"), "--evaluate", "--split",
            "lines:100", "--budget", "60", "--cache", cache, "--json"]  # fmt: skip
    assert cli.main(argv) == 0
    err = capsys.readouterr().err
    assert "auto: calibrating the compressors on these inputs for classify" in err
    # a single compressor that separates best, or the stack none separates significantly better
    assert re.search(
        r"auto: chose \S+: (it tells the reference's 3 origins apart best|no single compressor"
        r" separates the reference's 3 origins significantly better) on held-out items",
        err,
    ), err
    assert cli.main(argv) == 0
    assert "auto: the choice for these inputs is in the cache" in capsys.readouterr().err

"""The derived command: a copy and an excerpt found among unrelated files, with the caution."""

from __future__ import annotations

import csv
import io
import json
import os
import random
from pathlib import Path

import pytest

from kinpress import cli
from kinpress.formats import FINDING_COLUMNS
from kinpress.items import unescape_name

WORDS = [f"w{k}" for k in range(400)]
FAST = ["-c", "zstd:level=3", "--no-cache", "--quiet"]


def _text(seed: int, lines: int = 120) -> str:
    rng = random.Random(seed)
    weights = [1 / (k + 1) for k in range(len(WORDS))]  # Zipf-like: one shared vocabulary
    return "".join(" ".join(rng.choices(WORDS, weights, k=10)) + "\n" for _ in range(lines))


@pytest.fixture
def share(tmp_path: Path) -> Path:
    folder = tmp_path / "share"
    folder.mkdir()
    for k in range(8):
        (folder / f"doc{k}.txt").write_text(_text(k))
    original = _text(100)
    (folder / "report.txt").write_text(original)
    (folder / "report-copy.txt").write_text(original)
    (folder / "report-part.txt").write_text("".join(original.splitlines(True)[30:70]))
    return folder


def _pair(finding: dict[str, object]) -> frozenset[object]:
    return frozenset((finding["a"], finding["b"]))


def test_copies_and_excerpts_are_found_with_their_direction(
    share: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["derived", str(share), "--json", *FAST]) == 0
    findings = json.loads(capsys.readouterr().out)
    keys = {"a", "b", "relation", "a_explained_by_b", "b_explained_by_a", "score", "fpr"}
    keys |= {"a_shared_in_order", "b_shared_in_order", "passages"}
    keys |= {"a_path", "b_path", "a_hash", "b_hash"}
    assert all(set(f) == keys for f in findings)
    by_pair = {_pair(f): f for f in findings}
    copy = by_pair[frozenset(("report.txt", "report-copy.txt"))]
    assert copy["relation"] == "identical"
    part = by_pair[frozenset(("report.txt", "report-part.txt"))]
    container = part["a"] if part["relation"] == "a_contains_b" else part["b"]
    assert part["relation"] in ("a_contains_b", "b_contains_a")
    assert container == "report.txt"
    assert not any(f["a"].startswith("doc") and f["b"].startswith("doc") for f in findings)


def test_text_output_groups_families_and_carries_the_caution(
    share: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["derived", str(share), "--exhaustive", *FAST]) == 0
    out = capsys.readouterr().out
    assert out.startswith("family 1: ")
    assert "report-copy.txt" in out.splitlines()[0]
    assert "evidence for a person to review, not proof of copying" in out


def test_text_output_says_where_files_of_one_name_lie(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A code tree holds many files of one name (dirent.go in every system's folder): they are
    # named by their path below the folder the inputs share (load_items), so the text says
    # which file each is, without --json.
    tree = tmp_path / "tree"
    for folder in ("alpha/util", "beta/util", "gamma"):
        (tree / folder).mkdir(parents=True)
    original = _text(7)
    (tree / "alpha" / "util" / "notes.txt").write_text(original)
    (tree / "beta" / "util" / "notes.txt").write_text(original.replace("w3 ", "w4 ", 2))
    (tree / "gamma" / "readme.txt").write_text(original[: len(original) // 2])
    for k in range(4):
        (tree / "gamma" / f"other{k}.txt").write_text(_text(20 + k))
    assert cli.main(["derived", str(tree), "--exhaustive", *FAST]) == 0
    lines = capsys.readouterr().out.splitlines()
    family = "family 1: alpha/util/notes.txt, beta/util/notes.txt, readme.txt"
    assert lines[0] == family.replace("/", os.sep)  # readme.txt: a name of its own
    assert lines[1].startswith("  alpha/util/notes.txt  near_copy  beta".replace("/", os.sep))
    # a set with no name twice keeps the file names
    assert cli.main(["derived", str(tree / "gamma"), str(tree / "alpha"), *FAST]) == 0
    out = capsys.readouterr().out
    assert out.startswith("family 1: notes.txt, readme.txt\n")


def test_a_large_family_lists_how_each_file_joins_it_and_counts_the_rest(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # 24 generated files of one template made 276 findings, 552 lines of text: a family of more
    # than LISTED_PAIRS findings lists its maximum spanning tree by score (each file with the
    # one it is most like) and counts the rest; --json still gives every pair.
    folder = tmp_path / "made"
    folder.mkdir()
    template = _text(3)
    for k in range(8):
        (folder / f"variant{k}.txt").write_text(template.replace("w1 ", f"v{k} ", 1 + k))
    for k in range(4):
        (folder / f"other{k}.txt").write_text(_text(40 + k))
    assert cli.main(["derived", str(folder), "--exhaustive", *FAST]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "family 1: " + ", ".join(f"variant{k}.txt" for k in range(8))
    pairs = [line for line in lines if line.startswith("  variant")]
    assert len(pairs) == 7  # one fewer than the files, every file in one of them
    assert {f"variant{k}.txt" for k in range(8)} <= {w for line in pairs for w in line.split()}
    more = "  ... and 21 more pairs among these 8 files: above, each file with the one it is"
    assert any(line.startswith(more) for line in lines)
    assert cli.main(["derived", str(folder), "--exhaustive", "--json", *FAST]) == 0
    assert len(json.loads(capsys.readouterr().out)) == 28


def test_text_output_says_what_each_number_means(
    share: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["derived", str(share), "--exhaustive", *FAST]) == 0
    lines = capsys.readouterr().out.splitlines()
    legend = next(line for line in lines if line.startswith("explained: "))
    assert all(f"{word}:" in legend for word in ("score", "fpr", "shared in order"))
    assert lines.index(legend) > max(k for k, line in enumerate(lines) if "fpr " in line)


@pytest.mark.parametrize("fmt", ["tsv", "csv"])
def test_findings_table_reads_back_with_the_csv_module_and_names_escaped(
    share: Path, capsys: pytest.CaptureFixture[str], tmp_path: Path, fmt: str
) -> None:
    odd = 'report\tcopy, "quoted".txt'
    (share / odd).write_bytes((share / "report.txt").read_bytes())
    out = tmp_path / f"findings.{fmt}"
    code = cli.main(["derived", str(share), "--exhaustive", *FAST, "--format", fmt,
                     "-o", str(out)])  # fmt: skip
    assert code == 0
    text = out.read_text()
    if fmt == "tsv":
        rows = list(csv.reader(io.StringIO(text), delimiter="\t", quoting=csv.QUOTE_NONE))
    else:
        rows = list(csv.reader(io.StringIO(text)))
    assert tuple(rows[0]) == FINDING_COLUMNS
    assert all(len(row) == len(FINDING_COLUMNS) for row in rows[1:])
    named = {unescape_name(cell) for row in rows[1:] for cell in row[:2]}
    assert {odd, "report.txt", "report-copy.txt", "report-part.txt"} <= named
    assert all(len(row[FINDING_COLUMNS.index("a_hash")]) == 32 for row in rows[1:])


def test_json_with_a_table_format_is_a_usage_error(
    share: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(["derived", str(share), *FAST, "--json", "--format", "csv"]) == 2
    assert "--format csv" in capsys.readouterr().err
    assert cli.main(["derived", str(share), *FAST, "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)


def test_help_carries_the_caution(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        cli.main(["derived", "--help"])
    assert "not proof of copying" in " ".join(capsys.readouterr().out.split())


DEMO = Path(__file__).resolve().parents[1] / "datasets" / "brannock-share"


def test_the_demo_share_gives_its_truth_with_default_options(
    capsys: pytest.CaptureFixture[str],
) -> None:
    # The demo share's truth.tsv lists ten derived pairs (copies, edits, an excerpt, an extension,
    # CRLF, re-wrapping, reordering, tabs); its tools written from one template, its procedures
    # and its one system's daily logs are the look-alikes that must not be reported.
    truth = {
        frozenset(Path(name).name for name in line.split("\t")[:2])
        for line in (DEMO / "truth.tsv").read_text().splitlines()[1:]
    }
    assert cli.main(["derived", str(DEMO / "share"), "--json", "--no-cache"]) == 0
    out = capsys.readouterr()
    findings = json.loads(out.out)
    assert {_pair(f) for f in findings} == truth
    for f in findings:
        if f["relation"] != "identical":
            assert f["passages"] and f["a_shared_in_order"] > 0, f
    assert (
        "too little in order to call either derived" in out.err
        and "--same-source lists them" in out.err
    )
    assert cli.main(["derived", str(DEMO / "share"), "--json", "--same-source"]) == 0
    listed = json.loads(capsys.readouterr().out)
    kin = [f for f in listed if f["relation"] == "same_source"]
    assert kin and all(_pair(f) not in truth for f in kin)
    assert {_pair(f) for f in listed if f["relation"] != "same_source"} == truth


def test_the_summary_counts_pairs_with_thousands_separated(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # 46 files make 1,035 pairs: the counts read as the progress lines write them.
    folder = tmp_path / "many"
    folder.mkdir()
    for k in range(46):
        (folder / f"doc{k}.txt").write_text(_text(k, lines=20))
    assert cli.main(["derived", str(folder), "-c", "zstd:level=3", "--no-cache"]) == 0
    summary = [ln for ln in capsys.readouterr().err.splitlines() if "findings among" in ln]
    assert len(summary) == 1 and "among 1,035 pairs" in summary[0]

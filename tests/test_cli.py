"""The command line: compressors, matrix, output formats, errors, warnings, summary and cache."""

from __future__ import annotations

import csv
import io
import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from conftest import DATASETS, generated_text
from kinpress import InputError, read_matrix
from kinpress.cli import main

NAMES = ("zstd", "brotli", "lzma", "bz2", "zlib", "ppmd")
FAST = ["-c", "zlib:level=6", "--no-cache"]
SUMMARY = re.compile(r"(\d+) items, .*: (\d+) pairs computed, (\d+) from cache")


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def exit_code(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    """As run, for command lines argparse itself refuses (it exits rather than returns)."""
    try:
        return run(capsys, *argv)
    except SystemExit as stopped:
        out, err = capsys.readouterr()
        return int(str(stopped.code)), out, err


def parse_tsv(text: str) -> tuple[list[str], np.ndarray]:
    rows = list(csv.reader(io.StringIO(text), delimiter="\t"))
    assert rows[0][0] == ""
    labels = rows[0][1:]
    assert [r[0] for r in rows[1:]] == labels
    return labels, np.array([[float(v) for v in r[1:]] for r in rows[1:]])


# --- compressors ---------------------------------------------------------------------------


def test_compressors_json_is_one_object_per_compressor_with_exactly_the_documented_keys(
    capsys: pytest.CaptureFixture[str],
) -> None:
    code, out, err = run(capsys, "compressors", "--json")
    assert code == 0 and err == ""
    rows = json.loads(out)
    assert [row["name"] for row in rows] == list(NAMES)
    keys = {"name", "spec", "levels", "window_bytes", "primed", "overhead_bytes"}
    for row in rows:
        assert set(row) == keys
        low, high = row["levels"]
        assert isinstance(low, int) and low <= high
        assert row["spec"].startswith(row["name"])
        assert isinstance(row["primed"], bool)
        assert isinstance(row["overhead_bytes"], int) and row["overhead_bytes"] >= 0
    by_name = {row["name"]: row for row in rows}
    assert by_name["zlib"]["window_bytes"] == 32 * 1024  # RFC 1951: distances up to 32K bytes
    # bzip2 manual, from memory: -9 sets the block size to 900,000 bytes
    assert by_name["bz2"]["window_bytes"] == 900_000
    assert by_name["ppmd"]["window_bytes"] is None
    assert by_name["zlib"]["primed"] and by_name["zstd"]["primed"]


def test_compressors_table_lists_all_six(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "compressors")
    assert code == 0
    lines = out.splitlines()
    assert lines[0].split()[0] == "name"
    assert [line.split()[0] for line in lines[1:7]] == list(NAMES)
    for name in NAMES:  # and a paragraph on each
        assert any(line.startswith(f"{name}: ") for line in lines[7:])


# --- matrix --------------------------------------------------------------------------------


def test_matrix_writes_tsv_to_stdout_by_default(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    code, out, err = run(capsys, "matrix", str(text_folder), *FAST)
    assert code == 0, err
    labels, d = parse_tsv(out)
    assert labels == ["a.txt", "b.txt", "c.txt", "d.txt"]
    assert np.array_equal(d, d.T) and np.all(np.diag(d) == 0)
    off = d[np.triu_indices(4, 1)]
    assert np.all((off > 0) & (off < 1.2))


@pytest.mark.parametrize("fmt", ["tsv", "csv", "phylip", "json"])
def test_matrix_output_in_each_format_holds_the_stdout_matrix(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path, fmt: str
) -> None:
    _, out, _ = run(capsys, "matrix", str(text_folder), *FAST)
    labels, d = parse_tsv(out)
    path = tmp_path / "result.out"
    code, out, err = run(
        capsys, "matrix", str(text_folder), *FAST, "-o", str(path), "--format", fmt
    )
    assert code == 0, err
    assert out == ""
    back = read_matrix(path, fmt)
    assert list(back.labels) == labels
    np.testing.assert_allclose(back.distances, d, atol=1e-6)


@pytest.mark.parametrize(
    ("suffix", "looks_like"),
    [
        (".tsv", lambda text: text.startswith("\t")),
        (".csv", lambda text: text.startswith(",")),
        (".phy", lambda text: text.splitlines()[0].strip() == "4"),
        (".json", lambda text: isinstance(json.loads(text), dict)),
    ],
)
def test_matrix_output_format_follows_the_file_extension(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path, suffix: str, looks_like
) -> None:
    path = tmp_path / f"dist{suffix}"
    code, _, err = run(capsys, "matrix", str(text_folder), *FAST, "-o", str(path))
    assert code == 0, err
    assert looks_like(path.read_text())
    assert read_matrix(path).labels == ("a.txt", "b.txt", "c.txt", "d.txt")


def test_matrix_output_inside_an_input_folder_is_refused(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    path = text_folder / "dist.tsv"
    code, out, err = run(capsys, "matrix", str(text_folder), *FAST, "-o", str(path))
    assert code == 2 and out == ""
    assert "inside the input folder" in err and len(err.splitlines()) == 1
    assert not path.exists()


def test_matrix_split_lines_compares_chunks_of_a_file(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    (tmp_path / "app.log").write_bytes(generated_text(4, lines=40))
    code, out, err = run(capsys, "matrix", str(tmp_path / "app.log"), *FAST, "--split", "lines:10")
    assert code == 0, err
    labels, _ = parse_tsv(out)
    assert labels == ["app.log#1", "app.log#2", "app.log#3", "app.log#4"]
    assert SUMMARY.search(err).group(1, 2) == ("4", "6")  # type: ignore[union-attr]


def test_matrix_labels_become_json_classes(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path
) -> None:
    labels = tmp_path / "labels.tsv"
    labels.write_text("item\tlabel\na.txt\tweb\nb.txt\tweb\nc.txt\tdb\n")
    path = tmp_path / "m.json"
    code, _, err = run(
        capsys, "matrix", str(text_folder), *FAST, "--labels", str(labels), "-o", str(path)
    )
    assert code == 0, err
    assert json.loads(path.read_text())["classes"] == {
        "a.txt": "web",
        "b.txt": "web",
        "c.txt": "db",
        "d.txt": None,
    }


def test_matrix_reads_fasta_from_stdin_and_compares_both_strands(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    rng = np.random.default_rng(7)
    seqs = ["".join(rng.choice(list("ACGT"), 400)) for _ in range(3)]
    fasta = "".join(f">s{k} sample\n{s}\n" for k, s in enumerate(seqs)).encode()
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(fasta)))
    code, out, err = run(capsys, "matrix", "-", *FAST, "--strand", "both")
    assert code == 0, err
    assert parse_tsv(out)[0] == ["s0", "s1", "s2"]


# --- errors --------------------------------------------------------------------------------


def _inputs(tmp_path: Path) -> dict[str, str]:
    (tmp_path / "a.txt").write_bytes(generated_text(1))
    (tmp_path / "b.txt").write_bytes(generated_text(2))
    (tmp_path / "bad.fa").write_bytes(b">ok\nACGT\nAC%GT\n")
    return {"a": str(tmp_path / "a.txt"), "b": str(tmp_path / "b.txt"), "dir": str(tmp_path)}


ERRORS = {
    "missing path": (["{dir}/nowhere.txt", "{a}"], ["nowhere.txt: no such file"]),
    "unknown compressor": (["{a}", "{b}", "-c", "snappy"], ["'snappy'", *NAMES]),
    "unknown key": (["{a}", "{b}", "-c", "zlib:speed=3"], ["speed", "valid keys", "level"]),
    "value out of range": (["{a}", "{b}", "-c", "zlib:level=99"], ["level=99", "0-9"]),
    "malformed fasta": (["{dir}/bad.fa", "{a}"], ["bad.fa:3:", "'%'"]),
    "one item": (["{a}"], ["at least two items", "got 1"]),
    "primed brotli": (["{a}", "{b}", "-c", "brotli", "--conditional", "primed"], ["primed"]),
    "strand both on text": (["{a}", "{b}", "--strand", "both"], ["nucleotide", "a.txt"]),
    "bad split": (["{a}", "{b}", "--split", "lines:zero"], ["bad split 'lines:zero'"]),
    "records of text": (["{a}", "{b}", "--split", "records"], ["a.txt: --split records"]),
    "missing labels": (["{a}", "{b}", "--labels", "{dir}/none.tsv"], ["none.tsv: no such"]),
    "jobs below one": (["{a}", "{b}", "--jobs", "0"], ["--jobs"]),
    "output folder missing": (["{a}", "{b}", "-o", "{dir}/no/such/out.tsv"], ["no/such"]),
}


@pytest.mark.parametrize("case", list(ERRORS))
def test_bad_input_is_a_one_line_error_with_exit_code_2(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, case: str
) -> None:
    where = _inputs(tmp_path)
    argv, expected = ERRORS[case]
    args = [a.format(**where) for a in argv]
    extra = [] if "-c" in args else ["-c", "zlib:level=6"]
    code, out, err = run(capsys, "matrix", *args, *extra, "--no-cache")
    assert code == 2
    assert out == ""
    assert err.startswith("kinpress: error: ") and err.count("\n") == 1, err
    assert "Traceback" not in err
    for text in expected:
        assert text in err, (text, err)


def test_output_that_is_an_input_is_refused_and_left_untouched(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    target = text_folder / "a.txt"
    before = target.read_bytes()
    code, out, err = run(
        capsys, "matrix", str(target), str(text_folder / "b.txt"), *FAST, "-o", str(target)
    )
    assert code == 2 and out == ""
    assert err.startswith("kinpress: error: ") and "is also an input" in err
    assert target.read_bytes() == before


def test_debug_raises_the_error_instead_of_a_message(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    with pytest.raises(InputError, match=r"nowhere\.txt"):
        main(["matrix", str(tmp_path / "nowhere.txt"), *FAST, "--debug"])
    with pytest.raises(InputError, match=r"nowhere\.txt"):
        main(["--debug", "matrix", str(tmp_path / "nowhere.txt"), *FAST])


def test_no_command_prints_help_on_stderr_and_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run(capsys)
    assert code == 2 and out == ""
    assert "matrix" in err and "compressors" in err


# --- warnings, summary, cache, quiet ----------------------------------------------------------


def test_empty_input_file_warns_and_the_run_still_succeeds(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    (text_folder / "empty.txt").write_bytes(b"")
    code, out, err = run(capsys, "matrix", str(text_folder), *FAST)
    assert code == 0
    assert re.search(r"^kinpress: warning: .*empty\.txt: empty file; left out$", err, re.M)
    assert parse_tsv(out)[0] == ["a.txt", "b.txt", "c.txt", "d.txt"]


def test_summary_counts_pairs_and_a_rerun_takes_all_from_the_cache(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path
) -> None:
    cache = tmp_path / "cache" / "sizes.sqlite"
    argv = ["matrix", str(text_folder), "-c", "zlib:level=6", "--cache", str(cache)]
    code, first_out, err = run(capsys, *argv)
    assert code == 0
    assert SUMMARY.search(err).groups() == ("4", "6", "0")  # type: ignore[union-attr]
    code, second_out, err = run(capsys, *argv)
    assert code == 0
    assert SUMMARY.search(err).groups() == ("4", "0", "6")  # type: ignore[union-attr]
    assert second_out == first_out
    (text_folder / "e.txt").write_bytes(generated_text(9))
    _, _, err = run(capsys, *argv)
    assert SUMMARY.search(err).groups() == ("5", "4", "6")  # type: ignore[union-attr]


@pytest.mark.parametrize("where", ["after", "before", "short"])
def test_quiet_prints_nothing_on_stderr(
    capsys: pytest.CaptureFixture[str], text_folder: Path, where: str
) -> None:
    argv = ["matrix", str(text_folder), *FAST, "--quiet"]
    if where == "before":  # the global option, given before the command
        argv = ["--quiet", *argv[:-1]]
    if where == "short":
        argv = [*argv[:-1], "-q"]
    code, out, err = run(capsys, *argv)
    assert code == 0
    assert err == ""
    assert parse_tsv(out)[0] == ["a.txt", "b.txt", "c.txt", "d.txt"]


# --- the installed console script ------------------------------------------------------------


def _script() -> list[str]:
    script = shutil.which("kinpress", path=str(Path(sys.executable).parent))
    assert script is not None, "the kinpress console script is not installed beside python"
    return [script]


def test_console_script_exit_codes_and_messages(text_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "dist.phy"
    ok = subprocess.run(
        [*_script(), "matrix", str(text_folder), *FAST, "-o", str(out)],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert ok.returncode == 0, ok.stderr
    assert "Traceback" not in ok.stderr
    assert SUMMARY.search(ok.stderr).groups() == ("4", "6", "0")  # type: ignore[union-attr]
    assert read_matrix(out).labels == ("a.txt", "b.txt", "c.txt", "d.txt")

    (tmp_path / "bad.fa").write_bytes(b"ACGT before any header\n>x\nACGT\n")
    bad = subprocess.run(
        [*_script(), "matrix", str(tmp_path / "bad.fa"), str(text_folder), *FAST],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert bad.returncode == 2
    assert bad.stdout == ""
    assert bad.stderr.startswith("kinpress: error: ") and bad.stderr.count("\n") == 1
    assert "bad.fa:1:" in bad.stderr and "Traceback" not in bad.stderr


def test_console_script_debug_shows_the_traceback(tmp_path: Path) -> None:
    missing = str(tmp_path / "nowhere.txt")
    result = subprocess.run(
        [*_script(), "--debug", "matrix", missing, *FAST],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert result.returncode != 0
    assert "Traceback (most recent call last)" in result.stderr
    assert "InputError: " in result.stderr and "nowhere.txt" in result.stderr


def test_progress_off_a_terminal_is_a_line_now_and_then(monkeypatch: pytest.MonkeyPatch) -> None:
    from kinpress.cli import Console

    stream = io.StringIO()  # not a terminal
    console = Console(quiet=False, stream=stream)
    monkeypatch.setattr(Console, "LINE_SECONDS", 0.0)
    with console.progress() as update:
        assert update is not None
        update("pairs", 0, 400)
        update("pairs", 100, 400)
        update("pairs", 400, 400)  # finished: the summary line says the rest
    lines = stream.getvalue().splitlines()
    assert len(lines) == 1 and lines[0].startswith("kinpress: pairs: 100 of 400 done (25%)")
    monkeypatch.setattr(Console, "LINE_SECONDS", 3600.0)
    with Console(quiet=False, stream=stream).progress() as update:
        assert update is not None
        update("pairs", 100, 400)
    assert len(stream.getvalue().splitlines()) == 1
    with Console(quiet=True, stream=stream).progress() as update:
        assert update is None


# --- one JSON convention: --json selects JSON, -o says where, stdout otherwise ---------------


@pytest.mark.parametrize(
    ("command", "key"),
    [
        (["compressors"], None),
        (["matrix", "{folder}", *FAST], "labels"),
        (["tree", "{folder}", *FAST], "newick"),
        (["groups", "{folder}", *FAST, "--k", "2"], "items"),
    ],
)
def test_json_goes_where_o_says_and_nothing_else_goes_to_stdout(
    capsys: pytest.CaptureFixture[str],
    text_folder: Path,
    tmp_path: Path,
    command: list[str],
    key: str | None,
) -> None:
    argv = [a.replace("{folder}", str(text_folder)) for a in command]
    path = tmp_path / "out.json"
    code, out, err = run(capsys, *argv, "--json", "-o", str(path))
    assert code == 0, err
    assert out == ""
    written = json.loads(path.read_text())
    assert key is None or key in written
    code, out, err = run(capsys, *argv, "--json")
    assert code == 0, err
    shown = json.loads(out)
    assert shown == written if key is None else key in shown


def test_matrix_json_is_format_json_and_refuses_another_format(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    code, by_option, _ = run(capsys, "matrix", str(text_folder), *FAST, "--json")
    assert code == 0
    code, by_format, _ = run(capsys, "matrix", str(text_folder), *FAST, "--format", "json")
    assert json.loads(by_option)["labels"] == json.loads(by_format)["labels"]
    code, _, err = run(capsys, "matrix", str(text_folder), *FAST, "--json", "--format", "tsv")
    assert code == 2 and "--json and --format tsv" in err


# --- no option silently ignored ------------------------------------------------------------


@pytest.fixture
def saved_matrix(text_folder: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> Path:
    path = tmp_path / "m.tsv"
    assert main(["matrix", str(text_folder), *FAST, "-o", str(path)]) == 0
    capsys.readouterr()
    return path


IGNORED = {
    "tree --matrix with -c": (["tree", "--matrix", "{m}", "-c", "zlib"], "--compressor"),
    "groups --matrix with --strand": (
        ["groups", "--matrix", "{m}", "--strand", "both"],
        "--strand",
    ),
    "tree --matrix with --jobs": (["tree", "--matrix", "{m}", "--jobs", "2"], "--jobs"),
    "tree --seed without --bootstrap": (["tree", "--matrix", "{m}", "--seed", "3"], "--seed"),
    "tree --block-fraction without --bootstrap": (
        ["tree", "{f}", *FAST, "--block-fraction", "0.1"],
        "--block-fraction",
    ),
    "tree --labels without --plot": (["tree", "--matrix", "{m}", "--labels", "{m}"], "--labels"),
    "tree --title without --plot": (["tree", "--matrix", "{m}", "--title", "frogs"], "--title"),
    "matrix --title without --plot": (["matrix", "{f}", *FAST, "--title", "frogs"], "--title"),
    "classify --k with the conditional method": (
        ["classify", "--reference", "{f}", "{f}", *FAST, "--k", "3"],
        "--k",
    ),
    "classify --evaluate with inputs": (
        ["classify", "--reference", "{f}", "{f}", *FAST, "--evaluate"],
        "--evaluate",
    ),
    "derived --labels": (["derived", "{f}", *FAST, "--labels", "{m}"], "--labels"),
    "matrix --budget with -c named": (["matrix", "{f}", *FAST, "--budget", "9"], "--budget"),
    "matrix --labels in TSV": (["matrix", "{f}", *FAST, "--labels", "{labels}"], "--labels"),
    "--cache with --no-cache": (["nearest", "{f}", *FAST, "--cache", "{m}.db"], "--cache"),
}


@pytest.mark.parametrize("case", list(IGNORED))
def test_an_option_that_would_do_nothing_is_a_usage_error_naming_it(
    capsys: pytest.CaptureFixture[str], text_folder: Path, saved_matrix: Path, case: str
) -> None:
    argv, option = IGNORED[case]
    labels = saved_matrix.parent / "labels.tsv"
    labels.write_text("a.txt\tweb\nb.txt\tdb\n")
    args = [a.format(m=saved_matrix, f=text_folder, labels=labels) for a in argv]
    code, out, err = exit_code(capsys, *args)
    assert code == 2 and out == ""
    assert option in err


# --- calibrate takes the shared options; unknown options show the command's usage ----------


def test_calibrate_weighs_the_budget_on_the_cores_and_keeps_its_report_in_the_cache(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path
) -> None:
    cache = str(tmp_path / "c.sqlite")
    argv = ["calibrate", str(text_folder), "-c", "zstd:level=3", "--max-bytes", "65536",
            "--budget", "60", "--jobs", "1", "--cache", cache, "--json"]  # fmt: skip
    code, out, err = run(capsys, *argv)
    assert code == 0, err
    first = json.loads(out)
    assert any("on 1 cores (budget 60 s)" in reason for reason in first["reasons"])
    code, out, err = run(capsys, *argv)
    assert code == 0 and "calibrate: the report for these inputs is in the cache" in err
    assert json.loads(out) == first


@pytest.mark.parametrize("option", [["--budget", "60"], ["--jobs", "2"]])
def test_calibrate_without_inputs_refuses_what_weighs_their_run_time(
    capsys: pytest.CaptureFixture[str], option: list[str]
) -> None:
    code, _, err = exit_code(capsys, "calibrate", "-c", "zstd:level=3", *option)
    assert code == 2 and option[0] in err and "give inputs" in err


def test_an_unknown_option_shows_the_usage_of_its_command(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    code, _, err = exit_code(capsys, "matrix", str(text_folder), "--bogus")
    assert code == 2
    assert err.startswith("usage: kinpress matrix ")
    assert "unrecognized arguments: --bogus" in err


# --- classify's text explains every score it prints --------------------------------------


def test_classify_text_has_a_legend_for_every_column_under_its_table(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    logs = DATASETS / "quendle-logs" / "logs"
    for name in ("brisquet", "tarnwheel"):
        (tmp_path / "known" / name).mkdir(parents=True)
        lines = (logs / f"{name}.log").read_text().splitlines(keepends=True)
        (tmp_path / "known" / name / "first.log").write_text("".join(lines[:1000]))
    unknown = tmp_path / "later.log"
    unknown.write_text("".join(lines[1000:1200]))
    code, out, err = run(capsys, "classify", "--reference", str(tmp_path / "known"),
                         str(unknown), *FAST, "--split", "lines:100")  # fmt: skip
    assert code == 0, err
    text = out.splitlines()
    header = text[0].split()
    rows = [line for line in text[1:] if line.startswith("later.log#")]
    legend = text[1 + len(rows)]
    assert all(f"{column}:" in legend or f"{column}," in legend for column in header[1:])


# --- --labels FILE[:COLUMN]: a column by name, unlabelled items named, legends titled ----------


@pytest.fixture
def family_table(tmp_path: Path) -> Path:
    """Three columns with a header: two label columns, d.txt and c.txt left without a family."""
    path = tmp_path / "labels.tsv"
    path.write_text("item\tsystem\tfamily\na.txt\tweb\tfrog\nb.txt\tdb\tfrog\nc.txt\tdb\t\n")
    return path


def test_labels_column_picks_that_column_of_a_table_with_a_header(
    capsys: pytest.CaptureFixture[str], saved_matrix: Path, family_table: Path
) -> None:
    spec = f"{family_table}:family"
    code, out, err = run(capsys, "groups", "--matrix", str(saved_matrix), "--k", "2",
                         "--labels", spec, "--json")  # fmt: skip
    assert code == 0, err
    assert json.loads(out)["agreement"]["confusion"]["labels"] == ["frog"]
    code, out, err = run(capsys, "groups", "--matrix", str(saved_matrix), "--k", "2",
                         "--labels", f"{family_table}:system", "--json")  # fmt: skip
    assert code == 0, err
    assert json.loads(out)["agreement"]["confusion"]["labels"] == ["web", "db"]


def test_items_without_a_label_are_named_in_one_warning(
    capsys: pytest.CaptureFixture[str], text_folder: Path, family_table: Path
) -> None:
    code, out, err = run(capsys, "matrix", str(text_folder), *FAST, "--json",
                         "--labels", f"{family_table}:family")  # fmt: skip
    assert code == 0, err
    assert json.loads(out)["classes"] == {"a.txt": "frog", "b.txt": "frog", "c.txt": None,
                                          "d.txt": None}  # fmt: skip
    warned = [line for line in err.splitlines() if "no family" in line]
    assert len(warned) == 1
    assert "warning" in warned[0] and "2 of 4 items" in warned[0]
    assert "c.txt" in warned[0] and "d.txt" in warned[0]


def test_plot_legends_are_titled_by_the_label_column(
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
    text_folder: Path,
    saved_matrix: Path,
    family_table: Path,
    tmp_path: Path,
) -> None:
    from kinpress import plots

    drawn: dict[str, object] = {}
    monkeypatch.setattr(plots, "plot_tree", lambda tree, path, **kw: drawn.update(kw))
    code, _, err = run(capsys, "tree", "--matrix", str(saved_matrix), "--plot",
                       str(tmp_path / "t.png"), "--labels", f"{family_table}:family")  # fmt: skip
    assert code == 0, err
    assert drawn["legend_title"] == "family"
    assert drawn["classes"] == {"a.txt": "frog", "b.txt": "frog"}
    monkeypatch.setattr(plots, "plot_heatmap", lambda dm, path, **kw: drawn.update(kw))
    code, _, err = run(capsys, "matrix", str(text_folder), *FAST,
                       "--plot", str(tmp_path / "h.png"), "-o", str(tmp_path / "m2.tsv"),
                       "--labels", f"{family_table}:system")  # fmt: skip
    assert code == 0, err
    assert drawn["legend_title"] == "system"


@pytest.mark.parametrize("command", ["matrix", "derived"])
def test_one_item_is_refused_before_auto_calibrates(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], command: str
) -> None:
    one = tmp_path / "only.txt"
    one.write_bytes(generated_text(3))
    assert main([command, str(one), "--no-cache"]) == 2
    err = capsys.readouterr().err
    assert "need at least two items to compare, got 1" in err
    assert "auto:" not in err  # nothing was calibrated first


def test_a_tree_of_two_leaves_says_its_fit_is_not_measured(
    text_folder: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The fit is a correlation over pairs of leaves: two leaves make one pair, no correlation.
    files = sorted(text_folder.glob("*.txt"))[:2]
    argv = ["tree", *map(str, files), "-c", "zlib:level=9", "--no-cache", "-o",
            str(tmp_path / "t.nwk")]  # fmt: skip
    assert main(argv) == 0
    err = capsys.readouterr().err
    assert "fit: not measured (fewer than three leaves" in err and "nan" not in err


def test_one_group_says_it_has_no_silhouette(
    text_folder: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A silhouette compares an item's own group with the next one (Rousseeuw 1987): one group
    # has none, and the line says so rather than "nan".
    argv = ["groups", str(text_folder), "-c", "zlib:level=9", "--no-cache", "--k", "1"]
    assert main(argv) == 0
    err = capsys.readouterr().err
    assert "groups: 1 by" in err and "no silhouette (one group)" in err and "nan" not in err


def test_the_matrix_summary_separates_thousands(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    folder = tmp_path / "many"
    folder.mkdir()
    for k in range(46):  # 1,035 pairs
        (folder / f"t{k}.txt").write_bytes(generated_text(k, lines=10))
    argv = ["matrix", str(folder), "-c", "zstd:level=3", "--no-cache", "-o", str(tmp_path / "m")]
    assert main(argv) == 0
    assert ": 1,035 pairs computed, 0 from cache" in capsys.readouterr().err

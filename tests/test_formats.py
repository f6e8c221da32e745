"""Matrix files: TSV, CSV, PHYLIP and JSON round trips, conventions, read errors, atomicity."""

from __future__ import annotations

import csv
import json
import os
import stat
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import kinpress.formats
from kinpress import DistanceMatrix, InputError, Item, LocalEngine, MatrixStats, distance_matrix
from kinpress.derived import DerivedFinding
from kinpress.evidence import Stretch
from kinpress.formats import (
    FINDING_COLUMNS,
    FINDING_FORMATS,
    MATRIX_FORMATS,
    FormatWarning,
    atomic_write,
    emit,
    format_for,
    group_lines,
    json_ready,
    json_safe,
    json_text,
    matrix_to_csv,
    matrix_to_json,
    matrix_to_phylip,
    matrix_to_tsv,
    read_matrix,
    write_findings,
    write_matrix,
)
from kinpress.groups import GroupingResult, find_groups
from kinpress.items import InputWarning, expand_paths, unescape_name
from kinpress.trees import TreeResult, build_tree

# Labels as kinpress makes them are never empty; the awkward characters are what matters here.
PLAIN = "abcXYZ019 _-.,;:#~|()[]'\"éßλ中"
TSV_LABEL = st.text(alphabet=PLAIN, min_size=1, max_size=16)
CSV_LABEL = st.text(alphabet=PLAIN + "\t\r\n", min_size=1, max_size=16)
PHYLIP_LABEL = st.text(alphabet="abcXYZ019_-.|~", min_size=1, max_size=14)
JSON_LABEL = st.text(st.characters(exclude_categories=["Cs"]), min_size=1, max_size=16)

PATH_SETTINGS = settings(
    max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)


@st.composite
def matrices(draw: st.DrawFn, label: st.SearchStrategy[str]) -> DistanceMatrix:
    labels = draw(st.lists(label, min_size=2, max_size=6, unique=True))
    n = len(labels)
    values = draw(
        st.lists(
            st.floats(0, 1.5, allow_nan=False), min_size=n * (n - 1) // 2, max_size=n * (n - 1) // 2
        )
    )
    d = np.zeros((n, n))
    d[np.triu_indices(n, 1)] = values
    return DistanceMatrix(tuple(labels), d + d.T)


def small_matrix(labels: tuple[str, ...] = ("a", "b", "c")) -> DistanceMatrix:
    n = len(labels)
    d = np.array([[abs(i - j) * 0.125 + (i != j) * 0.5 for j in range(n)] for i in range(n)])
    return DistanceMatrix(labels, d)


def assert_same_matrix(got: DistanceMatrix, want: DistanceMatrix) -> None:
    assert got.labels == want.labels
    np.testing.assert_allclose(got.distances, want.distances, rtol=0, atol=1e-6)


# --- round trips ---------------------------------------------------------------------------


@PATH_SETTINGS
@given(dm=matrices(TSV_LABEL))
def test_tsv_round_trips_labels_and_distances(tmp_path: Path, dm: DistanceMatrix) -> None:
    path = tmp_path / "m.tsv"
    write_matrix(dm, path)
    assert_same_matrix(read_matrix(path), dm)


@PATH_SETTINGS
@given(dm=matrices(CSV_LABEL))
def test_csv_round_trips_labels_and_distances(tmp_path: Path, dm: DistanceMatrix) -> None:
    path = tmp_path / "m.csv"
    write_matrix(dm, path)
    assert_same_matrix(read_matrix(path), dm)


@PATH_SETTINGS
@given(dm=matrices(PHYLIP_LABEL))
def test_phylip_round_trips_safe_labels_and_distances(tmp_path: Path, dm: DistanceMatrix) -> None:
    path = tmp_path / "m.phy"
    with warnings.catch_warnings():
        warnings.simplefilter("error", FormatWarning)  # safe names are written unchanged
        write_matrix(dm, path)
    assert_same_matrix(read_matrix(path), dm)


@PATH_SETTINGS
@given(dm=matrices(JSON_LABEL), data=st.data())
def test_json_round_trips_everything_it_holds(
    tmp_path: Path, dm: DistanceMatrix, data: st.DataObject
) -> None:
    n = len(dm)
    full = DistanceMatrix(
        dm.labels,
        dm.distances,
        sizes=np.array(data.draw(st.lists(st.integers(1, 10**9), min_size=n, max_size=n))),
        self_distances=np.array(
            data.draw(st.lists(st.floats(0, 1, allow_nan=False), min_size=n, max_size=n))
        ),
        compressor="zstd:level=19",
        conditional="primed",
        strand="both",
        classes=tuple(
            data.draw(
                st.lists(st.sampled_from([None, "bird", "fish, bony"]), min_size=n, max_size=n)
            )
        ),
        stats=MatrixStats(
            pairs_computed=7,
            pairs_from_cache=3,
            bytes_compressed=12345,
            seconds=0.25,
            clipped_below_zero=1,
            identical_items=2,
        ),
    )
    path = tmp_path / "m.json"
    write_matrix(full, path)
    back = read_matrix(path)
    assert_same_matrix(back, full)
    assert back.sizes is not None and back.self_distances is not None
    assert back.sizes.tolist() == full.sizes.tolist()  # type: ignore[union-attr]
    np.testing.assert_allclose(back.self_distances, full.self_distances, rtol=0, atol=1e-6)
    assert (back.compressor, back.conditional, back.strand) == ("zstd:level=19", "primed", "both")
    assert back.classes == full.classes
    assert back.stats == full.stats


@pytest.mark.parametrize("fmt", ["tsv", "csv", "phylip", "json"])
def test_format_given_overrides_the_extension(tmp_path: Path, fmt: str) -> None:
    path = tmp_path / "matrix.out"
    write_matrix(small_matrix(), path, fmt)
    assert_same_matrix(read_matrix(path, fmt), small_matrix())
    if fmt != "csv":  # CSV is known by its extension only
        assert_same_matrix(read_matrix(path), small_matrix())  # recognised from the content


def test_format_follows_the_extension_else_tsv() -> None:
    assert [format_for(p, None) for p in ("a.tsv", "a.TXT", "a.csv", "a.phy", "a.dist")] == [
        "tsv",
        "tsv",
        "csv",
        "phylip",
        "phylip",
    ]
    assert format_for("a.json", None) == "json"
    assert format_for("a.unknown", None) == format_for(None, None) == "tsv"
    assert format_for("a.csv", "json") == "json"
    with pytest.raises(ValueError, match="unknown format 'xml'"):
        format_for("a.xml", "xml")


def test_matrix_goes_to_stdout_without_a_path(capsys: pytest.CaptureFixture[str]) -> None:
    write_matrix(small_matrix())
    write_matrix(small_matrix(), "-", "csv")
    out = capsys.readouterr().out
    assert out == matrix_to_tsv(small_matrix()) + matrix_to_csv(small_matrix())


# --- conventions of each format ------------------------------------------------------------


def test_tsv_header_has_an_empty_first_cell_then_the_labels() -> None:
    lines = matrix_to_tsv(small_matrix(("x 1", "y", "z"))).splitlines()
    assert lines[0].split("\t") == ["", "x 1", "y", "z"]
    assert [line.split("\t")[0] for line in lines[1:]] == ["x 1", "y", "z"]
    assert len(lines) == 4


def test_tsv_labels_with_tabs_or_line_breaks_are_escaped_and_read_back(tmp_path: Path) -> None:
    labels = ("a\tb", "a b", "c\nd", "e\r\nf", "back\\slash")
    text = matrix_to_tsv(small_matrix(labels))
    assert len(text.splitlines()) == 4 + 2
    assert text.splitlines()[0].split("\t") == ["", "a\\tb", "a b", "c\\nd", "e\\r\\nf",
                                                "back\\\\slash"]  # fmt: skip
    path = tmp_path / "m.tsv"
    path.write_text(text)
    assert read_matrix(path).labels == labels


def test_csv_awkward_labels_are_quoted_for_python_csv_reader(tmp_path: Path) -> None:
    labels = ("comma, inside", 'say "hi"', "two\nlines", "cr\r\nlf", "plain")
    path = tmp_path / "m.csv"
    write_matrix(small_matrix(labels), path)
    # RFC 4180 CSV quoting; reference: Python's csv module (files opened with newline="")
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == ["", *labels]
    assert [row[0] for row in rows[1:]] == list(labels)
    values = np.array([[float(v) for v in row[1:]] for row in rows[1:]])
    np.testing.assert_allclose(values, small_matrix(labels).distances, atol=1e-6)
    assert read_matrix(path).labels == labels


def test_phylip_first_line_is_the_count_and_short_names_are_padded_to_ten() -> None:
    dm = small_matrix(("a", "bb", "ccccccccc"))
    lines = matrix_to_phylip(dm).splitlines()
    # PHYLIP format manual (Felsenstein), from memory: the first line holds the number of
    # species; each row then starts with a name of exactly 10 characters, padded with blanks.
    assert lines[0].strip() == "3"
    for name, line, row in zip(dm.labels, lines[1:], dm.distances, strict=True):
        assert line[:10].rstrip() == name  # a strict reader slices 10 characters
        np.testing.assert_allclose([float(v) for v in line[10:].split()], row, atol=1e-6)


def test_phylip_long_names_are_whole_and_followed_by_a_blank() -> None:
    dm = small_matrix(("a_rather_long_name", "b", "c"))
    lines = matrix_to_phylip(dm).splitlines()
    assert [line.split()[0] for line in lines[1:]] == ["a_rather_long_name", "b", "c"]
    assert all(len(line.split()) == 4 for line in lines[1:])


def test_phylip_unsafe_names_are_escaped_with_a_warning_and_read_back(tmp_path: Path) -> None:
    labels = ("Homo sapiens", "Homo(sapiens)", "Homo:sapiens", "a;b,c[d]'e", "Homo_sapiens")
    path = tmp_path / "m.phy"
    with pytest.warns(FormatWarning, match="4 names hold blanks"):
        write_matrix(small_matrix(labels), path)
    names = [line.split()[0] for line in path.read_text().splitlines()[1:]]
    # PHYLIP documentation, from memory: names must not hold blanks, parentheses, square
    # brackets, colons, semicolons or commas (they would break the Newick trees PHYLIP writes).
    assert all(not set(name) & set(" \t():;,[]'") for name in names)
    assert len(set(names)) == len(names) == len(labels)
    assert names[0] == "Homo\\x20sapiens"
    assert names[4] == "Homo_sapiens"
    assert read_matrix(path).labels == labels


def test_strict_phylip_names_touching_the_numbers_are_read() -> None:
    # PHYLIP format manual (Felsenstein), from memory: in the strict format the value may follow
    # the 10-character name with no blank between them.
    text = (
        "    3\n"
        "Homo_sapie0.000000 0.100000 0.200000\n"
        "Pan_troglo0.100000 0.000000 0.300000\n"
        "Gorilla   0.200000 0.300000 0.000000\n"
    )
    dm = kinpress.formats._read_phylip(text, "strict.phy")
    assert dm.labels == ("Homo_sapie", "Pan_troglo", "Gorilla")
    np.testing.assert_allclose(dm.distances, [[0, 0.1, 0.2], [0.1, 0, 0.3], [0.2, 0.3, 0]])


def test_json_holds_the_documented_keys_of_a_real_run() -> None:
    items = [Item(f"t{k}", (f"line {k} of text " * (20 + k)).encode(), "test") for k in range(3)]
    dm = distance_matrix(items, "zlib:level=6", engine=LocalEngine(1))
    doc = json.loads(kinpress.formats.matrix_to_json(dm))
    required = {"labels", "distances", "compressor", "conditional", "sizes", "stats"}
    assert required <= set(doc)
    assert doc["labels"] == ["t0", "t1", "t2"]
    assert doc["compressor"] == "zlib:level=6,window=15"
    assert doc["conditional"] == "concat"
    assert set(doc["sizes"]) == set(doc["labels"]) and all(v > 0 for v in doc["sizes"].values())
    assert set(doc["self_distances"]) == set(doc["labels"])
    assert {"pairs_computed", "pairs_from_cache", "bytes_compressed", "seconds"} <= set(
        doc["stats"]
    )
    assert doc["stats"]["pairs_computed"] == 3 and doc["stats"]["pairs_from_cache"] == 0
    assert doc["stats"]["bytes_compressed"] > 0
    assert "classes" not in doc  # no labels known, no classes
    np.testing.assert_allclose(doc["distances"], dm.distances, atol=1e-8)


def test_matrix_files_with_crlf_line_ends_are_read(tmp_path: Path) -> None:
    dm = small_matrix()
    for name, text in [
        ("m.tsv", matrix_to_tsv(dm)),
        ("m.csv", matrix_to_csv(dm)),
        ("m.phy", matrix_to_phylip(dm)),
    ]:
        path = tmp_path / name
        path.write_bytes(text.replace("\n", "\r\n").encode())
        assert_same_matrix(read_matrix(path), dm)


# --- read errors ---------------------------------------------------------------------------

GOOD_ROWS = ["a\t0\t0.1\t0.2", "b\t0.1\t0\t0.3", "c\t0.2\t0.3\t0"]


@pytest.mark.parametrize(
    ("name", "text", "where", "message"),
    [
        ("ragged.tsv", ["\ta\tb\tc", GOOD_ROWS[0], "b\t0.1\t0", GOOD_ROWS[2]], 3, "expected 3"),
        ("word.tsv", ["\ta\tb\tc", GOOD_ROWS[0], GOOD_ROWS[1], "c\t0.2\tzero\t0"], 4, "numbers"),
        ("skew.tsv", ["\ta\tb\tc", GOOD_ROWS[0], "b\t0.15\t0\t0.3", GOOD_ROWS[2]], 2, "symmetric"),
        ("ragged.csv", [",a,b", "a,0,0.1", "b,0.1"], 3, "expected 2"),
        ("word.csv", [",a,b", "a,0,x", "b,0.1,0"], 2, "numbers"),
        ("word.phy", ["2", "a 0 0.1", "b 0.1 ?"], 3, "numbers"),
        ("skew.phy", ["2", "a 0 0.1", "b 0.5 0"], 2, "symmetric"),
        ("start.phy", ["two", "a 0 0.1", "b 0.1 0"], 1, "number of items"),
    ],
)
def test_read_errors_name_file_and_line(
    tmp_path: Path, name: str, text: list[str], where: int, message: str
) -> None:
    path = tmp_path / name
    path.write_text("\n".join(text) + "\n")
    with pytest.raises(InputError, match=message) as error:
        read_matrix(path)
    assert f"{path}:{where}:" in str(error.value)


@pytest.mark.parametrize(
    ("name", "text", "message"),
    [
        ("labels.tsv", "\ta\tb\na\t0\t1\nc\t1\t0\n", "row labels do not match"),
        ("short.phy", "3\na 0 1 1\nb 1 0 1\n", "says 3 items but holds 2"),
        ("one.tsv", "\ta\na\t0\n", "at least two"),
        ("bad.json", '{"labels": ["a", "b"]}', "not a kinpress matrix JSON"),
        ("missing.tsv", None, "no such file"),
    ],
)
def test_read_errors_name_the_file(
    tmp_path: Path, name: str, text: str | None, message: str
) -> None:
    path = tmp_path / name
    if text is not None:
        path.write_text(text)
    with pytest.raises(InputError, match=message) as error:
        read_matrix(path)
    assert str(error.value).startswith(str(path))


# --- atomic writes -------------------------------------------------------------------------


def test_atomic_write_leaves_only_the_target_behind(tmp_path: Path) -> None:
    target = tmp_path / "out.tsv"
    target.write_text("old\n")
    atomic_write(target, "new\nline two\n")
    assert target.read_text() == "new\nline two\n"
    assert os.listdir(tmp_path) == ["out.tsv"]
    assert stat.S_IMODE(target.stat().st_mode) == 0o644


@pytest.mark.parametrize("failing", ["replace", "fsync"])
def test_failed_atomic_write_keeps_the_old_file_and_no_temporary(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, failing: str
) -> None:
    target = tmp_path / "out.tsv"
    target.write_text("old contents\n")

    def boom(*args: object) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(kinpress.formats.os, failing, boom)
    with pytest.raises(OSError, match="No space left"):
        write_matrix(small_matrix(), target)
    monkeypatch.undo()
    assert target.read_text() == "old contents\n"
    assert os.listdir(tmp_path) == ["out.tsv"]


def test_atomic_write_keeps_line_ends_as_given(tmp_path: Path) -> None:
    target = tmp_path / "crlf.csv"
    atomic_write(target, "a\r\nb\n")
    assert target.read_bytes() == b"a\r\nb\n"


def test_writing_to_a_device_or_pipe_keeps_it_what_it_is(tmp_path: Path) -> None:
    import os
    import stat
    import threading

    from kinpress.formats import atomic_write

    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    received: list[bytes] = []
    reader = threading.Thread(target=lambda: received.append(fifo.read_bytes()))
    reader.start()
    atomic_write(fifo, "through the pipe\n")
    reader.join(timeout=10)
    assert received == [b"through the pipe\n"]
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    atomic_write("/dev/null", "nothing\n")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)


def test_a_tsv_whose_labels_look_like_a_phylip_header_reads_as_tsv(tmp_path: Path) -> None:
    # Found by the round-trip property: labels ("0", " ") gave the header line "\t0\t ", which,
    # stripped of its leading tab, looked like a PHYLIP item count.
    dm = DistanceMatrix(("0", " "), np.array([[0.0, 0.5], [0.5, 0.0]]))
    write_matrix(dm, tmp_path / "m.tsv")
    assert_same_matrix(read_matrix(tmp_path / "m.tsv"), dm)


# --- results as JSON values, findings tables, earlier outputs in a folder ------------------------


def test_json_ready_makes_numpy_values_nan_and_dataclasses_plain_json() -> None:
    stats = MatrixStats(pairs_computed=3)
    value = {
        "fit": np.float64("nan"),
        "cut": float("inf"),
        "rows": np.array([[1, 0], [0, 1]], dtype=np.int64),
        "near": np.array([0.5, np.nan]),
        "count": np.int64(4),
        "flag": np.bool_(True),
        "names": ("a", "b"),
        "stats": stats,
        "where": Path("x/y.txt"),
    }
    got = json_ready(value)
    assert got == {
        "fit": None,
        "cut": None,
        "rows": [[1, 0], [0, 1]],
        "near": [0.5, None],
        "count": 4,
        "flag": True,
        "names": ["a", "b"],
        "stats": stats.as_dict(),
        "where": "x/y.txt",
    }
    # reference: Python's json module refusing NaN and infinities (RFC 8259, section 6)
    json.dumps(got, allow_nan=False)
    assert type(got["count"]) is int and type(got["flag"]) is bool


def test_matrix_json_file_is_the_matrix_as_json(tmp_path: Path) -> None:
    dm = DistanceMatrix(
        ("a", "b\tc", "d"),
        np.array([[0, 0.123456789, 0.5], [0.123456789, 0, 0.25], [0.5, 0.25, 0]]),
        sizes=np.array([10, 20, 30]),
        self_distances=np.array([0.01, 0.02, 0.03]),
        compressor="zlib:level=6,window=15",
        conditional="concat",
        classes=("x", None, "y"),
    )
    doc = dm.as_json()
    assert json.loads(matrix_to_json(dm)) == json_safe(doc)
    assert list(doc) == ["labels", "compressor", "conditional", "strand", "sizes",
                         "self_distances", "stats", "kinpress", "classes", "distances"]  # fmt: skip
    assert doc["distances"][0][1] == 0.12345679 and doc["classes"]["b\tc"] is None
    assert "distances" not in dm.as_json(rows=False)


def _finding(a: str, b: str, stretches: tuple[Stretch, ...]) -> DerivedFinding:
    return DerivedFinding(a, b, "a_contains_b", 0.25, 0.9, 0.8, 0.003, 0.2, 0.95, stretches,
                          a_path=f"share/{a}", b_path=f"share/{b}", a_hash="ab" * 16,
                          b_hash="cd" * 16)  # fmt: skip


def test_findings_are_written_as_tsv_and_csv_with_paths_hashes_and_the_longest_passage(
    tmp_path: Path,
) -> None:
    longest, shorter = Stretch(10, 500, 0, 480, 470, 30), Stretch(600, 700, 520, 610, 90, 5)
    findings = [
        _finding("big, report.txt", "part\tone.txt", (longest, shorter)),
        _finding("same.txt", "same copy.txt", ()),
    ]
    for fmt, delimiter in (("tsv", "\t"), ("csv", ",")):
        path = tmp_path / f"findings.{fmt}"
        write_findings(findings, path)
        with open(path, newline="", encoding="utf-8") as handle:
            # reference: Python's csv module (RFC 4180 for CSV; TSV is written unquoted)
            quoting = csv.QUOTE_NONE if fmt == "tsv" else csv.QUOTE_MINIMAL
            rows = list(csv.DictReader(handle, delimiter=delimiter, quoting=quoting))
        assert list(rows[0]) == list(FINDING_COLUMNS)
        first, second = rows
        assert [unescape_name(first[k]) for k in ("a", "b", "a_path", "b_path")] == [
            "big, report.txt", "part\tone.txt", "share/big, report.txt", "share/part\tone.txt"
        ]  # fmt: skip
        assert first["relation"] == "a_contains_b" and float(first["fpr"]) == 0.003
        assert float(first["b_shared_in_order"]) == 0.95
        assert (first["a_hash"], first["b_hash"]) == ("ab" * 16, "cd" * 16)
        assert [int(first[k]) for k in ("a_start", "a_end", "b_start", "b_end")] == [
            10, 500, 0, 480
        ]  # fmt: skip
        assert [second[k] for k in ("a_start", "a_end", "b_start", "b_end")] == ["", "", "", ""]
    write_findings(findings, tmp_path / "findings.json")
    listed = json.loads((tmp_path / "findings.json").read_text())
    assert [row["a_path"] for row in listed] == ["share/big, report.txt", "share/same.txt"]


def test_every_output_kinpress_writes_is_left_out_of_a_folder_of_inputs(tmp_path: Path) -> None:
    folder = tmp_path / "texts"
    folder.mkdir()
    texts = {f"t{k}.txt": f"line {k} of a text about things\n" * 20 for k in range(4)}
    texts["notes.json"] = '{"title": "not ours", "labels": [1, 2]}\n'
    texts["code.js"] = "(function(){console.log(1)})();\n"
    texts["pairs.json"] = '[{"a": 1, "b": 2}]\n'
    for name, text in texts.items():
        (folder / name).write_text(text)
    dm = small_matrix(("t0.txt", "t1.txt", "t2 x.txt"))
    for fmt in MATRIX_FORMATS:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FormatWarning)
            write_matrix(dm, folder / f"dist-{fmt}.out", fmt)
    tree = TreeResult.of(build_tree(dm.labels, dm.distances), "nj", dm.distances, dm.labels)
    emit(tree.newick + "\n", folder / "tree.nwk")
    emit(json_text(tree.as_json()), folder / "tree.json")
    grouped = GroupingResult.of(dm.labels, find_groups(dm.distances, k=2))
    emit(group_lines(grouped), folder / "groups.tsv")
    emit(json_text(grouped.as_json()), folder / "groups.json")
    found = [_finding("t0.txt", "t1.txt", (Stretch(0, 9, 0, 9, 9, 2),))]
    for fmt in FINDING_FORMATS:
        write_findings(found, folder / f"found.{fmt}")
    ours = {p.name for p in folder.iterdir()} - set(texts)
    with pytest.warns(InputWarning, match=rf"left out {len(ours)} file\(s\).*kinpress") as caught:
        kept = expand_paths([folder])
    assert sorted(os.path.basename(p) for p in kept) == sorted(texts)
    message = str(caught[0].message)
    assert "dist-json.out: kinpress matrix (JSON)" in message

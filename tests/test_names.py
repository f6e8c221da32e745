"""Names survive every output: escaped reversibly where a format cannot hold them, read back
as they were, and file names that are not UTF-8 make no run fail."""

from __future__ import annotations

import csv
import io
import json
import os
import tempfile
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import generated_text
from kinpress import DistanceMatrix, read_matrix
from kinpress.cli import main
from kinpress.formats import WRITERS, FormatWarning, json_text
from kinpress.items import escape_name, load_items, read_labels, unescape_name
from kinpress.trees import build_tree, leaf_order, parse_newick, to_newick

# Characters that break one format or another: separators, quotes, line breaks Python's
# str.splitlines knows (Unicode's own among them), a NUL, and file-name bytes that are not UTF-8
# as os.fsdecode gives them (surrogate escapes, PEP 383).
AWKWARD = st.sampled_from(
    ["\t", "\n", "\r", "\\", "'", '"', ",", " ", ";", ":", "(", ")", "[", "]", "$", "\x00",
     "\x1c", "\x85", "\u2028", "\xa0", "\\x41", "\\t", "é", "δ"]
)  # fmt: skip
UNDECODABLE = st.integers(0x80, 0xFF).map(lambda byte: chr(0xDC00 + byte))
NAME = st.lists(st.one_of(st.characters(), AWKWARD, UNDECODABLE), max_size=12).map("".join)
LABELS = st.lists(NAME, min_size=2, max_size=6, unique=True)


def matrix(labels: list[str]) -> DistanceMatrix:
    rng = np.random.default_rng(len(labels))
    d = rng.random((len(labels), len(labels)))
    d = np.round((d + d.T) / 2, 6)
    np.fill_diagonal(d, 0)
    return DistanceMatrix(tuple(labels), d, classes=tuple(reversed(labels)))


@given(NAME)
def test_escape_is_undone_exactly(name: str) -> None:
    written = escape_name(name)
    assert unescape_name(written) == name
    assert written.isprintable()  # no control character, separator or lone surrogate left
    written.encode("utf-8")


@given(NAME)
def test_ordinary_names_are_written_as_they_are(name: str) -> None:
    plain = "".join(c for c in name if c.isprintable() and c != "\\")
    assert escape_name(plain) == plain


@settings(max_examples=60, deadline=None)
@given(LABELS, st.sampled_from(sorted(WRITERS)))
def test_every_matrix_format_reads_back_the_same_names(labels: list[str], fmt: str) -> None:
    dm = matrix(labels)
    with tempfile.TemporaryDirectory() as folder, warnings.catch_warnings():
        warnings.simplefilter("ignore", FormatWarning)  # PHYLIP says when it escapes blanks
        path = Path(folder) / f"m.{fmt}"
        path.write_bytes("".join(WRITERS[fmt](dm)).encode("utf-8"))
        back = read_matrix(path, fmt)
    assert back.labels == tuple(labels)
    np.testing.assert_allclose(back.distances, dm.distances, atol=1e-6)
    if fmt == "json":
        assert back.classes == dm.classes


@settings(max_examples=60, deadline=None)
@given(LABELS)
def test_newick_reads_back_the_same_names(labels: list[str]) -> None:
    tree = build_tree(labels, matrix(labels).distances)
    assert leaf_order(parse_newick(to_newick(tree))) == leaf_order(tree)


@given(st.dictionaries(NAME, NAME, max_size=5))
def test_json_text_keeps_every_string(value: dict[str, str]) -> None:
    text = json_text(value)
    text.encode("utf-8")
    back = json.loads(text)
    assert {unescape_name(k): unescape_name(v) for k, v in back.items()} == value


KEY = NAME.filter(lambda n: n.strip() == n and n and not n.startswith("#"))


@given(st.dictionaries(KEY, NAME, max_size=5))
def test_labels_files_take_names_as_kinpress_writes_them(rows: dict[str, str]) -> None:
    body = "".join(f"{escape_name(a)}\t{escape_name(b)}\n" for a, b in rows.items())
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "labels.tsv"
        path.write_text("item\tlabel\n" + body, encoding="utf-8")
        found = read_labels(path)
    assert {k: v.strip() for k, v in found.items()} == {a: b.strip() for a, b in rows.items()}


# --- file names through the command line -------------------------------------------------


@pytest.fixture
def awkward_folder(tmp_path: Path) -> Path:
    """Four text files whose names hold a byte that is not UTF-8, a tab, a line break, a
    backslash."""
    folder = tmp_path / "awkward"
    folder.mkdir()
    names = [b"bad\xff.txt", b"tab\there.txt", b"two\nlines.txt", b"back\\slash.txt"]
    for seed, name in enumerate(names):
        with open(os.path.join(os.fsencode(folder), name), "wb") as out:
            out.write(generated_text(seed))
    return folder


EXPECTED = sorted(["bad\udcff.txt", "tab\there.txt", "two\nlines.txt", "back\\slash.txt"])


@pytest.mark.parametrize("fmt", ["tsv", "csv", "phylip", "json"])
def test_file_names_that_are_not_utf8_or_hold_tabs_survive_every_format(
    awkward_folder: Path, tmp_path: Path, fmt: str, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / f"m.{fmt}"
    code = main(["matrix", str(awkward_folder), "-c", "zlib", "--no-cache", "-o", str(out)])
    assert code == 0, capsys.readouterr().err
    assert sorted(read_matrix(out).labels) == EXPECTED
    tree = tmp_path / "t.nwk"
    assert main(["tree", "--matrix", str(out), "-o", str(tree), "--quiet"]) == 0
    assert sorted(leaf_order(parse_newick(tree.read_text()))) == EXPECTED


def test_terminal_outputs_of_awkward_names_are_one_row_each(
    awkward_folder: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["matrix", str(awkward_folder), "-c", "zlib", "--no-cache"]) == 0
    out = capsys.readouterr().out
    assert len(out.splitlines()) == 5
    assert main(["groups", str(awkward_folder), "-c", "zlib", "--no-cache", "--k", "2"]) == 0
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out), delimiter="\t"))
    assert rows[0] == ["item", "group", "medoid", "outlier"]
    assert sorted(unescape_name(row[0]) for row in rows[1:]) == EXPECTED
    assert main(["tree", str(awkward_folder), "-c", "zlib", "--no-cache", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert sorted(leaf_order(parse_newick(unescape_name(report["newick"])))) == EXPECTED


def test_items_keep_the_bytes_of_their_file_names(awkward_folder: Path) -> None:
    assert sorted(item.name for item in load_items([awkward_folder])) == EXPECTED

"""Inputs to items: FASTA and the Biopython formats, splits, folders, stdin, names and labels."""

from __future__ import annotations

import bz2
import csv
import gzip
import io
import lzma
import os
import random
import warnings
from collections.abc import Callable
from pathlib import Path

import pytest
import zstandard
from Bio import SeqIO
from Bio.Seq import Seq
from Bio.SeqRecord import SeqRecord
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from conftest import generated_text
from kinpress.items import (
    InputError,
    InputWarning,
    Split,
    expand_paths,
    is_nucleotide,
    label_spec,
    load_items,
    parse_fasta,
    read_label_table,
    read_labels,
    reference_items,
    reverse_complement,
    sequence_records,
)

IUPAC_DNA = "ACGTRYKMSWBDHVN"
# UniProt P01308 (human preproinsulin), from memory; any real protein would do.
INSULIN = (
    b"MALWMRLLPLLALLALWGPDPAAAFVNQHLCGSHLVEALYLVCGERGFFYTPKTRREAEDLQVGQVELGGGPGAGSLQPLALEGSLQ"
    b"KRGIVEQCCTSICSLYQLENYCN"
)


def stdin_items(data: bytes, split: str = "auto") -> list[tuple[str, bytes]]:
    return [(i.name, i.data) for i in load_items(["-"], split, stdin=io.BytesIO(data))]


def wrap(letters: str, width: int) -> list[str]:
    return [letters[k : k + width] for k in range(0, len(letters), width)]


# --- FASTA ---------------------------------------------------------------------------------

records_strategy = st.lists(
    st.tuples(
        st.from_regex(r"[A-Za-z0-9_.|]{1,12}", fullmatch=True),
        st.text(alphabet=IUPAC_DNA, min_size=1, max_size=300),
    ),
    min_size=1,
    max_size=4,
    unique_by=lambda r: r[0],
)


@settings(max_examples=150, deadline=None)
@given(
    records=records_strategy,
    width=st.integers(1, 130),
    lower_seed=st.integers(0, 2**32),
    eol=st.sampled_from(["\n", "\r\n"]),
    blank_between=st.booleans(),
    final_eol=st.booleans(),
)
def test_fasta_line_wrapping_does_not_change_items(
    records: list[tuple[str, str]],
    width: int,
    lower_seed: int,
    eol: str,
    blank_between: bool,
    final_eol: bool,
) -> None:
    rng = random.Random(lower_seed)
    lines: list[str] = []
    for rid, letters in records:
        cased = "".join(c.lower() if rng.random() < 0.5 else c for c in letters)
        lines.append(f">{rid} some description")
        lines += wrap(cased, width)
        if blank_between:
            lines.append("")
    text = eol.join(lines) + (eol if final_eol else "")
    expected = [(rid, letters.encode()) for rid, letters in records]
    assert [(rid, seq) for rid, seq in parse_fasta(text.encode(), "x.fa")] == expected
    if len(records) == 1:  # a lone record is named for its file
        expected = [("stdin", records[0][1].encode())]
    assert stdin_items(text.encode()) == expected


def test_fasta_gaps_and_stops_are_removed_and_letters_uppercased() -> None:
    data = b">p1 with gaps\nac-gt.\nNN*rY--\n>p2\n*u\n"
    assert stdin_items(data) == [("p1", b"ACGTNNRY"), ("p2", b"U")]


@pytest.mark.shared
def test_fasta_parser_agrees_with_biopython_on_real_mitogenomes(shared_data: Path) -> None:
    files = sorted((shared_data / "genomes" / "mitogenomes").glob("*.fa"))
    if not files:
        pytest.skip("no mitogenome FASTA files in the shared datasets")
    for path in files:
        ours = list(sequence_records(path.read_bytes(), "fasta", str(path)))
        # reference: Biopython SeqIO.parse(..., "fasta"); id = first word of the header. Our
        # convention drops gap and stop symbols, so they are dropped from its letters too.
        theirs = [
            (rec.id, str(rec.seq).upper().replace("-", "").replace("*", "").encode())
            for rec in SeqIO.parse(path, "fasta")
        ]
        assert ours == theirs, path.name
        assert all(len(letters) > 15_000 for _, letters in ours)  # whole mitogenomes
        items = load_items([path], "records")
        assert [i.data for i in items] == [letters for _, letters in theirs]


@pytest.mark.parametrize(
    ("text", "line", "message"),
    [
        (b"stray text\n>a\nACGT\n", 1, "header"),
        (b"\n\nACGT\n>a\nACGT\n", 3, "header"),
        (b">a\nACGT\nAC1GT\n", 3, "'1'"),
        (b">a\nACGT\n>b\nGG\nGG GG\n", 5, "' '"),
        (b">a\r\nACGT\r\n>\r\nACGT\r\n", 3, "no identifier"),
        (b">a\nACGT\n>   \nACGT\n", 3, "no identifier"),
    ],
)
def test_malformed_fasta_is_an_input_error_naming_file_and_line(
    tmp_path: Path, text: bytes, line: int, message: str
) -> None:
    path = tmp_path / "broken.fa"
    path.write_bytes(text)
    with pytest.raises(InputError) as error:
        load_items([path])
    assert f"broken.fa:{line}:" in str(error.value)
    assert message in str(error.value)


def test_comment_lines_before_the_first_fasta_header_are_allowed(tmp_path: Path) -> None:
    (tmp_path / "old.fa").write_bytes(b";old-style comment\n>a\nACGT\n>b\nGG\n")
    items = load_items([tmp_path / "old.fa"])
    assert [(i.name, i.data) for i in items] == [("a", b"ACGT"), ("b", b"GG")]


def test_empty_fasta_record_warns_and_is_left_out() -> None:
    with pytest.warns(InputWarning, match="record empty"):
        assert stdin_items(b">empty\n>full\nACGT\n>more\nTT\n") == [
            ("full", b"ACGT"),
            ("more", b"TT"),
        ]


# --- other sequence formats -----------------------------------------------------------------


def bio_records() -> list[SeqRecord]:
    sequences = ["ACGTTGCA" * 23 + "ACG", "GGGCCCAATTN" * 7]
    return [
        SeqRecord(
            Seq(letters),
            id=f"KP00000{k}.1",
            name=f"KP00000{k}",
            description=f"test record {k}",
            annotations={"molecule_type": "DNA"},
            letter_annotations={"phred_quality": [30] * len(letters)},
        )
        for k, letters in enumerate(sequences, start=1)
    ]


@pytest.mark.parametrize(
    ("fmt", "suffix"),
    [
        ("genbank", ".gb"),
        ("genbank", ".gbk"),
        ("embl", ".embl"),
        ("fastq", ".fq"),
        ("fasta", ".fa"),
    ],
)
def test_files_written_by_biopython_load_to_the_same_letters(
    tmp_path: Path, fmt: str, suffix: str
) -> None:
    # reference: Biopython SeqIO.write produces the files (GenBank/EMBL wrap and lowercase).
    records = bio_records()
    path = tmp_path / f"records{suffix}"
    SeqIO.write(records, path, fmt)
    items = load_items([path])
    assert [(i.name, i.data) for i in items] == [(r.id, str(r.seq).encode()) for r in records]
    assert all(i.nucleotide for i in items)


def test_gzipped_fasta_loads_like_the_plain_file(tmp_path: Path) -> None:
    text = b">a desc\nACGTAC\nGT\n>b\nttttgg\n"
    (tmp_path / "plain.fa").write_bytes(text)
    (tmp_path / "packed.fa.gz").write_bytes(gzip.compress(text))
    plain = load_items([tmp_path / "plain.fa"])
    packed = load_items([tmp_path / "packed.fa.gz"])
    assert [(i.name, i.data) for i in packed] == [(i.name, i.data) for i in plain]
    assert [(i.name, i.data) for i in plain] == [("a", b"ACGTACGT"), ("b", b"TTTTGG")]
    whole = load_items([tmp_path / "packed.fa.gz"], "file")
    assert [(i.name, i.data) for i in whole] == [("packed", b"ACGTACGTTTTTGG")]


@pytest.mark.parametrize(
    ("suffix", "damaged"),
    [
        (".gz", b"not gzip at all"),
        (".gz", gzip.compress(random.Random(1).randbytes(4000))[:2000]),  # cut short
        (".bz2", b"BZh91AY&SY" + b"\x00" * 40),  # a bzip2 header, then no valid block
        (".xz", lzma.compress(random.Random(2).randbytes(4000))[:2000]),
        (".zst", b"\x28\xb5\x2f\xfd" + b"\xff" * 20),  # a zstd magic number, then noise
    ],
    ids=["gz-not-gzip", "gz-cut", "bz2", "xz-cut", "zst"],
)
def test_a_damaged_compressed_file_below_a_folder_is_left_out_with_a_warning(
    tmp_path: Path, suffix: str, damaged: bytes
) -> None:
    # A code tree's test data holds deliberately damaged archives (seen in a real tree): one of
    # them must not stop the reading of the thousands of other files. Named on its own, the
    # file is what the user asked for, and it stays an error naming it.
    tree = tmp_path / "tree"
    (tree / "testdata").mkdir(parents=True)
    (tree / "main.go").write_bytes(b"package main\n")
    (tree / "testdata" / f"broken{suffix}").write_bytes(damaged)
    with pytest.warns(InputWarning, match=rf"broken\{suffix}: cannot decompress: .*; left out"):
        items = load_items([tree])
    assert [i.name for i in items] == ["main.go"]
    with pytest.raises(InputError, match=rf"broken\{suffix}: cannot decompress"):
        load_items([tree / "testdata" / f"broken{suffix}"])


@pytest.mark.parametrize(
    ("suffix", "pack"),
    [
        (".bz2", bz2.compress),
        (".xz", lzma.compress),
        (".zst", lambda data: zstandard.ZstdCompressor().compress(data)),
    ],
)
def test_bzip2_xz_and_zstd_inputs_load_like_the_plain_file(
    tmp_path: Path, suffix: str, pack: Callable[[bytes], bytes]
) -> None:
    text = b">a desc\nACGTAC\nGT\n>b\nttttgg\n"
    (tmp_path / f"packed.fa{suffix}").write_bytes(pack(text))
    packed = load_items([tmp_path / f"packed.fa{suffix}"], "file")
    assert [(i.name, i.data) for i in packed] == [("packed", b"ACGTACGTTTTTGG")]
    (tmp_path / f"notes.txt{suffix}").write_bytes(pack(b"plain words\n" * 1000))
    assert load_items([tmp_path / f"notes.txt{suffix}"])[0].name == "notes.txt"
    with pytest.raises(InputError, match=rf"notes.txt{suffix}: larger than 1 KiB"):
        load_items([tmp_path / f"notes.txt{suffix}"], max_file_bytes=1024)
    (tmp_path / f"broken{suffix}").write_bytes(b"not compressed at all")
    with pytest.raises(InputError, match=rf"broken{suffix}: cannot decompress"):
        load_items([tmp_path / f"broken{suffix}"])


# --- splits --------------------------------------------------------------------------------


@settings(max_examples=100, deadline=None)
@given(
    lines=st.lists(
        st.binary(max_size=40).filter(lambda b: b"\n" not in b and b"\r" not in b),
        min_size=1,
        max_size=60,
    ),
    n=st.integers(1, 25),
    final_eol=st.booleans(),
)
def test_lines_split_chunks_concatenate_back_with_n_lines_each(
    lines: list[bytes], n: int, final_eol: bool
) -> None:
    data = b"\n".join(lines) + (b"\n" if final_eol else b"")
    assume(data)  # an empty input is left out, tested elsewhere
    items = stdin_items(data, f"lines:{n}")
    assert b"".join(piece for _, piece in items) == data
    assert [name for name, _ in items] == [f"stdin#{k}" for k in range(1, len(items) + 1)]
    # without a final line end, a last empty line is no line at all
    count = len(lines) if final_eol or lines[-1] else len(lines) - 1
    assert len(items) == -(-count // n)
    for _, piece in items[:-1]:
        assert piece.count(b"\n") == n and piece.endswith(b"\n")


@settings(max_examples=100, deadline=None)
@given(data=st.binary(min_size=1, max_size=2000), n=st.integers(1, 300))
def test_bytes_split_chunks_concatenate_back_with_n_bytes_each(data: bytes, n: int) -> None:
    assume(not data.lstrip().startswith(b">"))  # FASTA-like stdin: letters or text, left open
    items = stdin_items(data, f"bytes:{n}")
    assert b"".join(piece for _, piece in items) == data
    assert len(items) == -(-len(data) // n)
    assert all(len(piece) == n for _, piece in items[:-1])
    assert 1 <= len(items[-1][1]) <= n


def test_split_chunks_of_a_file_are_named_after_the_file(tmp_path: Path) -> None:
    text = generated_text(3, lines=25)
    (tmp_path / "app.log").write_bytes(text)
    items = load_items([tmp_path / "app.log"], "lines:10")
    assert [i.name for i in items] == ["app.log#1", "app.log#2", "app.log#3"]
    assert [i.data.count(b"\n") for i in items] == [10, 10, 5]
    assert b"".join(i.data for i in items) == text
    by_bytes = load_items([tmp_path / "app.log"], "bytes:100")
    assert len(by_bytes) == -(-len(text) // 100)
    assert b"".join(i.data for i in by_bytes) == text


@pytest.mark.shared
def test_lines_split_of_real_logs_reproduces_each_log(shared_data: Path) -> None:
    logs = sorted((shared_data / "logs").glob("*.log"))
    if not logs:
        pytest.skip("no log files in the shared datasets")
    for path in logs[:3]:
        original = path.read_bytes()
        items = load_items([path], "lines:500")
        assert b"".join(i.data for i in items) == original
        assert len(items) == -(-len(original.splitlines()) // 500)
        assert items[0].name == f"{path.name}#1"


def test_bytes_split_of_fasta_chunks_each_record(tmp_path: Path) -> None:
    (tmp_path / "s.fa").write_bytes(b">r1\nACGTACGTAC\n>r2\nGGGG\n")
    items = load_items([tmp_path / "s.fa"], "bytes:4")
    assert [(i.name, i.data) for i in items] == [
        ("r1#1", b"ACGT"),
        ("r1#2", b"ACGT"),
        ("r1#3", b"AC"),
        ("r2#1", b"GGGG"),
    ]


def test_lines_split_of_a_fasta_file_is_an_input_error(tmp_path: Path) -> None:
    (tmp_path / "s.fa").write_bytes(b">r1\nACGT\n")
    with pytest.raises(InputError, match=r"s\.fa: lines:N"):
        load_items([tmp_path / "s.fa"], "lines:2")


def test_records_split_of_a_plain_text_file_is_an_input_error(tmp_path: Path) -> None:
    (tmp_path / "notes.txt").write_bytes(b"just words\n")
    with pytest.raises(InputError, match=r"notes\.txt: --split records"):
        load_items([tmp_path / "notes.txt"], "records")


def test_file_split_of_multi_record_fasta_is_one_item_with_all_letters(tmp_path: Path) -> None:
    (tmp_path / "multi.fasta").write_bytes(b">a\nAC\nGT\n>b\nTT\n>c\nggcc\n")
    items = load_items([tmp_path / "multi.fasta"], "file")
    assert [(i.name, i.data, i.nucleotide) for i in items] == [("multi", b"ACGTTTGGCC", True)]


@pytest.mark.parametrize("text", ["lines", "lines:0", "bytes:-3", "records:2", "chunks:5", ""])
def test_bad_split_is_an_input_error(text: str) -> None:
    with pytest.raises(InputError, match="bad split"):
        Split.parse(text)


# --- paths, folders, names ------------------------------------------------------------------


def test_folders_are_read_recursively_sorted_and_without_hidden_files(tmp_path: Path) -> None:
    root = tmp_path / "in"
    for relative in ["b.txt", "a/z.txt", "a/sub/c.txt", ".hidden.txt", ".git/config", "a/.x/y"]:
        path = root / relative
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(relative.encode())
    expected = [str(root / "a/sub/c.txt"), str(root / "a/z.txt"), str(root / "b.txt")]
    assert expand_paths([root]) == expected
    assert expand_paths([root]) == expected  # stable
    assert [i.name for i in load_items([root])] == ["c.txt", "z.txt", "b.txt"]


def test_side_files_in_a_folder_of_sequences_are_left_out_unless_named(tmp_path: Path) -> None:
    genomes = tmp_path / "genomes"
    genomes.mkdir()
    for name in ("ab.fa", "cd.fasta", "ef.gb.gz"):
        (genomes / name).write_bytes(b"")
    (genomes / "labels.tsv").write_bytes(b"ab.fa\tfrog\n")
    (genomes / "notes").mkdir()
    (genomes / "notes" / "README.md").write_bytes(b"# notes\n")
    with pytest.warns(InputWarning, match=r"left out 2 file\(s\).*labels\.tsv, notes/README\.md"):
        found = expand_paths([genomes])
    assert found == [str(genomes / n) for n in ("ab.fa", "cd.fasta", "ef.gb.gz")]
    # Named on its own, a side file is kept; in a folder of mostly other files nothing is dropped.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert expand_paths([genomes / "ab.fa", genomes / "labels.tsv"])[-1].endswith("labels.tsv")
        (genomes / "more.txt").write_bytes(b"x")
        (genomes / "extra.txt").write_bytes(b"y")
        assert len(expand_paths([genomes])) == 7


def test_hidden_file_named_explicitly_is_read(tmp_path: Path) -> None:
    (tmp_path / ".env.txt").write_bytes(b"x=1\n")
    assert [i.name for i in load_items([tmp_path / ".env.txt"])] == [".env.txt"]


def test_empty_file_warns_and_is_left_out(tmp_path: Path) -> None:
    (tmp_path / "empty.txt").write_bytes(b"")
    (tmp_path / "full.txt").write_bytes(b"content\n")
    with pytest.warns(InputWarning, match=r"empty\.txt: empty file"):
        items = load_items([tmp_path])
    assert [i.name for i in items] == ["full.txt"]


def test_many_empty_files_get_one_warning_that_counts_them(tmp_path: Path) -> None:
    # A Python tree holds many empty __init__.py files (34 in pip's wheel and the 23 projects
    # it vendors): one warning counts them and names the first few, not a screen of lines.
    for k in range(12):
        (tmp_path / f"pkg{k:02d}").mkdir()
        (tmp_path / f"pkg{k:02d}" / "__init__.py").write_bytes(b"")
    (tmp_path / "full.txt").write_bytes(b"content\n")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        items = load_items([tmp_path])
    assert [i.name for i in items] == ["full.txt"]
    said = [str(w.message) for w in caught if issubclass(w.category, InputWarning)]
    assert len(said) == 1
    assert said[0].startswith("12 empty files left out: ")
    assert "pkg00/__init__.py" in said[0] and said[0].endswith("and 9 more")


def test_a_references_empty_files_get_one_warning_too(tmp_path: Path) -> None:
    # A reference's origins are read folder by folder; their empty files are counted together.
    for origin in ("alpha", "beta", "gamma"):
        for k in range(2):
            (tmp_path / origin / f"m{k}").mkdir(parents=True)
            (tmp_path / origin / f"m{k}" / "__init__.py").write_bytes(b"")
        (tmp_path / origin / "code.py").write_bytes(origin.encode() * 20)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        items = reference_items(tmp_path)
    assert sorted(i.label for i in items) == ["alpha", "beta", "gamma"]
    said = [str(w.message) for w in caught if issubclass(w.category, InputWarning)]
    assert len(said) == 1 and said[0].startswith("6 empty files left out: ")


def test_missing_path_is_an_input_error_naming_it(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"nowhere\.txt: no such file"):
        load_items([tmp_path / "nowhere.txt"])


def test_empty_folder_is_an_input_error(tmp_path: Path) -> None:
    (tmp_path / "void").mkdir()
    (tmp_path / "only-hidden").mkdir()
    (tmp_path / "only-hidden" / ".secret").write_bytes(b"x")
    for folder in ("void", "only-hidden"):
        with pytest.raises(InputError, match=f"{folder}: folder holds no files"):
            load_items([tmp_path / folder])


def test_files_of_one_name_are_named_by_their_path_below_the_shared_folder(
    tmp_path: Path,
) -> None:
    # A tree holds many files of one name (__init__.py): numbered, they read __init__.py~7 in
    # every output; by their path below the folder the inputs share, they say which file.
    for folder in ("one", "two", "three/deep"):
        (tmp_path / folder).mkdir(parents=True)
        (tmp_path / folder / "x.txt").write_bytes(folder.encode())
    (tmp_path / "two" / "x.txt~2").write_bytes(b"already suffixed")
    (tmp_path / "two" / "log.gz").write_bytes(gzip.compress(b"alone"))
    (tmp_path / "one" / "log").write_bytes(b"plain")
    items = load_items([tmp_path / "one", tmp_path / "two", tmp_path / "three"])
    place = os.path.join
    assert [(i.name, i.data) for i in items] == [
        (place("one", "log"), b"plain"),
        (place("one", "x.txt"), b"one"),
        (place("two", "log"), b"alone"),  # read through gzip: named without .gz, as alone
        (place("two", "x.txt"), b"two"),
        ("x.txt~2", b"already suffixed"),  # a name of its own
        (place("three", "deep", "x.txt"), b"three/deep"),
    ]
    # one file given twice is one path: the second gets a numbered suffix
    twice = load_items([tmp_path / "one" / "x.txt", tmp_path / "one" / "x.txt"])
    assert [i.name for i in twice] == ["x.txt", "x.txt~2"]
    # chunks of files of one name carry the path too
    chunks = load_items([tmp_path / "one" / "x.txt", tmp_path / "two" / "x.txt"], "bytes:2")
    expected = [place(folder, f"x.txt#{k}") for folder in ("one", "two") for k in (1, 2)]
    assert [i.name for i in chunks] == expected
    assert len({i.name for i in items}) == len(items)


def test_repeated_record_ids_across_files_are_made_unique(tmp_path: Path) -> None:
    (tmp_path / "a.fa").write_bytes(b">seq\nACGT\n>x\nT\n")
    (tmp_path / "b.fa").write_bytes(b">seq\nGGCC\n>y\nA\n")
    items = load_items([tmp_path])
    assert [i.name for i in items] == ["seq", "x", "seq~2", "y"]
    assert items[2].data == b"GGCC"


def test_single_record_file_is_named_after_the_file(tmp_path: Path) -> None:
    (tmp_path / "one").mkdir()
    (tmp_path / "two").mkdir()
    (tmp_path / "one" / "homo_sapiens.fa").write_bytes(b">NC_012920.1 human\nACGT\n")
    (tmp_path / "two" / "homo_sapiens.fasta.gz").write_bytes(gzip.compress(b">other\nGG\n"))
    items = load_items([tmp_path / "one", tmp_path / "two"])
    assert [(i.name, i.data) for i in items] == [
        ("homo_sapiens", b"ACGT"),
        ("homo_sapiens~2", b"GG"),
    ]
    by_bytes = load_items([tmp_path / "one"], "bytes:3")
    assert [(i.name, i.data) for i in by_bytes] == [
        ("homo_sapiens#1", b"ACG"),
        ("homo_sapiens#2", b"T"),
    ]


def test_exclude_keeps_an_output_file_out(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    (tmp_path / "a.txt").write_bytes(b"a\n")
    (tmp_path / "b.txt").write_bytes(b"b\n")
    (tmp_path / "dist.tsv").write_bytes(b"old output\n")
    names = [i.name for i in load_items([tmp_path], exclude=[str(tmp_path / "dist.tsv")])]
    assert names == ["a.txt", "b.txt"]
    monkeypatch.chdir(tmp_path)  # a relative exclude names the same file
    assert [i.name for i in load_items(["."], exclude=["dist.tsv"])] == ["a.txt", "b.txt"]


def test_stdin_fasta_is_sniffed_and_split_into_records() -> None:
    data = b"\n>x1 first\nacgt\n>x2\nTTGG\n"
    items = load_items(["-"], stdin=io.BytesIO(data))
    assert [(i.name, i.data, i.source, i.nucleotide) for i in items] == [
        ("x1", b"ACGT", "-", True),
        ("x2", b"TTGG", "-", True),
    ]


def test_stdin_text_is_one_item_named_stdin() -> None:
    assert stdin_items(b"plain words, not a sequence\n") == [
        ("stdin", b"plain words, not a sequence\n")
    ]


# --- labels --------------------------------------------------------------------------------


def test_labels_tsv_header_row_and_comments_are_optional(tmp_path: Path) -> None:
    with_header = tmp_path / "with.tsv"
    with_header.write_text("item\tlabel\n# a comment\n\na.txt\tweb\nb.txt\tdb\textra column\n")
    without = tmp_path / "without.tsv"
    without.write_text("a.txt\tweb\r\nb.txt\tdb\r\n")
    assert read_labels(with_header) == {"a.txt": "web", "b.txt": "db"}
    assert read_labels(without) == {"a.txt": "web", "b.txt": "db"}


def test_bad_labels_line_is_an_input_error_with_its_line_number(tmp_path: Path) -> None:
    path = tmp_path / "labels.tsv"
    path.write_text("item\tlabel\na.txt\tweb\nno tab on this line\n")
    with pytest.raises(InputError, match=r"labels\.tsv:3: expected item<TAB>label"):
        read_labels(path)


def test_labels_attach_by_item_name_and_by_file_name_for_chunks(tmp_path: Path) -> None:
    (tmp_path / "app.log").write_bytes(generated_text(1, lines=30))
    (tmp_path / "db.log").write_bytes(generated_text(2, lines=10))
    labels = tmp_path / "labels.tsv"
    labels.write_text("app.log\tweb\ndb.log#1\tstorage\n")
    items = load_items(
        [tmp_path / "app.log", tmp_path / "db.log"], "lines:10", labels, exclude=[str(labels)]
    )
    assert [(i.name, i.label) for i in items] == [
        ("app.log#1", "web"),
        ("app.log#2", "web"),
        ("app.log#3", "web"),
        ("db.log#1", "storage"),
    ]


def test_labels_naming_no_item_warn(tmp_path: Path) -> None:
    (tmp_path / "a.txt").write_bytes(b"a\n")
    with pytest.warns(InputWarning, match="1 labels name no item"):
        items = load_items([tmp_path / "a.txt"], labels={"a.txt": "x", "ghost.txt": "y"})
    assert items[0].label == "x"


@pytest.mark.shared
def test_real_mitogenome_labels_attach_to_records_by_file_name(shared_data: Path) -> None:
    root = shared_data / "genomes" / "mitogenomes"
    if not (root / "labels.tsv").is_file():
        pytest.skip("mitogenome labels.tsv missing from the shared datasets")
    with open(root / "labels.tsv", newline="", encoding="utf-8") as handle:
        # reference: Python csv module reading the dataset's own TSV (second column: species)
        species = {row["file"]: row["species"] for row in csv.DictReader(handle, delimiter="\t")}
    files = sorted(root.glob("*.fa"))
    with warnings.catch_warnings():
        warnings.simplefilter("error", InputWarning)  # every label names a file
        items = load_items(files, "records", root / "labels.tsv")
    assert len(items) == len(files) == len(species)
    for item in items:
        assert item.label == species[os.path.basename(item.source)]


# --- nucleotide helpers ---------------------------------------------------------------------


@settings(max_examples=200, deadline=None)
@given(st.text(alphabet=IUPAC_DNA + "U", max_size=200))
def test_reverse_complement_agrees_with_biopython_including_iupac(letters: str) -> None:
    # reference: Biopython Seq.reverse_complement (IUPAC ambiguity codes complemented)
    expected = str(Seq(letters).reverse_complement()).encode()
    assert reverse_complement(letters.encode()) == expected


def test_reverse_complement_of_a_known_sequence() -> None:
    # IUPAC (Cornish-Bowden 1985), from memory: R=AG<->Y=CT, K=GT<->M=AC, B<->V, D<->H; S, W, N self
    assert reverse_complement(b"AACGTRYKMSWBDHVN") == b"NBDHVWSKMRYACGTT"


def test_is_nucleotide_true_for_dna_and_false_for_protein() -> None:
    assert is_nucleotide(b"ACGTTGCAACGTNNACGT" * 10)
    assert is_nucleotide(b"ACGUUGCA" * 10)  # RNA
    assert not is_nucleotide(INSULIN)
    assert not is_nucleotide(b"")
    assert not is_nucleotide(generated_text(0).upper())


def test_protein_fasta_records_are_not_nucleotide(tmp_path: Path) -> None:
    (tmp_path / "p.faa").write_bytes(b">ins\n" + INSULIN + b"\n>dna\nACGTACGTAC\n")
    items = load_items([tmp_path / "p.faa"])
    assert [(i.name, i.nucleotide) for i in items] == [("ins", False), ("dna", True)]
    assert items[0].data == INSULIN


# --- label tables ------------------------------------------------------------------------------

FROGS = Path(__file__).resolve().parent.parent / "datasets" / "karsvell-frogs"


def test_a_column_of_a_label_table_is_chosen_by_name_and_titles_the_labels() -> None:
    # reference: Python's csv module reading the dataset's own TSV (columns item ... clade ...)
    with open(FROGS / "labels.tsv", newline="", encoding="utf-8") as handle:
        clades = {row["item"]: row["clade"] for row in csv.DictReader(handle, delimiter="\t")}
    table = read_label_table(*label_spec(f"{FROGS / 'labels.tsv'}:clade"))
    assert table.column == "clade" and dict(table.mapping) == clades
    assert table.source == str(FROGS / "labels.tsv")
    # Without a column the second one is read, as the two-column format always was.
    species = read_label_table(FROGS / "labels.tsv")
    assert species.column == "species" and species.mapping["KVM30418"] == "Obrunella antiqua"
    with pytest.raises(InputError, match=r"no column 'kingdom'; its columns: species, genus"):
        read_label_table(FROGS / "labels.tsv", "kingdom")


def test_items_without_a_label_in_the_chosen_column_are_named(tmp_path: Path) -> None:
    for name in ("a.log", "b.log", "c.log"):
        (tmp_path / name).write_text(f"{name}\n" * 5)
    table = tmp_path / "truth.csv"
    table.write_text('file,system,"owner, team"\na.log,web,"ops, east"\nb.log,,x\n')
    labels = read_label_table(table, "system")
    assert dict(labels.mapping) == {"a.log": "web"} and labels.column == "system"
    items = load_items([tmp_path / n for n in ("a.log", "b.log", "c.log")], "lines:2",
                       labels=f"{table}:owner, team")  # fmt: skip
    assert {i.name: i.label for i in items if i.name.endswith("#1")} == {
        "a.log#1": "ops, east", "b.log#1": "x", "c.log#1": None
    }  # fmt: skip
    assert labels.missing(items) == [i.name for i in items if not i.name.startswith("a.log")]
    assert labels.label_of("a.log#2", "elsewhere/a.log") == "web"


def test_a_label_file_named_with_a_colon_is_taken_whole(tmp_path: Path) -> None:
    odd = tmp_path / "run:3.tsv"
    odd.write_text("item\tlabel\na\tx\n")
    assert label_spec(str(odd)) == (str(odd), None)
    assert label_spec(f"{odd}:label") == (str(odd), "label")
    assert label_spec("truth.tsv") == ("truth.tsv", None)
    assert read_labels(odd) == {"a": "x"}


def test_label_tables_beside_texts_are_left_out_of_any_folder(tmp_path: Path) -> None:
    texts = tmp_path / "texts"
    (texts / "eng").mkdir(parents=True)
    for name in ("eng/one.txt", "eng/two.txt", "fra.txt"):
        (texts / name).write_text(f"{name} words and more words\n" * 30)
    (texts / "labels.tsv").write_text("file\tlanguage\neng/one.txt\ten\nfra.txt\tfr\n")
    (texts / "meta.csv").write_text("name,family\none,germanic\nfra,romance\n")
    (texts / "scores.tsv").write_text("city\tscore\nParis\t3\nRome\t4\n")  # names no file
    (texts / "pairs.tsv").write_text("one.txt\ttwo.txt\n")  # no header: data, kept
    with pytest.warns(InputWarning, match=r"left out 2 file\(s\).*labels\.tsv: label table"):
        kept = expand_paths([texts])
    assert sorted(os.path.relpath(p, texts) for p in kept) == [
        "eng/one.txt", "eng/two.txt", "fra.txt", "pairs.tsv", "scores.tsv"
    ]  # fmt: skip
    # Named on its own, a label table is read like any file.
    assert expand_paths([texts / "labels.tsv"]) == [str(texts / "labels.tsv")]

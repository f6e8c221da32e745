"""Inputs to items: files, folders, stdin and sequence formats, split into the things compared.

An item is a name and bytes. Sequence formats (FASTA, FASTQ, GenBank, EMBL) contribute their
sequence letters only, uppercase, with no headers, gaps or line breaks, so that line wrapping and
deposit conventions do not change distances.
"""

from __future__ import annotations

import bz2
import csv
import gzip
import io
import lzma
import os
import re
import stat
import sys
import warnings
import zlib
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, replace
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any, BinaryIO, TypeAlias

import zstandard

from .units import size_text

if TYPE_CHECKING:
    from Bio.SeqRecord import SeqRecord


class InputError(ValueError):
    """An input cannot be read: the message names the file, and the line for parse errors."""


class InputWarning(UserWarning):
    """An input was left out or changed on the way in (empty file, empty record, ...)."""


@dataclass(frozen=True)
class Item:
    """One thing compared: a unique readable name, its bytes, where it came from, a known label."""

    name: str
    data: bytes
    source: str
    label: str | None = None
    nucleotide: bool = False

    def __repr__(self) -> str:
        """Short: the name, the size, where it came from and the label, never the bytes."""
        label = "" if self.label is None else f", label={self.label!r}"
        size = size_text(len(self.data))
        return f"Item(name={self.name!r}, {size}, source={self.source!r}{label})"


SEQUENCE_FORMATS = {
    ".fa": "fasta", ".fasta": "fasta", ".fna": "fasta", ".ffn": "fasta", ".faa": "fasta",
    ".frn": "fasta", ".fas": "fasta", ".fsa": "fasta", ".mfa": "fasta",
    ".fq": "fastq", ".fastq": "fastq",
    ".gb": "genbank", ".gbk": "genbank", ".gbff": "genbank", ".genbank": "genbank",
    ".embl": "embl", ".emb": "embl",
}  # fmt: skip

_SEQUENCE_CHARS = re.compile(rb"[^A-Za-z*.\-]")
_NUCLEOTIDE_LETTERS = frozenset(b"ACGTUN")
_COMPLEMENT = bytes.maketrans(b"ACGTURYKMSWBDHVN", b"TGCAAYRMKSWVHDBN")


@dataclass(frozen=True)
class Split:
    """How a file becomes items: `auto`, `records`, `file`, `lines:N` or `bytes:N`."""

    mode: str
    size: int = 0

    @classmethod
    def parse(cls, text: str) -> Split:
        mode, _, size = text.partition(":")
        if mode in ("auto", "records", "file") and not size:
            return cls(mode)
        if mode in ("lines", "bytes") and size.isdigit() and int(size) > 0:
            return cls(mode, int(size))
        raise InputError(
            f"bad split {text!r}: use auto, records, file, lines:N or bytes:N (N a positive number)"
        )

    def __str__(self) -> str:
        return f"{self.mode}:{self.size}" if self.size else self.mode


def reverse_complement(letters: bytes) -> bytes:
    """Reverse complement of nucleotide letters, IUPAC ambiguity codes included."""
    return letters.translate(_COMPLEMENT)[::-1]


def is_nucleotide(letters: bytes) -> bool:
    """True when at least 90 % of the letters are A, C, G, T, U or N (common practice)."""
    if not letters:
        return False
    sample = letters[:100_000]
    counts = sum(sample.count(bytes([b])) for b in _NUCLEOTIDE_LETTERS)
    return counts >= 0.9 * len(sample)


def sequence_format(path: str) -> str | None:
    """The sequence format a file name implies (a compression suffix is looked through), or
    None."""
    name = uncompressed_name(path.lower())
    return SEQUENCE_FORMATS.get(os.path.splitext(name)[1])


def _sniff_format(data: bytes) -> str | None:
    head = data.lstrip()[:6]
    if head.startswith(b">"):
        return "fasta"
    if head.startswith(b"LOCUS"):
        return "genbank"
    if head.startswith(b"ID   "):
        return "embl"
    return None


def parse_fasta(data: bytes, source: str) -> Iterator[tuple[str, bytes]]:
    """(id, letters) per FASTA record; malformed input raises InputError naming file and line."""
    name: str | None = None
    chunks: list[bytes] = []
    for number, raw in enumerate(data.split(b"\n"), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith(b">"):
            if name is not None:
                yield name, b"".join(chunks).upper()
            fields = line[1:].split(None, 1)
            if not fields:
                raise InputError(f"{source}:{number}: FASTA header has no identifier")
            name, chunks = fields[0].decode("utf-8", "replace"), []
        elif name is None:
            if line.startswith(b";"):
                continue
            raise InputError(f"{source}:{number}: expected a FASTA header line starting with '>'")
        else:
            bad = _SEQUENCE_CHARS.search(line)
            if bad:
                char = bad.group().decode("latin-1")
                raise InputError(
                    f"{source}:{number}: unexpected character {char!r} in FASTA sequence"
                )
            chunks.append(line.translate(None, b"*.-"))
    if name is not None:
        yield name, b"".join(chunks).upper()
    elif data.strip():
        raise InputError(f"{source}:1: no FASTA record found")


def _parse_with_biopython(data: bytes, fmt: str, source: str) -> Iterator[tuple[str, bytes]]:
    from Bio import SeqIO
    from Bio.Seq import UndefinedSequenceError

    handle = io.StringIO(data.decode("utf-8", "replace"))
    number = 0
    try:
        for record in SeqIO.parse(handle, fmt):  # type: ignore[no-untyped-call]
            number += 1
            try:
                letters = str(record.seq).encode("ascii", "replace")
            except UndefinedSequenceError:
                warnings.warn(
                    f"{source}: record {record.id} has no sequence letters; left out",
                    InputWarning,
                    stacklevel=2,
                )
                continue
            yield record.id, _SEQUENCE_CHARS.sub(b"", letters).translate(None, b"*.-").upper()
    except (ValueError, AssertionError, IndexError) as error:
        raise InputError(f"{source}: {fmt} parse error after record {number}: {error}") from None


def sequence_records(data: bytes, fmt: str, source: str) -> Iterator[tuple[str, bytes]]:
    """(id, letters) for each record of a sequence file in the given format."""
    if fmt == "fasta":
        return parse_fasta(data, source)
    return _parse_with_biopython(data, fmt, source)


def _chunks(data: bytes, split: Split) -> list[bytes]:
    if split.mode == "bytes":
        return [data[i : i + split.size] for i in range(0, len(data), split.size)]
    lines = data.splitlines(keepends=True)
    return [b"".join(lines[i : i + split.size]) for i in range(0, len(lines), split.size)]


def _open_zstd(path: str) -> Any:
    # The reader closes the file it was given when it is closed itself.
    source = open(path, "rb")  # noqa: SIM115
    return zstandard.ZstdDecompressor().stream_reader(source, closefd=True)


_DECOMPRESSORS: dict[str, Callable[[str], Any]] = {
    ".gz": gzip.open,
    ".bz2": bz2.open,
    ".xz": lzma.open,
    ".zst": _open_zstd,
}
"""Compressed inputs read through their decompressor, by file name suffix."""


def uncompressed_name(name: str) -> str:
    """`name` without a compression suffix that kinpress reads through (`genome.fa.gz`)."""
    stem, suffix = os.path.splitext(name)
    return stem if suffix.lower() in _DECOMPRESSORS else name


DEFAULT_MAX_FILE_BYTES = 1 << 30
"""The most bytes read from one input (after decompression) unless the caller allows more."""

_READ_PIECE = 1 << 20


def _read_capped(handle: BinaryIO, path: str, limit: int) -> bytes:
    """Everything in `handle`, read a piece at a time; more than `limit` bytes is an InputError
    raised as soon as the limit is passed, so no more than that is ever held."""
    pieces: list[bytes] = []
    held = 0
    while piece := handle.read(min(_READ_PIECE, limit + 1 - held)):
        pieces.append(piece)
        held += len(piece)
        if held > limit:
            raise InputError(
                f"{path}: larger than {size_text(limit)} (after decompression);"
                " raise the limit with --max-file-size to read it"
            )
    return b"".join(pieces)


def _read(path: str, stdin: BinaryIO | None, limit: int = DEFAULT_MAX_FILE_BYTES) -> bytes:
    if path == "-":
        return _read_capped(stdin or sys.stdin.buffer, "standard input", limit)
    try:
        opener = _DECOMPRESSORS.get(os.path.splitext(path.lower())[1])
        if opener is not None:
            with opener(path) as handle:
                return _read_capped(handle, path, limit)
        with open(path, "rb") as handle:
            info = os.fstat(handle.fileno())
            if stat.S_ISREG(info.st_mode) and info.st_size > limit:
                raise InputError(
                    f"{path}: larger than {size_text(limit)} ({size_text(info.st_size)});"
                    " raise the limit with --max-file-size to read it"
                )
            return _read_capped(handle, path, limit)
    except FileNotFoundError:
        raise InputError(f"{path}: no such file or directory") from None
    except PermissionError:
        raise InputError(f"{path}: permission denied") from None
    except (OSError, EOFError, zlib.error, lzma.LZMAError, zstandard.ZstdError) as error:
        raise InputError(f"{path}: cannot read: {error}") from None


def _file_items(
    path: str, split: Split, stdin: BinaryIO | None, limit: int = DEFAULT_MAX_FILE_BYTES
) -> Iterator[Item]:
    data = _read(path, stdin, limit)
    base = "stdin" if path == "-" else uncompressed_name(os.path.basename(path))
    if not data:
        warnings.warn(f"{path}: empty file; left out", InputWarning, stacklevel=2)
        return
    fmt = sequence_format(path)
    if fmt is None and path == "-" and split.mode in ("auto", "records"):
        fmt = _sniff_format(data)
    if fmt is None:
        if split.mode == "records":
            raise InputError(
                f"{path}: --split records needs a sequence file (FASTA, FASTQ, GenBank or EMBL)"
            )
        if split.mode in ("lines", "bytes"):
            pieces = _chunks(data, split)
            for number, piece in enumerate(pieces, start=1):
                yield Item(f"{base}#{number}", piece, path)
        else:
            yield Item(base, data, path)
        return
    if split.mode == "lines":
        raise InputError(
            f"{path}: lines:N splits text; for sequence files use records, file or bytes:N"
        )
    records = [(rid, seq) for rid, seq in sequence_records(data, fmt, path)]
    for rid, seq in records:
        if not seq:
            warnings.warn(f"{path}: record {rid} is empty; left out", InputWarning, stacklevel=2)
    records = [(rid, seq) for rid, seq in records if seq]
    if not records:
        warnings.warn(f"{path}: no sequence letters; left out", InputWarning, stacklevel=2)
        return
    if split.mode == "file":
        letters = b"".join(seq for _, seq in records)
        yield Item(os.path.splitext(base)[0], letters, path, nucleotide=is_nucleotide(letters))
        return
    # A file holding one record (a genome per file) is named for the file, as people name them.
    stem = os.path.splitext(base)[0] if len(records) == 1 else None
    for rid, seq in records:
        nucleotide = is_nucleotide(seq)
        name = stem or rid
        if split.mode == "bytes":
            for number, piece in enumerate(_chunks(seq, split), start=1):
                yield Item(f"{name}#{number}", piece, path, nucleotide=nucleotide)
        else:
            yield Item(name, seq, path, nucleotide=nucleotide)


def expand_paths(
    paths: Iterable[str | os.PathLike[str]],
    exclude: Iterable[str] = (),
    *,
    follow_links: bool = False,
) -> list[str]:
    """Files named and files below folders named, each folder's files in sorted order.

    Hidden files and folders (names starting with '.') below a folder are skipped, as are the
    paths in `exclude`. In a folder of mostly sequence files the other files (labels, notes,
    trees kept beside the genomes) are left out with a warning; files named on their own are
    always kept. Below a folder, a symbolic link to a file inside that folder is read; links
    that lead out of it, links to folders, and links that lead nowhere (broken or looping) are
    skipped with a warning, unless `follow_links`, which reads links wherever they lead (each
    folder once).
    """
    skip = {os.path.realpath(p) for p in exclude}
    files: list[str] = []
    for given in [os.fspath(p) for p in paths]:
        if given == "-":
            files.append(given)
        elif os.path.isdir(given):
            found = _folder_files(given, follow_links)
            if not found:
                raise InputError(f"{given}: folder holds no files")
            files += _without_tables_and_outputs(given, _sequence_files_if_mostly(given, found))
        elif os.path.exists(given):
            files.append(given)
        else:
            raise InputError(f"{given}: no such file or directory")
    return [f for f in files if f == "-" or os.path.realpath(f) not in skip]


_SKIPPED_LINKS = {
    "outside": "links that lead out of it; --follow-links reads them",
    "folder": "links to folders; --follow-links follows them",
    "nowhere": "links that lead nowhere (broken or looping)",
}


def _folder_files(folder: str, follow_links: bool) -> list[str]:
    """The regular files below `folder` (see `expand_paths` for links), sorted by path."""
    top = os.path.realpath(folder)
    seen = {top}
    skipped: dict[str, list[str]] = {kind: [] for kind in _SKIPPED_LINKS}
    found: list[str] = []
    pending = [folder]
    while pending:
        current = pending.pop()
        try:
            entries = list(os.scandir(current))
        except OSError as error:
            raise InputError(f"{current}: cannot read folder: {error.strerror}") from None
        for entry in entries:
            if entry.name.startswith("."):
                continue
            if not entry.is_symlink():
                if entry.is_dir(follow_symlinks=False):
                    pending.append(entry.path)
                elif entry.is_file(follow_symlinks=False):
                    found.append(entry.path)
                continue
            target = os.path.realpath(entry.path)
            if not os.path.exists(entry.path):
                skipped["nowhere"].append(entry.path)
            elif os.path.isdir(entry.path):
                if not follow_links:
                    skipped["folder"].append(entry.path)
                elif target not in seen:
                    seen.add(target)
                    pending.append(entry.path)
            elif not follow_links and os.path.commonpath([top, target]) != top:
                skipped["outside"].append(entry.path)
            elif os.path.isfile(entry.path):
                found.append(entry.path)
    for kind, paths in skipped.items():
        if paths:
            first = ", ".join(escape_name(os.path.relpath(p, folder)) for p in sorted(paths)[:3])
            more = ", ..." if len(paths) > 3 else ""
            warnings.warn(
                f"{folder}: skipped {len(paths)} {_SKIPPED_LINKS[kind]} ({first}{more})",
                InputWarning,
                stacklevel=4,
            )
    return sorted(found)


def _sequence_files_if_mostly(folder: str, found: list[str]) -> list[str]:
    """A folder's files, without the few that are not sequence files in a folder of sequences."""
    other = [f for f in found if sequence_format(f) is None]
    if not other or 2 * len(other) >= len(found):
        return found
    shown = ", ".join(os.path.relpath(f, folder) for f in other[:3]) + (
        ", ..." if len(other) > 3 else ""
    )
    warnings.warn(
        f"{folder}: left out {len(other)} file(s) that are not sequence files beside its "
        f"{len(found) - len(other)} sequence files ({shown}); name a file to include it",
        InputWarning,
        stacklevel=3,
    )
    return [f for f in found if sequence_format(f) is not None]


_HEAD_BYTES = 1 << 16
"""How much of a file is read to tell a label table or an earlier output from an input."""

_OUTPUT_HEADERS = {
    ("item", "group", "medoid", "outlier"): "kinpress groups table",
    ("item", "rank", "neighbour", "ncd"): "kinpress nearest-neighbour table",
    ("a", "b", "relation", "a_explained_by_b", "b_explained_by_a", "score", "fpr",
     "a_shared_in_order", "b_shared_in_order", "a_path", "b_path", "a_hash", "b_hash",
     "a_start", "a_end", "b_start", "b_end"): "kinpress findings table",
    ("item", "origin", "p-value", "confidence", "nearest", "distance"): "kinpress classification",
}  # fmt: skip
"""First rows (cells split by tabs, commas or blanks) of the tables kinpress writes."""

_OUTPUT_KEYS: dict[tuple[str, ...], str] = {
    ("labels", "compressor", "conditional"): "kinpress matrix (JSON)",
    ("newick", "method", "rooting"): "kinpress tree (JSON)",
    ("items", "item", "group"): "kinpress groups (JSON)",
    ("k", "compressor", "conditional"): "kinpress nearest neighbours (JSON)",
    ("item", "predicted", "decision"): "kinpress classification (JSON)",
    ("accuracy", "refusal_rate", "ambiguous_rate"): "kinpress evaluation (JSON)",
    ("a", "b", "relation"): "kinpress findings (JSON)",
    ("seed", "inputs"): "kinpress calibration (JSON)",
    ("name", "spec", "levels"): "kinpress compressor list (JSON)",
}
"""The first keys of the JSON kinpress writes, by what it is."""

_NEWICK_TOKEN = re.compile(r"'(?:[^']|'')*'|[(),:;]|[^()\[\]':;,\s]+")
_JSON_KEY = re.compile(r'"((?:[^"\\]|\\.)*)"\s*:')


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _matrix_kind(lines: list[str]) -> str | None:
    """'TSV', 'CSV' or 'PHYLIP' when the lines start a matrix as kinpress writes one."""
    first, second = lines[0], lines[1] if len(lines) > 1 else None
    if first.strip().isdigit() and second is not None:
        n = int(first.strip())
        cells = second.split()
        if n >= 2 and len(cells) > n and all(map(_is_number, cells[-n:])):
            return "PHYLIP"
    for sep, kind in (("\t", "TSV"), (",", "CSV")):
        if not first.startswith(sep) or first.count(sep) < 2:
            continue
        if second is None:  # one header row longer than the head read
            return kind
        labels, row = next(csv.reader([first], delimiter=sep)), second.split(sep)
        if len(row) > 1 and _is_number(row[-1]) and row[0].strip('"') == labels[1]:
            return kind
    return None


def _is_newick(line: str, whole: bool) -> bool:
    """A tree in Newick as kinpress writes it (on one line): parentheses, commas, labels
    (quoted where they hold blanks or punctuation), ':' lengths and a final ';'. An opening
    parenthesis follows only another one or a comma, which tells code such as
    ``(function(){})();`` apart. Only the start need be seen of a file longer than the head."""
    tokens = _NEWICK_TOKEN.findall(line)
    if "".join(tokens) != line or not tokens or tokens[0] != "(":
        return False
    if whole and (tokens[-1] != ";" or tokens.count(";") != 1):
        return False
    depth = 0
    for before, token in zip(["(", *tokens], tokens, strict=False):
        if token == "(" and before not in "(,":
            return False
        if before == ":" and not _is_number(token):
            return False
        depth += {"(": 1, ")": -1}.get(token, 0)
        if depth < 0:
            return False
    return depth == 0 or not whole


def _earlier_output(text: str, whole: bool = True) -> str | None:
    """What kinpress output `text` (the head of a file; `whole` when it is the whole file) is,
    or None."""
    lines = [line.rstrip("\r") for line in text.splitlines() if line.strip()]
    if not lines:
        return None
    start = text.lstrip()
    if start.startswith(("{", "[")):
        keys = tuple(_JSON_KEY.findall(start[:4096])[:3])
        return next((kind for k, kind in _OUTPUT_KEYS.items() if keys[: len(k)] == k), None)
    if len(lines) == 1 and _is_newick(lines[0].strip(), whole):
        return "Newick tree"
    for sep in ("\t", ",", None):
        kind = _OUTPUT_HEADERS.get(tuple(lines[0].split(sep)))
        if kind is not None:
            return kind
    kind = _matrix_kind(lines)
    return None if kind is None else f"kinpress matrix ({kind})"


def _names_in(folder: str, files: Iterable[str]) -> set[str]:
    """Every name by which a label table may name a file of `folder`: its path from the folder,
    its file name, each without a compression suffix and without an extension."""
    names: set[str] = set()
    for path in files:
        relative = os.path.relpath(path, folder).replace(os.sep, "/")
        for name in (relative, os.path.basename(relative)):
            plain = uncompressed_name(name)
            names.update((name, plain, os.path.splitext(plain)[0]))
    return names


def _is_label_table(text: str, path: str, names: set[str]) -> bool:
    """A table of at least two columns, its first row a header (names, not numbers or files),
    whose first column names files of the folder in at least half of the rows below."""
    try:
        rows = [cells for _, cells in _table_rows(text, path)]
    except csv.Error:
        return False
    if not rows or len(rows[0]) < 2:
        return False

    def names_file(cells: list[str]) -> bool:
        cell = unescape_name(cells[0].strip()).partition("#")[0]
        path = os.path.normpath(cell).replace(os.sep, "/") if cell else ""
        return bool(cell) and (path in names or os.path.basename(path) in names)

    header, body = rows[0], rows[1:]
    if names_file(header) or any(_is_number(cell) or not cell.strip() for cell in header):
        return False
    hits = sum(map(names_file, body))
    return hits > 0 and 2 * hits >= len(body)


def _head(path: str) -> tuple[str, bool] | None:
    """The first _HEAD_BYTES of a file as text, cut at its last whole line when the file goes
    on, and whether that is the whole file; None for a file that cannot be read or holds NUL
    bytes (not text)."""
    try:
        with open(path, "rb") as handle:
            data = handle.read(_HEAD_BYTES + 1)
    except OSError:
        return None
    if b"\0" in data:
        return None
    whole = len(data) <= _HEAD_BYTES
    if not whole:
        data = data[: data.rfind(b"\n", 0, _HEAD_BYTES) + 1] or data[:_HEAD_BYTES]
    return data.decode("utf-8", "ignore"), whole


def _without_tables_and_outputs(folder: str, found: list[str]) -> list[str]:
    """A folder's files without label tables and kinpress's own earlier outputs, which are left
    out with a warning naming them (a labels.tsv beside the texts is no text to compare)."""
    plain = [f for f in found if sequence_format(f) is None and uncompressed_name(f) == f]
    names = _names_in(folder, found)
    left: dict[str, str] = {}
    for path in plain:
        head = _head(path)
        if head is None:
            continue
        text, whole = head
        kind = _earlier_output(text, whole)
        if kind is None and _is_label_table(text, path, names - _names_in(folder, [path])):
            kind = "label table"
        if kind is not None:
            left[path] = kind
    if not left:
        return found
    shown = ", ".join(
        f"{escape_name(os.path.relpath(p, folder))}: {kind}" for p, kind in list(left.items())[:3]
    ) + (", ..." if len(left) > 3 else "")
    warnings.warn(
        f"{folder}: left out {len(left)} file(s) that look like label tables or kinpress's own"
        f" outputs ({shown}); name a file to include it",
        InputWarning,
        stacklevel=3,
    )
    return [f for f in found if f not in left]


_SIMPLE_ESCAPES = {"\\": "\\\\", "\t": "\\t", "\n": "\\n", "\r": "\\r"}
_UNESCAPES = {"\\": "\\", "t": "\t", "n": "\n", "r": "\r"}
_ESCAPED = re.compile(r"\\(?:([\\tnr])|x([0-9a-fA-F]{2})|u([0-9a-fA-F]{4})|U([0-9a-fA-F]{8}))")


def escape_name(name: str, also: str = "", keep: str = "") -> str:
    """A name every output can hold, and from which `unescape_name` gives the name back.

    A backslash is doubled; tab, line feed and carriage return become ``\\t``, ``\\n``, ``\\r``;
    a byte of a file name that is not UTF-8 (held as a surrogate escape, as `os.fsdecode` gives
    it), an ASCII control character and the characters in `also` (ASCII ones a format reserves)
    become ``\\xHH``; any other character Python does not count as printable (line and paragraph
    separators, format characters) becomes ``\\uHHHH`` or ``\\UHHHHHHHH``. Every other
    character is kept, so ordinary names, accented and non-Latin ones included, are unchanged.
    Characters in `keep` (tab, line feed, carriage return for a format that quotes them) are
    written as they are.

    >>> escape_name("run 1\\tb\\udcff.log")
    'run 1\\\\tb\\\\xff.log'
    """
    if name.isprintable() and "\\" not in name and not any(c in name for c in also):
        return name
    out = []
    for char in name:
        code = ord(char)
        if char in keep:
            out.append(char)
        elif char in _SIMPLE_ESCAPES:
            out.append(_SIMPLE_ESCAPES[char])
        elif 0xDC80 <= code <= 0xDCFF:  # an undecodable byte of a file name
            out.append(f"\\x{code - 0xDC00:02x}")
        elif code < 0x80 and (code < 0x20 or code == 0x7F or char in also):
            out.append(f"\\x{code:02x}")
        elif char.isprintable():
            out.append(char)
        elif code <= 0xFFFF:
            out.append(f"\\u{code:04x}")
        else:
            out.append(f"\\U{code:08x}")
    return "".join(out)


def unescape_name(text: str) -> str:
    """The name `escape_name` wrote; a backslash that starts no escape is kept as it is."""
    if "\\" not in text:
        return text

    def undo(match: re.Match[str]) -> str:
        simple, byte, short, long = match.groups()
        if simple:
            return _UNESCAPES[simple]
        if byte:
            code = int(byte, 16)
            return chr(0xDC00 + code) if code >= 0x80 else chr(code)
        return chr(int(short or long, 16))

    return _ESCAPED.sub(undo, text)


def unique_names(items: Sequence[Item]) -> list[Item]:
    """Give a repeated name a stable suffix (~2, ~3, ...) in input order; the first keeps it."""
    reserved = {item.name for item in items}
    used: set[str] = set()
    out = []
    for item in items:
        name, n = item.name, 1
        while name in used or (n > 1 and name in reserved):
            n += 1
            name = f"{item.name}~{n}"
        used.add(name)
        out.append(item if name == item.name else replace(item, name=name))
    return out


_NAME_HEADERS = ("item", "name", "id", "file")
"""First header cells that mark a two-column label file's first row as a header."""


@dataclass(frozen=True)
class Labels:
    """Known labels by item name, and what they are: `column` (the header of the column they
    came from, a legend's title; "label" when the file has no header) and `source` (the file).

    A key matches an item by its name, the name before a chunk number (`app.log` labels
    `app.log#3`), or the file name of the item's source; a key written as a path
    (`logs/app.log`) also matches by its file name.
    """

    mapping: Mapping[str, str]
    column: str = "label"
    source: str = ""

    def key_for(self, name: str, source: str = "") -> str | None:
        """The key of `mapping` that labels the item `name` read from `source`, or None."""
        for candidate in (name, name.partition("#")[0], os.path.basename(source)):
            if candidate in self.mapping:
                return candidate
            by_file = self._by_file_name.get(candidate)
            if by_file is not None:
                return by_file
        return None

    @cached_property
    def _by_file_name(self) -> dict[str, str]:
        out: dict[str, str] = {}
        for key in self.mapping:
            out.setdefault(os.path.basename(key), key)
        return out

    def label_of(self, name: str, source: str = "") -> str | None:
        """The label of the item `name` read from `source` (see `key_for`), or None."""
        key = self.key_for(name, source)
        return None if key is None else self.mapping[key]

    def missing(self, items: Iterable[Item]) -> list[str]:
        """Names of the items no label matches (say so: they are left out of any scoring)."""
        return [i.name for i in items if self.key_for(i.name, i.source) is None]


def label_spec(text: str) -> tuple[str, str | None]:
    """The file and column of a `FILE[:COLUMN]` argument; a name that exists as a file is taken
    whole, so a file name holding a colon needs no column."""
    path, colon, column = text.rpartition(":")
    if not colon or os.path.exists(text) or not path or not column:
        return text, None
    return path, column


def _table_rows(text: str, path: str) -> list[tuple[int, list[str]]]:
    """(line number, cells) of each row that is not blank or a # comment; cells of a file named
    .csv (or whose first line holds commas and no tab) are split by RFC 4180, else by tabs."""
    first = next((line for line in text.splitlines() if line.strip()), "")
    if path.lower().endswith(".csv") or ("\t" not in first and "," in first):
        reader = csv.reader(io.StringIO(text, newline=""))
        rows = [(reader.line_num, cells) for cells in reader]
    else:
        rows = [
            (number, line.rstrip("\r").split("\t"))
            for number, line in enumerate(text.splitlines(), start=1)
        ]
    return [
        (number, cells)
        for number, cells in rows
        if any(c.strip() for c in cells) and not cells[0].startswith("#")
    ]


def read_label_table(path: str | os.PathLike[str], column: str | None = None) -> Labels:
    """Known labels from a table of items and their labels (TSV, or CSV by name or content).

    The first column names the items. With `column`, the first row is a header and that column
    holds the labels (an empty cell: no label; `Labels.missing` names the items left without);
    without it, the second column does, and the first row is a header only when its first cell
    is item, name, id or file (the two-column format, `item<TAB>label`). Lines starting with #
    are comments. Names and labels may use the escapes every output writes (`escape_name`).

    >>> read_label_table("frogs.tsv", "clade").column  # doctest: +SKIP
    'clade'
    """
    source = os.fspath(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"{source}: no such file") from None
    except (OSError, UnicodeDecodeError) as error:
        raise InputError(f"{source}: cannot read labels: {error}") from None
    try:
        rows = _table_rows(text, source)
    except csv.Error as error:
        raise InputError(f"{source}: cannot read labels: {error}") from None
    header = rows[0][1] if rows else []
    chosen = column is not None
    if column is not None:
        names = [cell.strip() for cell in header]
        if column not in names[1:]:
            raise InputError(
                f"{source}: no column {column!r}; its columns: {', '.join(names[1:]) or 'none'}"
            )
        index, rows = names.index(column, 1), rows[1:]
    else:
        index = 1
        is_header = bool(header) and header[0].strip().lower() in _NAME_HEADERS
        column = header[1].strip() if is_header and len(header) > 1 else "label"
        rows = rows[1:] if is_header else rows
    labels: dict[str, str] = {}
    for number, cells in rows:
        if not cells[0].strip() or (len(cells) < 2 and index == 1):
            raise InputError(f"{source}:{number}: expected item<TAB>label")
        value = cells[index].strip() if index < len(cells) else ""
        if value or not chosen:  # the two-column format keeps an empty label as given
            labels[unescape_name(cells[0].strip())] = unescape_name(value)
    return Labels(labels, column, source)


def read_labels(path: str | os.PathLike[str]) -> dict[str, str]:
    """Known labels from a TSV of `item<TAB>label` (see `read_label_table`)."""
    return dict(read_label_table(path).mapping)


def attach_labels(items: Sequence[Item], labels: Mapping[str, str] | Labels) -> list[Item]:
    """Give items their known labels, matched by item name, then record or file name (see
    `Labels`); labels that name no item are warned of."""
    known = labels if isinstance(labels, Labels) else Labels(labels)
    out = []
    used: set[str] = set()
    for item in items:
        key = known.key_for(item.name, item.source)
        if key is not None:
            used.add(key)
            item = replace(item, label=known.mapping[key])
        out.append(item)
    unused = len(set(known.mapping) - used)
    if unused:
        warnings.warn(f"{unused} labels name no item; ignored", InputWarning, stacklevel=2)
    return out


def _warn_mixed(items: Sequence[Item]) -> None:
    """Sequence records beside plain files usually means a stray file in a genome folder."""
    plain = [i for i in items if i.source != "-" and sequence_format(i.source) is None]
    if plain and len(plain) < len(items) and any(i.nucleotide for i in items):
        warnings.warn(
            f"{len(plain)} items are not from sequence files (first: {plain[0].source});"
            " they are compared as raw bytes",
            InputWarning,
            stacklevel=3,
        )


ItemLike: TypeAlias = "Item | bytes | bytearray | memoryview | str | SeqRecord"
"""What `as_items` takes: an `Item`, bytes, a str (encoded as UTF-8) or a Biopython `SeqRecord`."""


def _record_item(record: Any, source: str) -> Item:
    """An item of a Biopython SeqRecord's letters, cleaned as sequence files are."""
    from Bio.Seq import UndefinedSequenceError

    try:
        letters = str(record.seq).encode("ascii", "replace")
    except UndefinedSequenceError:
        raise InputError(f"{source}: record {record.id} has no sequence letters") from None
    seq = _SEQUENCE_CHARS.sub(b"", letters).translate(None, b"*.-").upper()
    if not seq:
        raise InputError(f"{source}: record {record.id} is empty")
    return Item(str(record.id), seq, source, nucleotide=is_nucleotide(seq))


def as_items(values: Iterable[ItemLike], prefix: str = "x") -> list[Item]:
    """Items from what a library user has at hand, in order, names made unique (`unique_names`).

    An `Item` is kept as it is. Bytes become an item named prefix0, prefix1, ... (by position)
    and a str the same, encoded as UTF-8. A Biopython `SeqRecord` becomes an item named by its
    id holding its sequence letters as sequence files give them (uppercase, without gaps or
    stops), a nucleotide item when they are nucleotides (so `strand="both"` takes it).

    >>> [repr(i) for i in as_items([b"abc", "d\u00e9f"])]
    ["Item(name='x0', 3 B, source='input')", "Item(name='x1', 4 B, source='input')"]
    """
    out = []
    for k, value in enumerate(values):
        if isinstance(value, Item):
            out.append(value)
        elif isinstance(value, str):
            out.append(Item(f"{prefix}{k}", value.encode("utf-8"), "input"))
        elif isinstance(value, bytes | bytearray | memoryview):
            out.append(Item(f"{prefix}{k}", bytes(value), "input"))
        elif hasattr(value, "seq") and hasattr(value, "id"):
            out.append(_record_item(value, f"SeqRecord at position {k}"))
        else:
            raise TypeError(
                f"expected an Item, bytes, str or SeqRecord, got {type(value).__name__} "
                f"at position {k}"
            )
    return unique_names(out)


def load_items(
    paths: Iterable[str | os.PathLike[str]],
    split: str | Split = "auto",
    labels: Mapping[str, str] | Labels | str | os.PathLike[str] | None = None,
    *,
    exclude: Iterable[str] = (),
    stdin: BinaryIO | None = None,
    follow_links: bool = False,
    max_file_bytes: int = DEFAULT_MAX_FILE_BYTES,
) -> list[Item]:
    """Read paths (files, folders, '-' for stdin) into uniquely named items.

    No input may hold more than `max_file_bytes` (after decompression): a larger one is an
    InputError, found while reading it and never held whole. `follow_links`: see `expand_paths`.

    >>> items = load_items(["genomes/"], split="records")  # doctest: +SKIP
    """
    mode = split if isinstance(split, Split) else Split.parse(split)
    items: list[Item] = []
    for path in expand_paths(paths, exclude, follow_links=follow_links):
        items.extend(_file_items(path, mode, stdin, max_file_bytes))
    items = unique_names(items)
    _warn_mixed(items)
    if labels is not None:
        if isinstance(labels, Mapping | Labels):
            items = attach_labels(items, labels)
        else:
            items = attach_labels(items, read_label_table(*label_spec(os.fspath(labels))))
    return items


def reference_items(
    folder: str | os.PathLike[str], split: str | Split = "auto", **reading: Any
) -> list[Item]:
    """Items of `folder/<origin>/<files>`, each labelled with its subfolder's name.

    Names are `origin/item`, so equal file names in two origins stay apart. Files lying directly
    in `folder` belong to no origin: they are left out with an InputWarning. `reading` passes
    on to `load_items` (follow_links, max_file_bytes).
    """
    root = Path(folder)
    if not root.is_dir():
        raise InputError(f"{root}: reference must be a folder with one subfolder per origin")
    entries = sorted(p for p in root.iterdir() if not p.name.startswith("."))
    loose = [p.name for p in entries if not p.is_dir()]
    if loose:
        warnings.warn(
            f"{root}: {len(loose)} files are not in an origin subfolder (first: {loose[0]});"
            " left out",
            InputWarning,
            stacklevel=2,
        )
    items: list[Item] = []
    for sub in (p for p in entries if p.is_dir()):
        for item in load_items([sub], split, **reading):
            items.append(replace(item, name=f"{sub.name}/{item.name}", label=sub.name))
    if not items:
        raise InputError(f"{root}: no origin subfolders with files")
    return items

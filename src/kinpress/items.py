"""Inputs to items: files, folders, stdin and sequence formats, split into the things compared.

An item is a name and bytes. Sequence formats (FASTA, FASTQ, GenBank, EMBL) contribute their
sequence letters only, uppercase, with no headers, gaps or line breaks, so that line wrapping and
deposit conventions do not change distances.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
import os
import re
import stat
import sys
import warnings
import zlib
from collections import Counter
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, BinaryIO, TypeAlias

import zstandard

from .sequences import _SEQUENCE_CHARS, _sniff_format
from .sequences import SEQUENCE_FORMATS as SEQUENCE_FORMATS  # re-exported
from .sequences import is_nucleotide as is_nucleotide  # re-exported
from .sequences import parse_fasta as parse_fasta  # re-exported
from .sequences import reverse_complement as reverse_complement  # re-exported
from .sequences import sequence_records as sequence_records  # re-exported
from .units import few_text, size_text

if TYPE_CHECKING:
    from Bio.SeqRecord import SeqRecord


class InputError(ValueError):
    """An input cannot be read: the message names the file, and the line for parse errors."""


class DamagedInput(InputError):
    """A compressed input (by its suffix) whose decompressor fails: not that format, or cut
    short. Below a folder such a file is left out with a warning (load_items)."""


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


def sequence_format(path: str) -> str | None:
    """The sequence format a file name implies (a compression suffix is looked through), or
    None."""
    name = uncompressed_name(path.lower())
    return SEQUENCE_FORMATS.get(os.path.splitext(name)[1])


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
            try:
                with opener(path) as handle:
                    return _read_capped(handle, path, limit)
            except (FileNotFoundError, PermissionError, InputError):
                raise
            except (OSError, EOFError, zlib.error, lzma.LZMAError, zstandard.ZstdError) as error:
                raise DamagedInput(f"{path}: cannot decompress: {error}") from None
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
    path: str,
    split: Split,
    stdin: BinaryIO | None,
    limit: int,
    empty: list[str],
    base: str | None = None,
) -> Iterator[Item]:
    """The items of one file, named from `base` (default: the file's name; see _file_names);
    an empty file gives none and is added to `empty` (load_items warns of them together)."""
    data = _read(path, stdin, limit)
    if base is None:
        base = "stdin" if path == "-" else uncompressed_name(os.path.basename(path))
    if not data:
        empty.append(path)
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


EMPTY_NAMED = 3
"""Up to this many empty files get a warning each; more get one warning that counts them."""


_GATHERED: ContextVar[list[str] | None] = ContextVar("empty files gathered", default=None)
"""Where `_warn_empty` adds empty files inside `_gathering_empty` (one warning for them all)."""


@contextmanager
def _gathering_empty() -> Iterator[None]:
    """One warning, at the end, for the empty files of every `load_items` call inside (a
    reference's origin subfolders are read one by one)."""
    found: list[str] = []
    token = _GATHERED.set(found)
    try:
        yield
    finally:
        _GATHERED.reset(token)
    _warn_empty(found)


def _warn_empty(paths: Sequence[str]) -> None:
    """One warning for the empty files left out: each named where there are few, counted with
    the first few named where there are many (a Python tree's empty __init__.py files would
    otherwise fill the screen)."""
    gathered = _GATHERED.get()
    if gathered is not None:
        gathered.extend(paths)
        return
    if len(paths) <= EMPTY_NAMED:
        for path in paths:
            warnings.warn(f"{path}: empty file; left out", InputWarning, stacklevel=3)
        return
    warnings.warn(
        f"{len(paths)} empty files left out: {few_text(paths)}", InputWarning, stacklevel=3
    )


def load_items(
    paths: Iterable[str | os.PathLike[str]],
    split: str | Split = "auto",
    labels: Mapping[str, str] | Labels | str | os.PathLike[str] | None = None,
    *,
    exclude: Iterable[str] = (),
    stdin: BinaryIO | None = None,
    follow_links: bool = False,
    max_file_bytes: int = DEFAULT_MAX_FILE_BYTES,
    names_below: str | os.PathLike[str] | None = None,
) -> list[Item]:
    """Read paths (files, folders, '-' for stdin) into uniquely named items: named for their
    file (and record or chunk), files of one name in several folders by their path below the
    folder the inputs share (see _file_names), or every file by its path below `names_below`
    when given (a reference's origin folder).

    No input may hold more than `max_file_bytes` (after decompression): a larger one is an
    InputError, found while reading it and never held whole. A compressed file (by its suffix)
    that does not decompress is a DamagedInput error where it is named, and left out with an
    InputWarning naming it where a folder holds it. `follow_links`: see `expand_paths`.

    >>> items = load_items(["genomes/"], split="records")  # doctest: +SKIP
    """
    mode = split if isinstance(split, Split) else Split.parse(split)
    given = [os.fspath(p) for p in paths]
    items: list[Item] = []
    empty: list[str] = []
    files = expand_paths(given, exclude, follow_links=follow_links)
    names = _file_names(files, names_below)
    for path in files:
        try:
            items.extend(_file_items(path, mode, stdin, max_file_bytes, empty, names.get(path)))
        except DamagedInput as error:
            if path in given:  # named on its own: the user meant this file
                raise
            # one damaged file among a folder's many (a tree's test data): the rest is read
            warnings.warn(f"{error}; left out", InputWarning, stacklevel=2)
    _warn_empty(empty)
    items = unique_names(items)
    _warn_mixed(items)
    if labels is not None:
        if isinstance(labels, Mapping | Labels):
            items = attach_labels(items, labels)
        else:
            items = attach_labels(items, read_label_table(*label_spec(os.fspath(labels))))
    return items


def _file_names(
    files: Sequence[str], below: str | os.PathLike[str] | None = None
) -> dict[str, str]:
    """What the files whose name another input file also has are called instead: their paths
    below the folder all the inputs share, so that a tree's many __init__.py read as
    cachecontrol/__init__.py and idna/__init__.py rather than __init__.py~2 (a repeated name
    then gets ~2 only where two inputs are one path, or records share an id). With `below`,
    every file is called by its path below that folder."""
    paths = sorted({f for f in files if f != "-"})
    named = paths
    if below is None:
        base = {f: uncompressed_name(os.path.basename(f)) for f in paths}
        count = Counter(base.values())
        named = [f for f in paths if count[base[f]] > 1]
    if not named:
        return {}
    try:  # below the folder all the inputs share, not only those of one name
        top = os.fspath(below) if below is not None else os.path.commonpath(paths)
    except ValueError:  # absolute and relative paths mixed: their paths as given
        top = ""
    return {f: uncompressed_name(os.path.relpath(f, top) if top else f) for f in named}


def reference_items(
    folder: str | os.PathLike[str], split: str | Split = "auto", **reading: Any
) -> list[Item]:
    """Items of `folder/<origin>/<files>`, each labelled with its subfolder's name.

    Names are `origin/path` (the file's path below its origin's folder, with its record or chunk),
    so equal file names in two origins or folders stay apart. Files lying directly
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
    with _gathering_empty():
        for sub in (p for p in entries if p.is_dir()):
            for item in load_items([sub], split, names_below=sub, **reading):
                items.append(replace(item, name=f"{sub.name}/{item.name}", label=sub.name))
    if not items:
        raise InputError(f"{root}: no origin subfolders with files")
    return items


# Labels and the files that are not inputs have modules of their own, which build on the above;
# imported last (they import this module), and importable from here as before.
from .labels import Labels as Labels  # noqa: E402
from .labels import attach_labels as attach_labels  # noqa: E402
from .labels import label_spec as label_spec  # noqa: E402
from .labels import read_label_table as read_label_table  # noqa: E402
from .labels import read_labels as read_labels  # noqa: E402
from .not_inputs import _without_tables_and_outputs  # noqa: E402

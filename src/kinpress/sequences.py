"""Sequence letters and sequence files: the formats a file name implies, the FASTA parser
(line-numbered errors), Biopython for FASTQ, GenBank and EMBL, and the letters' reverse
complement and nucleotide test. Every reader yields (id, letters): sequence letters only,
uppercase, with no headers, gaps or line breaks, so that line wrapping and deposit conventions
do not change distances. :mod:`kinpress.items` re-exports every public name."""

from __future__ import annotations

import io
import re
import warnings
from collections.abc import Iterator

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
    from .items import InputError  # items imports this module

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

    from .items import InputError, InputWarning  # items imports this module

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

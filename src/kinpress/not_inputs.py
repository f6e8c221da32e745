"""The files of a folder that are not inputs: label tables and kinpress's own earlier outputs
(tables, matrices, trees, JSON), told from a file's head and left out with a warning."""

from __future__ import annotations

import csv
import os
import re
import warnings
from collections.abc import Iterable

from .items import InputWarning, escape_name, sequence_format, uncompressed_name, unescape_name
from .labels import _table_rows

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

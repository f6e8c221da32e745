"""Known labels of items: label tables (`FILE[:COLUMN]`, TSV or CSV), `Labels` and how a label
finds its item."""

from __future__ import annotations

import csv
import io
import os
import warnings
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from functools import cached_property
from pathlib import Path

from .items import InputError, InputWarning, Item, unescape_name

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

"""Readers and writers for distance matrices (TSV, CSV, PHYLIP, JSON); atomic file writes."""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
import os
import re
import stat
import sys
import tempfile
import time
import warnings
from collections import Counter
from collections.abc import Callable, Iterable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .distance import DistanceMatrix
from .items import InputError, escape_name, unescape_name
from .measure import MatrixStats

if TYPE_CHECKING:  # both import json_ready from here
    from .derived import DerivedFinding
    from .groups import GroupingResult

MATRIX_FORMATS = ("tsv", "csv", "phylip", "json")
_EXTENSIONS = {
    ".tsv": "tsv", ".txt": "tsv", ".csv": "csv", ".phy": "phylip", ".phylip": "phylip",
    ".dist": "phylip", ".json": "json",
}  # fmt: skip
_PHYLIP_RESERVED = " ():;,[]'"
_QUOTED_BY_CSV = "\t\n\r"


class FormatWarning(UserWarning):
    """Something was changed to fit a file format (names shortened or made safe)."""


STALE_SECONDS = 3600
"""A temporary file of ours older than this is left from a write that was killed."""

_TEMPORARY = re.compile(r"\..+\.kinpress-[A-Za-z0-9_]+\.tmp")


def _write_all(fd: int, data: bytes, where: str) -> None:
    """Write every byte to `fd`, or raise OSError saying how far it got (a full disk takes some
    bytes, then refuses: buffered writers can drop the rest without a word)."""
    view = memoryview(data)
    done = 0
    while done < len(data):
        try:
            done += os.write(fd, view[done:])
        except BrokenPipeError:
            raise
        except OSError as error:
            raise OSError(
                error.errno, f"{error.strerror} after {done:,} of {len(data):,} bytes", where
            ) from None


def _creation_mode() -> int:
    """The mode a new file gets from the user's umask (read without changing it where possible)."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("Umask:"):
                    return 0o666 & ~int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return 0o666 & ~mask


def _remove_stale_temporaries(folder: Path) -> None:
    """Remove our own temporary files that a killed write left in `folder` long ago."""
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return
    now = time.time()
    for entry in entries:
        if not _TEMPORARY.fullmatch(entry.name):
            continue
        try:
            if entry.is_file(follow_symlinks=False) and now - entry.stat().st_mtime > STALE_SECONDS:
                os.unlink(entry.path)
        except OSError:
            continue


Content = str | bytes | Iterable[str]
"""What a writer takes: text, bytes, or text in pieces (written as they come)."""

_PIECE_BYTES = 1 << 20


def _encoded(content: Content) -> Iterator[bytes]:
    """`content` as UTF-8 bytes, pieces gathered to about a megabyte per write."""
    if isinstance(content, bytes):
        yield content
        return
    if isinstance(content, str):
        yield content.encode("utf-8")
        return
    batch: list[str] = []
    size = 0
    for piece in content:
        batch.append(piece)
        size += len(piece)
        if size >= _PIECE_BYTES:
            yield "".join(batch).encode("utf-8")
            batch, size = [], 0
    if batch:
        yield "".join(batch).encode("utf-8")


def _write_pieces(fd: int, content: Content, where: str) -> None:
    for data in _encoded(content):
        _write_all(fd, data, where)


def atomic_write(path: str | os.PathLike[str], content: Content) -> None:
    """Write text (as UTF-8, line ends as given) or bytes to `path` through a temporary file in
    the same folder, then rename it.

    A reader never sees a half-written file, and an interrupted or failed write (a full disk)
    leaves the old one intact and raises OSError. The file keeps the mode of the one it replaces;
    a new one gets the mode the umask allows. Temporary files are named
    ``.NAME.kinpress-XXXXXXXX.tmp``; those a killed write left are removed by a later write to the
    same folder once older than STALE_SECONDS. Devices and pipes are written to directly.
    """
    target = Path(path)
    if target.exists() and not target.is_file():
        # A device or pipe (/dev/null, a FIFO): renaming over it would replace it with a file.
        with open(target, "wb", buffering=0) as out:
            _write_pieces(out.fileno(), content, str(target))
        return
    mode = stat.S_IMODE(target.stat().st_mode) if target.exists() else _creation_mode()
    folder = target.parent
    _remove_stale_temporaries(folder)
    handle, temporary = tempfile.mkstemp(
        dir=folder, prefix=f".{target.name}.kinpress-", suffix=".tmp"
    )
    try:
        try:
            _write_pieces(handle, content, str(target))
            os.fsync(handle)
        finally:
            os.close(handle)
        os.chmod(temporary, mode)
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def describe_stdout() -> str:
    """'standard output', and where it goes when that is a file (Linux's /proc tells)."""
    try:
        where = os.readlink("/proc/self/fd/1")
    except OSError:
        return "standard output"
    return f"standard output ({where})" if where.startswith("/") else "standard output"


def emit(text: Content, path: str | os.PathLike[str] | None) -> None:
    """Write to a file atomically, or to stdout when `path` is None or '-'.

    Every byte reaches standard output or OSError says how far it got and where it went."""
    if path is not None and os.fspath(path) != "-":
        atomic_write(path, text)
        return
    sys.stdout.flush()
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):  # replaced by an object without a descriptor
        for data in _encoded(text):
            sys.stdout.write(data.decode("utf-8"))
        sys.stdout.flush()
        return
    _write_pieces(fd, text, describe_stdout())


def format_for(path: str | os.PathLike[str] | None, given: str | None) -> str:
    """The format asked for, else the one the file extension implies, else TSV."""
    if given:
        if given not in MATRIX_FORMATS:
            raise ValueError(f"unknown format {given!r}; use {', '.join(MATRIX_FORMATS)}")
        return given
    if path is None:
        return "tsv"
    return _EXTENSIONS.get(Path(path).suffix.lower(), "tsv")


def _number(value: float) -> str:
    return f"{value:.6f}"


def tsv_lines(dm: DistanceMatrix) -> Iterator[str]:
    """Header row with an empty first cell and the labels, then one row per item.

    Labels are written by `escape_name`: tabs and line breaks cannot end a cell or a row.
    """
    labels = [escape_name(label) for label in dm.labels]
    yield "\t".join(["", *labels]) + "\n"
    for label, row in zip(labels, dm.distances, strict=True):
        yield "\t".join([label, *map(_number, row)]) + "\n"


def _csv_cell(text: str) -> str:
    # RFC 4180: quote a field holding a comma, a quote, CR or LF. (Python 3.11's csv writer
    # leaves a lone CR unquoted when the line terminator is "\n", which its reader then rejects.)
    text = escape_name(text, keep=_QUOTED_BY_CSV)
    if any(c in text for c in ',"\r\n'):
        return '"' + text.replace('"', '""') + '"'
    return text


def csv_lines(dm: DistanceMatrix) -> Iterator[str]:
    """Like TSV, comma-separated with RFC 4180 quoting (line breaks stay inside quotes)."""
    yield ",".join(["", *map(_csv_cell, dm.labels)]) + "\n"
    for label, row in zip(dm.labels, dm.distances, strict=True):
        yield ",".join([_csv_cell(label), *map(_number, row)]) + "\n"


def phylip_names(labels: Sequence[str]) -> list[str]:
    """Names PHYLIP can hold: blanks and the characters ():;,[]' that end or quote a name are
    written as ``\\xHH`` (see `escape_name`), so every name reads back as it was."""
    names = [escape_name(label, also=_PHYLIP_RESERVED) for label in labels]
    changed = sum(name != escape_name(label) for name, label in zip(names, labels, strict=True))
    if changed:
        warnings.warn(
            f"PHYLIP: {changed} names hold blanks or ():;,[]' and are written with \\xHH escapes"
            " (kinpress reads them back as they were)",
            FormatWarning,
            stacklevel=3,
        )
    return names


def phylip_lines(dm: DistanceMatrix) -> Iterator[str]:
    """The square PHYLIP distance format: the count, then a name and a row per line.

    Names of up to 10 characters are padded to 10, which strict readers need; longer names are
    written whole and followed by spaces (the relaxed form most programs read).
    """
    names = phylip_names(dm.labels)
    width = max(10, max(len(n) + 1 for n in names))
    yield f"{len(names):>5}\n"
    for name, row in zip(names, dm.distances, strict=True):
        yield name.ljust(width) + " ".join(map(_number, row)) + "\n"


def json_ready(value: Any) -> Any:
    """`value` as the plain values JSON holds, the one conversion every result's `as_json` uses.

    A result (anything with `as_json`) gives its own; another dataclass gives its fields by name;
    tuples and numpy arrays become lists, numpy numbers Python ones, paths strings; a number JSON
    cannot hold (NaN: undefined, or an infinity) becomes null (RFC 8259, section 6: "Numeric
    values that cannot be represented ... (such as Infinity and NaN) are not permitted"). Names
    are kept as they are: `json_text` escapes them when the text is written.

    >>> json_ready({"fit": np.float64("nan"), "rows": np.eye(2, dtype=int), "k": (1, 2)})
    {'fit': None, 'rows': [[1, 0], [0, 1]], 'k': [1, 2]}
    """
    if isinstance(value, str | bool | int | None):
        return value
    if isinstance(value, float | np.floating):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        if value.dtype.kind in "iub" or (value.dtype.kind == "f" and np.isfinite(value).all()):
            return value.tolist()  # one call for a whole matrix of plain numbers
        return [json_ready(v) for v in value]
    if hasattr(value, "as_json"):
        return value.as_json()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: json_ready(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_ready(v) for v in value]
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    raise TypeError(f"no JSON value for {type(value).__name__}")


def json_safe(value: Any) -> Any:
    """`value` with every string, keys included, written by `escape_name` (tabs and line breaks
    kept, JSON has escapes of its own for them): bytes of file names that are not UTF-8 cannot be
    written as JSON text, and the escape makes the rule one for every output."""
    if isinstance(value, str):
        return escape_name(value, keep=_QUOTED_BY_CSV)
    if isinstance(value, dict):
        return {json_safe(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_safe(v) for v in value]
    return value


def json_text(value: Any) -> str:
    """JSON text of `value` (see `json_safe`), indented one space, ending in a line break."""
    return json.dumps(json_safe(value), indent=1, ensure_ascii=False) + "\n"


def json_lines(dm: DistanceMatrix) -> Iterator[str]:
    """The document of `DistanceMatrix.as_json`, its distances one matrix row per line.

    Names are written by `escape_name` (see `json_safe`)."""
    doc = dm.as_json(rows=False)
    head = json.dumps(json_safe(doc), indent=1, ensure_ascii=False)
    yield head[: head.rindex("}")].rstrip() + ',\n "distances": [\n'
    # One matrix row per line: readable, and far faster than a number per line.
    for k, row in enumerate(dm.distances):
        end = ",\n" if k < len(dm) - 1 else "\n"
        yield "  " + json.dumps(np.round(row, 8).tolist()) + end
    yield " ]\n}\n"


WRITERS: dict[str, Callable[[DistanceMatrix], Iterator[str]]] = {
    "tsv": tsv_lines,
    "csv": csv_lines,
    "phylip": phylip_lines,
    "json": json_lines,
}
"""Each format's writer, one line (or matrix row) at a time, so that a large matrix is never
held twice as text."""


def matrix_to_tsv(dm: DistanceMatrix) -> str:
    """The TSV text of `tsv_lines`."""
    return "".join(tsv_lines(dm))


def matrix_to_csv(dm: DistanceMatrix) -> str:
    """The CSV text of `csv_lines`."""
    return "".join(csv_lines(dm))


def matrix_to_phylip(dm: DistanceMatrix) -> str:
    """The PHYLIP text of `phylip_lines`."""
    return "".join(phylip_lines(dm))


def matrix_to_json(dm: DistanceMatrix) -> str:
    """The JSON text of `json_lines`."""
    return "".join(json_lines(dm))


def write_matrix(
    dm: DistanceMatrix, path: str | os.PathLike[str] | None = None, fmt: str | None = None
) -> None:
    """Write a matrix in `fmt` (default: from the extension, else TSV); None or '-' is stdout."""
    emit(WRITERS[format_for(path, fmt)](dm), path)


GROUP_COLUMNS = ("item", "group", "medoid", "outlier")


def group_lines(result: GroupingResult) -> Iterator[str]:
    """The groups TSV: a header, then per item its group and whether it is its group's medoid
    and an outlier (yes/no); names written by `escape_name`."""
    yield "\t".join(GROUP_COLUMNS) + "\n"
    for name, group, is_medoid, outlier in result.rows():
        flags = ("yes" if is_medoid else "no", "yes" if outlier else "no")
        yield "\t".join([escape_name(name), str(group), *flags]) + "\n"


FINDING_FORMATS = ("tsv", "csv", "json")
FINDING_COLUMNS = (
    "a", "b", "relation", "a_explained_by_b", "b_explained_by_a", "score", "fpr",
    "a_shared_in_order", "b_shared_in_order", "a_path", "b_path", "a_hash", "b_hash",
    "a_start", "a_end", "b_start", "b_end",
)  # fmt: skip
"""The columns of a findings table; the last four locate the longest passage (empty without)."""


def finding_lines(findings: Iterable[DerivedFinding], fmt: str = "tsv") -> Iterator[str]:
    """Derived findings as a TSV or CSV table, one row per finding (FINDING_COLUMNS), or as the
    JSON list of their `as_json`. Names and paths are written by `escape_name` (CSV quoting them
    by RFC 4180 where needed, JSON by `json_safe`)."""
    if fmt == "json":
        yield json_text([f.as_json() for f in findings])
        return
    if fmt not in ("tsv", "csv"):
        raise ValueError(f"unknown format {fmt!r}; use {', '.join(FINDING_FORMATS)}")
    cell, sep = (escape_name, "\t") if fmt == "tsv" else (_csv_cell, ",")
    yield sep.join(FINDING_COLUMNS) + "\n"
    for f in findings:
        numbers = (f.a_explained_by_b, f.b_explained_by_a, f.score, f.fpr, f.a_in_order,
                   f.b_in_order)  # fmt: skip
        longest = f.stretches[0] if f.stretches else None
        offsets = (
            ("", "", "", "")
            if longest is None
            else (longest.a_start, longest.a_end, longest.b_start, longest.b_end)
        )
        row = [cell(f.a), cell(f.b), f.relation, *map(_number, numbers), cell(f.a_path),
               cell(f.b_path), f.a_hash, f.b_hash, *map(str, offsets)]  # fmt: skip
        yield sep.join(row) + "\n"


def write_findings(
    findings: Iterable[DerivedFinding],
    path: str | os.PathLike[str] | None = None,
    fmt: str | None = None,
) -> None:
    """Write findings in `fmt` (tsv, csv or json; default: from the extension, else TSV); None
    or '-' is stdout."""
    if fmt is None:
        suffix = "" if path is None else Path(path).suffix.lower()
        fmt = {".csv": "csv", ".json": "json"}.get(suffix, "tsv")
    emit(finding_lines(findings, fmt), path)


def _square(rows: list[list[str]], labels: list[str], source: str, first_line: int) -> np.ndarray:
    n = len(labels)
    if n < 2:
        raise InputError(f"{source}: a distance matrix needs at least two items")
    twice = next((label for label, count in Counter(labels).items() if count > 1), None)
    if twice is not None:
        raise InputError(f"{source}: the label {escape_name(twice)!r} appears twice")
    if len(rows) != n:
        raise InputError(f"{source}: {n} labels but {len(rows)} rows")
    values = np.empty((n, n))
    for k, row in enumerate(rows):
        if len(row) != n:
            raise InputError(f"{source}:{first_line + k}: expected {n} values, found {len(row)}")
        try:
            values[k] = [float(v) for v in row]
        except ValueError:
            raise InputError(f"{source}:{first_line + k}: values must be numbers") from None
    if not np.all(np.isfinite(values)):
        raise InputError(f"{source}: distances must be finite numbers")
    skew = np.argwhere(~np.isclose(values, values.T, atol=1e-6))
    if skew.size:
        i, j = skew[0]
        raise InputError(
            f"{source}:{first_line + i}: the matrix is not symmetric: row {i + 1} column {j + 1}"
            f" is {values[i, j]:g} but row {j + 1} column {i + 1} is {values[j, i]:g}"
        )
    return values


def _read_delimited(text: str, source: str, delimiter: str) -> DistanceMatrix:
    if delimiter == "\t":  # TSV is written unquoted: a '"' in it is a character, not a quote
        rows = list(csv.reader(io.StringIO(text), delimiter="\t", quoting=csv.QUOTE_NONE))
    else:
        rows = list(csv.reader(io.StringIO(text), delimiter=delimiter))
    rows = [r for r in rows if r]
    if not rows:
        raise InputError(f"{source}: empty matrix file")
    labels = [unescape_name(label) for label in rows[0][1:]]
    body = rows[1:]
    row_labels = [unescape_name(r[0]) for r in body]
    if row_labels != labels:
        raise InputError(f"{source}: row labels do not match the header")
    return DistanceMatrix(tuple(labels), _square([r[1:] for r in body], labels, source, 2))


def _read_phylip(text: str, source: str) -> DistanceMatrix:
    lines = [line for line in text.splitlines() if line.strip()]
    try:
        n = int(lines[0].split()[0])
    except (IndexError, ValueError):
        raise InputError(f"{source}:1: PHYLIP starts with the number of items") from None
    labels, rows = [], []
    for line in lines[1 : n + 1]:
        fields = line.split()
        if len(fields) == n:  # strict PHYLIP: a 10-character name may touch the first value
            name, values = line[:10].strip(), line[10:].split()
        else:
            name, values = fields[0], fields[1:]
        labels.append(unescape_name(name))
        rows.append(values)
    if len(labels) != n:
        raise InputError(f"{source}: PHYLIP says {n} items but holds {len(labels)} rows")
    return DistanceMatrix(tuple(labels), _square(rows, labels, source, 2))


def _json_field(doc: dict[str, Any], key: str, kind: type, source: str, what: str) -> Any:
    value = doc.get(key)
    if value is not None and not isinstance(value, kind):
        raise InputError(f'{source}: "{key}" must be {what}, not {type(value).__name__}')
    return value


def _per_label(
    doc: dict[str, Any], key: str, labels: Sequence[str], source: str, check: Any
) -> list[Any] | None:
    """The values of an optional `{label: value}` field in label order (None when absent)."""
    table = _json_field(doc, key, dict, source, "an object of label: value")
    if not table:
        return None
    table = {unescape_name(k): v for k, v in table.items()}
    missing = next((label for label in labels if label not in table), None)
    if missing is not None:
        raise InputError(f'{source}: "{key}" has no value for {escape_name(missing)!r}')
    values = [table[label] for label in labels]
    wrong = next((v for v in values if not check(v)), None)
    if wrong is not None:
        raise InputError(f'{source}: "{key}" holds {wrong!r}, which is not allowed there')
    return values


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _read_json(text: str, source: str) -> DistanceMatrix:
    try:
        doc = json.loads(text)
    except (json.JSONDecodeError, RecursionError) as error:
        raise InputError(f"{source}: not JSON ({error})") from None
    if not isinstance(doc, dict) or "labels" not in doc or "distances" not in doc:
        raise InputError(
            f"{source}: not a kinpress matrix JSON (an object with labels and distances)"
        )
    labels = _json_field(doc, "labels", list, source, "a list of names")
    if not all(isinstance(label, str) for label in labels):
        raise InputError(f'{source}: "labels" must hold names (strings)')
    labels = [unescape_name(label) for label in labels]
    rows = _json_field(doc, "distances", list, source, "a list of rows")
    if not all(isinstance(row, list) and all(map(_is_number, row)) for row in rows):
        raise InputError(f'{source}: "distances" must be a list of rows of numbers')
    distances = _square([[str(v) for v in row] for row in rows], labels, source, 1)
    sizes = _per_label(doc, "sizes", labels, source, _is_number)
    selfs = _per_label(doc, "self_distances", labels, source, _is_number)
    classes = _per_label(doc, "classes", labels, source, lambda v: v is None or isinstance(v, str))
    stats = _json_field(doc, "stats", dict, source, "an object") or {}
    known = set(MatrixStats.__dataclass_fields__)
    return DistanceMatrix(
        tuple(labels),
        distances,
        sizes=None if sizes is None else np.array(sizes),
        self_distances=None if selfs is None else np.array(selfs, dtype=float),
        compressor=str(doc.get("compressor", "")),
        conditional=str(doc.get("conditional", "")),
        strand=str(doc.get("strand", "one")),
        classes=None
        if classes is None
        else tuple(None if c is None else unescape_name(c) for c in classes),
        stats=MatrixStats(**{k: v for k, v in stats.items() if k in known and _is_number(v)}),
    )


def read_matrix(path: str | os.PathLike[str], fmt: str | None = None) -> DistanceMatrix:
    """Read a matrix written by `write_matrix` (or any square TSV, CSV, PHYLIP file)."""
    source = os.fspath(path)
    try:
        # newline="": line ends inside quoted CSV fields are kept as written (csv module docs)
        with open(path, encoding="utf-8", newline="") as handle:
            text = handle.read()
    except FileNotFoundError:
        raise InputError(f"{source}: no such file") from None
    except (OSError, UnicodeDecodeError) as error:
        raise InputError(f"{source}: cannot read: {error}") from None
    if fmt is None:
        # The first line that is not blank, its leading tab kept: a TSV header starts with one.
        first = next((line for line in text[:4096].splitlines() if line.strip()), "")
        if text.lstrip().startswith("{"):
            fmt = "json"
        elif "\t" not in first and first.strip().isdigit():
            fmt = "phylip"
        elif "\t" in first and format_for(path, None) != "csv":
            fmt = "tsv"
        else:
            fmt = format_for(path, None)
    if fmt == "json":
        return _read_json(text, source)
    if fmt == "phylip":
        return _read_phylip(text, source)
    return _read_delimited(text, source, "," if fmt == "csv" else "\t")

"""A content-addressed SQLite store of compressed sizes.

Keyed by the compressor (spec plus library version), the method and the content hashes of the
inputs, so a rerun computes nothing new and adding an item computes only its new pairs. Writes are
committed per tile; two runs may share a file (WAL journal, first write wins).

The file is marked as kinpress's by SQLite's application id; any other file is refused and left
untouched (only a file at the default location, which is kinpress's own, is set aside instead).
A cache of schema 1 (no application id, no checksums) is upgraded in place. Each row carries a
checksum of its key and size, so an edited or damaged row is dropped and computed again; a file
SQLite reports as corrupt is set aside and a new one started. A cache that cannot be written (held
locked, a full disk, read-only) still gives the sizes it holds: the run goes on, computes the rest
and warns that new sizes are not stored. The checksums guard against damage and casual edits, not
against a forger who recomputes them.
"""

from __future__ import annotations

import hashlib
import os
import sqlite3
import time
import warnings
from collections.abc import Callable, Iterable, Sequence
from pathlib import Path
from typing import TypeVar
from urllib.parse import quote

_T = TypeVar("_T")

APPLICATION_ID = 0x6B696E70  # "kinp", in the SQLite header at offset 68
_SCHEMA_VERSION = 2
_SQLITE_MAGIC = b"SQLite format 3\x00"

# Schema 1, as the first versions wrote it; version 2 adds the checksums (`_UPGRADES`).
_SCHEMA_1 = """
CREATE TABLE sizes (
    compressor TEXT NOT NULL,
    method TEXT NOT NULL,
    a BLOB NOT NULL,
    b BLOB NOT NULL,
    size INTEGER NOT NULL,
    PRIMARY KEY (compressor, method, a, b)
) WITHOUT ROWID;
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE choices (key TEXT PRIMARY KEY, value TEXT NOT NULL);
INSERT INTO meta VALUES ('schema', '1');
"""
_UPGRADES = """
ALTER TABLE sizes ADD COLUMN checksum INTEGER NOT NULL DEFAULT 0;
ALTER TABLE choices ADD COLUMN checksum INTEGER NOT NULL DEFAULT 0;
UPDATE sizes SET checksum = kinpress_size_checksum(compressor, method, a, b, size);
UPDATE choices SET checksum = kinpress_choice_checksum(key, value);
UPDATE meta SET value = '2' WHERE key = 'schema';
"""


class CacheWarning(UserWarning):
    """The cache could not be used as asked: set aside, not written, or waited for."""


class CacheError(ValueError):
    """The file named as the cache is not a kinpress cache; it has been left untouched."""


def default_cache_path() -> Path:
    """The cache in the user's cache directory (platform conventions via platformdirs)."""
    from platformdirs import user_cache_dir

    return Path(user_cache_dir("kinpress")) / "sizes.sqlite"


def _framed(part: bytes) -> bytes:
    return len(part).to_bytes(4, "little") + part


def _checksum(*parts: bytes) -> int:
    """A 64-bit BLAKE2b checksum of length-prefixed parts, as SQLite's signed integer."""
    data = b"".join(_framed(part) for part in parts)
    digest = hashlib.blake2b(data, digest_size=8, person=b"kinpress-cache").digest()
    return int.from_bytes(digest, "little", signed=True)


def _size_checksums(compressor: str, method: str) -> Callable[[bytes, bytes, int], int]:
    """The checksum of a row of sizes: `_checksum` of its five fields, the first two framed once
    (it runs on every row read, so it is kept lean)."""
    head = _framed(compressor.encode()) + _framed(method.encode())
    blake2b = hashlib.blake2b

    def checksum(a: bytes, b: bytes, size: int) -> int:
        data = head + _framed(a) + _framed(b) + _framed(size.to_bytes(8, "little", signed=True))
        digest = blake2b(data, digest_size=8, person=b"kinpress-cache").digest()
        return int.from_bytes(digest, "little", signed=True)

    return checksum


def _size_checksum(compressor: str, method: str, a: bytes, b: bytes, size: int) -> int:
    return _size_checksums(compressor, method)(a, b, size)


def _choice_checksum(key: str, value: str) -> int:
    return _checksum(key.encode(), value.encode())


def _code(error: sqlite3.Error) -> int:
    """SQLite's primary result code of an error (https://sqlite.org/rescode.html; 0 if none)."""
    return int(getattr(error, "sqlite_errorcode", 0) or 0) & 0xFF


def _uri(path: Path, query: str) -> str:
    return f"file:{quote(os.fsencode(path))}?{query}"


def _identity(path: Path) -> tuple[int, int] | None:
    try:
        stat = path.stat()
    except OSError:
        return None
    return stat.st_dev, stat.st_ino


def _tables(db: sqlite3.Connection) -> set[str]:
    return {row[0] for row in db.execute("SELECT name FROM sqlite_schema WHERE type = 'table'")}


def _schema_1(db: sqlite3.Connection) -> bool:
    """Whether an unmarked SQLite file is a cache the first versions wrote (schema 1)."""
    if not {"sizes", "meta", "choices"} <= _tables(db):
        return False
    columns = [row[1] for row in db.execute("PRAGMA table_info(sizes)")]
    if columns != ["compressor", "method", "a", "b", "size"]:
        return False
    row = db.execute("SELECT value FROM meta WHERE key = 'schema'").fetchone()
    return row is not None and row[0] == "1"


def _identify(path: Path) -> str:
    """'new', 'ours' or 'schema 1' for a file kinpress may use; otherwise why it is not ours.

    Reads the header and, for an SQLite file without an application id, its table list through
    an immutable connection, which never writes, locks or leaves files beside it.
    """
    if path.is_dir():
        return "a folder"
    if path.exists() and not path.is_file():
        return "not a regular file"
    try:
        with path.open("rb") as file:
            header = file.read(100)
    except FileNotFoundError:
        return "new"
    if not header:
        return "new"  # an empty file holds nothing to lose
    if not header.startswith(_SQLITE_MAGIC) or len(header) < 100:
        return "not an SQLite file"
    app_id = int.from_bytes(header[68:72], "big")
    if app_id == APPLICATION_ID:
        return "ours"
    if app_id != 0:
        return f"an SQLite file of another program, application id {app_id:#010x}"
    # No application id: a schema 1 cache, or one whose marking is still in its WAL file.
    wal, shm = Path(f"{path}-wal"), Path(f"{path}-shm")
    in_wal = wal.exists() and wal.stat().st_size > 0 and shm.exists()
    queries = ["immutable=1"] + (["mode=ro"] if in_wal else [])
    for query in queries:
        try:
            db = sqlite3.connect(_uri(path, query), uri=True)
        except sqlite3.Error:
            continue
        try:
            if db.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID:
                return "ours"
            if _schema_1(db):
                return "schema 1"
        except sqlite3.Error:
            pass
        finally:
            db.close()
    return "an SQLite file without kinpress's tables"


def _register(db: sqlite3.Connection) -> None:
    db.create_function("kinpress_size_checksum", 5, _size_checksum, deterministic=True)
    db.create_function("kinpress_choice_checksum", 2, _choice_checksum, deterministic=True)


def _statements(script: str) -> list[str]:
    return [s.strip() for s in script.split(";") if s.strip()]


def _create_or_upgrade(db: sqlite3.Connection) -> None:
    """Make a new (empty) or schema 1 file a marked cache of the present schema, in one
    transaction: another run may be doing the same, and the first one does it."""
    with db:
        db.execute("BEGIN IMMEDIATE")
        if db.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID:
            return
        if not _tables(db):
            for statement in _statements(_SCHEMA_1):
                db.execute(statement)
        elif not _schema_1(db):
            raise sqlite3.DatabaseError("not a kinpress cache")
        for statement in _statements(_UPGRADES):
            db.execute(statement)
        db.execute(f"PRAGMA application_id = {APPLICATION_ID}")


def _check_schema(db: sqlite3.Connection) -> None:
    row = db.execute("SELECT value FROM meta WHERE key = 'schema'").fetchone()
    if row is None or row[0] != str(_SCHEMA_VERSION):
        found = "none" if row is None else row[0]
        raise sqlite3.DatabaseError(f"schema version {found}, expected {_SCHEMA_VERSION}")
    db.execute("SELECT 1 FROM sizes LIMIT 1").fetchall()


class SizeCache:
    """Compressed sizes by (compressor, method, hash a, hash b); b is empty for single items.

    `busy_timeout` is how long (seconds) a write waits for another program's lock before this
    run goes on without storing; while it waits, `on_wait(seconds waited)` is called about once a
    second (by default one `CacheWarning` says why nothing moves). Raises `CacheError` when `path`
    is not a kinpress cache.
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        *,
        busy_timeout: float = 60.0,
        on_wait: Callable[[float], None] | None = None,
    ) -> None:
        self.path = Path(path)
        self.busy_timeout = busy_timeout
        self._on_wait = on_wait
        self._db: sqlite3.Connection | None = None
        self._identity: tuple[int, int] | None = None
        self._checked = True  # rows carry checksums (False: a schema 1 cache that stayed so)
        self._no_writes: str | None = None  # why sizes are not stored, once they cannot be
        self._gave_up_waiting = False
        self._unstored = 0
        self._told: set[str] = set()
        self._in_use = False
        self._attach()
        self._in_use = True

    # Opening

    def _attach(self) -> None:
        """Open the file at `path`: create, upgrade, read only, or set aside, as it requires."""
        self._db, self._identity, self._checked, self._no_writes = None, None, True, None
        try:
            kind = _identify(self.path)
        except OSError as error:
            self._go_without(f"cannot be read ({error.strerror or error})")
            return
        if kind not in ("new", "ours", "schema 1"):
            if self._in_use:  # replaced while in use: never fail a run for its cache
                self._go_without(f"was replaced by {kind}")
                return
            if kind == "a folder" or self.path.resolve() != default_cache_path().resolve():
                raise CacheError(
                    f"{self.path}: not a kinpress cache ({kind}); left untouched; "
                    "choose another file"
                )
            if not self._set_aside(kind):  # kinpress's own location: keep the file, start anew
                return
            kind = "new"
        try:
            self._db = self._connect(kind)
        except sqlite3.Error as error:
            if _code(error) in (sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB) and kind != "new":
                if self._set_aside(str(error)):
                    self._attach()
            elif kind == "new":  # SQLite rolls a failed creation back to an empty file
                self._go_without(f"cannot be created ({error})")
            else:
                self._open_read_only(error, checked=kind == "ours")
            return
        except OSError as error:
            self._go_without(f"cannot be created ({error.strerror or error})")
            return
        self._identity = _identity(self.path)

    def _connect(self, kind: str) -> sqlite3.Connection:
        if kind == "new":
            self.path.parent.mkdir(parents=True, exist_ok=True)
        mode = "rwc" if kind == "new" else "rw"
        db = sqlite3.connect(_uri(self.path, f"mode={mode}"), uri=True, timeout=self._slice)
        db.isolation_level = None
        try:
            _register(db)
            if kind == "ours":
                _check_schema(db)
            else:
                self._waiting(lambda: _create_or_upgrade(db))
            self._waiting(lambda: db.execute("PRAGMA journal_mode=WAL").fetchone())
            db.execute("PRAGMA synchronous=NORMAL")
        except BaseException:
            db.close()
            raise
        return db

    def _open_read_only(self, error: sqlite3.Error, *, checked: bool) -> None:
        """Read what the cache holds when it cannot be opened for writing (or upgraded): through
        its WAL where SQLite can, else immutable (the only way SQLite opens a WAL database in a
        read-only folder that lacks its -shm file; https://sqlite.org/wal.html#readonly)."""
        why: sqlite3.Error = error
        for query in ("mode=ro", "immutable=1"):
            db = sqlite3.connect(_uri(self.path, query), uri=True, timeout=self._slice)
            db.isolation_level = None
            try:
                _register(db)
                if checked:
                    _check_schema(db)
                elif not _schema_1(db):
                    raise sqlite3.DatabaseError("not a schema 1 cache")
            except sqlite3.Error as failed:
                db.close()
                why = failed
                continue
            self._db, self._identity, self._checked = db, _identity(self.path), checked
            self._no_writes = self._unwritable(error)
            return
        self._go_without(f"cannot be opened ({why})")

    def _go_without(self, why: str) -> None:
        self._db = None
        warnings.warn(f"cache {self.path} {why}; going on without it", CacheWarning, stacklevel=5)

    def _set_aside(self, why: str) -> bool:
        """Rename a damaged cache beside itself (never delete it); False if that failed."""
        if self._db is not None:
            self._db.close()
            self._db = None
        if self._identity is not None and _identity(self.path) != self._identity:
            return True  # another run set it aside already and may have started anew
        stamp = time.strftime("%Y%m%d-%H%M%S")
        aside = self.path.with_name(f"{self.path.name}.unusable-{stamp}-{os.getpid()}")
        try:
            for suffix in ("", "-wal", "-shm"):
                part = Path(f"{self.path}{suffix}")
                if part.exists():
                    part.rename(Path(f"{aside}{suffix}"))
        except OSError as error:
            self._go_without(f"is unusable ({why}) and cannot be set aside ({error.strerror})")
            return False
        warnings.warn(
            f"cache {self.path} was unusable ({why}); set aside as {aside.name}, starting anew",
            CacheWarning,
            stacklevel=5,
        )
        return True

    # Errors while in use

    @property
    def _slice(self) -> float:
        """How long SQLite itself waits for a lock before this class looks at the clock."""
        return min(1.0, self.busy_timeout / 4)

    def _waiting(self, attempt: Callable[[], _T]) -> _T:
        """Run `attempt`, retrying while another connection holds the lock, up to busy_timeout.

        Once a wait has run out, later writes try once without waiting until one gets through,
        so that a lock held for long does not hold up every tile.
        """
        start = time.monotonic()
        told = False
        while True:
            try:
                return attempt()
            except sqlite3.OperationalError as error:
                waited = time.monotonic() - start
                if _code(error) != sqlite3.SQLITE_BUSY or self._gave_up_waiting:
                    raise
                if waited >= self.busy_timeout:
                    self._gave_up_waiting = True
                    raise
                if self._on_wait is not None:
                    self._on_wait(waited)
                elif not told:
                    told = True
                    warnings.warn(
                        f"cache {self.path} is locked by another program; waiting up to "
                        f"{self.busy_timeout:g} s",
                        CacheWarning,
                        stacklevel=5,
                    )

    def _failed(self, error: sqlite3.Error, rows: int) -> None:
        """Deal with an error of a read or write: only corruption sets the cache aside."""
        code = _code(error)
        self._unstored += rows
        if code in (sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB):
            if self._set_aside(str(error)):
                self._attach()
        elif getattr(error, "sqlite_errorcode", 0) == sqlite3.SQLITE_READONLY_DBMOVED:
            self._reattach()
        elif code == sqlite3.SQLITE_BUSY:
            self._warn_once(
                f"cache {self.path} stayed locked by another program for "
                f"{self.busy_timeout:g} s; going on, and sizes computed while it stays locked "
                "are not stored"
            )
        else:
            self._no_writes = self._unwritable(error)
            self._warn_no_writes()

    def _unwritable(self, error: sqlite3.Error) -> str:
        """Why the cache cannot be written, in the user's terms (SQLite reports a full disk
        met while making the -shm file as an I/O error, a read-only mount as cannot open)."""
        code = _code(error)
        try:
            disk = os.statvfs(self.path.parent)
            no_space, read_only = disk.f_bavail == 0, bool(disk.f_flag & os.ST_RDONLY)
        except (OSError, AttributeError):  # no statvfs on Windows
            no_space = read_only = False
        if code == sqlite3.SQLITE_FULL or (code == sqlite3.SQLITE_IOERR and no_space):
            return "the disk is full"
        if code == sqlite3.SQLITE_READONLY or read_only:
            return "it is read-only"
        if code == sqlite3.SQLITE_CANTOPEN and not os.access(self.path.parent, os.W_OK):
            return "its folder is read-only"
        return f"it cannot be written ({error})"

    def _warn_no_writes(self) -> None:
        self._warn_once(
            f"cache {self.path}: {self._no_writes}; using the sizes it holds, new sizes are not "
            "stored"
        )

    def _warn_once(self, message: str) -> None:
        if message not in self._told:
            self._told.add(message)
            warnings.warn(message, CacheWarning, stacklevel=5)

    def _reattach(self) -> None:
        if self._db is not None:
            self._db.close()
        self._attach()

    def _usable(self) -> sqlite3.Connection | None:
        """The connection, reopened first if the file was renamed or replaced meanwhile (another
        run set it aside), so that no run goes on writing into a file set aside."""
        if self._db is not None and _identity(self.path) != self._identity:
            self._reattach()
        return self._db

    # The interface

    def get_many(
        self, compressor: str, method: str, keys: Sequence[tuple[bytes, bytes]]
    ) -> dict[tuple[bytes, bytes], int]:
        """The stored sizes among `keys` whose checksums hold; missing keys are absent."""
        db = self._usable()
        if not keys or db is None:
            return {}
        try:
            rows = self._waiting(lambda: self._select(db, compressor, method, keys))
        except sqlite3.Error as error:
            self._failed(error, 0)
            return {}
        found: dict[tuple[bytes, bytes], int] = {}
        damaged: list[tuple[bytes, bytes]] = []
        expected = _size_checksums(compressor, method)
        for a, b, size, checksum in rows:
            if not self._checked or checksum == expected(a, b, size):
                found[a, b] = size
            else:
                damaged.append((a, b))
        if damaged:
            self._drop(compressor, method, damaged)
        return found

    def _select(
        self,
        db: sqlite3.Connection,
        compressor: str,
        method: str,
        keys: Sequence[tuple[bytes, bytes]],
    ) -> list[tuple[bytes, bytes, int, int | None]]:
        checksum = "s.checksum" if self._checked else "NULL"
        db.execute("CREATE TEMP TABLE IF NOT EXISTS wanted (a BLOB, b BLOB)")
        db.execute("BEGIN")
        try:
            db.execute("DELETE FROM wanted")
            db.executemany("INSERT INTO wanted VALUES (?, ?)", keys)
            return db.execute(
                f"SELECT s.a, s.b, s.size, {checksum} FROM wanted w JOIN sizes s "
                "ON s.compressor = ? AND s.method = ? AND s.a = w.a AND s.b = w.b",
                (compressor, method),
            ).fetchall()
        finally:
            if db.in_transaction:
                db.execute("COMMIT")

    def _drop(self, compressor: str, method: str, damaged: list[tuple[bytes, bytes]]) -> None:
        """Delete rows whose checksums fail (where the cache can be written) and say so."""
        what = "dropped" if self._no_writes is None else "ignored"
        warnings.warn(
            f"cache {self.path}: {len(damaged)} stored sizes do not match their checksums "
            f"(edited or damaged); {what}, they are computed again",
            CacheWarning,
            stacklevel=3,
        )
        if self._no_writes is None:
            self._write(
                "DELETE FROM sizes WHERE compressor = ? AND method = ? AND a = ? AND b = ?",
                [(compressor, method, a, b) for a, b in damaged],
                0,
            )

    def _write(self, sql: str, values: list[tuple[object, ...]], rows: int) -> None:
        db = self._usable()
        if db is None:
            return
        if self._no_writes is not None:
            self._unstored += rows
            if rows:
                self._warn_no_writes()
            return

        def attempt() -> None:
            with db:
                db.execute("BEGIN IMMEDIATE")
                db.executemany(sql, values)

        try:
            self._waiting(attempt)
        except sqlite3.Error as error:
            self._failed(error, rows)
            if self._gave_up_waiting and self._db is db:
                db.execute("PRAGMA busy_timeout = 0")  # until a write gets through again
        else:
            if self._gave_up_waiting:
                self._gave_up_waiting = False
                db.execute(f"PRAGMA busy_timeout = {int(self._slice * 1000)}")

    def put_many(
        self, compressor: str, method: str, rows: Iterable[tuple[bytes, bytes, int]]
    ) -> None:
        """Store sizes and commit at once, so an interrupted run keeps them."""
        if self._db is None:
            return
        checksum = _size_checksums(compressor, method)
        values: list[tuple[object, ...]] = [
            (compressor, method, a, b, size, checksum(a, b, size))
            for a, b, size in ((a, b, int(size)) for a, b, size in rows)
        ]
        self._write("INSERT OR IGNORE INTO sizes VALUES (?, ?, ?, ?, ?, ?)", values, len(values))

    def get_choice(self, key: str) -> str | None:
        """A stored decision (such as the compressor calibration chose), or None."""
        db = self._usable()
        if db is None:
            return None
        checksum = "checksum" if self._checked else "NULL"
        try:
            row = db.execute(
                f"SELECT value, {checksum} FROM choices WHERE key = ?", (key,)
            ).fetchone()
        except sqlite3.Error as error:
            self._failed(error, 0)
            return None
        if row is None:
            return None
        if self._checked and row[1] != _choice_checksum(key, row[0]):
            self._warn_once(
                f"cache {self.path}: a stored choice does not match its checksum (edited or "
                "damaged); deciding again"
            )
            return None
        return str(row[0])

    def put_choice(self, key: str, value: str) -> None:
        """Store a decision so that a rerun on the same inputs need not decide again."""
        self._write(
            "INSERT OR REPLACE INTO choices VALUES (?, ?, ?)",
            [(key, value, _choice_checksum(key, value))],
            0,
        )

    def __len__(self) -> int:
        if self._db is None:
            return 0
        return int(self._db.execute("SELECT count(*) FROM sizes").fetchone()[0])

    def close(self) -> None:
        """Close the file, saying how many computed sizes could not be stored."""
        if self._unstored:
            warnings.warn(
                f"cache {self.path}: {self._unstored} sizes computed in this run were not "
                "stored; a rerun computes them again",
                CacheWarning,
                stacklevel=2,
            )
            self._unstored = 0
        if self._db is not None:
            self._db.close()
            self._db = None

    def __enter__(self) -> SizeCache:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

"""A content-addressed SQLite store of compressed sizes.

Keyed by the compressor (spec plus library version), the method and the content hashes of the
inputs, so a rerun computes nothing new and adding an item computes only its new pairs. Writes are
committed per tile; two runs may share a file (WAL journal, busy timeout, first write wins).
"""

from __future__ import annotations

import os
import sqlite3
import time
import warnings
from collections.abc import Iterable, Sequence
from pathlib import Path

_SCHEMA_VERSION = 1
_SCHEMA = """
CREATE TABLE IF NOT EXISTS sizes (
    compressor TEXT NOT NULL,
    method TEXT NOT NULL,
    a BLOB NOT NULL,
    b BLOB NOT NULL,
    size INTEGER NOT NULL,
    PRIMARY KEY (compressor, method, a, b)
) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS choices (key TEXT PRIMARY KEY, value TEXT NOT NULL);
"""


class CacheWarning(UserWarning):
    """The cache file was unusable and has been set aside."""


def default_cache_path() -> Path:
    """The cache in the user's cache directory (platform conventions via platformdirs)."""
    from platformdirs import user_cache_dir

    return Path(user_cache_dir("kinpress")) / "sizes.sqlite"


class SizeCache:
    """Compressed sizes by (compressor, method, hash a, hash b); b is empty for single items."""

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        try:
            self._db = self._open()
        except sqlite3.DatabaseError as error:
            self._set_aside(error)
            self._db = self._open()

    def _open(self) -> sqlite3.Connection:
        db = sqlite3.connect(self.path, timeout=60, isolation_level=None)
        try:
            db.execute("PRAGMA journal_mode=WAL")
            db.execute("PRAGMA synchronous=NORMAL")
            db.executescript(_SCHEMA)
            row = db.execute("SELECT value FROM meta WHERE key='schema'").fetchone()
            if row is None:
                db.execute(
                    "INSERT OR IGNORE INTO meta VALUES ('schema', ?)", (str(_SCHEMA_VERSION),)
                )
            elif row[0] != str(_SCHEMA_VERSION):
                raise sqlite3.DatabaseError(f"schema version {row[0]}, expected {_SCHEMA_VERSION}")
            db.execute("SELECT count(*) FROM (SELECT 1 FROM sizes LIMIT 1)").fetchone()
        except sqlite3.DatabaseError:
            db.close()
            raise
        return db

    def _set_aside(self, error: Exception) -> None:
        stamp = time.strftime("%Y%m%d-%H%M%S")
        aside = self.path.with_name(f"{self.path.name}.unusable-{stamp}")
        for suffix in ("", "-wal", "-shm"):
            part = Path(str(self.path) + suffix)
            if part.exists():
                part.rename(Path(str(aside) + suffix))
        warnings.warn(
            f"cache {self.path} was unusable ({error}); set aside as {aside.name}, starting anew",
            CacheWarning,
            stacklevel=3,
        )

    def get_many(
        self, compressor: str, method: str, keys: Sequence[tuple[bytes, bytes]]
    ) -> dict[tuple[bytes, bytes], int]:
        """The stored sizes among `keys`; missing keys are absent from the result."""
        if not keys:
            return {}
        try:
            return self._get_many(compressor, method, keys)
        except sqlite3.DatabaseError as error:
            self._recover(error)
            return {}

    def _get_many(
        self, compressor: str, method: str, keys: Sequence[tuple[bytes, bytes]]
    ) -> dict[tuple[bytes, bytes], int]:
        db = self._db
        db.execute("CREATE TEMP TABLE IF NOT EXISTS wanted (a BLOB, b BLOB)")
        db.execute("BEGIN")
        try:
            db.execute("DELETE FROM wanted")
            db.executemany("INSERT INTO wanted VALUES (?, ?)", keys)
            rows = db.execute(
                "SELECT s.a, s.b, s.size FROM wanted w JOIN sizes s "
                "ON s.compressor = ? AND s.method = ? AND s.a = w.a AND s.b = w.b",
                (compressor, method),
            ).fetchall()
        finally:
            db.execute("COMMIT")
        return {(a, b): size for a, b, size in rows}

    def put_many(
        self, compressor: str, method: str, rows: Iterable[tuple[bytes, bytes, int]]
    ) -> None:
        """Store sizes and commit at once, so an interrupted run keeps them."""
        values = [(compressor, method, a, b, int(size)) for a, b, size in rows]
        try:
            with self._db:
                self._db.execute("BEGIN IMMEDIATE")
                self._db.executemany("INSERT OR IGNORE INTO sizes VALUES (?, ?, ?, ?, ?)", values)
        except sqlite3.DatabaseError as error:
            self._recover(error)

    def get_choice(self, key: str) -> str | None:
        """A stored decision (such as the compressor calibration chose), or None."""
        try:
            row = self._db.execute("SELECT value FROM choices WHERE key = ?", (key,)).fetchone()
        except sqlite3.DatabaseError as error:
            self._recover(error)
            return None
        return None if row is None else str(row[0])

    def put_choice(self, key: str, value: str) -> None:
        """Store a decision so that a rerun on the same inputs need not decide again."""
        try:
            with self._db:
                self._db.execute("BEGIN IMMEDIATE")
                self._db.execute("INSERT OR REPLACE INTO choices VALUES (?, ?)", (key, value))
        except sqlite3.DatabaseError as error:
            self._recover(error)

    def _recover(self, error: Exception) -> None:
        self._db.close()
        self._set_aside(error)
        self._db = self._open()

    def __len__(self) -> int:
        return int(self._db.execute("SELECT count(*) FROM sizes").fetchone()[0])

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> SizeCache:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

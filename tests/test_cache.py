"""The size cache: reruns, additions, resumption, sharing and corruption."""

from __future__ import annotations

import os
import re
import shutil
import sqlite3
import subprocess
import threading
import warnings
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path

import numpy as np
import pytest

from kinpress import Item, LocalEngine, SizeCache, distance_matrix
from kinpress.cache import APPLICATION_ID, CacheError, CacheWarning, default_cache_path
from kinpress.cli import main
from kinpress.engine import SizeJob, Tile


def text_items(text: bytes, n: int, size: int = 3000) -> list[Item]:
    return [Item(f"t{k}", text[k * 2500 : k * 2500 + size], "test") for k in range(n)]


def test_rerun_computes_nothing_new(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 8)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        first = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
        again = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert first.stats.pairs_computed == 28 and first.stats.pairs_from_cache == 0
    assert again.stats.pairs_computed == 0 and again.stats.pairs_from_cache == 28
    assert again.stats.singles_computed == 0 and again.stats.self_pairs_computed == 0
    assert again.stats.bytes_compressed == 0
    assert np.array_equal(first.distances, again.distances)


def test_adding_one_item_computes_only_its_pairs(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 10)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        distance_matrix(items[:9], "zstd:level=3", cache=cache, engine=LocalEngine(1))
        grown = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert grown.stats.pairs_computed == 9
    assert grown.stats.pairs_from_cache == 36
    assert grown.stats.singles_computed == 1


def test_other_settings_do_not_reuse_sizes(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 4)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
        other = distance_matrix(items, "zstd:level=4", cache=cache, engine=LocalEngine(1))
        primed = distance_matrix(
            items, "zstd:level=3", conditional="primed", cache=cache, engine=LocalEngine(1)
        )
    assert other.stats.pairs_computed == 6
    assert primed.stats.pairs_computed == 6 and primed.stats.singles_computed == 0


class StopAfterPairTiles(LocalEngine):
    """An engine interrupted, as by Ctrl-C, after finishing some tiles of pairs."""

    def __init__(self, tiles: int) -> None:
        super().__init__(1)
        self.left = tiles
        self.pairs_done = 0
        self.self_pairs_done = 0

    def run(
        self, items: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        for tile, sizes in super().run(items, job, tiles):
            if tile.second:
                if self.left == 0:
                    raise KeyboardInterrupt
                self.left -= 1
                same = sum(f == s for f, s in zip(tile.first, tile.second, strict=True))
                self.self_pairs_done += same
                self.pairs_done += len(tile.first) - same
            yield tile, sizes


def test_an_interrupted_run_resumes_where_it_stopped(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 30, size=2000)
    path = tmp_path / "c.sqlite"
    engine = StopAfterPairTiles(tiles=2)
    with SizeCache(path) as cache, pytest.raises(KeyboardInterrupt):
        distance_matrix(items, "zstd:level=3", cache=cache, engine=engine)
    total = 30 * 29 // 2
    assert 0 < engine.pairs_done < total
    with SizeCache(path) as cache:
        resumed = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert resumed.stats.pairs_from_cache == engine.pairs_done
    assert resumed.stats.pairs_computed == total - engine.pairs_done
    assert resumed.stats.singles_computed == 0
    assert resumed.stats.self_pairs_computed == 30 - engine.self_pairs_done
    fresh = distance_matrix(items, "zstd:level=3", engine=LocalEngine(1))
    assert np.array_equal(resumed.distances, fresh.distances)


def test_two_runs_can_share_a_cache(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 12)
    path = tmp_path / "c.sqlite"
    results: list[np.ndarray] = []
    errors: list[BaseException] = []

    def run() -> None:
        try:
            with SizeCache(path) as cache:
                results.append(distance_matrix(items, "zstd:level=3", cache=cache).distances)
        except BaseException as error:
            errors.append(error)

    threads = [threading.Thread(target=run) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    assert all(np.array_equal(r, results[0]) for r in results)
    with SizeCache(path) as cache:
        assert len(cache) == 12 + 12 + 66


# --- only corruption sets a cache aside (issue 9, items 5 and 8) ------------------------------


def fresh(items: list[Item]) -> np.ndarray:
    return distance_matrix(items, "zstd:level=3", engine=LocalEngine(1)).distances


def set_aside(folder: Path) -> list[Path]:
    return [p for p in folder.iterdir() if ".unusable-" in p.name]


def messages(record: pytest.WarningsRecorder) -> list[str]:
    return [str(w.message) for w in record if issubclass(w.category, CacheWarning)]


def test_a_damaged_cache_is_set_aside_and_rebuilt(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 40, size=1500)
    path = tmp_path / "c.sqlite"
    with SizeCache(path) as cache:
        distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    data = bytearray(path.read_bytes())
    assert len(data) > 3 * 4096
    data[4096:] = b"\xa5" * (len(data) - 4096)  # every page but the header's
    path.write_bytes(bytes(data))
    with pytest.warns(CacheWarning, match="set aside") as record, SizeCache(path) as cache:
        dm = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert any("malformed" in m or "not a database" in m for m in messages(record))
    assert dm.stats.pairs_from_cache == 0 and np.array_equal(dm.distances, fresh(items))
    aside = [p for p in set_aside(tmp_path) if not p.name.endswith(("-wal", "-shm"))]
    assert len(aside) == 1 and aside[0].read_bytes() == bytes(data)
    with SizeCache(path) as cache:
        assert len(cache) == 40 + 40 + 40 * 39 // 2


def test_an_edited_size_is_detected_dropped_and_recomputed(
    tmp_path: Path, text_corpus: bytes
) -> None:
    items = text_items(text_corpus, 6)
    path = tmp_path / "c.sqlite"
    with SizeCache(path) as cache:
        first = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    with sqlite3.connect(path) as db:
        edited = db.execute(  # the pairs conditioned on one item: a user's casual edit
            "UPDATE sizes SET size = size + 300 WHERE method = 'concat' AND a != b "
            "AND a = (SELECT min(a) FROM sizes WHERE method = 'concat' AND a != b)"
        ).rowcount
    db.close()
    assert edited >= 1
    with pytest.warns(CacheWarning, match="do not match their checksums"), SizeCache(path) as c:
        again = distance_matrix(items, "zstd:level=3", cache=c, engine=LocalEngine(1))
    assert again.stats.pairs_computed == edited
    assert np.array_equal(again.distances, first.distances)
    with SizeCache(path) as cache:  # the damaged rows were replaced by good ones
        third = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert third.stats.pairs_computed == 0


@pytest.fixture
def lock_holder(tmp_path: Path) -> Iterator[Callable[[Path], sqlite3.Connection]]:
    """Another program holding a write transaction on a file, as `sqlite3 FILE 'BEGIN
    IMMEDIATE'` would; released when the test ends."""
    held: list[sqlite3.Connection] = []

    def hold(path: Path) -> sqlite3.Connection:
        db = sqlite3.connect(path, isolation_level=None)
        db.execute("BEGIN IMMEDIATE")
        held.append(db)
        return db

    yield hold
    for db in held:
        db.rollback()
        db.close()


def test_a_held_lock_is_waited_for_then_the_run_goes_on_without_storing(
    tmp_path: Path, text_corpus: bytes, lock_holder: Callable[[Path], sqlite3.Connection]
) -> None:
    items = text_items(text_corpus, 8)
    path = tmp_path / "c.sqlite"
    with SizeCache(path) as cache:
        distance_matrix(items[:5], "zstd:level=3", cache=cache, engine=LocalEngine(1))
    holder = lock_holder(path)
    waits: list[float] = []
    with (
        pytest.warns(CacheWarning) as record,
        SizeCache(path, busy_timeout=1, on_wait=waits.append) as cache,
    ):
        dm = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert waits and max(waits) < 1  # it told the caller while it waited
    assert dm.stats.pairs_from_cache == 10 and np.array_equal(dm.distances, fresh(items))
    said = messages(record)
    assert any("stayed locked by another program for 1 s" in m for m in said)
    assert any(re.search(r"\d+ sizes computed in this run were not stored", m) for m in said)
    assert not set_aside(tmp_path)
    holder.rollback()
    with SizeCache(path) as cache:  # still the same healthy cache, and writable again
        rerun = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
        assert rerun.stats.pairs_from_cache == 10 and rerun.stats.pairs_computed == 18
        assert len(cache) == 8 + 8 + 28


def test_without_a_callback_a_wait_is_announced_once(
    tmp_path: Path, text_corpus: bytes, lock_holder: Callable[[Path], sqlite3.Connection]
) -> None:
    path = tmp_path / "c.sqlite"
    SizeCache(path).close()
    lock_holder(path)
    with pytest.warns(CacheWarning) as record, SizeCache(path, busy_timeout=1) as cache:
        cache.put_many("zstd", "single", [(b"a" * 16, b"", 10)])
    waiting = [m for m in messages(record) if "waiting up to 1 s" in m]
    assert len(waiting) == 1 and "is locked by another program" in waiting[0]


def test_a_run_still_connected_follows_a_cache_set_aside_by_another(
    tmp_path: Path, text_corpus: bytes
) -> None:
    path = tmp_path / "c.sqlite"
    with SizeCache(path) as first:
        first.put_many("zstd", "single", [(b"a" * 16, b"", 10)])
        for suffix in ("", "-wal", "-shm"):  # as another run does on finding it damaged
            part = Path(f"{path}{suffix}")
            if part.exists():
                part.rename(tmp_path / f"aside{suffix}")
        first.put_many("zstd", "single", [(b"b" * 16, b"", 20)])
        assert first.get_many("zstd", "single", [(b"a" * 16, b""), (b"b" * 16, b"")]) == {
            (b"b" * 16, b""): 20
        }
    with sqlite3.connect(tmp_path / "aside") as db:
        assert db.execute("SELECT count(*) FROM sizes").fetchone()[0] == 1
    db.close()


# --- a cache that cannot be written: full disk, read-only (issue 9, items 5 and 6) -------------


@pytest.fixture
def tmpfs(tmp_path: Path) -> Iterator[Path]:
    """A 1 MiB tmpfs mounted for the test (needs root and a kernel that allows it)."""
    where = tmp_path / "mnt"
    where.mkdir()
    if os.geteuid() != 0 or shutil.which("mount") is None:
        pytest.skip("mounting a small tmpfs needs root and mount(8)")
    done = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(where)], capture_output=True
    )
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.decode().strip()}")
    yield where
    subprocess.run(["umount", "-l", str(where)], check=True)


def fill(folder: Path) -> None:
    """Write a file until the file system is full."""
    with (
        (folder / "filler").open("wb", buffering=0) as file,
        pytest.raises(OSError, match="No space left"),
    ):
        while True:
            file.write(b"\0" * 4096)


def read_only(folder: Path) -> None:
    subprocess.run(["mount", "-o", "remount,ro", str(folder)], check=True)


@pytest.fixture
def read_only_file() -> Iterator[Callable[[Path], None]]:
    """Makes one file read-only, its folder staying writable, by a read-only bind mount of the
    file on itself (root ignores permission bits; needs root and a kernel that allows it)."""
    mounted: list[Path] = []

    def make(path: Path) -> None:
        if os.geteuid() != 0 or shutil.which("mount") is None:
            pytest.skip("a read-only bind mount needs root and mount(8)")
        for argv in (["--bind", str(path), str(path)], ["-o", "remount,bind,ro", str(path)]):
            done = subprocess.run(["mount", *argv], capture_output=True)
            if done.returncode != 0:
                pytest.skip(f"cannot bind-mount here: {done.stderr.decode().strip()}")
            mounted.append(path)

    yield make
    for path in mounted[:1]:
        subprocess.run(["umount", "-l", str(path)], check=True)


@pytest.mark.parametrize("when", ["before opening", "while open"])
def test_a_full_disk_uses_what_the_cache_holds_and_warns(
    tmpfs: Path, text_corpus: bytes, when: str
) -> None:
    items = text_items(text_corpus, 8)
    path = tmpfs / "c.sqlite"
    with SizeCache(path) as cache:
        distance_matrix(items[:5], "zstd:level=3", cache=cache, engine=LocalEngine(1))
    if when == "before opening":
        fill(tmpfs)
    with pytest.warns(CacheWarning) as record, SizeCache(path) as cache:
        if when == "while open":
            fill(tmpfs)
        dm = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert dm.stats.pairs_from_cache == 10 and np.array_equal(dm.distances, fresh(items))
    assert messages(record) == [  # 3 singles, 3 self-pairs and 18 pairs were new
        f"cache {path}: the disk is full; using the sizes it holds, new sizes are not stored",
        f"cache {path}: 24 sizes computed in this run were not stored; a rerun computes them again",
    ]
    assert not set_aside(tmpfs)
    (tmpfs / "filler").unlink()
    with SizeCache(path) as cache:
        assert len(cache) == 5 + 5 + 10


@pytest.mark.parametrize("left", ["closed cleanly", "with its WAL, as a killed run leaves it"])
def test_a_read_only_cache_gives_every_size_it_holds(
    tmpfs: Path, text_corpus: bytes, left: str
) -> None:
    items = text_items(text_corpus, 8)
    path = tmpfs / "c.sqlite"
    cache = SizeCache(path)
    distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    if left == "closed cleanly":
        cache.close()
    else:  # copy the database with its -wal and -shm files while it is open
        for suffix in ("", "-wal", "-shm"):
            shutil.copy(f"{path}{suffix}", tmpfs / f"k.sqlite{suffix}")
        assert (tmpfs / "k.sqlite-wal").stat().st_size > 0
        cache.close()
        path = tmpfs / "k.sqlite"
    read_only(tmpfs)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # nothing to store, nothing to say
        with SizeCache(path) as cache:
            again = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert again.stats.pairs_computed == 0 and again.stats.singles_computed == 0
    assert np.array_equal(again.distances, fresh(items))
    more = [*items, Item("new", text_corpus[40_000:43_000], "test")]
    with pytest.warns(CacheWarning) as record, SizeCache(path) as cache:
        grown = distance_matrix(more, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert messages(record) == [
        f"cache {path}: it is read-only; using the sizes it holds, new sizes are not stored",
        f"cache {path}: 10 sizes computed in this run were not stored; a rerun computes them again",
    ]
    assert grown.stats.pairs_from_cache == 28 and grown.stats.pairs_computed == 8
    assert np.array_equal(grown.distances, fresh(more))


# --- only kinpress's own files are used (issue 9, item 7) -------------------------------------

# What the first versions wrote (schema 1), as they wrote it: no application id, no checksums.
SCHEMA_1 = """
PRAGMA journal_mode=WAL;
CREATE TABLE IF NOT EXISTS sizes (
    compressor TEXT NOT NULL, method TEXT NOT NULL, a BLOB NOT NULL, b BLOB NOT NULL,
    size INTEGER NOT NULL, PRIMARY KEY (compressor, method, a, b)
) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS choices (key TEXT PRIMARY KEY, value TEXT NOT NULL);
INSERT OR IGNORE INTO meta VALUES ('schema', '1');
"""


def schema_1_cache(path: Path, items: list[Item]) -> None:
    """A cache of schema 1 holding the right sizes of `items` (taken from a present one)."""
    present = path.with_name("present.sqlite")
    with SizeCache(present) as cache:
        distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    with sqlite3.connect(present) as source:
        rows = source.execute("SELECT compressor, method, a, b, size FROM sizes").fetchall()
        choices = [("auto:x", "zstd:level=3")]
    source.close()
    present.unlink()
    db = sqlite3.connect(path, isolation_level=None)
    db.executescript(SCHEMA_1)
    db.executemany("INSERT INTO sizes VALUES (?, ?, ?, ?, ?)", rows)
    db.executemany("INSERT INTO choices VALUES (?, ?)", choices)
    db.close()


def test_a_schema_1_cache_is_upgraded_in_place(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 6)
    path = tmp_path / "c.sqlite"
    schema_1_cache(path, items)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with SizeCache(path) as cache:
            dm = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
            assert cache.get_choice("auto:x") == "zstd:level=3"
    assert dm.stats.pairs_computed == 0 and dm.stats.singles_computed == 0
    assert np.array_equal(dm.distances, fresh(items))
    with sqlite3.connect(path) as db:
        assert db.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
        assert db.execute("SELECT value FROM meta WHERE key = 'schema'").fetchone() == ("2",)
        assert db.execute("SELECT count(*) FROM sizes WHERE checksum = 0").fetchone() == (0,)
    db.close()
    assert not set_aside(tmp_path)


def test_the_application_id_is_where_the_sqlite_file_format_puts_it(tmp_path: Path) -> None:
    path = tmp_path / "c.sqlite"
    SizeCache(path).close()
    header = path.read_bytes()[:100]
    # The SQLite file format (sqlite.org/fileformat.html, "The Database Header"): the header
    # string "SQLite format 3\0" at offset 0 and the application id, a 4-byte big-endian
    # integer, at offset 68 (the offset recalled from memory).
    assert header[:16] == b"SQLite format 3\x00"
    assert int.from_bytes(header[68:72], "big") == APPLICATION_ID == 0x6B696E70


def foreign_files(folder: Path) -> list[Path]:
    """Files of other programs: SQLite (WAL, with and without an application id, one with
    tables named like kinpress's) and plain text."""
    made = []
    for name, script in [
        ("history.sqlite", "PRAGMA journal_mode=WAL; CREATE TABLE visits (url TEXT, n INT);"),
        ("map.gpkg", "PRAGMA application_id = 1196444487; CREATE TABLE features (g BLOB);"),
        ("lookalike.db", "CREATE TABLE sizes (k TEXT); CREATE TABLE meta (key, value);"),
    ]:
        db = sqlite3.connect(folder / name)
        db.executescript(script + "INSERT INTO meta VALUES ('schema', '1');" * ("meta" in script))
        db.close()
        made.append(folder / name)
    (folder / "notes.txt").write_text("not a database\n" * 100)
    made.append(folder / "notes.txt")
    return made


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    return {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in sorted(folder.iterdir())}


def test_another_programs_file_is_refused_and_left_byte_for_byte_unchanged(
    tmp_path: Path,
) -> None:
    folder = tmp_path / "theirs"
    folder.mkdir()
    files = foreign_files(folder)
    before = snapshot(folder)
    for path in files:
        with pytest.raises(CacheError, match=r"not a kinpress cache \((an|not an) SQLite file"):
            SizeCache(path)
    assert snapshot(folder) == before  # not one byte, no -wal or -shm left beside them


def test_an_unrecognised_file_at_the_default_location_is_set_aside(
    tmp_path: Path, text_corpus: bytes, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "home"))
    path = default_cache_path()
    assert path.is_relative_to(tmp_path)
    path.parent.mkdir(parents=True)
    path.write_bytes(b"damaged beyond recognition" * 50)
    with pytest.warns(CacheWarning, match="set aside"), SizeCache(path) as cache:
        dm = distance_matrix(
            text_items(text_corpus, 3), "zstd:level=3", cache=cache, engine=LocalEngine(1)
        )
    assert dm.stats.pairs_computed == 3
    aside = set_aside(path.parent)
    assert len(aside) == 1 and aside[0].read_bytes().startswith(b"damaged beyond")


def test_a_read_only_file_in_a_writable_folder_is_read_and_not_written(
    tmp_path: Path, text_corpus: bytes, read_only_file: Callable[[Path], None]
) -> None:
    items = text_items(text_corpus, 6)
    path = tmp_path / "c.sqlite"
    with SizeCache(path) as cache:
        distance_matrix(items[:4], "zstd:level=3", cache=cache, engine=LocalEngine(1))
    before = path.read_bytes()
    read_only_file(path)
    with pytest.warns(CacheWarning) as record, SizeCache(path) as cache:
        dm = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert dm.stats.pairs_from_cache == 6 and np.array_equal(dm.distances, fresh(items))
    assert messages(record) == [  # 2 singles, 2 self-pairs and 9 pairs were new
        f"cache {path}: it is read-only; using the sizes it holds, new sizes are not stored",
        f"cache {path}: 13 sizes computed in this run were not stored; a rerun computes them again",
    ]
    assert path.read_bytes() == before and not set_aside(tmp_path)


def test_a_read_only_schema_1_cache_still_gives_its_sizes(tmpfs: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 6)
    path = tmpfs / "c.sqlite"
    schema_1_cache(path, items)
    read_only(tmpfs)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with SizeCache(path) as cache:
            dm = distance_matrix(items, "zstd:level=3", cache=cache, engine=LocalEngine(1))
    assert dm.stats.pairs_computed == 0 and dm.stats.singles_computed == 0
    assert np.array_equal(dm.distances, fresh(items))


# --- the same cases through the command line --------------------------------------------------


def kinpress(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, list[str]]:
    """Exit code, standard output and the lines on standard error of one command."""
    code = main(list(argv))
    out, err = capsys.readouterr()
    lines = err.splitlines()
    assert all(line.startswith("kinpress: ") for line in lines), err  # one line each, no trace
    return code, out, lines


@pytest.fixture
def matrix_of(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> Callable[..., tuple[int, str, list[str]]]:
    """`kinpress matrix` of four text files with a cache, and the matrix computed without."""

    def run(*cache: str) -> tuple[int, str, list[str]]:
        return kinpress(capsys, "matrix", str(text_folder), "-c", "zlib:level=6", *cache)

    return run


SUMMARY = re.compile(r"^kinpress: 4 items, .*: (\d+) pairs computed, (\d+) from cache")


def summary(lines: list[str]) -> tuple[int, int]:
    found = [m.groups() for line in lines if (m := SUMMARY.match(line))]
    assert len(found) == 1, lines
    return int(found[0][0]), int(found[0][1])


def test_command_line_refuses_another_programs_file_with_exit_2(
    matrix_of: Callable[..., tuple[int, str, list[str]]], tmp_path: Path
) -> None:
    folder = tmp_path / "theirs"
    folder.mkdir()
    for path in foreign_files(folder):
        before = snapshot(folder)
        code, out, lines = matrix_of("--cache", str(path))
        assert code == 2 and out == ""
        assert len(lines) == 1 and re.fullmatch(
            rf"kinpress: error: {re.escape(str(path))}: not a kinpress cache \((an|not an) "
            r"SQLite file[^()]*\); left untouched; choose another file",
            lines[0],
        )
        assert snapshot(folder) == before


def test_command_line_recomputes_an_edited_size_and_says_so(
    matrix_of: Callable[..., tuple[int, str, list[str]]], tmp_path: Path
) -> None:
    path = tmp_path / "c.sqlite"
    expected = matrix_of("--no-cache")[1]
    matrix_of("--cache", str(path))
    with sqlite3.connect(path) as db:
        db.execute("UPDATE sizes SET size = 1 WHERE a != b AND method = 'concat'")
    db.close()
    code, out, lines = matrix_of("--cache", str(path))
    assert code == 0 and out == expected
    edited = r"kinpress: warning: cache .*: 6 stored sizes do not match their checksums"
    assert any(re.match(edited, line) for line in lines)
    assert summary(lines) == (6, 0)
    assert summary(matrix_of("--cache", str(path))[2]) == (0, 6)


def test_command_line_waits_for_a_lock_held_briefly_and_says_why(
    matrix_of: Callable[..., tuple[int, str, list[str]]], tmp_path: Path
) -> None:
    path = tmp_path / "c.sqlite"
    expected = matrix_of("--no-cache")[1]
    SizeCache(path).close()
    holder = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
    holder.execute("BEGIN IMMEDIATE")
    release = threading.Timer(1.5, holder.rollback)
    release.start()
    try:
        code, out, lines = matrix_of("--cache", str(path))
    finally:
        release.join()
        holder.close()
    assert code == 0 and out == expected
    waiting = f"kinpress: warning: cache {path} is locked by another program; waiting up to 60 s"
    assert waiting in lines
    assert not any("not stored" in line for line in lines)
    assert summary(matrix_of("--cache", str(path))[2]) == (0, 6)  # it waited, then stored


def test_command_line_on_a_full_disk_uses_the_cache_and_warns(
    matrix_of: Callable[..., tuple[int, str, list[str]]], tmpfs: Path, text_folder: Path
) -> None:
    path = tmpfs / "c.sqlite"
    expected = matrix_of("--no-cache")[1]
    (text_folder / "d.txt").rename(text_folder.parent / "d.txt")
    matrix_of("--cache", str(path))  # a, b and c
    (text_folder.parent / "d.txt").rename(text_folder / "d.txt")
    fill(tmpfs)
    code, out, lines = matrix_of("--cache", str(path))
    assert code == 0 and out == expected
    assert summary(lines) == (3, 3)
    full = f"kinpress: warning: cache {path}: the disk is full; using the sizes it holds, new "
    assert full + "sizes are not stored" in lines
    assert not set_aside(tmpfs)


def test_command_line_reads_a_read_only_cache(
    matrix_of: Callable[..., tuple[int, str, list[str]]], tmpfs: Path
) -> None:
    path = tmpfs / "c.sqlite"
    expected = matrix_of("--cache", str(path))[1]
    read_only(tmpfs)
    code, out, lines = matrix_of("--cache", str(path))
    assert code == 0 and out == expected
    assert summary(lines) == (0, 6) and len(lines) == 1
    code, out, lines = matrix_of("--cache", str(tmpfs / "sub" / "new.sqlite"))
    assert code == 0 and out == expected
    without = rf"kinpress: warning: cache {tmpfs}/sub/new.sqlite .*; going on without it"
    assert any(re.match(without, line) for line in lines), lines


def test_an_edited_choice_is_not_trusted(tmp_path: Path) -> None:
    path = tmp_path / "c.sqlite"
    with SizeCache(path) as cache:
        cache.put_choice("auto:inputs", "zstd:level=19")
    with sqlite3.connect(path) as db:
        db.execute("UPDATE choices SET value = 'bz2:level=9'")
    db.close()
    with pytest.warns(CacheWarning, match="choice does not match"), SizeCache(path) as cache:
        assert cache.get_choice("auto:inputs") is None
        cache.put_choice("auto:inputs", "zstd:level=19")
    with SizeCache(path) as cache:
        assert cache.get_choice("auto:inputs") == "zstd:level=19"


def test_a_folder_is_refused(tmp_path: Path) -> None:
    with pytest.raises(CacheError, match=r"not a kinpress cache \(a folder\)"):
        SizeCache(tmp_path)

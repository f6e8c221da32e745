"""The size cache: reruns, additions, resumption, sharing and corruption."""

from __future__ import annotations

import sqlite3
import threading
from collections.abc import Iterator, Sequence
from pathlib import Path

import numpy as np
import pytest

from kinpress import Item, LocalEngine, SizeCache, distance_matrix
from kinpress.cache import CacheWarning
from kinpress.engine import SizeJob, Tile


def text_items(text: bytes, n: int, size: int = 3000) -> list[Item]:
    return [Item(f"t{k}", text[k * 2500 : k * 2500 + size], "test") for k in range(n)]


def test_rerun_computes_nothing_new(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 8)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        first = distance_matrix(items, "zstd:level=3", cache=cache, jobs=1)
        again = distance_matrix(items, "zstd:level=3", cache=cache, jobs=1)
    assert first.stats.pairs_computed == 28 and first.stats.pairs_from_cache == 0
    assert again.stats.pairs_computed == 0 and again.stats.pairs_from_cache == 28
    assert again.stats.singles_computed == 0 and again.stats.self_pairs_computed == 0
    assert again.stats.bytes_compressed == 0
    assert np.array_equal(first.distances, again.distances)


def test_adding_one_item_computes_only_its_pairs(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 10)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        distance_matrix(items[:9], "zstd:level=3", cache=cache, jobs=1)
        grown = distance_matrix(items, "zstd:level=3", cache=cache, jobs=1)
    assert grown.stats.pairs_computed == 9
    assert grown.stats.pairs_from_cache == 36
    assert grown.stats.singles_computed == 1


def test_other_settings_do_not_reuse_sizes(tmp_path: Path, text_corpus: bytes) -> None:
    items = text_items(text_corpus, 4)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        distance_matrix(items, "zstd:level=3", cache=cache, jobs=1)
        other = distance_matrix(items, "zstd:level=4", cache=cache, jobs=1)
        primed = distance_matrix(items, "zstd:level=3", conditional="primed", cache=cache, jobs=1)
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
        resumed = distance_matrix(items, "zstd:level=3", cache=cache, jobs=1)
    assert resumed.stats.pairs_from_cache == engine.pairs_done
    assert resumed.stats.pairs_computed == total - engine.pairs_done
    assert resumed.stats.singles_computed == 0
    assert resumed.stats.self_pairs_computed == 30 - engine.self_pairs_done
    fresh = distance_matrix(items, "zstd:level=3", jobs=1)
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


def test_corrupt_cache_is_set_aside_and_rebuilt(tmp_path: Path, text_corpus: bytes) -> None:
    path = tmp_path / "c.sqlite"
    path.write_bytes(b"this is not a database" * 100)
    with pytest.warns(CacheWarning, match="set aside"), SizeCache(path) as cache:
        dm = distance_matrix(text_items(text_corpus, 3), "zstd:level=3", cache=cache, jobs=1)
    assert dm.stats.pairs_computed == 3
    aside = [p for p in tmp_path.iterdir() if ".unusable-" in p.name]
    assert len(aside) == 1 and aside[0].read_bytes().startswith(b"this is not")
    assert sqlite3.connect(path).execute("SELECT count(*) FROM sizes").fetchone()[0] == 3 + 3 + 3

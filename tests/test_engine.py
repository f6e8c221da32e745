"""The local engine: threads and worker processes give the same sizes, and failures surface."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from kinpress import LocalEngine
from kinpress.engine import SizeJob, Tile, plan_tiles, run_tile
from kinpress.engine.processes import WorkerError, WorkerProcesses


def test_plan_tiles_covers_every_pair_once_and_balances_work() -> None:
    items = [bytes(100 + k) for k in range(40)]
    first, second = np.triu_indices(40, 1)
    tiles = plan_tiles(items, first.tolist(), second.tolist(), workers=2)
    assert len(tiles) >= 8
    covered = [(f, s) for t in tiles for f, s in zip(t.first, t.second, strict=True)]
    assert covered == list(zip(first.tolist(), second.tolist(), strict=True))


def test_a_prefix_kept_for_its_run_is_counted_once_per_run() -> None:
    # 2 corpora of 1 MB, each against 100 items of 1 kB: by both items' bytes each pair
    # weighs a whole corpus, so a tile of 64 kB holds one pair; with the prefix kept for its
    # run, a corpus weighs once and its run stays in a few tiles.
    items = [bytes(1 << 20), bytes(1 << 20), *(bytes(1000) for _ in range(100))]
    first = [0] * 100 + [1] * 100
    second = list(range(2, 102)) * 2
    whole = plan_tiles(items, first, second, workers=1, target_bytes=64 << 10)
    kept = plan_tiles(items, first, second, workers=1, target_bytes=64 << 10, prefix_once=True)
    assert len(whole) == 200
    assert 4 <= len(kept) <= 8
    for tiles in (whole, kept):
        covered = [(f, s) for t in tiles for f, s in zip(t.first, t.second, strict=True)]
        assert covered == list(zip(first, second, strict=True))


def test_a_run_is_cut_only_where_its_items_pass_a_tile() -> None:
    # Every tile that starts inside a run prepares its corpus again. One corpus of 1 MB and 100
    # items of 1 kB on 2 workers: the items fit one tile, so the run stays whole (it was cut
    # right after its first pair: the corpus alone filled a tile); 3 MB of items are cut into
    # about as many pieces as a tile's bytes need, each piece its own tile.
    items = [
        bytes(1 << 20),
        *(bytes(1000) for _ in range(100)),
        *(bytes(30_000) for _ in range(100)),
    ]
    small = plan_tiles(items, [0] * 100, list(range(1, 101)), workers=2, prefix_once=True)
    assert small == [Tile((0,) * 100, tuple(range(1, 101)))]
    big = plan_tiles(items, [0] * 100, list(range(101, 201)), workers=2, prefix_once=True)
    per_tile = (1 << 20) + 3_000_000  # the plan's bytes, over 4 tiles a worker
    assert 2 <= len(big) <= 3_000_000 // (per_tile // 8) + 1
    assert [s for t in big for s in t.second] == list(range(101, 201))
    # several small runs share a tile, cut only between runs
    firsts = [k for k in range(10) for _ in range(10)]
    runs = plan_tiles(items, firsts, list(range(1, 101)), workers=2, prefix_once=True)
    assert all(t.first[0] != u.first[-1] for t, u in zip(runs[1:], runs, strict=False))
    assert [f for t in runs for f in t.first] == firsts


def test_worker_processes_agree_with_running_tiles_here(text_corpus: bytes) -> None:
    items = [text_corpus[k * 3000 : k * 3000 + 2000] for k in range(8)]
    job = SizeJob("ppmd:order=6,memory=16")
    tiles = [Tile((0, 1, 2), (3, 4, 5)), Tile((6,), (7,)), Tile((0, 1))]
    with WorkerProcesses(2, items) as workers:
        got = dict(workers.run(job, tiles))
    for tile in tiles:
        assert np.array_equal(got[tile], run_tile(items, job, tile))


def test_a_failing_tile_raises_instead_of_hanging() -> None:
    with WorkerProcesses(1, [b"abc"]) as workers, pytest.raises(WorkerError, match="IndexError"):
        list(workers.run(SizeJob("ppmd:order=6,memory=16"), [Tile((5,))]))


def test_a_worker_that_dies_raises_instead_of_hanging() -> None:
    workers = WorkerProcesses(1, [b"abc" * 1000])
    try:
        os.kill(workers._procs[0].pid, signal.SIGKILL)
        with pytest.raises(WorkerError, match="ended unexpectedly"):
            list(workers.run(SizeJob("ppmd:order=6,memory=16"), [Tile((0,))] * 3))
    finally:
        workers.close()


def test_processes_work_from_a_script_without_a_main_guard(tmp_path: Path) -> None:
    # multiprocessing's spawn would re-run such a script in every worker and hang.
    script = tmp_path / "plain.py"
    script.write_text(
        "import kinpress\n"
        "items = [kinpress.Item(f'i{k}', bytes([k]) * 3000 + b'x' * k, 't') for k in range(6)]\n"
        "engine = kinpress.LocalEngine(2)\n"
        "dm = kinpress.distance_matrix(items, 'ppmd:order=6,memory=16', engine=engine)\n"
        "print(len(dm))\n"
    )
    done = subprocess.run(
        [sys.executable, str(script)], capture_output=True, text=True, timeout=120
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "6"
    assert "Warning" not in done.stderr


def test_threads_and_serial_give_identical_sizes(text_corpus: bytes) -> None:
    items = [text_corpus[k * 3000 : k * 3000 + 2500] for k in range(10)]
    first, second = np.triu_indices(10, 1)
    tiles = plan_tiles(items, first.tolist(), second.tolist(), workers=2)
    job = SizeJob("zstd:level=3")
    threaded = dict(LocalEngine(2).run(items, job, tiles))
    serial = dict(LocalEngine(1).run(items, job, tiles))
    assert all(np.array_equal(threaded[t], serial[t]) for t in tiles)


PPMD_JOB = SizeJob("ppmd:order=6,memory=16")  # run in worker processes (it holds the GIL)
PPMD_TILES = [Tile((0, 1, 2), (3, 4, 5)), Tile((1,)), Tile((4,))]


def _six_items(text_corpus: bytes) -> list[bytes]:
    return [text_corpus[k * 3000 : k * 3000 + 2000] for k in range(6)]


def _as_here(got: dict[Tile, np.ndarray], items: list[bytes]) -> bool:
    """Whether the sizes of every PPMD_TILES tile are those run_tile gives here."""
    return all(np.array_equal(got[t], run_tile(items, PPMD_JOB, t)) for t in PPMD_TILES)


def test_a_local_engine_keeps_its_worker_processes_from_run_to_run(text_corpus: bytes) -> None:
    # A classification runs about ten phases on one engine; starting the workers anew for each
    # took a third of a second a phase (benchmarks/bench_engine_runs.py).
    first = _six_items(text_corpus)
    second = [text_corpus[k * 5000 + 7 : k * 5000 + 1500] for k in range(6)]
    job, tiles = PPMD_JOB, PPMD_TILES
    with LocalEngine(2) as engine:
        got = dict(engine.run(first, job, tiles))
        assert engine._workers is not None
        workers, pids = engine._workers, engine._workers.pids
        again = dict(engine.run(second, job, tiles))  # other items, same workers
        assert engine._workers is workers and workers.pids == pids
        # idle, they hold no items: a tile asked of them directly finds none
        with pytest.raises(WorkerError, match="IndexError"):
            list(workers.run(job, [Tile((0,))]))
    for tile in tiles:
        assert np.array_equal(got[tile], run_tile(first, job, tile))
        assert np.array_equal(again[tile], run_tile(second, job, tile))
    assert all(proc.returncode is not None for proc in workers._procs)  # ended with the block


def test_a_run_left_early_ends_the_kept_workers_and_the_next_starts_afresh(
    text_corpus: bytes,
) -> None:
    items = _six_items(text_corpus)
    job, tiles = PPMD_JOB, PPMD_TILES
    engine = LocalEngine(2)
    run = engine.run(items, job, tiles)
    next(run)  # answers of the other tiles still owed
    workers = engine._workers
    assert workers is not None
    run.close()
    assert engine._workers is None
    assert all(proc.returncode is not None for proc in workers._procs)
    got = dict(engine.run(items, job, tiles))
    assert engine._workers is not None and engine._workers is not workers
    assert _as_here(got, items)
    kept = engine._workers
    del engine  # collected: its workers end too
    assert all(proc.returncode is not None for proc in kept._procs)


def test_a_dead_kept_worker_raises_then_is_replaced(text_corpus: bytes) -> None:
    items = _six_items(text_corpus)
    job, tiles = PPMD_JOB, PPMD_TILES
    with LocalEngine(2) as engine:
        dict(engine.run(items, job, tiles))
        assert engine._workers is not None
        os.kill(engine._workers.pids[0], signal.SIGKILL)
        engine._workers._procs[0].wait()
        with pytest.raises(WorkerError):
            dict(engine.run(items, job, tiles))
        assert engine._workers is None
        got = dict(engine.run(items, job, tiles))
    assert _as_here(got, items)


def test_an_engine_with_kept_workers_copies_pickles_and_clones(text_corpus: bytes) -> None:
    # cross-validation clones an estimator and its parameters, the engine among them (deepcopy):
    # a copy carries the worker count, and starts workers of its own when it first needs them.
    import copy
    import pickle

    from sklearn.base import clone

    from kinpress import CompressionClassifier

    items = _six_items(text_corpus)
    job, tiles = PPMD_JOB, PPMD_TILES
    with LocalEngine(2) as engine:
        dict(engine.run(items, job, tiles))
        assert engine._workers is not None
        for twin in (copy.deepcopy(engine), pickle.loads(pickle.dumps(engine))):
            assert twin.jobs == 2 and twin._workers is None
            with twin:
                got = dict(twin.run(items, job, tiles))
            assert _as_here(got, items)
        model = clone(CompressionClassifier(engine=engine))
        assert isinstance(model.engine, LocalEngine) and model.engine is not engine


def test_a_run_while_another_holds_the_kept_workers_gets_its_own(text_corpus: bytes) -> None:
    items = _six_items(text_corpus)
    job, tiles = PPMD_JOB, PPMD_TILES
    with LocalEngine(2) as engine:
        first = engine.run(items, job, tiles)
        got = dict([next(first)])  # the kept workers are this run's until it ends
        kept = engine._workers
        assert kept is not None
        other = dict(engine.run(items, job, tiles))  # on processes of its own, then ended
        assert engine._workers is kept
        got.update(first)
        assert engine._workers is kept
    for run in (got, other):
        assert _as_here(run, items)

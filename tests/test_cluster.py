"""The Dask engine: the same tiles on a cluster give the same matrix, cache and tree as locally.

A real Dask cluster on this machine (distributed.LocalCluster, worker processes that import
kinpress like remote workers do) stands in for remote machines; Dask is the reference scheduler.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
import warnings
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from conftest import DATASETS, generated_text
from kinpress import DaskEngine, Item, LocalEngine, SizeCache, distance_matrix
from kinpress.cli import main
from kinpress.engine import ClusterError, SizeJob, plan_tiles

distributed = pytest.importorskip("distributed", reason="the dask extra is not installed")


@pytest.fixture(scope="module")
def cluster() -> Iterator[str]:
    """A two-worker cluster of one thread each, as for compressors that hold the GIL."""
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
    ) as local:
        yield str(local.scheduler_address)


def text_items(n: int) -> list[Item]:
    return [Item(f"t{k}", generated_text(k, lines=80), "generated") for k in range(n)]


def dna_items() -> list[Item]:
    rng = np.random.default_rng(7)
    base = rng.choice(list(b"ACGT"), 3000).astype(np.uint8)
    items = []
    for k in range(5):
        copy = base.copy()
        spots = rng.choice(copy.size, 100 * (k + 1), replace=False)
        copy[spots] = rng.choice(list(b"ACGT"), spots.size)
        items.append(Item(f"s{k}", copy.tobytes(), "generated", nucleotide=True))
    return items


@pytest.mark.parametrize(
    ("spec", "conditional", "strand"),
    [
        ("zstd:level=9", "concat", "one"),
        ("zstd:level=19", "primed", "one"),
        ("zlib:level=9", "concat", "both"),
        ("ppmd:order=6", "concat", "one"),
    ],
)
def test_a_cluster_gives_exactly_the_local_matrix(
    cluster: str, spec: str, conditional: str, strand: str
) -> None:
    items = dna_items() if strand == "both" else text_items(9)
    local = distance_matrix(
        items, spec, conditional=conditional, strand=strand, engine=LocalEngine(2)
    )
    with DaskEngine(cluster) as engine:
        assert engine.jobs == 2
        remote = distance_matrix(items, spec, conditional=conditional, strand=strand, engine=engine)
    assert np.array_equal(remote.distances, local.distances)
    assert np.array_equal(remote.sizes, local.sizes)
    assert np.array_equal(remote.self_distances, local.self_distances)
    assert remote.stats.pairs_computed == len(items) * (len(items) - 1) // 2
    assert remote.stats.bytes_compressed == local.stats.bytes_compressed


def test_a_cluster_run_fills_the_cache_and_an_added_item_costs_n_pairs(
    cluster: str, tmp_path: Path
) -> None:
    items = text_items(10)
    with SizeCache(tmp_path / "c.sqlite") as cache, DaskEngine(cluster) as engine:
        first = distance_matrix(items[:9], "zstd:level=9", engine=engine, cache=cache)
        again = distance_matrix(items[:9], "zstd:level=9", engine=engine, cache=cache)
        grown = distance_matrix(items, "zstd:level=9", engine=engine, cache=cache)
    assert first.stats.pairs_computed == 36
    assert again.stats.pairs_computed == 0 and again.stats.pairs_from_cache == 36
    assert grown.stats.pairs_computed == 9 and grown.stats.pairs_from_cache == 36
    # The cache a cluster filled serves a local run just the same.
    with SizeCache(tmp_path / "c.sqlite") as cache:
        local = distance_matrix(items, "zstd:level=9", engine=LocalEngine(1), cache=cache)
    assert local.stats.pairs_computed == 0
    assert np.array_equal(local.distances, grown.distances)


def test_stopping_early_cancels_the_tasks_still_queued(cluster: str) -> None:
    data = [item.data for item in text_items(12)]
    first, second = np.triu_indices(len(data), k=1)
    with DaskEngine(cluster) as engine:
        tiles = plan_tiles(data, first.tolist(), second.tolist(), engine.jobs, target_bytes=4096)
        assert len(tiles) > 8
        results = engine.run(data, SizeJob("zstd:level=3"), tiles)
        tile, sizes = next(results)
        assert len(sizes) == len(tile.first) and (sizes > 0).all()
        results.close()  # as an interrupted run does
        # Nothing of the stopped run is left on the scheduler once it has taken the cancellation.
        client = engine.client
        deadline = time.monotonic() + 30
        while left := client.run_on_scheduler(lambda dask_scheduler: list(dask_scheduler.tasks)):
            assert time.monotonic() < deadline, f"tasks left on the scheduler: {left}"
            time.sleep(0.1)


def _set_version(version: str) -> None:
    import kinpress._version

    kinpress._version.__version__ = version


def _hide_kinpress(hidden: bool) -> None:
    """On a worker: make the engine's module unimportable, as on a worker without kinpress."""
    if hidden:
        sys.modules["hidden kinpress engine"] = sys.modules["kinpress.engine.cluster"]
        sys.modules["kinpress.engine.cluster"] = None  # type: ignore[assignment]
    else:
        sys.modules["kinpress.engine.cluster"] = sys.modules.pop("hidden kinpress engine")


def test_workers_with_other_versions_or_without_kinpress_are_refused(cluster: str) -> None:
    import kinpress._version

    here = kinpress._version.__version__
    with DaskEngine(cluster) as engine:
        client = engine.client
        client.run(_set_version, "9.9.9")
        try:
            with pytest.raises(ClusterError, match=r"has kinpress 9\.9\.9, zstd:level=3@libzstd"):
                distance_matrix(text_items(4), "zstd:level=3", engine=engine)
        finally:
            client.run(_set_version, here)
        client.run(_hide_kinpress, True)
        try:
            with pytest.raises(ClusterError, match="cannot run kinpress"):
                distance_matrix(text_items(4), "zstd:level=3", engine=engine)
        finally:
            client.run(_hide_kinpress, False)
        distance_matrix(text_items(4), "zstd:level=3", engine=engine)  # all well again


def test_a_compressor_holding_the_gil_on_threaded_workers_warns() -> None:
    with (
        distributed.LocalCluster(
            n_workers=1, threads_per_worker=2, processes=False, dashboard_address=":0"
        ) as threaded,
        DaskEngine(threaded.scheduler_address) as engine,
    ):
        with pytest.warns(UserWarning, match="--nthreads 1"):
            distance_matrix(text_items(4), "ppmd:order=4", engine=engine)
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            distance_matrix(text_items(4), "zstd:level=3", engine=engine)


def test_an_unreachable_scheduler_is_a_clear_error() -> None:
    with pytest.raises(
        ClusterError, match=r"cannot reach the Dask scheduler at tcp://127\.0\.0\.1:9"
    ):
        _ = DaskEngine("tcp://127.0.0.1:9", timeout=1).jobs


def test_the_command_line_runs_matrix_and_bootstrap_on_a_cluster(
    cluster: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    logs = DATASETS / "quendle-logs" / "logs"
    common = ["--split", "lines:400", "-c", "zstd:level=9", "--no-cache", "--quiet"]
    assert main(["matrix", str(logs), *common, "-o", str(tmp_path / "local.tsv")]) == 0
    assert (
        main(["matrix", str(logs), *common, "--cluster", cluster, "-o", str(tmp_path / "c.tsv")])
        == 0
    )
    assert (tmp_path / "c.tsv").read_bytes() == (tmp_path / "local.tsv").read_bytes()
    capsys.readouterr()
    loud = [a for a in common if a != "--quiet"]
    assert (
        main(["matrix", str(logs), *loud, "--cluster", cluster, "-o", str(tmp_path / "d.tsv")]) == 0
    )
    assert f"on the Dask cluster at {cluster} (2 worker threads)" in capsys.readouterr().err

    frogs = DATASETS / "karsvell-frogs" / "genomes"
    tree = ["tree", str(frogs), "-c", "zstd:level=9", "--no-cache", "--quiet", "--bootstrap", "4"]
    assert main([*tree, "--seed", "3", "-o", str(tmp_path / "local.nwk")]) == 0
    assert main([*tree, "--seed", "3", "--cluster", cluster, "-o", str(tmp_path / "c.nwk")]) == 0
    assert (tmp_path / "c.nwk").read_text() == (tmp_path / "local.nwk").read_text()
    capsys.readouterr()


def test_the_command_line_refuses_jobs_with_a_cluster_and_reports_no_scheduler(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    logs = str(DATASETS / "quendle-logs" / "logs")
    assert main(["matrix", logs, "--cluster", "tcp://127.0.0.1:9", "--jobs", "2"]) == 2
    assert "a --cluster brings its own" in capsys.readouterr().err
    # A scheduler that is not there: one line, exit 1, no traceback (Dask's timeout, shortened).
    env = {**os.environ, "DASK_DISTRIBUTED__COMM__TIMEOUTS__CONNECT": "1s"}
    result = subprocess.run(
        [
            sys.executable,
            "-m",
            "kinpress.cli",
            "matrix",
            logs,
            "-c",
            "zstd",
            "--no-cache",
            "--cluster",
            "tcp://127.0.0.1:9",
            "-o",
            str(tmp_path / "d.tsv"),
        ],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert result.returncode == 1
    [line] = result.stderr.strip().splitlines()
    assert line.startswith("kinpress: error: cannot reach the Dask scheduler at tcp://127.0.0.1:9")
    assert not (tmp_path / "d.tsv").exists()


def test_nearest_neighbours_on_the_cluster_equal_local(cluster: str) -> None:
    # The neighbour search's verification is the same tiles: a cluster gives the same lists.
    from kinpress.neighbours import nearest_neighbours

    items = [
        Item(f"t{k}", generated_text(k % 40, lines=30 + k % 7), "generated") for k in range(260)
    ]
    local = nearest_neighbours(items, "zstd:level=3", k=5, engine=LocalEngine(2))
    with DaskEngine(cluster) as engine:
        remote = nearest_neighbours(items, "zstd:level=3", k=5, engine=engine)
    assert not local.exhaustive and local.pairs == remote.pairs
    assert np.array_equal(local.index, remote.index)
    assert np.array_equal(local.distances, remote.distances)

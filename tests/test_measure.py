"""The one home for measurement: the settings value and the one conditioning rule of every route."""

from __future__ import annotations

import random
from collections.abc import Iterator, Sequence
from dataclasses import FrozenInstanceError, replace
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from sklearn.base import clone

from kinpress import Item, LocalEngine, SizeCache, SpecError, compressor, distance_matrix
from kinpress.derived import find_derived
from kinpress.distance import pairwise_distances
from kinpress.engine import SizeJob, Tile, available_cores, run_tile
from kinpress.measure import (
    Measurement,
    conditional_sizes,
    conditioned,
    conditioning_order,
    conditioning_rank,
    conditions,
    content_digest,
)
from kinpress.neighbours import nearest_neighbours, sparse_groups
from kinpress.origins import CompressionClassifier, classify, evaluate, fold_scores
from kinpress.support import bootstrap_support
from kinpress.trees import build_tree

SPEC = "zstd:level=3"


class Recording:
    """An engine that runs tiles in this thread and keeps the (given, target) contents of every
    pair it is asked for."""

    jobs = 1

    def __init__(self) -> None:
        self.pairs: list[tuple[bytes, bytes]] = []

    def run(
        self, data: Sequence[bytes], job: SizeJob, tiles: Sequence[Tile]
    ) -> Iterator[tuple[Tile, np.ndarray]]:
        for tile in tiles:
            if not tile.singles:
                self.pairs += [
                    (data[f], data[s]) for f, s in zip(tile.first, tile.second, strict=True)
                ]
            yield tile, run_tile(data, job, tile)


def origin_text(origin: int, seed: int, lines: int = 12) -> bytes:
    """Log-like lines from a vocabulary of the origin's own (fixed seeds)."""
    words = random.Random(origin)
    vocabulary = ["".join(words.choice("abcdefghijklmnop") for _ in range(6)) for _ in range(25)]
    rng = random.Random(1000 * origin + seed)
    rows = (
        " ".join(rng.choice(vocabulary) for _ in range(rng.randint(4, 9))) for _ in range(lines)
    )
    return ("\n".join(rows) + "\n").encode()


def labelled(origins: int = 3, each: int = 4) -> list[Item]:
    return [
        Item(f"r{o}-{s}", origin_text(o, s), "generated", label=f"o{o}")
        for o in range(origins)
        for s in range(each)
    ]


def test_measurement_is_a_frozen_value_equal_by_its_settings() -> None:
    comp, engine = compressor(SPEC), LocalEngine(1)
    first = Measurement.of(comp, engine=engine)
    assert first == Measurement.of(comp, engine=engine)
    assert replace(first, strand="both") != first
    assert (first.compressor.spec, first.conditional, first.strand) == (SPEC, "concat", "one")
    assert first.engine is engine and first.cache is None and first.progress is None
    assert first.job == SizeJob(SPEC, "concat", "one")
    with pytest.raises(FrozenInstanceError):
        first.conditional = "primed"  # type: ignore[misc]
    # The default engine is this machine's cores, as `jobs=` used to default to.
    assert Measurement.of(SPEC).engine.jobs == available_cores()


@pytest.mark.parametrize(
    ("settings", "message"),
    [
        ({"conditional": "joined"}, "unknown conditional"),
        ({"strand": "three"}, "unknown strand"),
        ({"comp": "bz2", "conditional": "primed"}, "cannot be primed"),
    ],
)
def test_measurement_refuses_unknown_settings_when_built(
    settings: dict[str, str], message: str
) -> None:
    with pytest.raises(SpecError, match=message):
        Measurement.of(**settings)  # type: ignore[arg-type]


def test_each_public_function_builds_the_measurement_once(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    built: list[str] = []
    original = Measurement.of.__func__  # type: ignore[attr-defined]

    def counting(cls: type[Measurement], *args: Any, **kwargs: Any) -> Measurement:
        built.append(str(kwargs.get("conditional", "concat")))
        made: Measurement = original(cls, *args, **kwargs)
        return made

    monkeypatch.setattr(Measurement, "of", classmethod(counting))
    items = labelled()
    texts = [item.data for item in items]
    engine = LocalEngine(1)
    dm = distance_matrix(items, SPEC, engine=engine)
    tree = build_tree(dm.labels, dm.distances)
    calls = {
        "distance_matrix": lambda: distance_matrix(items, SPEC, engine=engine),
        "conditional_sizes": lambda: conditional_sizes(items, [(0, 1)], SPEC, engine=engine),
        "pairwise_distances": lambda: pairwise_distances(texts[:3], texts[3:], SPEC, engine=engine),
        "nearest_neighbours": lambda: nearest_neighbours(items, SPEC, k=2, engine=engine),
        "sparse_groups": lambda: sparse_groups(items, SPEC, engine=engine),
        "classify": lambda: classify(items[:2], items, SPEC, significance=0.1, engine=engine),
        "classify knn": lambda: classify(
            items[:2], items, SPEC, method="knn", significance=0.1, engine=engine
        ),
        "evaluate": lambda: evaluate(items, SPEC, blocks=2, significance=0.1, engine=engine),
        "fold_scores": lambda: fold_scores(items, SPEC, blocks=2, engine=engine),
        "bootstrap_support": lambda: bootstrap_support(
            tree, items, compressor(SPEC), replicates=2, engine=engine
        ),
        "find_derived": lambda: find_derived(items, SPEC, exhaustive=True, engine=engine),
    }
    for name, call in calls.items():
        built.clear()
        call()
        assert len(built) == 1, name
    # "auto" is resolved before the value is made: primed for the conditional method.
    built.clear()
    classify(items[:2], items, SPEC, threshold=1.0, engine=engine)
    assert built == ["primed"]


def test_the_smaller_size_conditions_the_larger_and_a_tie_goes_by_content_hash() -> None:
    digests = [content_digest(data) for data in (b"first", b"second", b"third")]
    single = np.array([50, 40, 50])
    order = conditioning_order(digests, single).tolist()
    tied = sorted([0, 2], key=lambda k: digests[k])
    assert order == [1, *tied]
    for i in range(3):
        for j in range(3):
            if i != j:
                expected = order.index(i) < order.index(j)
                assert (
                    conditions(int(single[i]), digests[i], int(single[j]), digests[j]) == expected
                )
    rank = conditioning_rank(digests, single)
    given, target = conditioned(rank, np.array([0, 2, 0, 1]), np.array([2, 0, 1, 2]))
    assert given.tolist() == [tied[0], tied[0], 1, 1]
    assert target.tolist() == [tied[1], tied[1], 0, 2]


def _conditioning_pairs_only(engine: Recording) -> None:
    comp = compressor(SPEC)
    assert engine.pairs
    for given, target in engine.pairs:
        assert conditions(
            comp.size(given), content_digest(given), comp.size(target), content_digest(target)
        )


def test_matrix_neighbours_and_origins_condition_alike_and_share_cached_pairs(
    tmp_path: Path,
) -> None:
    items = labelled()
    texts = [item.data for item in items]
    with SizeCache(tmp_path / "sizes.db") as cache:
        matrix = Recording()
        distance_matrix(items, SPEC, engine=matrix, cache=cache)
        _conditioning_pairs_only(matrix)
        # The same pairs, asked for by other routes, are the same cached sizes: nothing new.
        for route in (
            lambda e: pairwise_distances(texts[:5], texts[5:], SPEC, engine=e, cache=cache),
            lambda e: nearest_neighbours(items, SPEC, k=3, engine=e, cache=cache),
            lambda e: classify(
                items[:3], items[3:], SPEC, method="knn", threshold=1.0, engine=e, cache=cache
            ),
        ):
            again = Recording()
            route(again)
            assert again.pairs == []
    for route in (
        lambda e: pairwise_distances(texts[:5], texts[5:], SPEC, engine=e),
        lambda e: classify(items[:3], items[3:], SPEC, method="knn", threshold=1.0, engine=e),
    ):
        fresh = Recording()
        route(fresh)
        _conditioning_pairs_only(fresh)


def test_the_estimator_measures_on_the_engine_it_is_given() -> None:
    texts = [origin_text(o, s) for o in range(3) for s in range(6)]
    labels = [o for o in range(3) for _ in range(6)]
    engine = Recording()
    model = CompressionClassifier(compressor=SPEC, method="knn", significance=0.1, engine=engine)
    assert model.get_params()["engine"] is engine
    assert isinstance(clone(model).engine, Recording)
    model.fit(texts, labels)
    fitted = len(engine.pairs)
    assert fitted > 0
    assert list(model.predict([origin_text(2, 40), origin_text(0, 41)])) == [2, 0]
    assert len(engine.pairs) > fitted


@pytest.mark.parametrize("jobs", [1, 2])
def test_both_directions_of_two_identical_items_are_measured(jobs: int) -> None:
    # Two items of the same bytes are one content: the pairs (a, b) and (b, a) both ask for
    # C(u|u). Each must come back as that size, not as the "not measured" -1 (a derived
    # finding then read "explained: a by b 2.00").
    data = random.Random(5).randbytes(3000)
    items = [Item("a", data, "test"), Item("b", data, "test"), Item("c", data[::-1], "test")]
    engine = LocalEngine(jobs)
    found = conditional_sizes(items, [(0, 1), (1, 0), (0, 2), (2, 0)], "zlib", engine=engine)
    assert (found.conditional >= 0).all()
    assert found.conditional[0] == found.conditional[1]
    comp = compressor("zlib")
    assert found.conditional[0] == comp.size(data + data) - comp.size(data)

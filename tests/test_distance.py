"""The NCD matrix: definition, properties, methods, strands, and a check on real genomes."""

from __future__ import annotations

import csv
import re
import zlib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import random_bytes
from kinpress import (
    InputError,
    Item,
    LocalEngine,
    MeasurementWarning,
    SpecError,
    compressor,
    distance_matrix,
    load_items,
)
from kinpress.items import reverse_complement


def items_of(*blobs: bytes, nucleotide: bool = False) -> list[Item]:
    return [Item(f"x{k}", b, "test", nucleotide=nucleotide) for k, b in enumerate(blobs)]


def random_dna(n: int, seed: int) -> bytes:
    return bytes(np.frombuffer(b"ACGT", np.uint8)[np.random.default_rng(seed).integers(0, 4, n)])


def mutate(data: bytes, rate: float, seed: int) -> bytes:
    rng = np.random.default_rng(seed)
    out = np.frombuffer(data, np.uint8).copy()
    where = rng.random(len(out)) < rate
    out[where] = np.frombuffer(b"ACGT", np.uint8)[rng.integers(0, 4, where.sum())]
    return out.tobytes()


def test_matrix_equals_the_textbook_formula_with_raw_deflate(text_corpus: bytes) -> None:
    # Li et al. 2004 / Cilibrasi & Vitanyi 2005: NCD = (C(xy) - min(C(x), C(y))) / max(...),
    # computed here independently with the standard library's raw deflate.
    def size(b: bytes) -> int:
        c = zlib.compressobj(6, zlib.DEFLATED, -15)
        return len(c.compress(b) + c.flush())

    blobs = [text_corpus[k * 5000 : k * 5000 + 4000] for k in range(5)]
    dm = distance_matrix(items_of(*blobs), "zlib:level=6", engine=LocalEngine(1))
    for i in range(5):
        for j in range(5):
            if i == j:
                continue
            x, y = blobs[i], blobs[j]
            cx, cy = size(x), size(y)
            small, large = (x, y) if (cx, i) < (cy, j) else (y, x)
            expected = (size(small + large) - min(cx, cy)) / max(cx, cy)
            assert dm.distances[i, j] == pytest.approx(max(expected, 0.0), abs=1e-12)
    assert dm.sizes is not None
    assert list(dm.sizes) == [size(b) for b in blobs]


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.binary(min_size=1, max_size=3000), min_size=2, max_size=6))
def test_matrix_is_symmetric_non_negative_with_zero_diagonal(blobs: list[bytes]) -> None:
    dm = distance_matrix(items_of(*blobs), "zstd:level=3", engine=LocalEngine(1))
    d = dm.distances
    assert np.array_equal(d, d.T)
    assert np.all(np.diag(d) == 0)
    assert np.all(d >= 0)
    assert np.all(d <= 1.3)  # NCD lies in [0, 1 + e]; short inputs carry header noise


def test_self_distance_is_small_when_the_pair_fits_the_window(text_corpus: bytes) -> None:
    blobs = [text_corpus[k * 20_000 : k * 20_000 + 10_000] for k in range(3)]
    for spec in ("zstd:level=19", "lzma:level=6", "zlib:level=9", "brotli:level=9"):
        dm = distance_matrix(items_of(*blobs), spec, engine=LocalEngine(1))
        assert dm.self_distances is not None
        assert np.all(dm.self_distances < 0.06), (spec, dm.self_distances)


def test_self_distance_is_kept_and_large_beyond_the_window() -> None:
    blobs = [random_bytes(40_000, seed=s) for s in (1, 2)]
    with pytest.warns(MeasurementWarning, match="window"):
        dm = distance_matrix(items_of(*blobs), "zlib:level=6", engine=LocalEngine(1))
    assert dm.self_distances is not None
    assert np.all(dm.self_distances > 0.95)
    assert np.all(np.diag(dm.distances) == 0)
    assert dm.raw is not None and np.all(np.diag(dm.raw) > 0.95)


def test_identical_items_are_at_distance_zero_and_computed_once(text_corpus: bytes) -> None:
    a, b = text_corpus[:5000], text_corpus[9000:14000]
    dm = distance_matrix(items_of(a, b, a), "zstd:level=3", engine=LocalEngine(1))
    assert dm.distances[0, 2] == 0
    assert dm.distances[0, 1] == dm.distances[2, 1]
    assert dm.stats.identical_items == 1
    assert dm.stats.singles_computed == 2 and dm.stats.pairs_computed == 1


def test_distance_rises_with_mutation_rate() -> None:
    base = random_dna(8000, seed=3)
    copies = [mutate(base, rate, seed=4) for rate in (0.01, 0.05, 0.2, 0.5)]
    dm = distance_matrix(items_of(base, *copies), "zstd:level=19", engine=LocalEngine(1))
    row = dm.distances[0, 1:]
    assert np.all(np.diff(row) > 0), row


def test_primed_distances_are_close_to_concatenation(text_corpus: bytes) -> None:
    blobs = [text_corpus[k * 9000 : k * 9000 + 12_000] for k in range(12)]
    concat = distance_matrix(items_of(*blobs), "zstd:level=19", engine=LocalEngine(1))
    primed = distance_matrix(
        items_of(*blobs), "zstd:level=19", conditional="primed", engine=LocalEngine(1)
    )
    gap = np.abs(concat.distances - primed.distances)[np.triu_indices(12, 1)]
    assert np.median(gap) <= 0.03
    assert np.percentile(gap, 95) <= 0.06


def test_primed_needs_a_primable_compressor() -> None:
    with pytest.raises(SpecError, match="cannot be primed"):
        distance_matrix(items_of(b"a" * 100, b"b" * 100), "brotli", conditional="primed")


def test_both_strands_find_a_reverse_complemented_copy() -> None:
    genome = random_dna(6000, seed=5)
    relative = mutate(genome, 0.02, seed=6)
    unrelated = random_dna(6000, seed=7)
    items = items_of(genome, reverse_complement(relative), unrelated, nucleotide=True)
    one = distance_matrix(items, "zstd:level=19", engine=LocalEngine(1))
    both = distance_matrix(items, "zstd:level=19", strand="both", engine=LocalEngine(1))
    assert one.distances[0, 1] > 0.9  # as deposited, the two strands look unrelated
    assert both.distances[0, 1] < 0.3
    assert both.distances[0, 2] > 0.9
    primed = distance_matrix(
        items, "zstd:level=19", strand="both", conditional="primed", engine=LocalEngine(1)
    )
    assert primed.distances[0, 1] < 0.3


def test_both_strands_need_nucleotide_items() -> None:
    with pytest.raises(InputError, match="nucleotide"):
        distance_matrix(items_of(b"hello" * 50, b"world" * 50), strand="both")


def test_fewer_than_two_items_is_an_error() -> None:
    with pytest.raises(InputError, match="at least two"):
        distance_matrix(items_of(b"alone"))


def test_negative_distances_are_clipped_and_counted(text_corpus: bytes) -> None:
    # C(yx) < C(y) happens with real compressors (Cilibrasi & Vitanyi 2005: the normality
    # properties hold only up to O(log n)); brotli 11 does it on text next to a copy missing its
    # last byte (5 of 32 such slices of this corpus gave negative NCD when measured).
    comp = compressor("brotli:level=11")
    for offset in range(0, 1_000_000, 50_000):
        x = text_corpus[offset : offset + 20_000]
        dm = distance_matrix(
            items_of(x, x[:-1], text_corpus[-20_000:]), comp, engine=LocalEngine(1)
        )
        raw = np.asarray(dm.raw)
        if raw[0, 1] < 0:
            break
    else:
        pytest.fail("no slice of the corpus gave a negative NCD")
    assert dm.distances[0, 1] == 0
    assert np.all(dm.distances >= 0)
    assert dm.stats.clipped_below_zero == int(np.count_nonzero(raw[np.triu_indices(3, 1)] < 0))


def test_parallel_engines_give_the_serial_result(text_corpus: bytes) -> None:
    blobs = [text_corpus[k * 3000 : k * 3000 + 2500] for k in range(10)]
    for spec in ("zstd:level=3", "ppmd:order=6,memory=16"):  # threads, then processes
        serial = distance_matrix(items_of(*blobs), spec, engine=LocalEngine(1))
        parallel = distance_matrix(items_of(*blobs), spec, engine=LocalEngine(2))
        assert np.array_equal(serial.distances, parallel.distances), spec


def test_result_does_not_depend_on_input_order(text_corpus: bytes) -> None:
    blobs = [text_corpus[k * 4000 : k * 4000 + 3000] for k in range(6)]
    forward = distance_matrix(items_of(*blobs), "zstd:level=3", engine=LocalEngine(1))
    order = [3, 1, 5, 0, 4, 2]
    shuffled = distance_matrix(
        [items_of(*blobs)[k] for k in order], "zstd:level=3", engine=LocalEngine(1)
    )
    assert np.allclose(shuffled.distances, forward.distances[np.ix_(order, order)])


def _mitogenome_labels(root: Path) -> dict[str, dict[str, str]]:
    with open(root / "labels.tsv", encoding="utf-8") as handle:
        return {row["file"]: row for row in csv.DictReader(handle, delimiter="\t")}


@pytest.mark.shared
def test_related_mitogenomes_are_nearer_than_distant_ones(shared_data: Path) -> None:
    # Taxonomy from NCBI Taxonomy via the dataset's labels.tsv; accepted textbook facts:
    # species of one family are nearer each other than mammals are to bird or fish.
    root = shared_data / "genomes" / "mitogenomes"
    labels = _mitogenome_labels(root)
    files = sorted(root.glob("*.fa"))
    dm = distance_matrix(load_items(files), "zstd:level=19", strand="both", engine=LocalEngine(2))
    name = {item.name: Path(item.source).name for item in load_items(files)}
    family = [labels[name[n]]["family"] for n in dm.labels]
    klass = [labels[name[n]]["class"] for n in dm.labels]
    d = dm.distances
    mammals = [k for k, c in enumerate(klass) if c == "Mammalia"]
    others = [k for k, c in enumerate(klass) if c != "Mammalia"]
    checked = 0
    for i in mammals:
        for j in mammals:
            if i < j and family[i] == family[j]:
                # nearer each other than either is to any non-mammal
                assert d[i, j] < d[np.ix_([i, j], others)].min(), (dm.labels[i], dm.labels[j])
                # and nearer than the median distance to mammals of other families
                rest = [k for k in mammals if family[k] != family[i]]
                assert d[i, j] < np.median(d[i, rest])
                checked += 1
    assert checked >= 5  # Hominidae (3 pairs), Bovidae, Leporidae


def test_conditional_sizes_give_both_directions_and_agree_with_the_matrix(
    tmp_path: Path, text_corpus: bytes
) -> None:
    from kinpress import SizeCache, conditional_sizes

    big, excerpt = text_corpus[:12_000], text_corpus[3_000:6_000]
    other = text_corpus[50_000:56_000]
    items = items_of(big, excerpt, other)
    with SizeCache(tmp_path / "c.sqlite") as cache:
        cond = conditional_sizes(items, [(0, 1), (1, 0), (2, 1)], "zstd:level=19", cache=cache)
        dm = distance_matrix(items, "zstd:level=19", cache=cache, engine=LocalEngine(1))
    sizes = cond.sizes
    excerpt_given_big, big_given_excerpt, excerpt_given_other = cond.conditional
    assert excerpt_given_big < 0.1 * sizes[1]  # the excerpt is all in the big text
    assert big_given_excerpt > 0.6 * sizes[0]  # most of the big text is not in the excerpt
    assert excerpt_given_other > 0.8 * sizes[1]
    # the matrix conditions the larger item (big) on the smaller (excerpt)
    assert dm.distances[0, 1] == pytest.approx(big_given_excerpt / sizes[0])
    assert dm.stats.pairs_from_cache == 1  # that pair came from conditional_sizes' run


# --- the one validator every consumer calls ---------------------------------------------------


def test_every_consumer_refuses_the_same_faults_with_the_same_words() -> None:
    from kinpress.distance import DistanceMatrix, check_distances
    from kinpress.groups import find_groups
    from kinpress.trees import build_tree

    labels = ("a", "b", "c")
    good = np.array([[0.0, 1.0, 2.0], [1.0, 0.0, 1.5], [2.0, 1.5, 0.0]])
    faults = {
        "not symmetric": good + np.triu(np.full((3, 3), 0.5), 1),
        "not finite": np.where(good == 1.0, np.nan, good),
        "negative": -good,
    }
    for message, bad in faults.items():
        for consumer in (
            lambda d: check_distances(d, labels),
            lambda d: DistanceMatrix(labels, d),
            lambda d: build_tree(list(labels), d),
            lambda d: find_groups(d),
        ):
            with pytest.raises(ValueError, match=message):
                consumer(bad)


def test_a_diagonal_of_self_distances_is_read_as_zero_except_by_groups() -> None:
    from kinpress.distance import DistanceMatrix, check_distances
    from kinpress.groups import find_groups

    d = np.array([[0.03, 0.9], [0.9, 0.05]])
    assert np.diag(check_distances(d)).tolist() == [0.0, 0.0]
    assert d[0, 0] == 0.03  # the caller's array is not written into
    assert np.diag(DistanceMatrix(("a", "b"), d).distances).tolist() == [0.0, 0.0]
    with pytest.raises(ValueError, match=re.escape("zero diagonal: item 0 is 0.03 from itself")):
        check_distances(d, strict_diagonal=True)
    with pytest.raises(ValueError, match="zero diagonal"):
        find_groups(d)


def test_a_valid_float_matrix_is_returned_without_a_copy() -> None:
    from kinpress.distance import check_distances

    d = np.array([[0.0, 0.5], [0.5, 0.0]])
    assert check_distances(d) is d


def test_near_symmetry_is_judged_relative_to_the_largest_distance(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from kinpress import distance
    from kinpress.distance import check_distances

    # Read in blocks of one row, so the check across blocks is exercised too.
    monkeypatch.setattr(distance, "_CHECK_CELLS", 1)
    d = np.array([[0.0, 1e6, 1.0], [1e6 + 5.0, 0.0, 2.0], [1.0, 2.0, 0.0]])
    checked = check_distances(d)
    assert checked[0, 1] == checked[1, 0] == 1e6 + 2.5
    # Six decimals rounded apart, as a file from another program may hold them.
    assert check_distances([[0, 0.123457], [0.123456, 0]])[0, 1] == pytest.approx(0.1234565)
    d[2, 0] = 20.0  # 19 apart: beyond 1e-5 of the largest distance, 1e6
    message = "not symmetric: item 0→item 2 is 1.0 but item 2→item 0 is 20.0"
    with pytest.raises(ValueError, match=re.escape(message)):
        check_distances(d)

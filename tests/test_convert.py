"""Library comforts: inputs as bytes, str, Items or Biopython SeqRecords (`items.as_items`);
results as pandas frames and Bio.Phylo trees (`convert`), checked against pandas and Biopython
themselves; a short Item repr."""

from __future__ import annotations

import io
import random
import sys
from pathlib import Path

import numpy as np
import pytest
from Bio import Phylo, SeqIO
from Bio.Seq import Seq
from Bio.SeqRecord import SeqRecord

from kinpress import Item, LocalEngine, distance_matrix, load_items, pairwise_distances
from kinpress.convert import PANDAS_HINT, matrix_frame
from kinpress.derived import find_derived
from kinpress.groups import GroupingResult, find_groups
from kinpress.items import as_items
from kinpress.neighbours import nearest_neighbours
from kinpress.origins import CompressionClassifier, classify
from kinpress.trees import (
    Node,
    TreeResult,
    build_tree,
    leaf_order,
    midpoint_root,
    path_lengths,
    postorder,
)

pd = pytest.importorskip("pandas", reason="pandas is the `pandas` extra (in `test` too)")

SPEC = "zlib:level=9"


def genome(seed: int, n: int = 1500) -> str:
    return "".join(random.Random(seed).choice("ACGT") for _ in range(n))


def mutated(text: str, seed: int, rate: float) -> str:
    rng = random.Random(seed)
    return "".join(rng.choice("ACGT") if rng.random() < rate else c for c in text)


def records() -> list[SeqRecord]:
    base = genome(1)
    return [
        SeqRecord(Seq(mutated(base, k, 0.02 * k).lower()), id=f"s{k}", description="")
        for k in range(5)
    ]


# -- inputs ------------------------------------------------------------------------------------


def test_as_items_takes_bytes_str_items_and_seqrecords() -> None:
    kept = Item("kept", b"abc", "a.txt", label="x")
    got = as_items([b"raw", "t\u00e9xt", kept, SeqRecord(Seq("ac-gt*N"), id="rec")])
    assert [i.name for i in got] == ["x0", "x1", "kept", "rec"]
    assert got[1].data == "t\u00e9xt".encode()
    assert got[2] is kept
    # As sequence files give letters: uppercase, gaps and stops dropped (items.py's rule).
    assert got[3].data == b"ACGTN" and got[3].nucleotide
    with pytest.raises(TypeError, match="got int at position 1"):
        as_items([b"a", 3])


def test_repeated_record_ids_are_made_unique() -> None:
    got = as_items([SeqRecord(Seq("ACGT"), id="r"), SeqRecord(Seq("ACGA"), id="r")])
    assert [i.name for i in got] == ["r", "r~2"]


def test_seqrecords_measure_as_the_fasta_file_biopython_writes(tmp_path: Path) -> None:
    # Outside source: Biopython's own FASTA writer; kinpress reads that file its own way.
    given = records()
    path = tmp_path / "s.fasta"
    SeqIO.write(given, path, "fasta")
    from_file = distance_matrix(load_items([path]), SPEC, strand="both", engine=LocalEngine(1))
    from_records = distance_matrix(given, SPEC, strand="both", engine=LocalEngine(1))
    assert from_records.labels == from_file.labels == tuple(r.id for r in given)
    np.testing.assert_array_equal(from_records.distances, from_file.distances)


def test_pairwise_distances_takes_records_and_items_alike() -> None:
    given = records()[:3]
    items = as_items(given)
    np.testing.assert_array_equal(
        pairwise_distances(given, compressor=SPEC), pairwise_distances(items, compressor=SPEC)
    )


def test_item_repr_is_short_and_never_the_bytes() -> None:
    item = Item("x", b"Q" * 1200, "genomes/x.fa", label="frog")
    # 1200 bytes in decimal units to three figures (units.size_text): 1.2 kB.
    assert repr(item) == "Item(name='x', 1.2 kB, source='genomes/x.fa', label='frog')"
    assert "QQ" not in repr(Item("y", b"Q" * 10, "-"))


# -- pandas ------------------------------------------------------------------------------------


def test_matrix_frame_equals_the_array_with_labels() -> None:
    dm = distance_matrix(records(), SPEC, engine=LocalEngine(1))
    frame = dm.to_frame()
    expected = pd.DataFrame(dm.distances, index=list(dm.labels), columns=list(dm.labels))
    pd.testing.assert_frame_equal(frame, expected)
    assert frame.loc["s1", "s3"] == dm.distances[1, 3]
    np.testing.assert_array_equal(frame.to_numpy(), dm.distances)


def test_grouping_frame_has_one_row_per_item_in_input_order() -> None:
    d = np.array([[0, 0.1, 0.9, 0.9], [0.1, 0, 0.9, 0.9], [0.9, 0.9, 0, 0.1], [0.9, 0.9, 0.1, 0]])
    result = GroupingResult.of(["a", "b", "c", "d"], find_groups(d, k=2))
    frame = result.to_frame()
    assert list(frame.index) == ["a", "b", "c", "d"]
    assert list(frame.columns) == ["group", "medoid", "outlier"]
    rows = result.as_json()["items"]
    assert isinstance(rows, list)
    assert frame["group"].tolist() == [row["group"] for row in rows]
    assert frame["medoid"].tolist() == [row["medoid"] for row in rows]


def test_classification_frame_and_the_estimator_take_seqrecords() -> None:
    base = [genome(10), genome(20)]
    reference = [
        Item(f"r{o}-{k}", mutated(base[o], 100 * o + k, 0.05).encode(), "gen", label=f"o{o}")
        for o in range(2)
        for k in range(4)
    ]
    unknown = [SeqRecord(Seq(mutated(base[1], 7, 0.05)), id="u")]
    found = classify(unknown, reference, SPEC, threshold=float("inf"))
    frame = found.to_frame()
    assert list(frame.index) == ["u"]
    assert frame.loc["u", "best"] == "o1"
    for origin, column in zip(found.origins, range(len(found.origins)), strict=True):
        assert frame.loc["u", f"score:{origin}"] == found.scores[0, column]
    model = CompressionClassifier(SPEC, significance=0.2, engine=LocalEngine(1))
    model.fit([SeqRecord(Seq(i.data.decode()), id=i.name) for i in reference], [0] * 4 + [1] * 4)
    assert model.predict(unknown).tolist() == [1]


def test_neighbours_and_findings_frames() -> None:
    given = records()
    found = nearest_neighbours(given, SPEC, k=2, engine=LocalEngine(1))
    frame = found.to_frame()
    assert frame.to_records(index=False).tolist() == list(found.rows())
    text = "\n".join(f"line {k} of the shared text, word {k * 7 % 13}" for k in range(200))
    report = find_derived(
        [text, text.replace("shared", "common"), genome(3, 6000)], exhaustive=True, null_pairs=50
    )
    findings = report.to_frame(same_source=True)
    assert len(findings) == len(report.findings) + len(report.same_source)
    assert findings["a"].tolist() == [f.a for f in (*report.findings, *report.same_source)]


def test_missing_pandas_says_what_to_install(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "pandas", None)  # import pandas now raises ImportError
    dm = distance_matrix([b"abc" * 20, b"abd" * 20], SPEC, engine=LocalEngine(1))
    with pytest.raises(ImportError, match=r"pip install 'kinpress\[pandas\]'"):
        matrix_frame(dm)
    assert "kinpress[pandas]" in PANDAS_HINT


# -- Bio.Phylo ---------------------------------------------------------------------------------


def tree_result() -> TreeResult:
    dm = distance_matrix(records(), SPEC, engine=LocalEngine(1))
    tree = midpoint_root(build_tree(dm.labels, dm.distances, "nj"))
    return TreeResult.of_matrix(tree, "nj", dm)


def test_phylo_tree_has_our_leaves_lengths_and_path_distances() -> None:
    ours = tree_result()
    theirs = ours.to_phylo()
    assert [t.name for t in theirs.get_terminals()] == leaf_order(ours.tree)
    total = sum(n.length or 0.0 for n in postorder(ours.tree))
    assert theirs.total_branch_length() == pytest.approx(total)
    labels = leaf_order(ours.tree)
    paths = path_lengths(ours.tree, labels)
    for i, a in enumerate(labels):
        for j, b in enumerate(labels):
            if i < j:
                assert theirs.distance(a, b) == pytest.approx(paths[i, j])


def clusters(node: Node) -> dict[frozenset[str], float | None]:
    """Each internal non-root node's leaf set, with its support."""
    out: dict[frozenset[str], float | None] = {}
    for child in node.children:
        if child.children:
            out[frozenset(leaf_order(child))] = child.support
            out.update(clusters(child))
    return out


def test_phylo_newick_round_trip_keeps_clades_and_support() -> None:
    ours = tree_result()
    # Support on the root's internal children, as add_support would leave it.
    supported = Node(
        ours.tree.name,
        ours.tree.length,
        tuple(
            Node(c.name, c.length, c.children, 75.0 if c.children else None)
            for c in ours.tree.children
        ),
    )
    expected = clusters(supported)
    assert len(expected) >= 2
    # Through Biopython's own Newick writer and reader.
    handle = io.StringIO()
    Phylo.write(TreeResult(supported, "nj", ours.fit).to_phylo(), handle, "newick")
    back = Phylo.read(io.StringIO(handle.getvalue()), "newick")
    theirs = {
        frozenset(t.name for t in clade.get_terminals()): clade.confidence
        for clade in back.find_clades()
        if not clade.is_terminal() and clade is not back.root
    }
    assert theirs == expected

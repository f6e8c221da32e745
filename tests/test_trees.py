"""Tests for kinpress.trees: tree building, rooting, Newick, path lengths, splits and support."""

from __future__ import annotations

import copy
import io
import itertools
import math
import pickle
import sys
from dataclasses import replace

import dendropy
import numpy as np
import numpy.typing as npt
import pytest
from Bio import Phylo
from Bio.Phylo.BaseTree import Tree as BioTree
from Bio.Phylo.TreeConstruction import DistanceMatrix, DistanceTreeConstructor
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.cluster.hierarchy import cophenet, leaves_list, linkage
from scipy.spatial.distance import squareform

from kinpress.distance import DistanceMatrix as Matrix
from kinpress.distance import check_distances
from kinpress.items import escape_name
from kinpress.trees import (
    Node,
    Resampling,
    TreeResult,
    add_support,
    build_tree,
    fit_correlation,
    leaf_order,
    linkage_tree,
    midpoint_root,
    neighbour_joining,
    outgroup_root,
    parse_newick,
    path_lengths,
    postorder,
    preorder,
    splits,
    to_newick,
)

# Wikipedia, "Neighbor joining", worked example with five taxa a–e. The numbers were recalled
# from memory and then checked against a stored copy of the article: Q1(a, b) = −50,
# δ(a, u) = 2, δ(b, u) = 3; then u–c joined with δ(u, v) = 3, δ(c, v) = 4; the last three
# nodes v, d, e give δ(v, w) = 2, δ(d, w) = 2, δ(e, w) = 1. The matrix is additive for that tree.
WIKI_LABELS = ["a", "b", "c", "d", "e"]
WIKI_D = np.array(
    [
        [0, 5, 9, 9, 8],
        [5, 0, 10, 10, 9],
        [9, 10, 0, 8, 7],
        [9, 10, 8, 0, 3],
        [8, 9, 7, 3, 0],
    ],
    dtype=float,
)


def random_matrix(
    seed: int, n: int, low: float = 0.2, high: float = 1.0
) -> npt.NDArray[np.float64]:
    rng = np.random.default_rng(seed)
    x = rng.uniform(low, high, (n, n))
    x = (x + x.T) / 2
    np.fill_diagonal(x, 0.0)
    return x


def lengths_by_leaf(tree: Node) -> dict[str, float | None]:
    return {node.name: node.length for node in preorder(tree) if node.is_leaf and node.name}


def child_leaf_sets(tree: Node) -> list[frozenset[str]]:
    return [frozenset(leaf_order(child)) for child in tree.children]


def root_depths(tree: Node) -> dict[str, float]:
    depth = {id(tree): 0.0}
    result = {}
    for node in preorder(tree):
        for child in node.children:
            depth[id(child)] = depth[id(node)] + (child.length or 0.0)
        if node.is_leaf and node.name is not None:
            result[node.name] = depth[id(node)]
    return result


def biopython_nj(labels: list[str], d: npt.NDArray[np.float64]) -> BioTree:
    lower = [[float(v) for v in d[i, : i + 1]] for i in range(len(labels))]
    return DistanceTreeConstructor().nj(DistanceMatrix(list(labels), lower))


def biopython_splits(tree: BioTree, labels: list[str]) -> frozenset[frozenset[str]]:
    everything = frozenset(labels)
    reference = min(labels)
    found = set()
    for clade in tree.find_clades():
        side = frozenset(leaf.name for leaf in clade.get_terminals())
        if reference in side:
            side = everything - side
        if 2 <= len(side) <= len(labels) - 2:
            found.add(side)
    return frozenset(found)


def biopython_path_lengths(tree: BioTree, labels: list[str]) -> npt.NDArray[np.float64]:
    n = len(labels)
    out = np.zeros((n, n))
    for i, j in itertools.combinations(range(n), 2):
        out[i, j] = out[j, i] = tree.distance(labels[i], labels[j])
    return out


# --- neighbour joining -----------------------------------------------------------------------


def test_nj_reproduces_wikipedia_five_taxon_example() -> None:
    tree = neighbour_joining(WIKI_LABELS, WIKI_D)
    assert splits(tree) == {frozenset("de"), frozenset("cde")}
    # Leaf branches from the worked example (see WIKI_D above).
    assert lengths_by_leaf(tree) == pytest.approx({"a": 2, "b": 3, "c": 4, "d": 2, "e": 1})
    # Internal branches u–v = 3 and v–w = 2 are fixed once the leaves and all paths agree.
    np.testing.assert_allclose(path_lengths(tree, WIKI_LABELS), WIKI_D, atol=1e-12)
    internal = sorted(n.length for n in preorder(tree) if n.children and n.length is not None)
    assert internal == pytest.approx([2, 3])


def test_nj_reproduces_rosalind_ba7e_non_additive_sample() -> None:
    # Rosalind problem BA7E "Implement the Neighbor Joining Algorithm" (the exercise set of
    # Compeau & Pevzner, Bioinformatics Algorithms, ch. 7), sample dataset and output, taken
    # from a stored copy of the problem page: 0–4 = 8, 3–4 = 12, 4–5 = 2, 1–5 = 13.5,
    # 2–5 = 16.5. The matrix is not additive (the tree gives d(0, 1) = 23.5, not 23).
    labels = ["0", "1", "2", "3"]
    d = [[0, 23, 27, 20], [23, 0, 30, 28], [27, 30, 0, 30], [20, 28, 30, 0]]
    tree = neighbour_joining(labels, d)
    assert splits(tree) == {frozenset({"1", "2"})}
    assert lengths_by_leaf(tree) == pytest.approx({"0": 8, "1": 13.5, "2": 16.5, "3": 12})
    assert path_lengths(tree, labels)[0, 1] == pytest.approx(8 + 2 + 13.5)


@pytest.mark.parametrize("seed", range(25))
def test_nj_matches_biopython_topology_and_path_lengths(seed: int) -> None:
    n = 4 + seed
    labels = [f"t{i}" for i in range(n)]
    d = random_matrix(seed, n)
    reference = biopython_nj(labels, d)
    # Biopython keeps negative branch lengths; we clip them, so compare only where none arise.
    assert all((c.branch_length or 0.0) >= 0 for c in reference.find_clades())
    tree = neighbour_joining(labels, d)
    assert splits(tree) == biopython_splits(reference, labels)
    np.testing.assert_allclose(
        path_lengths(tree, labels), biopython_path_lengths(reference, labels), atol=1e-6
    )


@pytest.mark.parametrize("order", [[0, 1, 2, 3, 4], [4, 3, 2, 1, 0]])
def test_nj_clips_negative_branch_and_moves_difference_to_sibling(order: list[int]) -> None:
    # The first join is c–e (unique minimum of Q) with raw lengths 19/6 and −1/6; Biopython,
    # which does not clip, is the outside check of the raw value. Both orders are run so the
    # negative branch falls once on the first and once on the second member of the pair.
    d = np.array(
        [
            [0, 5, 8, 2, 3],
            [5, 0, 9, 2, 4],
            [8, 9, 0, 5, 3],
            [2, 2, 5, 0, 5],
            [3, 4, 3, 5, 0],
        ],
        dtype=float,
    )[np.ix_(order, order)]
    labels = ["abcde"[i] for i in order]
    raw = {c.name: c.branch_length for c in biopython_nj(labels, d).get_terminals()}
    assert raw["e"] == pytest.approx(-1 / 6)
    assert raw["c"] == pytest.approx(19 / 6)
    tree = neighbour_joining(labels, d)
    assert all(node.length is None or node.length >= 0 for node in preorder(tree))
    assert lengths_by_leaf(tree)["e"] == 0.0
    assert lengths_by_leaf(tree)["c"] == pytest.approx(3.0)
    c, e = labels.index("c"), labels.index("e")
    assert path_lengths(tree, labels)[c, e] == pytest.approx(d[c, e])


@st.composite
def additive_trees(draw: st.DrawFn) -> tuple[list[str], npt.NDArray[np.float64], set[frozenset]]:
    """A random rooted binary tree with positive branches, as its leaf-path matrix and splits.

    Built by merging random pairs of clusters; the path between x in A and y in B is
    depth_A(x) + l_A + l_B + depth_B(y), computed here independently of the module.
    """
    n = draw(st.integers(3, 14))
    labels = [f"x{i}" for i in range(n)]
    d = np.zeros((n, n))
    clusters: list[dict[int, float]] = [{i: 0.0} for i in range(n)]
    sides = []
    lengths = st.floats(0.01, 1.0, allow_nan=False)
    while len(clusters) > 1:
        i = draw(st.integers(0, len(clusters) - 1))
        a = clusters.pop(i)
        j = draw(st.integers(0, len(clusters) - 1))
        b = clusters.pop(j)
        la, lb = draw(lengths), draw(lengths)
        for x, dx in a.items():
            for y, dy in b.items():
                d[x, y] = d[y, x] = dx + la + lb + dy
        merged = {x: dx + la for x, dx in a.items()} | {y: dy + lb for y, dy in b.items()}
        sides.append(frozenset(labels[x] for x in merged))
        clusters.append(merged)
    everything = frozenset(labels)
    expected = set()
    for side in sides:
        side = everything - side if "x0" in side else side
        if 2 <= len(side) <= n - 2:
            expected.add(side)
    return labels, d, expected


@settings(max_examples=150, deadline=None)
@given(additive_trees())
def test_nj_recovers_any_additive_tree_exactly(
    case: tuple[list[str], npt.NDArray[np.float64], set[frozenset]],
) -> None:
    # Neighbour joining is exact on additive (tree-metric) matrices: Saitou & Nei 1987;
    # proof in Studier & Keppler 1988 and Atteson 1999 (Algorithmica 25:251–278).
    labels, d, expected = case
    tree = neighbour_joining(labels, d)
    assert splits(tree) == expected
    np.testing.assert_allclose(path_lengths(tree, labels), d, atol=1e-6)
    assert fit_correlation(tree, labels, d) == pytest.approx(1.0)


def test_nj_handles_one_and_two_items() -> None:
    assert to_newick(build_tree(["solo"], [[0.0]])) == "solo;"
    pair = build_tree(["p", "q"], [[0, 0.5], [0.5, 0]])
    assert sorted((child.name, child.length) for child in pair.children) == [
        ("p", 0.25),
        ("q", 0.25),
    ]


def test_nj_ignores_nonzero_diagonal_of_compression_distances() -> None:
    with_diagonal = WIKI_D + np.eye(5) * 0.05
    tree = neighbour_joining(WIKI_LABELS, with_diagonal)
    np.testing.assert_allclose(path_lengths(tree, WIKI_LABELS), WIKI_D, atol=1e-12)


# --- linkage (UPGMA, complete, single) -------------------------------------------------------


@pytest.mark.parametrize("method", ["average", "complete", "single"])
def test_linkage_tree_path_lengths_equal_scipy_cophenetic_distances(method: str) -> None:
    labels = [f"s{i}" for i in range(30)]
    d = random_matrix(7, 30)
    tree = build_tree(labels, d, method=method)
    z = linkage(squareform(d), method=method)
    correlation, cophenetic = cophenet(z, squareform(d))
    np.testing.assert_allclose(path_lengths(tree, labels), squareform(cophenetic), atol=1e-12)
    assert fit_correlation(tree, labels, d) == pytest.approx(correlation)
    assert leaf_order(tree) == [labels[i] for i in leaves_list(z)]


def test_upgma_is_ultrametric_with_root_at_half_the_top_merge() -> None:
    labels = [f"s{i}" for i in range(12)]
    d = random_matrix(11, 12)
    tree = linkage_tree(labels, d, "average")
    depths = list(root_depths(tree).values())
    top = linkage(squareform(d), method="average")[-1, 2]
    assert depths == pytest.approx([top / 2] * 12)


def test_linkage_methods_refuse_an_outgroup() -> None:
    with pytest.raises(ValueError, match="rooted by construction"):
        build_tree(WIKI_LABELS, WIKI_D, method="average", outgroup="a")


def test_unknown_method_is_rejected() -> None:
    with pytest.raises(ValueError, match="unknown method"):
        build_tree(WIKI_LABELS, WIKI_D, method="ward")


# --- input validation ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("labels", "distances", "message"),
    [
        (["a", "b"], [[0, 1, 2], [1, 0, 3]], "square"),
        (["a", "b", "c"], [[0, 1], [1, 0]], "3 labels for a 2×2"),
        (["a", "a"], [[0, 1], [1, 0]], "unique.*'a'"),
        (["a", "b"], [[0, np.nan], [np.nan, 0]], "not finite"),
        (["a", "b"], [[0, -1], [-1, 0]], "negative"),
        (["a", "b"], [[0, 1], [1.1, 0]], "not symmetric.*'a'.*'b'"),
        ([], np.zeros((0, 0)), "empty"),
    ],
)
def test_invalid_distance_input_raises_clear_value_error(
    labels: list[str], distances: npt.ArrayLike, message: str
) -> None:
    with pytest.raises(ValueError, match=message):
        check_distances(distances, labels)
    with pytest.raises(ValueError, match=message):
        build_tree(labels, distances)


def test_near_symmetric_input_is_accepted_and_symmetrised() -> None:
    d = check_distances([[0, 1.0], [1.0 + 1e-12, 0]], ["a", "b"])
    assert d[0, 1] == d[1, 0]


# --- rooting ---------------------------------------------------------------------------------


def test_single_outgroup_becomes_child_of_root_and_paths_are_kept() -> None:
    tree = build_tree(WIKI_LABELS, WIKI_D, outgroup="c")
    assert frozenset("c") in child_leaf_sets(tree)
    assert len(tree.children) == 2
    np.testing.assert_allclose(path_lengths(tree, WIKI_LABELS), WIKI_D, atol=1e-12)
    # The root halves c's branch of length 4 (worked example above).
    assert lengths_by_leaf(tree)["c"] == pytest.approx(2.0)


def test_several_outgroup_labels_form_one_side_of_the_root() -> None:
    tree = build_tree(WIKI_LABELS, WIKI_D, outgroup=["e", "d"])
    assert child_leaf_sets(tree)[0] == frozenset("de")
    assert child_leaf_sets(tree)[1] == frozenset("abc")
    np.testing.assert_allclose(path_lengths(tree, WIKI_LABELS), WIKI_D, atol=1e-12)


def test_outgroup_given_from_the_other_side_of_the_branch_still_roots_there() -> None:
    # {a, b, c} is the complement of {d, e}: the same branch, with a, b, c as the outgroup.
    tree = build_tree(WIKI_LABELS, WIKI_D, outgroup=["a", "b", "c"])
    assert child_leaf_sets(tree) == [frozenset("abc"), frozenset("de")]


def test_non_clade_outgroup_raises_naming_the_labels() -> None:
    with pytest.raises(ValueError, match=r"\['a', 'd'\] is not a clade"):
        build_tree(WIKI_LABELS, WIKI_D, outgroup=["d", "a"])


@pytest.mark.parametrize(
    ("outgroup", "message"),
    [(["zz"], "not in the tree: \\['zz'\\]"), ([], "some but not all"), (WIKI_LABELS, "not all")],
)
def test_unusable_outgroup_raises(outgroup: list[str], message: str) -> None:
    with pytest.raises(ValueError, match=message):
        build_tree(WIKI_LABELS, WIKI_D, outgroup=outgroup)


def test_midpoint_root_lies_halfway_along_the_longest_path_of_the_example() -> None:
    # Longest path of the worked example is b–d: 3 + 3 + 2 + 2 = 10, so the root sits 5 from
    # both ends, on branch u–v 2 from u (the a–b node) and 1 from v, worked out by hand.
    tree = build_tree(WIKI_LABELS, WIKI_D)
    depths = root_depths(tree)
    assert depths["b"] == pytest.approx(5.0)
    assert depths["d"] == pytest.approx(5.0)
    assert sorted(child.length for child in tree.children) == pytest.approx([1.0, 2.0])
    assert sorted(child_leaf_sets(tree), key=len) == [frozenset("ab"), frozenset("cde")]


@pytest.mark.parametrize("seed", range(10))
def test_midpoint_root_balances_the_two_farthest_leaves(seed: int) -> None:
    labels = [f"m{i}" for i in range(5 + 3 * seed)]
    d = random_matrix(100 + seed, len(labels), 0.0, 1.0)
    unrooted = neighbour_joining(labels, d)
    diameter = path_lengths(unrooted, labels).max()
    tree = midpoint_root(unrooted)
    depths = root_depths(tree)
    sides = [max(depths[name] for name in leaf_order(child)) for child in tree.children]
    assert max(sides) == pytest.approx(diameter / 2)
    assert sorted(sides)[-2] == pytest.approx(diameter / 2)
    np.testing.assert_allclose(
        path_lengths(tree, labels), path_lengths(unrooted, labels), atol=1e-12
    )


def test_midpoint_on_a_node_roots_at_that_node_and_keeps_its_name() -> None:
    # Worked by hand: a–b and a–c are both 4, the longest paths; 2 from a is node X itself.
    tree = midpoint_root(parse_newick("(a:2,b:2,(c:1,d:1)Y:1)X;"))
    assert tree.name == "X"
    assert [(child.name, child.length) for child in tree.children] == [
        ("a", 2.0),
        ("b", 2.0),
        ("Y", 1.0),
    ]


def test_rerooting_a_rooted_tree_uses_the_whole_branch_through_the_old_root() -> None:
    tree = parse_newick("((a:1,b:1):2,(c:1,d:1):4);")
    rerooted = outgroup_root(tree, ["c", "d"])
    # The old root joined two branches into one of length 6; the new root halves it.
    assert [child.length for child in rerooted.children] == [3.0, 3.0]
    assert midpoint_root(tree).children[0].length == pytest.approx(3.0)


# --- splits and support ----------------------------------------------------------------------


def test_splits_ignore_rooting_and_use_side_without_first_leaf() -> None:
    unrooted = parse_newick("(a,b,(c,(d,e)));")
    rooted = parse_newick("((a,b),(c,(d,e)));")
    # Worked by hand: the branches split off {d, e} and {c, d, e}; sides without leaf "a".
    assert splits(unrooted) == splits(rooted) == {frozenset("de"), frozenset("cde")}


def test_support_is_percentage_of_replicates_with_each_split() -> None:
    tree = parse_newick("((a:1,b:1):1,(c:1,(d:1,e:1):1):1);")
    replicates = [
        parse_newick("(a,b,(c,(d,e)));"),
        parse_newick("((a,c),(b,(d,e)));"),
        parse_newick("((e,d),(c,(b,a)));"),
        parse_newick("((a,d),(b,(c,e)));"),
    ]
    supported = add_support(tree, replicates)
    support = {frozenset(leaf_order(n)): n.support for n in preorder(supported) if n.children}
    # {d, e}: replicates 1, 2, 3. {c, d, e} (also the side of the root's (a, b) child): 1, 3.
    assert support[frozenset("de")] == 75.0
    assert support[frozenset("cde")] == 50.0
    assert support[frozenset("ab")] == 50.0
    assert support[frozenset("abcde")] is None
    assert to_newick(supported) == "((a:1,b:1)50:1,(c:1,(d:1,e:1)75:1)50:1);"


def test_support_refuses_replicates_with_other_leaves() -> None:
    with pytest.raises(ValueError, match="replicate 1"):
        add_support(parse_newick("(a,b,c);"), [parse_newick("(a,b,x);")])
    with pytest.raises(ValueError, match="at least one"):
        add_support(parse_newick("(a,b,c);"), [])


# --- Newick ----------------------------------------------------------------------------------

AWKWARD = [
    "seq 1",
    "it's",
    "tail'",
    "a:b",
    "(x)",
    "c,d",
    "semi;colon",
    "[bracket]",
    'double"quote',
    "under_score",
    "ünïcødé δ",
    "x=1;y",
    "tab\there",
    "back\\slash",
    "bad\udcffbyte",
]


def awkward_tree(labels: list[str]) -> Node:
    d = random_matrix(3, len(labels))
    tree = build_tree(labels, d)
    return add_support(tree, [tree, neighbour_joining(labels, random_matrix(4, len(labels)))])


def test_newick_round_trips_through_biopython() -> None:
    tree = awkward_tree(AWKWARD)
    text = to_newick(tree)
    parsed = Phylo.read(io.StringIO(text), "newick")
    # Other readers see names as written: control characters and bytes that are not UTF-8 as
    # kinpress's backslash escapes, a backslash doubled (and quoted, which DendroPy needs).
    written = [escape_name(label) for label in AWKWARD]
    assert sorted(leaf.name for leaf in parsed.get_terminals()) == sorted(written)
    np.testing.assert_allclose(
        biopython_path_lengths(parsed, written), path_lengths(tree, AWKWARD), atol=1e-12
    )
    ours = sorted(n.support for n in preorder(tree) if n.children and n.support is not None)
    theirs = sorted(c.confidence for c in parsed.get_nonterminals() if c.confidence is not None)
    assert theirs == ours


def test_newick_round_trips_through_dendropy() -> None:
    # Biopython's reader drops a quote that opens a label ("'lead" reads as "lead"), so that
    # label is checked with DendroPy only.
    labels = [*AWKWARD, "'lead"]
    tree = awkward_tree(labels)
    parsed = dendropy.Tree.get(data=to_newick(tree), schema="newick", preserve_underscores=True)
    taxa = {taxon.label: taxon for taxon in parsed.taxon_namespace}
    written = [escape_name(label) for label in labels]
    assert sorted(taxa) == sorted(written)
    distances = parsed.phylogenetic_distance_matrix()
    expected = path_lengths(tree, labels)
    for (i, x), (j, y) in itertools.combinations(enumerate(written), 2):
        assert distances.patristic_distance(taxa[x], taxa[y]) == pytest.approx(expected[i, j])


def test_newick_round_trips_through_our_reader() -> None:
    labels = [*AWKWARD, "'lead", "", "95"]
    tree = awkward_tree(labels)
    text = to_newick(tree)
    parsed = parse_newick(text)
    assert to_newick(parsed) == text
    assert leaf_order(parsed) == leaf_order(tree)
    # lengths are written to ten significant digits
    np.testing.assert_allclose(
        path_lengths(parsed, labels), path_lengths(tree, labels), rtol=1e-9, atol=1e-12
    )


def test_newick_quotes_numeric_internal_names_so_they_stay_names() -> None:
    tree = Node(name="42", children=(Node(name="a"), Node(name="b", length=0.5)))
    assert to_newick(tree) == "(a,b:0.5)'42';"
    parsed = parse_newick(to_newick(tree))
    assert parsed.name == "42"
    assert parsed.support is None


def test_newick_reader_reads_support_comments_and_whitespace() -> None:
    tree = parse_newick(" ( a_1 : 1.5e-1 , [note] 'b c':2 ) 87.5 : 0 ; \n")
    assert tree.support == 87.5
    assert tree.length == 0.0
    assert [(c.name, c.length) for c in tree.children] == [("a_1", 0.15), ("b c", 2.0)]


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("(a,b", "no closing"),
        ("(a,b));", "outside parentheses"),
        ("((a,b);", "unclosed"),
        ("(a:x,b);", "not a number"),
        ("(a:,b);", "without a branch length"),
        ("(a,b); (c,d);", "after the closing"),
        ("(a b,c);", "unexpected label"),
    ],
)
def test_newick_reader_rejects_malformed_text(text: str, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        parse_newick(text)


def test_newick_refuses_non_finite_lengths() -> None:
    with pytest.raises(ValueError, match="inf"):
        to_newick(Node(children=(Node(name="a", length=float("inf")), Node(name="b"))))


# --- deep trees ------------------------------------------------------------------------------


def test_2000_leaf_caterpillar_round_trips_without_recursion_error() -> None:
    assert sys.getrecursionlimit() < 2000, "the tree must be deeper than the recursion limit"
    tree = Node(name="leaf0", length=1.0)
    for i in range(1, 2000):
        tree = Node(length=1.0, children=(tree, Node(name=f"leaf{i}", length=1.0)))
    tree = replace(tree, length=None)
    text = to_newick(tree)
    parsed = parse_newick(text)
    assert to_newick(parsed) == text
    names = leaf_order(parsed)
    assert names == [f"leaf{i}" for i in range(2000)]
    assert sum(1 for _ in postorder(parsed)) == 2 * 2000 - 1
    distances = path_lengths(parsed)
    # Path leaf0–leaf1999: leaf0 is 1999 branches deep, leaf1999 is 1: 1999 + 1.
    assert distances[0, -1] == 2000.0
    assert len(splits(parsed)) == 2000 - 3
    rooted = midpoint_root(parsed)
    np.testing.assert_array_equal(path_lengths(rooted, names), distances)
    assert to_newick(outgroup_root(parsed, "leaf0")).startswith("(leaf0:")
    assert to_newick(pickle.loads(pickle.dumps(parsed))) == text
    assert to_newick(copy.deepcopy(parsed)) == text
    assert "children=<2>" in repr(parsed)


# --- the tree as a result ----------------------------------------------------------------------

TREE_KEYS = ["newick", "method", "rooting", "outgroup", "leaves", "fit", "bootstrap",
             "compressor", "conditional", "strand"]  # fmt: skip


def test_tree_result_as_json_says_how_the_tree_was_made() -> None:
    dm = Matrix(tuple(WIKI_LABELS), WIKI_D.astype(float), compressor="zstd:level=19",
                conditional="primed", strand="both")  # fmt: skip
    tree = build_tree(dm.labels, dm.distances, "nj", outgroup=["d", "e"])
    support = Resampling(replicates=100, block_fraction=0.02, seed=7)
    result = TreeResult.of_matrix(tree, "nj", dm, outgroup=["d", "e"], support=support)
    doc = result.as_json()
    assert list(doc) == TREE_KEYS
    assert doc["rooting"] == "on d, e" and doc["outgroup"] == ["d", "e"] and doc["leaves"] == 5
    assert doc["bootstrap"] == {"replicates": 100, "block_fraction": 0.02, "seed": 7}
    assert (doc["compressor"], doc["conditional"], doc["strand"]) == (
        "zstd:level=19", "primed", "both"
    )  # fmt: skip
    # The Wikipedia matrix is additive for its tree, so the fit is perfect.
    assert doc["fit"] == 1.0
    assert parse_newick(doc["newick"]) is not None and doc["newick"] == to_newick(tree)


def test_tree_result_rooting_and_an_undefined_fit_read_plainly() -> None:
    d = np.array([[0.0, 1.0], [1.0, 0.0]])
    nj = TreeResult.of(build_tree(["x", "y"], d, "nj"), "nj", d, ["x", "y"])
    assert nj.rooting == "at the midpoint" and nj.as_json()["bootstrap"] is None
    # Two leaves leave the correlation undefined: null in JSON, which has no NaN (RFC 8259, 6).
    assert math.isnan(nj.fit) and nj.as_json()["fit"] is None
    upgma = TreeResult.of(build_tree(["x", "y"], d, "average"), "average", d, ["x", "y"])
    assert upgma.rooting == "by construction" and upgma.outgroup is None

"""Trees from distance matrices: building, rooting, Newick text, fit and branch support.

Every function works on plain values: ``labels`` (a sequence of distinct strings) and a square,
symmetric, non-negative ``distances`` array in the same order, or on a tree, which is its root
:class:`Node`. Unrooted trees (as neighbour joining produces) are held as a root with three
children, the usual convention. All traversals are iterative, so trees of any depth work.
"""

from __future__ import annotations

import itertools
import math
import re
from collections import Counter
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import numpy.typing as npt
from scipy.cluster.hierarchy import linkage
from scipy.spatial.distance import squareform

from .distance import check_distances
from .formats import json_ready
from .items import escape_name, unescape_name

if TYPE_CHECKING:
    from .distance import DistanceMatrix

__all__ = [
    "LinkageMethod",
    "Method",
    "Node",
    "Resampling",
    "TreeResult",
    "add_support",
    "build_tree",
    "fit_correlation",
    "leaf_order",
    "linkage_tree",
    "midpoint_root",
    "neighbour_joining",
    "outgroup_root",
    "parse_newick",
    "path_lengths",
    "postorder",
    "preorder",
    "splits",
    "to_newick",
]

Method = Literal["nj", "average", "complete", "single"]
LinkageMethod = Literal["average", "complete", "single"]
FloatMatrix = npt.NDArray[np.float64]
_Row = tuple[str | None, float | None, float | None, int]

_LINKAGE_METHODS: tuple[LinkageMethod, ...] = ("average", "complete", "single")


@dataclass(frozen=True, eq=False, repr=False)
class Node:
    """One node of a tree; a tree is its root node.

    ``length`` is the branch to the parent (``None`` at the root or when unknown) and
    ``support`` the percentage of bootstrap replicates containing the split that this node's
    branch defines (internal nodes only). Equality is identity and ``repr`` is shallow, because
    the generated dataclass versions recurse through ``children`` and overflow on deep trees;
    pickling and copying go through a flat list of nodes for the same reason.
    """

    name: str | None = None
    length: float | None = None
    children: tuple[Node, ...] = ()
    support: float | None = None

    @property
    def is_leaf(self) -> bool:
        return not self.children

    def __repr__(self) -> str:
        return (
            f"Node(name={self.name!r}, length={self.length!r}, "
            f"children=<{len(self.children)}>, support={self.support!r})"
        )

    def __reduce__(self) -> tuple[Callable[[list[_Row]], Node], tuple[list[_Row]]]:
        rows = [(n.name, n.length, n.support, len(n.children)) for n in preorder(self)]
        return _from_preorder, (rows,)


def _from_preorder(rows: list[_Row]) -> Node:
    """Inverse of ``Node.__reduce__``.

    In reversed preorder a node's children are already built, on top of the stack, first child
    uppermost.
    """
    done: list[Node] = []
    for name, length, support, count in reversed(rows):
        children = tuple(done.pop() for _ in range(count))
        done.append(Node(name=name, length=length, children=children, support=support))
    return done.pop()


def preorder(tree: Node) -> Iterator[Node]:
    """Nodes parent first, children left to right."""
    stack = [tree]
    while stack:
        node = stack.pop()
        yield node
        stack.extend(reversed(node.children))


def postorder(tree: Node) -> Iterator[Node]:
    """Nodes children first (left to right), parent last."""
    stack: list[tuple[Node, bool]] = [(tree, False)]
    while stack:
        node, expanded = stack.pop()
        if expanded or not node.children:
            yield node
        else:
            stack.append((node, True))
            stack.extend((child, False) for child in reversed(node.children))


def _leaf_name(node: Node) -> str:
    if node.name is None:
        raise ValueError("tree has a leaf without a name")
    return node.name


def _repeated(names: Iterable[str]) -> list[str]:
    return sorted(name for name, count in Counter(names).items() if count > 1)


def leaf_order(tree: Node) -> list[str]:
    """Leaf names left to right, e.g. for ordering heatmap rows beside a drawn tree."""
    names = [_leaf_name(node) for node in preorder(tree) if node.is_leaf]
    if len(set(names)) != len(names):
        raise ValueError(f"tree has duplicate leaf names: {_repeated(names)}")
    return names


def neighbour_joining(labels: Sequence[str], distances: npt.ArrayLike) -> Node:
    """Unrooted neighbour-joining tree, as a root with three children (two when n = 2).

    Saitou N, Nei M (1987) Mol Biol Evol 4:406–425, in the equivalent Q form of
    Studier JA, Keppler KJ (1988) Mol Biol Evol 5:729–731. With m active nodes and row sums
    r_i = Σ_k d_ik, each step joins the pair minimising

        Q_ij = (m − 2)·d_ij − r_i − r_j

    into a new node u with branch lengths

        δ_iu = d_ij / 2 + (r_i − r_j) / (2(m − 2)),   δ_ju = d_ij − δ_iu

    and distances d_uk = (d_ik + d_jk − d_ij) / 2 to the others. A negative δ is set to zero and
    the difference moved to its sibling, keeping δ_iu + δ_ju = d_ij (common practice); the last
    branch, which has no sibling, is only clipped at zero. Ties go to the first pair in row-major
    order of the working matrix.

    Each step is two whole-array numpy passes over the m×m working matrix, which is kept in
    place (the joined node takes the lower slot, the last active node moves into the upper), so
    the run is O(n³) time and O(n²) memory.
    """
    d = check_distances(distances, labels).copy()  # joined in place
    n = len(labels)
    nodes = [Node(name=label) for label in labels]
    if n == 1:
        return nodes[0]
    if n == 2:
        half = float(d[0, 1]) / 2
        return Node(children=(replace(nodes[0], length=half), replace(nodes[1], length=half)))

    r = d.sum(axis=1)
    q_buffer = np.empty(n * n)
    m = n
    joined = 0
    while m > 2:
        dm = d[:m, :m]
        # Q_ij / (m − 2) = d_ij − s_i − s_j with s = r / (m − 2); taking s_i off only the row
        # minima leaves two passes over the matrix per step, one to build and one to search.
        s = r[:m] / (m - 2)
        # A contiguous m×m view keeps those passes at memory speed.
        q = q_buffer[: m * m].reshape(m, m)
        np.subtract(dm, s, out=q)
        np.fill_diagonal(q, np.inf)
        best = q.argmin(axis=1)
        i = int((q[np.arange(m), best] - s).argmin())
        a, b = sorted((i, int(best[i])))
        dab = float(dm[a, b])
        length_a = dab / 2 + float(r[a] - r[b]) / (2 * (m - 2))
        length_b = dab - length_a
        if length_a < 0:
            length_a, length_b = 0.0, dab
        elif length_b < 0:
            length_a, length_b = dab, 0.0
        new_node = Node(
            children=(replace(nodes[a], length=length_a), replace(nodes[b], length=length_b))
        )

        new_row = (dm[a] + dm[b] - dab) / 2
        r[:m] += new_row - dm[a] - dm[b]
        new_row[a] = new_row[b] = 0.0
        dm[a, :] = new_row
        dm[:, a] = new_row
        r[a] = new_row.sum()
        nodes[a] = new_node

        last = m - 1
        if b != last:
            dm[b, :] = dm[last, :]
            dm[:, b] = dm[:, last]
            dm[b, b] = 0.0
            r[b] = r[last]
            nodes[b] = nodes[last]
        nodes.pop()
        joined = a
        m -= 1

    centre, other = nodes[joined], nodes[1 - joined]
    return Node(children=(*centre.children, replace(other, length=max(float(d[0, 1]), 0.0))))


def linkage_tree(
    labels: Sequence[str], distances: npt.ArrayLike, method: LinkageMethod = "average"
) -> Node:
    """Rooted ultrametric tree from hierarchical clustering (scipy.cluster.hierarchy.linkage).

    ``average`` is UPGMA (Sokal RR, Michener CD (1958) Univ Kansas Sci Bull 38:1409–1438);
    ``complete`` and ``single`` are the farthest- and nearest-neighbour linkages. With h the
    merge distance of a cluster (0 for a leaf), a child's branch is

        length = (h_parent − h_child) / 2

    so that the path between two leaves equals their cophenetic distance, the merge distance of
    their lowest common cluster.
    """
    if method not in _LINKAGE_METHODS:
        raise ValueError(f"unknown linkage method {method!r}; choose from {_LINKAGE_METHODS}")
    d = check_distances(distances, labels)
    n = len(labels)
    nodes = [Node(name=label) for label in labels]
    if n == 1:
        return nodes[0]
    merges = linkage(squareform(d, checks=False), method=method)
    heights = np.concatenate([np.zeros(n), merges[:, 2]])
    for left, right, height, _size in merges:
        children = []
        for child in (int(left), int(right)):
            # Rounding in the Lance–Williams updates can leave a parent a few ulps below a child.
            length = max((float(height) - float(heights[child])) / 2, 0.0)
            children.append(replace(nodes[child], length=length))
        nodes.append(Node(children=tuple(children)))
    return nodes[-1]


def build_tree(
    labels: Sequence[str],
    distances: npt.ArrayLike,
    method: Method = "nj",
    outgroup: str | Iterable[str] | None = None,
) -> Node:
    """Rooted tree by ``method``: ``nj``, ``average`` (UPGMA), ``complete`` or ``single``.

    Neighbour-joining trees are rooted on the branch above ``outgroup`` (one label or several
    forming a clade) or, without one, at the midpoint. Linkage trees are rooted by construction,
    so an outgroup is refused for them.
    """
    if method == "nj":
        tree = neighbour_joining(labels, distances)
        return midpoint_root(tree) if outgroup is None else outgroup_root(tree, outgroup)
    if method in _LINKAGE_METHODS:
        if outgroup is not None:
            raise ValueError(f"{method!r} trees are rooted by construction; outgroup needs 'nj'")
        return linkage_tree(labels, distances, method)
    raise ValueError(f"unknown method {method!r}; choose from {('nj', *_LINKAGE_METHODS)}")


@dataclass
class _Unrooted:
    """A tree as an undirected graph; each edge carries the length and support of its branch."""

    nodes: list[Node]
    edges: list[list[tuple[int, float | None, float | None]]]

    def is_leaf(self, index: int) -> bool:
        return self.nodes[index].is_leaf


def _unrooted(tree: Node) -> _Unrooted:
    """Graph of ``tree`` with its root removed when it is only a bend in a branch.

    A root with one child, or an unnamed root with two, is not a node of the unrooted tree;
    dropping it lets rerooting split the whole branch rather than half of it.
    """
    while len(tree.children) == 1:
        tree = tree.children[0]
    graph = _Unrooted(nodes=[], edges=[])
    bend = len(tree.children) == 2 and tree.name is None
    stack: list[tuple[Node, int]] = [(tree, -1)]
    while stack:
        node, parent = stack.pop()
        index = len(graph.nodes)
        graph.nodes.append(node)
        graph.edges.append([])
        if parent >= 0:
            graph.edges[parent].append((index, node.length, node.support))
            graph.edges[index].append((parent, node.length, node.support))
        stack.extend((child, index) for child in reversed(node.children))
    if bend:
        (left, left_length, left_support), (right, right_length, right_support) = graph.edges[0]
        length = (
            None
            if left_length is None and right_length is None
            else ((left_length or 0.0) + (right_length or 0.0))
        )
        support = left_support if left_support is not None else right_support
        graph.edges[0] = []
        graph.edges[left][0] = (right, length, support)
        graph.edges[right][0] = (left, length, support)
    return graph


def _walk(graph: _Unrooted, start: int) -> tuple[list[int], list[int], list[float]]:
    """Preorder from ``start``, with each node's parent and path length from ``start``."""
    count = len(graph.nodes)
    parent = [-1] * count
    distance = [0.0] * count
    order = []
    stack = [start]
    seen = [False] * count
    seen[start] = True
    while stack:
        node = stack.pop()
        order.append(node)
        for neighbour, length, _support in graph.edges[node]:
            if not seen[neighbour]:
                seen[neighbour] = True
                parent[neighbour] = node
                distance[neighbour] = distance[node] + (length or 0.0)
                stack.append(neighbour)
    return order, parent, distance


def _rooted(
    graph: _Unrooted,
    top: list[tuple[int, int, float | None, float | None]],
    name: str | None = None,
) -> Node:
    """Rooted tree whose root, called ``name``, has the given children.

    Each entry of ``top`` is (node, neighbour on the root's side, branch length, support); the
    subtree of a node is everything reachable without going back through that neighbour.
    """
    # Position 0 of `order` stands for the new root, which has no graph node of its own.
    order: list[tuple[int, float | None, float | None]] = [(-1, None, None)]
    children: list[list[int]] = [[]]
    stack = [(node, came_from, length, support, 0) for node, came_from, length, support in top]
    stack.reverse()
    while stack:
        node, came_from, length, support, parent_position = stack.pop()
        position = len(order)
        order.append((node, length, support))
        children.append([])
        children[parent_position].append(position)
        stack.extend(
            (neighbour, node, edge_length, edge_support, position)
            for neighbour, edge_length, edge_support in reversed(graph.edges[node])
            if neighbour != came_from
        )
    built: dict[int, Node] = {}
    for position in range(len(order) - 1, 0, -1):
        node, length, support = order[position]
        kids = tuple(built.pop(k) for k in children[position])
        built[position] = Node(
            name=graph.nodes[node].name,
            length=length,
            children=kids,
            support=support if kids else None,
        )
    return Node(name=name, children=tuple(built.pop(k) for k in children[0]))


def midpoint_root(tree: Node) -> Node:
    """Root at the midpoint of the longest leaf-to-leaf path (Farris JS (1972) Am Nat 106:645).

    The longest path is found by two farthest-leaf sweeps, exact on trees with non-negative
    branch lengths; missing lengths count as zero. The root goes on the branch holding the
    midpoint, split there, or on the node itself when the midpoint falls on one.
    """
    graph = _unrooted(tree)
    leaves = [index for index in range(len(graph.nodes)) if graph.is_leaf(index)]
    if len(leaves) < 2:
        return tree
    _order, _parent, from_first = _walk(graph, leaves[0])
    end_a = max(leaves, key=from_first.__getitem__)
    _order, parent, from_a = _walk(graph, end_a)
    end_b = max((leaf for leaf in leaves if leaf != end_a), key=from_a.__getitem__)
    path = [end_b]
    while path[-1] != end_a:
        path.append(parent[path[-1]])
    path.reverse()
    diameter = from_a[end_b]
    middle = diameter / 2
    tolerance = 1e-12 * diameter
    previous, node = next(
        (previous, node)
        for previous, node in itertools.pairwise(path)
        if from_a[node] >= middle - tolerance
    )
    if not graph.is_leaf(node) and abs(from_a[node] - middle) <= tolerance:
        top = [(neighbour, node, ln, sp) for neighbour, ln, sp in graph.edges[node]]
        return _rooted(graph, top, graph.nodes[node].name)
    support = next(sp for nb, _ln, sp in graph.edges[node] if nb == previous)
    return _rooted(
        graph,
        [
            (previous, node, max(middle - from_a[previous], 0.0), support),
            (node, previous, max(from_a[node] - middle, 0.0), support),
        ],
    )


def outgroup_root(tree: Node, outgroup: str | Iterable[str]) -> Node:
    """Root on the middle of the branch that separates ``outgroup`` from the other leaves.

    ``outgroup`` is one leaf name or several; they must form one side of a branch of the
    unrooted tree (a clade once rooted there), and become the root's first child.
    """
    wanted = {outgroup} if isinstance(outgroup, str) else set(outgroup)
    names = leaf_order(tree)
    unknown = sorted(wanted - set(names))
    if unknown:
        raise ValueError(f"outgroup names not in the tree: {unknown}")
    if not wanted or len(wanted) == len(names):
        raise ValueError("outgroup must contain some but not all leaves")
    bit = {name: 1 << i for i, name in enumerate(names)}
    target = sum(bit[name] for name in wanted)
    everything = (1 << len(names)) - 1

    graph = _unrooted(tree)
    leaves = [index for index in range(len(graph.nodes)) if graph.is_leaf(index)]
    order, parent, _distance = _walk(graph, leaves[0])
    masks = [0] * len(graph.nodes)
    for node in reversed(order):
        if graph.is_leaf(node):
            masks[node] |= bit[_leaf_name(graph.nodes[node])]
        if parent[node] >= 0:
            masks[parent[node]] |= masks[node]
    for node in order[1:]:
        if masks[node] in (target, everything ^ target):
            above = parent[node]
            length, support = next((ln, sp) for nb, ln, sp in graph.edges[node] if nb == above)
            half = None if length is None else length / 2
            inside, outside = (node, above) if masks[node] == target else (above, node)
            return _rooted(
                graph, [(inside, outside, half, support), (outside, inside, half, support)]
            )
    raise ValueError(f"outgroup {sorted(wanted)} is not a clade of the tree")


def path_lengths(tree: Node, labels: Sequence[str] | None = None) -> FloatMatrix:
    """Patristic distances: d_T(x, y) = sum of branch lengths on the path between leaves x, y.

    Rows and columns follow ``labels`` (default: :func:`leaf_order`), which must name exactly
    the tree's leaves. Uses d_T(x, y) = depth(x) + depth(y) − 2·depth(lca(x, y)), filling each
    block of leaf pairs whose lowest common ancestor is a given node at once.
    """
    names = leaf_order(tree)
    order = list(names if labels is None else labels)
    if sorted(order) != sorted(names):
        raise ValueError("labels must name exactly the leaves of the tree")
    index = {name: i for i, name in enumerate(order)}
    n = len(order)
    depth_of = {id(tree): 0.0}
    leaf_depth = np.zeros(n)
    for node in preorder(tree):
        depth = depth_of[id(node)]
        for child in node.children:
            depth_of[id(child)] = depth + (child.length or 0.0)
        if node.is_leaf:
            leaf_depth[index[_leaf_name(node)]] = depth
    result = np.zeros((n, n))
    below: dict[int, npt.NDArray[np.intp]] = {}
    for node in postorder(tree):
        if node.is_leaf:
            below[id(node)] = np.array([index[_leaf_name(node)]])
            continue
        groups = [below.pop(id(child)) for child in node.children]
        twice_depth = 2 * depth_of[id(node)]
        for k, rows in enumerate(groups):
            for cols in groups[k + 1 :]:
                block = leaf_depth[rows, None] + leaf_depth[None, cols] - twice_depth
                result[np.ix_(rows, cols)] = block
                result[np.ix_(cols, rows)] = block.T
        below[id(node)] = np.concatenate(groups)
    return result


def fit_correlation(tree: Node, labels: Sequence[str], distances: npt.ArrayLike) -> float:
    """Pearson correlation between the tree's path lengths and the input distances.

    r = Σ (t − t̄)(d − d̄) / √(Σ (t − t̄)² · Σ (d − d̄)²) over all pairs i < j; for linkage trees
    this is the cophenetic correlation (Sokal RR, Rohlf FJ (1962) Taxon 11:33–40). NaN when
    either side is constant (including fewer than three items).
    """
    d = check_distances(distances, labels)
    if len(labels) < 3:
        return math.nan
    upper = np.triu_indices(len(labels), k=1)
    t = path_lengths(tree, labels)[upper]
    x = d[upper]
    t = t - t.mean()
    x = x - x.mean()
    denominator = math.sqrt(float(t @ t) * float(x @ x))
    return float(t @ x) / denominator if denominator > 0 else math.nan


def _split_masks(tree: Node, bit: dict[str, int]) -> Iterator[tuple[Node, int]]:
    """Each non-root node with the leaves below it as a bitmask (postorder)."""
    masks: dict[int, int] = {}
    for node in postorder(tree):
        if node.is_leaf:
            mask = bit[_leaf_name(node)]
        else:
            mask = 0
            for child in node.children:
                mask |= masks.pop(id(child))
        masks[id(node)] = mask
        if node is not tree:
            yield node, mask


def _leaf_bits(tree: Node) -> tuple[list[str], dict[str, int]]:
    """Leaf names sorted, and a bit per name; bit 0 is the reference leaf for normalising."""
    names = sorted(leaf_order(tree))
    return names, {name: 1 << i for i, name in enumerate(names)}


def _normalised(mask: int, everything: int) -> int:
    return everything ^ mask if mask & 1 else mask


def splits(tree: Node) -> frozenset[frozenset[str]]:
    """Non-trivial bipartitions of the leaves (both sides ≥ 2 leaves), rooting ignored.

    Each split is given by the side without the reference leaf, the alphabetically first leaf
    name, so trees with the same unrooted topology give equal sets.
    """
    names, bit = _leaf_bits(tree)
    everything = (1 << len(names)) - 1
    found = set()
    for _node, mask in _split_masks(tree, bit):
        side = _normalised(mask, everything)
        if 2 <= side.bit_count() <= len(names) - 2:
            found.add(side)
    return frozenset(
        frozenset(name for i, name in enumerate(names) if side >> i & 1) for side in found
    )


def add_support(tree: Node, replicates: Iterable[Node]) -> Node:
    """Copy of ``tree`` with each internal non-root node's ``support`` set from ``replicates``.

    support = 100 · (replicates containing the split of the node's branch) / (replicates), the
    bootstrap proportion of Felsenstein J (1985) Evolution 39:783–791. Replicates must have the
    same leaf names as ``tree``; their rooting does not matter.
    """
    names, bit = _leaf_bits(tree)
    everything = (1 << len(names)) - 1
    counts: Counter[int] = Counter()
    total = 0
    for replicate in replicates:
        if sorted(leaf_order(replicate)) != names:
            raise ValueError(f"replicate {total + 1} has different leaf names from the tree")
        counts.update(
            {_normalised(mask, everything) for _node, mask in _split_masks(replicate, bit)}
        )
        total += 1
    if total == 0:
        raise ValueError("add_support needs at least one replicate tree")
    support = {
        id(node): 100.0 * counts[_normalised(mask, everything)] / total
        for node, mask in _split_masks(tree, bit)
        if not node.is_leaf
    }
    built: dict[int, Node] = {}
    for node in postorder(tree):
        children = tuple(built.pop(id(child)) for child in node.children)
        built[id(node)] = replace(node, children=children, support=support.get(id(node)))
    return built[id(tree)]


# Newick, the open format agreed informally in 1986: nested parentheses, ':' before a branch
# length, a label after each node, single quotes around labels with blanks or punctuation.
_NEEDS_QUOTES = re.compile(r"[\s()\[\]':;,\"\\]")
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_TOKEN = re.compile(r"\s+|\[[^\]]*\]|'(?:[^']|'')*'|[(),:;]|[^\s()\[\]':;,]+")


def _format_label(name: str, internal: bool) -> str:
    # Control characters and bytes that are not UTF-8 are escaped as in every output; a backslash
    # (doubled by the escape) is quoted, as some readers refuse it bare. A numeric internal label
    # would read back as a support value, so it is quoted too.
    label = escape_name(name)
    if label and not _NEEDS_QUOTES.search(label) and not (internal and _NUMBER.fullmatch(label)):
        return label
    return "'" + label.replace("'", "''") + "'"


def _format_number(value: float) -> str:
    if not math.isfinite(value):
        raise ValueError(f"cannot write {value} in Newick")
    # Ten significant digits: far finer than any compression distance, and short to read.
    return f"{float(value):.10g}"


def _newick_suffix(node: Node) -> str:
    if node.children and node.support is not None:
        text = _format_number(node.support)
    elif node.name is not None:
        text = _format_label(node.name, internal=bool(node.children))
    else:
        text = ""
    if node.length is not None:
        text += ":" + _format_number(node.length)
    return text


def to_newick(tree: Node) -> str:
    """Newick text of ``tree``, ending in ``;``.

    Branch lengths follow ``:``; an internal node's support is written as its label (instead of
    its name, if it has both). Names are written by `escape_name` (control characters and bytes
    that are not UTF-8 as backslash escapes); labels with blanks, ``()[]':;,``, ``"`` or a
    backslash are single-quoted with quotes doubled; underscores are written as they are, so
    readers that turn unquoted underscores into spaces need their option to keep them.
    """
    out: list[str] = []
    stack: list[Node | str] = [tree]
    while stack:
        item = stack.pop()
        if isinstance(item, str):
            out.append(item)
        elif item.children:
            out.append("(")
            stack.append(_newick_suffix(item))
            stack.append(")")
            for k, child in enumerate(reversed(item.children)):
                if k:
                    stack.append(",")
                stack.append(child)
        else:
            out.append(_newick_suffix(item))
    out.append(";")
    return "".join(out)


def parse_newick(text: str) -> Node:
    """Read one Newick tree (as written by :func:`to_newick`; ``[...]`` comments are skipped).

    An unquoted numeric label on an internal node is read as its support, any other label as a
    name; quoted labels have doubled quotes undone, escapes of `escape_name` are undone and
    unquoted underscores are kept.
    """
    open_groups: list[list[Node]] = []
    children: tuple[Node, ...] = ()
    label: str | None = None
    quoted = False
    length: float | None = None
    want_length = False
    root: Node | None = None

    def fail(message: str, position: int) -> ValueError:
        return ValueError(f"bad Newick at character {position + 1}: {message}")

    def finish(position: int) -> Node:
        if want_length:
            raise fail("':' without a branch length", position)
        if not children:
            return Node(name=label, length=length)
        if label is not None and not quoted and _NUMBER.fullmatch(label):
            return Node(length=length, children=children, support=float(label))
        return Node(name=label, length=length, children=children)

    position = 0
    while position < len(text):
        match = _TOKEN.match(text, position)
        if match is None:
            raise fail(f"unexpected {text[position]!r}", position)
        token = match.group()
        if root is not None and not (token.isspace() or token.startswith("[")):
            raise fail("text after the closing ';'", position)
        if token.isspace() or token.startswith("["):
            pass
        elif token == "(":
            if children or label is not None or length is not None or want_length:
                raise fail("'(' after a label or length", position)
            open_groups.append([])
        elif token in ",)":
            if not open_groups:
                raise fail(f"{token!r} outside parentheses", position)
            open_groups[-1].append(finish(position))
            children = tuple(open_groups.pop()) if token == ")" else ()
            label, quoted, length = None, False, None
        elif token == ":":
            if length is not None or want_length:
                raise fail("second branch length", position)
            want_length = True
        elif token == ";":
            if open_groups:
                raise fail(f"{len(open_groups)} unclosed '('", position)
            root = finish(position)
        elif want_length:
            if not _NUMBER.fullmatch(token):
                raise fail(f"branch length {token!r} is not a number", position)
            length = float(token)
            want_length = False
        elif label is not None or length is not None:
            raise fail(f"unexpected label {token!r}", position)
        elif token.startswith("'"):
            label, quoted = unescape_name(token[1:-1].replace("''", "'")), True
        else:
            label, quoted = unescape_name(token), False
        position = match.end()
    if root is None:
        raise ValueError("bad Newick: no closing ';'")
    return root


@dataclass(frozen=True)
class Resampling:
    """How branch support was counted: `replicates` bootstrap replicates of every item, each
    resampled in blocks of `block_fraction` of its length, drawn from `seed` (see
    `support.bootstrap_support`)."""

    replicates: int
    block_fraction: float
    seed: int


@dataclass(frozen=True)
class TreeResult:
    """A tree and how it was made: `method`, the `outgroup` it is rooted on (None: at the
    midpoint for neighbour joining, by construction for linkage trees), `support` (None without
    a bootstrap), `fit` (`fit_correlation` with the distances, NaN when undefined) and the
    measurement behind the distances.

    >>> d = np.array([[0, 2, 4], [2, 0, 4], [4, 4, 0]], dtype=float)
    >>> tree = build_tree(["a", "b", "c"], d, "average")
    >>> result = TreeResult.of(tree, "average", d, ["a", "b", "c"])
    >>> result.newick, result.rooting, result.as_json()["fit"]
    ('(c:2,(a:1,b:1):1);', 'by construction', 1.0)
    """

    tree: Node
    method: str
    fit: float
    outgroup: tuple[str, ...] | None = None
    support: Resampling | None = None
    compressor: str = ""
    conditional: str = ""
    strand: str = "one"

    @classmethod
    def of(
        cls,
        tree: Node,
        method: str,
        distances: npt.ArrayLike,
        labels: Sequence[str],
        outgroup: Iterable[str] | None = None,
        support: Resampling | None = None,
    ) -> TreeResult:
        """The result for `tree`, built by `method` from `distances` between `labels`."""
        return cls(
            tree, method, fit_correlation(tree, labels, distances),
            tuple(outgroup) if outgroup else None, support,
        )  # fmt: skip

    @classmethod
    def of_matrix(
        cls,
        tree: Node,
        method: str,
        dm: DistanceMatrix,
        outgroup: Iterable[str] | None = None,
        support: Resampling | None = None,
    ) -> TreeResult:
        """The result for `tree`, built by `method` from the matrix `dm` (its measurement kept)."""
        found = cls.of(tree, method, dm.distances, dm.labels, outgroup, support)
        return replace(
            found, compressor=dm.compressor, conditional=dm.conditional, strand=dm.strand
        )

    @property
    def rooting(self) -> str:
        """Where the tree is rooted, in words."""
        if self.outgroup:
            return f"on {', '.join(self.outgroup)}"
        return "at the midpoint" if self.method == "nj" else "by construction"

    @property
    def newick(self) -> str:
        """The Newick text of the tree (see `to_newick`), without a line break."""
        return to_newick(self.tree)

    @property
    def leaves(self) -> int:
        return sum(1 for node in preorder(self.tree) if not node.children)

    def to_phylo(self) -> Any:
        """The tree as a Bio.Phylo Newick tree, support as confidence (`convert.tree_phylo`)."""
        from .convert import tree_phylo

        return tree_phylo(self)

    def as_json(self) -> dict[str, object]:
        """Newick, method, rooting, outgroup, leaves, fit (6 decimals), bootstrap (replicates,
        block_fraction, seed; null without one), compressor, conditional, strand."""
        return dict(
            json_ready(
                {
                    "newick": self.newick,
                    "method": self.method,
                    "rooting": self.rooting,
                    "outgroup": self.outgroup,
                    "leaves": self.leaves,
                    "fit": round(self.fit, 6),
                    "bootstrap": self.support,
                    "compressor": self.compressor,
                    "conditional": self.conditional,
                    "strand": self.strand,
                }
            )
        )

"""A tree against distances and other trees: path lengths, fit, splits and branch support
(see kinpress.trees)."""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import replace

import numpy as np
import numpy.typing as npt

from ..distance import check_distances
from .node import FloatMatrix, Node, _leaf_name, leaf_order, postorder, preorder


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

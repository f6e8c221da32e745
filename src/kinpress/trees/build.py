"""Trees built from distances: neighbour joining and linkage trees (see kinpress.trees)."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import replace

import numpy as np
import numpy.typing as npt
from scipy.cluster.hierarchy import linkage
from scipy.spatial.distance import squareform

from ..distance import check_distances
from .node import _LINKAGE_METHODS, FloatMatrix, LinkageMethod, Method, Node
from .rooting import midpoint_root, outgroup_root


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
        a, b = _closest_pair(dm, r[:m], q_buffer)
        length_a, length_b = _branch_lengths(float(dm[a, b]), float(r[a] - r[b]), m)
        new_node = Node(
            children=(replace(nodes[a], length=length_a), replace(nodes[b], length=length_b))
        )
        _join(dm, r, nodes, a, b, new_node)
        joined = a
        m -= 1

    centre, other = nodes[joined], nodes[1 - joined]
    return Node(children=(*centre.children, replace(other, length=max(float(d[0, 1]), 0.0))))


def _closest_pair(dm: FloatMatrix, r: FloatMatrix, q_buffer: FloatMatrix) -> tuple[int, int]:
    """The pair (a < b) of the m active nodes that minimises Q (see `neighbour_joining`)."""
    m = len(dm)
    # Q_ij / (m − 2) = d_ij − s_i − s_j with s = r / (m − 2); taking s_i off only the row
    # minima leaves two passes over the matrix per step, one to build and one to search.
    s = r / (m - 2)
    # A contiguous m×m view keeps those passes at memory speed.
    q = q_buffer[: m * m].reshape(m, m)
    np.subtract(dm, s, out=q)
    np.fill_diagonal(q, np.inf)
    best = q.argmin(axis=1)
    i = int((q[np.arange(m), best] - s).argmin())
    a, b = sorted((i, int(best[i])))
    return a, b


def _branch_lengths(dab: float, r_difference: float, m: int) -> tuple[float, float]:
    """δ_au and δ_bu of the joined pair, a negative one set to zero and the difference moved to
    its sibling (see `neighbour_joining`)."""
    length_a = dab / 2 + r_difference / (2 * (m - 2))
    length_b = dab - length_a
    if length_a < 0:
        length_a, length_b = 0.0, dab
    elif length_b < 0:
        length_a, length_b = dab, 0.0
    return length_a, length_b


def _join(
    dm: FloatMatrix, r: FloatMatrix, nodes: list[Node], a: int, b: int, new_node: Node
) -> None:
    """Put the joined node in slot a of the working matrix `dm` (m×m), its row sums `r` and
    `nodes`, and move the last active node into slot b."""
    m = len(dm)
    dab = float(dm[a, b])
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

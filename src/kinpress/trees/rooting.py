"""Rooting: at the midpoint of the longest path, or on an outgroup (see kinpress.trees)."""

from __future__ import annotations

import itertools
from collections.abc import Iterable
from dataclasses import dataclass

from .node import Node, _leaf_name, leaf_order


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

"""Nodes of a tree, traversals and leaf order (see kinpress.trees)."""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from typing import Literal

import numpy as np
import numpy.typing as npt

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

"""Trees from distance matrices: building, rooting, Newick text, fit and branch support.

Every function works on plain values: ``labels`` (a sequence of distinct strings) and a square,
symmetric, non-negative ``distances`` array in the same order, or on a tree, which is its root
:class:`Node`. Unrooted trees (as neighbour joining produces) are held as a root with three
children, the usual convention. All traversals are iterative, so trees of any depth work.
"""

from .build import build_tree, linkage_tree, neighbour_joining
from .compare import add_support, fit_correlation, path_lengths, splits
from .newick import parse_newick, to_newick
from .node import LinkageMethod, Method, Node, leaf_order, postorder, preorder
from .result import Resampling, TreeResult
from .rooting import midpoint_root, outgroup_root

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

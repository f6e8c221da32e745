"""`TreeResult`: a tree and how it was made (see kinpress.trees)."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy.typing as npt

from ..formats import json_ready
from .compare import fit_correlation
from .newick import to_newick
from .node import Node, preorder

if TYPE_CHECKING:
    from ..distance import DistanceMatrix


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

    >>> import numpy as np
    >>> from kinpress.trees import build_tree
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
        from ..convert import tree_phylo

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

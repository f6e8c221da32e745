"""Results as other libraries' values: pandas data frames and Biopython trees.

The result classes call these through thin methods (`DistanceMatrix.to_frame`,
`GroupingResult.to_frame`, `Classification.to_frame`, `DerivedReport.to_frame`,
`Neighbours.to_frame`, `TreeResult.to_phylo`). pandas is optional (the `pandas` extra): it is
imported when a frame is asked for, and its absence is a one-line ImportError saying what to
install. Biopython is a dependency of kinpress.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from .derived import DerivedReport
    from .distance import DistanceMatrix
    from .groups import GroupingResult
    from .neighbours import Neighbours
    from .origins import Classification
    from .trees import Node, TreeResult

__all__ = [
    "PANDAS_HINT",
    "classification_frame",
    "findings_frame",
    "grouping_frame",
    "matrix_frame",
    "neighbours_frame",
    "tree_phylo",
]

PANDAS_HINT = "pandas is needed for data frames: pip install 'kinpress[pandas]'"


def _pandas() -> Any:
    try:
        import pandas
    except ImportError as error:
        raise ImportError(PANDAS_HINT) from error
    return pandas


def _records(rows: Iterable[Mapping[str, object]], columns: Sequence[str], index: str) -> Any:
    pd = _pandas()
    return pd.DataFrame.from_records(list(rows), columns=list(columns)).set_index(index)


def matrix_frame(dm: DistanceMatrix) -> Any:
    """The distances as a square frame, rows and columns named by the labels."""
    pd = _pandas()
    labels = list(dm.labels)
    return pd.DataFrame(np.array(dm.distances, dtype=np.float64), index=labels, columns=labels)


def grouping_frame(result: GroupingResult) -> Any:
    """One row per item (index `item`, input order): group (-1 for a reported outlier), medoid,
    outlier."""
    rows = (
        {"item": name, "group": group, "medoid": medoid, "outlier": outlier}
        for name, group, medoid, outlier in result.rows()
    )
    return _records(rows, ("item", "group", "medoid", "outlier"), "item")


_PREDICTION_COLUMNS = (
    "item", "predicted", "decision", "candidates", "best", "confidence", "credibility",
    "beyond_rate", "nearest", "distance", "path", "hash",
)  # fmt: skip


def classification_frame(found: Classification) -> Any:
    """One row per classified item (index `item`): the prediction's fields (`predicted` None
    where no origin is named, `candidates` joined by commas), then one column per origin of
    its score (`score:<origin>`) and, when there are p-values, `p:<origin>`."""
    rows = []
    for p in found.predictions:
        row: dict[str, object] = {
            "item": p.item,
            "predicted": p.predicted,
            "decision": p.decision,
            "candidates": ",".join(p.candidates),
            "best": p.best,
            "confidence": p.confidence,
            "credibility": p.credibility,
            "beyond_rate": p.beyond_rate,
            "nearest": p.nearest,
            "distance": p.distance,
            "path": p.path,
            "hash": p.hash,
        }
        row.update({f"score:{o}": v for o, v in p.scores})
        if p.p_values is not None:
            row.update({f"p:{o}": v for o, v in p.p_values})
        rows.append(row)
    columns = [*_PREDICTION_COLUMNS, *(f"score:{o}" for o in found.origins)]
    if found.p_values is not None:
        columns += [f"p:{o}" for o in found.origins]
    return _records(rows, columns, "item")


_FINDING_COLUMNS = (
    "a", "b", "relation", "a_explained_by_b", "b_explained_by_a", "score", "fpr",
    "a_shared_in_order", "b_shared_in_order", "passages", "a_path", "b_path", "a_hash", "b_hash",
)  # fmt: skip


def findings_frame(report: DerivedReport, same_source: bool = False) -> Any:
    """One row per finding (score order, highest first; with `same_source` the same-source
    pairs follow): the fields of `DerivedFinding.as_json`, `passages` counting the stretches."""
    pd = _pandas()
    found = [*report.findings, *(report.same_source if same_source else ())]
    rows = [
        {
            "a": f.a,
            "b": f.b,
            "relation": f.relation,
            "a_explained_by_b": f.a_explained_by_b,
            "b_explained_by_a": f.b_explained_by_a,
            "score": f.score,
            "fpr": f.fpr,
            "a_shared_in_order": f.a_in_order,
            "b_shared_in_order": f.b_in_order,
            "passages": len(f.stretches),
            "a_path": f.a_path,
            "b_path": f.b_path,
            "a_hash": f.a_hash,
            "b_hash": f.b_hash,
        }
        for f in found
    ]
    return pd.DataFrame.from_records(rows, columns=list(_FINDING_COLUMNS))


def neighbours_frame(found: Neighbours) -> Any:
    """One row per found neighbour: item, rank (from 1), neighbour, ncd."""
    pd = _pandas()
    return pd.DataFrame.from_records(
        list(found.rows()), columns=["item", "rank", "neighbour", "ncd"]
    )


def tree_phylo(result: TreeResult | Node) -> Any:
    """The tree as a `Bio.Phylo.Newick.Tree`: the same topology, leaf names, branch lengths and
    bootstrap support (as each clade's `confidence`, a percentage), rooted as ours is."""
    from Bio.Phylo.Newick import Clade, Tree

    from .trees import Node, postorder

    root = result if isinstance(result, Node) else result.tree
    built: dict[int, Any] = {}
    for node in postorder(root):
        built[id(node)] = Clade(
            branch_length=node.length,
            name=node.name,
            clades=[built.pop(id(child)) for child in node.children],
            confidence=node.support,
        )  # type: ignore[no-untyped-call]
    return Tree(root=built.pop(id(root)), rooted=True)  # type: ignore[no-untyped-call]

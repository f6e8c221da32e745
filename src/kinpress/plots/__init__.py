"""Figures of results: trees as rectangular phylograms, distance matrices as heatmaps.

Nothing here computes a result: trees, their leaf order and distances come from
:mod:`kinpress.trees` and :class:`~kinpress.distance.DistanceMatrix`. Each ``*_figure`` function
returns a :class:`matplotlib.figure.Figure` (no pyplot state) laid out in inches from measured
text, so every label fits inside it at any size; each ``plot_*`` function writes that figure as
PNG, SVG or PDF, chosen by the file extension, through a temporary file and a rename.

The modules: :mod:`._layout` (files, measured text, colours, the page), and one per figure,
:mod:`.tree`, :mod:`.heatmap` and :mod:`.calibration`.
"""

from ._layout import FORMATS, figure_format, write_figure
from .calibration import calibration_figure, plot_calibration
from .heatmap import LABEL_LIMIT, heatmap_figure, plot_heatmap
from .tree import plot_tree, tree_figure

__all__ = [
    "FORMATS",
    "LABEL_LIMIT",
    "calibration_figure",
    "figure_format",
    "heatmap_figure",
    "plot_calibration",
    "plot_heatmap",
    "plot_tree",
    "tree_figure",
    "write_figure",
]

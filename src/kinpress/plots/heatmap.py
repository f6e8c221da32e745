"""Distance matrices as heatmaps, rows and columns in a given order, classes along the edges."""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass

import matplotlib
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from ..distance import DistanceMatrix
from ..trees import Node, leaf_order
from ._layout import (
    _MARGIN,
    _NO_CLASS,
    Colour,
    _class_colours,
    _font_size,
    _heading,
    _heading_size,
    _legend,
    _legend_size,
    _literal,
    _Page,
    _text_width,
    figure_format,
    write_figure,
)

LABEL_LIMIT = 150
"""Heatmaps name their rows and columns up to this many items."""

_STRIP = 0.16  # inches across a class strip
_STRIP_GAP = 0.04
_BAR_GAP = 0.15  # inches between the matrix and its colour bar
_BAR_WIDTH = 0.2
_LEGEND_GAP = 0.2  # inches between the colour bar's label and the class legend


def _permutation(dm: DistanceMatrix, order: Sequence[str] | None) -> list[int]:
    """Indexes of ``order`` in ``dm.labels``; ``order`` must name each label once."""
    if order is None:
        return list(range(len(dm)))
    where = {label: i for i, label in enumerate(dm.labels)}
    if len(order) != len(dm) or set(order) != set(where):
        missing = sorted(set(where) - set(order))[:5]
        extra = sorted(set(order) - set(where))[:5]
        raise ValueError(
            f"order must name each of the {len(dm)} labels once; missing {missing}, unknown "
            f"{extra}, {len(order)} given"
        )
    return [where[label] for label in order]


_DIAGONAL_COLOUR = "#d9d9d9"  # neutral grey: an item against itself says nothing of the others


def _colour_range(values: np.ndarray) -> tuple[float, float]:
    """The smallest and largest finite distance off the diagonal, which the colours span.

    A zero diagonal would pin the scale at 0 and leave a set whose distances all lie in, say,
    0.84-1.06 (log chunks of one kind) in one colour; without two distinct values off the
    diagonal, 0 to the largest distance or 1.
    """
    off = values[~np.eye(len(values), dtype=bool)]
    finite = off[np.isfinite(off)]
    if finite.size and finite.max() > finite.min():
        return float(finite.min()), float(finite.max())
    return 0.0, max(1.0, float(finite.max()) if finite.size else 1.0)


def _caption(dm: DistanceMatrix, low: float, high: float) -> str:
    parts = [f"compressor {dm.compressor}"] if dm.compressor else []
    if dm.conditional:
        parts.append(f"conditional {dm.conditional}")
    if dm.strand == "both":
        parts.append("both strands")
    span = f"colours span {low:.3g} to {high:.3g} (off the diagonal, which is grey)"
    return ", ".join(parts) + "\n" + span if parts else span


@dataclass(frozen=True)
class _HeatmapSizes:
    """Layout of a heatmap figure in inches; ``left``/``bottom`` place the matrix."""

    font: float
    named: bool
    side: float
    left: float
    bottom: float
    strip: float  # 0 without classes
    bar: float  # from the matrix's right edge to the end of the colour bar's label
    page: _Page

    @property
    def top(self) -> float:
        return self.bottom + self.side


def _bar_room(low: float, high: float) -> float:
    """Inches from the matrix's right edge to the end of the colour bar's label: the gap, the
    bar, its ticks and their labels (as wide as the widest of the range's ends, written to two
    decimals, or to three figures, whichever is wider), and the rotated "NCD"."""
    ticks = [f"{v:.2f}" for v in (low, high)] + [f"{v:.3g}" for v in (low, high)]
    tick_labels = _text_width(ticks, 10)  # matplotlib's default tick label size
    marks = (3.5 + 3.5 + 4.0) / 72  # tick length, tick pad, label pad (matplotlib's defaults)
    return _BAR_GAP + _BAR_WIDTH + marks + tick_labels + 12 / 72


def _heatmap_sizes(
    labels: Sequence[str],
    legend: Sequence[str],
    header: tuple[float, float],
    strips: bool,
    legend_title: str,
    bar: float,
) -> _HeatmapSizes:
    """Cells sized for the names up to :data:`LABEL_LIMIT` items, a fixed square beyond."""
    count = len(labels)
    named = count <= LABEL_LIMIT
    font = _font_size(count)
    side = max(4.5, count * 1.4 * font / 72) if named else 9.0
    names = (_text_width(labels, font) + 4 / 72) if named else 0.35
    strip = _STRIP + _STRIP_GAP if strips else 0.0
    legend_width, legend_height = _legend_size(legend, legend_title) if legend else (-0.2, 0.0)
    left, bottom = _MARGIN + names + strip, _MARGIN + names
    page = _Page(
        width=max(left + side + bar + _LEGEND_GAP + legend_width, _MARGIN + header[0]) + _MARGIN,
        height=bottom + max(side + strip, legend_height) + header[1] + _MARGIN,
    )
    return _HeatmapSizes(font, named, side, left, bottom, strip, bar, page)


def _name_axes(ax: Axes, side_ax: Axes, labels: Sequence[str], sizes: _HeatmapSizes) -> None:
    """Column names under ``ax`` and row names left of ``side_ax`` (``ax`` or its class strip),
    or axis labels saying why there are none."""
    if sizes.named:
        positions, shown = range(len(labels)), [_literal(label) for label in labels]
        ax.set_xticks(positions, shown, rotation=90, fontsize=sizes.font)
        side_ax.set_yticks(positions, shown, fontsize=sizes.font)
        for axis_ax in {ax, side_ax}:
            axis_ax.tick_params(length=2, pad=2)
    else:
        note = f"{len(labels)} items in the order given (names hidden above {LABEL_LIMIT})"
        ax.set_xticks([])
        side_ax.set_yticks([])
        ax.set_xlabel(note, fontsize=9)
        side_ax.set_ylabel(note, fontsize=9)
    if side_ax is not ax:
        ax.tick_params(axis="y", left=False, labelleft=False)


def _class_strips(fig: Figure, ax: Axes, sizes: _HeatmapSizes, colours: Sequence[Colour]) -> Axes:
    """Class colours along the left of the rows and the top of the columns; returns the left
    strip, which takes the row names."""
    page, side = sizes.page, sizes.side
    rows = fig.add_axes(
        page.rect(sizes.left - sizes.strip, sizes.bottom, _STRIP, side),
        sharey=ax,
        label="row-classes",
    )
    columns = fig.add_axes(
        page.rect(sizes.left, sizes.top + _STRIP_GAP, side, _STRIP),
        sharex=ax,
        label="column-classes",
    )
    strip = np.array(colours, dtype=np.float64)
    rows.imshow(strip[:, None, :], aspect="auto")
    columns.imshow(strip[None, :, :], aspect="auto")
    for strip_ax in (rows, columns):
        strip_ax.spines[:].set_visible(False)
    rows.tick_params(axis="x", bottom=False, labelbottom=False)
    columns.tick_params(bottom=False, labelbottom=False, left=False, labelleft=False)
    return rows


def heatmap_figure(
    dm: DistanceMatrix,
    *,
    order: Sequence[str] | None = None,
    tree: Node | None = None,
    title: str | None = None,
    legend_title: str = "class",
) -> Figure:
    """The distances as a heatmap, rows and columns in ``order`` (default: as in ``dm``), or in
    ``tree``'s leaf order (:func:`~kinpress.trees.leaf_order`, top to bottom as the tree figure
    draws them) when a tree is given instead.

    Colours (viridis) span the range of the finite distances off the diagonal, which the caption
    states; the diagonal, and any distance not measured, is grey.

    Rows and columns are named up to :data:`LABEL_LIMIT` items; known classes colour a strip
    along the left and top edges, and a legend titled ``legend_title`` names them. Axes carry
    the labels ``matrix``, ``colorbar`` and, with classes, ``row-classes`` and
    ``column-classes``.
    """
    if tree is not None:
        if order is not None:
            raise ValueError("give an order or a tree, not both")
        order = leaf_order(tree)
    index = _permutation(dm, order)
    labels = [dm.labels[i] for i in index]
    values = np.asarray(dm.distances, dtype=np.float64)[np.ix_(index, index)]
    classes = [dm.classes[i] or _NO_CLASS for i in index] if dm.classes is not None else []
    colours = _class_colours(classes)
    low, high = _colour_range(values)
    caption = _caption(dm, low, high)
    header = _heading_size(title, caption)
    sizes = _heatmap_sizes(
        labels, list(colours), header, bool(classes), legend_title, _bar_room(low, high)
    )
    page = sizes.page
    fig = Figure(figsize=(page.width, page.height))
    ax = fig.add_axes(page.rect(sizes.left, sizes.bottom, sizes.side, sizes.side), label="matrix")
    shown = np.ma.masked_invalid(values)
    shown[np.diag_indices(len(values))] = np.ma.masked
    cmap = matplotlib.colormaps["viridis"].with_extremes(bad=_DIAGONAL_COLOUR)
    image = ax.imshow(shown, cmap=cmap, vmin=low, vmax=high)
    ax.set_aspect("auto")
    side_ax = _class_strips(fig, ax, sizes, [colours[c] for c in classes]) if classes else ax
    _name_axes(ax, side_ax, labels, sizes)
    bar_rect = page.rect(sizes.left + sizes.side + _BAR_GAP, sizes.bottom, _BAR_WIDTH, sizes.side)
    fig.colorbar(image, cax=fig.add_axes(bar_rect, label="colorbar")).set_label("NCD")
    if colours:
        corner = page.point(sizes.left + sizes.side + sizes.bar + _LEGEND_GAP, sizes.top)
        _legend(fig, colours, corner, legend_title)
    _heading(fig, page, page.height - _MARGIN, title, caption)
    return fig


def plot_heatmap(
    dm: DistanceMatrix,
    path: str | os.PathLike[str],
    *,
    order: Sequence[str] | None = None,
    tree: Node | None = None,
    title: str | None = None,
    legend_title: str = "class",
) -> None:
    """Write :func:`heatmap_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    fig = heatmap_figure(dm, order=order, tree=tree, title=title, legend_title=legend_title)
    write_figure(fig, path)

"""Trees as rectangular phylograms (root at the left, one leaf per row)."""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.transforms import offset_copy

from ..trees import Node, leaf_order, postorder, preorder
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
    _Page,
    _shown,
    _text_colour,
    _text_width,
    figure_format,
    write_figure,
)

_TREE_WIDTH = 6.0  # inches from the root to the deepest tip
_SCALE_HEIGHT = 0.5  # inches under the tree for the scale bar
_SUPPORT_FLOOR = 5.0  # points: the smallest support label


@dataclass(frozen=True)
class _Drawing:
    """Where each node of a tree goes: x from the root along branches, y by leaf row."""

    x: dict[int, float]
    y: dict[int, float]
    leaves: list[Node]
    has_lengths: bool

    @property
    def depth(self) -> float:
        return max(self.x.values())


def _positions(tree: Node) -> _Drawing:
    """Node positions, iteratively; without any branch lengths, each branch counts one."""
    has_lengths = any(node.length is not None for node in preorder(tree) if node is not tree)
    x = {id(tree): 0.0}
    leaves = []
    for node in preorder(tree):
        if node.is_leaf:
            leaves.append(node)
        for child in node.children:
            step = (child.length or 0.0) if has_lengths else 1.0
            x[id(child)] = x[id(node)] + step
    y = {id(leaf): float(row) for row, leaf in enumerate(leaves)}
    for node in postorder(tree):
        if node.children:
            y[id(node)] = (y[id(node.children[0])] + y[id(node.children[-1])]) / 2
    return _Drawing(x, y, leaves, has_lengths)


def _branches(tree: Node, at: _Drawing) -> list[list[tuple[float, float]]]:
    """Line segments of the phylogram: a horizontal one per branch, a vertical one per fork."""
    segments = []
    for node in preorder(tree):
        x = at.x[id(node)]
        for child in node.children:
            y = at.y[id(child)]
            segments.append([(x, y), (at.x[id(child)], y)])
        if len(node.children) > 1:
            first, last = at.y[id(node.children[0])], at.y[id(node.children[-1])]
            segments.append([(x, first), (x, last)])
    return segments


@dataclass(frozen=True)
class _TreeSizes:
    """Layout of a tree figure: fonts and offsets in points, everything else in inches."""

    font: float
    marker: float  # side of the class square at each tip; 0 without classes
    offset: float  # from a tip to its label
    labels: float  # width of the label column
    rows: float  # height of the leaf rows
    heading: float
    page: _Page

    @property
    def tree_top(self) -> float:
        return self.page.height - _MARGIN - self.heading


def _tree_sizes(
    names: Sequence[str], legend: Sequence[str], title: str | None, legend_title: str
) -> _TreeSizes:
    """Row pitch and font from the leaf count; label and legend room from measured text."""
    font = _font_size(len(names))
    marker = 0.55 * font if legend else 0.0
    offset = marker / 2 + 3
    labels = offset / 72 + _text_width(names, font)
    rows = len(names) * 1.55 * font / 72
    legend_width, legend_height = _legend_size(legend, legend_title) if legend else (-0.3, 0.0)
    heading_width, heading = _heading_size(title)
    page = _Page(
        width=2 * _MARGIN + max(_TREE_WIDTH + labels + 0.3 + legend_width, heading_width),
        height=2 * _MARGIN + heading + max(rows, legend_height) + _SCALE_HEIGHT,
    )
    return _TreeSizes(font, marker, offset, labels, rows, heading, page)


def _scale_length(depth: float) -> float:
    """The 1, 2 or 5 × 10^k nearest (in ratio) to a fifth of ``depth``."""
    target = depth / 5
    power = 10.0 ** math.floor(math.log10(target))
    return min((m * power for m in (1, 2, 5, 10)), key=lambda v: abs(math.log(v / target)))


def _number(value: float) -> str:
    text = f"{value:.10g}"
    return text if "e" not in text else f"{value:.0e}"


def _draw_scale(fig: Figure, tree_ax: Axes, sizes: _TreeSizes, at: _Drawing, label: str) -> None:
    """A bar of a round length in branch-length units under the root, labelled below."""
    rect = sizes.page.rect(_MARGIN, _MARGIN, _TREE_WIDTH, _SCALE_HEIGHT - 0.1)
    ax = fig.add_axes(rect, sharex=tree_ax, label="scale")
    ax.set_axis_off()
    ax.set_ylim(0, 1)
    if not at.has_lengths or at.depth <= 0:
        return
    length = _scale_length(at.depth)
    bar: dict[str, Any] = {"color": "black", "solid_capstyle": "butt"}
    ax.plot([0, length], [0.8, 0.8], linewidth=1.5, gid="scale-bar", **bar)
    for end in (0.0, length):
        ax.plot([end, end], [0.68, 0.92], linewidth=1.0, **bar)
    ax.text(
        length / 2,
        0.5,
        f"{_number(length)} {label}",
        ha="center",
        va="top",
        fontsize=9,
        gid="scale-label",
        parse_math=False,
    )


def _tree_axes(fig: Figure, sizes: _TreeSizes, at: _Drawing) -> Axes:
    """Axes in data units: x branch length (root at 0), y leaf rows from the top."""
    box = (_MARGIN, sizes.tree_top - sizes.rows, _TREE_WIDTH, sizes.rows)
    ax = fig.add_axes(sizes.page.rect(*box), label="tree")
    ax.set_axis_off()
    low, high = min(at.x.values()), at.depth
    ax.set_xlim(low - 0.01 * ((high - low) or 1.0), high)
    ax.set_ylim(len(at.leaves) - 0.5, -0.5)
    return ax


def _draw_leaves(
    fig: Figure, ax: Axes, at: _Drawing, sizes: _TreeSizes, colours: Sequence[Colour] | None
) -> None:
    """Leaf labels right of the tips and, with classes, a coloured square at each tip."""
    shifted = offset_copy(ax.transData, fig=fig, x=sizes.offset, units="points")
    xs = [at.x[id(leaf)] for leaf in at.leaves]
    for row, (leaf, x) in enumerate(zip(at.leaves, xs, strict=True)):
        ax.text(
            x,
            row,
            _shown(str(leaf.name)),
            transform=shifted,
            ha="left",
            va="center",
            fontsize=sizes.font,
            color=_text_colour(colours[row]) if colours else "black",
            gid=f"leaf-{row}",
            parse_math=False,
        )
    if colours:
        ax.scatter(
            xs,
            range(len(xs)),
            s=sizes.marker**2,
            c=colours,
            marker="s",
            linewidths=0,
            zorder=3,
            clip_on=False,
        )


def _support_font(sizes: _TreeSizes) -> float:
    return max(sizes.font - 2, _SUPPORT_FLOOR)


def support_threshold(at: _Drawing, sizes: _TreeSizes) -> tuple[float, float]:
    """Branch lengths (in branch units) below which a support label, as wide as "100", no
    longer fits on the branch left of its node: at the usual support font, and at the
    smallest (`_SUPPORT_FLOOR`); a label on a branch shorter than the second is left out, so
    that labels on short branches never crowd the forks and each other."""
    low = min(at.x.values())
    span = 1.01 * ((at.depth - low) or 1.0)
    units_per_inch = span / _TREE_WIDTH
    room = 1.5 / 72  # the label's offset left of its node
    full = (_text_width(["100"], _support_font(sizes)) + room) * units_per_inch
    small = (_text_width(["100"], _SUPPORT_FLOOR) + room) * units_per_inch
    return full, small


def _branch(node: Node, at: _Drawing) -> float:
    return (node.length or 0.0) if at.has_lengths else 1.0


def _draw_supports(fig: Figure, ax: Axes, tree: Node, at: _Drawing, sizes: _TreeSizes) -> None:
    """Each support as a whole percentage above the branch just left of its node (smaller on a
    short branch, left out on a very short one: `support_threshold`), and a note saying so
    beside the scale bar."""
    nodes = [
        node
        for node in preorder(tree)
        if node.children and node.support is not None and node is not tree
    ]
    if not nodes:
        return
    full, small = support_threshold(at, sizes)
    shifted = offset_copy(ax.transData, fig=fig, x=-1.5, y=1.0, units="points")
    dropped = 0
    for k, node in enumerate(nodes):
        length = _branch(node, at)
        if length < small:
            dropped += 1
            continue
        ax.text(
            at.x[id(node)],
            at.y[id(node)],
            f"{node.support:.0f}",
            transform=shifted,
            ha="right",
            va="bottom",
            fontsize=_support_font(sizes) if length >= full else _SUPPORT_FLOOR,
            color="#4d4d4d",
            gid=f"support-{k}",
        )
    note = "numbers at nodes: support (%)"
    if dropped:
        note += f"; {dropped} left out on branches shorter than {small:.2g}"
    fig.text(
        *sizes.page.point(_MARGIN + _TREE_WIDTH, _MARGIN + _SCALE_HEIGHT - 0.1),
        note,
        ha="right",
        va="top",
        fontsize=8,
        color="#555555",
        gid="supports-note",
    )


def tree_figure(
    tree: Node,
    *,
    classes: Mapping[str, str] | None = None,
    title: str | None = None,
    scale_label: str = "distance",
    legend_title: str = "class",
) -> Figure:
    """A rectangular phylogram of ``tree``: root at the left, one leaf per row, top to bottom in
    :func:`~kinpress.trees.leaf_order`.

    x is the summed branch length from the root (each branch counts one when the tree has no
    lengths, and then there is no scale bar). Supports are printed, as whole percentages, just
    left of their nodes; ``classes`` (leaf name → class) colours leaves and adds a legend titled
    ``legend_title`` (what the classes are, e.g. the label table's column).
    Leaf labels carry the gid ``leaf-<row>``, support labels ``support-<k>``.
    """
    names = leaf_order(tree)
    at = _positions(tree)
    leaf_classes = [classes.get(name, _NO_CLASS) for name in names] if classes is not None else []
    colours = _class_colours(leaf_classes)
    sizes = _tree_sizes(names, list(colours), title, legend_title)
    fig = Figure(figsize=(sizes.page.width, sizes.page.height))
    ax = _tree_axes(fig, sizes, at)
    line_width = float(np.clip(sizes.font / 9, 0.5, 1.1))
    segments = _branches(tree, at)
    ax.add_collection(LineCollection(segments, colors="#262626", linewidths=line_width))
    _draw_leaves(fig, ax, at, sizes, [colours[c] for c in leaf_classes] or None)
    _draw_supports(fig, ax, tree, at, sizes)
    _draw_scale(fig, ax, sizes, at, scale_label)
    _heading(fig, sizes.page, sizes.page.height - _MARGIN, title)
    if colours:
        left = _MARGIN + _TREE_WIDTH + sizes.labels + 0.3
        _legend(fig, colours, sizes.page.point(left, sizes.tree_top), legend_title)
    return fig


def plot_tree(
    tree: Node,
    path: str | os.PathLike[str],
    *,
    classes: Mapping[str, str] | None = None,
    title: str | None = None,
    scale_label: str = "distance",
    legend_title: str = "class",
) -> None:
    """Write :func:`tree_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    fig = tree_figure(
        tree, classes=classes, title=title, scale_label=scale_label, legend_title=legend_title
    )
    write_figure(fig, path)

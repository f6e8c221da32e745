"""Figures of results: trees as rectangular phylograms, distance matrices as heatmaps.

Nothing here computes a result: trees, their leaf order and distances come from
:mod:`kinpress.trees` and :class:`~kinpress.distance.DistanceMatrix`. Each ``*_figure`` function
returns a :class:`matplotlib.figure.Figure` (no pyplot state) laid out in inches from measured
text, so every label fits inside it at any size; each ``plot_*`` function writes that figure as
PNG, SVG or PDF, chosen by the file extension, through a temporary file and a rename.
"""

from __future__ import annotations

import io
import math
import os
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import matplotlib
import numpy as np
from matplotlib.axes import Axes
from matplotlib.collections import LineCollection
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.lines import Line2D
from matplotlib.textpath import text_to_path
from matplotlib.transforms import offset_copy

from .calibration import RELIABLE_NCD, CalibrationReport
from .distance import DistanceMatrix
from .formats import atomic_write
from .items import escape_name
from .trees import Node, leaf_order, postorder, preorder

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

FORMATS = ("png", "svg", "pdf")
LABEL_LIMIT = 150
"""Heatmaps name their rows and columns up to this many items."""

Colour = tuple[float, float, float, float]
_NO_CLASS = "no class"
_NO_CLASS_COLOUR: Colour = to_rgba("#c4c4c4")
_MARGIN = 0.25  # inches around everything
_PNG_DPI = 150.0
_MAX_PIXELS = 32000  # longest side of a PNG; Agg refuses more than 2**16
_METADATA: dict[str, dict[str, Any]] = {
    "png": {},
    "svg": {"Date": None},
    "pdf": {"CreationDate": None},
}


# Files


def figure_format(path: str | os.PathLike[str]) -> str:
    """The output format named by the extension of ``path``: png, svg or pdf."""
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in FORMATS:
        choices = ", ".join(f".{f}" for f in FORMATS)
        raise ValueError(f"cannot tell the figure format of {os.fspath(path)!r}; use {choices}")
    return suffix


def write_figure(fig: Figure, path: str | os.PathLike[str]) -> None:
    """Save ``fig`` in the format of the extension, trimmed to its content, atomically.

    PNGs are 150 dpi, or less where the longest side would pass 32,000 pixels (Agg's limit is
    65,536), which only trees of a couple of thousand leaves reach.
    """
    fmt = figure_format(path)
    width, height = fig.get_size_inches()
    dpi = min(_PNG_DPI, _MAX_PIXELS / max(width, height, 1.0))
    buffer = io.BytesIO()
    fig.savefig(
        buffer,
        format=fmt,
        dpi=dpi,
        bbox_inches="tight",
        pad_inches=0.1,
        facecolor="white",
        metadata=_METADATA[fmt],
    )
    atomic_write(path, buffer.getvalue())


# Text, colours and placement


def _text_width(texts: Iterable[str], size: float, weight: str = "normal") -> float:
    """Width in inches of the widest of ``texts`` at ``size`` points, with room for hinting.

    Outlines give the width in SVG and PDF; Agg's hinting can widen a glyph by up to about a
    pixel, so PNGs get a little more per character.
    """
    prop = FontProperties(size=size, weight=weight)
    widest = max(
        (
            text_to_path.get_text_width_height_descent(t, prop, ismath=False)[0] + 0.35 * len(t)
            for t in texts
        ),
        default=0.0,
    )
    return (1.02 * widest + 2) / 72


def _shown(name: str) -> str:
    """A name as a picture shows it: as given, unless it holds control characters or bytes that
    are not UTF-8, which no font draws: then as every output writes it (`escape_name`)."""
    return name if name.isprintable() else escape_name(name)


def _literal(text: str) -> str:
    """``text`` as shown (`_shown`), escaped so that matplotlib shows it as it is rather than as
    mathtext."""
    return _shown(text).replace("$", r"\$")


def _font_size(count: int) -> float:
    """Label size in points: 10 up to two dozen items, shrinking gently to a floor of 6."""
    return float(np.clip(10 - 1.2 * math.log2(max(count, 1) / 24), 6, 10))


def _class_colours(names: Iterable[str]) -> dict[str, Colour]:
    """A colour per distinct class name, in natural order (c2 before c10), from tab10, tab20 or,
    past 20, turbo (unlike the heatmap's viridis); unknown classes come last, in light grey."""
    present = set(names)
    distinct = sorted(present - {_NO_CLASS}, key=_natural_key)
    count = len(distinct)
    if count <= 10:
        cmap, steps = matplotlib.colormaps["tab10"], np.arange(count) / 10 + 0.05
    elif count <= 20:
        cmap, steps = matplotlib.colormaps["tab20"], np.arange(count) / 20 + 0.025
    else:
        cmap, steps = matplotlib.colormaps["turbo"], np.linspace(0.05, 0.95, count)
    colours = {name: to_rgba(cmap(step)) for name, step in zip(distinct, steps, strict=True)}
    if _NO_CLASS in present:
        colours[_NO_CLASS] = _NO_CLASS_COLOUR
    return colours


def _natural_key(name: str) -> list[tuple[int, int | str]]:
    return [(0, int(part)) if part.isdigit() else (1, part) for part in re.split(r"(\d+)", name)]


def _text_colour(colour: Colour) -> Colour:
    """Label colour for a class colour: darkened (pale ones most) to stay legible on white;
    black for unknown classes."""
    if colour == _NO_CLASS_COLOUR:
        return (0.0, 0.0, 0.0, 1.0)
    r, g, b, a = colour
    lightness = 0.2126 * r + 0.7152 * g + 0.0722 * b
    scale = min(0.7, 0.3 / max(lightness, 1e-9))
    return (r * scale, g * scale, b * scale, a)


@dataclass(frozen=True)
class _Page:
    """A figure size in inches, to turn boxes measured in inches into figure fractions."""

    width: float
    height: float

    def rect(
        self, left: float, bottom: float, width: float, height: float
    ) -> tuple[float, float, float, float]:
        return (left / self.width, bottom / self.height, width / self.width, height / self.height)

    def point(self, x: float, y: float) -> tuple[float, float]:
        return (x / self.width, y / self.height)


_LEGEND_FONT = 9.0


def _legend_size(names: Sequence[str]) -> tuple[float, float]:
    """Width and height in inches of the class legend drawn by :func:`_legend`."""
    em = _LEGEND_FONT / 72
    width = max(_text_width(names, _LEGEND_FONT) + 2.0 * em, _text_width(["class"], _LEGEND_FONT))
    return width, (len(names) + 1) * 1.75 * em


def _legend(fig: Figure, colours: Mapping[str, Colour], corner: tuple[float, float]) -> None:
    """Class legend, a square of colour per class, with its upper left ``corner`` there."""
    handles = [
        Line2D([], [], linestyle="", marker="s", markersize=8, color=colour)
        for colour in colours.values()
    ]
    fig.legend(
        handles,
        [_literal(name) for name in colours],
        title="class",
        loc="upper left",
        bbox_to_anchor=corner,
        borderaxespad=0,
        borderpad=0,
        frameon=False,
        fontsize=_LEGEND_FONT,
        title_fontsize=_LEGEND_FONT,
        alignment="left",
        handlelength=1.0,
    )


def _heading(fig: Figure, page: _Page, top: float, title: str | None, note: str = "") -> None:
    """A bold title and a grey note under it, from ``top`` inches at the left margin."""
    if title:
        fig.text(
            *page.point(_MARGIN, top),
            title,
            ha="left",
            va="top",
            fontsize=12,
            fontweight="bold",
            parse_math=False,
        )
        top -= _TITLE_HEIGHT
    if note:
        fig.text(
            *page.point(_MARGIN, top),
            note,
            ha="left",
            va="top",
            fontsize=9,
            color="#555555",
            parse_math=False,
        )


_TITLE_HEIGHT = 0.4
_NOTE_HEIGHT = 0.3


def _heading_size(title: str | None, note: str = "") -> tuple[float, float]:
    """Width and height in inches of what :func:`_heading` draws."""
    width = max(
        _text_width([title], 12, "bold") if title else 0.0, _text_width([note], 9) if note else 0.0
    )
    return width, (_TITLE_HEIGHT if title else 0.0) + (_NOTE_HEIGHT if note else 0.0)


# Trees

_TREE_WIDTH = 6.0  # inches from the root to the deepest tip
_SCALE_HEIGHT = 0.5  # inches under the tree for the scale bar


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


def _tree_sizes(names: Sequence[str], legend: Sequence[str], title: str | None) -> _TreeSizes:
    """Row pitch and font from the leaf count; label and legend room from measured text."""
    font = _font_size(len(names))
    marker = 0.55 * font if legend else 0.0
    offset = marker / 2 + 3
    labels = offset / 72 + _text_width(names, font)
    rows = len(names) * 1.55 * font / 72
    legend_width, legend_height = _legend_size(legend) if legend else (-0.3, 0.0)
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


def _draw_supports(fig: Figure, ax: Axes, tree: Node, at: _Drawing, sizes: _TreeSizes) -> None:
    """Each support as a whole percentage above the branch just left of its node, and a note
    saying so beside the scale bar."""
    nodes = [node for node in preorder(tree) if node.children and node.support is not None]
    if not nodes:
        return
    shifted = offset_copy(ax.transData, fig=fig, x=-1.5, y=1.0, units="points")
    for k, node in enumerate(nodes):
        ax.text(
            at.x[id(node)],
            at.y[id(node)],
            f"{node.support:.0f}",
            transform=shifted,
            ha="right",
            va="bottom",
            fontsize=max(sizes.font - 2, 5),
            color="#4d4d4d",
            gid=f"support-{k}",
        )
    fig.text(
        *sizes.page.point(_MARGIN + _TREE_WIDTH, _MARGIN + _SCALE_HEIGHT - 0.1),
        "numbers at nodes: support (%)",
        ha="right",
        va="top",
        fontsize=8,
        color="#555555",
    )


def tree_figure(
    tree: Node,
    *,
    classes: Mapping[str, str] | None = None,
    title: str | None = None,
    scale_label: str = "distance",
) -> Figure:
    """A rectangular phylogram of ``tree``: root at the left, one leaf per row, top to bottom in
    :func:`~kinpress.trees.leaf_order`.

    x is the summed branch length from the root (each branch counts one when the tree has no
    lengths, and then there is no scale bar). Supports are printed, as whole percentages, just
    left of their nodes; ``classes`` (leaf name → class) colours leaves and adds a legend.
    Leaf labels carry the gid ``leaf-<row>``, support labels ``support-<k>``.
    """
    names = leaf_order(tree)
    at = _positions(tree)
    leaf_classes = [classes.get(name, _NO_CLASS) for name in names] if classes is not None else []
    colours = _class_colours(leaf_classes)
    sizes = _tree_sizes(names, list(colours), title)
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
        _legend(fig, colours, sizes.page.point(left, sizes.tree_top))
    return fig


def plot_tree(
    tree: Node,
    path: str | os.PathLike[str],
    *,
    classes: Mapping[str, str] | None = None,
    title: str | None = None,
    scale_label: str = "distance",
) -> None:
    """Write :func:`tree_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    write_figure(tree_figure(tree, classes=classes, title=title, scale_label=scale_label), path)


# Heatmaps

_STRIP = 0.16  # inches across a class strip
_STRIP_GAP = 0.04
_BAR_ROOM = 0.2 + 0.2 + 0.75  # gap, colour bar, its tick labels and "NCD"


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


def _caption(dm: DistanceMatrix) -> str:
    parts = [f"compressor {dm.compressor}"] if dm.compressor else []
    if dm.conditional:
        parts.append(f"conditional {dm.conditional}")
    if dm.strand == "both":
        parts.append("both strands")
    return ", ".join(parts)


@dataclass(frozen=True)
class _HeatmapSizes:
    """Layout of a heatmap figure in inches; ``left``/``bottom`` place the matrix."""

    font: float
    named: bool
    side: float
    left: float
    bottom: float
    strip: float  # 0 without classes
    page: _Page

    @property
    def top(self) -> float:
        return self.bottom + self.side


def _heatmap_sizes(
    labels: Sequence[str], legend: Sequence[str], header: tuple[float, float], strips: bool
) -> _HeatmapSizes:
    """Cells sized for the names up to :data:`LABEL_LIMIT` items, a fixed square beyond."""
    count = len(labels)
    named = count <= LABEL_LIMIT
    font = _font_size(count)
    side = max(4.5, count * 1.4 * font / 72) if named else 9.0
    names = (_text_width(labels, font) + 4 / 72) if named else 0.35
    strip = _STRIP + _STRIP_GAP if strips else 0.0
    legend_width, legend_height = _legend_size(legend) if legend else (-0.2, 0.0)
    left, bottom = _MARGIN + names + strip, _MARGIN + names
    page = _Page(
        width=max(left + side + _BAR_ROOM + 0.2 + legend_width, _MARGIN + header[0]) + _MARGIN,
        height=bottom + max(side + strip, legend_height) + header[1] + _MARGIN,
    )
    return _HeatmapSizes(font, named, side, left, bottom, strip, page)


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
    dm: DistanceMatrix, *, order: Sequence[str] | None = None, title: str | None = None
) -> Figure:
    """The distances as a heatmap (viridis, 0 to the largest distance or 1, whichever is more),
    rows and columns in ``order`` (default: as in ``dm``), e.g. a tree's leaf order.

    Rows and columns are named up to :data:`LABEL_LIMIT` items; known classes colour a strip
    along the left and top edges. Axes carry the labels ``matrix``, ``colorbar`` and, with
    classes, ``row-classes`` and ``column-classes``.
    """
    index = _permutation(dm, order)
    labels = [dm.labels[i] for i in index]
    values = np.asarray(dm.distances, dtype=np.float64)[np.ix_(index, index)]
    classes = [dm.classes[i] or _NO_CLASS for i in index] if dm.classes is not None else []
    colours = _class_colours(classes)
    caption = _caption(dm)
    sizes = _heatmap_sizes(labels, list(colours), _heading_size(title, caption), bool(classes))
    page = sizes.page
    fig = Figure(figsize=(page.width, page.height))
    ax = fig.add_axes(page.rect(sizes.left, sizes.bottom, sizes.side, sizes.side), label="matrix")
    image = ax.imshow(values, cmap="viridis", vmin=0.0, vmax=max(1.0, float(values.max())))
    ax.set_aspect("auto")
    side_ax = _class_strips(fig, ax, sizes, [colours[c] for c in classes]) if classes else ax
    _name_axes(ax, side_ax, labels, sizes)
    bar_rect = page.rect(sizes.left + sizes.side + 0.2, sizes.bottom, 0.2, sizes.side)
    fig.colorbar(image, cax=fig.add_axes(bar_rect, label="colorbar")).set_label("NCD")
    if colours:
        corner = page.point(sizes.left + sizes.side + _BAR_ROOM + 0.2, sizes.top)
        _legend(fig, colours, corner)
    _heading(fig, page, page.height - _MARGIN, title, caption)
    return fig


def plot_heatmap(
    dm: DistanceMatrix,
    path: str | os.PathLike[str],
    *,
    order: Sequence[str] | None = None,
    title: str | None = None,
) -> None:
    """Write :func:`heatmap_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    write_figure(heatmap_figure(dm, order=order, title=title), path)


# Calibration

_CALIBRATION_PANEL = (5.0, 3.6)  # inches of each of the two panels
_CALIBRATION_MARKERS = "osD^vP*X"


def _window_marks(ax: Axes, report: CalibrationReport, low: float, high: float) -> None:
    """A dotted line at each documented window or block inside the size range, named on a top
    axis so that the names never cross the curves; compressors sharing a window share it."""
    marks: dict[int, list[str]] = {}
    for result in report.compressors:
        if result.window_bytes is not None and low <= result.window_bytes <= high:
            marks.setdefault(result.window_bytes, []).append(result.spec.partition(":")[0])
    for window in marks:
        ax.axvline(window, color="#777777", linestyle=":", linewidth=1.0, zorder=1)
    top = ax.secondary_xaxis("top")
    windows = sorted(marks)
    names = [f"{'/'.join(dict.fromkeys(marks[w]))} {_window_label(w)}" for w in windows]
    top.set_xticks(windows, [_literal(name) for name in names], rotation=90, fontsize=7.5)
    top.tick_params(length=3, colors="#555555")
    top.minorticks_off()


def _window_label(size: int) -> str:
    for unit, shift in (("MiB", 20), ("KiB", 10)):
        if size >= 1 << shift and size % (1 << shift) == 0:
            return f"{size >> shift} {unit}"
    return f"{size / 1e3:.4g} kB" if size >= 1000 else f"{size} B"


def _size_ticks(ax: Axes, low: float, high: float) -> None:
    """Ticks at powers of four in binary units, so the doubling sweep reads directly."""
    ticks = [float(1 << k) for k in range(0, 64, 2) if low <= 1 << k <= high]
    ax.set_xticks(ticks, [_window_label(int(t)) for t in ticks], fontsize=8)
    ax.minorticks_off()


def calibration_figure(report: CalibrationReport, *, title: str | None = None) -> Figure:
    """Two panels of a :class:`~kinpress.calibration.CalibrationReport`.

    Left: the identity distance NCD(x, x) of random data against its size (log axis), with the
    documented windows marked and the reliability limit of 0.1 drawn; right: the mean distance
    of x to its mutated copies against the mutation rate. One colour per compressor; axes carry
    the labels ``size-sweep`` and ``mutation-ladder``.
    """
    width, height = _CALIBRATION_PANEL
    fig = Figure(figsize=(2 * width + 0.6, height + 1.2), layout="constrained")
    sizes_ax, ladder_ax = fig.subplots(1, 2)
    sizes_ax.set_label("size-sweep")
    ladder_ax.set_label("mutation-ladder")
    colours = matplotlib.colormaps["tab10"]
    sizes = [s for r in report.compressors for s, _ in r.size_sweep]
    low, high = (min(sizes) / 1.5, max(sizes) * 1.5) if sizes else (1e3, 1e6)
    rates = sorted({rate for r in report.compressors for rate, _ in r.mutation_ladder})
    top = 1.05
    for k, result in enumerate(report.compressors):
        colour = colours(k % 10)
        sweep = np.array(result.size_sweep, dtype=np.float64).reshape(-1, 2)
        # Markers and dashes differ too, so that identical curves (zstd with and without a long
        # window, on small data) stay visible on top of each other.
        style: dict[str, Any] = {"color": colour, "marker": _CALIBRATION_MARKERS[k % 8],
                                 "markersize": 3.5, "linestyle": ("-", "--")[k % 2]}  # fmt: skip
        sizes_ax.plot(sweep[:, 0], sweep[:, 1], label=result.spec, **style)
        ladder = dict(result.mutation_ladder)
        ladder_ax.plot(range(len(rates)), [ladder.get(rate, np.nan) for rate in rates], **style)
        values = [*sweep[:, 1], *ladder.values()]
        top = max(top, *(v + 0.05 for v in values if np.isfinite(v)))
    sizes_ax.set_xscale("log", base=2)
    sizes_ax.set_xlim(low, high)
    _size_ticks(sizes_ax, low, high)
    _window_marks(sizes_ax, report, low, high)
    sizes_ax.axhline(RELIABLE_NCD, color="#bbbbbb", linestyle="--", linewidth=1.0, zorder=1)
    sizes_ax.set_xlabel("item size x (the pair x+x is twice that)")
    sizes_ax.set_ylabel("NCD(x, x) of random data")
    sizes_ax.set_title("identity distance against size", fontsize=10)
    ladder_ax.set_xticks(range(len(rates)), [f"{rate:.0%}" for rate in rates], fontsize=8)
    ladder_ax.set_xlabel("symbols substituted")
    ladder_ax.set_ylabel("NCD(x, mutated x)")
    ladder_ax.set_title("distance against mutation rate", fontsize=10)
    for ax in (sizes_ax, ladder_ax):
        ax.set_ylim(-0.02, top)
        ax.grid(True, color="#eeeeee", linewidth=0.8)
        ax.tick_params(axis="y", labelsize=8)
    handles, labels = sizes_ax.get_legend_handles_labels()
    fig.legend(handles, [_literal(label) for label in labels], loc="outside lower center",
               ncol=min(4, max(len(labels), 1)), fontsize=8, frameon=False)  # fmt: skip
    caption = f"seed {report.seed}"
    if report.recommended:
        caption += f"; recommended {report.recommended}"
    fig.suptitle(f"{title}\n{caption}" if title else caption, fontsize=10)
    return fig


def plot_calibration(
    report: CalibrationReport, path: str | os.PathLike[str], *, title: str | None = None
) -> None:
    """Write :func:`calibration_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    write_figure(calibration_figure(report, title=title), path)

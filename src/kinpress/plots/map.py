"""A 2-D map of the items (a `maps.MapResult`), points coloured by class, named when few."""

from __future__ import annotations

import os
from collections.abc import Collection, Mapping

import numpy as np
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure

from ..maps import MapResult
from ._layout import (
    _MARGIN,
    _NO_CLASS,
    _class_colours,
    _heading,
    _heading_size,
    _legend,
    _legend_size,
    _literal,
    _Page,
    figure_format,
    write_figure,
)

NAME_LIMIT = 60
"""Maps name their points up to this many items."""

_SIDE = 4.6  # inches of the square plot


def _uncrowded(
    xy: np.ndarray, first: np.ndarray, across: float = 0.14, up: float = 0.035
) -> list[int]:
    """Points to name, those in `first` (a mask) first, leaving out any whose name would lie on
    one already named (within `across` and `up` of the plot's span: about a name's width and a
    line's height)."""
    span = np.ptp(xy, axis=0) if len(xy) > 1 else np.ones(2)
    scaled = xy / np.where(span > 0, span, 1.0).max()
    named: list[int] = []
    for i in [*np.flatnonzero(first), *np.flatnonzero(~first)]:
        point = scaled[i]
        if all(abs(point[0] - scaled[j, 0]) > across or abs(point[1] - scaled[j, 1]) > up
               for j in named):  # fmt: skip
            named.append(int(i))
    return named


def map_figure(
    result: MapResult,
    *,
    classes: Mapping[str, str] | None = None,
    marked: Collection[str] = (),
    title: str | None = None,
    legend_title: str = "class",
) -> Figure:
    """The items at their map coordinates (first two axes), equal scales on both axes.

    ``classes`` (item → class) colours the points and adds a legend titled ``legend_title``;
    items named in ``marked`` (e.g. group medoids) are drawn larger with a black edge. Points are
    named up to :data:`NAME_LIMIT` items, except where a name would cover another. The caption
    states how much of the matrix the axes show and the map's stress. The axes carry the label
    ``map``.
    """
    xy = np.zeros((len(result.labels), 2))
    xy[:, : min(2, result.dimensions)] = result.coordinates[:, :2]
    names = list(result.labels)
    item_classes = [classes.get(n, _NO_CLASS) for n in names] if classes is not None else []
    colours = _class_colours(item_classes)
    caption = (
        f"classical scaling: the axes show {result.explained:.0%} of the matrix;"
        f" stress {result.stress:.3f}"
    )
    head_width, head_height = _heading_size(title, caption)
    legend_width, legend_height = _legend_size(list(colours), legend_title) if colours else (0, 0)
    width = max(_MARGIN * 2 + 0.5 + _SIDE + (legend_width + 0.3 if colours else 0), head_width)
    height = _MARGIN * 2 + head_height + max(_SIDE + 0.4, legend_height)
    page = _Page(width + _MARGIN, height)
    fig = Figure(figsize=(page.width, page.height))
    ax = fig.add_axes(page.rect(_MARGIN + 0.5, _MARGIN + 0.4, _SIDE, _SIDE), label="map")
    default = to_rgba("#3b6ea8")
    fill = np.array([colours[c] for c in item_classes] if colours else [default] * len(names))
    is_marked = np.array([n in marked for n in names], dtype=bool)
    plain = ~is_marked
    ax.scatter(xy[plain, 0], xy[plain, 1], s=36, c=fill[plain], edgecolors="white",
               linewidths=0.5, zorder=2)  # fmt: skip
    if is_marked.any():
        ax.scatter(xy[is_marked, 0], xy[is_marked, 1], s=90, marker="D", c=fill[is_marked],
                   edgecolors="black", linewidths=1.0, zorder=3)  # fmt: skip
    if len(names) <= NAME_LIMIT:
        for i in _uncrowded(xy, is_marked):
            ax.annotate(
                _literal(names[i]),
                (xy[i, 0], xy[i, 1]),
                xytext=(4, 3),
                textcoords="offset points",
                fontsize=7,
                color="#333333",
                zorder=4,
            )
    span = float(np.ptp(xy, axis=0).max()) if len(names) > 1 else 1.0
    span = span or 1.0
    centre = (xy.max(axis=0) + xy.min(axis=0)) / 2
    half = 0.58 * span
    ax.set_xlim(centre[0] - half, centre[0] + half)
    ax.set_ylim(centre[1] - half, centre[1] + half)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("axis 1", fontsize=9)
    ax.set_ylabel("axis 2", fontsize=9)
    ax.tick_params(labelsize=8)
    ax.grid(color="#eeeeee", linewidth=0.6, zorder=0)
    top = _MARGIN + 0.4 + _SIDE
    if colours:
        _legend(fig, colours, page.point(_MARGIN + 0.5 + _SIDE + 0.3, top), legend_title)
    _heading(fig, page, page.height - _MARGIN, title, caption)
    return fig


def plot_map(
    result: MapResult,
    path: str | os.PathLike[str],
    *,
    classes: Mapping[str, str] | None = None,
    marked: Collection[str] = (),
    title: str | None = None,
    legend_title: str = "class",
) -> None:
    """Write :func:`map_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    fig = map_figure(result, classes=classes, marked=marked, title=title, legend_title=legend_title)
    write_figure(fig, path)

"""The text-layout toolkit every figure shares: files, measured text, class colours, pages.

Figures are laid out in inches from measured text, so every label fits at any size; files are
written as PNG, SVG or PDF, chosen by the extension, through a temporary file and a rename.
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
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.lines import Line2D
from matplotlib.textpath import text_to_path

from ..formats import atomic_write
from ..items import escape_name

FORMATS = ("png", "svg", "pdf")

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


def _legend_size(names: Sequence[str], title: str = "class") -> tuple[float, float]:
    """Width and height in inches of the class legend drawn by :func:`_legend`."""
    em = _LEGEND_FONT / 72
    width = max(_text_width(names, _LEGEND_FONT) + 2.0 * em, _text_width([title], _LEGEND_FONT))
    return width, (len(names) + 1) * 1.75 * em


def _legend(
    fig: Figure, colours: Mapping[str, Colour], corner: tuple[float, float], title: str = "class"
) -> None:
    """Class legend, a square of colour per class under ``title``, with its upper left
    ``corner`` there."""
    handles = [
        Line2D([], [], linestyle="", marker="s", markersize=8, color=colour)
        for colour in colours.values()
    ]
    fig.legend(
        handles,
        [_literal(name) for name in colours],
        title=_literal(title),
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
            gid="title",
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
            linespacing=1.2,
            parse_math=False,
        )


_TITLE_HEIGHT = 0.4
_NOTE_HEIGHT = 0.3


def _heading_size(title: str | None, note: str = "") -> tuple[float, float]:
    """Width and height in inches of what :func:`_heading` draws (a note may hold several
    lines, each 1.2 of its 9 points below the one before)."""
    lines = note.split("\n") if note else []
    width = max(
        _text_width([title], 12, "bold") if title else 0.0, _text_width(lines, 9) if note else 0.0
    )
    extra = max(len(lines) - 1, 0) * 1.2 * 9 / 72
    return width, (_TITLE_HEIGHT if title else 0.0) + (_NOTE_HEIGHT + extra if note else 0.0)

"""A calibration report as two panels: identity distance by size, distance by mutation rate."""

from __future__ import annotations

import os
from typing import Any

import matplotlib
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.transforms import Transform, offset_copy

from ..calibration import RELIABLE_NCD, CalibrationReport
from ..units import size_text
from ._layout import _literal, figure_format, write_figure

_CALIBRATION_PANEL = (5.0, 3.6)  # inches of each of the two panels
_CALIBRATION_MARKERS = "osD^vP*X"
_CALIBRATION_DASHES = ("-", "--", "-.", ":")
_NUDGE_POINTS = 1.2  # sideways shift between neighbouring curves
_LIMIT_STYLE: dict[str, Any] = {
    "color": "#999999",
    "linestyle": (0, (6, 3)),
    "linewidth": 1.0,
    "zorder": 1,
}
_WINDOW_STYLE: dict[str, Any] = {
    "color": "#777777",
    "linestyle": ":",
    "linewidth": 1.0,
    "zorder": 1,
}


def _window_marks(ax: Axes, report: CalibrationReport, low: float, high: float) -> None:
    """A dotted line at each documented window or block inside the size range, named on a top
    axis so that the names never cross the curves; compressors sharing a window share it."""
    marks: dict[int, list[str]] = {}
    for result in report.compressors:
        if result.window_bytes is not None and low <= result.window_bytes <= high:
            marks.setdefault(result.window_bytes, []).append(result.spec.partition(":")[0])
    for window in marks:
        ax.axvline(window, **_WINDOW_STYLE)
    top = ax.secondary_xaxis("top")
    windows = sorted(marks)
    names = [f"{'/'.join(dict.fromkeys(marks[w]))} {size_text(w)}" for w in windows]
    top.set_xticks(windows, [_literal(name) for name in names], rotation=90, fontsize=7.5)
    top.tick_params(length=3, colors="#555555")
    top.minorticks_off()


def _size_ticks(ax: Axes, low: float, high: float) -> None:
    """Ticks at powers of four in binary units, so the doubling sweep reads directly."""
    ticks = [float(1 << k) for k in range(0, 64, 2) if low <= 1 << k <= high]
    ax.set_xticks(ticks, [size_text(int(t)) for t in ticks], fontsize=8)
    ax.minorticks_off()


def _sqrt_rate(rate: np.ndarray) -> np.ndarray:
    """The square-root scale, signed so that the axis may start a little left of 0."""
    return np.asarray(np.sign(rate) * np.sqrt(np.abs(rate)))


def _square(position: np.ndarray) -> np.ndarray:
    return np.asarray(np.sign(position) * np.square(position))


def _curve_style(k: int, count: int) -> dict[str, Any]:
    """How curve k of `count` is drawn: its own colour, marker, dash pattern and (odd k) hollow
    markers, so that equal curves (zstd with and without a long window, on small data) stay
    told apart; drawn thinner the later they come, so the earlier peek out beneath."""
    colour = matplotlib.colormaps["tab10"](k % 10)
    return {
        "color": colour,
        "marker": _CALIBRATION_MARKERS[k % len(_CALIBRATION_MARKERS)],
        "markersize": 4.5 - 1.5 * k / max(count, 1),
        "markerfacecolor": "white" if k % 2 else colour,
        "markeredgewidth": 1.0,
        "linestyle": _CALIBRATION_DASHES[k % len(_CALIBRATION_DASHES)],
        "linewidth": 1.8 - 0.8 * k / max(count, 1),
    }


def _nudged(fig: Figure, ax: Axes, k: int, count: int) -> Transform:
    """Data coordinates shifted sideways by a point or so per curve (centred on the true x),
    so that curves with equal values lie side by side; the ticks keep the true values."""
    shift = (k - (count - 1) / 2) * _NUDGE_POINTS
    return offset_copy(ax.transData, fig=fig, x=shift, units="points")


def calibration_figure(report: CalibrationReport, *, title: str | None = None) -> Figure:
    """Two panels of a :class:`~kinpress.calibration.CalibrationReport`.

    Left: the identity distance NCD(x, x) of random data against its size (log axis), with the
    documented windows marked and the reliability limit of 0.1 drawn; right: the mean distance
    of x to its mutated copies against the mutation rate, placed by value on a square-root
    axis (ticks at the rates measured). One colour, marker and dash pattern per compressor,
    each curve nudged sideways by a point or so so that equal curves show side by side; the
    legend names every line drawn. Axes carry the labels ``size-sweep`` and
    ``mutation-ladder``.
    """
    width, height = _CALIBRATION_PANEL
    fig = Figure(figsize=(2 * width + 0.6, height + 1.4), layout="constrained")
    sizes_ax, ladder_ax = fig.subplots(1, 2)
    sizes_ax.set_label("size-sweep")
    ladder_ax.set_label("mutation-ladder")
    sizes = [s for r in report.compressors for s, _ in r.size_sweep]
    low, high = (min(sizes) / 1.5, max(sizes) * 1.5) if sizes else (1e3, 1e6)
    rates = sorted({rate for r in report.compressors for rate, _ in r.mutation_ladder})
    top = 1.05
    count = len(report.compressors)
    for k, result in enumerate(report.compressors):
        style = _curve_style(k, count)
        sweep = np.array(result.size_sweep, dtype=np.float64).reshape(-1, 2)
        sizes_ax.plot(sweep[:, 0], sweep[:, 1], label=result.spec,
                      transform=_nudged(fig, sizes_ax, k, count), **style)  # fmt: skip
        ladder = np.array(result.mutation_ladder, dtype=np.float64).reshape(-1, 2)
        ladder_ax.plot(ladder[:, 0], ladder[:, 1], gid=f"ladder-{k}",
                       transform=_nudged(fig, ladder_ax, k, count), **style)  # fmt: skip
        values = [*sweep[:, 1], *ladder[:, 1]]
        top = max(top, *(v + 0.05 for v in values if np.isfinite(v)))
    sizes_ax.set_xscale("log", base=2)
    sizes_ax.set_xlim(low, high)
    _size_ticks(sizes_ax, low, high)
    _window_marks(sizes_ax, report, low, high)
    sizes_ax.axhline(RELIABLE_NCD, **_LIMIT_STYLE)
    sizes_ax.set_xlabel("size of x, log scale (the pair x+x is twice that)")
    sizes_ax.set_ylabel("NCD(x, x), x random bytes")
    sizes_ax.set_title("identity distance against size", fontsize=10)
    ladder_ax.set_xscale("function", functions=(_sqrt_rate, _square))
    if rates:
        ladder_ax.set_xlim(-0.003 * rates[-1], rates[-1] * 1.04)
    ladder_ax.set_xticks(rates, [f"{rate:.0%}" for rate in rates], fontsize=8)
    ladder_ax.minorticks_off()
    ladder_ax.set_xlabel("mutation rate: share of symbols substituted (square-root scale)")
    ladder_ax.set_ylabel("mean NCD(x, mutated copy of x)")
    ladder_ax.set_title("distance against mutation rate", fontsize=10)
    for ax in (sizes_ax, ladder_ax):
        ax.set_ylim(-0.02, top)
        ax.grid(True, color="#eeeeee", linewidth=0.8)
        ax.tick_params(axis="y", labelsize=8)
    handles, labels = sizes_ax.get_legend_handles_labels()
    labels = [_literal(label) for label in labels]
    handles.append(Line2D([], [], **_LIMIT_STYLE))
    labels.append(f"reliability limit, NCD(x, x) = {RELIABLE_NCD:g}")
    if sizes_ax.get_lines() and any(
        r.window_bytes is not None and low <= r.window_bytes <= high for r in report.compressors
    ):
        handles.append(Line2D([], [], **_WINDOW_STYLE))
        labels.append("documented window (named on top)")
    fig.legend(handles, labels, loc="outside lower center", ncol=min(4, max(len(labels), 1)),
               fontsize=8, frameon=False)  # fmt: skip
    caption = f"seed {report.seed}"
    if report.recommended:
        caption += f"; recommended {report.recommended}"
    fig.suptitle(f"{title}\n{caption}" if title else caption, fontsize=10, gid="title")
    return fig


def plot_calibration(
    report: CalibrationReport, path: str | os.PathLike[str], *, title: str | None = None
) -> None:
    """Write :func:`calibration_figure` to ``path`` (.png, .svg or .pdf)."""
    figure_format(path)
    write_figure(calibration_figure(report, title=title), path)

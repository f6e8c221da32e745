"""A calibration report as two panels: identity distance by size, distance by mutation rate."""

from __future__ import annotations

import os
from typing import Any

import matplotlib
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from ..calibration import RELIABLE_NCD, CalibrationReport
from ..units import size_text
from ._layout import _literal, figure_format, write_figure

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
    names = [f"{'/'.join(dict.fromkeys(marks[w]))} {size_text(w)}" for w in windows]
    top.set_xticks(windows, [_literal(name) for name in names], rotation=90, fontsize=7.5)
    top.tick_params(length=3, colors="#555555")
    top.minorticks_off()


def _size_ticks(ax: Axes, low: float, high: float) -> None:
    """Ticks at powers of four in binary units, so the doubling sweep reads directly."""
    ticks = [float(1 << k) for k in range(0, 64, 2) if low <= 1 << k <= high]
    ax.set_xticks(ticks, [size_text(int(t)) for t in ticks], fontsize=8)
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

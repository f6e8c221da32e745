"""The report as one self-contained HTML page: Jinja2 with autoescape, figures as SVG data URIs,
styles inline, no script and nothing fetched (a Content-Security-Policy says so to the browser).
"""

from __future__ import annotations

import base64
import io
import math
from importlib import resources
from typing import Any

from ..items import escape_name
from ..trees import leaf_order
from ..units import size_text
from .model import Report

TEMPLATE = "report.html.j2"
"""The page's template, shipped in this package's `templates` folder."""

CONTENT_SECURITY_POLICY = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"
"""Nothing may load but pictures held in the page and its own style sheet: no script, no font,
no frame, no request to any address."""


def _svg_uri(fig: Any) -> str:
    """A matplotlib figure as an SVG data URI (text drawn as outlines, no date)."""
    buffer = io.BytesIO()
    fig.savefig(
        buffer,
        format="svg",
        bbox_inches="tight",
        pad_inches=0.1,
        facecolor="white",
        metadata={"Date": None},
    )
    return "data:image/svg+xml;base64," + base64.b64encode(buffer.getvalue()).decode("ascii")


def _name(value: object) -> str:
    """A name as every output writes it (`escape_name`); the template escapes it for HTML."""
    return escape_name(str(value))


def _number(value: object, digits: int = 3) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "–"
    if isinstance(value, int | float):
        return f"{value:.{digits}f}"
    return str(value)


def figures(report: Report) -> dict[str, str]:
    """The report's pictures as data URIs: tree, heatmap (in tree order), map by group and, with
    known labels, map by label. They only draw the report's results."""
    from ..plots import heatmap_figure, tree_figure
    from ..plots.map import map_figure

    dm, result = report.matrix, report.grouping
    legend = report.label_column or "label"
    classes = None
    if dm.classes is not None:
        classes = {n: c for n, c in zip(dm.labels, dm.classes, strict=True) if c is not None}
    found: dict[str, str] = {}
    found["tree"] = _svg_uri(
        tree_figure(report.tree.tree, classes=classes, scale_label="NCD", legend_title=legend)
    )
    found["heatmap"] = _svg_uri(
        heatmap_figure(dm, order=leaf_order(report.tree.tree), legend_title=legend)
    )
    groups = {name: f"group {g}" if g >= 0 else "outlier" for name, g, _, _ in result.rows()}
    medoids = {name for name, _, is_medoid, _ in result.rows() if is_medoid}
    found["map_groups"] = _svg_uri(
        map_figure(report.map, classes=groups, marked=medoids, legend_title="group")
    )
    if classes:
        found["map_labels"] = _svg_uri(
            map_figure(report.map, classes=classes, marked=medoids, legend_title=legend)
        )
    return found


def render_html(report: Report) -> str:
    """The report as one HTML page that opens offline in any browser."""
    import jinja2

    source = resources.files(__package__).joinpath("templates", TEMPLATE).read_text("utf-8")
    env = jinja2.Environment(
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True
    )
    env.filters["name"] = _name
    env.filters["number"] = _number
    env.filters["size"] = size_text
    template = env.from_string(source)
    return template.render(
        report=report,
        figures=figures(report),
        csp=CONTENT_SECURITY_POLICY,
        group_rows=_group_rows(report),
    )


def _group_rows(report: Report) -> list[dict[str, object]]:
    """Per group its number, size, medoid, mean silhouette and members."""
    result = report.grouping
    members: dict[int, list[str]] = {}
    for name, group, _, _ in result.rows():
        members.setdefault(group, []).append(name)
    rows = []
    for summary in result.grouping.groups:
        rows.append(
            {
                "group": summary.index,
                "size": summary.size,
                "medoid": result.labels[summary.medoid],
                "silhouette": summary.silhouette,
                "members": members.get(summary.index, []),
            }
        )
    if -1 in members:
        rows.append(
            {"group": -1, "size": len(members[-1]), "medoid": None,
             "silhouette": None, "members": members[-1]}
        )  # fmt: skip
    return rows

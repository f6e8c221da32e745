"""One self-contained HTML report of a comparison.

`build_report` gathers the results the library computes (the matrix, tree, groups, map, nearest
items, derived findings, a classification) into one `Report`, whose `as_json` is its data;
`render_html` draws it as a single page that opens offline in any browser (Jinja2, autoescaped,
pictures as SVG data URIs, no script, a Content-Security-Policy that lets nothing load).
"""

from .html import CONTENT_SECURITY_POLICY, figures, render_html
from .model import (
    CompressorChoice,
    ItemSummary,
    NearestItems,
    Provenance,
    Report,
    SharedPassage,
    build_report,
    versions,
)

__all__ = [
    "CONTENT_SECURITY_POLICY",
    "CompressorChoice",
    "ItemSummary",
    "NearestItems",
    "Provenance",
    "Report",
    "SharedPassage",
    "build_report",
    "figures",
    "render_html",
    "versions",
]

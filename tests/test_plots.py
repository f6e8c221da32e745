"""Tests for kinpress.plots: files written, layout of tree labels, supports, scale bar, heatmaps."""

from __future__ import annotations

import itertools
import math
import os
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.text import Text
from matplotlib.transforms import Bbox, BboxBase

from kinpress import plots
from kinpress.calibration import MUTATION_RATES, CalibrationReport, calibrate
from kinpress.distance import DistanceMatrix
from kinpress.plots import heatmap_figure, plot_heatmap, plot_tree, tree_figure
from kinpress.plots.calibration import calibration_figure
from kinpress.plots.tree import _positions, _tree_sizes, support_threshold
from kinpress.trees import Node, add_support, build_tree, leaf_order, preorder

FORMATS = ["png", "svg", "pdf"]


def random_distances(n: int, seed: int = 0) -> np.ndarray:
    """Symmetric, zero-diagonal distances between random points (a tree-like enough matrix)."""
    points = np.random.default_rng(seed).normal(size=(n, 4))
    d: np.ndarray = np.sqrt(((points[:, None] - points[None]) ** 2).sum(axis=-1)) / 4
    np.fill_diagonal(d, 0.0)
    return d


def random_labels(n: int, seed: int = 0) -> list[str]:
    """Distinct labels of uneven length, some long."""
    rng = np.random.default_rng(seed)
    return [f"item{i}" + "_long" * int(rng.integers(0, 6)) for i in range(n)]


def random_tree(n: int, seed: int = 0) -> Node:
    return build_tree(random_labels(n, seed), random_distances(n, seed))


def with_supports(tree: Node) -> Node:
    """``tree`` with supports from itself and one other tree: 100 or 50 per node."""
    names = leaf_order(tree)
    other = build_tree(names, random_distances(len(names), seed=99))
    return add_support(tree, [tree, other])


def caterpillar(n: int) -> Node:
    """A maximally unbalanced tree, n leaves and depth n - 1, built without recursion."""
    node = Node(name="leaf0", length=0.01)
    for i in range(1, n):
        leaf = Node(name=f"leaf{i}", length=0.01 * (1 + i % 3))
        node = Node(children=(node, leaf), length=0.02, support=float(i % 101))
    return node


def matrix(n: int, classes: bool = False) -> DistanceMatrix:
    labels = tuple(random_labels(n))
    known = tuple(["wet", "dry", None][i % 3] for i in range(n)) if classes else None
    return DistanceMatrix(
        labels=labels, distances=random_distances(n), compressor="zstd", classes=known
    )


def drawn(fig: Figure) -> Figure:
    """``fig`` drawn once by Agg, so that text extents are final."""
    FigureCanvasAgg(fig).draw()  # type: ignore[no-untyped-call]
    return fig


def texts_with_gid(fig: Figure, prefix: str) -> list[Text]:
    found = [t for t in fig.findobj(Text) if (t.get_gid() or "").startswith(prefix)]
    return sorted(found, key=lambda t: int(str(t.get_gid()).rsplit("-", 1)[1]))


def extents(artists: list[Text]) -> list[Bbox]:
    return [artist.get_window_extent() for artist in artists]


def axes_labelled(fig: Figure, label: str) -> Axes:
    return next(ax for ax in fig.axes if ax.get_label() == label)


def check_file(path: Path, fmt: str) -> None:
    data = path.read_bytes()
    if fmt == "png":
        assert data.startswith(b"\x89PNG\r\n\x1a\n")
    elif fmt == "svg":
        assert ET.fromstring(data).tag.endswith("svg")
    else:
        assert data.startswith(b"%PDF")
        assert data.rstrip().endswith(b"%%EOF")


@pytest.mark.parametrize("fmt", FORMATS)
def test_tree_is_written_as_valid_png_svg_and_pdf(tmp_path: Path, fmt: str) -> None:
    path = tmp_path / f"tree.{fmt}"
    plot_tree(with_supports(random_tree(8)), path, classes={"item0": "a"}, title="eight")
    check_file(path, fmt)


@pytest.mark.parametrize("fmt", FORMATS)
def test_heatmap_is_written_as_valid_png_svg_and_pdf(tmp_path: Path, fmt: str) -> None:
    path = tmp_path / f"heat.{fmt.upper()}"
    plot_heatmap(matrix(8, classes=True), path, title="eight")
    check_file(path, fmt)


@pytest.mark.parametrize("name", ["tree.jpg", "tree", "tree.png.gz"])
def test_unknown_extension_raises_value_error_and_writes_nothing(tmp_path: Path, name: str) -> None:
    with pytest.raises(ValueError, match="format"):
        plot_tree(random_tree(4), tmp_path / name)
    with pytest.raises(ValueError, match="format"):
        plot_heatmap(matrix(4), tmp_path / name)
    assert list(tmp_path.iterdir()) == []


def test_2000_leaf_caterpillar_plots_without_recursion_error_in_reasonable_time(
    tmp_path: Path,
) -> None:
    tree = caterpillar(2000)
    started = time.perf_counter()
    plot_tree(tree, tmp_path / "deep.png")
    assert time.perf_counter() - started < 90
    check_file(tmp_path / "deep.png", "png")


@pytest.mark.parametrize("count", [3, 40, 300])
def test_leaf_labels_do_not_overlap_and_fit_inside_the_figure(count: int) -> None:
    tree = with_supports(random_tree(count, seed=count))
    classes = {name: f"class{i % 4}" for i, name in enumerate(leaf_order(tree)) if i % 5}
    fig = drawn(tree_figure(tree, classes=classes, title="labels"))
    boxes = extents(texts_with_gid(fig, "leaf-"))
    assert len(boxes) == count
    for upper, lower in itertools.pairwise(boxes):
        assert upper.y0 >= lower.y1  # rows go down the page without touching
    legend = fig.legends[0].get_window_extent()
    assert all(inside(box, fig.bbox) for box in [*boxes, legend])
    assert all(not box.overlaps(legend) for box in boxes)


def inside(box: BboxBase, page: BboxBase) -> bool:
    return page.x0 <= box.x0 and box.x1 <= page.x1 and page.y0 <= box.y0 and box.y1 <= page.y1


def test_long_titles_fit_inside_the_figure() -> None:
    title = "A title much wider than the small tree and heatmap drawn under it, " * 2
    for fig in (tree_figure(random_tree(3), title=title), heatmap_figure(matrix(3), title=title)):
        drawn(fig)
        (shown,) = [t for t in fig.texts if t.get_text() == title]
        assert inside(shown.get_window_extent(), fig.bbox)


def test_leaf_rows_follow_leaf_order_top_to_bottom() -> None:
    tree = random_tree(12)
    labels = texts_with_gid(drawn(tree_figure(tree)), "leaf-")
    assert [t.get_text() for t in labels] == leaf_order(tree)
    heights = [box.y0 for box in extents(labels)]
    assert heights == sorted(heights, reverse=True)


def test_label_font_shrinks_with_leaf_count_down_to_a_floor() -> None:
    sizes = []
    for count in (10, 80, 400):
        first = texts_with_gid(tree_figure(caterpillar(count)), "leaf-")[0]
        sizes.append(float(first.get_fontsize()))
    assert sizes[0] > sizes[1] > sizes[2] == 6


def test_svg_names_each_leaf_label(tmp_path: Path) -> None:
    tree = random_tree(10)
    plot_tree(tree, tmp_path / "tree.svg")
    ids = {e.get("id") for e in ET.parse(tmp_path / "tree.svg").iter()}
    assert {f"leaf-{row}" for row in range(10)} <= ids


def test_support_labels_appear_when_supports_are_set() -> None:
    tree = with_supports(random_tree(10))
    _, shortest = support_threshold(_positions(tree), _tree_sizes(leaf_order(tree), [], None, ""))
    expected = sorted(
        f"{node.support:.0f}"
        for node in preorder(tree)
        if node.support is not None and (node.length or 0.0) >= shortest
    )
    assert expected
    shown = texts_with_gid(tree_figure(tree), "support-")
    assert sorted(t.get_text() for t in shown) == expected
    assert any("support (%)" in t.get_text() for t in tree_figure(tree).texts)


def test_no_support_labels_without_supports() -> None:
    fig = tree_figure(random_tree(10))
    assert texts_with_gid(fig, "support-") == []
    assert not any("support" in t.get_text() for t in fig.texts)


def test_support_labels_do_not_overlap_leaf_labels() -> None:
    fig = drawn(tree_figure(with_supports(random_tree(40, seed=3))))
    leaves = extents(texts_with_gid(fig, "leaf-"))
    for support in extents(texts_with_gid(fig, "support-")):
        assert not any(support.overlaps(leaf) for leaf in leaves)


def scale_bar(fig: Figure) -> tuple[float, str]:
    bar = next(a for a in fig.findobj(Line2D) if a.get_gid() == "scale-bar")
    x = np.asarray(bar.get_xdata(), dtype=float)
    (label,) = texts_with_gid_exact(fig, "scale-label")
    return float(x[1] - x[0]), label.get_text()


def texts_with_gid_exact(fig: Figure, gid: str) -> list[Text]:
    return [t for t in fig.findobj(Text) if t.get_gid() == gid]


@pytest.mark.parametrize("unit", [1e-4, 0.03, 1.0, 70.0])
def test_scale_bar_is_a_round_length_near_a_fifth_of_the_depth(unit: float) -> None:
    tree = build_tree(random_labels(9), random_distances(9) * unit)
    depth = max(_positions(tree).x.values())
    length, label = scale_bar(tree_figure(tree, scale_label="NCD"))
    mantissa = length / 10 ** math.floor(math.log10(length) + 1e-9)
    assert round(mantissa, 6) in (1, 2, 5)
    assert 1 / 2.3 <= length / (depth / 5) <= 2.3
    assert label.endswith(" NCD")
    assert float(label.split()[0]) == pytest.approx(length)


def test_tree_without_lengths_is_drawn_without_scale_bar() -> None:
    tree = Node(children=(Node(name="a"), Node(children=(Node(name="b"), Node(name="c")))))
    fig = drawn(tree_figure(tree))
    assert [t.get_text() for t in texts_with_gid(fig, "leaf-")] == ["a", "b", "c"]
    assert not any(a.get_gid() == "scale-bar" for a in fig.findobj(Line2D))


def test_leaves_are_coloured_by_class_with_a_legend() -> None:
    tree = random_tree(12)
    names = leaf_order(tree)
    classes = {name: "frog" if i % 2 else "toad" for i, name in enumerate(names[:-1])}
    fig = tree_figure(tree, classes=classes)
    colour = {t.get_text(): t.get_color() for t in texts_with_gid(fig, "leaf-")}
    frogs = {str(colour[n]) for n, c in classes.items() if c == "frog"}
    toads = {str(colour[n]) for n, c in classes.items() if c == "toad"}
    assert len(frogs) == len(toads) == 1 and frogs != toads
    legend = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend == ["frog", "toad", "no class"]


def test_the_class_legend_is_titled_as_asked_and_fits_its_title() -> None:
    tree = random_tree(6)
    classes = {name: "frog" for name in leaf_order(tree)}
    title = "a family name wider than any class"
    fig = drawn(tree_figure(tree, classes=classes, legend_title=title))
    assert fig.legends[0].get_title().get_text() == title
    assert inside(fig.legends[0].get_window_extent(), fig.bbox)
    assert tree_figure(tree, classes=classes).legends[0].get_title().get_text() == "class"
    heat = drawn(heatmap_figure(matrix(6, classes=True), legend_title=title))
    assert heat.legends[0].get_title().get_text() == title
    assert inside(heat.legends[0].get_window_extent(), heat.bbox)


def test_labels_with_dollar_signs_are_shown_as_written(tmp_path: Path) -> None:
    labels = ["cost $5", r"$\notacommand$", "a$b$c"]
    tree = build_tree(labels, random_distances(3))
    fig = drawn(tree_figure(tree, classes={labels[1]: "$x$"}))
    assert sorted(t.get_text() for t in texts_with_gid(fig, "leaf-")) == sorted(labels)
    dm = DistanceMatrix(
        labels=tuple(labels), distances=random_distances(3), classes=("$x$", None, "$y")
    )
    plot_heatmap(dm, tmp_path / "dollars.png")


def test_heatmap_rows_and_columns_follow_order() -> None:
    dm = matrix(9)
    order = list(reversed(dm.labels[3:])) + list(dm.labels[:3])
    fig = heatmap_figure(dm, order=order)
    ax = axes_labelled(fig, "matrix")
    assert [t.get_text() for t in ax.get_yticklabels()] == order
    assert [t.get_text() for t in ax.get_xticklabels()] == order
    index = [dm.labels.index(label) for label in order]
    shown = np.asarray(ax.get_images()[0].get_array())
    np.testing.assert_array_equal(shown, dm.distances[np.ix_(index, index)])


def test_heatmap_defaults_to_matrix_order_and_rejects_a_bad_order() -> None:
    dm = matrix(5)
    ax = axes_labelled(heatmap_figure(dm), "matrix")
    assert [t.get_text() for t in ax.get_yticklabels()] == list(dm.labels)
    for bad in (dm.labels[:4], [*dm.labels[:4], "stranger"], [*dm.labels, dm.labels[0]]):
        with pytest.raises(ValueError, match="order"):
            heatmap_figure(dm, order=bad)


def test_heatmap_colour_bar_is_labelled_ncd() -> None:
    bar = axes_labelled(heatmap_figure(matrix(5)), "colorbar")
    assert bar.get_ylabel() == "NCD"


def test_heatmap_colours_span_the_off_diagonal_range_so_close_distances_show_blocks() -> None:
    # Real log chunks of two kinds measure 0.84-1.06 apart (issue 12); with the zero diagonal
    # fixing the scale at 0-1, both blocks came out one colour.
    rng = np.random.default_rng(3)
    n = 8
    block = np.arange(n) < n // 2
    d = np.where(block[:, None] == block[None, :], 0.84, 1.0) + rng.uniform(0, 0.06, (n, n))
    d = (d + d.T) / 2
    np.fill_diagonal(d, 0.0)
    dm = DistanceMatrix(labels=tuple(f"chunk{i}" for i in range(n)), distances=d)
    fig = heatmap_figure(dm)
    image = axes_labelled(fig, "matrix").get_images()[0]
    off = d[~np.eye(n, dtype=bool)]
    assert image.norm.vmin == pytest.approx(off.min())
    assert image.norm.vmax == pytest.approx(off.max())
    rgba = image.to_rgba(image.get_array())
    within, between = rgba[0, 1, :3], rgba[0, n - 1, :3]
    assert np.abs(within - between).max() > 0.3
    assert np.ma.getmaskarray(image.get_array())[np.diag_indices(n)].all()
    assert f"colours span {off.min():.3g} to {off.max():.3g}" in " ".join(
        t.get_text() for t in fig.texts
    )


def test_heatmap_tick_labels_fit_inside_the_figure() -> None:
    fig = drawn(heatmap_figure(matrix(60, classes=True), title="sixty"))
    labels = [
        t
        for ax in fig.axes
        for t in [*ax.get_xticklabels(), *ax.get_yticklabels()]
        if t.get_visible() and t.get_text()
    ]
    assert labels
    boxes = [*extents(labels), fig.legends[0].get_window_extent()]
    assert all(inside(box, fig.bbox) for box in boxes)


def test_heatmap_hides_names_beyond_the_limit_and_says_so() -> None:
    many = plots.LABEL_LIMIT + 1
    ax = axes_labelled(heatmap_figure(matrix(many)), "matrix")
    assert not any(t.get_text() for t in ax.get_xticklabels())
    assert "hidden" in ax.get_xlabel() and str(many) in ax.get_xlabel()
    few = axes_labelled(heatmap_figure(matrix(plots.LABEL_LIMIT)), "matrix")
    assert len(few.get_xticklabels()) == plots.LABEL_LIMIT


def test_heatmap_class_strips_only_when_classes_are_known() -> None:
    dm = matrix(6, classes=True)
    fig = heatmap_figure(dm)
    rows = np.asarray(axes_labelled(fig, "row-classes").get_images()[0].get_array())
    assert rows.shape[:2] == (6, 1)
    assert np.array_equal(rows[0], rows[3]) and not np.array_equal(rows[0], rows[1])
    assert [t.get_text() for t in fig.legends[0].get_texts()] == ["dry", "wet", "no class"]
    plain = heatmap_figure(matrix(6))
    assert {ax.get_label() for ax in plain.axes} == {"matrix", "colorbar"}
    assert not plain.legends


def test_no_file_is_left_behind_under_a_temporary_name(tmp_path: Path) -> None:
    plot_tree(random_tree(5), tmp_path / "tree.png")
    plot_heatmap(matrix(5), tmp_path / "heat.pdf")
    plot_tree(random_tree(6), tmp_path / "tree.png")  # replaces the first one
    assert sorted(p.name for p in tmp_path.iterdir()) == ["heat.pdf", "tree.png"]


def test_failed_write_leaves_the_old_file_and_no_temporary(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    target = tmp_path / "tree.svg"
    target.write_text("old")

    def broken_replace(source: str, destination: str) -> None:
        raise OSError("disk gone")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk gone"):
        plot_tree(random_tree(5), target)
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["tree.svg"]


# -- support labels on short branches, heatmaps in tree order, titles, the calibration figure ----


def test_support_labels_shrink_on_short_branches_and_are_left_out_on_very_short_ones() -> None:
    def pair(name: str, length: float, support: float) -> Node:
        tips = (Node(name=f"{name}1", length=1.0), Node(name=f"{name}2", length=1.0))
        return Node(children=tips, length=length, support=support)

    # The thresholds scale with the tree's depth, which the long leaf z sets for both trees.
    z = Node(name="z", length=10.0)
    probe = Node(children=(z, pair("a", 0.5, 60)))
    full, small = support_threshold(_positions(probe), _tree_sizes(leaf_order(probe), [], None, ""))
    assert 0 < small < full < 1  # the smallest font fits on shorter branches than the usual one
    # One branch well above both thresholds, one between them, one far below the smaller.
    tree = Node(
        children=(
            z,
            pair("a", 3 * full, 61),
            Node(children=(pair("b", (full + small) / 2, 72), pair("c", small / 20, 83)), length=1),
        )
    )
    assert support_threshold(_positions(tree), _tree_sizes(leaf_order(tree), [], None, "")) == (
        full,
        small,
    )
    fig = drawn(tree_figure(tree))
    shown = {t.get_text(): t.get_fontsize() for t in texts_with_gid(fig, "support-")}
    assert set(shown) == {"61", "72"}  # 83 sits on a branch far below the threshold
    assert shown["72"] < shown["61"]
    (note,) = texts_with_gid_exact(fig, "supports-note")
    assert "1 left out on branches shorter than" in note.get_text()


def test_heatmap_follows_a_given_trees_leaf_order() -> None:
    dm = matrix(12)
    tree = build_tree(dm.labels, dm.distances, method="average")
    ax = axes_labelled(heatmap_figure(dm, tree=tree), "matrix")
    assert [t.get_text() for t in ax.get_yticklabels()] == leaf_order(tree)
    assert [t.get_text() for t in ax.get_xticklabels()] == leaf_order(tree)
    assert leaf_order(tree) != list(dm.labels)  # the test would not notice otherwise
    with pytest.raises(ValueError, match="not both"):
        heatmap_figure(dm, tree=tree, order=list(dm.labels))


def test_heatmap_has_no_wide_empty_margin_right_of_its_legend() -> None:
    dm = matrix(14, classes=True)
    fig = drawn(heatmap_figure(dm))
    page = fig.bbox
    right = max(t.get_window_extent().x1 for t in fig.findobj(Text) if t.get_text())
    # Everything drawn ends within two margins (2 x 0.25 in) of the page's right edge.
    assert page.x1 - right <= 2 * 0.25 * fig.dpi


def svg_ids(path: Path) -> set[str | None]:
    return {e.get("id") for e in ET.parse(path).iter()}


@pytest.mark.parametrize("command", ["tree", "matrix"])
def test_the_title_option_heads_the_plot(tmp_path: Path, command: str) -> None:
    from kinpress import cli
    from kinpress.formats import write_matrix

    texts = tmp_path / "texts"
    texts.mkdir()
    for k in range(4):
        (texts / f"t{k}.txt").write_text(" ".join(f"word{(k * j) % 11}" for j in range(300)))
    svg = tmp_path / "p.svg"
    if command == "tree":
        dm = DistanceMatrix(labels=("a", "b", "c", "d"), distances=random_distances(4))
        write_matrix(dm, tmp_path / "m.phy", "phylip")
        argv = ["tree", "--matrix", str(tmp_path / "m.phy"), "-o", str(tmp_path / "t.nwk")]
    else:
        argv = ["matrix", str(texts), "-c", "zlib:level=9", "--no-cache", "--quiet",
                "-o", str(tmp_path / "m.tsv")]  # fmt: skip
    assert cli.main([*argv, "--plot", str(svg), "--title", "Frogs & toads"]) == 0
    assert "title" in svg_ids(svg)
    # Matplotlib writes text as paths, with the text itself in a comment beside them.
    assert "Frogs &amp; toads" in svg.read_text()


@pytest.fixture(scope="module")
def twin_report() -> CalibrationReport:
    # zstd with and without a long window measure alike on small data: the curves coincide.
    specs = ["zlib:level=9", "zstd:level=19", "zstd:level=19,window=27"]
    return calibrate(None, specs, samples=2, sample_bytes=4096, max_bytes=1 << 16)


def test_calibration_mutation_axis_places_the_rates_by_value(
    twin_report: CalibrationReport,
) -> None:
    ax = axes_labelled(drawn(calibration_figure(twin_report)), "mutation-ladder")
    rates = np.array([0.0, *MUTATION_RATES])
    np.testing.assert_allclose(ax.get_xticks(), rates)
    at = ax.transData.transform(np.column_stack([rates, np.zeros_like(rates)]))[:, 0]
    # A square-root axis: positions from the 0 tick grow as the root of the rate, not evenly.
    np.testing.assert_allclose((at - at[0]) / (at[-1] - at[0]), np.sqrt(rates / rates[-1]))
    assert "square-root" in ax.get_xlabel()


def test_calibration_curves_that_coincide_are_told_apart(twin_report: CalibrationReport) -> None:
    fig = drawn(calibration_figure(twin_report))
    ax = axes_labelled(fig, "mutation-ladder")
    lines = [line for line in ax.get_lines() if (line.get_gid() or "").startswith("ladder-")]
    assert len(lines) == 3
    styles = {
        (str(line.get_color()), line.get_marker(), str(line.get_linestyle()),
         str(line.get_markerfacecolor()))
        for line in lines
    }  # fmt: skip
    assert len(styles) == 3
    twins = lines[1:]
    np.testing.assert_array_equal(twins[0].get_ydata(), twins[1].get_ydata())
    x0, x1 = (
        line.get_transform().transform(np.column_stack([line.get_xdata(), line.get_ydata()]))[:, 0]
        for line in twins
    )
    assert np.all(np.abs(x1 - x0) >= 1.0 * fig.dpi / 72)  # at least a point apart


def test_every_calibration_line_is_named_in_the_legend(twin_report: CalibrationReport) -> None:
    fig = drawn(calibration_figure(twin_report, title="twins"))
    (legend,) = fig.legends
    named = [t.get_text() for t in legend.get_texts()]
    assert [r.spec for r in twin_report.compressors] == named[:3]
    assert any(n.startswith("reliability limit") for n in named)
    sizes_ax = axes_labelled(fig, "size-sweep")
    kinds = {line.get_linestyle() for line in sizes_ax.get_lines()}
    legend_kinds = {h.get_linestyle() for h in legend.legend_handles if isinstance(h, Line2D)}
    assert kinds <= legend_kinds
    windows = [line for line in sizes_ax.get_lines() if line.get_linestyle() == ":"]
    if windows:
        assert any(n.startswith("documented window") for n in named)


def test_the_calibration_title_appears_in_its_svg(
    twin_report: CalibrationReport, tmp_path: Path
) -> None:
    from kinpress.plots import plot_calibration

    plot_calibration(twin_report, tmp_path / "c.svg", title="Frogs & toads")
    assert "title" in svg_ids(tmp_path / "c.svg")
    assert "Frogs &amp; toads" in (tmp_path / "c.svg").read_text()

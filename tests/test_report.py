"""The report: classical scaling (maps.py), the Report data, its HTML page (escaping, nothing
fetched), the command, and a real render in headless Chromium where it is installed."""

from __future__ import annotations

import json
import random
import re
import shutil
import subprocess
import tomllib
from collections.abc import Sequence
from html.parser import HTMLParser
from importlib import resources
from pathlib import Path

import numpy as np
import pytest

from kinpress import distance_matrix
from kinpress.cli import main
from kinpress.compressors import compressor
from kinpress.items import Item
from kinpress.maps import classical_scaling
from kinpress.report import (
    CONTENT_SECURITY_POLICY,
    CompressorChoice,
    build_report,
    render_html,
)

ROOT = Path(__file__).resolve().parents[1]
HOSTILE = "<b>x&y</b>.txt"
ESCAPED = "&lt;b&gt;x&amp;y&lt;/b&gt;.txt"

# Classical scaling


def test_classical_scaling_recovers_points_on_a_line_worked_by_hand() -> None:
    # Worked by hand from Torgerson (1952) / Gower (1966): points 0, 1, 3 on a line have
    # distances 1, 3, 2; centred at their mean 4/3 they are -4/3, -1/3, 5/3, and the one
    # positive eigenvalue of B = -1/2 J D² J is their sum of squares, 16/9 + 1/9 + 25/9 = 14/3.
    d = np.array([[0, 1, 3], [1, 0, 2], [3, 2, 0]], dtype=float)
    found = classical_scaling(["a", "b", "c"], d)
    assert found.coordinates[:, 0] == pytest.approx([-4 / 3, -1 / 3, 5 / 3])
    assert found.coordinates[:, 1] == pytest.approx([0, 0, 0], abs=1e-9)
    assert found.eigenvalues[0] == pytest.approx(14 / 3)
    assert found.explained == pytest.approx(1.0)
    assert found.stress == pytest.approx(0.0, abs=1e-9)


def test_classical_scaling_recovers_a_plane_up_to_rotation() -> None:
    from scipy.spatial import procrustes
    from scipy.spatial.distance import pdist, squareform
    from sklearn.decomposition import PCA

    rng = np.random.default_rng(7)
    points = rng.normal(size=(12, 2)) * [3.0, 1.0]
    angle = 0.7
    rotation = np.array([[np.cos(angle), -np.sin(angle)], [np.sin(angle), np.cos(angle)]])
    moved = points @ rotation.T + [5.0, -2.0]
    d = squareform(pdist(moved))
    found = classical_scaling([f"p{i}" for i in range(12)], d)
    # scipy's Procrustes analysis: the same shape up to rotation, reflection, scale and shift.
    _, _, disparity = procrustes(points, found.coordinates)
    assert disparity == pytest.approx(0.0, abs=1e-12)
    # Gower (1966): principal coordinates of Euclidean distances are the principal components
    # of the centred points; scikit-learn's PCA gives them, each axis up to its sign.
    scores = PCA(n_components=2).fit_transform(moved)
    for axis in range(2):
        ours, theirs = found.coordinates[:, axis], scores[:, axis]
        assert np.allclose(ours, theirs, atol=1e-9) or np.allclose(ours, -theirs, atol=1e-9)
    assert found.stress == pytest.approx(0.0, abs=1e-9)


def test_classical_scaling_of_a_non_euclidean_matrix_says_what_it_loses() -> None:
    # Four points all 1 apart (a regular simplex) need three axes: two show two thirds of it.
    d = 1.0 - np.eye(4)
    found = classical_scaling(list("abcd"), d)
    assert found.explained == pytest.approx(2 / 3)
    assert found.stress > 0.1
    # A matrix that breaks the triangle inequality has a negative eigenvalue (Gower 1966).
    bad = np.array([[0, 1, 5], [1, 0, 1], [5, 1, 0]], dtype=float)
    assert classical_scaling(list("abc"), bad).eigenvalues[-1] < 0
    doc = found.as_json()
    assert [row["item"] for row in doc["items"]] == list("abcd")
    assert len(doc["items"][0]["coordinates"]) == 2


# The Report and its page


def _family_items(names: list[str] | None = None) -> list[Item]:
    """Three families of three texts each: a random text and two copies with 5 % of words
    changed."""
    rng = random.Random(3)
    words = [f"w{i}" for i in range(400)]
    items = []
    for family in range(3):
        base = [rng.choice(words) for _ in range(600)]
        for member in range(3):
            text = [w if rng.random() > 0.05 else rng.choice(words) for w in base]
            name = f"f{family}m{member}.txt"
            items.append(Item(name, " ".join(text).encode(), f"/data/{name}", f"family{family}"))
    if names:
        items = [Item(n, i.data, i.source, i.label) for n, i in zip(names, items, strict=False)] + (
            items[len(names) :]
        )
    return items


@pytest.fixture(scope="module")
def report_of_families():  # type: ignore[no-untyped-def]
    items = _family_items([HOSTILE])
    dm = distance_matrix(items, compressor("zlib:level=9"), engine=None)
    choice = CompressorChoice("zlib:level=9", dm.conditional, dm.strand, given=True)
    return build_report(
        items, dm, choice, title="families & <friends>", command="kinpress report x", seed=1
    )


def test_report_json_holds_every_result(report_of_families) -> None:  # type: ignore[no-untyped-def]
    doc = json.loads(json.dumps(report_of_families.as_json()))
    assert set(doc) >= {"title", "items", "left_out", "compressor", "matrix", "tree", "groups",
                        "map", "nearest", "provenance", "cautions"}  # fmt: skip
    assert doc["items"][0]["name"] == HOSTILE
    assert doc["items"][1] == {"name": "f0m1.txt", "source": "/data/f0m1.txt",
                               "size": doc["items"][1]["size"], "kind": ".txt file",
                               "label": "family0", "role": "compared"}  # fmt: skip
    assert doc["matrix"]["labels"][0] == HOSTILE
    assert len(doc["matrix"]["distances"]) == 9
    assert doc["tree"]["leaves"] == 9
    assert doc["groups"]["k"] == 3  # three families, far apart
    assert doc["groups"]["agreement"]["adjusted_rand"] == pytest.approx(1.0)
    assert len(doc["map"]["items"]) == 9
    first = doc["nearest"][0]
    assert first["item"] == HOSTILE
    # the nearest of each item is one of its own family
    assert {n["item"] for n in first["neighbours"][:2]} == {"f0m1.txt", "f0m2.txt"}
    assert doc["compressor"]["spec"] == "zlib:level=9" and doc["compressor"]["given"] is True
    assert doc["provenance"]["command"] == "kinpress report x"
    assert doc["provenance"]["versions"]["kinpress"]
    assert any("not proof" in c for c in doc["cautions"])
    assert any("model-based phylogenetics" in c for c in doc["cautions"])
    assert any("near 1" in c for c in doc["cautions"])
    assert doc["derived"] is None and doc["classification"] is None


class _Links(HTMLParser):
    """Every tag, and every src and href, of a page."""

    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.urls: list[str] = []
        self.meta: dict[str, str] = {}

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        values = dict(attrs)
        for key in ("src", "href", "srcset", "action", "poster", "data"):
            if values.get(key):
                self.urls.append(values[key] or "")
        if tag == "meta" and values.get("http-equiv"):
            self.meta[values["http-equiv"] or ""] = values.get("content") or ""


def test_html_shows_names_as_text_never_markup(report_of_families) -> None:  # type: ignore[no-untyped-def]
    page = render_html(report_of_families)
    assert ESCAPED in page
    assert "<b>x" not in page
    assert "families &amp; &lt;friends&gt;" in page
    parser = _Links()
    parser.feed(page)
    assert "b" not in parser.tags


def test_html_fetches_nothing(report_of_families) -> None:  # type: ignore[no-untyped-def]
    page = render_html(report_of_families)
    parser = _Links()
    parser.feed(page)
    assert parser.urls, "the figures are images with data URIs"
    assert all(url.startswith("data:image/svg+xml;base64,") for url in parser.urls)
    assert "script" not in parser.tags and "link" not in parser.tags
    assert parser.meta["Content-Security-Policy"] == CONTENT_SECURITY_POLICY
    assert "default-src 'none'" in CONTENT_SECURITY_POLICY
    assert "http://" not in page and "https://" not in page


def test_template_is_package_data() -> None:
    template = resources.files("kinpress.report").joinpath("templates", "report.html.j2")
    assert template.is_file()
    # A non-editable install ships only what package-data names.
    config = tomllib.loads((ROOT / "pyproject.toml").read_text())
    patterns = config["tool"]["setuptools"]["package-data"]["kinpress.report"]
    assert any(Path("templates/report.html.j2").match(p) for p in patterns)
    assert any(dep.startswith("jinja2") for dep in config["project"]["dependencies"])


def test_derived_findings_show_their_shared_passage() -> None:
    from kinpress.derived import find_derived

    rng = random.Random(5)
    words = [f"word{i}" for i in range(300)]
    texts = [" ".join(rng.choice(words) for _ in range(500)) for _ in range(5)]
    items = [Item(f"t{i}.txt", t.encode(), f"t{i}.txt") for i, t in enumerate(texts)]
    copied = texts[0][:1500] + " <script>alert(1)</script> "
    items.append(Item("copy.txt", copied.encode(), "copy.txt"))
    spec = "zlib:level=9"
    dm = distance_matrix(items, compressor(spec))
    found = find_derived(items, spec, exhaustive=True)
    assert any({f.a, f.b} == {"t0.txt", "copy.txt"} for f in found.findings)
    choice = CompressorChoice(spec, dm.conditional, dm.strand, given=True)
    report = build_report(items, dm, choice, derived=found, passages=True)
    assert report.passages and {report.passages[0].a, report.passages[0].b} == {
        "t0.txt",
        "copy.txt",
    }
    assert (
        report.passages[0].a_text[:40] == texts[0][:40]
        or report.passages[0].b_text[:40] == texts[0][:40]
    )
    page = render_html(report)
    assert "longest shared passage" in page
    assert "<script>" not in page
    doc = report.as_json()
    assert doc["derived"]["findings"][0]["relation"]


def test_a_large_derived_family_shows_how_each_file_joins_it() -> None:
    # As the command's text does, the page lists a family of more than LISTED_PAIRS findings
    # by its links (each file with the one it is most like) and counts the rest; the JSON keeps
    # every finding and says which pairs were shown.
    from kinpress.derived import LISTED_PAIRS, find_derived

    rng = random.Random(8)
    words = [f"word{i}" for i in range(300)]
    template = " ".join(rng.choice(words) for _ in range(400))
    items = [
        Item(f"v{k}.txt", template.replace("word1 ", f"var{k} ", 1 + k).encode(), f"v{k}.txt")
        for k in range(7)
    ]
    items += [
        Item(f"o{k}.txt", " ".join(rng.choice(words) for _ in range(400)).encode(), f"o{k}.txt")
        for k in range(3)
    ]
    spec = "zlib:level=9"
    found = find_derived(items, spec, exhaustive=True)
    assert len(found.findings) == 21 > LISTED_PAIRS
    dm = distance_matrix(items, compressor(spec))
    choice = CompressorChoice(spec, dm.conditional, dm.strand, given=True)
    report = build_report(items, dm, choice, derived=found, passages=True)
    assert len(report.passages) == 6  # the pairs shown, not all 21
    page = render_html(report)
    assert "family 1: 7 files, 21 findings" in page
    assert "… and 15 more pairs among these 7 files" in page
    table = page[
        page.index('id="derived-findings"') : page.index("</table>", page.index("derived-findings"))
    ]
    assert table.count("<td>near_copy</td>") + table.count("<td>identical</td>") == 6
    doc = report.as_json()
    assert len(doc["derived"]["findings"]) == 21
    (family,) = doc["derived"]["families"]
    assert family["findings"] == 21 and len(family["shown"]) == 6
    assert family["members"] == [f"v{k}.txt" for k in range(7)]


# The command


def _write_family_files(folder: Path, hostile: str) -> None:
    folder.mkdir()
    for item in _family_items():
        (folder / item.name).write_bytes(item.data)
    (folder / hostile).write_bytes((folder / "f2m2.txt").read_bytes()[:2000])


def test_report_command_writes_html_and_json(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    hostile = "<b>x&y<b>.txt"  # a file name cannot hold '/'
    inputs = tmp_path / "in"
    _write_family_files(inputs, hostile)
    # a label table kept beside the inputs is left out, and the report says so
    (inputs / "labels.tsv").write_text("item\tfamily\nf0m0.txt\tfamily0\nf1m0.txt\tfamily1\n")
    page, data = tmp_path / "r.html", tmp_path / "r.json"
    common = [str(inputs), "-c", "zlib:level=9", "--no-cache", "--quiet"]
    assert main(["report", *common, "-o", str(page)]) == 0
    text = page.read_text()
    assert "&lt;b&gt;x&amp;y&lt;b&gt;.txt" in text and "<b>x" not in text
    assert main(["report", *common, "--json", "-o", str(data)]) == 0
    doc = json.loads(data.read_text())
    assert hostile in doc["matrix"]["labels"]
    assert "labels.tsv" not in doc["matrix"]["labels"]
    assert any("labels.tsv" in line for line in doc["left_out"])
    assert doc["provenance"]["command"].startswith("kinpress report --compressor zlib:level=9")
    assert doc["provenance"]["command"].endswith(str(inputs))
    # an output inside the input folder is refused before any work, the folder left as it was
    assert main(["report", *common, "-o", str(inputs / "r.html")]) == 2
    assert not (inputs / "r.html").exists()
    assert main(["report", *common, "--passages"]) == 2
    assert "--passages" in capsys.readouterr().err


def test_report_with_auto_shows_the_table_behind_the_choice_without_calibrating_again(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # -c auto calibrates once to choose; the page shows that calibration's table. A second
    # calibration for the page (calibration_report's own) would double a first run's wait.
    import kinpress.calibration.auto as auto

    def again(*args: object, **kwargs: object) -> None:
        raise AssertionError("the report calibrated a second time")

    monkeypatch.setattr(auto, "calibrate", again)
    monkeypatch.setattr(auto, "choose_compressor", again)
    inputs = tmp_path / "in"
    _write_family_files(inputs, "extra.txt")
    cache = tmp_path / "sizes.sqlite"
    for run, store in enumerate((["--no-cache"], ["--cache", str(cache)], ["--cache", str(cache)])):
        data = tmp_path / f"r{run}.json"
        argv = ["report", str(inputs), "--budget", "20", "--quiet", "--json", "-o", str(data)]
        assert main([*argv, *store]) == 0
        shown = json.loads(data.read_text())["compressor"]
        assert not shown["given"]
        table = shown["calibration"]
        assert table["recommended"] == shown["spec"]
        assert len(table["compressors"]) >= 2
    assert cache.exists()


def _reference_and_unknowns(tmp_path: Path, families: Sequence[int]) -> tuple[Path, Path]:
    """known/<family>/ of the family items, with each given family's third item moved to new/."""
    reference, unknown = tmp_path / "known", tmp_path / "new"
    unknown.mkdir()
    for item in _family_items():
        origin = reference / item.label  # type: ignore[operator]
        origin.mkdir(parents=True, exist_ok=True)
        (origin / item.name).write_bytes(item.data)
    for family in families:
        moved = reference / f"family{family}" / f"f{family}m2.txt"
        moved.rename(unknown / f"f{family}m2.txt")
    return reference, unknown


def test_report_command_classifies_with_a_reference(tmp_path: Path) -> None:
    reference, unknown = _reference_and_unknowns(tmp_path, range(3))
    data = tmp_path / "o.json"
    argv = ["report", "--reference", str(reference), str(unknown), "-c", "zlib:level=9",
            "--no-cache", "--quiet", "--json", "-o", str(data)]  # fmt: skip
    assert main(argv) == 0
    doc = json.loads(data.read_text())
    c = doc["classification"]
    assert c["origins"] == ["family0", "family1", "family2"]
    best = {p["item"]: p["best"] for p in c["predictions"]}
    assert best == {f"f{f}m2.txt": f"family{f}" for f in range(3)}
    roles = {i["name"]: i["role"] for i in doc["items"]}
    assert roles["f0m2.txt"] == "unknown" and roles["family0/f0m0.txt"] == "reference"
    assert any("origin is evidence" in x for x in doc["cautions"])
    # the page names the deciding test in words, as the JSON does
    page = tmp_path / "o.html"
    assert main([*argv[:-3], "-o", str(page)]) == 0
    from markupsafe import escape  # what the page's template escapes with

    words = c["abstention"]["test_words"]
    assert words.startswith("the ") and f"conformal p-value of {escape(words)}" in page.read_text()
    # the guarantee and the scores' footing each an item of their own, not one block of text
    assert f"<li><strong>Abstention:</strong> {escape(c['abstention']['guarantee'])}.</li>" in (
        page.read_text()
    )
    # each origin left out in turn: the JSON's shares, and on the page a row per origin, hardest
    # first, with the share refused and the kin the rest were taken for
    left_out = c["abstention"]["left_out"]
    assert [x["origin"] for x in left_out] == c["origins"]
    html = page.read_text()
    table = html[html.index('<table id="left-out">') :]
    table = table[: table.index("</table>")]
    rows = re.findall(r'<tr><td class="mono">([^<]+)</td><td class="num">(\d+)%</td>', table)
    hardest_first = sorted(left_out, key=lambda x: x["refused"])
    assert [o for o, _ in rows] == [x["origin"] for x in hardest_first]
    assert [int(v) for _, v in rows] == [round(100 * x["refused"]) for x in hardest_first]
    # every input named: no unknown items to group, and no section saying so
    assert c["unknown_groups"]["unknown"] == 0 and "Unknown items, grouped" not in html


def test_report_decides_origins_as_classify_is_told(tmp_path: Path) -> None:
    # The report's origins come from the same classify call as the command's: a user who chose
    # a deciding test or a rate there gets the same on the page, and without a reference the
    # two options have nothing to decide.
    reference, unknown = _reference_and_unknowns(tmp_path, [1])
    data = tmp_path / "o.json"
    argv = ["report", "--reference", str(reference), str(unknown), "-c", "zlib:level=9",
            "--no-cache", "--quiet", "--json", "-o", str(data)]  # fmt: skip
    assert main([*argv, "--decide-by", "separation", "--significance", "0.2"]) == 0
    abstention = json.loads(data.read_text())["classification"]["abstention"]
    assert abstention["test"] == "separation" and abstention["significance"] == 0.2
    assert main(argv) == 0
    assert json.loads(data.read_text())["classification"]["abstention"]["significance"] == 0.05
    plain = ["report", str(reference), "-c", "zlib:level=9", "--no-cache", "--quiet", "--json",
             "-o", str(data)]  # fmt: skip
    with pytest.raises(SystemExit):  # not a test: argparse refuses it
        main([*argv, "--decide-by", "vote"])
    assert main([*plain, "--decide-by", "fit"]) == 2
    assert main([*plain, "--significance", "0.1"]) == 2


# A real browser


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")


def _chromium(page: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    assert CHROMIUM is not None
    return subprocess.run(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
         "--host-resolver-rules=MAP * ~NOTFOUND", "--enable-logging=stderr", "--v=0",
         f"--user-data-dir={page.parent / 'profile'}", *extra, page.as_uri()],
        capture_output=True, text=True, timeout=120, check=False,
    )  # fmt: skip


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (.ci/run installs it)")
def test_chromium_renders_the_report_offline(tmp_path: Path, report_of_families) -> None:  # type: ignore[no-untyped-def]
    page = tmp_path / "report.html"
    page.write_text(render_html(report_of_families))
    dom = _chromium(page, "--dump-dom")
    assert dom.returncode == 0, dom.stderr[-2000:]
    assert ESCAPED in dom.stdout  # the name as text in the rendered DOM
    parser = _Links()
    parser.feed(dom.stdout)
    assert "b" not in parser.tags
    assert all(url.startswith("data:") for url in parser.urls)
    # Console errors and blocked requests (a CSP refusal, a failed load) are logged on stderr.
    for line in dom.stderr.splitlines():
        assert "CONSOLE" not in line and "Content Security Policy" not in line, line
        assert "net::ERR" not in line, line
    shot = tmp_path / "report.png"
    run = _chromium(page, f"--screenshot={shot}", "--window-size=1200,1600")
    assert run.returncode == 0, run.stderr[-2000:]
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 20_000


def test_auto_choice_shows_its_calibration_table_reasons_and_warnings() -> None:
    from kinpress.calibration import calibrate

    items = _family_items()
    table = calibrate(items, ["zlib:level=9", "zstd:level=3"], samples=2, sweep_seconds=0.5,
                      max_bytes=1 << 15)  # fmt: skip
    spec = "zstd:level=3"
    dm = distance_matrix(items, compressor(spec))
    warning = "zstd:level=3: reliable up to 1 bytes, below the largest pair <of items>"
    choice = CompressorChoice(spec, dm.conditional, dm.strand, given=False,
                              reasons=("chose zstd:level=3: quick",), warnings=(warning,),
                              calibration=table)  # fmt: skip
    report = build_report(items, dm, choice)
    page = render_html(report)
    assert "chosen by calibration on these inputs" in page
    assert "chose zstd:level=3: quick" in page
    assert "largest pair &lt;of items&gt;" in page
    assert '<tr style="font-weight:600"><td><code>zstd:level=3</code>' in page
    assert "<tr><td><code>zlib:level=9,window=15</code>" in page  # the canonical spec
    # The known answers (calibration/controls.py) beside it: one column each, the bits a symbol
    # each compressor spent, and what follows from a compressor at the random rate.
    assert "What no compressor can see" in page
    for spot in table.compressors[0].blind_spots:
        assert f"<th>{spot.control}<br>" in page
    zlib_pi = next(s for s in table.compressors[0].blind_spots if s.control == "pi")
    assert f"{zlib_pi.bits_per_symbol:.2f}" in page
    assert "does not prove two items unrelated" in page
    doc = report.as_json()
    specs = [c["spec"] for c in doc["compressor"]["calibration"]["compressors"]]
    assert specs == ["zlib:level=9,window=15", "zstd:level=3"]
    assert doc["compressor"]["warnings"] == [warning]


def test_map_figure_names_medoids_first_and_never_one_name_on_another() -> None:
    from kinpress.plots.map import map_figure

    # Two tight clusters of four and one point apart: one name per cluster, the marked one's.
    xy = [(0, 0), (0.001, 0.001), (0.002, 0), (0, 0.002), (1, 1), (1.001, 1), (1, 1.001),
          (1.002, 1.002), (0, 1)]  # fmt: skip
    names = [f"$p{i}$" for i in range(9)]  # '$' must show as it is, not as mathtext
    found = classical_scaling(names, squareform_of(xy))
    fig = map_figure(found, classes={n: "c" for n in names}, marked=["$p2$", "$p6$"])
    ax = next(a for a in fig.axes if a.get_label() == "map")
    shown = sorted(t.get_text() for t in ax.texts)
    assert shown == sorted([r"\$p2\$", r"\$p6\$", r"\$p8\$"])


def squareform_of(points: list[tuple[float, float]]) -> np.ndarray:
    from scipy.spatial.distance import pdist, squareform

    return squareform(pdist(np.array(points, dtype=float)))


def test_rerun_command_names_what_auto_chose_and_drops_the_budget_it_weighed() -> None:
    # The page's "how to make this again" must measure the same way on another machine, where
    # -c auto (which weighs cores and budget) might choose otherwise: it names the choice.
    import shlex

    from kinpress.cli import build_parser
    from kinpress.cli.report import rerun_command

    parser = build_parser()
    args = parser.parse_args(["report", "in dir", "--budget", "30", "--k", "3", "-o", "r.html"])
    words = shlex.split(rerun_command(args, "lzma:level=9,extreme=0"))
    assert words[:2] == ["kinpress", "report"]
    assert words[words.index("--compressor") + 1] == "lzma:level=9,extreme=0"
    assert "--budget" not in words and "auto" not in words
    assert words[words.index("--k") + 1] == "3" and words[-1] == "in dir"
    # the rerun parses, and a named compressor is kept as given
    again = parser.parse_args(words[1:])
    assert again.compressor == "lzma:level=9,extreme=0"
    named = parser.parse_args(["report", "x", "-c", "zlib:level=9"])
    assert "--compressor zlib:level=9" in rerun_command(named, "zlib:level=9,window=15")


def test_report_groups_the_unknown_items_from_its_own_matrix(tmp_path: Path) -> None:
    # Family 2 is missing from the reference: its three texts come back unknown and, by their
    # distances in the report's own matrix (nothing more measured), form one group that the
    # JSON and the page show with the origin they fit best. Six reference items support rates
    # from 1/7, so the test asks for 0.2.
    reference, unknown = _reference_and_unknowns(tmp_path, [0])
    for member in range(3):
        moved = reference / "family2" / f"f2m{member}.txt"
        moved.rename(unknown / moved.name)
    (reference / "family2").rmdir()
    data = tmp_path / "u.json"
    argv = ["report", "--reference", str(reference), str(unknown), "-c", "zlib:level=9",
            "--significance", "0.2", "--no-cache", "--quiet", "--json", "-o",
            str(data)]  # fmt: skip
    assert main(argv) == 0
    c = json.loads(data.read_text())["classification"]
    decided = {p["item"]: p["decision"] for p in c["predictions"]}
    assert decided == {"f0m2.txt": "named", **{f"f2m{m}.txt": "unknown" for m in range(3)}}
    grouped = c["unknown_groups"]
    assert grouped["skipped"] is None and grouped["unknown"] == 3 and grouped["alone"] == []
    (group,) = grouped["groups"]
    assert sorted(group["members"]) == ["f2m0.txt", "f2m1.txt", "f2m2.txt"]
    assert sum(group["fits"].values()) == 3 and 0 < group["spread"] < 0.5  # near copies
    page = tmp_path / "u.html"
    assert main([*argv[:-3], "-o", str(page)]) == 0
    html = page.read_text()
    table = html[html.index('<table id="unknown-groups">') :]
    table = table[: table.index("</table>")]
    assert group["members"][0] == group["medoid"]  # the most typical first
    assert ("(content and shape views, as the scores)" in html) == grouped["shape"]
    assert all(f"f2m{m}.txt" in table for m in range(3)) and "evidence to review" in html
    # the origins a group fits best, one to a line that does not wrap: a long list of them
    # read as a narrow column of broken names
    fits = [f"{origin} ({n})" for origin, n in group["fits"].items()]
    assert f'<td class="mono nowrap">{"<br>".join(fits)}</td>' in table
    # the summary before the details: the groups come before the table of every item
    assert html.index('<table id="unknown-groups">') < html.index('<table id="origin-items">')

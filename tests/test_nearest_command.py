"""`kinpress nearest`, the memory refusal that names it, and `groups` going sparse by itself."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from kinpress import distance
from kinpress.cli import main
from kinpress.distance import TooLarge, check_matrix_memory, distance_matrix, matrix_memory_bytes
from kinpress.items import Item, load_items, unescape_name
from kinpress.neighbours import exact_neighbours
from scale_corpus import log_chunks

SPEC = ["-c", "zstd:level=3", "--no-cache"]
ODD = "odd\tname\nhere.log"


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def chunk_folder(tmp_path: Path) -> tuple[Path, Path]:
    """240 generated log chunks from 8 sources (one with a tab and a line break in its name)
    and a labels file of their sources."""
    folder = tmp_path / "chunks"
    folder.mkdir()
    chunks, owner = log_chunks(240, 8, seed=21)
    names = [ODD if k == 3 else f"chunk{k:03d}.log" for k in range(len(chunks))]
    for name, data in zip(names, chunks, strict=True):
        (folder / name).write_bytes(data)
    labels = tmp_path / "labels.tsv"
    items = load_items([str(folder)])
    by_name = dict(zip(names, owner, strict=True))
    rows = []
    for item in items:
        from kinpress.items import escape_name

        rows.append(f"{escape_name(item.name)}\tsource{by_name[Path(item.name).name]}\n")
    labels.write_text("".join(rows))
    return folder, labels


def test_nearest_tsv_reads_back_with_escaped_names(
    capsys: pytest.CaptureFixture[str], chunk_folder: tuple[Path, Path]
) -> None:
    folder, _ = chunk_folder
    code, out, err = run(capsys, "nearest", str(folder), *SPEC, "--k", "4")
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0] == "item\trank\tneighbour\tncd"
    rows = [line.split("\t") for line in lines[1:]]
    assert all(len(r) == 4 for r in rows)  # the tab and line break in a name are escaped
    names = {unescape_name(r[0]) for r in rows}
    items = load_items([str(folder)])
    assert names == {item.name for item in items}
    assert any(ODD in name for name in names)
    # Against the matrix: nearly every item's first neighbour is at the matrix's smallest
    # distance (the search is approximate), and none is nearer than it (all exact NCDs).
    dm = distance_matrix(items, "zstd:level=3")
    _, exact = exact_neighbours(dm.distances, 4)
    first = {unescape_name(r[0]): float(r[3]) for r in rows if r[1] == "1"}
    found = np.array([first[item.name] for item in items])
    assert np.all(found >= exact[:, 0] - 2e-6)
    assert np.mean(np.abs(found - exact[:, 0]) <= 2e-6) >= 0.95
    assert "pairs measured of 28,680" in err


def test_nearest_says_what_its_columns_mean_beside_the_tsv(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    code, out, err = run(capsys, "nearest", str(text_folder), *SPEC, "--k", "2")
    assert code == 0, err
    assert out.splitlines()[0] == "item\trank\tneighbour\tncd"  # the TSV stays a table
    legend = [line for line in err.splitlines() if "ncd: " in line]
    assert len(legend) == 1 and "rank: " in legend[0]
    assert "normalized compression distance" in legend[0]


def test_nearest_json_and_labels(
    capsys: pytest.CaptureFixture[str], chunk_folder: tuple[Path, Path], tmp_path: Path
) -> None:
    folder, labels = chunk_folder
    out_file = tmp_path / "near.json"
    code, _, err = run(
        capsys, "nearest", str(folder), *SPEC, "--json", "-o", str(out_file),
        "--labels", str(labels),
    )  # fmt: skip
    assert code == 0, err
    doc = json.loads(out_file.read_text())
    assert doc["k"] == 10 and len(doc["items"]) == 240
    assert all(len(entry["neighbours"]) == 10 for entry in doc["items"])
    share = float(err.split("against known labels: ")[1].split("%")[0])
    assert share > 90


def test_nearest_refuses_bad_input(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    code, _, err = run(capsys, "nearest", str(tmp_path / "missing"), *SPEC)
    assert code != 0 and "missing" in err and "Traceback" not in err
    code, _, err = run(capsys, "nearest", str(tmp_path), *SPEC, "--k", "0")
    assert code == 2 and "--k 0" in err


def test_memory_estimate_refuses_and_names_the_sparse_route() -> None:
    items = [Item(name=f"i{k}", data=b"x" * 100, source="t") for k in range(1000)]
    need = matrix_memory_bytes(1000, 100_000)
    check_matrix_memory(items, limit=need + 1)  # fits
    with pytest.raises(TooLarge, match="kinpress nearest"):
        check_matrix_memory(items, limit=need - 1)
    with pytest.raises(TooLarge):
        distance_matrix(items[:50], "zlib", memory_limit=1 << 20)


def test_groups_go_sparse_when_the_matrix_would_not_fit(
    capsys: pytest.CaptureFixture[str],
    chunk_folder: tuple[Path, Path],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    folder, labels = chunk_folder
    total = sum(len(item.data) for item in load_items([str(folder)]))
    limit = matrix_memory_bytes(240, total) - 1  # just too little for the whole matrix
    monkeypatch.setattr(distance, "available_memory", lambda: limit)
    code, out, err = run(capsys, "groups", str(folder), *SPEC, "--labels", str(labels), "--json")
    assert code == 0, err
    assert "a full matrix of 240 items needs about" in err and "nearest neighbours instead" in err
    report = json.loads(out)
    ari = report["agreement"]["adjusted_rand"]
    assert ari >= 0.9 and report["k"] == 8
    # The matrix command refuses instead, naming the route.
    code, _, err = run(capsys, "matrix", str(folder), *SPEC)
    assert code == 1 and "kinpress nearest" in err


def test_groups_go_sparse_over_the_budget(
    capsys: pytest.CaptureFixture[str], chunk_folder: tuple[Path, Path]
) -> None:
    folder, _ = chunk_folder
    code, out, err = run(capsys, "groups", str(folder), *SPEC, "--budget", "0.001")
    assert code == 0, err
    assert "over the --budget" in err
    assert len(out.splitlines()) == 241
    code, out, err = run(capsys, "groups", str(folder), *SPEC)
    assert "nearest neighbours instead" not in err
    assert np.all([len(line.split("\t")) == 4 for line in out.splitlines()])

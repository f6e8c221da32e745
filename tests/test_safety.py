"""Nothing lost, nothing run, nothing hidden: outputs never land on inputs, short writes and
oversized inputs are errors, workers import only installed code, links are reported, and every
value that can be checked is checked before the work starts."""

from __future__ import annotations

import gzip
import json
import os
import shutil
import stat
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pytest

import kinpress.distance
from conftest import generated_text
from kinpress import InputError, distance_matrix, load_items
from kinpress.cli import main
from kinpress.distance import TooLarge, matrix_memory_bytes
from kinpress.formats import STALE_SECONDS, atomic_write
from kinpress.items import DEFAULT_MAX_FILE_BYTES, Item

FAST = ["-c", "zlib:level=6", "--no-cache"]
KINPRESS = str(Path(sys.executable).with_name("kinpress"))


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def one_line_error(code: int, err: str, *words: str) -> None:
    lines = [line for line in err.splitlines() if line.startswith("kinpress: error:")]
    assert code != 0 and len(lines) == 1, err
    assert "Traceback" not in err
    for word in words:
        assert word in lines[0], lines[0]


@contextmanager
def tmpfs(where: Path, size: str, *, read_only: bool = False) -> Iterator[Path]:
    """A small memory file system at `where` (Linux, as root), unmounted afterwards."""
    where.mkdir()
    options = f"size={size}" + (",ro" if read_only else "")
    mounted = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", options, "tmpfs", str(where)], capture_output=True
    )
    if mounted.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {mounted.stderr.decode().strip()}")
    try:
        yield where
    finally:
        subprocess.run(["umount", str(where)], check=False)


# 1. outputs that are, or lie inside, inputs -------------------------------------------------


@pytest.mark.parametrize(
    "command",
    [
        ["matrix"],
        ["tree"],
        ["groups"],
        ["derived", "--exhaustive"],
        ["calibrate", "-c", "zlib"],
    ],
)
def test_an_output_inside_an_input_folder_is_refused_before_any_work(
    capsys: pytest.CaptureFixture[str], text_folder: Path, command: list[str]
) -> None:
    victim = text_folder / "b.txt"
    before = victim.read_bytes()
    fast = [] if command[0] == "calibrate" else FAST
    code, out, err = run(capsys, *command, str(text_folder), *fast, "-o", str(victim))
    one_line_error(code, err, "inside the input folder", str(victim))
    assert out == "" and victim.read_bytes() == before
    assert sorted(p.name for p in text_folder.iterdir()) == ["a.txt", "b.txt", "c.txt", "d.txt"]


def test_an_output_reaching_an_input_through_a_link_is_refused(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path
) -> None:
    link = tmp_path / "elsewhere"
    link.symlink_to(text_folder)
    code, _, err = run(capsys, "matrix", str(text_folder), *FAST, "-o", str(link / "new.tsv"))
    one_line_error(code, err, "inside the input folder")
    code, _, err = run(capsys, "matrix", str(text_folder / "a.txt"), str(text_folder / "b.txt"),
                       *FAST, "--plot", str(link / "a.txt"))  # fmt: skip
    one_line_error(code, err, "is also an input")


def test_a_tree_is_not_written_over_the_matrix_it_reads(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path
) -> None:
    saved = tmp_path / "m.tsv"
    assert run(capsys, "matrix", str(text_folder), *FAST, "-o", str(saved))[0] == 0
    before = saved.read_bytes()
    code, _, err = run(capsys, "tree", "--matrix", str(saved), "-o", str(saved))
    one_line_error(code, err, "is also an input")
    assert saved.read_bytes() == before


def test_a_cache_inside_an_input_folder_is_refused(
    capsys: pytest.CaptureFixture[str], text_folder: Path
) -> None:
    cache = text_folder / "sizes.sqlite"
    code, _, err = run(capsys, "matrix", str(text_folder), "-c", "zlib", "--cache", str(cache))
    one_line_error(code, err, "--cache", "inside the input folder")
    assert not cache.exists()


# 2. short writes ------------------------------------------------------------------------


@pytest.fixture
def many_items(tmp_path: Path) -> Path:
    """120 small files: their matrix as TSV is about 130 KB."""
    folder = tmp_path / "many"
    folder.mkdir()
    for k in range(120):
        (folder / f"item{k:03d}.txt").write_bytes(generated_text(k, lines=4))
    return folder


def test_standard_output_on_a_full_disk_is_an_error_naming_the_file(
    many_items: Path, tmp_path: Path
) -> None:
    with tmpfs(tmp_path / "full", "32k") as full:
        target = full / "m.tsv"
        with open(target, "wb") as out:
            done = subprocess.run([KINPRESS, "matrix", str(many_items), *FAST], stdout=out,
                                  stderr=subprocess.PIPE, text=True)  # fmt: skip
        assert done.returncode == 1
        assert "Traceback" not in done.stderr
        error = [line for line in done.stderr.splitlines() if "error" in line]
        assert len(error) == 1 and str(target) in error[0] and "No space left" in error[0]


def test_a_file_output_on_a_full_disk_keeps_the_old_file_and_no_temporary(
    capsys: pytest.CaptureFixture[str], many_items: Path, tmp_path: Path
) -> None:
    with tmpfs(tmp_path / "full", "32k") as full:
        target = full / "m.tsv"
        target.write_text("the old matrix\n")
        code, _, err = run(capsys, "matrix", str(many_items), *FAST, "-o", str(target))
        one_line_error(code, err, str(target), "No space left")
        assert target.read_text() == "the old matrix\n"
        assert [p.name for p in full.iterdir()] == ["m.tsv"]


# 9. worker and helper processes import only installed code ------------------------------


def test_worker_and_helper_processes_never_import_modules_from_the_current_folder(
    text_folder: Path, tmp_path: Path
) -> None:
    trap = tmp_path / "trap"
    trap.mkdir()
    marker = tmp_path / "imported-from-the-current-folder"
    for name in ("brotli", "zstandard", "pyppmd", "lzma", "numpy", "kinpress"):
        (trap / f"{name}.py").write_text(f"open({str(marker)!r}, 'a').write('{name}\\n')\n")
    done = subprocess.run(
        [KINPRESS, "matrix", str(text_folder), "-c", "ppmd:order=4", "--jobs", "2", "--no-cache"],
        cwd=trap,
        capture_output=True,
        text=True,
        env={k: v for k, v in os.environ.items() if k != "PYTHONPATH"},
    )
    assert done.returncode == 0, done.stderr
    assert not marker.exists(), marker.read_text()
    assert len(done.stdout.splitlines()) == 5
    # classify with -c auto: PPMd's and lzma's helper processes (they keep the state after a
    # corpus), started here to time the job's unit of work and in the workers to measure
    known = tmp_path / "known"
    for origin, names in (("left", "ab"), ("right", "cd")):
        (known / origin).mkdir(parents=True)
        for name in names:
            (known / origin / f"{name}.txt").write_bytes((text_folder / f"{name}.txt").read_bytes())
    done = subprocess.run(
        [KINPRESS, "classify", "--reference", str(known), *map(str, sorted(text_folder.iterdir())),
         "--jobs", "2", "--no-cache"],
        cwd=trap, capture_output=True, text=True,
        env={k: v for k, v in os.environ.items() if k != "PYTHONPATH"},
    )  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert not marker.exists(), marker.read_text()


# 10. inputs too large to hold ------------------------------------------------------------


def gzip_bomb(path: Path, megabytes: int) -> None:
    """`megabytes` MiB of zeros gzipped (about 1/1000 of that on disk), written as a stream."""
    zeros = bytes(1 << 20)
    with gzip.open(path, "wb", compresslevel=1) as out:
        for _ in range(megabytes):
            out.write(zeros)


def peak_memory_of(argv: list[str]) -> tuple[subprocess.CompletedProcess[str], int]:
    """Run a command in a child Python and return it with the child's peak resident bytes."""
    probe = (
        "import resource, subprocess, sys; "
        "done = subprocess.run(sys.argv[1:], capture_output=True, text=True); "
        "sys.stderr.write(done.stderr); "
        "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024, done.returncode)"
    )
    done = subprocess.run([sys.executable, "-c", probe, *argv], capture_output=True, text=True)
    peak, _ = done.stdout.split()
    return done, int(peak)


def test_a_gzip_bomb_is_refused_without_holding_more_than_the_limit(tmp_path: Path) -> None:
    bomb = tmp_path / "bomb.txt.gz"
    gzip_bomb(bomb, 256)
    assert bomb.stat().st_size < 2 << 20
    other = tmp_path / "other.txt"
    other.write_bytes(generated_text(1))
    done, peak = peak_memory_of(
        [KINPRESS, "matrix", str(bomb), str(other), *FAST, "--max-file-size", "16M"]
    )
    assert "larger than 16 MiB" in done.stderr and str(bomb) in done.stderr
    assert "Traceback" not in done.stderr
    assert peak < 160 << 20  # the interpreter and libraries, well below the 256 MiB inside


def test_an_endless_input_is_refused_at_the_limit(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run(capsys, "matrix", "/dev/zero", "/dev/zero", *FAST, "--max-file-size", "1M")
    one_line_error(code, err, "/dev/zero", "larger than 1 MiB")


def test_a_large_plain_file_is_refused_before_it_is_read(tmp_path: Path) -> None:
    big = tmp_path / "big.bin"
    with open(big, "wb") as out:
        out.truncate(3 << 30)  # sparse: 3 GiB on paper, nothing on disk
    with pytest.raises(InputError, match=r"big.bin: larger than 1 GiB \(3 GiB\)"):
        load_items([big])
    assert DEFAULT_MAX_FILE_BYTES == 1 << 30  # the README's documented default


def test_sizes_take_binary_units(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    from kinpress.cli import byte_size

    assert [byte_size(t) for t in ("4096", "512K", "2M", "1G", "1.5k", "3MiB")] == [
        4096, 512 << 10, 2 << 20, 1 << 30, 1536, 3 << 20]  # fmt: skip
    with pytest.raises(SystemExit) as stopped:
        main(["matrix", str(tmp_path), "--max-file-size", "lots"])
    assert stopped.value.code == 2 and "not a size" in capsys.readouterr().err


# 11. memory ------------------------------------------------------------------------------


def test_a_matrix_that_would_not_fit_is_refused_before_anything_is_compressed() -> None:
    items = [Item(f"x{k}", generated_text(k), "test") for k in range(50)]
    need = matrix_memory_bytes(50, sum(len(i.data) for i in items))
    seen: list[str] = []
    with pytest.raises(TooLarge, match="50 items needs about"):
        distance_matrix(items, "zlib", memory_limit=need - 1, progress=lambda *a: seen.append(a[0]))
    assert seen == []
    assert distance_matrix(items[:3], "zlib", memory_limit=need).labels == ("x0", "x1", "x2")


def test_the_command_line_refuses_a_matrix_larger_than_the_memory_available(
    capsys: pytest.CaptureFixture[str], text_folder: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(kinpress.distance, "available_memory", lambda: 100 << 20)
    code, _, err = run(capsys, "matrix", str(text_folder), *FAST)
    one_line_error(code, err, "needs about", "0.1 GiB is available")


def test_the_memory_estimate_grows_with_the_matrix_cells() -> None:
    small, large = matrix_memory_bytes(1000, 0), matrix_memory_bytes(2000, 0)
    assert large - small == pytest.approx(3 * (small - matrix_memory_bytes(0, 0)))


# 12, 13. file modes and stale temporary files ------------------------------------------------


def test_a_new_output_honours_the_umask_and_a_replaced_one_keeps_its_mode(tmp_path: Path) -> None:
    old = os.umask(0o077)
    try:
        atomic_write(tmp_path / "new.tsv", "x\n")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "new.tsv").stat().st_mode) == 0o600
    kept = tmp_path / "kept.tsv"
    kept.write_text("old\n")
    kept.chmod(0o640)
    atomic_write(kept, "new\n")
    assert stat.S_IMODE(kept.stat().st_mode) == 0o640 and kept.read_text() == "new\n"


def test_stale_temporaries_of_killed_writes_are_removed_by_the_next_write(tmp_path: Path) -> None:
    stale = tmp_path / ".m.tsv.kinpress-a1b2c3d4.tmp"
    fresh = tmp_path / ".m.tsv.kinpress-e5f6g7h8.tmp"  # a write going on right now
    theirs = tmp_path / ".m.tsv.keep"  # not ours
    for path in (stale, fresh, theirs):
        path.write_text("partial")
    long_ago = time.time() - STALE_SECONDS - 60
    for path in (stale, theirs):
        os.utime(path, (long_ago, long_ago))
    atomic_write(tmp_path / "other.tsv", "x\n")
    assert not stale.exists() and fresh.exists() and theirs.exists()


def test_a_killed_write_leaves_its_temporary_under_our_name(tmp_path: Path) -> None:
    script = (
        "import os, sys\n"
        "from kinpress.formats import atomic_write\n"
        "def pieces():\n"
        "    yield 'x' * 100\n"
        "    os.kill(os.getpid(), 9)\n"
        "    yield 'never'\n"
        f"atomic_write({str(tmp_path / 'm.tsv')!r}, pieces())\n"
    )
    subprocess.run([sys.executable, "-c", script], check=False)
    left = [p.name for p in tmp_path.iterdir()]
    assert len(left) == 1 and left[0].startswith(".m.tsv.kinpress-") and left[0].endswith(".tmp")


# 14. links below input folders --------------------------------------------------------------


@pytest.fixture
def linked_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "inputs"
    (folder / "sub").mkdir(parents=True)
    (folder / "a.txt").write_bytes(generated_text(1))
    (folder / "sub" / "b.txt").write_bytes(generated_text(2))
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "secret.txt").write_bytes(generated_text(3))
    (folder / "inside-link.txt").symlink_to(folder / "sub" / "b.txt")
    (folder / "out-link.txt").symlink_to(outside / "secret.txt")
    (folder / "dangling.txt").symlink_to(tmp_path / "missing.txt")
    (folder / "loop.txt").symlink_to(folder / "loop.txt")
    (folder / "folder-link").symlink_to(outside)
    return folder


def test_links_out_of_a_folder_and_broken_links_are_skipped_with_warnings(
    linked_folder: Path,
) -> None:
    with pytest.warns(UserWarning) as caught:
        items = load_items([linked_folder])
    assert sorted(i.name for i in items) == ["a.txt", "b.txt", "inside-link.txt"]
    said = " | ".join(str(w.message) for w in caught)
    assert "1 links that lead out of it" in said and "out-link.txt" in said
    assert "1 links to folders" in said and "folder-link" in said
    assert "2 links that lead nowhere" in said and "dangling.txt" in said and "loop.txt" in said


def test_follow_links_reads_links_wherever_they_lead(
    linked_folder: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with pytest.warns(UserWarning, match="lead nowhere"):
        items = load_items([linked_folder], follow_links=True)
    assert sorted(i.name for i in items) == [
        "a.txt", "b.txt", "inside-link.txt", "out-link.txt", "secret.txt"]  # fmt: skip
    code, out, err = run(capsys, "matrix", str(linked_folder), *FAST, "--follow-links")
    assert code == 0 and len(out.splitlines()) == 6 and "lead nowhere" in err


# 15. malformed matrices and bad values, found before the work -------------------------------


@pytest.mark.parametrize(
    ("name", "text", "words"),
    [
        ("dup.tsv", "\ta\ta\na\t0\t1\na\t1\t0\n", "the label 'a' appears twice"),
        ("labels.json", '{"labels": 3, "distances": []}', '"labels" must be a list'),
        ("values.json", '{"labels": ["a", "b"], "distances": [["0", 1], [1, 0]]}',
         '"distances" must be a list of rows of numbers'),
        ("sizes.json", '{"labels": ["a", "b"], "distances": [[0, 1], [1, 0]], "sizes": [1, 2]}',
         '"sizes" must be an object'),
        ("list.json", "[1, 2]", "not a kinpress matrix JSON"),
    ],
)  # fmt: skip
def test_malformed_matrix_files_get_one_line_naming_the_file(
    capsys: pytest.CaptureFixture[str], tmp_path: Path, name: str, text: str, words: str
) -> None:
    path = tmp_path / name
    path.write_text(text)
    code, _, err = run(capsys, "tree", "--matrix", str(path))
    one_line_error(code, err, str(path), words)


@pytest.mark.parametrize(
    ("command", "option"),
    [
        (["groups"], ["--k", "0"]),
        (["groups"], ["--cut", "-1"]),
        (["tree"], ["--bootstrap", "-1"]),
        (["tree"], ["--block-fraction", "2"]),
        (["tree"], ["--outgroup", "nobody"]),
        (["groups"], ["--k", "9"]),
        (["matrix"], ["--budget", "-5"]),
        (["derived"], ["--max-fpr", "0"]),
        (["matrix"], ["--max-file-size", "0"]),
    ],
)
def test_bad_option_values_are_refused_before_anything_is_computed(
    capsys: pytest.CaptureFixture[str],
    text_folder: Path,
    tmp_path: Path,
    command: list[str],
    option: list[str],
) -> None:
    cache = tmp_path / "sizes.sqlite"
    code, _, err = run(capsys, *command, str(text_folder), "-c", "zlib", "--cache", str(cache),
                       *option)  # fmt: skip
    one_line_error(code, err, option[0])
    assert code == 2 and not cache.exists()


def test_a_read_only_output_folder_is_refused_before_anything_is_computed(
    capsys: pytest.CaptureFixture[str], text_folder: Path, tmp_path: Path
) -> None:
    cache = tmp_path / "sizes.sqlite"
    with tmpfs(tmp_path / "sealed", "1m", read_only=True) as sealed:
        code, _, err = run(capsys, "matrix", str(text_folder), "-c", "zlib",
                           "--cache", str(cache), "-o", str(sealed / "m.tsv"))  # fmt: skip
    one_line_error(code, err, "is not writable")
    assert not cache.exists()


def test_a_memory_file_system_is_here_for_the_tests_above(tmp_path: Path) -> None:
    """Not a check of kinpress: says plainly when the tmpfs tests above were skipped."""
    if shutil.which("mount") is None or os.geteuid() != 0:
        pytest.skip("the full-disk and read-only tests need root and mount(8)")
    with tmpfs(tmp_path / "probe", "64k") as probe:
        (probe / "x").write_bytes(np.zeros(10, dtype=np.uint8).tobytes())
        assert json.loads("[1]") == [1]

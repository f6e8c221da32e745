"""Real interruptions of the command: killed or Ctrl-C'd runs resume from the cache."""

from __future__ import annotations

import json
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest


def _folder(tmp_path: Path, text: bytes, n: int = 60) -> Path:
    folder = tmp_path / "items"
    folder.mkdir()
    for k in range(n):
        (folder / f"item{k:03d}.txt").write_bytes(text[k * 9000 : k * 9000 + 12_000])
    return folder


def _matrix(folder: Path, cache: Path, out: Path) -> list[str]:
    return [
        sys.executable, "-m", "kinpress.cli", "matrix", str(folder), "-c", "zstd:level=19",
        "--cache", str(cache), "--format", "json", "-o", str(out), "--jobs", "2",
    ]  # fmt: skip


def _wait_for_pair_tiles(cache: Path, run: subprocess.Popen[str]) -> None:
    """Until some tiles of distinct pairs are committed (identity pairs have a = b; single
    items are stored under their own method)."""
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and run.poll() is None:
        if cache.exists():
            with sqlite3.connect(cache, timeout=30) as db:
                try:
                    (count,) = db.execute(
                        "SELECT count(*) FROM sizes WHERE method != 'single' AND a != b"
                    ).fetchone()
                except sqlite3.OperationalError:  # the schema is not there yet
                    count = 0
            if count:
                return
        time.sleep(0.2)
    pytest.fail("no pair tile was committed in time")


def _default_interrupt() -> None:
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def _stats(out: Path) -> dict[str, int]:
    return dict(json.loads(out.read_text())["stats"])


@pytest.mark.parametrize("how", [signal.SIGKILL, signal.SIGINT])
def test_an_interrupted_command_resumes_from_the_cache(
    tmp_path: Path, text_corpus: bytes, how: signal.Signals
) -> None:
    folder = _folder(tmp_path, text_corpus)
    cache, out = tmp_path / "c.sqlite", tmp_path / "d.json"
    # A suite started in the background by a shell without job control inherits SIGINT ignored,
    # and Python then installs no Ctrl-C handler: the command gets the default disposition back.
    run = subprocess.Popen(_matrix(folder, cache, out), stderr=subprocess.PIPE, text=True,
                           preexec_fn=_default_interrupt)  # fmt: skip
    _wait_for_pair_tiles(cache, run)
    run.send_signal(how)
    _, err = run.communicate(timeout=60)
    assert run.returncode != 0
    assert not out.exists()  # nothing half-written
    if how == signal.SIGINT:
        assert "rerun to resume" in err and "Traceback" not in err
    finished = subprocess.run(_matrix(folder, cache, out), capture_output=True, timeout=300)
    assert finished.returncode == 0
    stats = _stats(out)
    assert stats["pairs_from_cache"] > 0
    assert stats["pairs_computed"] > 0  # it was stopped before the end
    assert stats["pairs_computed"] + stats["pairs_from_cache"] == 60 * 59 // 2


def test_two_commands_can_share_one_cache(tmp_path: Path, text_corpus: bytes) -> None:
    folder = _folder(tmp_path, text_corpus, n=30)
    cache = tmp_path / "c.sqlite"
    outs = [tmp_path / "a.json", tmp_path / "b.json"]
    runs = [subprocess.Popen(_matrix(folder, cache, o), stderr=subprocess.PIPE) for o in outs]
    for r in runs:
        r.wait(timeout=300)
        assert r.returncode == 0
    first, second = (json.loads(o.read_text())["distances"] for o in outs)
    assert first == second

"""Shared fixtures: generated text inputs and the open datasets beside the repository."""

from __future__ import annotations

import os
import random
import sysconfig
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from kinpress import Item

SHARED_DATA = Path(__file__).resolve().parents[2] / "shared" / "datasets-real"
DATASETS = Path(__file__).resolve().parents[1] / "datasets"

# The NCDs (zstd level 19, two decimals) of 9 real source files from Debian's source packages,
# 3 Ada, 3 Go, 3 Rust: the Ada ones 0.23-0.60 apart, every other pair 0.89-1.0 (one tight
# group among files that share nothing; tests of groups).
ADA_GO_RUST_NCD = (
    (0.00, 0.23, 0.60, 0.98, 0.99, 0.91, 0.93, 0.95, 0.93),
    (0.23, 0.00, 0.60, 0.99, 0.99, 0.92, 0.94, 0.95, 0.93),
    (0.60, 0.60, 0.00, 0.98, 0.99, 0.96, 0.96, 0.97, 0.96),
    (0.98, 0.99, 0.98, 0.00, 1.00, 0.97, 0.99, 0.99, 0.98),
    (0.99, 0.99, 0.99, 1.00, 0.00, 0.99, 0.99, 0.99, 0.99),
    (0.91, 0.92, 0.96, 0.97, 0.99, 0.00, 0.92, 0.94, 0.92),
    (0.93, 0.94, 0.96, 0.99, 0.99, 0.92, 0.00, 0.89, 0.90),
    (0.95, 0.95, 0.97, 0.99, 0.99, 0.94, 0.89, 0.00, 0.92),
    (0.93, 0.93, 0.96, 0.98, 0.99, 0.92, 0.90, 0.92, 0.00),
)


@pytest.fixture(autouse=True, scope="session")
def _private_cache_home(tmp_path_factory: pytest.TempPathFactory) -> None:
    """Keep the default size cache of commands under test out of the user's cache directory."""
    os.environ["XDG_CACHE_HOME"] = str(tmp_path_factory.mktemp("cache-home"))


_WORDS = [
    "alpha",
    "beta",
    "gamma",
    "delta",
    "epsilon",
    "zeta",
    "theta",
    "kappa",
    "lambda",
    "sigma",
    "omega",
    "request",
    "response",
    "error",
    "warning",
    "info",
    "debug",
    "user",
    "session",
    "timeout",
    "retry",
    "connect",
    "close",
    "open",
    "read",
    "write",
]


def origin_text(origin: int, seed: int, lines: int = 30) -> str:
    """Log-like lines from a vocabulary of its own for each origin (fixed seeds)."""
    words = random.Random(origin)
    vocabulary = ["".join(words.choice("abcdefghijklmnop") for _ in range(6)) for _ in range(25)]
    rng = random.Random(1000 * origin + seed)
    rows = (
        f"{n:03d} " + " ".join(rng.choice(vocabulary) for _ in range(rng.randint(4, 9)))
        for n in range(lines)
    )
    return "\n".join(rows) + "\n"


def origin_items(origins: range, seeds: range, prefix: str = "r") -> list[Item]:
    """Items of origin_text, labelled o<origin>, named <prefix><origin>-<seed>."""
    return [
        Item(f"{prefix}{o}-{s}", origin_text(o, s).encode(), "generated", label=f"o{o}")
        for o in origins
        for s in seeds
    ]


def held_out_decision_scores(
    reference: list[Item], spec: str, **options: Any
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """What a classification's calibration decides on, recomputed from kinpress's public
    functions: each compressor of `spec` (a stack's specs joined by +) scores the reference
    held out fold by fold (fold_scores, with `options`) in the content and shape views, on the
    footing its Scoring chooses; a stack's views joined along the last axis. Returns the
    scores, the origins' codes and the reference rows behind them."""
    from kinpress.origins import Scoring, fold_scores, stacked
    from kinpress.origins.views import shaped_items

    views = [
        [fold_scores(given, part, **options) for given in (reference, shaped_items(reference))]
        for part in stacked(spec)
    ]
    keep = np.logical_and.reduce([c.measured & s.measured for c, s in views])
    codes = views[0][0].codes[keep]
    stacks = []
    for content, shape in views:
        way = Scoring.choose(content.scores[keep], shape.scores[keep], codes, content.origins)
        stacks.append(way.stack(content.scores[keep], shape.scores[keep]))
    if len(stacks) > 1:
        stacks = [np.concatenate([v if v.ndim == 3 else v[:, :, None] for v in stacks], axis=2)]
    return stacks[0], codes, np.flatnonzero(keep)


def generated_text(seed: int, lines: int = 60) -> bytes:
    """Deterministic log-like text; each seed draws from its own slice of the vocabulary."""
    rng = random.Random(seed)
    vocabulary = _WORDS[seed % 5 :] + _WORDS[: seed % 5]
    vocabulary = vocabulary[: 12 + seed % 7]
    rows = (
        f"{n:04d} " + " ".join(rng.choice(vocabulary) for _ in range(rng.randint(4, 10)))
        for n in range(lines)
    )
    return ("\n".join(rows) + "\n").encode()


@pytest.fixture
def text_folder(tmp_path: Path) -> Path:
    """A folder of four generated text files, a.txt .. d.txt."""
    folder = tmp_path / "texts"
    folder.mkdir()
    for seed, name in enumerate("abcd"):
        (folder / f"{name}.txt").write_bytes(generated_text(seed))
    return folder


def random_bytes(n: int, seed: int = 12345) -> bytes:
    """Incompressible bytes, the same for a seed on every machine."""
    return np.random.default_rng(seed).bytes(n)


@pytest.fixture(scope="session")
def text_corpus() -> bytes:
    """About 2 MB of real text: the Python standard library's own sources, in sorted order."""
    stdlib = Path(sysconfig.get_paths()["stdlib"])
    out = bytearray()
    for path in sorted(stdlib.glob("*.py")):
        out += path.read_bytes()
        if len(out) > 2_000_000:
            break
    return bytes(out)


@pytest.fixture(scope="session")
def shared_data() -> Path:
    """The open datasets in ../shared/datasets-real; the test is skipped where they are absent."""
    if not SHARED_DATA.is_dir():
        pytest.skip(f"open datasets not found at {SHARED_DATA} (outside the repository)")
    return SHARED_DATA

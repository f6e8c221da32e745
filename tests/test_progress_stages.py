"""Progress names the stage under way: -c auto's measuring of each candidate, and each of a
classification's measurements, so that long work is never silent and counts do not seem to
start over."""

from __future__ import annotations

import io
import random
import warnings

import pytest

from kinpress import Item, classify
from kinpress.calibration import choose_for_job
from kinpress.cli._console import Console
from kinpress.measure import staged

CANDIDATES = ["zlib:level=9", "bz2:level=9"]


def _text(origin: int, seed: int) -> bytes:
    """Lines from a vocabulary of each origin's own (fixed seeds)."""
    words = random.Random(origin)
    vocabulary = ["".join(words.choice("abcdefghijklmnop") for _ in range(6)) for _ in range(20)]
    rng = random.Random(100 * origin + seed)
    rows = (" ".join(rng.choice(vocabulary) for _ in range(rng.randint(4, 8))) for _ in range(25))
    return ("\n".join(rows) + "\n").encode()


def _items(seeds: range, prefix: str) -> list[Item]:
    return [
        Item(f"{prefix}{o}-{s}", _text(o, s), "generated", label=f"o{o}")
        for o in range(3)
        for s in seeds
    ]


class _Told:
    """A progress callback that keeps what it was told."""

    def __init__(self) -> None:
        self.calls: list[tuple[str, int, int]] = []

    def __call__(self, phase: str, done: int, total: int, /) -> None:
        self.calls.append((phase, done, total))

    @property
    def phases(self) -> list[str]:
        return list(dict.fromkeys(phase for phase, _, _ in self.calls))


def test_staged_names_the_stage_and_passes_none_through() -> None:
    told = _Told()
    report = staged(told, "held-out reference, content")
    assert report is not None
    report("pairs", 3, 10)
    assert told.calls == [("pairs (held-out reference, content)", 3, 10)]
    assert staged(None, "anything") is None


def test_the_labelled_choice_tells_each_candidate_it_measures() -> None:
    told = _Told()
    reference, targets = _items(range(6), "r"), _items(range(6, 8), "t")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        choice = choose_for_job(
            reference, "classify", targets=targets, candidates=CANDIDATES, progress=told
        )
    controls = [(done, total) for phase, done, total in told.calls if "on controls" in phase]
    assert controls == [(1, 2), (2, 2)]  # each candidate calibrated on the controls
    measured = [f.spec for f in choice.task]
    assert measured  # at least one candidate was measured on the held-out reference
    for spec in measured:
        for view in ("content", "shape"):
            assert f"pairs (auto trying {spec}: held-out reference, {view})" in told.phases
    # nothing is told outside a named stage
    assert all("(" in phase for phase in told.phases)


def test_the_unlabelled_choice_tells_its_sample_of_real_pairs() -> None:
    told = _Told()
    items = _items(range(4), "m")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        choice = choose_for_job(items, "matrix", candidates=CANDIDATES, progress=told)
    assert any("on controls" in phase for phase in told.phases)
    assert any(
        phase.endswith(f"(auto trying {choice.task[0].spec}: a sample of real pairs)")
        for phase in told.phases
    )


def test_a_classification_names_each_of_its_measurements() -> None:
    told = _Told()
    reference, targets = _items(range(6), "r"), _items(range(6, 8), "t")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = classify(targets, reference, "zlib:level=9", progress=told)
    stages = {phase[phase.index("(") + 1 : -1] for phase in told.phases}
    assert {"held-out reference, content", "held-out reference, shape"} <= stages
    assert "nearest reference items" in stages
    items = {"items, content", "items, shape"} if result.scoring.uses_shape else {"items"}
    assert items <= stages


@pytest.mark.parametrize("interactive", [True, False])
def test_a_message_during_progress_reaches_the_stream(interactive: bool) -> None:
    stream = io.StringIO()
    console = Console(quiet=False, stream=stream, line_seconds=1e6)
    console.interactive = interactive  # a bar as on a terminal, or lines as in a log
    with console.progress() as update:
        assert update is not None
        update("pairs (items)", 1, 4)
        console.say("auto: chose zlib:level=9")
    assert "kinpress: auto: chose zlib:level=9" in stream.getvalue()


def test_a_finished_stage_leaves_the_bar() -> None:
    # On a terminal each stage has its bar; one finished goes, so -c auto's many stages do not
    # stack up as full bars.
    console = Console(quiet=False, stream=io.StringIO())
    console.interactive = True
    with console.progress() as update:
        assert update is not None
        update("pairs (auto trying zlib:level=9: held-out reference, content)", 5, 10)
        update("pairs (auto trying zlib:level=9: held-out reference, content)", 10, 10)
        update("pairs (items)", 10, 10)  # all from the cache: never shown
        update("pairs (nearest reference items)", 1, 10)
        shown = [task.description for task in console._live.tasks]
    assert shown == ["pairs (nearest reference items)"]

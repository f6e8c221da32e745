"""Messages and progress on stderr: a bar on a terminal, a line now and then elsewhere."""

from __future__ import annotations

import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any, TextIO

from ..measure import Progress
from ..units import duration_text


class Console:
    """Progress and messages on stderr, nothing with --quiet. On a terminal progress is a bar;
    elsewhere (a log file, a batch job) a line every LINE_SECONDS while work goes on."""

    LINE_SECONDS = 10.0

    def __init__(self, quiet: bool, stream: TextIO | None = None) -> None:
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.interactive = not quiet and self.stream.isatty()

    def say(self, message: str) -> None:
        if not self.quiet:
            print(f"kinpress: {message}", file=self.stream)

    @contextmanager
    def progress(self) -> Iterator[Progress | None]:
        if self.quiet:
            yield None
        elif not self.interactive:
            yield self._lines()
        else:
            with self._bar() as update:
                yield update

    def _lines(self) -> Progress:
        """A progress callback that writes one line every LINE_SECONDS, the first after that."""
        last = [time.monotonic()]
        started: dict[str, float] = {}

        def update(phase: str, done: int, total: int) -> None:
            now = time.monotonic()
            begun = started.setdefault(phase, now)
            if now - last[0] < self.LINE_SECONDS or not 0 < done < total:
                return
            last[0] = now
            left = (now - begun) * (total - done) / done
            self.say(
                f"{phase}: {done:,} of {total:,} done ({done / total:.0%}), about"
                f" {duration_text(left)} left"
            )

        return update

    @contextmanager
    def _bar(self) -> Iterator[Progress]:
        from rich.console import Console as RichConsole
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeRemainingColumn

        bar = Progress(
            "{task.description}",
            BarColumn(),
            MofNCompleteColumn(),
            TimeRemainingColumn(),
            console=RichConsole(file=self.stream),
            transient=True,
        )
        tasks: dict[str, Any] = {}

        def update(phase: str, done: int, total: int) -> None:
            if phase not in tasks:
                tasks[phase] = bar.add_task(phase, total=total)
            bar.update(tasks[phase], completed=done)

        with bar:
            yield update

"""Messages and progress on stderr: a bar on a terminal, a line now and then elsewhere."""

from __future__ import annotations

import sys
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any, TextIO

from ..measure import Progress
from ..units import duration_text


class Console:
    """Progress and messages on stderr, nothing with --quiet. On a terminal progress is a bar;
    elsewhere (a log file, a batch job) a line every LINE_SECONDS while work goes on, from the
    progress reports or, while none arrives (one long tile, one bootstrap replicate), from a
    watch that says what is still running and for how long. ``line_seconds`` and ``clock``
    replace the class interval and ``time.monotonic`` (tests pass small or fake ones)."""

    LINE_SECONDS = 5.0

    def __init__(
        self,
        quiet: bool,
        stream: TextIO | None = None,
        *,
        line_seconds: float | None = None,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.interactive = not quiet and self.stream.isatty()
        self.line_seconds = line_seconds
        self.clock = clock
        self._live: Any = None  # the bar while one is shown: messages go above it

    @property
    def interval(self) -> float:
        return self.LINE_SECONDS if self.line_seconds is None else self.line_seconds

    def say(self, message: str) -> None:
        if self.quiet:
            return
        if self._live is not None:
            self._live.console.print(
                f"kinpress: {message}", markup=False, highlight=False, soft_wrap=True
            )
        else:
            print(f"kinpress: {message}", file=self.stream)

    @contextmanager
    def progress(self) -> Iterator[Progress | None]:
        if self.quiet:
            yield None
        elif not self.interactive:
            with self._lines() as update:
                yield update
        else:
            with self._bar() as update:
                yield update

    @contextmanager
    def _lines(self) -> Iterator[Progress]:
        """A progress callback that writes at most one line every ``interval`` seconds, the
        first after that, and a watch thread that writes one when no report has come for as
        long (see _Pace)."""
        lock = threading.Lock()
        begun = self.clock()
        pace = _Pace(self.interval, begun)
        state: dict[str, Any] = {}
        # each phase's first report: the time left is reckoned from the rate since then, not
        # from the count then (a measurement's cached sizes count as done at once)
        started: dict[str, tuple[float, int]] = {}

        def update(phase: str, done: int, total: int) -> None:
            now = self.clock()
            with lock:
                since, first = started.setdefault(phase, (now, done))
                state.update(phase=phase, done=done, total=total)
                if not pace.report(now, 0 < done < total):
                    return
            line = f"{phase}: {done:,} of {total:,} done ({done / total:.0%})"
            if done > first and now > since:
                left = (now - since) * (total - done) / (done - first)
                line += f", about {duration_text(left)} left"
            self.say(line)

        def still_working() -> None:
            now = self.clock()
            with lock:
                if not pace.silence(now):
                    return
                where = (
                    f"{state['phase']}: {state['done']:,} of {state['total']:,} done, "
                    if state and state["done"] < state["total"]
                    else ""
                )
            self.say(f"{where}still working ({duration_text(now - begun)} so far)")

        stop = threading.Event()

        def watch() -> None:
            while not stop.wait(self.interval):
                still_working()

        watcher = threading.Thread(target=watch, name="kinpress-progress", daemon=True)
        if self.interval > 0:
            watcher.start()
        try:
            yield update
        finally:
            stop.set()
            if watcher.is_alive():
                watcher.join()

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
            # a finished phase leaves the screen: a command's many stages (-c auto measures
            # every candidate) would otherwise stack up as full bars
            if phase not in tasks:
                if done >= total:
                    return
                tasks[phase] = bar.add_task(phase, total=total)
            if done >= total:
                bar.remove_task(tasks.pop(phase))
            else:
                bar.update(tasks[phase], completed=done)

        with bar:
            self._live = bar
            try:
                yield update
            finally:
                self._live = None


class _Pace:
    """When a progress line is due, off a terminal: at most one every `interval` seconds; from
    a report (which can say how long is left) when one comes, and from the watch only after
    `interval` seconds without any report (a long tile, a replicate), so that steady reports
    are never crowded out by the watch's "still working"."""

    def __init__(self, interval: float, now: float) -> None:
        self.interval = interval
        self.line = now  # the last line written (or the start)
        self.heard = now  # the last report

    def report(self, now: float, countable: bool) -> bool:
        """A report came at `now`; whether to write it (`countable`: some, not all, done; a
        phase's start or end alone does not keep the watch quiet)."""
        if not countable:
            return False
        self.heard = now
        if now - self.line < self.interval:
            return False
        self.line = now
        return True

    def silence(self, now: float) -> bool:
        """The watch woke at `now`; whether to write that work goes on."""
        if now - self.line < self.interval or now - self.heard < self.interval:
            return False
        self.line = now
        return True

"""C(prefix + x) for many x from a compressor's state after the prefix, kept in a helper process.

An origin's corpus (tens to hundreds of kB) is the prefix of every item scored against it, and
compressing it again for each item is most of a classification's work. A streaming compressor
that has taken the prefix holds everything it needs to compress what follows; a copy of the
process holding it (a fork) compresses one item from there and reports its bytes. The sizes
are those of compressing prefix + item whole: the same encoder sees the same bytes in the same
order (every adapter's test checks this to the byte).

Each process keeps a helper per thread that uses one at once: threads (lzma releases the GIL,
so the local engine runs it on threads) each borrow a helper of their own, the one that already
holds their prefix where it is free, so that two threads neither wait for one helper nor make it
feed their prefixes in turn (with one helper for both, lzma 9 classified on one core of two).

The state is kept in a small helper process that holds nothing else, since a fork costs in
proportion to the memory of the process that forks: about 0.7 ms from a bare Python, 3 ms from
a worker with kinpress imported, 25-30 ms from a command holding 200 MB of items (measured on
the development machine), against 35 ms for compressing a corpus of 170 kB again with PPMd.

An adapter gives a recipe: Python source that defines ``new(*settings)``, returning two
functions, ``feed(data)`` (the bytes of output so far for `data`) and ``finish()`` (the rest).
The helper reads messages on its standard input: b"P", the settings and a prefix, which it
feeds once and answers with the time that took (in microseconds); b"X" and items, each answered
with C(prefix + item). For an item it forks, and the copy feeds the item, finishes and reports
its bytes. It compresses prefix + item whole instead, for the rest of that prefix, once the
quickest fork so far costs more than that would at the prefix's pace (after a second try,
unless the first cost three times as much: on the shape view of code, whose prefixes encode
quickly, one slow fork turned forking off and doubled the time), or when a copy fails to
report. It imports only the standard library and what the recipe imports, starts isolated
(-I) in the root folder as the engine's workers do, ignores Ctrl-C and ends when its input
closes: when the process that started it ends.
"""

from __future__ import annotations

import atexit
import contextlib
import os
import subprocess
import sys
import threading
from collections.abc import Callable, Sequence
from typing import IO, TYPE_CHECKING, Any

from .base import Continued

if TYPE_CHECKING:
    from .base import Compressor

AVAILABLE = hasattr(os, "fork") and sys.platform.startswith("linux")
"""Whether a state can be kept here (forking a process that holds it)."""

_HELPER = r"""
import os, signal, sys, time
signal.signal(signal.SIGINT, signal.SIG_IGN)  # it ends when its parent does, as its input closes
exec(sys.argv[1])  # the recipe: new(*settings) -> (feed, finish)
source, sink = sys.stdin.buffer, sys.stdout.buffer

def exact(n):
    data = source.read(n)
    if len(data) != n:
        raise SystemExit(0)
    return data

def number():
    return int.from_bytes(exact(8), "little")

def whole(settings, data):
    feed, finish = new(*settings)
    return feed(data) + finish()

def forked(feed, finish, data):
    read, write = os.pipe()
    try:
        pid = os.fork()
    except OSError:  # no process to spare now: compressed whole
        os.close(read)
        os.close(write)
        return None
    if pid == 0:
        try:
            tail = feed(data) + finish()
            os.write(write, tail.to_bytes(8, "little"))
        finally:
            os._exit(0)
    os.close(write)
    answer = b""
    while len(answer) < 8:
        chunk = os.read(read, 8 - len(answer))
        if not chunk:
            break
        answer += chunk
    os.close(read)
    os.waitpid(pid, 0)
    return int.from_bytes(answer, "little") if len(answer) == 8 else None

prefix, settings, state, head = b"", (), None, 0
spent, forking, forks, quickest = 0.0, False, 0, 0.0
while True:
    kind = source.read(1)
    if kind == b"P":
        settings = tuple(number() for _ in range(number()))
        prefix = exact(number())
        started = time.perf_counter()
        feed, finish = new(*settings)
        head = feed(prefix)
        state = (feed, finish)
        spent, forking, forks, quickest = time.perf_counter() - started, True, 0, float("inf")
        sink.write(int(spent * 1e6).to_bytes(8, "little"))
    elif kind == b"X":
        sizes = []
        for _ in range(number()):
            data = exact(number())
            tail = None
            if forking:
                started = time.perf_counter()
                tail = forked(*state, data)
                took = time.perf_counter() - started
                forks, quickest = forks + 1, min(quickest, took)
                # what compressing prefix + data whole would cost, at the prefix's pace
                alone = spent * (len(prefix) + len(data)) / max(len(prefix), 1)
                forking = tail is not None and (
                    quickest < alone or (forks < 2 and took < 3 * alone)
                )
            sizes.append(head + tail if tail is not None else whole(settings, prefix + data))
        sink.write(b"".join(n.to_bytes(8, "little") for n in sizes))
    else:
        break
    try:
        sink.flush()
    except BrokenPipeError:
        break
"""


class Helper:
    """One helper process (see the module) for a recipe, and the prefix it holds; `busy` while
    a thread has borrowed it."""

    def __init__(self, recipe: str) -> None:
        self.holding: object = None
        self.broken = False
        self.busy = False
        self.process = subprocess.Popen(
            [sys.executable, "-I", "-c", _HELPER, recipe],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.DEVNULL,  # a helper that fails only costs time: sizes come whole
            cwd=os.sep,
        )

    def ask(self, message: bytes, answers: int) -> list[int]:
        """Send `message`, read `answers` numbers; an OSError if the helper is gone."""
        stdin: IO[bytes] | None = self.process.stdin
        stdout: IO[bytes] | None = self.process.stdout
        if stdin is None or stdout is None:
            raise OSError("no helper")
        stdin.write(message)
        stdin.flush()
        answer = stdout.read(8 * answers)
        if len(answer) != 8 * answers:
            raise OSError("the helper process ended")
        return [int.from_bytes(answer[k : k + 8], "little") for k in range(0, len(answer), 8)]


_helpers: dict[tuple[int, str], list[Helper]] = {}
_helpers_lock = threading.Lock()


@atexit.register
def _close_helpers() -> None:
    """End this process's helpers: their input closed, a second each to go."""
    for (pid, _), found in list(_helpers.items()):
        if pid != os.getpid():
            continue
        for helper in found:
            with contextlib.suppress(OSError):
                if helper.process.stdin is not None:
                    helper.process.stdin.close()
            try:
                helper.process.wait(timeout=1)
            except subprocess.TimeoutExpired:
                helper.process.kill()
                helper.process.wait()


def borrow(recipe: str, holding: object = None) -> Helper | None:
    """A helper of this process for `recipe` that no other thread has: the free one that holds
    `holding` if there is one, else any free one, else a new one; None if none can start or one
    of them has failed. Give it back with `give_back`."""
    key = (os.getpid(), recipe)
    with _helpers_lock:
        found = _helpers.setdefault(key, [])
        if any(h.broken for h in found):  # one failed: the recipe's sizes come whole from now
            return None
        free = [h for h in found if not h.busy]
        chosen = next((h for h in free if h.holding == holding), free[0] if free else None)
        if chosen is None:
            try:
                chosen = Helper(recipe)
            except OSError:
                return None
            found.append(chosen)
        chosen.busy = True
        return chosen


def give_back(helper: Helper) -> None:
    """Return a borrowed helper for other threads."""
    with _helpers_lock:
        helper.busy = False


def _number(n: int) -> bytes:
    return n.to_bytes(8, "little")


class Kept(Continued):
    """C(prefix + x) from the state after the prefix, kept in the helper process of `recipe`
    (see the module); compressed whole here if the helper is gone. `settings(x)` gives the
    integers `new` takes for compressing prefix + x (an adapter that sizes its window to the
    input gives the window of prefix + x); items are sent in groups of equal settings."""

    def __init__(
        self,
        owner: Compressor,
        prefix: bytes,
        recipe: str,
        settings: Callable[[bytes], tuple[int, ...]],
    ) -> None:
        super().__init__(owner, prefix)
        self._settings = settings
        self._recipe = recipe
        helper = borrow(recipe)
        if helper is not None:  # the prefix is fed now: the work `after` stands for
            try:
                self._hold(helper, settings(b""))
            finally:
                give_back(helper)

    def _hold(self, helper: Helper, settings: tuple[int, ...]) -> None:
        # Held by the prefix's bytes, not by this object: a run cut into several tiles makes a
        # new state after the same corpus for each, which fed it again (Rosetta's first round
        # with PPMd: 60 feeds, now 50; a corpus of megabytes takes 1-2 s a feed). Equal bytes
        # are mostly the same object, compared at once.
        if helper.holding != (self._prefix, settings):
            head = [_number(len(settings)), *map(_number, settings)]
            message = b"".join([b"P", *head, _number(len(self._prefix)), self._prefix])
            if self._ask(helper, message, 1) is not None:
                helper.holding = (self._prefix, settings)

    def _ask(self, helper: Helper, message: bytes, answers: int) -> list[int] | None:
        try:
            return helper.ask(message, answers)
        except OSError:
            helper.broken = True
            return None

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        found: list[int | None] = [None] * len(datas)
        groups: dict[tuple[int, ...], list[int]] = {}
        for k, data in enumerate(datas):
            groups.setdefault(self._settings(data), []).append(k)
        for settings, members in groups.items():
            helper = borrow(self._recipe, (self._prefix, settings))
            if helper is None:
                break
            parts: list[Any] = [b"X", _number(len(members))]
            for k in members:
                parts += [_number(len(datas[k])), datas[k]]
            try:
                self._hold(helper, settings)
                answer = None if helper.broken else self._ask(helper, b"".join(parts), len(members))
            finally:
                give_back(helper)
            for k, size in zip(members, answer or (), strict=False):
                found[k] = size
        # whole, here, where no helper answered
        return [
            Continued.size(self, data) if size is None else size
            for data, size in zip(datas, found, strict=True)
        ]

    def size(self, data: bytes) -> int:
        return self.sizes([data])[0]

"""PPMd variant H (prediction by partial matching) through pyppmd."""

from __future__ import annotations

import atexit
import contextlib
import os
import subprocess
import sys
import threading
from collections.abc import Sequence
from typing import IO, Any

from .base import Compressor, Continued, Param


class Ppmd(Compressor):
    name = "ppmd"
    summary = "PPMd var. H context modelling; no window, a model memory; concatenation only"
    params = (
        Param("order", 2, 64, 32, "model order (also reachable as level)"),
        Param("memory", 1, 2048, 256, "model memory in MiB; a full model restarts"),
    )
    continues = hasattr(os, "fork") and sys.platform.startswith("linux")
    # pyppmd releases and retakes the GIL around every symbol, so threads only slow it down.
    releases_gil = False
    window_source = "no window: the model restarts when its memory is full"

    @property
    def window_bytes(self) -> None:
        return None

    @staticmethod
    def library_version() -> str:
        import pyppmd  # imported on use: it costs more start-up time than every other adapter

        return "pyppmd-" + str(pyppmd.__version__)

    def size(self, data: bytes) -> int:
        import pyppmd

        encoder = pyppmd.Ppmd7Encoder(self.setting("order"), self.setting("memory") << 20)
        return len(encoder.encode(data)) + len(encoder.flush(endmark=False))

    def after(self, prefix: bytes) -> Continued:
        if not self.continues:
            return Continued(self, prefix)
        return _Kept(self, prefix, _helper(self.setting("order"), self.setting("memory")))


# The model after a prefix is kept in a small helper process that holds nothing else, since a
# fork costs in proportion to the memory of the process that forks: about 0.7 ms from a bare
# Python, 3 ms from a worker with kinpress imported, 25-30 ms from a command holding 200 MB of
# items (measured on the development machine), against 35 ms for compressing a corpus of
# 170 kB again. The helper reads messages on its standard input: b"P" and a prefix, which it
# encodes once and answers with the time that took (in microseconds); b"X" and items, each
# answered with C(prefix + item). For an item it forks, and the copy encodes the item from the
# model after the prefix, reports its bytes and exits. It compresses prefix + item whole
# instead, for the rest of that prefix, once the quickest fork so far costs more than that
# would at the prefix's pace (after a second try, unless the first cost three times as much:
# on the shape view of code, whose prefixes encode quickly, one slow fork turned forking off
# and doubled the time), or when a copy fails to report. Either way the sizes are those of
# compressing prefix + item whole: the same model sees the same bytes in the same order. It
# imports only the standard library and pyppmd, starts isolated (-I) in the root folder as
# the engine's workers do, ignores Ctrl-C and ends when its input closes: when the process
# that started it ends.
_HELPER = r"""
import os, signal, sys, time
import pyppmd
signal.signal(signal.SIGINT, signal.SIG_IGN)  # it ends when its parent does, as its input closes
order, memory = int(sys.argv[1]), int(sys.argv[2]) << 20
source, sink = sys.stdin.buffer, sys.stdout.buffer

def exact(n):
    data = source.read(n)
    if len(data) != n:
        raise SystemExit(0)
    return data

def number():
    return int.from_bytes(exact(8), "little")

def whole(data):
    encoder = pyppmd.Ppmd7Encoder(order, memory)
    return len(encoder.encode(data)) + len(encoder.flush(endmark=False))

def forked(encoder, data):
    read, write = os.pipe()
    try:
        pid = os.fork()
    except OSError:  # no process to spare now: compressed whole
        os.close(read)
        os.close(write)
        return None
    if pid == 0:
        try:
            tail = len(encoder.encode(data)) + len(encoder.flush(endmark=False))
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

prefix, encoder, head, spent, forking, forks, quickest = b"", None, 0, 0.0, False, 0, 0.0
while True:
    kind = source.read(1)
    if kind == b"P":
        prefix = exact(number())
        started = time.perf_counter()
        encoder = pyppmd.Ppmd7Encoder(order, memory)
        head = len(encoder.encode(prefix))
        spent, forking, forks, quickest = time.perf_counter() - started, True, 0, float("inf")
        sink.write(int(spent * 1e6).to_bytes(8, "little"))
    elif kind == b"X":
        sizes = []
        for _ in range(number()):
            data = exact(number())
            tail = None
            if forking:
                started = time.perf_counter()
                tail = forked(encoder, data)
                took = time.perf_counter() - started
                forks, quickest = forks + 1, min(quickest, took)
                # what compressing prefix + data whole would cost, at the prefix's pace
                alone = spent * (len(prefix) + len(data)) / max(len(prefix), 1)
                forking = tail is not None and (
                    quickest < alone or (forks < 2 and took < 3 * alone)
                )
            sizes.append(head + tail if tail is not None else whole(prefix + data))
        sink.write(b"".join(n.to_bytes(8, "little") for n in sizes))
    else:
        break
    try:
        sink.flush()
    except BrokenPipeError:
        break
"""


class _Helper:
    """One helper process (see _HELPER) for an order and memory, and the prefix it holds."""

    def __init__(self, order: int, memory: int) -> None:
        self.lock = threading.Lock()
        self.holding: object = None
        self.broken = False
        self.process = subprocess.Popen(
            [sys.executable, "-I", "-c", _HELPER, str(order), str(memory)],
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


_helpers: dict[tuple[int, int, int], _Helper] = {}
_helpers_lock = threading.Lock()


@atexit.register
def _close_helpers() -> None:
    """End this process's helpers: their input closed, a second each to go."""
    for (pid, _, _), helper in list(_helpers.items()):
        if pid != os.getpid():
            continue
        with contextlib.suppress(OSError):
            if helper.process.stdin is not None:
                helper.process.stdin.close()
        try:
            helper.process.wait(timeout=1)
        except subprocess.TimeoutExpired:
            helper.process.kill()
            helper.process.wait()


def _helper(order: int, memory: int) -> _Helper | None:
    """This process's helper for `order` and `memory`, started on first use; None if it cannot
    start."""
    key = (os.getpid(), order, memory)
    with _helpers_lock:
        if key not in _helpers:
            try:
                _helpers[key] = _Helper(order, memory)
            except OSError:
                return None
        helper = _helpers[key]
    return None if helper.broken else helper


def _number(n: int) -> bytes:
    return n.to_bytes(8, "little")


class _Kept(Continued):
    """C(prefix + x) from the model after the prefix, kept in the helper process (see
    _HELPER); compressed whole here if the helper is gone."""

    def __init__(self, owner: Ppmd, prefix: bytes, helper: _Helper | None) -> None:
        super().__init__(owner, prefix)
        self._helper = helper
        if helper is not None:
            with helper.lock:
                self._hold(helper)

    def _hold(self, helper: _Helper) -> None:
        if helper.holding is not self:
            self._ask(helper, b"P" + _number(len(self._prefix)) + self._prefix, 1)
            helper.holding = self

    def _ask(self, helper: _Helper, message: bytes, answers: int) -> list[int] | None:
        try:
            return helper.ask(message, answers)
        except OSError:
            helper.broken = True
            return None

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        helper = self._helper
        found: list[int] | None = None
        if helper is not None and not helper.broken and datas:
            parts: list[Any] = [b"X", _number(len(datas))]
            for data in datas:
                parts += [_number(len(data)), data]
            with helper.lock:
                self._hold(helper)
                if not helper.broken:
                    found = self._ask(helper, b"".join(parts), len(datas))
        if found is not None:
            return found
        return [Continued.size(self, data) for data in datas]  # whole, here

    def size(self, data: bytes) -> int:
        return self.sizes([data])[0]

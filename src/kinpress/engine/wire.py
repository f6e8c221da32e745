"""The wire between the engine and its worker processes.

Messages are pickles framed by an 8-byte length: an item list, then (task, job, tile)
requests on those items, each answered by (task, sizes) or (task, error text); a later item list
replaces the items for the requests after it (a worker serves one run after another); None asks
the worker to stop.
"""

from __future__ import annotations

import pickle
import struct
import traceback
from typing import IO, Any

from .tiles import run_tile

_LENGTH = struct.Struct("<Q")


def send(stream: IO[bytes], message: Any) -> None:
    """Write one framed message and flush it."""
    data = pickle.dumps(message, protocol=pickle.HIGHEST_PROTOCOL)
    stream.write(_LENGTH.pack(len(data)))
    stream.write(data)
    stream.flush()


def receive(stream: IO[bytes]) -> Any:
    """Read one framed message; EOFError when the other side has gone."""
    head = stream.read(_LENGTH.size)
    if len(head) < _LENGTH.size:
        raise EOFError
    (length,) = _LENGTH.unpack(head)
    data = stream.read(length)
    if len(data) < length:
        raise EOFError
    return pickle.loads(data)


def serve(source: IO[bytes], sink: IO[bytes]) -> None:
    """Answer tile requests until told to stop or the parent goes away."""
    try:
        items = receive(source)
        while (request := receive(source)) is not None:
            if isinstance(request, list):
                items = request
                continue
            task, job, tile = request
            try:
                send(sink, (task, run_tile(items, job, tile)))
            except Exception:
                send(sink, (task, traceback.format_exc(limit=8)))
    except (EOFError, BrokenPipeError, KeyboardInterrupt):
        pass

"""A tile worker process: `python -m kinpress.engine.worker`, fed over its stdin and stdout.

Unlike multiprocessing's spawn, it never re-imports the caller's main module, so it works the
same from a script without a main guard, a notebook, or standard input.
"""

from __future__ import annotations

import sys

from kinpress.engine.wire import serve

if __name__ == "__main__":
    serve(sys.stdin.buffer, sys.stdout.buffer)

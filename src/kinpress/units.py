"""Sizes, durations and lists of names as every message, reason and figure of kinpress writes
them."""

from __future__ import annotations

from collections.abc import Sequence

__all__ = ["duration_text", "few_text", "size_text"]

_BINARY = (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10))
_DECIMAL = (("TB", 10**12), ("GB", 10**9), ("MB", 10**6), ("kB", 10**3))


def size_text(n: float) -> str:
    """``n`` bytes for a reader: in whole binary units where ``n`` is fewer than 1024 of one
    (windows, blocks and limits usually are), else in decimal units to three significant
    figures; below a kilobyte, in bytes.

    >>> size_text(32768), size_text(64 << 20), size_text(900_000), size_text(1_234_567)
    ('32 KiB', '64 MiB', '900 kB', '1.23 MB')
    >>> size_text(999_999), size_text(512)
    ('1 MB', '512 B')
    """
    if n > 0 and n == int(n):
        for unit, scale in _BINARY:
            if int(n) % scale == 0 and int(n) // scale < 1024:
                return f"{int(n) // scale} {unit}"
    for unit, scale in _DECIMAL:
        # Rounded first, so that 999,999 bytes reads 1 MB rather than 1e+03 kB.
        value = float(f"{n / scale:.3g}")
        if value >= 1:
            return f"{value:g} {unit}"
    return f"{n:.0f} B"


def duration_text(seconds: float) -> str:
    """A duration to the unit a reader plans by: seconds up to 90, minutes up to 90, then hours.

    >>> duration_text(42), duration_text(600), duration_text(7200)
    ('42 s', '10 min', '2.0 h')
    """
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def few_text(names: Sequence[str], shown: int = 3) -> str:
    """The first `shown` names, and how many more there are.

    >>> few_text(["a", "b"]), few_text(["a", "b", "c", "d", "e"])
    ('a, b', 'a, b, c and 2 more')
    """
    more = f" and {len(names) - shown} more" if len(names) > shown else ""
    return ", ".join(names[:shown]) + more

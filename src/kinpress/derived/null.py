"""The null of the relation test (see kinpress.derived): block-shuffled material of items of the
candidate's kind at matching sizes, and false-positive rates against it."""

from __future__ import annotations

import math
import os
import random
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..items import Item, uncompressed_name
from ..measure import (
    content_digest,
)
from .prefilter import Sketch, _overlap
from .result import NullSummary

BLOCK_BYTES = 64
"""Null material is cut into blocks of whole lines of about this many bytes, then shuffled."""

DONOR_OVERLAP = 0.5
"""A donor sharing this fraction of the smaller shingle set with a is a likely relative of a."""

MIN_KIND_DONORS = 3
"""Null material comes from files of the candidate's kind when the set has at least this many."""


def line_blocks(data: bytes, size: int) -> list[bytes]:
    """Cut after the first line break at or beyond every `size` bytes (hard cuts in long lines)."""
    blocks: list[bytes] = []
    start = 0
    while start < len(data):
        end = data.find(b"\n", start + size - 1, start + 4 * size)
        stop = len(data) if start + size >= len(data) else (end + 1 if end >= 0 else start + size)
        blocks.append(data[start:stop])
        start = stop
    return blocks


def kind_of(item: Item) -> str:
    """The kind of file an item comes from: its source's suffix in lower case ('' if none), a
    suffix kinpress reads through (`items.uncompressed_name`) dropped. Items split from one file
    share its kind."""
    return os.path.splitext(uncompressed_name(os.path.basename(item.source.lower())))[1]


def _donor_pools(kinds: Sequence[str]) -> dict[str, list[int]]:
    """For each kind, the items of that kind when it has at least MIN_KIND_DONORS + 1 items
    (a donor other than the item itself), else every item: the null is made of files like the
    candidate where the set has enough of them."""
    by_kind: dict[str, list[int]] = {}
    for k, kind in enumerate(kinds):
        by_kind.setdefault(kind, []).append(k)
    everyone = list(range(len(kinds)))
    return {
        kind: members if len(members) > MIN_KIND_DONORS else everyone
        for kind, members in by_kind.items()
    }


def _null_material(
    a: int,
    length: int,
    data: Sequence[bytes],
    donors: Sequence[int],
    relative: Callable[[int], bool],
    rng: random.Random,
) -> bytes:
    """`length` bytes of donors' shuffled line blocks, donor after random donor.

    Donors are drawn from `donors`, other than a and not `relative` to it, each used once.
    """
    out = bytearray()
    used = {a}
    for _ in range(4 * len(donors)):
        if len(out) >= length:
            break
        donor = donors[rng.randrange(len(donors))]
        if donor in used or relative(donor):
            continue
        used.add(donor)
        blocks = line_blocks(data[donor], BLOCK_BYTES)
        rng.shuffle(blocks)
        out += b"".join(blocks)
    return bytes(out[:length])


def default_null_pairs(max_fpr: float) -> int:
    """ceil(3 / max_fpr): null pairs enough to tell an fpr at max_fpr from zero (the default
    of :func:`find_derived`, and what ``-c auto`` counts in the job's time)."""
    return math.ceil(3 / max_fpr)


@dataclass(frozen=True)
class _NullPlan:
    """Null items (appended after the real ones) and, for each, the real item it is set against."""

    items: tuple[Item, ...]
    partners: tuple[int, ...]


def _plan_null(
    items: Sequence[Item],
    pairs: Sequence[tuple[int, int]],
    sketched: Sequence[Sketch],
    count: int,
    rng: random.Random,
) -> _NullPlan:
    """Null pairs shaped like the pairs tested: a real item of a pair against material the size
    of its partner, from donors of the same kind (see `_donor_pools`) with other bytes, not
    sharing DONOR_OVERLAP of their shingles."""
    data = [item.data for item in items]
    digests = [content_digest(d) for d in data]
    kinds = [kind_of(item) for item in items]
    pools = _donor_pools(kinds)
    made: list[Item] = []
    partners: list[int] = []
    for k in range(count):
        first, second = pairs[rng.randrange(len(pairs))]
        a, b = (first, second) if rng.random() < 0.5 else (second, first)

        def relative(j: int, a: int = a) -> bool:
            same = digests[j] == digests[a]
            return same or _overlap(sketched[a], sketched[j]) >= DONOR_OVERLAP

        material = _null_material(a, len(data[b]), data, pools[kinds[a]], relative, rng)
        if material:
            made.append(Item(name=f"null#{k}", data=material, source="null model"))
            partners.append(a)
    return _NullPlan(items=tuple(made), partners=tuple(partners))


def _fpr(scores: np.ndarray, null_sorted: np.ndarray) -> np.ndarray:
    """(1 + #{null >= s}) / (1 + N) for each score s."""
    above = len(null_sorted) - np.searchsorted(null_sorted, scores, side="left")
    return np.asarray((1 + above) / (1 + len(null_sorted)), dtype=np.float64)


def _summary(null_sorted: np.ndarray, max_fpr: float) -> NullSummary:
    """Quantiles of the null scores and the cut: fpr(s) <= max_fpr exactly when s > cut.

    fpr(s) <= max_fpr needs #{null >= s} <= A = floor(max_fpr (1 + N)) - 1, so s must exceed
    the (N - A)-th smallest null score (every s passes when A >= N, none when A < 0).
    """
    size = int(null_sorted.size)
    allowed = math.floor(max_fpr * (1 + size) + 1e-9) - 1
    if allowed < 0:
        cut = math.inf
    elif allowed >= size:
        cut = -math.inf
    else:
        cut = float(null_sorted[size - allowed - 1])
    quantiles = np.quantile(null_sorted, [0.5, 0.9, 0.99, 1.0]) if size else [math.nan] * 4
    return NullSummary(
        pairs=size,
        block_bytes=BLOCK_BYTES,
        median=float(quantiles[0]),
        p90=float(quantiles[1]),
        p99=float(quantiles[2]),
        max=float(quantiles[3]),
        cut=cut,
    )

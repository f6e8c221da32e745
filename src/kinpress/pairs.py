"""NCD of chosen pairs of items, the same numbers :func:`kinpress.distance.measure_matrix`
gives: :class:`PairDistances` through a sizes source, :func:`pair_distances` for index pairs,
:func:`cross_distances` for a block of rows against columns. Sizes, the conditioning rule and the
formula come from :mod:`kinpress.measure`. :mod:`kinpress.distance` re-exports these names."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .items import ItemLike, as_items
from .measure import (
    Measurement,
    Sizes,
    conditional_of,
    conditioned,
    conditioning_rank,
    measure_singles,
    ncd,
)

PAIR_CHUNK = 1 << 18
"""Pairs looked up and computed at a time: bounds the per-pair bookkeeping (cache keys, tiles)
whatever the number of items; each chunk still spreads over every worker."""


class PairDistances:
    """NCD of item pairs through a sizes source, measured as `measure_matrix` measures them:
    one direction (`measure.conditioned`), identical contents at 0, values below 0 clipped to 0
    (counted in `clipped`); `computed` and `cached` count the distinct pairs' sizes."""

    def __init__(
        self, sizes: Sizes, content: np.ndarray, single: np.ndarray, conditional: str
    ) -> None:
        self.sizes, self.content, self.single = sizes, content, single
        self.conditional = conditional
        self.rank = conditioning_rank(sizes.digests, single)
        self.computed = self.cached = self.clipped = 0

    def __call__(self, a: np.ndarray, b: np.ndarray, phase: str) -> np.ndarray:
        """NCD of items a[k] and b[k] (indices into the items), `phase` named to progress."""
        ca, cb = self.content[a], self.content[b]
        out = np.zeros(len(a))
        other = ca != cb
        small, large = conditioned(self.rank, ca[other], cb[other])
        m = len(self.single)
        keys, inverse = np.unique(small * m + large, return_inverse=True)
        small, large = keys // m, keys % m
        found = np.empty(len(keys), dtype=np.int64)
        for start in range(0, len(keys), PAIR_CHUNK):
            part = slice(start, start + PAIR_CHUNK)
            got, cached = self.sizes.fetch(
                phase, small[part], large[part], done=start, total=len(keys)
            )
            found[part] = got
            self.cached += int(cached.sum())
            self.computed += int((~cached).sum())
        value = ncd(conditional_of(found, self.single[small], self.conditional), self.single[large])
        self.clipped += int(np.count_nonzero(value < 0))
        out[other] = np.clip(value, 0.0, None)[inverse]
        return out


def pair_distances(
    items: Sequence[ItemLike], pairs: Sequence[tuple[int, int]], measurement: Measurement
) -> np.ndarray:
    """NCD of each unordered index pair into `items`, the same numbers `measure_matrix` gives."""
    sizes, content, single, _ = measure_singles(as_items(items), measurement)
    a, b = np.asarray(pairs, dtype=np.int64).reshape(-1, 2).T
    return PairDistances(sizes, content, single, measurement.conditional)(a, b, "pairs")


def cross_distances(
    rows: Sequence[ItemLike], columns: Sequence[ItemLike], measurement: Measurement
) -> np.ndarray:
    """The (len(rows), len(columns)) block of the NCD matrix of rows + columns."""
    rows, columns = as_items(rows, "x"), as_items(columns, "y")
    n = len(rows)
    pairs = [(i, n + j) for i in range(n) for j in range(len(columns))]
    return pair_distances([*rows, *columns], pairs, measurement).reshape(n, len(columns))

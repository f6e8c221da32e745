"""kinpress: how related sequences, logs and files are, measured by real compressors.

>>> import kinpress
>>> items = kinpress.load_items(["genomes/"], split="records")       # doctest: +SKIP
>>> dm = kinpress.distance_matrix(items, kinpress.compressor("zstd:level=19"))  # doctest: +SKIP
>>> kinpress.write_matrix(dm, "dist.phy", "phylip")                  # doctest: +SKIP
"""

from __future__ import annotations

from ._version import __version__
from .cache import CacheError, CacheWarning, SizeCache, default_cache_path
from .compressors import Compressor, SpecError, compressor
from .distance import DistanceMatrix, distance_matrix, pairwise_distances
from .engine import DaskEngine, LocalEngine
from .formats import read_matrix, write_matrix
from .items import InputError, InputWarning, Item, load_items
from .measure import (
    ConditionalSizes,
    MatrixStats,
    Measurement,
    MeasurementWarning,
    conditional_sizes,
)

_LAZY = {
    # scikit-learn is slow to import; the classifier loads it only when asked for.
    "CompressionClassifier": "origins",
    "classify": "origins",
}


def __getattr__(name: str) -> object:
    if name in _LAZY:
        from importlib import import_module

        return getattr(import_module(f".{_LAZY[name]}", __name__), name)
    raise AttributeError(f"module 'kinpress' has no attribute {name!r}")


__all__ = [
    "CacheError",
    "CacheWarning",
    "CompressionClassifier",
    "Compressor",
    "ConditionalSizes",
    "DaskEngine",
    "DistanceMatrix",
    "InputError",
    "InputWarning",
    "Item",
    "LocalEngine",
    "MatrixStats",
    "Measurement",
    "MeasurementWarning",
    "SizeCache",
    "SpecError",
    "__version__",
    "classify",
    "compressor",
    "conditional_sizes",
    "default_cache_path",
    "distance_matrix",
    "load_items",
    "pairwise_distances",
    "read_matrix",
    "write_matrix",
]

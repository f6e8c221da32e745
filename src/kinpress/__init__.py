"""kinpress: how related sequences, logs and files are, measured by real compressors.

>>> import kinpress
>>> items = kinpress.load_items(["genomes/"], split="records")       # doctest: +SKIP
>>> dm = kinpress.distance_matrix(items, kinpress.compressor("zstd:level=19"))  # doctest: +SKIP
>>> kinpress.write_matrix(dm, "dist.phy", "phylip")                  # doctest: +SKIP
"""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version

from .cache import SizeCache, default_cache_path
from .compressors import Compressor, SpecError, compressor
from .distance import DistanceMatrix, MatrixStats, MeasurementWarning, distance_matrix
from .engine import LocalEngine
from .formats import read_matrix, write_matrix
from .items import InputError, InputWarning, Item, load_items

try:
    __version__ = version("kinpress")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

__all__ = [
    "Compressor",
    "DistanceMatrix",
    "InputError",
    "InputWarning",
    "Item",
    "LocalEngine",
    "MatrixStats",
    "MeasurementWarning",
    "SizeCache",
    "SpecError",
    "__version__",
    "compressor",
    "default_cache_path",
    "distance_matrix",
    "load_items",
    "read_matrix",
    "write_matrix",
]

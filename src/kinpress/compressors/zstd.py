"""Zstandard (RFC 8878) through python-zstandard, frames without magic, checksum or sizes."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import zstandard

from .base import Compressor, Param, Primed

_STRIPPED: dict[str, Any] = {
    "write_content_size": False,
    "write_checksum": False,
    "write_dict_id": False,
    "format": zstandard.FORMAT_ZSTD1_MAGICLESS,
}


def _batch_sizes(context: zstandard.ZstdCompressor, datas: Sequence[bytes]) -> list[int]:
    # One call for the batch: frames identical to compress(), with the GIL released throughout
    # and far fewer allocations, which is what lets threads scale on small items.
    if len(datas) < 2:
        return [len(context.compress(data)) for data in datas]
    frames = context.multi_compress_to_buffer(list(datas), threads=1)
    return [len(frames[k]) for k in range(len(frames))]


def _log2_ceil(n: int) -> int:
    return max(0, (n - 1).bit_length())


class Zstd(Compressor):
    name = "zstd"
    summary = "Zstandard LZ77 + entropy coding; primed by a raw-content dictionary"
    params = (
        Param("level", 1, 22, 19, "compression level"),
        Param("window", 10, 31, None, "log2 window size; enables long-distance matching"),
    )
    primable = True
    window_source = "RFC 8878; window of the level from libzstd's parameter table"

    def __init__(self, **settings: int) -> None:
        super().__init__(**settings)
        self._params = self._parameters()
        self._context = zstandard.ZstdCompressor(compression_params=self._params)

    def _parameters(self, **overrides: Any) -> zstandard.ZstdCompressionParameters:
        window = self.settings["window"]
        extra: dict[str, Any] = {"window_log": window, "enable_ldm": True} if window else {}
        extra.update(overrides)
        return zstandard.ZstdCompressionParameters.from_level(
            self.setting("level"), **_STRIPPED, **extra
        )

    @property
    def window_bytes(self) -> int:
        return int(1 << self._params.window_log)

    @staticmethod
    def library_version() -> str:
        return "libzstd-" + ".".join(map(str, zstandard.ZSTD_VERSION))

    def size(self, data: bytes) -> int:
        return len(self._context.compress(data))

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        return _batch_sizes(self._context, datas)

    def primed(self, reference: bytes, data_size: int = 0) -> Primed:
        return _ZstdPrimed(self, reference, data_size or len(reference))


class _ZstdPrimed(Primed):
    """x compressed with y as a raw-content dictionary, its match tables built once.

    The window covers y and the largest x to come. libzstd only reaches the last
    min(window, 2^max(hashLog+3, chainLog+1)) bytes of a dictionary, so for large references the
    tables are widened to cover it all; parameters otherwise follow the level for that size.
    """

    def __init__(self, owner: Zstd, reference: bytes, data_size: int) -> None:
        span = _log2_ceil(len(reference) + data_size)
        need = _log2_ceil(max(len(reference), 1))
        sized = owner._parameters(source_size=data_size, dict_size=len(reference))
        params = owner._parameters(
            source_size=data_size,
            dict_size=len(reference),
            window_log=min(max(sized.window_log, span), 31),
            hash_log=max(sized.hash_log, min(need - 3, 30)),
            chain_log=max(sized.chain_log, min(need - 1, 30)),
        )
        dictionary = zstandard.ZstdCompressionDict(
            reference, dict_type=zstandard.DICT_TYPE_RAWCONTENT
        )
        dictionary.precompute_compress(compression_params=params)
        self._context = zstandard.ZstdCompressor(compression_params=params, dict_data=dictionary)

    def size(self, data: bytes) -> int:
        return len(self._context.compress(data))

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        return _batch_sizes(self._context, datas)

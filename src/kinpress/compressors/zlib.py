"""Deflate (RFC 1951) through zlib, raw streams without the zlib header or Adler-32."""

from __future__ import annotations

import zlib

from .base import Compressor, Param, Primed


class Zlib(Compressor):
    name = "zlib"
    summary = "Deflate LZ77 + Huffman, 32 KiB window at most; primed by a preset dictionary"
    params = (
        Param("level", 0, 9, 9, "compression level"),
        Param("window", 9, 15, 15, "log2 of the window"),
    )
    primable = True
    window_source = "RFC 1951: at most 32 KiB back (usable 2^window - 262 in zlib)"

    @property
    def window_bytes(self) -> int:
        return 1 << self.setting("window")

    @staticmethod
    def library_version() -> str:
        return "zlib-" + zlib.ZLIB_RUNTIME_VERSION

    def _stream(self, zdict: bytes | None = None) -> zlib._Compress:
        wbits = -self.setting("window")
        if zdict is None:
            return zlib.compressobj(self.setting("level"), zlib.DEFLATED, wbits)
        return zlib.compressobj(self.setting("level"), zlib.DEFLATED, wbits, zdict=zdict)

    def size(self, data: bytes) -> int:
        stream = self._stream()
        return len(stream.compress(data)) + len(stream.flush())

    def primed(self, reference: bytes, data_size: int = 0) -> Primed:
        return _ZlibPrimed(self, reference)


class _ZlibPrimed(Primed):
    """x compressed with y as deflate's preset dictionary; only y's last window bytes count."""

    def __init__(self, owner: Zlib, reference: bytes) -> None:
        self._owner = owner
        self._zdict = reference[-owner.window_bytes :]

    def size(self, data: bytes) -> int:
        stream = self._owner._stream(self._zdict)
        return len(stream.compress(data)) + len(stream.flush())

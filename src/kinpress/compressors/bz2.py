"""bzip2 (Burrows-Wheeler block sorting) through the standard library."""

from __future__ import annotations

import bz2

from .base import Compressor, Param


class Bz2(Compressor):
    name = "bz2"
    summary = "bzip2 block sorting + Huffman, blocks of 100 kB x level; concatenation only"
    params = (Param("level", 1, 9, 9, "block size in units of 100 kB"),)
    window_source = "bzip2 manual: -1 .. -9 set the block size to 100 k .. 900 k"

    @property
    def window_bytes(self) -> int:
        return 100_000 * self.setting("level")

    @staticmethod
    def library_version() -> str:
        return "bzip2-stdlib"

    def size(self, data: bytes) -> int:
        return len(bz2.compress(data, self.setting("level")))

"""Brotli (RFC 7932) through the brotli binding; the binding offers no dictionary, so no priming."""

from __future__ import annotations

from typing import ClassVar

import brotli

from .base import Compressor, Param


class Brotli(Compressor):
    name = "brotli"
    summary = "Brotli LZ77 + context modelling; concatenation only"
    params = (
        Param("level", 0, 11, 11, "quality"),
        Param("window", 10, 24, 24, "lgwin: log2 of the window"),
    )
    aliases: ClassVar[dict[str, str]] = {"quality": "level", "lgwin": "window"}
    window_source = "RFC 7932 section 9.1: window = 2^lgwin - 16"

    @property
    def window_bytes(self) -> int:
        return (1 << self.setting("window")) - 16

    @staticmethod
    def library_version() -> str:
        return "brotli-" + str(brotli.__version__)

    def size(self, data: bytes) -> int:
        return len(
            brotli.compress(data, quality=self.setting("level"), lgwin=self.setting("window"))
        )

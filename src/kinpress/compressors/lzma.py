"""LZMA2 (the xz format's filter) through the standard library, as a raw stream with no headers."""

from __future__ import annotations

import lzma
import sys
from typing import ClassVar

from .base import Compressor, Continued, Param
from .kept import AVAILABLE, Kept

# Dictionary size of each preset, from the xz manual's preset table.
_PRESET_DICTIONARY = (18, 20, 21, 22, 22, 23, 23, 24, 25, 26)


class Lzma(Compressor):
    name = "lzma"
    summary = "LZMA2 range-coded LZ77 with large dictionaries; concatenation only"
    params = (
        Param("level", 0, 9, 9, "preset"),
        Param("extreme", 0, 1, 0, "1 adds the extreme flag (slower, slightly smaller)"),
        Param("window", 12, 30, None, "log2 dictionary size; default from the preset"),
    )
    aliases: ClassVar[dict[str, str]] = {"preset": "level"}
    window_source = "xz manual: preset dictionary sizes 256 KiB (-0) .. 64 MiB (-9)"
    continues = AVAILABLE

    @property
    def window_bytes(self) -> int:
        window = self.settings["window"]
        return 1 << (window if window is not None else _PRESET_DICTIONARY[self.setting("level")])

    @staticmethod
    def library_version() -> str:
        return "liblzma-stdlib-" + sys.version.split()[0]

    def _settings(self, length: int) -> tuple[int, int]:
        """The preset and dictionary size for an input of `length` bytes."""
        preset = self.setting("level") | (lzma.PRESET_EXTREME if self.setting("extreme") else 0)
        # A dictionary no larger than the input gives byte-identical output and spares the
        # allocation that otherwise dominates small calls (64 MiB at preset 9).
        return preset, min(self.window_bytes, max(4096, 1 << max(0, length - 1).bit_length()))

    def size(self, data: bytes) -> int:
        preset, dict_size = self._settings(len(data))
        filters = [{"id": lzma.FILTER_LZMA2, "preset": preset, "dict_size": dict_size}]
        return len(lzma.compress(data, format=lzma.FORMAT_RAW, filters=filters))

    def after(self, prefix: bytes) -> Continued:
        if not self.continues:
            return Continued(self, prefix)
        return Kept(self, prefix, _RECIPE, lambda data: self._settings(len(prefix) + len(data)))


# The encoder after a prefix, kept in a helper process (see kept): fed the prefix once, each
# item from there, with the dictionary compressing prefix + item whole would have. Fed in
# pieces of _PIECE bytes: liblzma takes a whole input into its window at once and encodes one
# chunk of it per call, leaving the rest for the next call, so a prefix fed whole was encoded
# by each forked copy again, with its item (pip's vendored Pygments, 4.6 MB: 1.3 s an item,
# as long as compressing prefix + item whole; fed in pieces, 20 ms). The sizes are the same:
# the encoder sees the same bytes in the same order.
_PIECE = 8192
_RECIPE = f"""
import lzma
def new(preset, dict_size):
    filters = [{{"id": lzma.FILTER_LZMA2, "preset": preset, "dict_size": dict_size}}]
    encoder = lzma.LZMACompressor(format=lzma.FORMAT_RAW, filters=filters)
    def feed(data):
        view = memoryview(data)
        pieces = range(0, len(data), {_PIECE})
        return sum(len(encoder.compress(view[k : k + {_PIECE}])) for k in pieces)
    return feed, (lambda: len(encoder.flush()))
"""

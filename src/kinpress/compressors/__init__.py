"""The compressor registry: specs like ``zstd:level=19,window=27`` in, adapters out."""

from __future__ import annotations

from dataclasses import dataclass

from .base import Compressor, Continued, Param, Primed, SpecError
from .brotli import Brotli
from .bz2 import Bz2
from .lzma import Lzma
from .ppmd import Ppmd
from .zlib import Zlib
from .zstd import Zstd

ADAPTERS: dict[str, type[Compressor]] = {
    cls.name: cls for cls in (Zstd, Brotli, Lzma, Bz2, Zlib, Ppmd)
}
AUTO_CANDIDATES: dict[str, tuple[str, ...]] = {
    "unlabelled": (
        "zstd:level=3",
        "zstd:level=19",
        "zstd:level=19,window=27",
        "lzma:level=9",
        "brotli:level=11",
        "bz2:level=9",
        "zlib:level=9",
        "ppmd:order=16",
    ),
    "labelled": (
        "zstd:level=3",
        "zstd:level=19",
        "lzma:level=9",
        "brotli:level=11",
        "ppmd:order=32",
        "bz2:level=9",
        "zlib:level=9",
    ),
}
"""The specs ``-c auto`` calibrates, by kind of job (a labelled reference or not), in the order
its reasons list them; the one list beside ``ADAPTERS`` a new compressor joins to be chosen."""
AUTO_STACKS: dict[str, tuple[tuple[str, ...], ...]] = {
    "labelled": (("zstd:level=19", "ppmd:order=32"),),
}
"""Stacks of candidates ``-c auto`` also ranks for a labelled job: each scores the items with
all its compressors and decides on the views of all (see origins.classification), ranked by
the held-out figures its members' measuring gives (no compression of its own). One of each
kind of model: a long-window dictionary matcher (exact repeats) and a context model (symbol
statistics), whose errors on data that has drifted differ (see calibration.job._pick_labelled)."""
NAME_ALIASES = {"xz": "lzma", "deflate": "zlib", "bzip2": "bz2", "brotli": "brotli"}

__all__ = [
    "ADAPTERS",
    "AUTO_CANDIDATES",
    "AUTO_STACKS",
    "Compressor",
    "CompressorInfo",
    "Continued",
    "Param",
    "Primed",
    "SpecError",
    "compressor",
    "describe",
    "parse_spec",
]


def parse_spec(text: str) -> tuple[type[Compressor], dict[str, int]]:
    """Split ``NAME[:key=value[,key=value]]`` into an adapter class and integer settings."""
    if "+" in text:
        raise SpecError(
            f"{text!r}: a stack of compressors (specs joined by +) scores classify and report"
            " --reference only; give one compressor here"
        )
    name, _, rest = text.strip().partition(":")
    name = NAME_ALIASES.get(name.lower(), name.lower())
    cls = ADAPTERS.get(name)
    if cls is None:
        raise SpecError(
            f"unknown compressor {text.partition(':')[0]!r}; valid names: {', '.join(ADAPTERS)}"
        )
    settings: dict[str, int] = {}
    for part in filter(None, (p.strip() for p in rest.split(","))):
        key, eq, value = part.partition("=")
        if not eq or not key.strip():
            raise SpecError(f"{text!r}: expected key=value, got {part!r}")
        try:
            settings[key.strip().lower()] = int(value)
        except ValueError:
            raise SpecError(
                f"{text!r}: {key.strip()} takes a whole number, got {value!r}"
            ) from None
    return cls, settings


def compressor(spec: str | Compressor) -> Compressor:
    """Build a compressor from a spec string such as ``lzma:level=9,extreme=1``."""
    if isinstance(spec, Compressor):
        return spec
    cls, settings = parse_spec(spec)
    return cls(**settings)


@dataclass(frozen=True)
class CompressorInfo:
    """What a user needs to pick and trust a compressor: one row of ``kinpress compressors``."""

    name: str
    spec: str
    levels: tuple[int, int]
    window_bytes: int | None
    primed: bool
    overhead_bytes: int
    keys: tuple[Param, ...]
    window_source: str
    summary: str

    def as_json(self) -> dict[str, object]:
        """The documented JSON row: name, spec, levels, window_bytes, primed, overhead_bytes."""
        return {
            "name": self.name,
            "spec": self.spec,
            "levels": list(self.levels),
            "window_bytes": self.window_bytes,
            "primed": self.primed,
            "overhead_bytes": self.overhead_bytes,
        }


def describe(comp: Compressor) -> CompressorInfo:
    """The facts about one compressor at its current settings."""
    level = comp.level_param()
    return CompressorInfo(
        name=comp.name,
        spec=comp.spec,
        levels=(level.low, level.high),
        window_bytes=comp.window_bytes,
        primed=comp.primable,
        overhead_bytes=comp.overhead_bytes,
        keys=comp.params,
        window_source=comp.window_source,
        summary=comp.summary,
    )

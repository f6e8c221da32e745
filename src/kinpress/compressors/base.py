"""The one interface every compressor adapter implements.

An adapter turns bytes into a compressed size. It strips what the library lets it strip (container
headers, checksums, stored sizes) so that the size measures content, states its documented window
or block limit, and, where the library can, compresses data *primed* with a reference (the
reference as a raw-content dictionary or prefix), which approximates the conditional complexity
C(x|y) without compressing y again.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Sequence
from dataclasses import dataclass
from typing import ClassVar


class SpecError(ValueError):
    """A compressor spec names an unknown compressor, key or an out-of-range value."""


@dataclass(frozen=True)
class Param:
    """One setting of a compressor: an integer within [low, high]; default None means unset."""

    name: str
    low: int
    high: int
    default: int | None
    help: str


class Primed(ABC):
    """A compressor prepared once with a reference y; `size(x)` approximates C(x|y)."""

    @abstractmethod
    def size(self, data: bytes) -> int:
        """Compressed size of `data` with the reference already known to the compressor."""

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        """`size` of each input; adapters may batch the calls."""
        return [self.size(data) for data in datas]


class Continued:
    """C(prefix + x) for many x after one prefix, as concatenation measures C(yx).

    This one compresses each concatenation whole. An adapter whose compressor's state after the
    prefix can be reused returns its own (see `Compressor.after`), with the same sizes.
    """

    def __init__(self, owner: Compressor, prefix: bytes) -> None:
        self._owner = owner
        self._prefix = prefix

    def size(self, data: bytes) -> int:
        """C(prefix + data)."""
        return self._owner.size(self._prefix + data)

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        """`size` of each input."""
        return [self.size(data) for data in datas]


class Compressor(ABC):
    """Base of every adapter: validated settings, a canonical spec, sizes.

    Subclasses declare `name`, `params` (the first is the level-like setting, reachable as
    `level` for every compressor), `primable`, `continues` (whether `after` reuses the state
    after a prefix), and whether their library releases the GIL while compressing (so threads
    run in parallel).
    """

    name: ClassVar[str]
    summary: ClassVar[str]
    params: ClassVar[tuple[Param, ...]]
    aliases: ClassVar[dict[str, str]] = {}
    primable: ClassVar[bool] = False
    continues: ClassVar[bool] = False
    releases_gil: ClassVar[bool] = True
    window_source: ClassVar[str]

    def __init__(self, **settings: int) -> None:
        known = {p.name: p for p in self.params}
        values: dict[str, int | None] = {p.name: p.default for p in self.params}
        aliases = {"level": self.params[0].name, **self.aliases}
        for given, value in settings.items():
            key = aliases.get(given, given)
            param = known.get(key)
            if param is None:
                raise SpecError(f"{self.name} has no key {given!r}; valid keys: {', '.join(known)}")
            if not param.low <= value <= param.high:
                raise SpecError(
                    f"{self.name}: {key}={value} is out of range {param.low}-{param.high}"
                )
            values[key] = value
        self.settings: dict[str, int | None] = values

    @classmethod
    def level_param(cls) -> Param:
        """The level-like setting: level, quality, preset or order."""
        return cls.params[0]

    def setting(self, key: str) -> int:
        """The value of a setting that has a default (every adapter's level does)."""
        value = self.settings[key]
        if value is None:
            raise KeyError(key)
        return value

    @property
    def spec(self) -> str:
        """Canonical spec: the name and every set value, in declared order."""
        parts = [f"{k}={v}" for k, v in self.settings.items() if v is not None]
        return f"{self.name}:{','.join(parts)}" if parts else self.name

    @property
    def cache_key(self) -> str:
        """What identifies this compressor's output sizes: spec plus library version."""
        return f"{self.spec}@{self.library_version()}"

    @property
    def overhead_bytes(self) -> int:
        """Fixed cost that remains after stripping: the compressed size of empty input."""
        return self.size(b"")

    @property
    @abstractmethod
    def window_bytes(self) -> int | None:
        """Documented window or block limit in bytes; None where the format has none."""

    @staticmethod
    @abstractmethod
    def library_version() -> str:
        """Version of the compression library, part of the cache key."""

    @abstractmethod
    def size(self, data: bytes) -> int:
        """C(x): the compressed size of `data` in bytes."""

    def sizes(self, datas: Sequence[bytes]) -> list[int]:
        """C(x) of each input; adapters may batch the calls."""
        return [self.size(data) for data in datas]

    def after(self, prefix: bytes) -> Continued:
        """C(prefix + x) for the x to come (see `Continued`): concatenation's sizes, which
        an adapter whose state after the prefix can be reused (`continues`) finds quicker."""
        return Continued(self, prefix)

    def prefixed_sizes(self, prefix: bytes, datas: Sequence[bytes]) -> list[int]:
        """C(prefix + x) of each x: through `after` for more than one x after a prefix longer
        than each (an origin's corpus, not one item as the prefix of another), else whole."""
        if len(datas) > 1 and len(prefix) > max(len(data) for data in datas):
            return self.after(prefix).sizes(datas)
        return self.sizes([prefix + data for data in datas])

    def primed(self, reference: bytes, data_size: int = 0) -> Primed:
        """A compressor that knows `reference` already; only where `primable` is true.

        `data_size` is the largest input it will be asked to compress (0: as large as the
        reference), so the adapter can size its window to reach back over both.
        """
        raise SpecError(
            f"{self.name} cannot be primed with a reference; use the concatenation method"
        )

    def __repr__(self) -> str:
        return f"<compressor {self.spec}>"

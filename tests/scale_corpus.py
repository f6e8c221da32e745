"""Invented log-like chunks from many invented sources, for neighbour and group tests at scale.

Every source is a small program of its own: a vocabulary of made-up words, a handful of line
templates with fields (numbers, hex identifiers, addresses, durations, paths), a time-stamp
style, and a pool of session identifiers that turns over slowly, so that chunks cut one after
another from one source share more than chunks far apart. A few common words are shared by all
sources, as real logs share "error" and "connection". Chunks hold whole lines, 1 to 4 KB.
Everything comes from a fixed seed: the same call gives the same bytes on every machine.
"""

from __future__ import annotations

import random
from dataclasses import dataclass

_SYLLABLES = [c + v for c in "bdfgklmnprstvz" for v in ("a", "e", "i", "o", "u", "ai", "ou", "ei")]
_COMMON = ["error", "warn", "info", "start", "stop", "retry", "open", "close", "sent", "ok"]
_STAMPS = [
    "{y}-{mo:02d}-{d:02d}T{h:02d}:{mi:02d}:{s:02d}.{ms:03d}Z",
    "{d:02d}/{mo:02d}/{y} {h:02d}:{mi:02d}:{s:02d}",
    "[{t}.{ms:03d}]",
    "{mo:02d}{d:02d} {h:02d}{mi:02d}{s:02d}",
    "<{t}>",
]


def _word(rng: random.Random) -> str:
    return "".join(rng.choice(_SYLLABLES) for _ in range(rng.randint(2, 4)))


@dataclass
class _Source:
    """One invented program's way of writing lines, and where its stream stands."""

    name: str
    stamp: str
    templates: list[list[str]]
    rng: random.Random
    clock: int
    sessions: list[str]

    def field(self, kind: str) -> str:
        rng = self.rng
        if kind == "#num":
            return str(rng.randint(0, 99999))
        if kind == "#hex":
            return f"{rng.getrandbits(32):08x}"
        if kind == "#ip":
            return f"10.{rng.randint(0, 255)}.{rng.randint(0, 255)}.{rng.randint(1, 254)}"
        if kind == "#ms":
            return f"{rng.expovariate(1 / 40):.1f}ms"
        if kind == "#session":
            if rng.random() < 0.05:  # the pool turns over slowly
                self.sessions[rng.randrange(len(self.sessions))] = f"s{rng.getrandbits(40):010x}"
            return rng.choice(self.sessions)
        return kind

    def line(self) -> str:
        self.clock += self.rng.randint(1, 4000)
        t = self.clock
        stamp = self.stamp.format(
            y=2026, mo=1 + t // 2_600_000_000 % 12, d=1 + t // 86_400_000 % 28,
            h=t // 3_600_000 % 24, mi=t // 60_000 % 60, s=t // 1000 % 60, ms=t % 1000, t=t // 1000,
        )  # fmt: skip
        template = self.rng.choice(self.templates)
        return f"{stamp} {self.name} " + " ".join(self.field(part) for part in template)


def _source(number: int, seed: int) -> _Source:
    rng = random.Random(seed * 1_000_003 + number)
    vocabulary = [_word(rng) for _ in range(rng.randint(20, 60))]
    kinds = ["#num", "#hex", "#ip", "#ms", "#session"]
    templates = []
    for _ in range(rng.randint(4, 14)):
        parts = [rng.choice(_COMMON)] if rng.random() < 0.6 else []
        for _ in range(rng.randint(3, 10)):
            parts.append(rng.choice(kinds) if rng.random() < 0.3 else rng.choice(vocabulary))
        templates.append(parts)
    return _Source(
        name=f"{_word(rng)}[{rng.randint(100, 9999)}]:",
        stamp=rng.choice(_STAMPS),
        templates=templates,
        rng=rng,
        clock=rng.randint(0, 10**9),
        sessions=[f"s{rng.getrandbits(40):010x}" for _ in range(rng.randint(3, 12))],
    )


def log_chunks(n: int, sources: int, seed: int = 7) -> tuple[list[bytes], list[int]]:
    """`n` chunks of 1-4 KB of whole lines and, for each, the number of the source it came from.

    Sources get unequal shares (log-normal weights, every source at least one chunk when
    n >= sources); each source's chunks follow one another in its stream.
    """
    rng = random.Random(seed)
    weights = [rng.lognormvariate(0.0, 0.6) for _ in range(sources)]
    owner = list(range(min(n, sources)))
    owner += rng.choices(range(sources), weights=weights, k=n - len(owner))
    rng.shuffle(owner)
    made = {s: _source(s, seed) for s in set(owner)}
    chunks = []
    for s in owner:
        source = made[s]
        target = source.rng.randint(1024, 4096)
        lines: list[str] = []
        size = 0
        while size < target:
            line = source.line()
            if size + len(line) + 1 > 4096 and size >= 1024:
                break
            lines.append(line)
            size += len(line) + 1
        chunks.append(("\n".join(lines) + "\n").encode()[:4096])
    return chunks, owner

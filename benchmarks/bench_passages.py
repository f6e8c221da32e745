"""Speed of shared passages (kinpress.passages) against floors measured in the same run.

Material: Python's own standard library sources (real code, on every machine). Floors: blake2b
over the same bytes (reading them once) and zlib level 1 (the cheapest real compression of them).

  1. fingerprint: MB/s over 1 MB of sources, and its time as a multiple of each floor's.
  2. identical 1 MB files: shared_passages time, as a multiple of zlib level 1 over both files.
  3. 2,000 pairs of 4 KB files (1,000 edited copies, one word in 40 changed and lines
     re-wrapped, and 1,000 pairs of unrelated sources): fingerprints per file and passages per
     pair (each file fingerprinted once, as a caller would), against zlib level 1 over each
     pair's two files.
  4. a template-heavy pair: two 1 MB logs of the same 6 line templates with other values, where
     most k-grams repeat thousands of times in both files (the rank-paired case).

Times are the best of --repeat runs (the machine may be shared).

    python benchmarks/bench_passages.py [--repeat 5]
"""

from __future__ import annotations

import argparse
import hashlib
import random
import sysconfig
import time
import zlib
from collections.abc import Callable
from pathlib import Path

from kinpress.passages import coverage, fingerprint, shared_passages

MB = 1 << 20


def sources(size: int) -> bytes:
    out = bytearray()
    for path in sorted(Path(sysconfig.get_paths()["stdlib"]).glob("*.py")):
        out += path.read_bytes()
        if len(out) >= size:
            break
    return bytes(out[:size])


def best(repeat: int, work: Callable[[], object]) -> float:
    """Best wall time of `repeat` runs (the machine is shared: the least disturbed run)."""
    times = []
    for _ in range(repeat):
        started = time.perf_counter()
        work()
        times.append(time.perf_counter() - started)
    return min(times)


def edited(data: bytes, rng: random.Random) -> bytes:
    words = data.split()
    for k in range(0, len(words), 40):
        words[k] = b"EDITED"
    lines, line = [], bytearray()
    for word in words:
        line += word + b" "
        if len(line) > rng.randint(40, 90):
            lines.append(bytes(line))
            line = bytearray()
    return b"\n".join([*lines, bytes(line)])


def log(seed: int, size: int) -> bytes:
    rng = random.Random(seed)
    templates = [
        "{t} INFO dfs.DataNode$PacketResponder: PacketResponder {n} for block blk_{b} terminating",
        "{t} INFO dfs.FSNamesystem: BLOCK* NameSystem.addStoredBlock: blockMap updated: {ip} is"
        " added to blk_{b} size {n}",
        "{t} INFO dfs.DataNode$DataXceiver: Receiving block blk_{b} src: /{ip} dest: /{ip}",
        "{t} WARN dfs.DataNode$DataXceiver: {ip}:Got exception while serving blk_{b} to /{ip}",
        "{t} INFO dfs.DataNode: Deleting block blk_{b} file /mnt/hadoop/dfs/data/current/blk_{b}",
        "{t} INFO dfs.FSNamesystem: BLOCK* NameSystem.allocateBlock: /user/root/rand/part-{n}",
    ]
    out = []
    total = 0
    while total < size:
        line = rng.choice(templates).format(
            t=f"0811{rng.randrange(10, 11):02d} {rng.randrange(10**6):06d}",
            n=rng.randrange(3),
            b=rng.randrange(-(10**18), 10**18),
            ip=f"10.251.{rng.randrange(256)}.{rng.randrange(256)}:50010",
        )
        out.append(line)
        total += len(line) + 1
    return "\n".join(out).encode()[:size]


def fingerprint_speed(data: bytes, repeat: int) -> None:
    seconds = best(repeat, lambda: fingerprint(data))
    blake = best(repeat, lambda: hashlib.blake2b(data).digest())
    deflate = best(repeat, lambda: zlib.compress(data, 1))
    print(
        f"fingerprint 1 MB: {len(data) / MB / seconds:.1f} MB/s ({seconds * 1e3:.1f} ms);"
        f" x{seconds / blake:.1f} blake2b ({len(data) / MB / blake:.0f} MB/s),"
        f" x{seconds / deflate:.2f} zlib level 1 ({len(data) / MB / deflate:.1f} MB/s)"
    )


def pair_speed(name: str, a: bytes, b: bytes, repeat: int) -> None:
    fa, fb = fingerprint(a), fingerprint(b)
    passages = shared_passages(fa, fb)
    seconds = best(repeat, lambda: shared_passages(fa, fb))
    deflate = best(repeat, lambda: (zlib.compress(a, 1), zlib.compress(b, 1)))
    print(
        f"{name}: shared_passages {seconds * 1e3:.1f} ms, x{seconds / deflate:.2f} zlib level 1"
        f" of both ({deflate * 1e3:.1f} ms); {len(passages)} passages, longest"
        f" {passages[0].length if passages else 0}, coverage of a {coverage(passages, fa, 'a'):.3f}"
    )


def many_pairs(corpus: bytes, repeat: int) -> None:
    rng = random.Random(1)
    chunks = [corpus[k : k + 4096] for k in range(0, len(corpus) - 4096, 4096)]
    pairs = [(c, edited(c, rng)) for c in chunks[:1000]]
    pairs += [(rng.choice(chunks), rng.choice(chunks)) for _ in range(1000)]
    files = [data for pair in pairs for data in pair]
    fingerprints = best(repeat, lambda: [fingerprint(data) for data in files])
    fps = [(fingerprint(a), fingerprint(b)) for a, b in pairs]
    passages = best(repeat, lambda: [shared_passages(fa, fb) for fa, fb in fps])
    deflate = best(repeat, lambda: [(zlib.compress(a, 1), zlib.compress(b, 1)) for a, b in pairs])
    copies = sum(coverage(shared_passages(fa, fb), fa, "a") for fa, fb in fps[:1000]) / 1000
    others = sum(coverage(shared_passages(fa, fb), fa, "a") for fa, fb in fps[1000:]) / 1000
    print(
        f"{len(pairs)} pairs of 4 KB: fingerprints {fingerprints / len(files) * 1e6:.0f} us a file,"
        f" passages {passages / len(pairs) * 1e6:.0f} us a pair; both x"
        f"{(fingerprints + passages) / deflate:.1f} zlib level 1 of both files"
        f" ({deflate / len(pairs) * 1e6:.0f} us a pair); mean coverage of a: edited copies"
        f" {copies:.3f}, random pairs {others:.3f}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    corpus = sources(10 * MB)
    one = corpus[:MB]
    fingerprint_speed(one, args.repeat)
    pair_speed("identical 1 MB files", one, bytes(one), args.repeat)
    many_pairs(corpus, args.repeat)
    pair_speed("template-heavy 1 MB logs", log(1, MB), log(2, MB), args.repeat)
    pair_speed("a 1 MB log and its copy", log(1, MB), log(1, MB), args.repeat)


if __name__ == "__main__":
    main()

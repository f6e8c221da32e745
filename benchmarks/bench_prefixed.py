"""Sizes after one prefix (concatenation's C(yx) for many x, as a classification scores items
against an origin's corpus): `Compressor.prefixed_sizes` over compressing each prefix + x whole.

For each adapter that keeps its state after a prefix (`continues`: PPMd and lzma, whose helper
process keeps the encoder after the prefix and forks from it for each item; see
compressors.kept) and for one that does not
(bz2, the control: its ratio should stay near 1), on corpora of several lengths cut from this
Python's own standard library sources, with items of 8 kB: the time per item both ways and
their ratio, measured in the same run; the sizes must agree to the byte. A ratio above 1 is the
speed-up. A fork costs in proportion to the forking process's memory, which grows with the
model, so the ratio is not the corpus length's: expect a few times, not hundreds. The time
after a prefix includes feeding the prefix once, shared among the items (--items 10, 2 MB:
lzma 9 6.2, PPMd order 32 8.4, bzip2 1.0, measured 2026-12-05 while other work ran; before
lzma's recipe fed its prefix in pieces, a corpus of megabytes was encoded again per item).

    python benchmarks/bench_prefixed.py [--items N]
"""

from __future__ import annotations

import argparse
import time

from bench_passages import sources  # the standard library's sources, as text

from kinpress.compressors import compressor

SPECS = (
    "ppmd:order=32,memory=256",
    "ppmd:order=6,memory=16",
    "lzma:level=9",
    "lzma:level=6",
    "bz2:level=9",
)
CORPORA = (20_000, 80_000, 200_000, 500_000, 2_000_000)
ITEM = 8_000


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--items", type=int, default=20, help="items after each prefix")
    args = parser.parse_args()
    source = sources(max(CORPORA) + ITEM * (args.items + 1))
    items = [source[-ITEM * (k + 1) :][:ITEM] for k in range(args.items)]
    print(f"{'compressor':28s} {'prefix':>8s}  whole ms/item  after ms/item  ratio")
    for spec in SPECS:
        comp = compressor(spec)
        comp.prefixed_sizes(source[: ITEM * 3], items[:2])  # a helper process started untimed
        for length in CORPORA:
            prefix = source[:length]
            started = time.perf_counter()
            whole = [comp.size(prefix + x) for x in items]
            whole_seconds = time.perf_counter() - started
            started = time.perf_counter()
            after = comp.prefixed_sizes(prefix, items)
            after_seconds = time.perf_counter() - started
            if after != whole:
                raise SystemExit(f"{spec}: sizes after a prefix of {length} differ from whole")
            per = 1000 / len(items)
            print(
                f"{spec:28s} {length:8,d}  {whole_seconds * per:13.2f}  {after_seconds * per:13.2f}"
                f"  {whole_seconds / after_seconds:5.2f}",
                flush=True,
            )


if __name__ == "__main__":
    main()

"""Classification by origin on data it was not tuned on: default options against fixed compressors.

Protocols (issue 10): logs, per system the first 10 chunks of 100 lines as reference and the next
10 to classify, systems missing from the reference two (or a quarter) at a time, rotated; code,
per language the first half of its files (name order) as reference and the rest to classify,
languages missing a quarter at a time; texts, the Universal Declaration of Human Rights in 14
languages cut into 6-line chunks, the first 10 of each as reference and the next 10 to classify,
a quarter of the languages missing at a time; with --draws N, each code set also on N random
splits (per language 20 random files as reference and 20 others to classify, a quarter of the
languages, at least 2, missing at random; seeded, so a run repeats). For each setting it prints
the share of known items named right, refused (unknown) and ambiguous, the share whose
best-scoring origin is the right one (named or not: what a method that never refuses would
name), the share of a missing origin's items refused (per round, beside the output's estimate
of it), and the run time; gzip 1-NN (Jiang et al.
2023) beside, which never refuses (--no-gzip leaves it out), and under it gzip 1-NN at the same
coverage as the default: each round, as many known items left unnamed as auto left, those whose
nearest reference item is least nearer than any of another label first. "auto" is
the default (-c auto, chosen on each round's reference; under its row, each round's choice and
figures, which hang on the choice, the refusal warnings it gave, each with how many of the
refused items it counts were of known and of missing origins, and how the round's unknown items
grouped by their own NCD agree with their true origins: adjusted Rand index). Data:
../shared/datasets-real (logs, code, texts) and, where present, this machine's own material:
--logs DIR (a folder of *.log files of other systems; machine_logs.sh fills one with 8 logs of
this machine's programs) and source files of many languages under /usr (--machine-code); byte
streams of 9 formats under /usr
(--machine-bytes: ELF libraries and programs, Python bytecode, gettext catalogues, gzip streams,
PNG images, time-zone files, static libraries, Java archives; each the first 32 KB of a file,
2 formats missing at a time); Python files of 10 projects installed beside kinpress
(--machine-projects: one language, so every origin is kin of every other, 2 missing at a time);
and 24
programming languages never used while developing (--debian-code DIR, fetched from Debian's
package registry by fetch_debian_code.sh), the same code protocol with 4 languages missing at a
time, as issue 10 states it (--any-size: files of 64 B to 256 KB, not 1-32 KB, as a user's
folders hold them); and manual pages translated into 20 languages (--debian-man DIR, fetched by
fetch_debian_man.sh: a kind of text never used while developing, the same commands' pages in
every language, with close kin among the languages), the code protocol with 5 missing at a time.

    python benchmarks/bench_origins.py [--logs DIR] [--machine-code] [--machine-bytes]
        [--machine-projects] [--debian-code DIR [--any-size]] [--debian-man DIR]
        [--draws N] [--cache PATH] [--files PATH]

--files PATH keeps the file lists of the machine's code and byte sets: the first run writes
them, later runs read the same files even after packages were installed or removed.
"""

from __future__ import annotations

import argparse
import fnmatch
import glob
import gzip
import json
import multiprocessing
import os
import random
import sysconfig
import time
import warnings
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from kinpress import Item, SizeCache
from kinpress.calibration import choose_for_job
from kinpress.origins import Classification, classify, group_unknowns

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets-real"
FIXED = ("zstd:level=3", "zstd:level=19", "lzma:level=9", "ppmd:order=32", "bz2:level=9",
         "zlib:level=9")  # fmt: skip
PURELIB = sysconfig.get_paths()["purelib"]
MACHINE_CODE = {
    "python": "/usr/lib/python3.11/**/*.py",
    "perl": "/usr/share/perl*/**/*.pm",
    "c-header": "/usr/include/*.h",
    "cpp": "/usr/include/c++/*/bits/*.tcc",
    "javascript": "/usr/lib/node_modules/npm/lib/**/*.js",
    "tcl": "/usr/share/tcltk/**/*.tcl",
    "cmake": "/usr/share/cmake-*/Modules/*.cmake",
    "sql": "/usr/share/postgresql/**/*.sql",
    "vim": "/usr/share/vim/**/*.vim",
    "shell": "/usr/share/bash-completion/completions/*",
    "xkb": "/usr/share/X11/xkb/symbols/*",
    "groff": "/usr/share/groff/*/tmac/*",
    "m4": "/usr/share/aclocal/*.m4",
    "html": "/usr/share/doc/**/*.html",
    "xml": "/usr/share/xml/**/*.xml",
    "css": "/usr/share/**/*.css",
    "svg": "/usr/share/**/*.svg",
    "json": "/usr/lib/node_modules/npm/**/package.json",
    "markdown": "/usr/lib/node_modules/npm/**/*.md",
    "yaml": "/usr/share/**/*.yaml",
    "rst": "/usr/share/**/*.rst",
    "pod": "/usr/share/perl*/**/*.pod",
    "cpp-template": "/usr/include/c++/**/*.tcc",
    "c": f"{PURELIB}/**/*.c",
    "cython": f"{PURELIB}/**/*.pyx",
    "fortran": f"{PURELIB}/**/*.f90",
    "python-stub": f"{PURELIB}/**/*.pyi",
}
MACHINE_PROJECTS = {
    project: f"{PURELIB}/{project}/**/*.py"
    for project in ("Bio", "dask", "fontTools", "hypothesis", "matplotlib", "mypy", "numpy",
                    "pandas", "pygments", "sklearn")
}  # fmt: skip
"""Python files of 10 projects installed beside kinpress: one language, origins that are all
kin, a missing project's files a hard negative."""
MACHINE_BYTES = {
    "elf-shared": ("/usr/lib/x86_64-linux-gnu", "*.so*", False),
    "elf-program": ("/usr/bin", "*", False),
    "python-bytecode": ("/usr/lib/python3.11", "*.pyc", True),
    "gettext": ("/usr/share/locale", "*.mo", True),
    "gzip": ("/usr/share/doc", "*.gz", True),
    "png": ("/usr/share", "*.png", True),
    "tzif": ("/usr/share/zoneinfo", "*", True),
    "ar-archive": ("/usr/lib", "*.a", True),
    "java-archive": ("/usr/share", "*.jar", True),
}
"""Byte streams of 9 formats on this machine (folder, name pattern, below subfolders too)."""
HEAD = 32768
"""A byte stream's item: the first 32 KB of its file."""


def debian_code(root: Path) -> dict[str, str]:
    """File patterns of 24 languages: those fetch_debian_code.sh unpacks under `root`, and this
    machine's own Python, Perl, Tcl, C++ headers, JavaScript, shell, Vim script, CMake and SQL."""
    unpacked = root / "root"
    return {
        "go": f"{unpacked}/usr/share/go-*/src/**/*.go",
        "rust": f"{unpacked}/usr/src/rustc-*/library/**/*.rs",
        "java": f"{root}/java/**/*.java",
        "ruby": f"{unpacked}/usr/lib/ruby/[0-9]*/**/*.rb",
        "erlang": f"{unpacked}/**/*.erl",
        "elisp": f"{root}/elisp/*.el",
        "scheme": f"{unpacked}/usr/share/guile/**/*.scm",
        "ada": f"{unpacked}/usr/lib/gcc/**/adainclude/*.adb",
        "pascal": f"{unpacked}/usr/share/fpcsrc/**/*.pp",
        "common-lisp": f"{unpacked}/usr/share/sbcl-source/**/*.lisp",
        "php": f"{unpacked}/usr/share/php/**/*.php",
        "d": f"{unpacked}/usr/lib/ldc/**/*.d",
        "lua": f"{unpacked}/usr/share/lua/**/*.lua",
        "assembly": f"{unpacked}/usr/share/go-*/src/**/*.s",
        "c": f"{unpacked}/**/*.c",
        "tcl": MACHINE_CODE["tcl"],
        "python": MACHINE_CODE["python"],
        "perl": MACHINE_CODE["perl"],
        "cpp": "/usr/include/c++/*/bits/*.h",
        **{kind: MACHINE_CODE[kind] for kind in ("javascript", "shell", "vim", "cmake", "sql")},
    }


def log_origins(folder: Path) -> dict[str, list[Item]]:
    out = {}
    for path in sorted(folder.glob("*.log")):
        rows = path.read_bytes().splitlines(keepends=True)
        chunks = [b"".join(rows[k : k + 100]) for k in range(0, len(rows) - 99, 100)][:20]
        if len(chunks) >= 15:
            out[path.stem] = [Item(f"{path.stem}#{k + 1}", c, str(path), label=path.stem)
                              for k, c in enumerate(chunks)]  # fmt: skip
    return out


def text_origins(folder: Path, lines: int = 6) -> dict[str, list[Item]]:
    """Each language's text cut into chunks of `lines` lines, in order (at most 20)."""
    out = {}
    for path in sorted(folder.glob("*.txt")):
        rows = path.read_bytes().splitlines(keepends=True)
        chunks = [b"".join(rows[k : k + lines]) for k in range(0, len(rows) - lines + 1, lines)]
        out[path.stem] = [Item(f"{path.stem}#{k + 1}", c, str(path), label=path.stem)
                          for k, c in enumerate(chunks[:20])]  # fmt: skip
    return out


CODE_SIZES = (1024, 32768)
"""The sizes of file the code sets take (bytes, both ends included)."""
ANY_SIZE = (64, 262144)
"""The sizes --any-size takes instead: nearly every file, as a user's folders hold them."""


def code_origins(
    patterns: dict[str, str], per: int = 40, sizes: tuple[int, int] = CODE_SIZES
) -> dict[str, list[Item]]:
    out = {}
    for language, pattern in patterns.items():
        low, high = sizes
        paths = sorted(p for p in glob.glob(pattern, recursive=True)
                       if os.path.isfile(p) and low <= os.path.getsize(p) <= high)  # fmt: skip
        found = spread_files(language, paths, per, read_bytes, lambda data: b"\0" not in data)
        if found:
            out[language] = found
    return out


MAN_SIZES = (1024, 65536)
"""The sizes of manual page the man set takes (bytes after decompression)."""


def man_pages(root: Path, per: int = 40) -> dict[str, list[Item]]:
    """Per language folder fetch_debian_man.sh unpacked under `root`, `per` of its manual pages
    (decompressed, MAN_SIZES, no links and no `.so` pages that only point at another) spread
    over the path order."""

    def page(data: bytes) -> bool:
        return MAN_SIZES[0] <= len(data) <= MAN_SIZES[1] and not data.startswith(b".so ")

    out = {}
    for folder in sorted(p for p in root.iterdir() if p.is_dir() and p.name != "debs"):
        paths = [p for p in sorted(glob.glob(f"{folder}/usr/share/man/**/*.gz", recursive=True))
                 if not os.path.islink(p)]  # fmt: skip
        found = spread_files(folder.name, paths, per, gunzipped, page)
        if found:
            out[folder.name] = found
    return out


def gunzipped(path: str) -> bytes:
    with gzip.open(path) as f:
        return f.read()


def read_bytes(path: str) -> bytes:
    return Path(path).read_bytes()


def spread_files(
    label: str,
    paths: list[str],
    per: int,
    read: Callable[[str], bytes],
    keep: Callable[[bytes], bool],
) -> list[Item] | None:
    """The files at `paths` (in that order) read by `read`, those `keep` takes, one path per
    distinct content, `per` of them spread over the order (see spread); None with fewer than 30
    to choose from."""
    datas: dict[bytes, str] = {}
    for path in paths:
        data = read(path)
        if keep(data):
            datas.setdefault(data, path)
    return spread(label, datas, per) if len(datas) >= 30 else None


def spread(label: str, datas: dict[bytes, str], per: int) -> list[Item]:
    """`per` of the files (bytes to path, in name order) spread evenly over that order, as
    items labelled `label`."""
    files = list(datas.items())
    step = len(files) / min(per, len(files))
    chosen = [files[int(k * step)] for k in range(min(per, len(files)))]
    return [Item(p, d, p, label=label) for d, p in chosen]


def machine_bytes(per: int = 40) -> dict[str, list[Item]]:
    """Per format of MACHINE_BYTES, `per` files of 2 KB or more spread over the name order (of
    /usr/bin, ELF programs only), each item its first HEAD bytes. Folders are walked without
    following links (a recursive glob through /usr/lib's links ran for half an hour)."""
    out = {}
    for kind, (top, pattern, below) in MACHINE_BYTES.items():
        paths = []
        for folder, _, names in os.walk(top):
            paths += [os.path.join(folder, n) for n in names if fnmatch.fnmatch(n, pattern)]
            if not below:
                break
        files = [p for p in sorted(paths) if not os.path.islink(p) and os.path.isfile(p)
                 and os.path.getsize(p) >= 2048]  # fmt: skip
        keep = is_elf if kind == "elf-program" else lambda data: True
        found = spread_files(kind, files, per, read_head, keep)
        if found:
            out[kind] = found
    return out


def is_elf(data: bytes) -> bool:
    return data.startswith(b"\x7fELF")


def read_head(path: str) -> bytes:
    with open(path, "rb") as f:
        return f.read(HEAD)


def frozen(
    name: str,
    find: Callable[[], dict[str, list[Item]]],
    path: Path | None,
    read: Callable[[str], bytes] = read_bytes,
) -> dict[str, list[Item]]:
    """The set `name` as `path` (a JSON file of each set's file paths by origin) lists it, read
    again from those files; or, where `path` does not list it yet, the origins `find` finds
    (searching and reading every matching file), written there. Installing packages adds files
    under /usr and so changes which files the patterns pick (737 packages for the report test's
    browser changed the 24 languages' figures): a frozen list keeps runs on one machine
    comparable."""
    lists = json.loads(path.read_text()) if path is not None and path.exists() else {}
    if path is None or name not in lists:
        origins = find()
        if path is None:
            return origins
        lists[name] = {o: [i.name for i in items] for o, items in origins.items()}
        path.write_text(json.dumps(lists, indent=1) + "\n")
        return origins
    out = {}
    for origin, paths in lists[name].items():
        missing = [p for p in paths if not os.path.isfile(p)]
        if missing:
            raise SystemExit(f"{path}: {name}: {missing[0]} listed but gone ({len(missing)} files)")
        out[origin] = [Item(p, read(p), p, label=origin) for p in paths]
    return out


def shared_code() -> dict[str, list[Item]]:
    root = SHARED / "code"
    return {d.name: [Item(f"{d.name}/{f.name}", f.read_bytes(), str(f), label=d.name)
                     for f in sorted(d.iterdir())]
            for d in sorted(p for p in root.iterdir() if p.is_dir())}  # fmt: skip


def missing_count(names: list[str], missing_at_once: int | None) -> int:
    """How many origins a round leaves out: `missing_at_once`, or a quarter, at least 2."""
    return missing_at_once or max(2, len(names) // 4)


def rounds(
    origins: dict[str, list[Item]], reference: int, missing_at_once: int | None = None
) -> list[tuple[list[Item], list[Item], set[str]]]:
    """Origins missing from the reference in rotation, `missing_at_once` (default a quarter, at
    least 2) at a time; each origin's first `reference` items as reference, the next as later."""
    names = sorted(origins)
    step = missing_count(names, missing_at_once)
    out = []
    for start in range(0, len(names), step):
        missing = set(names[start : start + step])
        ref = [i for n in names if n not in missing for i in origins[n][:reference]]
        later = [i for n in names for i in origins[n][reference : 2 * reference]]
        out.append((ref, later, missing))
    return out


def random_rounds(
    origins: dict[str, list[Item]],
    reference: int,
    missing_at_once: int | None,
    draws: int,
    seed: int = 11,
) -> list[tuple[list[Item], list[Item], set[str]]]:
    """`draws` random splits: `missing_at_once` (default a quarter, at least 2) origins drawn
    missing, and per origin `reference` random items as reference and `reference` others later."""
    rng = random.Random(seed)
    names = sorted(origins)
    k = missing_count(names, missing_at_once)
    out = []
    for _ in range(draws):
        missing = set(rng.sample(names, k))
        ref: list[Item] = []
        later: list[Item] = []
        for n in names:
            items = origins[n][:]
            rng.shuffle(items)
            if n not in missing:
                ref += items[:reference]
            later += items[reference : 2 * reference]
        out.append((ref, later, missing))
    return out


def fresh_choice(reference: list[Item], later: list[Item], cache_path: str) -> str:
    """`-c auto`'s choice for classifying `later` against `reference` (run in a fresh process)."""
    warnings.simplefilter("ignore")
    with SizeCache(cache_path) as cache:
        return choose_for_job(reference, "classify", targets=later, cache=cache).spec


def gzip_1nn(reference: list[Item], later: list[Item]) -> list[tuple[str, float]]:
    """Jiang et al. 2023 as written in their paper (k = 1; their k = 2 ties count either): each
    item's label, with its margin: how much nearer its nearest reference item is than the
    nearest of any other label (0: a tie), what it would leave unnamed first."""

    def size(data: bytes) -> int:
        return len(gzip.compress(data))

    sizes = [size(r.data) for r in reference]
    out = []
    for x in later:
        cx = size(x.data)
        d = [(size(x.data + b" " + r.data) - min(cx, cr)) / max(cx, cr)
             for r, cr in zip(reference, sizes, strict=True)]  # fmt: skip
        label = str(reference[int(np.argmin(d))].label)
        others = [v for v, r in zip(d, reference, strict=True) if str(r.label) != label]
        out.append((label, (min(others) - min(d)) if others else float("inf")))
    return out


def warned(result: Classification, later: list[Item], missing: set[str]) -> str:
    """The refusal warnings of a round, each with how many of the refused items it counts
    (`beyond_rate`) were of a known origin (drift) and how many of a missing one (an origin like
    it absent)."""
    notes = []
    for note in result.concentrated:
        counted = [i.label for p, i in zip(result.predictions, later, strict=True)
                   if p.best == note.origin and p.beyond_rate]  # fmt: skip
        strangers = sum(label in missing for label in counted)
        known = len(counted) - strangers
        notes.append(f"{note.origin} {note.refused} of {note.fitting} (counted: {known} known,"
                     f" {strangers} missing)")  # fmt: skip
    return f"; warned: {'; '.join(notes)}" if notes else ""


def grouped(result: Classification, later: list[Item], cache: SizeCache) -> str:
    """How the round's unknown items grouped by their own NCD (origins.group_unknowns, as
    classify groups them) agree with their true origins: scikit-learn's adjusted Rand index."""
    from sklearn.metrics import adjusted_rand_score

    found = group_unknowns(result, later, cache=cache)
    if found.skipped is not None:
        return f"; unknown not grouped ({found.skipped})"
    truth = [str(later[i].label) for i, _ in found.assignment]  # every unknown item, grouped
    score = adjusted_rand_score(truth, [number for _, number in found.assignment])
    return f"; unknown in {len(found.groups)} groups, ARI {score:.2f}"


def run(name: str, origins: dict[str, list[Item]], reference: int, settings: list[str],
        cache: SizeCache, missing_at_once: int | None = None, draws: int = 0,
        baseline: bool = True) -> None:  # fmt: skip
    plan = (
        random_rounds(origins, reference, missing_at_once, draws) if draws
        else rounds(origins, reference, missing_at_once)
    )  # fmt: skip
    kind = f"{draws} random draws" if draws else f"{len(plan)} rounds"
    print(f"\n{name}: {len(origins)} origins, {reference} reference items each, {kind}")
    print(f"  {'setting':28s} right  refused  ambiguous  best   missing->unknown  seconds")
    auto_refused: list[int] = []  # per round, the known items auto left unnamed
    for setting in [*settings, *(["gzip 1-NN"] if baseline else [])]:
        right = refused = ambiguous = best = known = unknown = strangers = 0
        # gzip 1-NN's right when it too leaves as many known items unnamed as auto did, those
        # of least margin first: a comparison at the same coverage
        matched = 0
        started = time.perf_counter()
        chosen = set()
        per_round = []
        for index, (ref, later, missing) in enumerate(plan):
            known_items = [i for i in later if i.label not in missing]
            if setting == "gzip 1-NN":
                guesses = gzip_1nn(ref, known_items)
                hits = [g == i.label for (g, _), i in zip(guesses, known_items, strict=True)]
                right += sum(hits)
                known += len(known_items)
                if len(auto_refused) == len(plan):
                    order = np.argsort([m for _, m in guesses], kind="stable")
                    matched += sum(hits[k] for k in order[auto_refused[index] :])
                continue
            spec = setting
            if setting == "auto":
                # in a fresh process, as each `kinpress classify` chooses: after a round of
                # PPMd in this one, its timed unit of work ran 20-50 % slower, and the budget
                # check passed it over where a fresh run would not
                spawn = multiprocessing.get_context("spawn")
                with ProcessPoolExecutor(1, mp_context=spawn) as fresh:
                    spec = fresh.submit(fresh_choice, ref, later, str(cache.path)).result()
                chosen.add(spec)
            result = classify(later, ref, spec, cache=cache)
            before = (right, refused, known, unknown, strangers)
            unnamed = refused + ambiguous
            for p, item in zip(result.predictions, later, strict=True):
                if item.label in missing:
                    strangers += 1
                    unknown += p.decision == "unknown"
                else:
                    known += 1
                    right += p.predicted == item.label
                    best += p.best == item.label
                    refused += p.decision == "unknown"
                    ambiguous += p.decision == "ambiguous"
            if setting == "auto":
                auto_refused.append(refused + ambiguous - unnamed)
                now = (right, refused, known, unknown, strangers)
                r, f, k, u, n = (a - b for a, b in zip(now, before, strict=True))
                estimate = result.abstention.missing_refused
                per_round.append(
                    f"    {', '.join(sorted(missing))} missing: {spec}; right {r / k:.3f},"
                    f" refused {f / k:.3f}, unknown {u / n:.3f}"
                    + ("" if estimate is None else f" (estimated {estimate:.3f})")
                    + warned(result, later, missing)
                    + grouped(result, later, cache)
                )
        seconds = time.perf_counter() - started
        label = setting + (f" ({', '.join(sorted(chosen))})" if chosen else "")
        missing_rate = f"{unknown / strangers:.3f}" if strangers else "-"
        best = right if setting == "gzip 1-NN" else best  # it never refuses: its best is named
        figures = (
            f"{right / known:.3f}  {refused / known:.3f}    {ambiguous / known:.3f}     "
            f" {best / known:.3f}"
        )
        print(f"  {label[:60]:28s} {figures}      {missing_rate:>6s}        {seconds:6.0f}",
              flush=True)  # fmt: skip
        if setting == "gzip 1-NN" and len(auto_refused) == len(plan):
            print(
                "    gzip 1-NN leaving as many known items unnamed as auto did"
                f" (least margin first): right {matched / known:.3f}",
                flush=True,
            )
            continue
        # which compressor each round chose, and what it gave: the figures hang on the choice
        for line in per_round:
            print(line, flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--logs", type=Path, help="a folder of *.log files of other systems")
    parser.add_argument("--machine-code", action="store_true", help="languages under /usr")
    parser.add_argument(
        "--machine-bytes", action="store_true", help="byte streams of 9 formats under /usr"
    )
    parser.add_argument(
        "--machine-projects", action="store_true",
        help="Python files of 10 projects installed beside kinpress",
    )  # fmt: skip
    parser.add_argument(
        "--debian-code", type=Path, help="a folder fetch_debian_code.sh filled (24 languages)"
    )
    parser.add_argument(
        "--any-size", action="store_true",
        help=f"--debian-code with files of {ANY_SIZE[0]} B to {ANY_SIZE[1] >> 10} KB (default"
        f" {CODE_SIZES[0] >> 10}-{CODE_SIZES[1] >> 10} KB)",
    )  # fmt: skip
    parser.add_argument(
        "--debian-man", type=Path, help="a folder fetch_debian_man.sh filled (20 languages)"
    )
    parser.add_argument("--only-machine", action="store_true", help="skip ../shared")
    parser.add_argument("--fixed", nargs="*", default=list(FIXED), help="fixed compressors")
    parser.add_argument(
        "--draws", type=int, default=0, help="also N random splits of each code set (default 0)"
    )
    parser.add_argument(
        "--no-gzip", action="store_true", help="leave out gzip 1-NN (12 min on 24 languages)"
    )
    parser.add_argument("--cache", default="/tmp/kinpress-bench-origins.sqlite")
    parser.add_argument(
        "--files",
        type=Path,
        help="a JSON file of the code sets' file lists: read where it lists a set, else written",
    )
    args = parser.parse_args()
    if args.any_size and not args.debian_code:
        parser.error("--any-size takes the files of --debian-code: give that too")
    warnings.simplefilter("ignore")
    settings = ["auto", *args.fixed]
    sets: list[tuple[str, Callable[[], dict[str, list[Item]]], int, int | None]] = []
    code: list[Callable[[], dict[str, list[Item]]]] = []  # the loaders of code sets (--draws)
    if SHARED.is_dir() and not args.only_machine:
        sets.append(("shared logs (Loghub)", lambda: log_origins(SHARED / "logs"), 10, None))
        sets.append(("shared code (Rosetta, 8 languages)", shared_code, 20, None))
        code.append(shared_code)
        sets.append(
            ("shared texts (UDHR, 14 languages)", lambda: text_origins(SHARED / "texts"), 10, None)
        )
    if args.logs:
        sets.append((f"logs in {args.logs}", lambda: log_origins(args.logs), 10, None))
    if args.machine_code:
        code.append(lambda: frozen("machine", lambda: code_origins(MACHINE_CODE), args.files))
        sets.append(("this machine's code", code[-1], 20, None))
    if args.machine_bytes:
        code.append(lambda: frozen("bytes", machine_bytes, args.files, read_head))
        sets.append(("this machine's byte streams", code[-1], 20, 2))
    if args.machine_projects:
        code.append(lambda: frozen("projects", lambda: code_origins(MACHINE_PROJECTS), args.files))
        sets.append(("Python files of 10 projects", code[-1], 20, 2))
    if args.debian_code:
        patterns = debian_code(args.debian_code)
        sizes, named = (ANY_SIZE, "debian-any") if args.any_size else (CODE_SIZES, "debian")
        code.append(lambda: frozen(named, lambda: code_origins(patterns, sizes=sizes), args.files))
        title = "code of 24 languages (Debian)" + (", files of any size" if args.any_size else "")
        sets.append((title, code[-1], 20, 4))
    if args.debian_man:
        root = args.debian_man
        code.append(lambda: frozen("man", lambda: man_pages(root), args.files, gunzipped))
        sets.append(("manual pages in 20 languages (Debian)", code[-1], 20, None))
    baseline = not args.no_gzip
    with SizeCache(args.cache) as cache:
        for name, load, reference, missing_at_once in sets:
            origins = load()
            run(name, origins, reference, settings, cache, missing_at_once, 0, baseline)
            if args.draws and load in code:
                run(name, origins, reference, settings, cache, missing_at_once, args.draws,
                    baseline)  # fmt: skip


if __name__ == "__main__":
    main()

#!/bin/sh
# Logs of programs on this machine, never used while developing, for
# `python benchmarks/bench_origins.py --logs DIR`: the package manager's own logs where the
# machine has them (dpkg, apt's terminal log, apt's solver dump), and logs that real programs
# write while this script runs a fixed workload in time order (system-call traces, the dynamic
# linker's debug log, Python's import times, git's traces, make's debug output). Each file is
# cut to its first 2,000 lines (20 chunks of 100); one with fewer is dropped by the benchmark.
#
#     sh benchmarks/machine_logs.sh DIR
#
# Needs strace, git, make and a C compiler; a program missing is skipped with a note.
set -u
DIR=${1:?usage: machine_logs.sh DIR}
mkdir -p "$DIR"
DIR=$(cd "$DIR" && pwd)
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
LINES=2000

keep() {  # keep NAME: the first LINES lines of standard input as DIR/NAME.log
    head -n "$LINES" > "$DIR/$1.log"
    echo "$1: $(wc -l < "$DIR/$1.log") lines"
}

[ -r /var/log/dpkg.log ] && keep dpkg < /var/log/dpkg.log
[ -r /var/log/apt/term.log ] && keep apt-term < /var/log/apt/term.log
[ -r /var/log/apt/eipp.log.xz ] && xzcat /var/log/apt/eipp.log.xz | keep apt-solver

# Modules of Python's standard library, in name order, for the workloads below.
MODULES="argparse asyncio base64 bz2 calendar csv dataclasses datetime decimal difflib email
fractions ftplib gettext glob gzip hashlib heapq hmac html http.client imaplib json logging lzma
mailbox mimetypes pathlib pickle pprint random shlex shutil smtplib sqlite3 statistics string
tarfile tempfile textwrap threading tomllib unittest urllib.request uuid xml.dom.minidom zipfile"

# one interpreter importing the modules in turn, as a long-running program's trace reads
PYTHON=$(python3 -c 'import sys; print(sys.executable)')
if command -v strace >/dev/null; then
    strace -o "$WORK/trace" "$PYTHON" -c "import $(echo $MODULES | sed 's/ /, /g')"
    keep strace < "$WORK/trace"
else
    echo "strace: not found, skipped"
fi

for program in "ls -la /usr/share" "python3 -c pass" "perl -e 1" "git --version" \
    "make --version" "gzip --version" "tar --version" "sort --version" "xz --version"; do
    LD_DEBUG=files,bindings $program 2>&1 >/dev/null
done | keep ld-debug

for module in $MODULES; do
    "$PYTHON" -X importtime -c "import $module" 2>&1
done | keep python-importtime

if command -v git >/dev/null; then
    repo="$WORK/repo"
    git init -q "$repo"
    for k in $(seq 1 150); do
        echo "line $k" >> "$repo/notes.txt"
        GIT_TRACE=1 GIT_TRACE_PERFORMANCE=1 git -C "$repo" add notes.txt 2>&1
        GIT_TRACE=1 GIT_TRACE_PERFORMANCE=1 git -C "$repo" -c user.name=bench \
            -c user.email=bench@example.invalid commit -q -m "note $k" 2>&1
        GIT_TRACE=1 GIT_TRACE_PERFORMANCE=1 git -C "$repo" log --oneline -3 2>&1 >/dev/null
    done | sed 's/^[0-9:.]* //' | keep git-trace
else
    echo "git: not found, skipped"
fi

if command -v make >/dev/null && command -v cc >/dev/null; then
    mkdir -p "$WORK/build"
    for k in $(seq 1 40); do
        printf 'int f%d(int x) { return x * %d; }\n' "$k" "$k" > "$WORK/build/f$k.c"
    done
    printf 'OBJ := $(patsubst %%.c,%%.o,$(sort $(wildcard f*.c)))\nall: $(OBJ)\n%%.o: %%.c\n\tcc -c $< -o $@\n' \
        > "$WORK/build/Makefile"
    make -d -C "$WORK/build" 2>&1 | keep make-debug
else
    echo "make or cc: not found, skipped"
fi
echo "logs under $DIR"

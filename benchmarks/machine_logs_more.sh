#!/bin/sh
# More logs of programs on this machine, of kinds machine_logs.sh does not make: each file is the
# real log or diagnostic output of a real program running a fixed workload, in time order, cut
# to its first 2,000 lines (20 chunks of 100); a log that falls short is dropped with a note.
# For `python benchmarks/bench_origins.py --logs DIR`, as a second set never used while
# developing. The PostgreSQL log needs root (the server runs as the postgres user).
#
#     sh benchmarks/machine_logs_more.sh DIR
#
# Kinds: a PostgreSQL server's log (log_statement=all, connections), node's NODE_DEBUG output,
# gcc's verbose driver output (-v), Python's verbose import log (-v), sqlite3's statement trace
# and query plans, apt-get's resolver debug output on simulated installs, the Perl debugger's
# line trace (AutoTrace), valgrind's verbose memcheck log. A program missing is skipped with a
# note. Everything runs in temporary folders removed at the end; nothing outside DIR is written
# (Python is kept from writing bytecode, apt from writing its caches, valgrind from making its
# gdbserver pipes).
set -u
DIR=${1:?usage: machine_logs_more.sh DIR}
mkdir -p "$DIR"
DIR=$(cd "$DIR" && pwd)
WORK=$(mktemp -d)
PGW=
cleanup() {
    if [ -n "$PGW" ] && [ -f "$PGW/data/postmaster.pid" ]; then
        runuser -u postgres -- "$PGBIN/pg_ctl" -D "$PGW/data" -m immediate -w stop >/dev/null 2>&1
    fi
    rm -rf "$WORK"
    [ -n "$PGW" ] && rm -rf "$PGW"
}
trap cleanup EXIT
trap 'exit 1' INT TERM HUP
LINES=2000
START=$(date +%s)
export PYTHONDONTWRITEBYTECODE=1 LC_ALL=C.UTF-8 HOME="$WORK/home"
mkdir -p "$HOME"

keep() {  # keep NAME: the first LINES lines of standard input as DIR/NAME.log, if there are that many
    cat > "$WORK/raw"
    all=$(wc -l < "$WORK/raw")
    head -n "$LINES" < "$WORK/raw" > "$DIR/$1.log"
    rm -f "$WORK/raw"
    n=$(wc -l < "$DIR/$1.log")
    if [ "$n" -lt "$LINES" ]; then
        rm -f "$DIR/$1.log"
        echo "$1: only $n lines, dropped"
    else
        echo "$1: $n lines (of $all), at $(( $(date +%s) - START ))s"
    fi
}

# --- PostgreSQL: a throwaway cluster, every statement and connection logged -----------------
PGBIN=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1)
if [ -n "$PGBIN" ] && [ -x "$PGBIN/initdb" ] && id postgres >/dev/null 2>&1 \
    && command -v runuser >/dev/null; then
    PGW=$(mktemp -d)
    chown postgres "$PGW"
    chmod 700 "$PGW"
    pg() { runuser -u postgres -- "$@"; }
    pg "$PGBIN/initdb" -D "$PGW/data" -A trust -U postgres -E UTF8 --locale=C.UTF-8 --no-sync \
        >/dev/null
    cat >> "$PGW/data/postgresql.conf" <<EOF
listen_addresses = ''
unix_socket_directories = '$PGW'
port = 54329
lc_messages = 'C'
log_line_prefix = '%m [%p] %q%u@%d '
log_statement = 'all'
log_connections = on
log_disconnections = on
log_duration = on
log_checkpoints = on
log_lock_waits = on
log_temp_files = 0
log_autovacuum_min_duration = 0
work_mem = '64kB'
EOF
    pg "$PGBIN/pg_ctl" -D "$PGW/data" -l "$PGW/server.log" -w start >/dev/null
    sql() { pg "$PGBIN/psql" -X -q -h "$PGW" -p 54329 -U postgres "$@" >/dev/null 2>&1; }
    sql -d postgres -c "CREATE DATABASE shop"
    sql -d shop <<'EOF'
CREATE TABLE customers (id serial PRIMARY KEY, name text NOT NULL, city text, created date);
CREATE TABLE orders (id serial PRIMARY KEY, customer_id int REFERENCES customers(id),
                     amount numeric(10,2), status text DEFAULT 'new');
CREATE INDEX orders_customer ON orders (customer_id);
INSERT INTO customers (name, city, created)
  SELECT 'customer ' || g, (ARRAY['Oslo','Lyon','Porto','Graz','Turin'])[1 + g % 5],
         date '2020-01-01' + g FROM generate_series(1, 500) g;
EOF
    for k in $(seq 1 420); do
        c=$(( (k * 37) % 500 + 1 ))
        case $(( k % 10 )) in
        0) sql -d shop -c "SELECT city, count(*), sum(amount) FROM orders o JOIN customers c ON c.id = o.customer_id GROUP BY city ORDER BY city" ;;
        1) sql -d shop <<EOF
BEGIN;
INSERT INTO orders (customer_id, amount) VALUES ($c, $k.50);
UPDATE customers SET city = 'Bern' WHERE id = $c;
COMMIT;
EOF
        ;;
        2) sql -d shop -c "SELECT * FROM customers WHERE id = $c" ;;
        3) sql -d shop -c "INSERT INTO orders (customer_id, amount) VALUES ($(( c + 1000 )), 1)" ;;
        4) sql -d shop -c "EXPLAIN ANALYZE SELECT * FROM orders WHERE customer_id = $c" ;;
        5) sql -d shop -c "SELECT name FROM customers ORDER BY md5(name || $k) LIMIT 3" ;;
        6) sql -d shop -c "UPDATE orders SET status = 'paid' WHERE id % 7 = $(( k % 7 ))" ;;
        7) sql -d shop -c "SELECT amount / (id - id) FROM orders LIMIT 1" ;;
        8) sql -d shop -c "DELETE FROM orders WHERE id = $(( k / 2 ))" ;;
        9) if [ $(( k % 50 )) -eq 9 ]; then sql -d shop -c "VACUUM ANALYZE orders"
           else sql -d shop -c "SELECT count(*) FROM orders WHERE status = 'paid'"; fi ;;
        esac
        [ $(( k % 100 )) -eq 0 ] && sql -d postgres -c "CHECKPOINT"
    done
    pg "$PGBIN/pg_ctl" -D "$PGW/data" -m fast -w stop >/dev/null
    keep postgres < "$PGW/server.log"
else
    echo "postgres: initdb or the postgres user not found, skipped"
fi

# --- node: NODE_DEBUG while a script loads local modules, uses fs and timers, serves HTTP --------
if command -v node >/dev/null; then
    mkdir -p "$WORK/node/lib"
    for k in $(seq 1 40); do
        prev=$(( k - 1 ))
        {
            [ "$k" -gt 1 ] && echo "const prev = require('./m$prev');"
            echo "const path = require('path');"
            echo "module.exports = { id: $k, name: path.join('m', String($k)) };"
        } > "$WORK/node/lib/m$k.js"
    done
    cat > "$WORK/node/main.js" <<'EOF'
const fs = require('fs');
const path = require('path');
const http = require('http');
const os = require('os');
const zlib = require('zlib');
const lib = path.join(__dirname, 'lib');
const mods = fs.readdirSync(lib).sort().map((f) => require(path.join(lib, f)));
const out = path.join(__dirname, 'out');
fs.mkdirSync(out, { recursive: true });
for (const m of mods) {
  const file = path.join(out, `m${m.id}.json`);
  fs.writeFileSync(file, JSON.stringify(m));
  fs.statSync(file);
  fs.readFileSync(file, 'utf8');
}
const server = http.createServer((req, res) => {
  const body = zlib.gzipSync(Buffer.from(req.url.repeat(20)));
  res.writeHead(200, { 'Content-Type': 'text/plain', 'Content-Encoding': 'gzip' });
  res.end(body);
});
const agent = new http.Agent({ keepAlive: true, maxSockets: 2 });
server.listen(0, '127.0.0.1', () => {
  const port = server.address().port;
  let left = 150;
  const next = (k) => {
    const via = k % 3 === 0 ? false : agent;  // every third request on a fresh connection
    http.get({ host: '127.0.0.1', port, path: `/item/${k}`, agent: via }, (res) => {
      res.resume();
      res.on('end', () => {
        setTimeout(() => {
          if (--left === 0) { agent.destroy(); server.close(); fs.rmSync(out, { recursive: true }); }
          else next(k + 1);
        }, 5);
      });
    });
  };
  next(1);
  setInterval(() => os.loadavg(), 50).unref();
});
EOF
    NODE_DEBUG=module,fs,timer,net,http node "$WORK/node/main.js" 2>&1 | keep node-debug
else
    echo "node: not found, skipped"
fi

# --- gcc -v: the driver's verbose output compiling (and now and then linking) small C files ----
if command -v gcc >/dev/null; then
    mkdir -p "$WORK/gcc"
    HEADERS="stdio.h stdlib.h string.h math.h ctype.h time.h errno.h limits.h stdint.h assert.h signal.h unistd.h"
    k=0
    for h in $HEADERS; do
        for opt in -O0 -O2 -Os -g "-O1 -Wall" "-O3 -fPIC"; do
            k=$(( k + 1 ))
            printf '#include <%s>\nint f%d(int x) { return x * %d + 1; }\nint main(void) { return f%d(%d) == 0; }\n' \
                "$h" "$k" "$k" "$k" "$k" > "$WORK/gcc/t$k.c"
            if [ $(( k % 4 )) -eq 0 ]; then
                gcc -v $opt "$WORK/gcc/t$k.c" -o "$WORK/gcc/t$k" -lm 2>&1
            else
                gcc -v $opt -c "$WORK/gcc/t$k.c" -o "$WORK/gcc/t$k.o" 2>&1
            fi
        done
    done | keep gcc-verbose
else
    echo "gcc: not found, skipped"
fi

# --- python3 -v: the verbose import log of one interpreter importing modules in turn ----------
PYTHON=$(python3 -c 'import sys; print(sys.executable)' 2>/dev/null)
if [ -n "$PYTHON" ]; then
    PYMODS="abc ast binascii bisect cmd code codecs collections colorsys compileall concurrent.futures
configparser contextlib copy copyreg cProfile dis doctest enum filecmp fileinput fnmatch
functools getopt getpass graphlib inspect io ipaddress itertools keyword linecache locale
netrc numbers operator optparse os pdb pkgutil platform plistlib poplib profile pstats queue
quopri re reprlib sched secrets selectors shelve signal site socket socketserver stat struct
subprocess symtable sysconfig tabnanny telnetlib timeit token tokenize trace traceback types
typing unicodedata warnings wave weakref webbrowser wsgiref.simple_server xmlrpc.client zipapp
zipimport zoneinfo asyncio email.mime.multipart http.server multiprocessing.pool unittest.mock
xml.etree.ElementTree logging.handlers urllib.request json tarfile zipfile sqlite3 decimal ctypes
argparse xml.dom.minidom xml.sax mailbox imaplib smtplib ftplib http.cookiejar statistics
fractions difflib csv pickle pprint shutil tempfile textwrap uuid hashlib hmac lzma bz2 gzip
calendar dataclasses gettext glob heapq html.parser mimetypes pathlib random shlex string
threading tomllib pydoc venv curses readline rlcompleter json.tool http.cookies modulefinder
py_compile runpy email.mime.image email.mime.audio email.mime.application xml.sax.saxutils
concurrent.futures.process asyncio.subprocess sqlite3.dump encodings.cp437 encodings.cp850
encodings.cp1250 encodings.cp1251 encodings.cp1252 encodings.cp1253 encodings.cp1254
encodings.iso8859_2 encodings.iso8859_5 encodings.iso8859_7 encodings.iso8859_15 encodings.koi8_r
encodings.mac_roman encodings.utf_16 encodings.utf_32 encodings.big5 encodings.shift_jis
encodings.euc_kr encodings.gb2312 encodings.idna encodings.punycode multiprocessing.managers
multiprocessing.shared_memory ctypes.util dbm.dumb email.headerregistry email.generator pyclbr ssl
xml.parsers.expat http.client wsgiref.validate xmlrpc.server concurrent.futures.thread
importlib.metadata importlib.resources unittest.async_case encodings.cp1255 encodings.cp1256
encodings.cp1257 encodings.cp1258 encodings.iso8859_3 encodings.iso8859_4 encodings.iso8859_6
encodings.iso8859_8 encodings.iso8859_9 encodings.iso8859_13 encodings.mac_cyrillic
encodings.mac_greek encodings.cp866 encodings.cp932 encodings.euc_jp encodings.gbk encodings.hz"
    (cd "$WORK" && "$PYTHON" -v -c "import $(echo $PYMODS | sed 's/ /, /g')" 2>&1 >/dev/null) \
        | keep python-verbose
else
    echo "python3: not found, skipped"
fi

# --- sqlite3: statement trace, query plans, changes and timings of a shell session -------------
if command -v sqlite3 >/dev/null; then
    {
        echo ".trace stdout"
        echo ".eqp on"
        echo ".changes on"
        echo ".timer on"
        echo "CREATE TABLE items (id INTEGER PRIMARY KEY, name TEXT, price REAL, shelf INTEGER);"
        echo "CREATE TABLE moves (id INTEGER PRIMARY KEY, item INTEGER REFERENCES items(id), qty INTEGER, day TEXT);"
        echo "CREATE INDEX moves_item ON moves(item);"
        for k in $(seq 1 300); do
            echo "INSERT INTO items (name, price, shelf) VALUES ('item $k', $(( k % 17 )).$(( k % 10 ))5, $(( k % 12 )));"
            echo "INSERT INTO moves (item, qty, day) VALUES ($(( (k * 7) % (k / 3 + 1) + 1 )), $(( k % 9 - 4 )), date('2024-01-01', '+$k days'));"
            case $(( k % 6 )) in
            0) echo "SELECT shelf, count(*), round(sum(price), 2) FROM items WHERE shelf = $(( k % 12 )) GROUP BY shelf;" ;;
            1) echo "SELECT i.name, sum(m.qty) FROM items i JOIN moves m ON m.item = i.id WHERE i.id = $k GROUP BY i.id;" ;;
            2) echo "UPDATE items SET price = price * 1.01 WHERE shelf = $(( k % 12 ));" ;;
            3) echo "SELECT count(*) FROM moves WHERE day > date('2024-01-01', '+$(( k / 2 )) days');" ;;
            4) echo "DELETE FROM moves WHERE qty = 0 AND item = $(( k - 3 ));" ;;
            5) echo "SELECT name FROM items WHERE name LIKE 'item $(( k % 10 ))%' ORDER BY price DESC LIMIT 2;" ;;
            esac
        done
        echo "ANALYZE;"
        echo "VACUUM;"
    } > "$WORK/workload.sql"
    sqlite3 "$WORK/shop.db" < "$WORK/workload.sql" 2>&1 | keep sqlite-trace
else
    echo "sqlite3: not found, skipped"
fi

# --- apt-get: resolver and marker debug output of simulated installs (no download, no caches) ---
if command -v apt-get >/dev/null; then
    for p in emacs-nox postgresql-contrib texlive-latex-base gimp inkscape libreoffice-writer \
        default-jdk vlc nginx-full php; do
        echo "=== apt-get -s install $p"
        apt-get -s -o Dir::Cache::pkgcache= -o Dir::Cache::srcpkgcache= \
            -o Debug::pkgDepCache::AutoInstall=1 -o Debug::pkgDepCache::Marker=1 \
            -o Debug::pkgProblemResolver=1 install "$p" 2>&1
    done | keep apt-debug
else
    echo "apt-get: not found, skipped"
fi

# --- perl -d: the debugger's non-stop line trace (AutoTrace) of a small script ---------
if command -v perl >/dev/null; then
    cat > "$WORK/report.pl" <<'EOF'
use strict;
use warnings;
use File::Basename qw(basename dirname);
use List::Util qw(sum max);
use Text::Wrap qw(wrap);
my %by_dir;
for my $k (1 .. 40) {
    my $path = "/srv/data/part" . ($k % 5) . "/file$k.txt";
    push @{ $by_dir{ dirname($path) } }, basename($path);
}
sub size_of { my ($name) = @_; my ($n) = $name =~ /(\d+)/; return $n * 3 }
for my $dir (sort keys %by_dir) {
    my @files = sort @{ $by_dir{$dir} };
    my $total = sum(map { size_of($_) } @files);
    my $biggest = max(map { size_of($_) } @files);
    local $Text::Wrap::columns = 60;
    print wrap('', '  ', "$dir: @files ($total, max $biggest)"), "\n";
}
EOF
    PERLDB_OPTS="NonStop=1 AutoTrace=1 LineInfo=$WORK/perl-trace" \
        perl -d "$WORK/report.pl" >/dev/null 2>&1 </dev/null
    keep perl-debugger < "$WORK/perl-trace"
else
    echo "perl: not found, skipped"
fi

# --- valgrind -v: memcheck's verbose log over a small leaky program and some tools -------------
if command -v valgrind >/dev/null && command -v gcc >/dev/null; then
    cat > "$WORK/leak.c" <<'EOF'
#include <stdlib.h>
#include <stdio.h>
#include <string.h>
static char *keep_name(const char *s) { char *p = malloc(strlen(s) + 1); strcpy(p, s); return p; }
int main(int argc, char **argv) {
    int n = argc > 1 ? atoi(argv[1]) : 3;
    for (int i = 0; i < n; i++) { char *p = keep_name("leak"); if (i % 2) free(p); }
    int *a = malloc(4 * sizeof *a), s = 0;
    for (int i = 0; i < 4; i++) s += a[i];
    if (s > 0) puts("positive");
    free(a);
    return 0;
}
EOF
    gcc -g -O0 "$WORK/leak.c" -o "$WORK/leak"
    printf 'pear\napple\nfig\n' > "$WORK/fruit.txt"
    for run in "$WORK/leak 3" "ls -la /usr/share/doc" "$WORK/leak 6" "sort $WORK/fruit.txt" \
        "gzip -c $WORK/fruit.txt" "$WORK/leak 9" "wc -l $WORK/fruit.txt" "date -u +%Y" \
        "$WORK/leak 12" "cat $WORK/fruit.txt" "uname -a" "$WORK/leak 15" "id -u" "true" \
        "$WORK/leak 18" "head -n 1 $WORK/fruit.txt" "du -s $WORK" "$WORK/leak 21" "env -i true" \
        "xz -c $WORK/fruit.txt" "$WORK/leak 24" "cut -c1-2 $WORK/fruit.txt"; do
        valgrind -v --vgdb=no --leak-check=full --track-origins=yes $run 2>&1 >/dev/null
    done | keep valgrind
else
    echo "valgrind or gcc: not found, skipped"
fi
echo "logs under $DIR"

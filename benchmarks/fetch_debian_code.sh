#!/bin/sh
# Source files of languages this project never used while developing, from Debian's package
# registry: fetch the packages (no install, no root once `apt-get update` has run) and unpack
# them under DIR, for `python benchmarks/bench_origins.py --debian-code DIR`.
#
#     sh benchmarks/fetch_debian_code.sh DIR
#
# Go, Rust, Java (java.base and java.desktop of the JDK's src.zip), Ruby, Erlang (with its C
# interface), Emacs Lisp (decompressed), Scheme (Guile), Ada (GNAT's runtime), Pascal (Free
# Pascal), Common Lisp (SBCL), PHP (PEAR), D (Phobos), Lua (Penlight), assembly (Go's); the
# benchmark adds this machine's Python, Perl, Tcl, C++ headers, JavaScript, shell completions,
# Vim script, CMake and SQL. About 160 MB of packages, 1.2 GB unpacked.
set -eu
DIR=${1:?usage: fetch_debian_code.sh DIR}
PACKAGES="golang-1.19-src rust-src openjdk-17-source libruby3.1 erlang-src emacs-el guile-3.0-libs
gnat-12 fpc-source-3.2.2 sbcl-source php-pear lua-penlight libphobos2-ldc-shared-dev"
mkdir -p "$DIR/debs" "$DIR/root" "$DIR/java" "$DIR/elisp"
cd "$DIR/debs"
for package in $PACKAGES; do
    ls "$package"_*.deb >/dev/null 2>&1 || apt-get download "$package"
done
for deb in *.deb; do
    dpkg-deb -x "$deb" ../root
done
cd ..
unzip -q -o root/usr/lib/jvm/openjdk-17/lib/src.zip 'java.base/*' 'java.desktop/*' -d java
find root/usr/share/emacs -name '*.el.gz' | while read -r path; do
    name=$(echo "$path" | sed 's|.*/lisp/||; s|/|_|g; s|\.gz$||')
    gunzip -c "$path" > "elisp/$name"
done
echo "unpacked under $DIR"

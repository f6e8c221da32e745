#!/bin/sh
# Manual pages translated into 20 languages, a kind of text this project never used while
# developing, from Debian's package registry: fetch the packages (no install, no root once
# `apt-get update` has run) and unpack each under DIR/<language>, for
# `python benchmarks/bench_origins.py --debian-man DIR`.
#
#     sh benchmarks/fetch_debian_man.sh DIR
#
# Czech, Danish, German, Spanish, Finnish, French, Hungarian, Italian, Japanese, Norwegian
# Bokmal, Dutch, Polish, Brazilian Portuguese, Russian, Serbian, Swedish, Turkish, Ukrainian,
# Vietnamese and Chinese: the same commands' pages in each (roff markup, option names and
# examples shared, the prose translated), with close kin among them (Danish, Norwegian and
# Swedish; Russian, Ukrainian and Serbian; Spanish and Portuguese). About 25 MB of packages.
set -eu
DIR=${1:?usage: fetch_debian_man.sh DIR}
LANGUAGES="cs da de es fi fr hu it ja nb nl pl pt-br ru sr sv tr uk vi zh"
mkdir -p "$DIR/debs"
cd "$DIR/debs"
for language in $LANGUAGES; do
    ls "manpages-${language}"_*.deb >/dev/null 2>&1 || apt-get download "manpages-$language"
done
for language in $LANGUAGES; do
    dpkg-deb -x "manpages-${language}"_*.deb "../$language"
done
echo "unpacked under $DIR"

#!/bin/sh
# Two releases, years apart, of 12 Python projects from PyPI (wheels, no install), into DIR, for
# `python benchmarks/bench_derived_real.py --corpora v --versions DIR`: derived_corpora.VERSIONS
# names them; the later release of each module is the earlier edited by its authors.
#
#     sh benchmarks/fetch_pypi_versions.sh DIR
set -eu
DIR=${1:?usage: fetch_pypi_versions.sh DIR}
PYTHON=${PYTHON:-python3}
mkdir -p "$DIR"
# one release at a time: pip will not download two versions of a project in one resolution
for wanted in requests==2.22.0 requests==2.31.0 urllib3==1.24.3 urllib3==1.26.16 rich==10.0.0 \
    rich==13.4.2 packaging==20.0 packaging==23.1 click==7.0 click==8.1.3 jinja2==2.10 \
    jinja2==3.1.2 attrs==19.3.0 attrs==23.1.0 idna==2.8 idna==3.4 chardet==3.0.4 chardet==5.1.0 \
    tomli==1.0.0 tomli==2.0.1 markdown==3.1 markdown==3.4.1 tenacity==6.0.0 tenacity==8.2.2; do
    "$PYTHON" -m pip download --quiet --no-deps --only-binary :all: -d "$DIR" "$wanted"
done

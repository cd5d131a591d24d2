#!/usr/bin/env bash
# Source this to get $PY: a Python 3 that imports the reference libraries (numpy, scipy,
# mpmath). Order: the system Python if it already has them; else a virtual environment under
# target/ (the ignored build folder), made once; else packages installed into target/pylib
# with --target (for a Python without the venv module). Never installs into the system Python.
REQ=tests/reference/requirements.txt
have_libs() { "$1" -c 'import numpy, scipy, mpmath' >/dev/null 2>&1; }
if have_libs python3; then
    PY=python3
elif [ -x target/pyenv/bin/python ] && have_libs target/pyenv/bin/python; then
    PY=target/pyenv/bin/python
elif python3 -m venv target/pyenv >/dev/null 2>&1; then
    target/pyenv/bin/python -m pip install --quiet --disable-pip-version-check -r "$REQ"
    PY=target/pyenv/bin/python
else
    rm -rf target/pyenv
    python3 -m pip install --quiet --disable-pip-version-check --target target/pylib -r "$REQ"
    export PYTHONPATH="$PWD/target/pylib${PYTHONPATH:+:$PYTHONPATH}"
    PY=python3
fi
export PY

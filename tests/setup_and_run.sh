#!/usr/bin/env bash
# Install everything the test suite needs on a fresh Debian machine, then run the
# whole suite: lint (ruff check, ruff format --check), the doctests of the public
# modules, and every test, browser tests included. Extra arguments go to pytest.
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v chromium >/dev/null 2>&1 || ! command -v chromedriver >/dev/null 2>&1; then
    echo "Installing Debian's chromium and chromium-driver for the browser tests..."
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium chromium-driver >/dev/null
fi

if [ ! -x .venv/bin/python ]; then
    python3 -m venv .venv
fi
.venv/bin/python -m pip install -q --disable-pip-version-check --upgrade pip
.venv/bin/python -m pip install -q --disable-pip-version-check -e '.[test,dask]'

echo "ruff check and ruff format --check ..."
.venv/bin/ruff check .
.venv/bin/ruff format --check .

# Doctests of the public modules (the examples in docstrings and the README's Python section),
# then the whole suite. Browser tests must run, not skip, when CI=true (tests/conftest.py enforces it).
exec .venv/bin/python -m pytest -q -p no:cacheprovider --doctest-modules --doctest-glob=README.md \
    fitting app/_format.py app/handover.py tests README.md "$@"

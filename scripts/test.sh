#!/usr/bin/env bash
# Install gradwright with its test and notebook extras, then run lint and the whole suite
# (unit, reference, hardening, identities, notebook, real-kernel and real-browser tests).
# This is the README's test command and what CI runs.
set -euo pipefail
cd "$(dirname "$0")/.."

PYTHON="${PYTHON:-python}"
"$PYTHON" -m pip install --quiet --disable-pip-version-check -e ".[test,jupyter]"
bash scripts/install-browser.sh            # Debian chromium for the browser test, a python3 kernel
bash scripts/install-tex.sh                # Debian TeX Live (pdflatex) for the LaTeX compile test
export GRADWRIGHT_REQUIRE_TEX=1            # so a missing pdflatex fails rather than skips
"$PYTHON" -m ruff check src tests benchmarks notebooks_demo
"$PYTHON" -m ruff format --check src tests benchmarks notebooks_demo
mkdir -p test-artifacts
"$PYTHON" -m pytest -q -p no:cacheprovider "$@"

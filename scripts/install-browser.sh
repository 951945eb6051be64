#!/usr/bin/env bash
# Install what the notebook browser test needs: Debian's Chromium with a base font, and a
# `python3` Jupyter kernelspec. Idempotent: does nothing that is already in place.
# Never runs `playwright install` (it downloads a browser build, which this network refuses);
# Playwright drives /usr/bin/chromium through `executable_path` instead.
set -euo pipefail

if [ ! -x /usr/bin/chromium ]; then
    SUDO=""
    if [ "$(id -u)" != "0" ]; then
        SUDO="sudo"
    fi
    export DEBIAN_FRONTEND=noninteractive
    $SUDO apt-get update -q
    $SUDO apt-get install -y -q --no-install-recommends chromium fonts-dejavu-core
fi

PYTHON="${PYTHON:-python}"
if ! "$PYTHON" -m jupyter kernelspec list 2>/dev/null | grep -qE '^\s+python3\s'; then
    "$PYTHON" -m ipykernel install --user --name python3
fi

if [ -x /usr/bin/chromium ]; then
    /usr/bin/chromium --version 2>/dev/null || true
fi

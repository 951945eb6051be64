#!/usr/bin/env bash
# Install a minimal TeX Live from Debian for the LaTeX compile test (pdflatex with amsmath).
# Idempotent: does nothing when pdflatex is already on the PATH.
set -euo pipefail

if ! command -v pdflatex >/dev/null 2>&1; then
    SUDO=""
    if [ "$(id -u)" != "0" ]; then
        SUDO="sudo"
    fi
    export DEBIAN_FRONTEND=noninteractive
    $SUDO apt-get update -q
    $SUDO apt-get install -y -q --no-install-recommends \
        texlive-latex-base texlive-latex-recommended texlive-fonts-recommended
fi

if command -v pdflatex >/dev/null 2>&1; then
    pdflatex --version 2>/dev/null | head -n 1 || true
fi

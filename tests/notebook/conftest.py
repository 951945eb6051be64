"""Shared fixtures for the notebook face: an in-process IPython shell with gradwright loaded."""

from __future__ import annotations

import os

import pytest

os.environ.setdefault("MPLBACKEND", "Agg")


@pytest.fixture(scope="session")
def ip():
    from IPython.testing.globalipapp import start_ipython

    shell = start_ipython()
    shell.run_line_magic("load_ext", "gradwright")
    # The test shell is a terminal shell that formats text/plain only; enable the rich types.
    shell.display_formatter.active_types = shell.display_formatter.format_types
    return shell


@pytest.fixture
def shell(ip):
    """The shared shell, with the names a test made removed afterwards."""
    before = set(ip.user_ns)
    yield ip
    for name in set(ip.user_ns) - before:
        del ip.user_ns[name]

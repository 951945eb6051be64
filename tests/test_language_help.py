"""The help of the NumPy constructs: every example parses, and the README lists each one."""

from __future__ import annotations

import pathlib

import pytest

from gradwright import derive
from gradwright.language.help_numpy import NUMPY_CONSTRUCTS, numpy_constructs_help

DECLS = "Z: (n, k)\nA: (n, k)\nB: (n, k)\nx: (n,)\n"


def _examples(written: str) -> list[str]:
    """Split 'f(a, b), g(c)' at the commas outside parentheses."""
    out, depth, cur = [], 0, ""
    for ch in written:
        depth += ch == "("
        depth -= ch == ")"
        if ch == "," and depth == 0:
            out.append(cur.strip())
            cur = ""
        else:
            cur += ch
    return out + [cur.strip()]


EXAMPLES = [e for row in NUMPY_CONSTRUCTS for e in _examples(row[0])]


@pytest.mark.parametrize("example", EXAMPLES)
def test_every_example_derives(example):
    var = "x" if "(x" in example else "Z" if "Z" in example else "A"
    d = derive(f"{DECLS}f = {example}", wrt=[var])
    assert d.variables == (var,) or list(d.variables) == [var]


def test_help_has_one_line_per_construct():
    lines = numpy_constructs_help().splitlines()
    assert len(lines) == 1 + len(NUMPY_CONSTRUCTS)


def test_readme_lists_every_construct():
    readme = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text()
    missing = [row[0] for row in NUMPY_CONSTRUCTS if f"`{_examples(row[0])[0]}`" not in readme]
    assert not missing, missing


def test_derive_help_shows_the_constructs():
    pytest.importorskip("IPython")
    from gradwright.notebook.magics import GradwrightMagics

    assert "max_weights(Z, axis=1)" in GradwrightMagics.derive.__doc__


def test_readme_table_rows_have_three_cells():
    readme = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text()
    for row in NUMPY_CONSTRUCTS:
        line = next(x for x in readme.splitlines() if x.startswith(f"| `{_examples(row[0])[0]}`"))
        assert line.count("|") == 4, line

"""The array-API runtime is kept in pieces (printing/xp_runtime*.py) and joined at export time:
the joined text must stand alone, and bind every name a piece takes from another."""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest

from gradwright.printing import array_api_code
from gradwright.printing.array_api_code import RUNTIME_PIECES, runtime_source

HERE = Path(array_api_code.__file__).parent


def _top_level_names(tree) -> set:
    names = set()
    for stmt in tree.body:
        if isinstance(stmt, (ast.FunctionDef, ast.ClassDef)):
            names.add(stmt.name)
        elif isinstance(stmt, ast.Assign):
            names |= {t.id for t in stmt.targets if isinstance(t, ast.Name)}
        elif isinstance(stmt, (ast.Import, ast.ImportFrom)) and getattr(stmt, "level", 0) == 0:
            names |= {(a.asname or a.name).split(".")[0] for a in stmt.names}
    return names


def test_every_piece_file_is_joined_and_only_those():
    on_disk = sorted(p.name for p in HERE.glob("xp_runtime*.py"))
    assert sorted(RUNTIME_PIECES) == on_disk


def test_a_piece_imports_only_from_earlier_pieces_names_they_define():
    defined: set = set()
    for i, name in enumerate(RUNTIME_PIECES):
        tree = ast.parse((HERE / name).read_text(encoding="utf-8"))
        for stmt in tree.body:
            if isinstance(stmt, ast.ImportFrom) and stmt.level:
                assert f"{stmt.module}.py" in RUNTIME_PIECES[:i], (name, stmt.module)
                for alias in stmt.names:
                    assert alias.asname is None, (name, alias.name)  # the join keeps one name
                    assert alias.name in defined, (name, alias.name)
        defined |= _top_level_names(tree)


def test_the_joined_runtime_stands_alone():
    text = runtime_source()
    tree = ast.parse(text)
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            assert node.level == 0 and not (node.module or "").startswith("gradwright")
        if isinstance(node, ast.Import):
            assert not any(a.name.startswith("gradwright") for a in node.names)
    # every piece's code is there once, in order
    starts = [text.index(f"\nclass {c}") for c in ("_GwLinalg", "_GwSpectral", "_GwXp")]
    assert starts == sorted(starts) and text.index("\ndef _gw_check(") > starts[-1]
    assert text.count("\nclass _GwXp(") == 1 and text.count("\ndef _gw_check(") == 1


def test_the_joined_runtime_runs_with_numpy_arrays():
    ns: dict = {}
    exec(compile(runtime_source(), "<joined runtime>", "exec"), ns)  # our own module text
    specs = (("A", np.ones((6, 2)), ("m*p", "p")), ("x", np.arange(3.0), ("m",)))
    (a, x), dims, xp = ns["_gw_check"](specs)
    assert dims == {"p": 2, "m": 3}
    # a method from each piece answers through the one namespace object
    s = np.array([[4.0, 1.0], [1.0, 3.0]])
    assert np.allclose(xp.gw_solve(s, np.ones(2), "S"), np.linalg.solve(s, np.ones(2)))
    assert np.allclose(xp.gw_eigvalsh(s, "S"), np.linalg.eigvalsh(s))
    assert np.allclose(
        xp.reshape_f(np.arange(6.0), (2, 3)), np.arange(6.0).reshape(2, 3, order="F")
    )
    with pytest.raises(ValueError, match="has 5 rows but m\\*p = 6"):
        ns["_gw_check"]((("A", np.ones((5, 2)), ("m*p", "p")), ("x", np.ones(3), ("m",))))


def test_a_singular_matrix_is_named_in_the_formulas_words():
    ns: dict = {}
    exec(compile(runtime_source(), "<joined runtime>", "exec"), ns)  # our own module text
    _, _, xp = ns["_gw_check"]((("A", np.ones((2, 2)), ("n", "n")),))
    with pytest.raises(np.linalg.LinAlgError, match="^A is singular: .* needs its inverse"):
        xp.gw_inv(np.ones((2, 2)), "A")
    with pytest.raises(np.linalg.LinAlgError, match="^A is singular: .* solves with it"):
        xp.gw_solve(np.ones((2, 2)), np.ones(2), "A.T")


def test_product_dims_have_one_source_in_both_checks():
    """The NumPy module's check and the array-API runtime's bind `m*n` dims with the same
    function text (printing/xp_runtime_dims.py), not two copies of the loop."""
    from gradwright import derive

    d = derive("X: (n, m*k)\nW: (m, k)\nf = sum(X**2) + sum(W**2)", wrt="W")
    for backend in ("numpy", "torch"):
        source = d.source(backend=backend)
        assert source.count("def _gw_bind_products(") == 1, backend
        assert source.count("def _gw_bind_axis(") == 1, backend
        assert "its declaration says" not in source.replace(
            source[source.index("def _gw_bind_axis(") :][:900], ""
        ), backend  # the literal-size message only in the shared function
        calls = [ln for ln in source.splitlines() if ln.strip().startswith("_gw_bind_products(")]
        assert len(calls) == 1, backend

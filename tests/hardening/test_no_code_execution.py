"""User text is never run: no eval/exec of it, generated code holds only our identifiers, and a
formula that reaches for Python's builtins is refused without touching the file system.
"""

from __future__ import annotations

import ast
import os
import re
from pathlib import Path

import pytest

import gradwright
from gradwright import FormulaError, derive
from gradwright.printing.numpy_code import HELPERS

SRC = Path(gradwright.__file__).parent

# the only places that compile text, each compiling source that our own printer wrote
ALLOWED_EXEC = {
    ("derivation.py", "exec"),
    ("derivation.py", "compile"),
    ("calculus/stationary.py", "exec"),
    ("calculus/stationary.py", "compile"),
    ("notebook/export.py", "exec"),
    ("notebook/export.py", "compile"),
    # the array-API module: the NumPy module's tree rewritten by printing/array_api_code.py
    ("backends.py", "exec"),
    ("backends.py", "compile"),
    # the function families: module names from the package's own directory, never user text
    ("language/vocabulary.py", "import_module"),
    # the packed block Hessian and the values of definitions: generated modules too
    ("calculus/hessian.py", "exec"),
    ("calculus/hessian.py", "compile"),
    ("fitting.py", "exec"),
    ("fitting.py", "compile"),
}
DANGEROUS_CALLS = {"eval", "exec", "compile", "__import__", "execfile", "import_module"}


def test_no_eval_or_exec_outside_the_generated_module_loader():
    found = set()
    for path in sorted(SRC.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        rel = path.relative_to(SRC).as_posix()
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                f = node.func
                name = f.id if isinstance(f, ast.Name) else getattr(f, "attr", None)
                if isinstance(f, ast.Attribute) and name == "compile":
                    continue  # re.compile: a pattern, not code
                if name in DANGEROUS_CALLS:
                    found.add((rel, name))
    assert found <= ALLOWED_EXEC, sorted(found - ALLOWED_EXEC)
    # and the text a grep sees agrees with the tree (no exec hidden in a string or a getattr)
    for path in sorted(SRC.rglob("*.py")):
        rel = path.relative_to(SRC).as_posix()
        for line in path.read_text(encoding="utf-8").splitlines():
            code = line.split("#", 1)[0]
            if re.search(r"\b(eval|exec)\s*\(", code):
                assert (rel, "exec") in ALLOWED_EXEC, (rel, line)
            assert "getattr(builtins" not in code, (rel, line)


def test_every_exec_compiles_generated_source():
    """Each allowed exec call compiles `self.source()` or a `source` variable, not user text."""
    for rel in {r for r, _ in ALLOWED_EXEC}:
        tree = ast.parse((SRC / rel).read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and getattr(node.func, "id", None) == "exec":
                compiled = node.args[0]
                assert isinstance(compiled, ast.Call) and compiled.func.id == "compile", rel
                text = ast.unparse(compiled.args[0])
                assert text in ("self.source()", "source"), (rel, text)


# --- the generated module --------------------------------------------------------------------

BLOCKS = [
    ("S: (n, n) spd\nX: (n, k)\nloss = logdet(S) + trace(X.T @ solve(S, X))", ["S", "X"]),
    ("A: (n, n)\nx: (n,)\nf = x @ inv(A) @ x + logdet(A) + det(A)", ["A", "x"]),
    ("W: (k, n)\nx: (n,)\ny: (k,)\np = softmax(W @ x)\nf = -y @ log(p) + logsumexp(W @ x)", ["W"]),
    ("A: (m, n)\nB: (p, q)\nF = kron(A, B)", ["A"]),
    ("X: (m, n)\nF = X @ X.T", ["X"]),
    ("x: (n,)\nF = (diagm(x) @ ones(n, n)) @ sigmoid(x) * x", ["x"]),
    (
        "X: (m, n)\nR = X.T @ X\n"
        "f = vec(X) @ commutation(m, n) @ vec(X) + sum(mpow(R, 3)) + norm(X) + sum(diag(R))",
        ["X"],
    ),
    (
        "U: (s, r)\nV: (w, r)\nP: (s, w)\nmu: ()\nR = P - U @ V.T\n"
        "loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))",
        ["U", "V"],
    ),  # fmt: skip
    (
        "x: (n,) positive\nc: ()\nf = sum(sqrt(x) * tanh(x) + softplus(x) / c) + cos(c) * sin(c)",
        ["x", "c"],
    ),  # fmt: skip
]

MODULE_NAMES = {"np", "warnings", "cmath"}
# names the generator uses inside functions besides `_`-prefixed ones (which no user name can
# be, the parser refuses them)
GENERATOR_LOCALS = {"_dims", "_direction", "_cotangent"}
# the parser refuses user names starting with '_', so every such name is the generator's own
GENERATOR_LOCAL_RE = re.compile(r"^(_[A-Za-z]\w*|grad_\w+)$")
ALLOWED_BUILTINS = {
    *("range", "float", "type", "min", "AttributeError", "LookupError"),
    *("dict", "isinstance"),  # the slow path's router call and the scalar return
}
ARRAY_ATTRIBUTES = {"T", "reshape", "shape", "dtype"}  # shape and dtype: the fast check
IMPORTS = {
    "import cmath",
    "import warnings",
    "import numpy as np",
}


def _np_rooted(node) -> bool:
    while isinstance(node, ast.Attribute):
        node = node.value
    return isinstance(node, ast.Name) and node.id == "np"


@pytest.mark.parametrize(("block", "wrt"), BLOCKS, ids=[f"block{i}" for i in range(len(BLOCKS))])
def test_generated_source_uses_only_known_identifiers(block, wrt):
    d = derive(block, wrt=wrt)
    tree = ast.parse(d.source())
    body = tree.body
    assert isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant)
    user_names = set(d.symbols)
    functions = {f.name for f in body if isinstance(f, (ast.FunctionDef, ast.ClassDef))}
    helpers = {f for f in functions if f.startswith("_gw_")}
    # a helper's text may define more than its name (the check's router and marker class)
    defined = {
        h: {s.name for s in ast.parse(text).body if isinstance(s, (ast.FunctionDef, ast.ClassDef))}
        for h, text in HELPERS.items()
    }
    assigned = {t.id for st in body if isinstance(st, ast.Assign) for t in st.targets
                if isinstance(t, ast.Name)}  # fmt: skip
    used = {h for h in HELPERS if defined[h] & helpers or h in assigned}  # a helper may be a value
    assert helpers <= set().union(*(defined[h] for h in used))
    # every statement of the helpers' own text, verbatim (a helper may hold a class too)
    helper_text = {ast.dump(s) for h in used for s in ast.parse(HELPERS[h]).body}
    allowed = user_names | MODULE_NAMES | functions | GENERATOR_LOCALS | ALLOWED_BUILTINS
    for stmt in body[1:]:
        if isinstance(stmt, (ast.Import, ast.ImportFrom)):
            assert ast.unparse(stmt) in IMPORTS
            continue
        if isinstance(stmt, ast.Assign) and ast.dump(stmt) in helper_text:
            continue  # a helper's own module-level state, verbatim
        if isinstance(stmt, ast.Assign) and ast.unparse(stmt.value) == "[(None, None)]":
            (target,) = stmt.targets  # the fast-path memory of one function's argument check
            assert isinstance(target, ast.Name) and target.id.startswith("_gw_last_")
            assert target.id[len("_gw_last_") :] in functions
            continue
        if isinstance(stmt, ast.Assign):  # a table of the generated functions, by name
            (target,) = stmt.targets
            assert isinstance(target, ast.Name) and target.id.startswith("_gw_")
            assert isinstance(stmt.value, ast.Dict), ast.unparse(stmt)[:200]
            for key, value in zip(stmt.value.keys, stmt.value.values):
                assert isinstance(key, ast.Constant) and isinstance(value, ast.Name)
                assert key.value == value.id and value.id in functions
            continue
        if isinstance(stmt, ast.ClassDef) or stmt.name.startswith("_gw_"):
            assert ast.dump(stmt) in helper_text, ast.unparse(stmt)[:200]
            continue
        assert isinstance(stmt, ast.FunctionDef), ast.unparse(stmt)[:200]
        assert not stmt.decorator_list
        for node in ast.walk(stmt):
            if isinstance(node, ast.arg):
                assert node.arg in user_names | {"_direction", "_cotangent", "_gw_pos"}, node.arg
            elif isinstance(node, ast.Name):
                ok = node.id in allowed or GENERATOR_LOCAL_RE.match(node.id)
                assert ok, f"{stmt.name}: unexpected name {node.id}"
            elif isinstance(node, ast.Attribute):
                assert not node.attr.startswith("_"), node.attr
                ok = _np_rooted(node) or node.attr in ARRAY_ATTRIBUTES
                assert ok or ast.unparse(node) == "cmath.isfinite", ast.unparse(node)
            elif isinstance(node, (ast.Import, ast.ImportFrom, ast.Global, ast.Nonlocal,
                                   ast.Lambda, ast.ClassDef, ast.Delete)):  # fmt: skip
                pytest.fail(f"{stmt.name}: unexpected {type(node).__name__}")
            elif isinstance(node, ast.Call):
                f = node.func
                if isinstance(f, ast.Subscript):  # a table of our functions: _table["name"]
                    assert isinstance(f.value, ast.Name), ast.unparse(node)
                    assert GENERATOR_LOCAL_RE.match(f.value.id), ast.unparse(node)
                    assert isinstance(f.slice, ast.Constant) and f.slice.value in functions
                else:
                    assert isinstance(f, (ast.Name, ast.Attribute)), ast.unparse(node)


HOSTILE_COMMENTS = [
    '# """; import os; os.system("touch CANARY"); """',
    "# '''; import os; '''",
    '# ""\\"\\"\\" end',
    '# """"""""',
    '# ends with a quote"',
    "# ends with a backslash \\",
]


@pytest.mark.parametrize("comment", HOSTILE_COMMENTS)
def test_comments_stay_inside_the_module_docstring(comment, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    d = derive(f"A: (n, n)  {comment}\nf = trace(A)  {comment}\n{comment}", wrt="A")
    tree = ast.parse(d.source())
    assert not any(isinstance(n, ast.Import) and n.names[0].name == "os" for n in ast.walk(tree))
    assert d.gradient_function()(A=[[1.0]]).tolist() == [[1.0]]
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("comment", ["# C:\\new\\x1", "# \\N", "# \\u00"])
def test_backslash_escapes_in_comments_do_not_break_the_module(comment):
    d = derive(f"A: (n, n)\nf = trace(A)  {comment}", wrt="A")
    assert d.gradient_function()(A=[[1.0]]).tolist() == [[1.0]]


# --- hostile formulas ------------------------------------------------------------------------

CANARY = "gw_canary_file"

HOSTILE = [
    f"__import__('os').system('touch {CANARY}')",
    f"open('{CANARY}', 'w')",
    f"open('{CANARY}', 'w').write('x')",
    "eval('1')",
    f"exec(\"open('{CANARY}', 'w')\")",
    f"compile('open(\"{CANARY}\", \"w\")', 'f', 'exec')",
    "getattr(A, 'T')",
    "getattr(__builtins__, 'open')",
    "A.__class__.__bases__",
    "A.__class__.__base__.__subclasses__()",
    "().__class__.__bases__[0].__subclasses__()",
    "[].__class__",
    "A.T.__dict__",
    "trace(A).__globals__",
    "os",
    "sys",
    "exec",
    "breakpoint()",
    "input()",
    "globals()",
    "vars()",
    "__builtins__",
    "__loader__",
    f"(lambda: open('{CANARY}', 'w'))()",
    f"[open('{CANARY}', 'w') for q in A]",
    f'f\'{{open("{CANARY}", "w")}}\'',
    f"np.save('{CANARY}', A)",
    f"numpy.save('{CANARY}', A)",
    "np.__loader__",
    f"trace(A) if open('{CANARY}', 'w') else 0",
    f"trace(A) + (q := open('{CANARY}', 'w'))",
    f"sum(A, start=open('{CANARY}', 'w'))",
    f"trace(*open('{CANARY}', 'w'))",
    f"trace(A)[open('{CANARY}', 'w')]",
]

HOSTILE_BLOCKS = [
    f"import os\nA: (n, n)\nf = trace(A)\nos.system('touch {CANARY}')",
    f"A: (n, n)\nf = trace(A); __import__('os').system('touch {CANARY}')",
    f"A: (n, n)\n@open('{CANARY}', 'w')\ndef g(): pass\nf = trace(A)",
    f"A: (n, n)\nwith open('{CANARY}', 'w') as h:\n    pass\nf = trace(A)",
    f"A: (n, n)\nclass K:\n    q = open('{CANARY}', 'w')\nf = trace(A)",
    f"A: (n, n) = open('{CANARY}', 'w')\nf = trace(A)",
    f"A: (open('{CANARY}', 'w'), n)\nf = trace(A)",
    f"A: (n, n)\nf: open('{CANARY}', 'w')\nf = trace(A)",
    f"A: (n, n)\nf = trace(A)\ndel A\nopen('{CANARY}', 'w')",
    "open: (n, n)\nf = trace(open)",
    "np: (n, n)\nf = trace(np)",
    "cho_solve: (n, n)\nf = trace(cho_solve)",
    f"A: (n, n)\nf = trace(A)  \\\n; open('{CANARY}', 'w')",
]


@pytest.fixture
def quiet_cwd(tmp_path, monkeypatch):
    """A fresh working directory; the test checks that it is still empty afterwards."""
    monkeypatch.chdir(tmp_path)
    outside = Path("/tmp") / f"{CANARY}_{os.getpid()}"
    before = sorted(os.listdir(tmp_path))
    yield tmp_path
    assert sorted(os.listdir(tmp_path)) == before == []
    assert not (tmp_path / CANARY).exists() and not outside.exists()


@pytest.mark.parametrize("formula", HOSTILE, ids=[f"expr{i}" for i in range(len(HOSTILE))])
def test_hostile_formula_is_refused_without_side_effects(formula, quiet_cwd):
    with pytest.raises(FormulaError) as info:
        derive(f"A: (n, n)\nf = {formula}", wrt="A")
    assert info.value.reason and info.value.line == 2
    with pytest.raises(FormulaError):  # the one-expression form too
        derive(formula, wrt="A", shapes={"A": ("n", "n")})


@pytest.mark.parametrize(
    "block", HOSTILE_BLOCKS, ids=[f"block{i}" for i in range(len(HOSTILE_BLOCKS))]
)
def test_hostile_block_is_refused_without_side_effects(block, quiet_cwd):
    with pytest.raises(FormulaError) as info:
        derive(block, wrt="A")
    assert info.value.reason


def test_accepted_block_runs_nothing_but_numpy(quiet_cwd):
    """A valid block whose names look dangerous still only computes."""
    d = derive("os: (n,)\nsystem: (n,)\nf = sum(os * system)", wrt="os")
    assert d.gradient_function()(os=[1.0, 2.0], system=[3.0, 4.0]).tolist() == [3.0, 4.0]


# --- user names never collide with the generator's own names --------------------------------

# names the generated functions once used for locals of their own (outputs, loop counters),
# and the names of the generated functions themselves
USER_NAMES = ["value", "k", "e", "col", "jac", "hess", "n_in", "n_out", "jvp", "vjp", "hvp",
              "grad_x", "gradient_x", "hessian_x", "jvp_x", "value_and_gradient", "x2"]  # fmt: skip


@pytest.mark.parametrize("name", USER_NAMES)
def test_user_names_do_not_collide_with_generated_names(name):
    import numpy as np

    x = np.array([1.0, 2.0, 3.0])
    w = np.array([0.5, -1.0, 2.0])
    d = derive(f"x: (n,)\n{name}: (n,)\nf = sum({name} * x**2)", wrt="x")
    arrays = {"x": x, name: w}
    np.testing.assert_allclose(d.gradient_function()(**arrays), 2 * w * x)
    np.testing.assert_allclose(d.value_and_gradient_function()(**arrays)[1], 2 * w * x)
    np.testing.assert_allclose(d.hessian_function("x")(**arrays), np.diag(2 * w))
    np.testing.assert_allclose(d.jacobian_function("x")(**arrays), [2 * w * x])
    # the same name as a definition, used by both the value and the gradient
    d2 = derive(f"x: (n,)\n{name} = x * 3\nf = sum({name} * x) + sum(exp({name}))", wrt="x")
    want = 6 * x + 3 * np.exp(3 * x)
    np.testing.assert_allclose(d2.gradient_function()(x=x), want)
    np.testing.assert_allclose(d2.value_and_gradient_function()(x=x)[1], want)
    np.testing.assert_allclose(d2.hessian_function("x")(x=x), np.diag(6 + 9 * np.exp(3 * x)))
    d3 = derive(f"X: (m, p)\n{name}: (m, p)\nF = X * {name}", wrt="X")
    m = np.arange(6.0).reshape(2, 3)
    jac = d3.jacobian_function("X")(X=np.ones((2, 3)), **{name: m})
    np.testing.assert_allclose(jac, np.diag(m.ravel(order="F")))


@pytest.mark.parametrize("name", ["np", "numpy", "scipy", "warnings", "cho_factor", "cho_solve"])
def test_names_the_generated_module_imports_are_refused(name):
    with pytest.raises(FormulaError, match="reserved"):
        derive(f"{name}: (n, n)\nf = trace({name})", wrt=name)


LEGAL_BUT_ALARMING = ["os", "sys", "self", "cls", "system", "subprocess", "shutil", "pathlib",
                      "importlib", "exec_", "eval_", "lambda_", "None_", "builtins_", "kwargs",
                      "args", "dims", "specs", "owner", "label"]  # fmt: skip


@pytest.mark.parametrize("name", LEGAL_BUT_ALARMING)
def test_alarming_but_legal_names_only_compute(name, quiet_cwd):
    import numpy as np

    block = f"{name}: (n, n) spd\nx: (n,)\nf = x @ solve({name}, x) + logdet({name})"
    d = derive(block, wrt=[name, "x"])
    test_generated_source_uses_only_known_identifiers(block, [name, "x"])
    s = np.array([[2.0, 0.5], [0.5, 1.0]])
    x = np.array([1.0, -1.0])
    g_s, g_x = d.gradient_function()(**{name: s, "x": x})
    inv = np.linalg.inv(s)
    np.testing.assert_allclose(g_x, 2 * inv @ x)
    full = -inv @ np.outer(x, x) @ inv + inv
    np.testing.assert_allclose(g_s, (full + full.T) / 2)

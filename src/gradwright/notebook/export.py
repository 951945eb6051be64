"""Standalone notebook export of a derivation: block, derivation as Markdown math, the generated
NumPy source (runs without gradwright) and a finite-difference check cell. Deterministic bytes.
"""

from __future__ import annotations

import ast
import json
from pathlib import Path

__all__ = ["notebook_node", "notebook_text", "write_notebook"]

NBFORMAT = 4
NBFORMAT_MINOR = 5
DEFAULT_SIZES = (4, 3, 5, 2, 6, 7)


def _markdown_math(derivation) -> str:
    from .render import derivation_bundle

    latex = derivation_bundle(derivation, "steps")["text/latex"].strip()
    if not latex.startswith("$$"):
        latex = f"$$\n{latex}\n$$"
    return latex


def _shape_markdown(derivation) -> str:
    from .render import dim_origins, shape_rows

    lines = ["| symbol | shape | structure | role |", "|---|---|---|---|"]
    for row in shape_rows(derivation):
        cells = [row["symbol"], row["shape"], row["structure"] or "–", row["role"]]
        lines.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    dims = dim_origins(derivation)
    if dims:
        lines.append("")
        lines.append("Dims: " + "; ".join(f"`{d}` from {w}" for d, w in dims) + ".")
    return "\n".join(lines)


def _functions_in(source: str) -> dict:
    """Top-level function name -> its parameter names, read from the generated module."""
    tree = ast.parse(source)
    out = {}
    for node in tree.body:
        if isinstance(node, ast.FunctionDef):
            params = [a.arg for a in node.args.posonlyargs + node.args.args + node.args.kwonlyargs]
            out[node.name] = params
    return out


def source_roles(derivation, source: str) -> dict:
    """Which function of the generated source computes what: {"value": name, "gradient": {var:
    name}, "jvp": {var: name}}. Found by name, checked by calling it against the derivation."""
    import numpy as np

    functions = _functions_in(source)
    # The generated module's own names (value, gradient_X, jvp_X), when it has them.
    named = {
        "value": "value",
        "gradient": {v: f"gradient_{v}" for v in derivation.variables},
        "jvp": {v: f"jvp_{v}" for v in derivation.variables},
    }
    wanted = ["value"] + [
        named["gradient" if derivation.is_scalar else "jvp"][v] for v in derivation.variables
    ]
    if all(name in functions for name in wanted):
        return named
    namespace: dict = {}
    exec(compile(source, "<gradwright generated>", "exec"), namespace)  # our own generated code
    inputs = derivation.sample_inputs(seed=1)
    args = {a: inputs[a] for a in derivation.arguments()}
    value = np.asarray(derivation.function()(**args))

    def calls(name, extra=None):
        params = functions[name]
        try:
            call_args = dict(args)
            if extra is not None:
                call_args = {params[0]: extra, **args}
            got = namespace[name](**{k: v for k, v in call_args.items() if k in params})
            return got
        except Exception:
            return None

    def same(a, b):
        try:
            return np.shape(a) == np.shape(b) and np.allclose(a, b, rtol=1e-9, atol=1e-12)
        except (TypeError, ValueError):
            return False

    roles: dict = {"value": None, "gradient": {}, "jvp": {}}
    for name in functions:
        if not set(derivation.arguments()) <= set(functions[name]):
            continue
        if roles["value"] is None and same(calls(name), value):
            roles["value"] = name
    for var in derivation.variables:
        if derivation.is_scalar:
            expected = derivation.gradient_function(var)(**args)
            for name in functions:
                got = calls(name)
                if isinstance(got, tuple):
                    continue
                if name != roles["value"] and same(got, expected):
                    roles["gradient"][var] = name
                    break
        else:
            direction = np.ones(np.shape(args[var]))
            expected = derivation.jvp_function(var)(direction, **args)
            for name in functions:
                params = functions[name]
                if len(params) != len(derivation.arguments()) + 1:
                    continue
                if same(calls(name, direction), expected):
                    roles["jvp"][var] = name
                    break
    return roles


def _draw_code(derivation, sizes: dict) -> list[str]:
    lines = [f"sizes = {json.dumps(sizes, sort_keys=True)}"]
    lines.append("inputs = {")
    for name in derivation.arguments():
        info = derivation.symbols[name]
        shape = ", ".join(
            f"sizes[{json.dumps(str(d))}]" if not str(d).isdigit() else str(d) for d in info.shape
        )
        shape = f"({shape},)" if len(info.shape) == 1 else f"({shape})"
        lines.append(f"    {json.dumps(name)}: draw({shape}, {tuple(info.structure)!r}),")
    lines.append("}")
    return lines


_DRAW = '''def draw(shape, structure=()):
    """Random array of `shape` honouring the structure words of the block."""
    a = rng.standard_normal(shape)
    if "spd" in structure:
        return a @ a.T + shape[0] * np.eye(shape[0])
    if "symmetric" in structure:
        return (a + a.T) / 2
    if "diagonal" in structure:
        return np.diag(np.diag(a))
    if "orthogonal" in structure:
        return np.linalg.qr(a)[0]
    if "positive" in structure:
        return np.exp(a / 2)
    return a if a.ndim else float(a)


def direction(x, structure=()):
    v = rng.standard_normal(np.shape(x))
    if "spd" in structure or "symmetric" in structure:
        return (v + v.T) / 2
    if "diagonal" in structure:
        return np.diag(np.diag(v))
    if "orthogonal" in structure:
        return x @ ((v - v.T) / 2)
    return v
'''


def _check_code(derivation, roles: dict) -> str:
    sizes = {
        str(d): DEFAULT_SIZES[i % len(DEFAULT_SIZES)]
        for i, d in enumerate(d for d in derivation.dims if not str(d).isdigit())
    }
    value = roles["value"]
    lines = [
        "# Finite-difference check of the generated derivative: central differences with the",
        "# step h = eps**(1/3) * max(1, rms x) (Nocedal and Wright, Numerical Optimization,",
        "# 2nd ed., section 8.1, from memory), along random directions honouring each",
        "# variable's structure.",
        "import numpy as np",
        "",
        "rng = np.random.default_rng(0)",
        "",
        _DRAW,
        *_draw_code(derivation, sizes),
        "",
        "",
        "def moved(var, step):",
        "    point = dict(inputs)",
        "    point[var] = inputs[var] + step",
        "    return point",
        "",
        "",
        "worst = 0.0",
    ]
    for var in derivation.variables:
        structure = tuple(derivation.symbols[var].structure)
        lines += [
            f"x = np.asarray(inputs[{var!r}], dtype=float)",
            "h = np.finfo(float).eps ** (1 / 3) * max(1.0, float(np.sqrt(np.mean(x**2))))",
            "for _ in range(3):",
            f"    v = direction(x, {structure!r})",
            f"    fd = (np.asarray({value}(**moved({var!r}, h * v)))"
            f" - np.asarray({value}(**moved({var!r}, -h * v)))) / (2 * h)",
        ]
        if derivation.is_scalar:
            lines += [
                f"    g = {roles['gradient'][var]}(**inputs)",
                "    exact = np.sum(g * v)",
                "    rel = abs(exact - fd) / max(np.sum(np.abs(g * v)), abs(fd), 1e-300)",
            ]
        else:
            lines += [
                f"    exact = np.asarray({roles['jvp'][var]}(v, **inputs))",
                "    rel = np.max(np.abs(exact - fd)) / max(np.max(np.abs(exact)), 1e-300)",
            ]
        lines += [
            f"    print({var!r}, 'relative error', f'{{rel:.2e}}')",
            "    worst = max(worst, rel)",
        ]
    lines += [
        "",
        'print("PASS" if worst < 1e-6 else "FAIL", f"largest relative error {worst:.2e}")',
        'assert worst < 1e-6, "the generated derivative disagrees with finite differences"',
    ]
    return "\n".join(lines)


def notebook_node(derivation):
    """The export as an `nbformat` v4 notebook node, with fixed cell ids."""
    import nbformat
    from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

    source = derivation.source()
    roles = source_roles(derivation, source)
    variables = ", ".join(f"`{v}`" for v in derivation.variables)
    kind = "gradient" if derivation.is_scalar else "Jacobian"
    cells = [
        new_markdown_cell(
            f"# The {kind} of `{derivation.target}` with respect to {variables}\n\n"
            "Exported by gradwright. The block, as written:\n\n"
            f"```python\n{derivation.text.strip()}\n```"
        ),
        new_markdown_cell("## Derivation\n\n" + _markdown_math(derivation)),
        new_markdown_cell("## Shapes\n\n" + _shape_markdown(derivation)),
        new_markdown_cell(
            "## Generated NumPy code\n\nPlain NumPy (and SciPy where it has the better kernel); "
            "it runs without gradwright installed."
        ),
        new_code_cell(source.rstrip() + "\n"),
        new_markdown_cell("## Check against finite differences"),
        new_code_cell(_check_code(derivation, roles)),
    ]
    for i, cell in enumerate(cells, start=1):
        cell.id = f"gradwright-{i:02d}"
    nb = new_notebook(cells=cells)
    nb.nbformat, nb.nbformat_minor = NBFORMAT, NBFORMAT_MINOR
    nb.metadata = nbformat.from_dict(
        {
            "kernelspec": {
                "display_name": "Python 3 (ipykernel)",
                "language": "python",
                "name": "python3",
            },
            "language_info": {"name": "python"},
        }
    )
    return nb


def notebook_text(derivation) -> str:
    """The export as text: same derivation, same characters (sorted keys, no timestamps)."""
    import nbformat

    text = nbformat.writes(notebook_node(derivation), version=NBFORMAT)
    return text if text.endswith("\n") else text + "\n"


def write_notebook(derivation, path) -> Path:
    """Write the standalone notebook for `derivation` to `path` (nbformat v4); returns the path.

    >>> from gradwright import derive                              # doctest: +SKIP
    >>> write_notebook(derive("X: (n, n)\\nf = trace(X @ X)", wrt="X"), "f.ipynb")  # doctest: +SKIP
    PosixPath('f.ipynb')
    """
    path = Path(path)
    data = notebook_text(derivation).encode("utf-8")
    path.write_bytes(data)
    return path

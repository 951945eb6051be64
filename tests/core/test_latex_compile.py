"""LaTeX that compiles: `to_latex()` and the math of the exported notebook, for every reference
case, run through a real TeX engine (pdflatex from Debian's TeX Live, installed by
scripts/install-tex.sh; `-halt-on-error`, so any error fails the run).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess

import pytest
from core_cases import GRADIENT_CASES, JACOBIAN_CASES

from gradwright import derive

CASES = [c for c in GRADIENT_CASES + JACOBIAN_CASES if not c.xfail]
PREAMBLE = (
    "\\documentclass{article}\n\\usepackage[a4paper,margin=1.5cm]{geometry}\n"
    "\\usepackage{amsmath,amssymb,xcolor}\n\\begin{document}\n"
)


def _pdflatex() -> str:
    path = shutil.which("pdflatex")
    if path is None:
        if os.environ.get("GRADWRIGHT_REQUIRE_TEX") == "1":
            pytest.fail("pdflatex is missing: run scripts/install-tex.sh")
        pytest.skip("pdflatex is missing (scripts/install-tex.sh installs it)")
    return path


def _compile(body: str, workdir, name: str) -> tuple[bool, str]:
    tex = workdir / f"{name}.tex"
    tex.write_text(PREAMBLE + body + "\n\\end{document}\n", encoding="utf-8")
    run = subprocess.run(
        [_pdflatex(), "-halt-on-error", "-interaction=nonstopmode", "-no-shell-escape", tex.name],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=300,
    )
    log = run.stdout[-3000:]
    return run.returncode == 0 and (workdir / f"{name}.pdf").exists(), log


def _compile_all(pieces: dict, workdir, name: str) -> None:
    """One run for everything; on failure, find the pieces that break it."""
    body = "\n\n".join(f"% {key}\n{text}\n\\clearpage" for key, text in pieces.items())
    ok, log = _compile(body, workdir, name)
    if ok:
        return
    broken = []
    for i, (key, text) in enumerate(pieces.items()):
        good, one_log = _compile(text, workdir, f"{name}-{i}")
        if not good:
            broken.append(f"{key}:\n{one_log[-1200:]}")
        if len(broken) == 3:
            break
    pytest.fail("pdflatex failed on:\n" + "\n\n".join(broken or [log]))


def test_to_latex_compiles_for_every_reference_case(tmp_path):
    _pdflatex()
    pieces = {c.id: derive(c.block, wrt=list(c.wrt)).to_latex() for c in CASES}
    _compile_all(pieces, tmp_path, "to-latex")


def _notebook_math(markdown: str) -> list[str]:
    return re.findall(r"\$\$.*?\$\$", markdown, flags=re.S)


def test_exported_notebook_math_compiles_for_every_reference_case(tmp_path):
    _pdflatex()
    from gradwright.notebook.export import _markdown_math

    pieces = {c.id: _markdown_math(derive(c.block, wrt=list(c.wrt))) for c in CASES}
    _compile_all(pieces, tmp_path, "notebook-math")


def test_a_whole_exported_notebook_compiles(tmp_path):
    """The math of real exported files (every markdown cell), not only the helper's output."""
    _pdflatex()
    import nbformat

    pieces = {}
    for case in (GRADIENT_CASES[0], JACOBIAN_CASES[0]):
        path = tmp_path / f"{case.id}.ipynb"
        derive(case.block, wrt=list(case.wrt)).to_notebook(path)
        nb = nbformat.read(path, as_version=4)
        for i, cell in enumerate(nb.cells):
            if cell.cell_type == "markdown":
                for j, math in enumerate(_notebook_math(cell.source)):
                    pieces[f"{case.id} cell {i} math {j}"] = math
    assert pieces, "the exported notebooks have math"
    _compile_all(pieces, tmp_path, "exported")


def test_the_compile_check_catches_a_formula_inside_text(tmp_path):
    """The old rule labels: `tr(A^T)` inside `\\text{}` is a TeX error, so the check can fail."""
    _pdflatex()
    ok, _ = _compile(r"\[ x \quad \text{tr(A) = tr(A^T)} \]", tmp_path, "bad")
    assert not ok


#: models of our own whose to_latex() ran off an A4 page (up to 333 pt too wide: rules written
#: on one line beside 36 em of math) or did not compile once the math broke inside a \frac
PAGE_BLOCKS = {
    "kalman-update": (
        "F: (m, m)\nP: (m, m) spd\nQ: (m, m) spd\nH: (q, m)\nR: (q, q) spd\n"
        "Pp = F @ P @ F.T + Q\nSg = H @ Pp @ H.T + R\nK = Pp @ H.T @ inv(Sg)\n"
        "Pn = Pp - K @ H @ Pp\nJ = trace(Pn)",
        ["P"],
    ),
    "two-layer-mean-square": (
        "X: (n, d)\nY: (n, o)\nW1: (d, h)\nb1: (h,)\nW2: (h, o)\nH = tanh(X @ W1 + b1)\n"
        "loss = mean((H @ W2 - Y)**2)",
        ["W1", "b1", "W2"],
    ),
    "softmax-classifier": (
        "X: (n, p)\nY: (n, k)\nW: (p, k)\nc: (k,)\nZ = X @ W + c\n"
        "loss = -sum(Y * log_softmax(Z, axis=1)) / n + 0.01 * sum(W**2)",
        ["W", "c"],
    ),
}
#: pdflatex's tolerance for a line's overhang into the margin, in points (common practice: a
#: few points are invisible; the page's text width here is 512 pt)
OVERHANG_PT = 20.0


@pytest.mark.parametrize("name", list(PAGE_BLOCKS))
def test_to_latex_fits_the_page(tmp_path, name):
    _pdflatex()
    block, wrt = PAGE_BLOCKS[name]
    d = derive(block, wrt=wrt)
    body = d.to_latex() + "\n\\[\n" + d.second_derivative(wrt[0], wrt[-1]).latex() + "\n\\]\n"
    ok, log = _compile(body, tmp_path, name)
    assert ok, log
    text = (tmp_path / f"{name}.log").read_text(errors="replace")
    over = [float(x) for x in re.findall(r"Overfull \\hbox \(([0-9.]+)pt too wide\)", text)]
    assert max(over, default=0.0) <= OVERHANG_PT, over

"""Notebook export: deterministic bytes, valid nbformat v4, runs in a kernel and without gradwright."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import nbformat
import pytest
from nbhelpers import ARM, COVARIANCE, DEMAND

from gradwright import derive
from gradwright.notebook.export import write_notebook

CASES = [(DEMAND, ["U", "V"]), (COVARIANCE, ["S"]), (ARM, ["W1", "W2"])]
IDS = ["factorization", "spd-logdet", "array-target"]

# Refuses `import gradwright`, as on a machine where it is not installed.
BLOCK_GRADWRIGHT = textwrap.dedent(
    """\
    import sys

    class _NotInstalled:
        def find_spec(self, name, path=None, target=None):
            if name == "gradwright" or name.startswith("gradwright."):
                raise ModuleNotFoundError(f"No module named {name!r}")
            return None

    sys.meta_path.insert(0, _NotInstalled())
    """
)


@pytest.mark.parametrize("block, wrt", CASES, ids=IDS)
def test_same_input_same_bytes(tmp_path, block, wrt):
    first = write_notebook(derive(block, wrt=wrt), tmp_path / "a.ipynb")
    second = write_notebook(derive(block, wrt=wrt), tmp_path / "b.ipynb")
    assert first.read_bytes() == second.read_bytes()
    nb = nbformat.read(first, as_version=4)
    nbformat.validate(nb)
    assert nb.nbformat == 4
    assert [c.id for c in nb.cells] == [f"gradwright-{i:02d}" for i in range(1, len(nb.cells) + 1)]
    text = first.read_text()
    assert "execution_count" in text and '"outputs": []' in text
    markdown = "\n".join(c.source for c in nb.cells if c.cell_type == "markdown")
    assert "$$" in markdown and "\\begin{aligned}" in markdown and "| symbol |" in markdown
    assert block.strip().splitlines()[0] in markdown


def test_to_notebook_is_the_same_export(tmp_path):
    d = derive(COVARIANCE, wrt="S")
    d.to_notebook(tmp_path / "via_api.ipynb")
    write_notebook(d, tmp_path / "direct.ipynb")
    assert (tmp_path / "via_api.ipynb").read_bytes() == (tmp_path / "direct.ipynb").read_bytes()


@pytest.mark.parametrize("block, wrt", CASES, ids=IDS)
def test_code_cells_run_without_gradwright(tmp_path, block, wrt):
    path = write_notebook(derive(block, wrt=wrt), tmp_path / "export.ipynb")
    nb = nbformat.read(path, as_version=4)
    code = "\n\n".join(c.source for c in nb.cells if c.cell_type == "code")
    assert "gradwright" not in "\n".join(
        line for line in code.splitlines() if line.lstrip().startswith(("import", "from"))
    )
    script = tmp_path / "run_export.py"
    script.write_text(BLOCK_GRADWRIGHT + "\n" + code + "\n")
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME")}
    done = subprocess.run(
        [sys.executable, "-I", str(script)],
        cwd=tmp_path,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr[-2000:]
    assert "PASS" in done.stdout


def test_export_executes_in_a_kernel(tmp_path):
    from nbclient import NotebookClient

    path = write_notebook(derive(DEMAND, wrt=["U", "V"]), tmp_path / "export.ipynb")
    nb = nbformat.read(path, as_version=4)
    NotebookClient(
        nb, kernel_name="python3", timeout=120, resources={"metadata": {"path": str(tmp_path)}}
    ).execute()
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    assert any("PASS" in o.get("text", "") for o in outputs)

"""Open the demo notebooks in JupyterLab, from a working copy.

    python notebooks_demo/open_demos.py [--fresh] [--no-lab]

JupyterLab saves a notebook as it runs (outputs, execution counts, widget state), so running the
tracked notebooks themselves would leave them modified in git. This copies them into
`notebooks_demo/run/` (ignored by git; copies already there are kept, with your edits, unless
`--fresh`) and starts JupyterLab there. `--no-lab` only makes the copies.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
RUN = HERE / "run"


def copy_demos(fresh: bool = False) -> list[Path]:
    """The working copies of the tracked demo notebooks (made where missing, or all if fresh)."""
    RUN.mkdir(exist_ok=True)
    out = []
    for nb in sorted(HERE.glob("*.ipynb")):
        target = RUN / nb.name
        if fresh or not target.exists():
            shutil.copyfile(nb, target)
        out.append(target)
    return out


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--fresh", action="store_true", help="copy the tracked notebooks again")
    p.add_argument("--no-lab", action="store_true", help="make the copies, do not start JupyterLab")
    args = p.parse_args(argv)
    copies = copy_demos(args.fresh)
    print(f"{len(copies)} demo notebooks in {RUN}")
    if args.no_lab:
        return 0
    os.execv(sys.executable, [sys.executable, "-m", "jupyter", "lab", str(RUN)])
    return 0  # pragma: no cover - execv does not return


if __name__ == "__main__":
    raise SystemExit(main())

"""tests/backends: put tests/ (checks.py) and tests/core (core_cases.py) on the import path."""

import sys
from pathlib import Path

for _p in (Path(__file__).parents[1], Path(__file__).parents[1] / "core"):
    if str(_p) not in sys.path:
        sys.path.insert(0, str(_p))

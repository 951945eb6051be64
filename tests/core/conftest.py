"""tests/core: put tests/ (checks.py, strategies.py) and this folder on the import path."""

import sys
from pathlib import Path

for _p in (Path(__file__).parent, Path(__file__).parents[1]):
    if str(_p) not in sys.path:
        sys.path.insert(0, str(_p))

import sys
from pathlib import Path

# numpy_eval is a plain helper module beside the tests (it must not import gradwright)
sys.path.insert(0, str(Path(__file__).parent))

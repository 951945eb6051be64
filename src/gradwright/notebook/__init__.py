"""The notebook face of gradwright: magics, the check and identity panels, notebook export.

Nothing here is imported by the core; heavy modules (ipywidgets, matplotlib) load when used.
"""

__all__ = ["load_ipython_extension"]


def load_ipython_extension(ipython) -> None:
    """Register the magics (`%load_ext gradwright.notebook` works as well as `gradwright`)."""
    from .magics import load_ipython_extension as load

    load(ipython)

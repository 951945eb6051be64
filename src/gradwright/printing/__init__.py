"""Printers: LaTeX, formula-language text and NumPy code, one visitor each."""

from . import matrix_printing  # noqa: E402, F401  (attaches the matrix-function printers)
from .latex import LatexPrinter, latex, symbol_latex
from .text import TextPrinter, text

__all__ = ["LatexPrinter", "TextPrinter", "latex", "symbol_latex", "text"]

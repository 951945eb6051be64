"""Printers: LaTeX, formula-language text and NumPy code, one visitor each."""

from .latex import LatexPrinter, latex, symbol_latex
from .text import TextPrinter, text

__all__ = ["LatexPrinter", "TextPrinter", "latex", "symbol_latex", "text"]

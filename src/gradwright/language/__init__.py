"""The formula language: a block of declarations and definitions, read into expression trees.

Parsed with Python's `ast` against a whitelist and never evaluated; shapes checked as read.
"""

from .parser import LIMITS, STRUCTURE_WORDS, Block, parse_block, parse_shape_spec

__all__ = ["Block", "LIMITS", "STRUCTURE_WORDS", "parse_block", "parse_shape_spec"]

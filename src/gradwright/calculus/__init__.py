"""Matrix differential calculus: the rules table, adjoints (identification), Kronecker forms.

`differential(e, wrt)` is linear in the differential leaves; everything else derives from it.
"""

from . import indexing as _indexing  # noqa: F401  (registers its rules and adjoints)
from . import matrix_rules  # noqa: F401  (registers the rules of matrix_functions)
from .adjoint import ADJOINTS, adjoint
from .kronecker import kronecker_form
from .rules import RULES, differential, expand_once, has_pending, pending

__all__ = [
    "ADJOINTS",
    "RULES",
    "adjoint",
    "differential",
    "expand_once",
    "has_pending",
    "kronecker_form",
    "pending",
]

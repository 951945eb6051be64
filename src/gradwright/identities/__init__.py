"""The identity catalogue: verified matrix identities, searchable and applicable to a formula.

>>> from gradwright import identities
>>> identities.search("woodbury")[0].id
'woodbury-identity'
"""

from .record import FAMILY_TAGS, KINDS, STRUCTURE_WORDS, Identity
from .search import all_identities, get, search, search_with_scores, tags


def all() -> list[Identity]:  # noqa: A001 - the catalogue's public name
    """Every identity of the catalogue, in catalogue order."""
    return all_identities()


def applicable(expression_or_block, *, shapes=None, limit=None, verify=True):
    """The identities whose one side matches a subexpression of the given expression, each as
    a `Match` with the rewrite; see `gradwright.identities.apply.applicable`."""
    from .apply import applicable as _applicable

    return _applicable(expression_or_block, shapes=shapes, limit=limit, verify=verify)


__all__ = [
    "FAMILY_TAGS",
    "KINDS",
    "STRUCTURE_WORDS",
    "Identity",
    "all",
    "all_identities",
    "applicable",
    "get",
    "search",
    "search_with_scores",
    "tags",
]

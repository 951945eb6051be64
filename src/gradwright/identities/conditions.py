"""Conditions of catalogue records in a structured form: `"SUBJECTS: PROPERTY"`.

A record states what shapes cannot say as short lines such as `"A, C, A + U @ C @ V: invertible"`,
`"1 + v @ inv(A) @ u: nonzero"` or `"g: constant in t"`. The subjects are formula-language
expressions over the record's declarations (read by the same reader as the identity, so a typo
fails a test instead of leaking to users); the property is one word of `PROPERTIES`. Each line is
shown as words and math (`A, C and A + U C V invertible`) in the panel and as words and formula
text in the search output, never as source.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass

__all__ = ["PROPERTIES", "Condition", "parse_condition"]

#: property -> how it reads after its subjects (scalar and array subjects read alike unless the
#: entry says otherwise in `_phrase`)
PROPERTIES = (
    "invertible",
    "nonzero",
    "entrywise nonzero",
    "positive",
    "nonnegative",
    "spd",
    "symmetric",
    "constant",
    "constant in",
)


@dataclass(frozen=True)
class Condition:
    """One condition line: formula subjects, a property word and, for `constant in X`, the X.

    >>> parse_condition("A, C, A + U @ C @ V: invertible").subjects
    ('A', 'C', 'A + U @ C @ V')
    """

    subjects: tuple[str, ...]
    property: str
    variable: str | None = None

    def phrase(self, names: list[str], scalar: bool, latex: bool = False) -> str:
        """The condition read aloud around the rendered subjects `names` (formula text, or
        LaTeX when `latex`, each then set as inline math)."""

        def math(s: str) -> str:
            return f"${s}$" if latex else s

        p = self.property
        if scalar and len(names) == 1 and p in ("positive", "nonnegative", "nonzero"):
            relation = {"positive": ">", "nonnegative": r"\geq" if latex else "≥"}.get(
                p, r"\neq" if latex else "≠"
            )
            return math(f"{names[0]} {relation} 0")
        shown = [math(n) for n in names]
        joined = shown[0] if len(shown) == 1 else ", ".join(shown[:-1]) + " and " + shown[-1]
        if p == "spd":
            return f"{joined} symmetric positive definite"
        if p == "constant in":
            verb = "does" if len(shown) == 1 else "do"
            return f"{joined} {verb} not depend on {math(str(self.variable))}"
        if p in ("positive", "nonnegative", "entrywise nonzero"):
            word = "nonzero" if p == "entrywise nonzero" else p
            return f"every entry of {' and of '.join(shown)} {word}"
        return f"{joined} {p}"


def parse_condition(line: str) -> Condition:
    """Read one `"SUBJECTS: PROPERTY"` line; ValueError when it is not of that form."""
    if not isinstance(line, str) or ":" not in line:
        raise ValueError(f"a condition reads 'SUBJECTS: PROPERTY', got {line!r}")
    head, _, prop = line.rpartition(":")
    prop = " ".join(prop.split())
    variable = None
    if prop.startswith("constant in "):
        variable = prop[len("constant in ") :].strip()
        prop = "constant in"
        if not variable.isidentifier():
            raise ValueError(f"'constant in' names one declared symbol, got {variable!r}")
    if prop not in PROPERTIES:
        raise ValueError(f"unknown condition property {prop!r}; known: {', '.join(PROPERTIES)}")
    try:
        tree = ast.parse(head.strip(), mode="eval").body
    except SyntaxError:
        raise ValueError(f"the subjects of {line!r} are not formulas") from None
    parts = tree.elts if isinstance(tree, ast.Tuple) else [tree]
    subjects = tuple(ast.get_source_segment(head.strip(), p) for p in parts)
    if not subjects or not all(subjects):
        raise ValueError(f"no subject in {line!r}")
    return Condition(subjects, prop, variable)

"""The `Identity` record: one catalogue entry as an immutable object with its rendered face.

The catalogue itself is plain data in `catalogue_*.py` (joined in `catalogue.py`); this module
only wraps each dict.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from functools import cached_property

from .conditions import Condition, parse_condition

__all__ = [
    "APPLY_DIRECTIONS",
    "Identity",
    "KINDS",
    "STRUCTURE_WORDS",
    "FAMILY_TAGS",
    "operator_names",
]

KINDS = ("equality", "differential", "derivative")
APPLY_DIRECTIONS = ("both", "forward", "backward", "none")

#: Structure words a catalogue declaration may use (the formula language's words plus the two
#: the catalogue needs to say what shapes cannot: `square`, `invertible`).
STRUCTURE_WORDS = frozenset(
    {"symmetric", "spd", "diagonal", "positive", "orthogonal", "square", "invertible"}
)

#: The families every record is filed under (at least one per record).
FAMILY_TAGS = (
    "trace",
    "vec",
    "kronecker",
    "commutation",
    "inverse",
    "determinant",
    "hadamard",
    "diagonal",
    "norm",
    "differential",
    "derivative",
)

_CALL = re.compile(r"\b([A-Za-z_]\w*)\s*\(")


def operator_names(text: str) -> tuple[str, ...]:
    """Names of the operations a formula uses, as words (`kron`, `inv`, `matmul`, ...)."""
    names: list[str] = []
    for name in _CALL.findall(text):
        if name not in names:
            names.append(name)
    if "@" in text:
        names.append("matmul")
    if ".T" in text:
        names.append("transpose")
    if re.search(r"(?<!\*)\*(?!\*)", text):
        names.append("times")
    if "**" in text:
        names.append("power")
    return tuple(names)


@dataclass(frozen=True)
class Identity:
    """One verified identity of the catalogue.

    >>> from gradwright.identities import get
    >>> ident = get("vec-triple-product")
    >>> ident.lhs, ident.rhs
    ('vec(A @ X @ B)', 'kron(B.T, A) @ vec(X)')
    """

    id: str
    title: str
    tags: tuple[str, ...]
    declarations: tuple[str, ...]
    lhs: str
    rhs: str
    conditions: tuple[str, ...]
    latex_lhs: str
    latex_rhs: str
    source: str
    kind: str
    wrt: str | None = None
    aliases: tuple[str, ...] = ()
    apply: str = "both"
    notes: str = ""
    extra: dict = field(default_factory=dict, compare=False, hash=False, repr=False)

    @classmethod
    def from_record(cls, record: dict) -> Identity:
        known = {
            "id",
            "title",
            "tags",
            "declarations",
            "lhs",
            "rhs",
            "conditions",
            "latex_lhs",
            "latex_rhs",
            "source",
            "kind",
            "wrt",
            "aliases",
            "apply",
            "notes",
        }
        return cls(
            id=record["id"],
            title=record["title"],
            tags=tuple(record["tags"]),
            declarations=tuple(record["declarations"]),
            lhs=record["lhs"],
            rhs=record["rhs"],
            conditions=tuple(record.get("conditions", ())),
            latex_lhs=record["latex_lhs"],
            latex_rhs=record["latex_rhs"],
            source=record["source"],
            kind=record["kind"],
            wrt=record.get("wrt"),
            aliases=tuple(record.get("aliases", ())),
            apply=record.get("apply", "both"),
            notes=record.get("notes", ""),
            extra={k: v for k, v in record.items() if k not in known},
        )

    # -- the record's face ----------------------------------------------------------------
    @property
    def latex(self) -> str:
        """The whole identity as LaTeX, `lhs = rhs`."""
        return f"{self.latex_lhs} = {self.latex_rhs}"

    @property
    def text(self) -> str:
        """The identity in the formula language, `lhs == rhs` (derivatives: `d f / d X = G`)."""
        if self.kind == "derivative":
            return f"gradient of {self.lhs} in {self.wrt} == {self.rhs}"
        return f"{self.lhs} == {self.rhs}"

    @cached_property
    def condition_items(self) -> tuple[Condition, ...]:
        """The conditions read into `Condition`s (subjects, property)."""
        return tuple(parse_condition(line) for line in self.conditions)

    def subject_expr(self, subject: str):
        """A condition subject read with the record's declarations (an `Expr`)."""
        from ..language import parse_block

        return parse_block("\n".join([*self.declarations, f"f = {subject}"])).expr

    def _phrases(self, latex: bool) -> list[str]:
        from ..printing import latex as to_latex

        out = []
        for cond in self.condition_items:
            exprs = [self.subject_expr(s) for s in cond.subjects]
            names = [to_latex(e) for e in exprs] if latex else list(cond.subjects)
            scalar = all(e.shape == (None, None) for e in exprs)
            out.append(cond.phrase(names, scalar, latex=latex))
        return out

    @cached_property
    def conditions_text(self) -> str:
        """The conditions in words and formula text: `A, C and A + U @ C @ V invertible`.

        >>> from gradwright.identities import get
        >>> get("sherman-morrison-formula").conditions_text
        'A invertible; 1 + v @ inv(A) @ u ≠ 0'
        """
        return "; ".join(self._phrases(latex=False))

    @cached_property
    def conditions_latex(self) -> str:
        """The conditions in words with inline math (`$...$`), for the notebook."""
        return "; ".join(self._phrases(latex=True))

    @property
    def families(self) -> tuple[str, ...]:
        return tuple(t for t in self.tags if t in FAMILY_TAGS)

    @property
    def operators(self) -> tuple[str, ...]:
        """Operation names used on either side."""
        out = list(operator_names(self.lhs))
        for name in operator_names(self.rhs):
            if name not in out:
                out.append(name)
        return tuple(out)

    def block(self, side: str = "lhs", target: str = "f") -> str:
        """A formula-language block: the declarations, then `target = <side>`."""
        expr = {"lhs": self.lhs, "rhs": self.rhs}[side]
        return "\n".join([*self.declarations, f"{target} = {expr}"])

    def to_dict(self) -> dict:
        out = {
            "id": self.id,
            "title": self.title,
            "tags": list(self.tags),
            "declarations": list(self.declarations),
            "lhs": self.lhs,
            "rhs": self.rhs,
            "conditions": list(self.conditions),
            "conditions_text": self.conditions_text,
            "latex_lhs": self.latex_lhs,
            "latex_rhs": self.latex_rhs,
            "latex": self.latex,
            "source": self.source,
            "kind": self.kind,
        }
        if self.wrt is not None:
            out["wrt"] = self.wrt
        if self.aliases:
            out["aliases"] = list(self.aliases)
        if self.notes:
            out["notes"] = self.notes
        return out

    def _repr_markdown_(self) -> str:
        cond = f"  \n*when:* {self.conditions_latex}" if self.conditions else ""
        if self.notes:
            cond += f"  \n*note:* {self.notes}"
        return (
            f"**{self.title}** (`{self.id}`)  \n$${self.latex}$$  \n"
            f"`{self.lhs}` ⟶ `{self.rhs}`{cond}  \n*source:* {self.source}"
        )

    def __str__(self) -> str:
        """One line for a search listing; the conditions in words and formula text.

        >>> from gradwright.identities import get
        >>> print(get("inverse-scalar-multiple"))
        inverse-scalar-multiple: inv(c * A) == inv(A) / c  (when c ≠ 0)
        """
        when = f"  (when {self.conditions_text})" if self.conditions else ""
        return f"{self.id}: {self.text}{when}"

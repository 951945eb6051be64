"""The identity panel: live search of the identity catalogue, by words and family, and the
identities that apply to the last derivation's target.
"""

from __future__ import annotations

import html
import re

__all__ = ["IdentityPanel", "identity_html"]

ANY_FAMILY = "every family"
RESULT_LIMIT = 12  # identities per page

#: the catalogue identities behind each rule name a derivation shows (a rule the table does not
#: list is looked up by its words)
RULE_IDENTITIES = {
    "rearrange under the trace": ("trace-cyclic-two", "trace-cyclic-three", "trace-of-transpose"),
    "log-determinant rule": ("differential-of-logdet",),
    "determinant rule": ("differential-of-determinant",),
    "inverse rule": ("differential-of-inverse",),
    "solve rule": ("differential-of-solve",),
    "product rule": ("differential-of-product",),
    "trace is linear": ("differential-of-trace",),
    "transpose is linear": ("differential-of-transpose",),
    "Kronecker product rule": ("differential-of-kronecker",),
    "vectorize": ("vec-triple-product",),
    "norm rule": ("differential-of-euclidean-norm",),
    "diag is linear": ("differential-of-diag",),
    "log-sum-exp rule": ("gradient-of-logsumexp",),
}
#: rule names that are bookkeeping, with no identity behind them
_PLAIN_RULES = {
    "write d in front", "collect terms", "read off the gradient", "read off the Jacobian",
    "sum rule", "constant multiple", "definition", "differential of a variable",
    "collect the coefficient of each differential", "constants have zero differential",
    "sum of entries is linear",
}  # fmt: skip


def rules_used(derivation) -> list[str]:
    """The rule names of the derivation's steps, split at "; ", in order, each once."""
    names: list[str] = []
    for step in getattr(derivation, "steps", ()):
        for part in (step.rule or "").split("; "):
            head = part.split(":")[0].strip()
            if head and head not in names and not head.startswith(("definition of", "keep the")):
                names.append(head)
    return names


def identities_used(derivation) -> list[tuple[object, str]]:
    """(identity, rule name) for the rules the derivation applied, catalogue records only."""
    catalogue = _catalogue()
    known = {i.id: i for i in catalogue.all()}
    out: list = []
    seen: set = set()
    for rule in rules_used(derivation):
        if rule in _PLAIN_RULES or rule.startswith(("symmetric part", "read off")):
            continue
        # the records that carry the rule's label as an alias and those of the table, else the
        # words of the label
        ids = tuple(i.id for i in known.values() if rule in getattr(i, "aliases", ()))
        ids = tuple(dict.fromkeys(ids + RULE_IDENTITIES.get(rule, ()))) or None
        if ids is None:  # e.g. "chain rule for tanh": the differential of that function
            words = rule.replace("chain rule for", "differential").replace(" rule", "")
            hits = catalogue.search_with_scores(words, limit=1)
            ids = tuple(i.id for i, score in hits if score >= 15)
        for identity_id in ids:
            if identity_id in known and identity_id not in seen:
                seen.add(identity_id)
                out.append((known[identity_id], rule))
    return out


def _blob(identity) -> str:
    """The words an "applies to" result is filtered by: title, id, tags and aliases (the rule
    labels a derivation shows are aliases of their identities)."""
    words = [identity.title, identity.id, *(identity.tags or ())]
    words += list(getattr(identity, "aliases", ()) or ())
    return " ".join(words).lower()


def _catalogue():
    from gradwright import identities

    return identities


def _math(latex: str) -> str:
    latex = (latex or "").strip()
    if not latex:
        return ""
    if latex.startswith("$") or latex.startswith("\\["):
        return latex
    return f"$${latex}$$"


_CONDITION_SUBS = (
    (re.compile(r"\s\(x\)\s"), " ⊗ "),
    (re.compile(r"\b(\w{1,2}) x (\w{1,2})\b"), r"\1 × \2"),  # sizes, not "entry of x"
    (re.compile(r"(?<=[\w)])\.T\b"), "ᵀ"),
    (re.compile(r"\^T\b"), "ᵀ"),
    (re.compile(r"\^\{-1\}"), "⁻¹"),
    (re.compile(r"\binv\((\w)\)"), r"\1⁻¹"),
    (re.compile(r"\bK_\{(\w),(\w)\}"), r"K(\1,\2)"),
    (re.compile(r">="), "≥"),
)


def readable_condition(text: str) -> str:
    """A catalogue condition in words and symbols, not formula source: `A (x) B` reads A ⊗ B,
    `n x n` reads n × n, `A.T` reads Aᵀ.

    >>> readable_condition("det(A (x) B) for A n x n, every entry of x > 0, A.T A = I, c >= 0")
    'det(A ⊗ B) for A n × n, every entry of x > 0, Aᵀ A = I, c ≥ 0'
    """
    for pattern, repl in _CONDITION_SUBS:
        text = pattern.sub(repl, text)
    return text


def identity_html(identity, note: str = "") -> str:
    """One identity as HTML with math: title, formula, conditions, source, family tags."""
    conditions = getattr(identity, "conditions", None) or ()
    if isinstance(conditions, str):
        conditions = (conditions,)
    tags = ", ".join(getattr(identity, "tags", ()) or ())
    parts = [
        "<div class='gradwright-identity' style='margin:4px 0 10px 0'>",
        f"<b>{html.escape(str(identity.title))}</b> "
        f"<span style='color:#777;font-size:85%'>{html.escape(str(identity.id))}"
        f"{' &middot; ' + html.escape(tags) if tags else ''}</span>",
        f"<div>{html.escape(_math(identity.latex))}</div>",
    ]
    # catalogue records render their structured conditions as words and inline math
    when = getattr(identity, "conditions_latex", None)
    if conditions:
        when = when or readable_condition("; ".join(map(str, conditions)))
        parts.append(f"<div style='font-size:90%'>when: {html.escape(when)}</div>")
    if getattr(identity, "notes", ""):
        parts.append(f"<div style='font-size:90%'>note: {html.escape(identity.notes)}</div>")
    if getattr(identity, "source", None):
        parts.append(
            "<div style='font-size:85%;color:#555'>source: "
            f"{html.escape(str(identity.source))}</div>"
        )
    if note:
        parts.append(f"<div style='font-size:90%'>{note}</div>")
    parts.append("</div>")
    return "".join(parts)


def _families(catalogue) -> list[str]:
    """The family tags in use (the catalogue's declared families when it names them)."""
    tags = set()
    for identity in catalogue.all():
        tags.update(getattr(identity, "tags", ()) or ())
    declared = getattr(catalogue, "FAMILY_TAGS", None)
    if declared:
        tags &= set(declared)
    return sorted(tags)


class IdentityPanel:
    """Search box, family filter and an "applies to the target" toggle over one `Output`.

    Typing in `search` (or setting `search.value` from Python) refreshes the results; the
    identities shown are kept in `shown` for tests and scripts.
    """

    def __init__(self, query: str = "", family: str | None = None, derivation=None):
        import ipywidgets as w

        self.derivation = derivation
        self.shown: list = []
        self.message = ""
        try:
            families = _families(_catalogue())
        except Exception as err:  # the catalogue missing or broken: say so inside the panel
            families = []
            self.message = f"the identity catalogue is not available ({type(err).__name__}: {err})"
        if family and family not in families:
            families.append(family)
        self.search = w.Text(
            value=query,
            placeholder="search: trace inverse, logdet, kron ...",
            description="search",
            continuous_update=True,
            layout=w.Layout(width="380px"),
        )
        self.family = w.Dropdown(
            options=[ANY_FAMILY, *families],
            value=family or ANY_FAMILY,
            description="family",
            layout=w.Layout(width="260px"),
        )
        target = derivation.target if derivation is not None else None
        self.applicable = w.ToggleButton(
            value=False,
            description=f"applies to {target}" if target else "applies to the last target",
            disabled=derivation is None,
            tooltip="list the identities that match the last %%derive's target"
            if target
            else "run %%derive first",
            icon="filter",
        )
        self.count = w.HTML()
        self.page = 0
        self.results: list = []  # every (identity, note) of the current controls
        self.previous = w.Button(description="previous", icon="chevron-left", disabled=True)
        self.next = w.Button(description="next", icon="chevron-right", disabled=True)
        self.previous.on_click(lambda _b: self.turn(-1))
        self.next.on_click(lambda _b: self.turn(1))
        self.output = w.Output()
        for control in (self.search, self.family, self.applicable):
            control.observe(self._changed, names="value")
        self.widget = w.VBox(
            [
                w.HTML("<b>Identity catalogue</b>"),
                w.HBox([self.search, self.family]),
                w.HBox(
                    [self.applicable, self.previous, self.next, self.count],
                    layout=w.Layout(align_items="center", flex_flow="row wrap"),
                ),
                self.output,
            ],
            layout=w.Layout(border="1px solid #d0d7de", padding="6px 10px", margin="6px 0"),
        )
        self.widget.add_class("gradwright-identity-panel")
        self.refresh()

    def _repr_mimebundle_(self, **kwargs):
        bundle = dict(self.widget._repr_mimebundle_(**kwargs) or {})
        found = ", ".join(i.id for i in self.shown[:8]) or "nothing"
        bundle["text/plain"] = f"[identity catalogue: {found}]"
        return bundle

    def _changed(self, _change):
        self.page = 0
        self.refresh()

    def turn(self, pages: int) -> None:
        """Show another page of the results (12 a page)."""
        last = max(0, (len(self.results) - 1) // RESULT_LIMIT)
        self.page = min(last, max(0, self.page + pages))
        self._show()

    def _results(self):
        """(identity, note html) pairs for the current controls."""
        catalogue = _catalogue()
        tags = None if self.family.value == ANY_FAMILY else [self.family.value]
        if self.applicable.value and self.derivation is not None:
            matches = catalogue.applicable(self._target_for_matching())
            words = self.search.value.lower().split()
            out = []
            listed = set()
            for identity, rule in identities_used(self.derivation):
                if tags and not set(tags) & set(identity.tags or ()):
                    continue
                blob = f"{_blob(identity)} {rule.lower()}"  # the label it is cited under
                if words and not all(word in blob for word in words):
                    continue
                listed.add(identity.id)
                out.append((identity, f"used by the derivation ({html.escape(rule)})"))
            for match in matches:
                identity = match.identity
                if identity.id in listed:
                    continue
                if tags and not set(tags) & set(identity.tags or ()):
                    continue
                blob = _blob(identity)
                if words and not all(word in blob for word in words):
                    continue
                direction = getattr(match, "direction", "")
                rewritten = getattr(match, "latex", "") or ""
                note = f"applies {html.escape(str(direction))}"
                if rewritten:
                    note += f": {html.escape(_math(rewritten))}"
                out.append((identity, note))
                listed.add(identity.id)
            return out
        everything = catalogue.all()
        if not self.search.value.strip():  # no words: the whole catalogue (or the family)
            found = [i for i in everything if not tags or set(tags) & set(i.tags or ())]
        else:
            found = catalogue.search(self.search.value, tags=tags, limit=len(everything))
        return [(identity, "") for identity in found]

    def _target_for_matching(self):
        return self.derivation.text

    def refresh(self) -> None:
        """Recompute the results and show their current page; errors are shown in the panel."""
        self.error = ""
        if self.message:
            self.results = []
        else:
            try:
                self.results = self._results()
            except Exception as err:
                self.results = []
                self.error = f"{type(err).__name__}: {err}"
        self._show()

    def _show(self) -> None:
        import ipywidgets as w
        from IPython.display import display

        def HTML(value):  # math in results is typeset by the widget itself
            return w.HTMLMath(value=value)

        start = self.page * RESULT_LIMIT
        page = self.results[start : start + RESULT_LIMIT]
        self.shown = [identity for identity, _ in page]
        total = len(self.results)
        self.previous.disabled = self.page == 0
        self.next.disabled = start + RESULT_LIMIT >= total
        with self.output:
            self.output.clear_output(wait=True)
            if self.message or self.error:
                self.count.value = ""
                text = self.message or self.error
                display(HTML(f"<p style='color:#b42318'>{html.escape(text)}</p>"))
                return
            span = f"{start + 1}&ndash;{start + len(page)} of {total}" if page else "0 shown"
            if self.applicable.value:
                self.count.value = f"{total} apply to {html.escape(self.derivation.target)}" + (
                    f" &middot; {span}" if total > RESULT_LIMIT else ""
                )
            else:
                self.count.value = span if total else "0 shown"
            if not page:
                display(
                    HTML(
                        "<p style='color:#555'>Nothing matches; "
                        "try fewer words or every family.</p>"
                    )
                )
                return
            display(HTML("".join(identity_html(i, note) for i, note in page)))

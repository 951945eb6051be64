"""The identity panel: live search of the identity catalogue, by words and family, and the
identities that apply to the last derivation's target.
"""

from __future__ import annotations

import html

__all__ = ["IdentityPanel", "identity_html"]

ANY_FAMILY = "every family"
RESULT_LIMIT = 12


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
    if conditions:
        parts.append(
            "<div style='font-size:90%'>when: "
            + html.escape("; ".join(map(str, conditions)))
            + "</div>"
        )
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
        self.output = w.Output()
        for control in (self.search, self.family, self.applicable):
            control.observe(self._changed, names="value")
        self.widget = w.VBox(
            [
                w.HTML("<b>Identity catalogue</b>"),
                w.HBox([self.search, self.family]),
                w.HBox([self.applicable, self.count], layout=w.Layout(align_items="center")),
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
        self.refresh()

    def _results(self):
        """(identity, note html) pairs for the current controls."""
        catalogue = _catalogue()
        tags = None if self.family.value == ANY_FAMILY else [self.family.value]
        if self.applicable.value and self.derivation is not None:
            matches = catalogue.applicable(self._target_for_matching())
            words = self.search.value.lower().split()
            out = []
            for match in matches:
                identity = match.identity
                if tags and not set(tags) & set(identity.tags or ()):
                    continue
                blob = f"{identity.title} {identity.id} {' '.join(identity.tags or ())}".lower()
                if words and not all(word in blob for word in words):
                    continue
                direction = getattr(match, "direction", "")
                rewritten = getattr(match, "latex", "") or ""
                note = f"applies {html.escape(str(direction))}"
                if rewritten:
                    note += f": {html.escape(_math(rewritten))}"
                out.append((identity, note))
            return out
        found = catalogue.search(self.search.value, tags=tags, limit=RESULT_LIMIT)
        return [(identity, "") for identity in found]

    def _target_for_matching(self):
        return self.derivation.text

    def refresh(self) -> None:
        """Recompute the results and show them; errors are shown in the panel."""
        import ipywidgets as w
        from IPython.display import display

        def HTML(value):  # math in results is typeset by the widget itself
            return w.HTMLMath(value=value)

        with self.output:
            self.output.clear_output(wait=True)
            if self.message:
                display(HTML(f"<p style='color:#b42318'>{html.escape(self.message)}</p>"))
                self.shown = []
                return
            try:
                results = self._results()
            except Exception as err:
                self.shown = []
                self.count.value = ""
                display(
                    HTML(
                        f"<p style='color:#b42318'>{html.escape(type(err).__name__)}: "
                        f"{html.escape(str(err))}</p>"
                    )
                )
                return
            self.shown = [identity for identity, _ in results]
            if self.applicable.value:
                self.count.value = f"{len(results)} apply to {html.escape(self.derivation.target)}"
            else:
                self.count.value = f"{len(results)} shown" + (
                    f" (at most {RESULT_LIMIT}; refine the search)"
                    if len(results) >= RESULT_LIMIT
                    else ""
                )
            if not results:
                display(
                    HTML(
                        "<p style='color:#555'>Nothing matches; "
                        "try fewer words or every family.</p>"
                    )
                )
                return
            display(HTML("".join(identity_html(i, note) for i, note in results)))

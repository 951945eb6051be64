"""The identity panel driven from Python: typing searches live, the family filter narrows, the
toggle lists what applies to the last derivation's target."""

from __future__ import annotations

import re

import pytest
from IPython.utils.capture import capture_output
from nbhelpers import COVARIANCE

from gradwright import identities
from gradwright.notebook.identity_panel import (
    ANY_FAMILY,
    RESULT_LIMIT,
    IdentityPanel,
    identities_used,
    identity_html,
)


def _quiet(action):
    with capture_output() as cap:
        out = action()
    return out, cap


def test_opens_prefiltered_and_searches_live():
    panel, _ = _quiet(lambda: IdentityPanel("logdet"))
    assert panel.shown, "a search for logdet finds something"
    assert all(
        "logdet" in (i.id + i.title + " ".join(i.tags)).replace(" ", "")
        or "determinant" in " ".join(i.tags)
        for i in panel.shown[:3]
    )
    before = [i.id for i in panel.shown]
    _quiet(lambda: setattr(panel.search, "value", "woodbury"))
    after = [i.id for i in panel.shown]
    assert after != before and after[0] == identities.search("woodbury")[0].id
    assert panel.search.continuous_update  # results follow each keystroke


def test_family_filter_keeps_only_that_family():
    panel, _ = _quiet(lambda: IdentityPanel(""))
    families = [f for f in panel.family.options if f != ANY_FAMILY]
    assert "trace" in families
    _quiet(lambda: setattr(panel.family, "value", "trace"))
    assert panel.shown and all("trace" in i.tags for i in panel.shown)
    panel2, _ = _quiet(lambda: IdentityPanel("inverse", family="trace"))
    assert panel2.family.value == "trace"
    assert all("trace" in i.tags for i in panel2.shown)


def test_results_render_as_math_with_conditions_and_source():
    ident = identities.search("woodbury")[0]
    page = identity_html(ident)
    assert "$$" in page and ident.latex_lhs.split()[0][:4] in page.replace("&#x27;", "'")
    assert "source:" in page and ident.id in page
    conditional = [i for i in identities.all() if i.conditions]
    if conditional:
        assert "when:" in identity_html(conditional[0])


def test_nothing_found_says_so():
    panel, _ = _quiet(lambda: IdentityPanel("zzqqxx nonsense words"))
    assert panel.shown == []
    assert "0 shown" in panel.count.value


def test_applicable_toggle_lists_matches_for_the_target():
    from gradwright import derive

    d = derive(COVARIANCE, wrt="S")
    panel, _ = _quiet(lambda: IdentityPanel("", derivation=d))
    assert not panel.applicable.disabled and "nll" in panel.applicable.description
    _quiet(lambda: setattr(panel.applicable, "value", True))
    assert "apply to nll" in panel.count.value
    ids = {i.id for r in panel.results for i in r[:1]}
    expected = {m.identity.id for m in identities.applicable(d.text)}
    used = {i.id for i, _rule in identities_used(d)}
    assert ids == expected | used
    # the rules the derivation applied are there: it rearranged under the trace
    assert "trace-cyclic-two" in used and "differential-of-logdet" in used
    _quiet(lambda: setattr(panel.search, "value", "trace cyclic"))
    assert panel.shown and all("cyclic" in i.id for i in panel.shown)


def test_no_words_lists_everything_a_page_at_a_time():
    panel, _ = _quiet(lambda: IdentityPanel(""))
    everything = identities.all()
    assert len(panel.results) == len(everything) > RESULT_LIMIT
    assert [i.id for i in panel.shown] == [i.id for i in everything[:RESULT_LIMIT]]
    assert f"1&ndash;{RESULT_LIMIT} of {len(everything)}" in panel.count.value
    assert panel.previous.disabled and not panel.next.disabled
    _quiet(lambda: panel.next.click())
    assert [i.id for i in panel.shown] == [
        i.id for i in everything[RESULT_LIMIT : 2 * RESULT_LIMIT]
    ]
    assert not panel.previous.disabled
    _quiet(lambda: panel.turn(10_000))
    assert panel.next.disabled and panel.shown == everything[panel.page * RESULT_LIMIT :]
    _quiet(lambda: setattr(panel.search, "value", "trace"))
    assert panel.page == 0  # a new search starts on its first page


def test_identities_magic_without_words_lists_everything(shell):
    from IPython.utils.capture import capture_output as capture

    with capture() as cap:
        shell.run_line_magic("identities", "")
    shown = [o.data.get("text/plain", "") for o in cap.outputs]
    assert any(identities.all()[0].id in text for text in shown), shown
    doc = shell.find_line_magic("identities").__doc__
    assert "every identity when no WORDS are given" in doc


def test_toggle_disabled_without_a_derivation():
    panel, _ = _quiet(lambda: IdentityPanel(""))
    assert panel.applicable.disabled


@pytest.mark.parametrize("query", ["trace", "kron", "gradient logdet"])
def test_panel_agrees_with_catalogue_search(query):
    panel, _ = _quiet(lambda: IdentityPanel(query))
    assert [i.id for i in panel.shown] == [i.id for i in identities.search(query, limit=12)]


def test_conditions_read_as_words_and_symbols_not_source():
    shown = [identity_html(i) for i in identities.all() if i.conditions]
    assert shown
    for page in shown:
        when = page.split("when: ", 1)[1].split("</div>", 1)[0]
        words = re.sub(r"\$[^$]*\$", "", when)  # the math is typeset; the words around it not
        assert " (x) " not in words and ".T " not in words and "^{-1}" not in words, when
        assert "@" not in words and "inv(" not in words, when
    woodbury = identity_html(identities.get("woodbury-identity"))
    assert "when: $A$, $C$ and $A + U" in woodbury  # words with inline math, not source

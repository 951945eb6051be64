"""Every identity a derivation cites is findable with the words of its rule label and is listed
under "applies to" in the identity panel.

Over every reference case and the demos' blocks: each rule label a step shows (other than the
bookkeeping ones: "write d in front", "collect terms", ...) cites at least one catalogue record;
searching the catalogue for the label's words finds each cited record on the first page; and,
on the demos and a spread of reference cases, the panel's "applies to" list contains them.
"""

from __future__ import annotations

import functools
import pathlib
import sys

import pytest
from IPython.utils.capture import capture_output

from gradwright import FormulaError, derive, identities
from gradwright.language import parse_block
from gradwright.notebook.identity_panel import (
    _PLAIN_RULES,
    RESULT_LIMIT,
    IdentityPanel,
    identities_used,
    rules_used,
)

_TESTS = pathlib.Path(__file__).parents[1]
for _p in (_TESTS, _TESTS / "core"):
    if str(_p) not in sys.path:
        sys.path.insert(0, str(_p))

from core_cases import GRADIENT_CASES, JACOBIAN_CASES  # noqa: E402

DEMO_BLOCKS = _TESTS.parent / "notebooks_demo" / "blocks"


def _demo(path: pathlib.Path) -> tuple[str, str, tuple]:
    block = "\n".join(
        line.split("#", 1)[0].rstrip()
        for line in path.read_text().splitlines()
        if line.split("#", 1)[0].strip()
    )
    return f"demo-{path.stem}", block, tuple(parse_block(block).declarations)


CASES = [(c.id, c.block, tuple(c.wrt)) for c in GRADIENT_CASES + JACOBIAN_CASES if not c.xfail]
CASES += [_demo(p) for p in sorted(DEMO_BLOCKS.glob("*.gw"))]


@functools.cache
def _derivation(block: str, wrt: tuple):
    return derive(block, wrt=list(wrt))


def _cited(d) -> dict[str, list]:
    """rule label -> the records it cites, for every label that is not bookkeeping."""
    out: dict[str, list] = {}
    used = identities_used(d)
    for rule in rules_used(d):
        if rule in _PLAIN_RULES or rule.startswith(("symmetric part", "read off")):
            continue
        out[rule] = [identity for identity, label in used if label == rule]
    return out


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_every_rule_cites_a_findable_identity(case):
    _id, block, wrt = case
    try:
        d = _derivation(block, wrt)
    except FormulaError as err:
        pytest.skip(f"not derivable: {err}")
    for rule, cited in _cited(d).items():
        assert cited, f"the rule {rule!r} cites no identity of the catalogue"
        found = [i.id for i in identities.search(rule, limit=RESULT_LIMIT)]
        for identity in cited:
            assert identity.id in found, f"{rule!r} does not find {identity.id}: {found}"


# the demos and a spread of reference cases through the panel itself (applicable() is slow)
PANEL_CASES = [c for c in CASES if c[0].startswith("demo-")]
PANEL_CASES += [c for c in CASES if not c[0].startswith("demo-")][::15]


@pytest.mark.parametrize("case", PANEL_CASES, ids=[c[0] for c in PANEL_CASES])
def test_cited_identities_are_listed_under_applies_to(case):
    _id, block, wrt = case
    d = _derivation(block, wrt)
    with capture_output():
        panel = IdentityPanel("", derivation=d)
        panel.applicable.value = True
    listed = {identity.id for identity, _note in panel.results}
    for rule, cited in _cited(d).items():
        for identity in cited:
            assert identity.id in listed, f"{identity.id} ({rule}) is not under applies to"
            # typing the rule's words in the panel keeps it
            with capture_output():
                panel.search.value = rule
            assert identity.id in {i.id for i, _ in panel.results}, (rule, identity.id)
            with capture_output():
                panel.search.value = ""


def test_a_rule_without_an_identity_is_caught():
    class Step:
        rule = "wiggle rule: X = Y"

    class Fake:
        steps = (Step(),)

    assert _cited(Fake()) == {"wiggle rule": []}

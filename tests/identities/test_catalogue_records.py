"""Every catalogue record is complete, uniquely named and uses only known words.

These checks need no engine: they read the plain data in `gradwright.identities.catalogue`.
"""

import ast
import re
from collections import Counter

import pytest
from numpy_eval import differential_argument, parse_declaration

from gradwright import identities
from gradwright.identities.catalogue import RECORDS
from gradwright.identities.record import APPLY_DIRECTIONS, FAMILY_TAGS, KINDS, STRUCTURE_WORDS

REQUIRED = (
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
)
OPTIONAL = ("wrt", "aliases", "apply")
FUNCTIONS = {
    "trace", "det", "logdet", "inv", "solve", "kron", "vec", "diag", "diagm", "sum", "norm",
    "exp", "log", "sqrt", "sin", "cos", "tanh", "sigmoid", "softplus", "logsumexp", "softmax",
    "outer", "eye", "ones", "zeros", "mpow", "commutation", "d",
}  # fmt: skip
IDS = [r.get("id", f"record-{i}") for i, r in enumerate(RECORDS)]


def test_at_least_one_hundred_and_ten_records():
    assert len(RECORDS) >= 110
    assert len(identities.all()) == len(RECORDS)


def test_ids_are_unique():
    dup = [i for i, n in Counter(IDS).items() if n > 1]
    assert not dup, f"duplicate ids: {dup}"


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_record_has_every_field(record):
    missing = [k for k in REQUIRED if k not in record]
    assert not missing, f"{record.get('id')}: missing {missing}"
    unknown = set(record) - set(REQUIRED) - set(OPTIONAL)
    assert not unknown, f"{record['id']}: unknown fields {sorted(unknown)}"
    for key in ("id", "title", "lhs", "rhs", "latex_lhs", "latex_rhs", "source", "kind"):
        assert isinstance(record[key], str) and record[key].strip(), f"{record['id']}: empty {key}"
    assert isinstance(record["conditions"], str)


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_id_is_stable_kebab_case(record):
    assert re.fullmatch(r"[a-z0-9]+(-[a-z0-9]+)*", record["id"]), record["id"]


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_kind_and_wrt(record):
    assert record["kind"] in KINDS
    assert record.get("apply", "both") in APPLY_DIRECTIONS
    if record["kind"] == "derivative":
        names = [parse_declaration(line)[0] for line in record["declarations"]]
        assert record.get("wrt") in names, f"{record['id']}: wrt must name a declared symbol"
    else:
        assert "wrt" not in record
    if record["kind"] == "differential":
        differential_argument(record["lhs"])  # raises unless lhs is d(...)
        assert "d(" in record["rhs"], f"{record['id']}: rhs must use d(X)"
    else:
        assert "d(" not in record["lhs"] + record["rhs"]


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_record_has_a_family_tag(record):
    tags = record["tags"]
    assert isinstance(tags, tuple) and tags, f"{record['id']}: no tags"
    assert any(t in FAMILY_TAGS for t in tags), f"{record['id']}: no family tag in {tags}"
    assert all(t == t.lower() and " " not in t for t in tags)
    if record["kind"] in ("differential", "derivative"):
        assert record["kind"] in tags


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_source_is_a_publication_marked_from_memory(record):
    source = record["source"]
    assert "(from memory)" in source, f"{record['id']}: say '(from memory)' for unchecked sources"
    assert re.search(r"\d", source), f"{record['id']}: name the edition, year or equation"
    banned = ("course", "class", "slides", "talk", "http")  # the repository-wide scan covers more
    assert not any(b in source.lower() for b in banned)


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_declarations_use_only_known_structure_words(record):
    decls = record["declarations"]
    assert isinstance(decls, tuple)
    names = []
    for line in decls:
        name, dims, words = parse_declaration(line)
        names.append(name)
        assert set(words) <= STRUCTURE_WORDS, f"{record['id']}: unknown words in {line!r}"
        assert len(dims) <= 2
        square_words = {"symmetric", "spd", "diagonal", "square", "invertible"}
        if set(words) & square_words:
            assert len(dims) == 2 and dims[0] == dims[1], f"{record['id']}: {line!r} not square"
    assert len(set(names)) == len(names)


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_sides_use_only_declared_names_and_known_functions(record):
    declared = {parse_declaration(line)[0] for line in record["declarations"]}
    dims = {d for line in record["declarations"] for d in parse_declaration(line)[1]}
    for side in ("lhs", "rhs"):
        tree = ast.parse(record[side], mode="eval")
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                assert isinstance(node.func, ast.Name) and node.func.id in FUNCTIONS, (
                    f"{record['id']}: unknown function in {record[side]!r}"
                )
                if node.func.id in ("eye", "ones", "zeros", "commutation"):
                    for a in node.args:
                        assert isinstance(a, ast.Constant) or (
                            isinstance(a, ast.Name) and a.id in dims
                        ), f"{record['id']}: dims of {node.func.id} must be declared dims"
                    continue
            if isinstance(node, ast.Name) and isinstance(getattr(node, "ctx", None), ast.Load):
                if node.id in FUNCTIONS or node.id in dims:
                    continue
                assert node.id in declared, f"{record['id']}: {node.id!r} is not declared"


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_latex_is_balanced(record):
    for key in ("latex_lhs", "latex_rhs"):
        text = record[key].replace(r"\{", "").replace(r"\}", "")
        assert text.count("{") == text.count("}"), f"{record['id']}: unbalanced braces in {key}"


def test_identity_face():
    ident = identities.get("vec-triple-product")
    for attr in ("id", "title", "tags", "declarations", "lhs", "rhs", "latex", "source", "kind"):
        assert getattr(ident, attr)
    assert ident.conditions == ""
    assert ident.latex == rf"{ident.latex_lhs} = {ident.latex_rhs}"
    assert ident.block("rhs").splitlines()[-1] == "f = kron(B.T, A) @ vec(X)"
    assert ident.to_dict()["latex"] == ident.latex
    assert "kron" in ident.operators
    assert identities.get("gradient-of-logdet").wrt == "X"


def test_every_family_is_covered():
    counts = identities.tags()
    for family in FAMILY_TAGS:
        assert counts.get(family, 0) >= 3, family
    kinds = Counter(i.kind for i in identities.all())
    assert kinds["differential"] >= 10 and kinds["derivative"] >= 10


def test_get_unknown_id_names_close_ids():
    with pytest.raises(KeyError, match="woodbury-identity"):
        identities.get("woodbury-identty")

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
OPTIONAL = ("wrt", "aliases", "apply", "notes")
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
    assert isinstance(record["conditions"], tuple), f"{record['id']}: conditions are a tuple"
    assert isinstance(record.get("notes", ""), str)


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
                    for a in node.args:  # a dim, an integer, or a product of them (m * n)
                        for leaf in ast.walk(a):
                            assert (
                                isinstance(leaf, (ast.Constant, ast.Mult, ast.Load))
                                or (isinstance(leaf, ast.BinOp) and isinstance(leaf.op, ast.Mult))
                                or (isinstance(leaf, ast.Name) and leaf.id in dims)
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
    assert ident.conditions == () and ident.conditions_text == ""
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


# ---------------------------------------------------------------------------------------------
# symbolic sizes and structured conditions
# ---------------------------------------------------------------------------------------------

_SIZE_CALLS = ("eye", "ones", "zeros", "commutation")
# literal sizes in LaTeX: I_4, I_{6}, K_{2,3}, 0_{3}, 1_3, and "3 x 3" / "3 \times 3" in words
_LATEX_SIZE = re.compile(r"\b[IK01]_\{?\d|\d\s*(x|\\times|×)\s*\d")


def literal_sizes(record) -> list[str]:
    """Every place where the record writes a size as a number: declarations, size arguments of
    eye/ones/zeros/commutation, LaTeX subscripts, the title. 1 is a unit axis, not a size."""
    found = []
    for line in record["declarations"]:
        for d in parse_declaration(line)[1]:
            if isinstance(d, int) and d != 1:
                found.append(line)
    for side in ("lhs", "rhs"):
        for node in ast.walk(ast.parse(record[side], mode="eval")):
            if isinstance(node, ast.Call) and getattr(node.func, "id", "") in _SIZE_CALLS:
                for a in node.args:
                    for leaf in ast.walk(a):
                        if isinstance(leaf, ast.Constant) and leaf.value != 1:
                            found.append(ast.unparse(node))
    for key in ("latex_lhs", "latex_rhs", "title"):
        if _LATEX_SIZE.search(record[key]):
            found.append(f"{key}: {record[key]}")
    return found


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_record_is_stated_at_symbolic_sizes(record):
    assert not literal_sizes(record), f"{record['id']}: fixed sizes {literal_sizes(record)}"


def test_the_size_check_can_fail():
    fixed = {
        "declarations": ("A: (3, 3)",),
        "lhs": "trace(eye(4))",
        "rhs": "kron(eye(2), commutation(2, 3))",
        "latex_lhs": r"\operatorname{tr}(I_4)",
        "latex_rhs": r"K_{2,3}",
        "title": "for a 3 x 3 matrix",
    }
    found = literal_sizes(fixed)
    assert len(set(found)) == 7, found
    symbolic = {**fixed, "declarations": ("A: (n, 1)",), "lhs": "trace(eye(n))", "rhs": "n"}
    symbolic.update(latex_lhs=r"\operatorname{tr}(I_n)", latex_rhs="n", title="the identity")
    assert literal_sizes(symbolic) == []


@pytest.mark.parametrize("ident", [i for i in identities.all() if i.conditions], ids=lambda i: i.id)
def test_conditions_are_structured_and_read_by_the_formula_reader(ident):
    from gradwright.identities.conditions import PROPERTIES

    declared = {parse_declaration(line)[0] for line in ident.declarations}
    for cond in ident.condition_items:
        assert cond.property in PROPERTIES
        for subject in cond.subjects:
            ident.subject_expr(subject)  # raises FormulaError on anything but a formula
        if cond.property == "constant in":
            assert cond.variable in declared
    for shown in (ident.conditions_text, ident.conditions_latex):
        assert shown and "in general" not in shown
        # no source spellings of other notations leak: (x) for kron, ^T, K_{m,n} as text
        assert " (x) " not in shown and "^T" not in shown and "{-1}" not in ident.conditions_text


def test_conditions_read_as_words_text_and_math():
    woodbury = identities.get("woodbury-identity")
    assert woodbury.conditions_text == "A, C and A + U @ C @ V invertible"
    assert woodbury.conditions_latex.startswith("$A$, $C$ and $A + U")
    assert identities.get("logdet-scalar-multiple").conditions_text == "c > 0"
    assert identities.get("logdet-scalar-multiple").conditions_latex == "$c > 0$"
    assert identities.get("differential-of-entrywise-log").conditions_text == (
        "every entry of X positive"
    )
    assert identities.get("identification-scalar-variable").conditions_text == (
        "g does not depend on t"
    )
    sm = identities.get("sherman-morrison-formula")
    assert sm.conditions_latex == r"$A$ invertible; $1 + v^{\top}\,A^{-1}\,u \neq 0$"
    assert identities.get("logdet-rank-one-update").conditions_text == (
        "S symmetric positive definite"
    )


@pytest.mark.parametrize("line", ["A and B invertible", "A: invertable", "A +: invertible"])
def test_a_condition_in_free_words_is_refused(line):
    from gradwright.identities.conditions import parse_condition

    with pytest.raises(ValueError):
        parse_condition(line)

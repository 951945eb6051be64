"""Search finds what a practitioner types: words, synonyms, plurals, typos, formulas."""

import time

import pytest

from gradwright import identities

# (query, an id expected among the first three results)
PRACTITIONER_QUERIES = [
    ("vec ABC", "vec-triple-product"),
    ("vec triple product", "vec-triple-product"),
    ("vec(A @ X @ B)", "vec-triple-product"),
    ("kron trace", "trace-of-kronecker"),
    ("Trace of a Kronecker product", "trace-of-kronecker"),
    ("logdet derivative", "gradient-of-logdet"),
    ("log-determinant gradient", "gradient-of-logdet"),
    ("d logdet", "differential-of-logdet"),
    ("woodbury", "woodbury-identity"),
    ("woodbery", "woodbury-identity"),
    ("matrix inversion lemma", "woodbury-identity"),
    ("inverse of a sum", "woodbury-identity"),
    ("inv(A + U @ C @ V)", "woodbury-identity"),
    ("trace cyclic", "trace-cyclic-three"),
    ("cyclic property of the trace", "trace-cyclic-three"),
    ("sherman morrison", "sherman-morrison-formula"),
    ("Sherman-Morrison", "sherman-morrison-formula"),
    ("rank one update inverse", "sherman-morrison-formula"),
    ("determinant lemma", "matrix-determinant-lemma"),
    ("commutation", "commutation-vec-transpose"),
    ("commutation matrix vec transpose", "commutation-vec-transpose"),
    ("hadamard trace", "hadamard-trace-move-factor"),
    ("frobenius norm", "frobenius-norm-as-trace"),
    ("frobenius norm as trace", "frobenius-norm-as-trace"),
    ("derivative of inverse", "differential-of-inverse"),
    ("d(inv(X))", "differential-of-inverse"),
    ("quadratic form gradient", "gradient-of-quadratic-form"),
    ("kroneker mixed product", "kronecker-mixed-product"),
    ("kronecker inverse", "kronecker-inverse"),
    ("det of kron", "kronecker-determinant"),
    ("sylvester determinant", "sylvester-determinant-identity"),
    ("det(I + AB)", "sylvester-determinant-identity"),
    ("push through identity", "push-through-identity"),
    ("schur complement inverse", "schur-complement-inverse"),
    ("block inverse", "schur-complement-inverse"),
    ("vec of outer product", "vec-of-outer-product"),
    ("diag(A @ diagm(x) @ B)", "diag-of-product-with-diagonal-middle"),
    ("trace entrywise sum", "trace-product-entrywise-sum"),
    ("grad of trace AXB", "gradient-of-trace-axb"),
    ("jacobi formula", "differential-of-determinant"),
    ("differentail of determinant", "differential-of-determinant"),
    ("least squares gradient", "gradient-of-least-squares"),
    ("schur product commutative", "hadamard-commutative"),
    ("elementwise product distributes", "hadamard-distributive"),
    ("orthogonal invariance of the norm", "frobenius-norm-orthogonal-left"),
    ("determinants of products", "determinant-of-product"),
    ("gradient logsumexp", "gradient-of-logsumexp"),
    ("identification matrix variable", "identification-matrix-variable"),
    ("sum(R**2)", "sum-of-hadamard-square-is-trace"),
    ("differential of kronecker product", "differential-of-kronecker"),
    ("TRANSPOSE OF KRONECKER", "kronecker-transpose"),
    ("inverse of transpose", "inverse-of-transpose"),
]


@pytest.mark.parametrize("query, expected", PRACTITIONER_QUERIES)
def test_practitioner_query_lands_in_top_three(query, expected):
    ids = [i.id for i in identities.search(query, limit=3)]
    assert expected in ids, f"{query!r}: got {ids}"


def test_at_least_twenty_five_practitioner_queries():
    assert len(PRACTITIONER_QUERIES) >= 25
    known = {i.id for i in identities.all()}
    assert {e for _, e in PRACTITIONER_QUERIES} <= known


@pytest.mark.parametrize(
    "variants",
    [
        ("Kronecker", "kronecker", "KRON", "kron", "kroneker", "Kronecker products"),
        ("determinant lemma", "determinant lemmas", "Determinant-Lemma", "det lemma"),
        ("woodbury", "Woodbury's", "woodbery", "wodbury"),
        ("hadamard product", "entrywise product", "elementwise product", "Schur product"),
    ],
)
def test_case_plurals_hyphens_synonyms_and_typos(variants):
    first = [i.id for i in identities.search(variants[0], limit=3)]
    for v in variants[1:]:
        got = [i.id for i in identities.search(v, limit=3)]
        assert set(got) & set(first), f"{v!r} gave {got}, {variants[0]!r} gave {first}"


def test_tag_filter_keeps_only_tagged_identities():
    hits = identities.search("product", tags=["kronecker"], limit=50)
    assert hits and all("kronecker" in i.tags for i in hits)
    hits = identities.search("inverse", tags=("derivative",), limit=50)
    assert hits and all("derivative" in i.tags for i in hits)
    # a synonym is accepted as a tag name
    assert identities.search("trace", tags="kron", limit=5)


def test_empty_query_with_tags_lists_the_family():
    hits = identities.search("", tags=["commutation"], limit=100)
    assert len(hits) >= 5 and all("commutation" in i.tags for i in hits)
    assert identities.search("") == []
    assert identities.search("   zzzzqqq  ") == []


def test_limit_and_order_are_deterministic():
    a = [i.id for i in identities.search("trace", limit=7)]
    b = [i.id for i in identities.search("trace", limit=7)]
    assert a == b and len(a) == 7
    scored = identities.search_with_scores("trace", limit=7)
    scores = [s for _, s in scored]
    assert scores == sorted(scores, reverse=True)


def test_search_is_fast():
    queries = [q for q, _ in PRACTITIONER_QUERIES]
    identities.search("warm up")
    start = time.perf_counter()
    for q in queries:
        identities.search(q)
    per_query = (time.perf_counter() - start) / len(queries)
    assert per_query < 0.005, f"{per_query * 1000:.2f} ms per query"


def test_search_returns_identity_objects():
    (hit,) = identities.search("vec ABC", limit=1)
    assert isinstance(hit, identities.Identity)
    assert hit.latex.startswith(r"\operatorname{vec}")


@pytest.mark.parametrize(
    "query, expected",
    [
        ("gradient of x^T A x", "gradient-of-quadratic-form"),
        ("determinant of I + uv^T", "determinant-identity-plus-outer"),
        ("d/dX a^T X b", "gradient-of-bilinear-form-in-matrix"),
        ("derivative of X^{-1}", "differential-of-inverse"),
        ("K_mn vec", "commutation-vec-transpose"),
        ("normal equations", "gradient-of-least-squares"),
        ("trace of product of matrices", "trace-cyclic-two"),
    ],
)
def test_math_notation_in_queries(query, expected):
    ids = [i.id for i in identities.search(query, limit=3)]
    assert expected in ids, f"{query!r}: got {ids}"


def test_search_rejects_non_text():
    with pytest.raises(TypeError):
        identities.search(None)

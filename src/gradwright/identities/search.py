"""Loading the catalogue and finding identities by the words a practitioner types.

Ranking is a small weighted word index over ids, titles, tags and the operator names used in
each side, tolerant of case, plurals, hyphens, synonyms (kron = kronecker) and small typos.
"""

from __future__ import annotations

import ast
import math
import re
from collections import defaultdict
from functools import lru_cache

from .catalogue import RECORDS
from .record import Identity, operator_names

__all__ = ["all_identities", "get", "search", "search_with_scores", "tags", "normalize_words"]

# ---------------------------------------------------------------------------------------------
# words
# ---------------------------------------------------------------------------------------------

_STOPWORDS = frozenset(
    "a an the of for in on to with and or is as by at its it from into over under how what "
    "which that this when where are be we i my me your matrix wrt respect".split()
)

_IRREGULAR = {
    "matrices": "matrix",
    "indices": "index",
    "vertices": "vertex",
    "axes": "axis",
    "inverses": "inverse",
    "traces": "trace",
    "squares": "square",
    "differentials": "differential",
    "derivatives": "derivative",
    "complements": "complement",
}

_T = r"(?:\^\s*\{?\s*t\s*\}?|'|\u1d40)"  # a transpose mark: ^T, ^{T}, ', or the superscript T

# phrases read as one word, applied to documents and queries alike (after lower-casing)
_PHRASES = (
    (re.compile(r"\b([a-z])\s*" + _T + r"\s*[a-z]\s*\1\b"), " quadratic form "),
    (re.compile(r"\b[a-z]\s*" + _T + r"\s*[a-z]\s*[a-z]\b"), " bilinear form "),
    (re.compile(r"\b[a-z]\s*[a-z]\s*" + _T + r"(?![a-z])"), " outer product "),
    (re.compile(r"\b[a-z]\s*\^\s*\{?\s*t\s*\}?(?![a-z])"), " transpose "),
    (re.compile(r"\^\s*\{?\s*-\s*1\s*\}?"), " inverse "),
    (re.compile(r"\bd\s*/\s*d\s*[a-z]\b"), " derivative "),
    (re.compile(r"\bk_\{?[a-z0-9,]+\}?"), " commutation "),
    (re.compile(r"\bw\.r\.t\.?"), " "),
    (re.compile(r"\blog[\s-]*det(erminant)?s?\b"), " logdet "),
    (re.compile(r"\bschur[\s-]+products?\b"), " hadamard "),
    (re.compile(r"\btriple[\s-]+products?\b"), " triple product "),
    (re.compile(r"\bpositive[\s-]+definite\b"), " spd "),
    (re.compile(r"\bleast[\s-]+squares?\b"), " leastsquares "),
    (re.compile(r"\bpush[\s-]*through\b"), " pushthrough "),
    (re.compile(r"\brank[\s-]*(one|1)\b"), " rankone "),
    (re.compile(r"\blow[\s-]*rank\b"), " lowrank "),
    (re.compile(r"\blog[\s-]*sum[\s-]*exp\b"), " logsumexp "),
    (re.compile(r"\bvec[\s-]*permutation\b"), " commutation "),
    (re.compile(r"\bsherman[\s-]*morrison\b"), " sherman morrison shermanmorrison "),
)

# groups of words that mean the same thing to a searcher (first word is the canonical one)
_SYNONYM_GROUPS = (
    ("kronecker", "kron", "tensor", "otimes"),
    ("determinant", "det"),
    ("inverse", "inv", "inversion", "invert", "reciprocal"),
    ("trace", "tr"),
    ("hadamard", "elementwise", "entrywise", "pointwise", "circ"),
    ("differential", "d", "dx"),
    ("derivative", "gradient", "grad", "deriv", "partial", "nabla"),
    ("triple", "abc", "axb"),
    ("vec", "vectorization", "vectorisation", "vectorize", "vectorise", "vectorized"),
    ("transpose", "transposition", "transposed"),
    ("inner", "dot"),
    ("diagonal", "diag", "diagm"),
    ("power", "mpow", "pow"),
    ("exp", "exponential"),
    ("log", "logarithm", "ln"),
    ("euclidean", "l2"),
    ("spd", "posdef"),
    ("cyclic", "cycle", "cyclical", "rotate", "rotation"),
    ("solve", "system"),
    ("leastsquares", "lstsq", "regression"),
    ("sum", "addition", "plus"),
    ("product", "multiplication", "matmul"),
    ("identity", "eye"),
    ("commutation", "commutator"),
    ("sylvester",),
    ("block", "partitioned", "blockwise"),
    ("quadratic", "quad"),
    ("orthogonal", "orthonormal"),
    ("norm", "length"),
    ("frobenius", "fro"),
    ("softmax",),
    ("logsumexp", "lse"),
)

# a search for the first word also finds the others, a little less strongly
_RELATED = {
    "derivative": (("differential", 0.8), ("identification", 0.5)),
    "differential": (("derivative", 0.7),),
    "inverse": (("solve", 0.5),),
    "determinant": (("logdet", 0.6),),
    "logdet": (("determinant", 0.5),),
    "schur": (("hadamard", 0.6),),
    "hadamard": (("schur", 0.3),),
    "woodbury": (("shermanmorrison", 0.4), ("pushthrough", 0.4)),
    "shermanmorrison": (("woodbury", 0.4),),
    "norm": (("frobenius", 0.5),),
    "frobenius": (("norm", 0.5),),
    "commutation": (("permutation", 0.6),),
    "lemma": (("determinant", 0.3),),
}

_CANON: dict[str, str] = {}
for _group in _SYNONYM_GROUPS:
    for _word in _group:
        _CANON.setdefault(_word, _group[0])


def _stem(word: str) -> str:
    if word in _IRREGULAR:
        return _IRREGULAR[word]
    if len(word) > 4 and word.endswith("ies"):
        return word[:-3] + "y"
    if len(word) > 4 and word.endswith("sses"):
        return word[:-2]
    if len(word) > 3 and word.endswith("s") and not word.endswith(("ss", "us", "is")):
        return word[:-1]
    return word


def normalize_words(text: str, *, keep_stopwords: bool = False) -> list[str]:
    """Lower-case, join known phrases, split on anything but letters and digits, stem, map
    synonyms to one word. `"Kroneker products"` -> `["kroneker", "product"]` (typos are
    handled by the search, not here)."""
    text = text.lower()
    for pattern, replacement in _PHRASES:
        text = pattern.sub(replacement, text)
    out = []
    for raw in re.split(r"[^a-z0-9]+", text):
        if not raw:
            continue
        if not keep_stopwords and raw in _STOPWORDS:
            continue
        word = _stem(raw)
        if not keep_stopwords and word in _STOPWORDS:
            continue
        out.append(_CANON.get(word, _CANON.get(raw, word)))
    return out


# ---------------------------------------------------------------------------------------------
# the index
# ---------------------------------------------------------------------------------------------

_FIELD_WEIGHTS = {"id": 3.0, "title": 2.5, "aliases": 2.5, "tags": 2.0, "lhs": 1.5, "rhs": 0.75}


class _Index:
    def __init__(self, identities: list[Identity]):
        self.identities = identities
        self.by_id = {ident.id: ident for ident in identities}
        self.postings: dict[str, list[tuple[int, float]]] = defaultdict(list)
        self.lengths: list[int] = []
        self.phrases: list[tuple[str, ...]] = []
        self.signatures: list[tuple[frozenset, frozenset]] = []
        for i, ident in enumerate(identities):
            fields = {
                "id": normalize_words(ident.id.replace("-", " ")),
                "title": normalize_words(ident.title),
                "aliases": [w for a in ident.aliases for w in normalize_words(a)],
                "tags": [w for t in ident.tags for w in normalize_words(t)],
                "lhs": [w for op in operator_names(ident.lhs) for w in normalize_words(op)],
                "rhs": [w for op in operator_names(ident.rhs) for w in normalize_words(op)],
            }
            weights: dict[str, float] = {}
            for name, words in fields.items():
                for word in set(words):
                    w = _FIELD_WEIGHTS[name]
                    # the best field counts fully, further evidence a quarter
                    if word in weights:
                        weights[word] = max(weights[word], w) + 0.25 * min(weights[word], w)
                    else:
                        weights[word] = w
            for word, w in weights.items():
                self.postings[word].append((i, w))
            self.lengths.append(len(weights))
            self.phrases.append(
                tuple(
                    " ".join(normalize_words(t, keep_stopwords=True))
                    for t in (ident.title, *ident.aliases)
                )
            )
            self.signatures.append((formula_signature(ident.lhs), formula_signature(ident.rhs)))
        self.vocabulary = sorted(self.postings)
        n = len(identities)
        self.idf = {w: math.log(1.0 + n / (1.0 + len(p))) for w, p in self.postings.items()}
        self.mean_length = sum(self.lengths) / max(1, n)

    @lru_cache(maxsize=4096)  # noqa: B019 - one index per process, cached on purpose
    def alternatives(self, word: str) -> tuple[tuple[str, float], ...]:
        """Index words a query word may stand for, with a confidence factor."""
        alts: dict[str, float] = {}

        def add(w: str, f: float):
            if w in self.postings and f > alts.get(w, 0.0):
                alts[w] = f

        add(word, 1.0)
        for related, f in _RELATED.get(word, ()):
            add(related, f)
        if word not in self.postings:
            for cand in self.vocabulary:
                if len(word) >= 4 and cand.startswith(word):
                    add(cand, 0.75)
                limit = 2 if len(word) >= 7 else 1 if len(word) >= 4 else 0
                if limit and abs(len(cand) - len(word)) <= limit:
                    dist = _edit_distance(word, cand, limit)
                    if dist <= limit:
                        add(cand, 0.85 if dist == 1 else 0.7)
            for cand, f in list(alts.items()):
                for related, g in _RELATED.get(cand, ()):
                    add(related, f * g)
        return tuple(sorted(alts.items(), key=lambda kv: -kv[1]))

    def score(self, query: str) -> dict[int, float]:
        out = self.score_words(query)
        signature = formula_signature(query)
        if signature:
            for doc, (lhs, rhs) in enumerate(self.signatures):
                sim = max(_jaccard(signature, lhs), 0.8 * _jaccard(signature, rhs))
                if sim > 0.2:
                    out[doc] = out.get(doc, 0.0) + 40.0 * sim**2
        return out

    def score_words(self, query: str) -> dict[int, float]:
        words = [w for w in dict.fromkeys(normalize_words(query)) if len(w) > 1 or w == "d"]
        if not words:
            return {}
        totals: dict[int, float] = defaultdict(float)
        matched: dict[int, int] = defaultdict(int)
        for word in words:
            best: dict[int, float] = {}
            for alt, factor in self.alternatives(word):
                idf = self.idf[alt]
                for doc, w in self.postings[alt]:
                    s = factor * idf * w
                    if s > best.get(doc, 0.0):
                        best[doc] = s
            for doc, s in best.items():
                totals[doc] += s
                matched[doc] += 1
        phrase = " ".join(normalize_words(query, keep_stopwords=True))
        out = {}
        for doc, total in totals.items():
            coverage = matched[doc] / len(words)
            length = 0.9 + 0.1 * self.lengths[doc] / self.mean_length
            s = total * coverage**2 / length
            phrases = self.phrases[doc]
            if phrase and phrase in phrases:
                s *= 2.0
            elif len(words) > 1 and phrase and any(phrase in p for p in phrases):
                s *= 1.5
            out[doc] = s
        return out


def formula_signature(text: str) -> frozenset:
    """The operations of a formula and which operation feeds which, names left out:
    `vec(A @ X @ B)` -> {vec, matmul, vec>matmul, matmul>matmul, ...}. Empty for plain words."""
    try:
        tree = ast.parse(text.strip(), mode="eval").body
    except (SyntaxError, ValueError):
        return frozenset()
    labels: set[str] = set()

    def label(node) -> str:
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            return node.func.id
        if isinstance(node, ast.BinOp):
            return type(node.op).__name__.lower()
        if isinstance(node, ast.UnaryOp):
            return "neg"
        if isinstance(node, ast.Attribute):
            return node.attr
        if isinstance(node, ast.Constant):
            return "number"
        return "leaf"

    def walk(node, parent: str | None):
        mine = label(node)
        if mine != "leaf":
            labels.add(mine)
        if parent is not None:
            labels.add(f"{parent}>{mine}")
        children = []
        if isinstance(node, ast.Call):
            children = node.args
        elif isinstance(node, ast.BinOp):
            children = [node.left, node.right]
        elif isinstance(node, ast.UnaryOp):
            children = [node.operand]
        elif isinstance(node, ast.Attribute):
            children = [node.value]
        for child in children:
            walk(child, mine)

    walk(tree, None)
    if not any(">" in lab for lab in labels):
        return frozenset()
    return frozenset(labels)


def _jaccard(a: frozenset, b: frozenset) -> float:
    if not a or not b:
        return 0.0
    return len(a & b) / len(a | b)


def _edit_distance(a: str, b: str, limit: int) -> int:
    """Optimal-string-alignment distance (a swap of neighbours counts 1), cut off above limit."""
    if a == b:
        return 0
    prev2 = None
    prev = list(range(len(b) + 1))
    for i in range(1, len(a) + 1):
        cur = [i] + [0] * len(b)
        row_min = cur[0]
        for j in range(1, len(b) + 1):
            cost = 0 if a[i - 1] == b[j - 1] else 1
            cur[j] = min(prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + cost)
            if (
                prev2 is not None
                and i > 1
                and j > 1
                and a[i - 1] == b[j - 2]
                and a[i - 2] == b[j - 1]
            ):
                cur[j] = min(cur[j], prev2[j - 2] + 1)
            row_min = min(row_min, cur[j])
        if row_min > limit:
            return limit + 1
        prev2, prev = prev, cur
    return prev[-1]


@lru_cache(maxsize=1)
def _index() -> _Index:
    return _Index([Identity.from_record(r) for r in RECORDS])


# ---------------------------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------------------------


def all_identities() -> list[Identity]:
    """Every identity of the catalogue, in catalogue order.

    >>> len(all_identities()) >= 100
    True
    """
    return list(_index().identities)


def get(identity_id: str) -> Identity:
    """The identity with this id; `KeyError` (naming close ids) when there is none.

    >>> get("woodbury-identity").title
    'Woodbury identity: inverse of a sum with a low-rank product'
    """
    index = _index()
    try:
        return index.by_id[identity_id]
    except KeyError:
        hits = [i.id for i in search(identity_id.replace("-", " "), limit=3)]
        hint = f"; did you mean {', '.join(hits)}?" if hits else ""
        raise KeyError(f"no identity with id {identity_id!r}{hint}") from None


def _tag_filter(identities: list[Identity], wanted) -> list[int]:
    if wanted is None:
        return list(range(len(identities)))
    if isinstance(wanted, str):
        wanted = [wanted]
    wanted_words = [set(normalize_words(t)) for t in wanted]
    keep = []
    for i, ident in enumerate(identities):
        have = {w for t in ident.tags for w in normalize_words(t)}
        if all(ws <= have for ws in wanted_words):
            keep.append(i)
    return keep


def search_with_scores(text: str, *, tags=None, limit: int = 10) -> list[tuple[Identity, float]]:
    """Like `search`, with each identity's score (higher is better)."""
    if not isinstance(text, str):
        raise TypeError(f"search() takes the words to look for as text, got {type(text).__name__}")
    index = _index()
    allowed = _tag_filter(index.identities, tags)
    if not text.strip():
        if tags is None:
            return []
        return [(index.identities[i], 0.0) for i in allowed[:limit]]
    scores = index.score(text)
    allowed_set = set(allowed)
    ranked = sorted(
        ((doc, s) for doc, s in scores.items() if doc in allowed_set),
        key=lambda kv: (-kv[1], kv[0]),
    )
    return [(index.identities[doc], s) for doc, s in ranked[:limit]]


def search(text: str, *, tags=None, limit: int = 10) -> list[Identity]:
    """Identities ranked by how well they match the words typed.

    Words are matched in ids, titles, tags and the operator names of both sides, ignoring case,
    plurals and hyphens, with synonyms (`kron`, `det`, `inv`, `tr`, `grad`, `d`, `ABC`) and small
    typos forgiven. `tags` keeps only identities carrying every tag given.

    >>> search("vec ABC")[0].id
    'vec-triple-product'
    """
    return [ident for ident, _ in search_with_scores(text, tags=tags, limit=limit)]


def tags() -> dict[str, int]:
    """Every tag used in the catalogue with the number of identities carrying it."""
    counts: dict[str, int] = defaultdict(int)
    for ident in _index().identities:
        for t in ident.tags:
            counts[t] += 1
    return dict(sorted(counts.items(), key=lambda kv: (-kv[1], kv[0])))

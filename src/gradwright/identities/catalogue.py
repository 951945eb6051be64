"""The identity catalogue: plain data, one record per identity, no logic.

To add an identity, copy a record, change every field, and run
`python -m pytest tests/identities`: the tests parse, evaluate and check every record.

Fields: `id` (stable kebab-case), `title` (plain words), `tags` (families first), `declarations`
(formula-language declaration lines), `lhs`, `rhs` (formula-language text; `d(X)` is the
differential of the declared symbol X), `conditions` (what shapes cannot say, as lines
`"SUBJECTS: PROPERTY"` read by `conditions.py`: `"A, A + B: invertible"`, `"c: positive"`,
`"g: constant in t"`),
`latex_lhs`, `latex_rhs`, `source` (publication, equation, "(from memory)" when not checked),
`kind` ("equality", "differential" or "derivative"; a derivative record has `lhs` the scalar
function, `rhs` its gradient and `wrt` the variable). Optional: `aliases`, other names a
practitioner may search for ("matrix inversion lemma"); `apply`, the directions in which
`applicable` offers the identity as a rewrite: "both" (the default), "forward" (lhs -> rhs),
"backward" (rhs -> lhs) or "none"; `notes`, a remark in plain words (no formula source).

Every record is stated at symbolic sizes (`tr(I_n) = n`, never `tr(I_4) = 4`): dims are names
from the declarations, and a record whose sides use a dim only as a size (`eye(n)`, `n`)
declares a symbol of that shape so that the dim exists.
"""

from .catalogue_derivatives import DERIVATIVES_RECORDS
from .catalogue_determinant import DETERMINANT_RECORDS
from .catalogue_differentials import DIFFERENTIALS_RECORDS
from .catalogue_hadamard import HADAMARD_RECORDS
from .catalogue_inverse import INVERSE_RECORDS
from .catalogue_kronecker import KRONECKER_RECORDS
from .catalogue_trace import TRACE_RECORDS

RECORDS = [
    *TRACE_RECORDS,
    *KRONECKER_RECORDS,
    *INVERSE_RECORDS,
    *DETERMINANT_RECORDS,
    *HADAMARD_RECORDS,
    *DIFFERENTIALS_RECORDS,
    *DERIVATIVES_RECORDS,
]

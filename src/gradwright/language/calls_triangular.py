"""Triangular parts of matrices: `tril(A)`, the lower triangle with the diagonal (NumPy's
`np.tril` with its default k=0), the space a `lower` variable lives in."""

from __future__ import annotations

from .. import expr as E
from .registry import register


@register("tril", 1, 1)
def _tril(reader, node, args, keywords):
    (a,) = args
    if not E.is_matrix_shape(a.shape):
        reader.fail_node(f"tril needs a matrix, got a {E.describe(a)}", node.args[0])
    return E.tril(a)

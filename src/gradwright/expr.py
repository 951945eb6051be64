"""Expression nodes: immutable, each knowing its shape; structure predicates; smart constructors.

Shapes are internal 2-tuples `(rows, cols)` of `Dim`, where `None` marks the unit axis:
`(None, None)` is a scalar, `(n, None)` a (column) vector, `(None, n)` its transpose.

The code lives in modules by family (dims and shapes, core nodes, entrywise, structural,
canonical constructors and forms, traversal); this module gathers them, so that
`from gradwright.expr import X` and `E.X` reach every name, and holds `NODE_CLASSES`.
"""

from __future__ import annotations

from fractions import Fraction  # noqa: F401

from .entrywise import EXTRA_ENTRYWISE  # noqa: F401
from .errors import ShapeError  # noqa: F401
from .expr_canonical import (  # noqa: F401
    _UNIT,
    ONE,
    SYMMETRIC_WORDS,
    ZERO,
    _cancels,
    _factor_order,
    _is_symmetric,
    _transpose,
    add,
    const,
    div,
    is_diagonal,
    is_one,
    is_spd,
    is_symmetric,
    is_zero,
    matmul,
    mul,
    neg,
    power,
    split_coef,
    sub,
    transpose,
    zero_like,
)
from .expr_core import (  # noqa: F401
    Add,
    Commutation,
    Const,
    D,
    Differential,
    Expr,
    Identity,
    MatMul,
    Mul,
    Named,
    Ones,
    Pi,
    SizeOf,
    Symbol,
    Transpose,
    Zero,
    _arg_key,
    _common_shape,
    matmul_mismatch,
)
from .expr_elementwise import (  # noqa: F401
    ELEMENTWISE,
    Func,
    LogSumExp,
    Norm,
    Power,
    Softmax,
    Sum,
)
from .expr_forms import (  # noqa: F401
    FULL,
    _terms_broadcast,
    diag,
    diagm,
    index,
    inverse,
    kron,
    selection,
    solve,
    summation,
    sym_part,
    trace,
    tril,
    unvec,
    vec,
)
from .expr_shapes import (  # noqa: F401
    SCALAR,
    Dim,
    OptDim,
    Shape,
    describe,
    dim_mul,
    is_col,
    is_matrix_shape,
    is_row,
    is_scalar_shape,
    is_vector_shape,
    shape_size,
    shape_text,
    user_shape,
)
from .expr_structural import (  # noqa: F401
    Det,
    Diag,
    Diagm,
    Index,
    Inverse,
    Kron,
    KronContract,
    LogDet,
    MatPow,
    Solve,
    Trace,
    Tril,
    Unvec,
    Vec,
    _axis_take,
    _need_square,
)
from .expr_traversal import (  # noqa: F401
    expanded_size,
    inline_named,
    rebuild_smart,
    substitute,
    walk,
)

NODE_CLASSES = (
    Symbol, Differential, Const, Identity, Ones, Zero, Commutation, Add, Mul, MatMul, Transpose,
    Power, Func, Trace, Det, LogDet, Inverse, Solve, Kron, Vec, Unvec, Diag, Diagm, Sum, Norm,
    LogSumExp, Softmax, MatPow, Named, D, KronContract,
    Tril,
)  # fmt: skip
NODE_CLASSES += (SizeOf, Pi, Index)

# node families in their own modules; imported last because they build on the classes above
from .complex_nodes import COMPLEX_NODE_CLASSES, Abs, Conj, Imag, ImagUnit, Real  # noqa: E402, F401
from .matrix_functions import NODES as _MATRIX_NODES  # noqa: E402

NODE_CLASSES = NODE_CLASSES + _MATRIX_NODES

# reductions over an axis, row-wise softmax and maximum/minimum live in their own module; they
# are built from the constructors above, so they are imported last
from .expr_axis import AXIS_NODES, AxisReduce, AxisSoftmax, Extremum, TieWeights  # noqa: E402, F401

NODE_CLASSES = NODE_CLASSES + AXIS_NODES

NODE_CLASSES = NODE_CLASSES + COMPLEX_NODE_CLASSES

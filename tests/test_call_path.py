"""The call path of generated functions: the function the user holds is the NumPy module's own
(no wrapper), and what its fast path cannot take (a missing or positional argument, another
library's array, an np.matrix) is named, routed or converted by the slow path."""

from __future__ import annotations

import inspect

import numpy as np
import pytest
import torch

from gradwright import derive

BLOCK = "X: (n, p)\ny: (n,)\nw: (p,)\nf = sum((X @ w - y)**2)"
RNG = np.random.default_rng(7)
POINT = {"X": RNG.standard_normal((5, 3)), "y": RNG.standard_normal(5), "w": RNG.standard_normal(3)}


def hand_gradient(X, y, w):
    return 2 * X.T @ (X @ w - y)  # d/dw |Xw - y|² = 2 Xᵀ(Xw - y) (common practice)


def test_the_function_is_the_module_function_with_a_clean_signature():
    d = derive(BLOCK, wrt="w")
    g = d.gradient_function()
    assert g is d._namespace()["gradient_w"]
    assert str(inspect.signature(g)) == "(*, X, y, w)"
    jvp = d.jvp_function()
    assert str(inspect.signature(jvp)) == "(_direction, /, *, X, y, w)"


def test_missing_arguments_are_named_after_a_warm_fast_path():
    g = derive(BLOCK, wrt="w").gradient_function()
    np.testing.assert_allclose(g(**POINT), hand_gradient(**POINT), rtol=1e-13)
    with pytest.raises(TypeError, match="missing 1 required keyword-only argument: 'y'"):
        g(X=POINT["X"], w=POINT["w"])
    with pytest.raises(TypeError, match="missing 2 required keyword-only arguments: 'X' and 'w'"):
        g(y=POINT["y"])


def test_positional_arrays_are_refused_in_words_also_with_a_direction():
    d = derive(BLOCK, wrt="w")
    d.gradient_function()(**POINT)  # the fast path is warm
    with pytest.raises(TypeError, match=r"^jvp_w\(\) got 1 positional argument: pass arrays by "):
        d.jvp_function()(np.ones(3), POINT["X"], y=POINT["y"], w=POINT["w"])
    with pytest.raises(TypeError, match=r"jvp_w\(direction, X=\.\.\., y=\.\.\., w=\.\.\.\)"):
        d.jvp_function()(np.ones(3), POINT["X"], POINT["y"], POINT["w"])


def test_other_types_after_a_warm_fast_path():
    g = derive(BLOCK, wrt="w").gradient_function()
    want = hand_gradient(**POINT)
    g(**POINT)
    got = g(**{k: torch.asarray(v) for k, v in POINT.items()})  # routed to torch
    assert isinstance(got, torch.Tensor)
    np.testing.assert_allclose(got.numpy(), want, rtol=1e-13)
    got = g(X=np.asmatrix(POINT["X"]), y=POINT["y"].tolist(), w=POINT["w"])  # converted
    assert type(got) is np.ndarray
    np.testing.assert_allclose(got, want, rtol=1e-13)
    np.testing.assert_allclose(g(**POINT), want, rtol=1e-13)  # and back on the fast path


def test_an_exported_module_converts_other_arrays_itself():
    d = derive(BLOCK, wrt="w")
    ns: dict = {}
    exec(compile(d.source(), "<exported>", "exec"), ns)  # noqa: S102 - our own generated text
    g = ns["gradient_w"]
    got = g(**{k: torch.asarray(v) for k, v in POINT.items()})  # NumPy reads CPU tensors
    np.testing.assert_allclose(got, hand_gradient(**POINT), rtol=1e-13)
    with pytest.raises(TypeError, match="positional arguments: pass arrays by keyword"):
        g(POINT["X"], POINT["y"], POINT["w"])


def test_value_is_a_numpy_scalar_of_the_arrays_dtype():
    vg = derive(BLOCK, wrt="w").value_and_gradient_function()
    v, _ = vg(**POINT)
    assert type(v) is np.float64
    v32, g32 = vg(**{k: v.astype(np.float32) for k, v in POINT.items()})
    assert type(v32) is np.float32 and g32.dtype == np.float32
    v = derive("A: (n, n)\nf = trace(A)", wrt="A").function()(A=np.eye(3))
    assert type(v) is np.float64 and v == 3.0

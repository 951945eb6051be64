"""Huge, deep and repetitive blocks end quickly: a FormulaError or a correct result, never a hang.

Each case runs in its own interpreter with a timeout, so that a hang, a stack overflow or a
MemoryError cannot stall or crash the suite. The bound (2 s of CPU time inside the child, imports
excluded; CPU time, so that other work on a shared machine does not count) is generous: it
is a ceiling, not a benchmark.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import pytest

BOUND_SECONDS = 2.0
TIMEOUT_SECONDS = 15.0

# the child: build the block from `BUILD` (Python source giving `block`), derive it, run the
# stages asked for, and report the outcome as one JSON line
CHILD = textwrap.dedent(
    """
    import json, sys, time
    import numpy as np
    import gradwright
    from gradwright import FormulaError

    case = json.loads(sys.argv[1])
    ns = {}
    exec(case["build"], ns)  # the test's own builder code, never user input
    block = ns["block"]
    out = {"outcome": "ok", "times": {}}
    t0 = time.process_time()
    try:
        d = gradwright.derive(block, wrt=case["wrt"])
        out["times"]["derive"] = time.process_time() - t0
        for stage in case["stages"]:
            t = time.process_time()
            if stage == "gradient":
                d.gradient(case["wrt"])
            elif stage == "latex":
                out["latex_chars"] = len(d.latex())
            elif stage == "text_steps":
                out["text_chars"] = len(d.text_steps())
            elif stage == "source":
                out["source_chars"] = len(d.source())
            elif stage == "numeric":
                arrays = ns["arrays"]
                out["value"] = np.asarray(d.function()(**arrays)).tolist()
                out["grad"] = np.asarray(d.gradient_function()(**arrays)).tolist()
            out["times"][stage] = time.process_time() - t
    except FormulaError as err:
        out["outcome"] = "FormulaError"
        out["message"] = str(err)[:300]
        out["line"] = err.line
    except BaseException as err:  # anything else is a failure the parent reports
        out["outcome"] = type(err).__name__
        out["message"] = str(err)[:300]
    out["elapsed"] = time.process_time() - t0
    print(json.dumps(out))
    """
)


def run_case(build: str, wrt="x", stages=(), timeout=TIMEOUT_SECONDS) -> dict:
    case = {"build": textwrap.dedent(build), "wrt": wrt, "stages": list(stages)}
    try:
        proc = subprocess.run(
            [sys.executable, "-c", CHILD, json.dumps(case)],
            capture_output=True,
            text=True,
            timeout=timeout,
        )
    except subprocess.TimeoutExpired:
        pytest.fail(f"the case did not finish within {timeout} s (a hang)")
    assert proc.returncode == 0, f"the child crashed ({proc.returncode}): {proc.stderr[-2000:]}"
    result = json.loads(proc.stdout.strip().splitlines()[-1])
    assert result["outcome"] in ("ok", "FormulaError"), result
    assert result["elapsed"] < BOUND_SECONDS, result
    return result


def expect_error(result: dict, *words: str) -> None:
    assert result["outcome"] == "FormulaError", result
    for w in words:
        assert w in result["message"], result["message"]


# --- deep nesting ----------------------------------------------------------------------------


def test_thousands_of_parentheses():
    r = run_case('block = "x: ()\\nf = " + "(" * 3000 + "x" + ")" * 3000')
    expect_error(r, "too many nested parentheses", "line 2")


def test_parentheses_beyond_our_depth_but_within_pythons():
    # CPython's tokenizer reads up to 200 open brackets (from memory); ours stop at 120 levels
    r = run_case('block = "x: ()\\nf = " + "exp(" * 150 + "x" + ")" * 150')
    expect_error(r, "nested more than 120 levels")


def test_nesting_within_the_limit_is_derived():
    r = run_case(
        """
        block = "x: ()\\nf = " + "(" * 100 + "x" + ")" * 100 + " * 3"
        arrays = {"x": 2.0}
        """,
        stages=["gradient", "latex", "source", "numeric"],
    )
    assert r["outcome"] == "ok" and r["value"] == 6.0 and r["grad"] == 3.0


def test_thousands_of_brackets():
    expect_error(run_case('block = "x: ()\\nf = " + "[" * 3000 + "]" * 3000'), "line 2")


def test_hundred_thousand_unary_minus_on_one_line():
    r = run_case('block = "x: ()\\nf = " + "-" * 100_000 + "x"')
    expect_error(r, "characters long; the limit is 50,000")


def test_forty_thousand_unary_minus_within_the_line_limit():
    r = run_case('block = "x: ()\\nf = " + "-" * 40_000 + "x"')
    expect_error(r, "nested")


def test_hundred_thousand_unary_minus_over_many_lines():
    # 1,990 lines of 50 signs: inside every limit on size, so the depth limit must catch it
    r = run_case('block = "x: ()\\nf = (\\n" + ("-" * 50 + "\\n") * 1990 + "x)"')
    expect_error(r, "nested")


def test_even_number_of_minus_signs_is_derived():
    r = run_case(
        """
        block = "x: (n,)\\nf = sum(" + "-" * 100 + "x * x)"
        arrays = {"x": [1.0, 2.0]}
        """,
        stages=["gradient", "numeric"],
    )
    assert r["outcome"] == "ok" and r["value"] == 5.0 and r["grad"] == [2.0, 4.0]


def test_deep_attribute_chain():
    expect_error(run_case('block = "A: (n, n)\\nf = trace(A" + ".T" * 10_000 + ")"'), "line 2")


def test_deep_power_tower_of_a_symbol():
    expect_error(run_case('block = "x: ()\\nf = " + "x**" * 5000 + "x"'), "line 2")


# --- long input ------------------------------------------------------------------------------


def test_twenty_thousand_term_sum():
    r = run_case('block = "x: ()\\nf = " + " + ".join(["x"] * 20_000)')
    expect_error(r, "line 2")


def test_twenty_thousand_term_sum_over_lines():
    r = run_case('block = "x: ()\\nf = (" + "\\n + ".join(["x"] * 20_000) + ")"')
    expect_error(r, "the limit is 2,000")


def test_two_thousand_term_sum_is_derived_correctly():
    r = run_case(
        """
        block = "x: ()\\nf = " + " + ".join(f"{i} * x" for i in range(1, 2001))
        arrays = {"x": 1.0}
        """,
        stages=["gradient", "latex", "source", "numeric"],
    )
    assert r["outcome"] == "ok" and r["grad"] == 2000 * 2001 / 2


def test_two_thousand_term_sum_of_distinct_symbols():
    r = run_case(
        """
        decls = [f"x{i}: ()" for i in range(300)]
        block = "\\n".join(decls) + "\\nf = " + " + ".join(f"x{i % 300} * x0" for i in range(2000))
        """,
        wrt="x0",
        stages=["gradient", "source"],
    )
    assert r["outcome"] == "ok"


def test_matrix_product_chain():
    r = run_case('block = "A: (n, n)\\nf = trace(" + " @ ".join(["A"] * 5000) + ")"', wrt="A")
    expect_error(r, "line 2")


def test_multi_megabyte_line():
    r = run_case('block = "x: ()\\nf = x" + " + x" * 1_000_000')
    expect_error(r, "the limit is 200,000")


def test_multi_megabyte_block():
    r = run_case('block = "x: ()\\n" + "# a comment line\\n" * 200_000 + "f = x"')
    expect_error(r, "the limit is 200,000")


def test_many_empty_lines():
    expect_error(run_case('block = "x: ()\\n" + "\\n" * 150_000 + "f = x"'), "lines")


def test_huge_literal_numbers():
    expect_error(run_case('block = "x: ()\\nf = x * " + "7" * 40_000'), "far too long")


def test_power_tower_of_constants():
    expect_error(run_case('block = "x: ()\\nf = x * 9**9**9**9"'), "too large")


def test_product_of_many_large_constants():
    r = run_case('block = "x: ()\\nf = x" + " * 1e300" * 30')
    expect_error(r, "constant")


# --- many definitions ------------------------------------------------------------------------


def test_two_thousand_chained_definitions():
    r = run_case(
        """
        lines = ["x: (n,)", "R0 = x"] + [f"R{i + 1} = R{i} + x" for i in range(1997)]
        block = "\\n".join(lines + ["f = sum(R1997)"])
        """
    )
    expect_error(r, "definitions nest too deeply")


def test_more_than_two_thousand_lines():
    r = run_case(
        """
        lines = ["x: (n,)", "R0 = x"] + [f"R{i + 1} = R{i} + x" for i in range(2500)]
        block = "\\n".join(lines + ["f = sum(R2500)"])
        """
    )
    expect_error(r, "the limit is 2,000")


def test_long_chain_within_the_limit_is_derived_correctly():
    r = run_case(
        """
        lines = ["x: (n,)", "R0 = x"] + [f"R{i + 1} = R{i} + x" for i in range(100)]
        block = "\\n".join(lines + ["f = sum(R100 * x)"])
        arrays = {"x": [1.0, 2.0]}
        """,
        stages=["gradient", "latex", "text_steps", "source", "numeric"],
    )
    assert r["outcome"] == "ok" and r["grad"] == [202.0, 404.0]


def test_two_thousand_independent_definitions():
    r = run_case(
        """
        lines = ["x: (n,)"] + [f"R{i} = {i + 1} * x" for i in range(1990)]
        block = "\\n".join(lines + ["f = sum(R1989 * x)"])
        arrays = {"x": [1.0, 3.0]}
        """,
        stages=["gradient", "source", "numeric"],
    )
    assert r["outcome"] == "ok" and r["grad"] == [3980.0, 11940.0]


DAG_BUILD = """
    lines = ["x: (n,)", "R0 = x"]
    lines += [f"R{i + 1} = exp(R{i}) * 0.1 + sin(R{i})" for i in range(DEPTH)]
    block = "\\n".join(lines + [f"f = sum(R{DEPTH})"])
    arrays = {"x": [0.1, -0.2]}
"""


@pytest.mark.parametrize("stage", ["gradient", "source", "latex", "text_steps"])
def test_definitions_doubling_each_line(stage):
    """`R{i+1} = exp(R{i}) + sin(R{i})`, 40 deep: the tree has 2**40 leaves, the DAG 120 nodes.

    Refusing it (NotSupportedError) is allowed; hanging or exhausting memory is not.
    """
    run_case(DAG_BUILD.replace("DEPTH", "40"), stages=[stage])


@pytest.mark.parametrize("stage", ["gradient", "source", "latex", "text_steps"])
def test_definitions_doubling_each_line_at_a_printable_depth(stage):
    """Twelve doublings (4,096 leaves written out) are derived and printed within the bound."""
    r = run_case(DAG_BUILD.replace("DEPTH", "12"), stages=[stage])
    assert r["outcome"] == "ok", r


def test_definitions_doubling_shallow_is_correct():
    """At a depth the printers manage, the generated gradient matches central differences."""
    build = DAG_BUILD.replace("DEPTH", "6")
    r = run_case(build, stages=["numeric"])
    ns: dict = {}
    exec(textwrap.dedent(build.replace("DEPTH", "6")), ns)

    def f(x):
        import numpy as np

        r_ = np.asarray(x)
        for _ in range(6):
            r_ = np.exp(r_) * 0.1 + np.sin(r_)
        return float(np.sum(r_))

    x = ns["arrays"]["x"]
    h = 1e-6
    for i in range(2):
        xp = list(x)
        xm = list(x)
        xp[i] += h
        xm[i] -= h
        assert r["grad"][i] == pytest.approx((f(xp) - f(xm)) / (2 * h), rel=1e-5)


def test_squaring_a_constant_forty_times():
    """`R{i+1} = R{i} * R{i}` from R0 = 3 would be 3**(2**40) if folded exactly."""
    run_case(
        """
        lines = ["x: (n,)", "R0 = 3"] + [f"R{i + 1} = R{i} * R{i}" for i in range(40)]
        block = "\\n".join(lines + ["f = sum(x) * R40"])
        """,
        stages=["gradient", "latex", "source"],
    )


# --- memory: a notebook re-runs cells for hours ---------------------------------------------


def test_a_derivation_is_freed_when_dropped():
    import gc
    import weakref

    import gradwright

    d = gradwright.derive("x: (n,)\nc: ()\nf = sum(tanh(x)) * c", wrt=["x", "c"])
    d.latex()
    d.text_steps()
    d.gradient_function()(x=[0.5, 1.0], c=2.0)
    ref = weakref.ref(d)
    del d
    gc.collect()
    assert ref() is None


# --- work that grows faster than the input --------------------------------------------------


def test_nested_matrix_powers():
    r = run_case('block = "A: (n, n)\\nf = trace(mpow(mpow(mpow(A, 64), 64), 64))"', wrt="A")
    expect_error(r, "degree 4,096 through nested mpow")
    r = run_case('block = "A: (n, n)\\nB = mpow(A, 64)\\nC = mpow(B, 64)\\nf = trace(C)"', wrt="A")
    expect_error(r, "degree 4,096")


def test_matrix_power_of_degree_64_is_derived():
    r = run_case(
        """
        block = "A: (n, n)\\nB = mpow(A, 8)\\nf = trace(mpow(B, 8))"
        arrays = {"A": [[0.5, 0.1], [0.0, 0.9]]}
        """,
        wrt="A",
        stages=["gradient", "latex", "source", "numeric"],
    )
    import numpy as np

    a = np.array([[0.5, 0.1], [0.0, 0.9]])
    want = 64 * np.linalg.matrix_power(a, 63).T  # d trace(A^k) = k (A^(k-1))^T
    np.testing.assert_allclose(r["grad"], want, rtol=1e-10)


def test_long_chain_of_one_matrix():
    run_case(
        'block = "A: (n, n)\\nf = trace(" + " @ ".join(["A"] * 100) + ")"',
        wrt="A",
        stages=["source"],
        timeout=6,
    )


def test_deeply_nested_solves():
    run_case(
        'block = "A: (n, n)\\nB: (n, n)\\nf = trace(" + "solve(A, " * 60 + "B" + ")" * 60 + ")"',
        wrt="A",
        stages=["source"],
        timeout=6,
    )


# --- a caller that is already deep in the stack (a notebook kernel, a test runner) ----------


def _at_depth(frames: int, fn):
    return fn() if frames == 0 else _at_depth(frames - 1, fn)


@pytest.mark.parametrize("frames", [0, 300, 700])
@pytest.mark.parametrize(
    "block",
    [
        "x: (n,)\nf = sum(" + "exp(" * 118 + "x" + ")" * 118 + ")",
        "\n".join(["x: (n,)", "R0 = x"] + [f"R{i + 1} = R{i} + x" for i in range(118)])
        + "\nf = sum("
        + "exp(" * 100
        + "R118"
        + ")" * 100
        + ")",
        "x: ()\nf = " + " + ".join(["x"] * 2500),
    ],
    ids=["nested-118", "chain-and-nesting", "sum-2500"],
)
def test_deep_input_under_a_deep_caller(block, frames):
    """The reader never lets a RecursionError out, however deep the caller's stack is."""
    import gradwright

    try:
        _at_depth(frames, lambda: gradwright.derive(block, wrt="x"))
    except gradwright.FormulaError as err:
        assert "nest" in err.reason or "too long" in err.reason

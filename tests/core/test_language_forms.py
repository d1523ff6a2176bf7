"""Functions, conditions and families of states in the model language.

Each check compares with a hand-written twin of the same model or with a closed form named beside it.
"""

import math

import numpy as np
import pytest
import sympy as sp

from orbitdesk.engine.runs import RunSettings, simulate
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model


def errors(text):
    return [d for d in parse_model(text).diagnostics if d.severity == "error"]


def only_error(text):
    found = errors(text)
    assert len(found) == 1, [d.format() for d in parse_model(text).diagnostics]
    return found[0]


# ------------------------------------------------------------------ functions

INLINED = """\
sat(u) = u / (1 + abs(u))
spring(d, k) = k*d + k3*d^3
k3 = 0.5
g = 2.0
x' = y
y' = -spring(x, g) - sat(y) - 0.1*spring(y, 1)
x(0) = 1
"""
BY_HAND = """\
k3 = 0.5
g = 2.0
x' = y
y' = -(g*x + k3*x^3) - y / (1 + abs(y)) - 0.1*(1*y + k3*y^3)
x(0) = 1
"""


def test_a_function_inlined_model_equals_its_hand_inlined_twin_jacobian_included():
    a, b = compile_model(INLINED), compile_model(BY_HAND)
    assert a.states == b.states and a.parameters == b.parameters
    for fa, fb in zip(a.f, b.f):
        assert sp.simplify(fa - fb) == 0
    assert sp.simplify(a.jacobian - b.jacobian) == sp.zeros(2, 2)
    settings = RunSettings(t_end=10.0, samples=200)
    ra, rb = simulate(a, settings), simulate(b, settings)
    assert np.allclose(ra.states, rb.states, rtol=0, atol=1e-12)


def test_functions_may_call_functions_and_use_time_and_parameters():
    model = parse_model("w = 2\nforce(a) = a*cos(w*t)\ntwice(a) = 2*force(a)\nx' = -x + twice(0.5)\n")
    assert model.ok, [d.format() for d in model.diagnostics]
    t = model.time_symbol
    assert sp.simplify(model.equations["x"] - (-model.symbols["x"] + sp.cos(2 * t) * 1.0)) == 0 or \
        sp.simplify(model.equations["x"] - (-model.symbols["x"] + sp.cos(model.symbols["w"] * t))) == 0


def test_an_initial_value_still_reads_x_of_zero_and_may_call_a_function():
    model = parse_model("half(a) = a/2\nx' = -x\nx(0) = half(3)\n")
    assert model.ok and model.initial["x"] == 1.5


def test_a_call_of_a_broken_function_says_so():
    text = "f(a) = a*x\nx' = f(1)\n"
    assert any("'f' cannot be used: its definition on line 1 has an error" in d.message for d in errors(text))


@pytest.mark.parametrize("text, fragment, position", [
    ("f(a) = g(a)\ng(a) = f(a)\nx' = f(x)\n", "call each other in a loop: f -> g -> f", (1, 1, 5)),
    ("f(x) = x^2\nx' = f(x)\n", "the argument 'x' is a state", (1, 1, 5)),
    ("f(a, a) = a\nx' = f(x, x)\n", "the argument 'a' is named twice", (1, 1, 8)),
    ("f(a) = a*x\nx' = f(1)\n", "'x' is not known inside the function f; pass it as an argument", (1, 10, 11)),
    ("sin(a) = a\nx' = sin(x)\n", "'sin' is a built-in function", (1, 1, 7)),
    ("f(a) = a\nx' = f(x, 1)\n", "f() takes 1 argument, got 2", (2, 6, 13)),
    ("f(a) = a\nx' = f\n", "f is a function; call it as f(...)", (2, 6, 7)),
])
def test_function_errors_at_exact_positions(text, fragment, position):
    found = [d for d in errors(text) if fragment in d.message and d.line == position[0]]
    assert len(found) == 1, [d.format() for d in errors(text)]
    d = found[0]
    assert (d.line, d.column, d.end_column) == position


# ------------------------------------------------------------------ conditions

def _period_from_upward_zero_crossings(run, state=0):
    t, x = run.time, run.states[state]
    ups = np.nonzero((x[:-1] < 0) & (x[1:] >= 0))[0]
    crossings = t[ups] - x[ups] * (t[ups + 1] - t[ups]) / (x[ups + 1] - x[ups])
    return np.diff(crossings)


def test_bilinear_oscillator_written_with_if_has_the_closed_form_period():
    """Stiffness k1 for x > 0 and k2 for x < 0: each half swing is half a period of its own linear
    oscillator, so T = pi/sqrt(k1) + pi/sqrt(k2) (closed form; e.g. Thomson, Theory of Vibration)."""
    k1, k2 = 4.0, 1.0
    system = compile_model(f"k1 = {k1}\nk2 = {k2}\nx'' = -if(x > 0, k1, k2)*x\nx(0) = 0\nx'(0) = 1\n")
    assert "if" in system.nonsmooth
    run = simulate(system, RunSettings(t_end=40.0, samples=400_01, rtol=1e-11, atol=1e-12, method="rk45"))
    periods = _period_from_upward_zero_crossings(run)
    assert len(periods) >= 5
    assert np.allclose(periods, math.pi / math.sqrt(k1) + math.pi / math.sqrt(k2), rtol=0, atol=2e-5)


def test_conditions_combine_with_and_or_not_and_give_a_number_per_branch():
    model = parse_model("x' = if(not (x < 0 or x > 2) and t >= 1, 1, -1)\n")
    assert model.ok
    x = model.symbols["x"]
    expr = model.equations["x"]
    assert expr.subs({x: 1.0, model.time_symbol: 2.0}) == 1
    assert expr.subs({x: 3.0, model.time_symbol: 2.0}) == -1
    assert expr.subs({x: 1.0, model.time_symbol: 0.5}) == -1


@pytest.mark.parametrize("text, fragment, position", [
    ("x' = x < 1\n", "'<' belongs inside a condition", (1, 8, 9)),
    ("x' = if(x, 1, 0)\n", "expected a condition such as x < 1", (1, 9, 10)),
    ("x' = if(x < 1, 1)\n", "expected ',' between the two values", (1, 17, 18)),
    ("x' = if(x < 1, x < 2, 0)\n", "the two values of if(COND, A, B) are numbers", (1, 18, 19)),
    ("x' = if(0 < x < 1, 1, 0)\n", "comparisons cannot be chained", (1, 15, 16)),
    ("x' = if(x == 1, 1, 0)\n", "'==' is not supported", (1, 11, 13)),
])
def test_condition_errors_at_exact_positions(text, fragment, position):
    d = only_error(text)
    assert fragment in d.message, d.message
    assert (d.line, d.column, d.end_column) == position


# ------------------------------------------------------------------ families

FAMILY_CHAIN = """\
N = 4
c = 0.1
k = 1.5
x_{i}'' = -c*x_{i}' - k*(2*x_{i} - x_{i-1} - x_{i+1})   for i in 1..N
x_{0} = 0
x_{N+1} = 0
x_{i}(0) = 0.01*i   for i in 1..N
"""
TYPED_CHAIN = """\
N = 4
c = 0.1
k = 1.5
x_1'' = -c*x_1' - k*(2*x_1 - x_0 - x_2)
x_2'' = -c*x_2' - k*(2*x_2 - x_1 - x_3)
x_3'' = -c*x_3' - k*(2*x_3 - x_2 - x_4)
x_4'' = -c*x_4' - k*(2*x_4 - x_3 - x_5)
x_0 = 0
x_5 = 0
x_1(0) = 0.01
x_2(0) = 0.02
x_3(0) = 0.03
x_4(0) = 0.04
"""


def test_a_family_expanded_chain_equals_the_chain_typed_by_hand_state_for_state_and_run_for_run():
    a, b = compile_model(FAMILY_CHAIN), compile_model(TYPED_CHAIN)
    assert a.states == b.states == ["x_1", "x_1'", "x_2", "x_2'", "x_3", "x_3'", "x_4", "x_4'"]
    assert a.parameters == b.parameters
    assert all(sp.simplify(fa - fb) == 0 for fa, fb in zip(a.f, b.f))
    assert np.array_equal(a.initial, b.initial)
    settings = RunSettings(t_end=20.0, samples=500)
    assert np.array_equal(simulate(a, settings).states, simulate(b, settings).states)
    assert parse_model(FAMILY_CHAIN).structural == {"N"}


def test_a_ring_with_mod_indices_keeps_its_twisted_state_exactly():
    """Ring theta_i' = w + K[sin(theta_{i+1} - theta_i) + sin(theta_{i-1} - theta_i)] (indices mod N):
    theta_i = 2 pi q i / N + w t is an exact solution, since the two sines cancel (closed form)."""
    n, w, q = 8, 0.7, 1
    text = f"""\
N = {n}
w = {w}
K = 0.4
theta_{{i}}' = w + K*(sin(theta_{{mod(i, N) + 1}} - theta_{{i}}) + sin(theta_{{mod(i - 2, N) + 1}} - theta_{{i}}))   for i in 1..N
theta_{{i}}(0) = 2*pi*{q}*i/N   for i in 1..N
"""
    system = compile_model(text)
    assert system.states == [f"theta_{i}" for i in range(1, n + 1)]
    run = simulate(system, RunSettings(t_end=10.0, samples=101))
    exact = 2 * np.pi * q * np.arange(1, n + 1)[:, None] / n + w * run.time[None, :]
    assert np.allclose(run.states, exact, rtol=0, atol=1e-8)


def test_sums_over_a_family_are_written_out():
    model = parse_model("N = 3\ny_{i}' = -y_{i} + sum(y_{j}, j in 1..N)/N   for i in 1..N\n"
                        "mean = sum(y_{j}, j in 1..N)/N\n")
    assert model.ok
    y1, y2, y3, n = (model.symbols[name] for name in ("y_1", "y_2", "y_3", "N"))
    assert sp.simplify(model.derived["mean"] - (y1 + y2 + y3) / n) == 0
    assert sp.simplify(model.equations["y_2"] - (-y2 + (y1 + y2 + y3) / n)) == 0


def test_a_member_outside_the_family_names_the_index_value_at_fault():
    d = only_error("N = 40\nx_{i}' = x_{i+1}   for i in 1..N\n")
    assert d.message == "x_{41} is not defined: i = 40 in line 2 reads x_{i+1}"
    assert (d.line, d.column, d.end_column) == (2, 10, 17)


@pytest.mark.parametrize("text, fragment, position", [
    ("x_{i}' = -x_{i}   for i in 1..2.5\n", "a range bound must be a whole number", (1, 31, 34)),
    ("a = 0.5\nx_{i}' = -x_{i}   for i in 1..a\n", "'a' cannot be used in a range bound: only numbers, "
     "loop indices and whole-number parameters", (2, 31, 32)),
    ("x_{i}' = -x_{i}   for i in 1..k\n", "'k' cannot be used in a range bound", (1, 31, 32)),
    ("x_{i}' = -x_{i-1}   for i in 1..3\n", "x_{0} is not defined: i = 1 in line 1 reads x_{i-1}", (1, 11, 18)),
    ("x_{i}' = -x_{i}   for i in 0..1000000\n", "has more than 10,000 indices", (1, 28, 38)),
    ("x_{i}' = -x_{i}   for i in 1..\n", "expected the last index after '..'", (1, 29, 31)),
    ("x_{i/2}' = -x   for i in 1..3\nx' = 0\n", "an index must be a whole number; this gives 0.5", (1, 4, 7)),
    ("x' = -x_{j}\n", "'j' cannot be used in an index", (1, 10, 11)),
])
def test_family_errors_at_exact_positions(text, fragment, position):
    d = only_error(text)
    assert fragment in d.message, d.message
    assert (d.line, d.column, d.end_column) == position


def test_a_family_line_gets_one_note_for_its_missing_initial_values():
    notes = [d for d in parse_model("x_{i}' = -x_{i}   for i in 1..30\n").diagnostics if d.severity == "info"]
    assert len(notes) == 1 and "x_1 ... x_30 (30 states)" in notes[0].message


def test_nothing_in_the_new_forms_runs_as_python(monkeypatch):
    import builtins

    def refuse(*args, **kwargs):
        raise AssertionError("text was run as code")

    for name in ("eval", "exec", "compile"):
        monkeypatch.setattr(builtins, name, refuse)
    for text in ("f(a) = a\nx' = f(__import__)\n", "x_{__import__}' = 1\n",
                 "x' = sum(x, j in 1..__import__('os'))\n", "x' = if(x < 1 and __class__, 1, 0)\n"):
        model = parse_model(text)
        assert not model.ok

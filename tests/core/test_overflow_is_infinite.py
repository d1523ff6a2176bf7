"""A value too large for doubles is infinite on every path, as IEEE arithmetic (compiled code, numpy) has
it, not undefined: b^(-5x) with b = cosh(690) ~ 2.3e299 at x = 0.25 is (2.3e299)^-1.25 ~ 1e-375, which
rounds to 0 in doubles (the closed form), though the printed 1/pow(b, 5x) passes through inf. Python's
``math`` raises OverflowError there; the plain-Python twin of the kernels once called the value undefined
while the compiled kernel and numpy gave 0 (a fuzz run's find)."""

import math

import numpy as np
import pytest

from orbitdesk.engine import compiled
from orbitdesk.system import float_math
from orbitdesk.system.compiled_system import compile_model, lambdify

UNDERFLOW = "x' = v\nv' = if(x < x and not x < 1, x, b^x)^-5\nb = cosh(690)\n"


def _python_rhs(system, u):
    engine = compiled.python_engine(system)
    out = np.empty(system.n_states)
    engine.entry("evaluate")(engine.f, 0, 0.0, np.asarray(u, float), np.asarray(system.param_values, float), out)
    return out


def test_an_overflow_that_underflows_again_is_zero_on_every_path():
    system = compile_model(UNDERFLOW)
    u = np.array([0.25, 0.0])
    assert _python_rhs(system, u)[1] == 0.0  # the plain-Python twin
    assert system.rhs(0.0, u)[1] == 0.0  # whichever engine serves
    assert system.rhs_for_params()(0.0, u)[1] == 0.0  # the scalar evaluator
    assert system.rhs_vec(0.0, u[:, None])[1, 0] == 0.0  # numpy's vector kernel


@pytest.mark.parametrize("expr, x, closed_form", [
    ("exp(x)", 1000.0, math.inf), ("-sinh(x)", 1000.0, -math.inf), ("cosh(-x)", 1000.0, math.inf),
    ("1/exp(x)", 1000.0, 0.0), ("x^3", 1e200, math.inf), ("(-x)^3", 1e200, -math.inf), ("(-x)^4", 1e200, math.inf),
    ("1/x^4", 1e200, 0.0), ("x^1.5", 1e300, math.inf),
])
def test_overflow_is_infinite_in_the_plain_evaluators(expr, x, closed_form):
    system = compile_model(f"x' = 0\nv' = {expr}\n")
    u = np.array([x, 0.0])
    assert _python_rhs(system, u)[1] == closed_form
    assert system.rhs_for_params()(0.0, u)[1] == closed_form
    assert system.rhs_vec(0.0, u[:, None])[1, 0] == closed_form


def test_whole_powers_keep_their_bits_and_domain_errors_still_raise():
    rng = np.random.default_rng(7)
    xs = (rng.standard_normal(2000) * np.exp(rng.uniform(-40, 40, 2000))).tolist()
    for k in (3, -3, 5, -2, 7):
        assert all(float_math.pow(x, k) == x ** k for x in xs)  # C's pow either way: the same double
    with pytest.raises(ValueError):
        float_math.pow(-8.0, 1 / 3)  # a negative base to a fractional power: undefined in the reals
    import sympy as sp
    x = sp.Symbol("x", real=True)
    f = lambdify([x], [sp.exp(x), x ** 5])
    assert f(1e100) == [math.inf, math.inf]

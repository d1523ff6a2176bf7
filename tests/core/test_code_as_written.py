"""The generated code computes sums and powers as the model's text writes them.

Sympy's search for shared parts rewrites some of them into forms that are equal in exact arithmetic but not
in doubles (both found by the fuzz of generated models); every evaluator is checked here against Python's
``math`` on the text as written:

- a sum as the negation of its negation: at v = 1/4, ``1/4 - v`` is +0 and atan2(+0, x) for x < 0 is pi (the
  C library's and Python's atan2, the closed form as written); written as -(v - 1/4) it is -0 there, and the
  generated code gave -pi, a jump of 2 pi on the branch cut (``x' = atan2(.25 - v, x - 5e2)``);
- a power whose exponent looks negative as one over the base to the negated exponent: ``x^log10(1.001)``
  (sympy holds the exponent as -3 + log(1001)/log(10), positive) written as 1/x^(3 - log(1001)/log(10)) is
  1/0 at x = 0, where the power as written is 0: the model was called undefined there."""

import math

import numpy as np
import pytest

from orbitdesk.engine import compiled
from orbitdesk.system.compiled_system import compile_model


def every_evaluator(system, u):
    """The right side at t = 2 and state ``u`` from each of the five evaluators of a compiled model."""
    u, p, t = np.asarray(u, float), np.asarray(system.param_values, float), 2.0
    for engine in (compiled.python_engine(system), compiled.engine_for(system, wait=True)):
        out = np.empty(system.n_states)
        engine.entry("evaluate")(engine.f, 0, t, u, p, out)
        yield out
    yield system.rhs(t, u)
    yield system.rhs_for_params()(t, u)
    yield system.rhs_vec(t, u[:, None])[:, 0]


SIGNED_ZERO = [  # right side of v', its value at x = v = 1/4 as Python's math gives it for the text as written
    ("atan2(.25 - v, x - 5e2)", math.atan2(0.25 - 0.25, 0.25 - 5e2)),
    ("atan2(v - .25, x - 5e2)", math.atan2(0.25 - 0.25, 0.25 - 5e2)),
    ("atan2(.25 - v, x - 5e2) + atan2(.5 - x - v, -1) + (.25 - v)*x", math.atan2(0.0, -499.75) + math.atan2(0.0, -1.0)),
]


@pytest.mark.parametrize("rhs, expected", SIGNED_ZERO)
def test_an_exact_zero_keeps_its_sign_on_every_path(rhs, expected):
    assert expected == pytest.approx(math.pi * (2 if "+" in rhs else 1))  # the branch cut's side: +pi, not -pi
    system = compile_model(f"x' = 0\nv' = {rhs}\n")
    for out in every_evaluator(system, [0.25, 0.25]):
        assert out[1] == expected


POWERS = [  # right side of v', state (x, v), its value as Python's math gives it for the text as written (t = 2)
    ("x^log10(1.001)", (0.0, 0.0), math.pow(0.0, math.log10(1.001))),  # 0: a positive power of 0
    ("x^log10(1.001)", (0.5, 0.0), math.pow(0.5, math.log10(1.001))),
    ("x^(t - 1) + v^(1 - sqrt(2)/2)", (0.0, 0.0), 0.0),  # exponents 1 and 0.29...: 0 + 0
    ("x^(-3) + 1/x^2", (0.5, 0.0), 8.0 + 4.0),
]


@pytest.mark.parametrize("rhs, u, expected", POWERS)
def test_a_power_is_computed_as_written_on_every_path(rhs, u, expected):
    system = compile_model(f"x' = 0\nv' = {rhs}\n")
    for out in every_evaluator(system, u):
        assert out[1] == pytest.approx(expected, rel=1e-15, abs=0.0)

"""A difference that is exactly zero keeps the sign IEEE arithmetic gives it as the model writes it.

At v = 1/4, ``1/4 - v`` is +0 and atan2(+0, x) for x < 0 is pi (the C library's and Python's atan2, the
closed form as written); sympy's search for shared parts writes the sum as -(v - 1/4), which is -0 there,
and the generated code gave -pi, a jump of 2 pi on the branch cut (a fuzz run of generated models found
it: ``x' = atan2(.25 - v, x - 5e2)``). Every evaluator is checked against Python's ``math`` on the text
as written."""

import math

import numpy as np
import pytest

from orbitdesk.engine import compiled
from orbitdesk.system.compiled_system import compile_model

CASES = [  # right side of v', its value at x = v = 1/4 as Python's math gives it for the text as written
    ("atan2(.25 - v, x - 5e2)", math.atan2(0.25 - 0.25, 0.25 - 5e2)),
    ("atan2(v - .25, x - 5e2)", math.atan2(0.25 - 0.25, 0.25 - 5e2)),
    ("atan2(.25 - v, x - 5e2) + atan2(.5 - x - v, -1) + (.25 - v)*x", math.atan2(0.0, -499.75) + math.atan2(0.0, -1.0)),
]


@pytest.mark.parametrize("rhs, expected", CASES)
def test_an_exact_zero_keeps_its_sign_on_every_path(rhs, expected):
    assert expected == pytest.approx(math.pi * (2 if "+" in rhs else 1))  # the branch cut's side: +pi, not -pi
    system = compile_model(f"x' = 0\nv' = {rhs}\n")
    u = np.array([0.25, 0.25])
    p = np.asarray(system.param_values, float)
    for engine in (compiled.python_engine(system), compiled.engine_for(system, wait=True)):
        out = np.empty(system.n_states)
        engine.entry("evaluate")(engine.f, 0, 0.0, u, p, out)
        assert out[1] == expected, engine
    assert system.rhs(0.0, u)[1] == expected
    assert system.rhs_for_params()(0.0, u)[1] == expected
    assert system.rhs_vec(0.0, u[:, None])[1, 0] == expected

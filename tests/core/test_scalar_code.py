"""Generated evaluators: the plain-Python scalar code against sympy's own evaluation of the model's
expressions. (The engine's kernels and compiled loops: tests/core/test_kernels.py.)
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from orbitdesk.engine.runs import UNDEFINED, RunSettings, simulate
from orbitdesk.system.compiled_system import compile_model

MIXED = ("a = 2 in [0, 5]\nk = 3\n"
         "x' = -x^(1/3) + sqrt(k/a)*y + log10(x) + exp(-a)*x + atan2(y, x) + abs(x)^1.5 + x^y + 1/x\n"
         "y' = cos(2*pi*a*t) - e^x + x^2 + y^3 + x^-2 + a*k*x + a*k + tanh(y) + asin(y/2)\n")


def test_generated_scalar_code_matches_sympy_evaluation():
    system = compile_model(MIXED)
    rng = np.random.default_rng(3)
    for _ in range(20):
        t, x, y = rng.uniform(0.1, 1.5), rng.uniform(0.2, 2.0), rng.uniform(-1.5, 1.5)
        for p in (system.param_values, np.array([0.7, 1.9])):
            fast = system.rhs_for_params(p)(t, np.array([x, y]))
            values = {system.t_symbol: t, **dict(zip(system.state_symbols, (x, y))),
                      **dict(zip(system.param_symbols, p))}
            reference = [float(sp.N(e.xreplace(values), 20)) for e in system.f]
            assert fast == pytest.approx(reference, rel=1e-13, abs=1e-13)


def test_parameters_are_bound_exactly_not_printed():
    # a parameter value that 15 printed digits would change
    system = compile_model("c = 0.1234567890123456789\nx' = c*x\nx(0) = 1\n")
    value = float(system.param_values[0])
    assert system.rhs_for_params()(0.0, np.array([1.0]))[0] == value


def test_negative_base_to_a_fractional_power_is_reported_undefined():
    # x(t) = 1 - t reaches x < 0 at t = 1, where x^(1/3) has no real value in the model's arithmetic
    run = simulate(compile_model("x' = -1\ny' = x^(1/3)\nx(0) = 1\n"), RunSettings(t_end=2))
    assert run.status == UNDEFINED
    assert "t = 1" in run.message
    assert run.time[-1] <= 1.0 + 1e-9

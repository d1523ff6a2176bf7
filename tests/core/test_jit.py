"""Generated evaluators: the plain-Python scalar code and the optional numba loops against references.

The scalar code of ``CompiledSystem.rhs_for_params`` is checked against sympy's own evaluation of
the model's expressions; the numba Lyapunov loop of a map against the numpy grid code and a
published value. (The integrators' compiled loops: tests/core/test_kernels.py.)
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from orbitdesk.engine import jit
from orbitdesk.engine.runs import UNDEFINED, RunSettings, simulate
from orbitdesk.engine.ensembles import rk4_ensemble
from orbitdesk.analyses.sweep import GridSettings, grid_exponents
from orbitdesk.system.compiled_system import compile_model

MIXED = ("a = 2 in [0, 5]\nk = 3\n"
         "x' = -x^(1/3) + sqrt(k/a)*y + log10(x) + exp(-a)*x + atan2(y, x) + abs(x)^1.5 + x^y + 1/x\n"
         "y' = cos(2*pi*a*t) - e^x + x^2 + y^3 + x^-2 + a*k*x + a*k + tanh(y) + asin(y/2)\n")
DUFFING = ("delta = 0.3\ngamma = 0.37\nomega = 1.2\n"
           "x'' = -delta*x' + x - x^3 + gamma*cos(omega*t)\nx(0) = 1\nx'(0) = 0\n")
HENON = "a = 1.4\nb = 0.3\nx[n+1] = 1 - a*x^2 + y\ny[n+1] = b*x\nx[0] = 0.1\ny[0] = 0.1\n"

needs_numba = pytest.mark.skipif(not jit.available(), reason="numba is not installed (extra 'jit') or ORBITDESK_JIT=0")


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


@needs_numba
def test_compiled_map_exponent_equals_the_numpy_grid_code():
    system = compile_model(HENON)
    P = np.vstack([np.linspace(1.0, 1.4, 40), np.full(40, 0.3)])
    grid = GridSettings(transient=100, duration=2000)
    numpy_exponents, numpy_status = grid_exponents(system, P, system.initial, grid)
    U = np.repeat(system.initial[:, None], 40, axis=1)
    v0 = np.arange(1.0, 3.0) / math.sqrt(5.0)
    total, codes = jit.map_lyapunov(system, U, P, 0, 100, 2100, grid.bound, v0)
    exponents = np.where(codes == 0, total / 2000, np.nan)
    assert np.allclose(exponents, numpy_exponents, rtol=0, atol=1e-9, equal_nan=True)
    assert list(codes == 0) == list(numpy_status == "ok")
    # Sprott, Chaos and Time-Series Analysis (2003): Henon a = 1.4, b = 0.3, largest exponent ~0.419
    # (value from memory)
    assert exponents[-1] == pytest.approx(0.419, abs=0.02)


def test_without_numba_everything_runs_on_numpy(monkeypatch):
    monkeypatch.setenv("ORBITDESK_JIT", "0")
    assert not jit.available()
    system = compile_model(DUFFING)
    run = rk4_ensemble(system, np.ones((2, 4)), dt=0.01, n_steps=50, compiled=True)
    assert run.ok.all()

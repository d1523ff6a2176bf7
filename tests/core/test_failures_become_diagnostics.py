"""Failures inside the symbolic library become diagnostics; non-smooth models get Jacobians that
hold between the jumps (issue 10, items 4 and 5)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from orbitdesk.language import symbolic
from orbitdesk.system.derivatives import jacobian_almost_everywhere
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model


@pytest.mark.parametrize("text, value", [
    # the double's floor is itself beyond 2^53; its remainder is exact (Python integer arithmetic)
    ("a = floor(cosh(690))\nx' = a - x", math.cosh(690)),
    ("a = mod(sinh(690), 3)\nx' = a - x", float(int(math.sinh(690)) % 3)),
    ("x' = floor(cosh(690)) - x", math.cosh(690)),
    ("x' = mod(sinh(690), 3) - x", float(int(math.sinh(690)) % 3)),
    ("x' = mod(-sinh(690), 7) - x", float(-int(math.sinh(690)) % 7)),
])
def test_floor_and_mod_of_constants_beyond_exact_floats(text, value):
    model = parse_model(text)
    assert model.ok, [d.message for d in model.errors]
    assert compile_model(model).rhs(0.0, [0.0])[0] == value


def test_a_failure_of_sympy_is_a_diagnostic_on_its_line(monkeypatch):
    def fails(*args):
        raise RuntimeError("no rule for this")

    monkeypatch.setitem(symbolic.SYMPY_FUNCTIONS, "sinh", fails)
    model = parse_model("x' = -x\ny' = sinh(x) - y\n")
    assert [(d.line, d.column, d.end_column) for d in model.errors] == [(2, 6, 17)]
    assert "could not be worked out exactly (RuntimeError: no rule for this)" in model.errors[0].message


def test_the_last_guard_turns_any_failure_into_one_error(monkeypatch):
    from orbitdesk.language import model as model_module

    def broken(self):
        raise RecursionError("deep")

    monkeypatch.setattr(model_module._Builder, "build", broken)
    model = parse_model("x' = -x")
    assert not model.ok and "nested too deeply" in model.errors[0].message


def test_almost_everywhere_derivatives():
    x, m = sp.symbols("x m", real=True)
    exprs = [sp.floor(x**2) * x, sp.sign(x - 1) + x, sp.Heaviside(x - 1) * x, sp.Mod(x**2, 3), sp.Mod(x, m)]
    J = jacobian_almost_everywhere(exprs, [x, m])
    assert not any(e.has(sp.Derivative, sp.Subs, sp.DiracDelta) for e in J)
    # d(x floor(x^2))/dx = floor(x^2) between jumps; d mod(x, m)/dm = -floor(x/m)
    assert J[0, 0] == sp.floor(x**2) and J[1, 0] == 1 and J[2, 0] == sp.Heaviside(x - 1)
    assert J[3, 0] == 2 * x and J[4, 0] == 1 and J[4, 1] == -sp.floor(x / m)
    # against central differences away from the jumps
    f = sp.lambdify([x, m], exprs)
    jf = sp.lambdify([x, m], J)
    for point in ((1.3, 0.7), (2.6, 1.9), (-0.45, 0.3)):
        h = 1e-7
        for j in range(2):
            step = np.array(point, dtype=float)
            step[j] += h
            back = np.array(point, dtype=float)
            back[j] -= h
            numeric = (np.array(f(*step)) - np.array(f(*back))) / (2 * h)
            assert np.allclose(np.array(jf(*point), dtype=float)[:, j], numeric, atol=1e-5)


def test_abs_of_an_expression_sympy_cannot_prove_real_has_a_printable_derivative():
    # |x * sqrt(y)|: sympy's own derivative holds re() and im() parts; between the jumps it is sign() * ...
    system = compile_model("x' = abs(x*sqrt(y))\ny' = -y\nx(0) = 2\ny(0) = 4\n")
    assert system.jac(0.0, [2.0, 4.0]).tolist() == [[2.0, 0.5], [0.0, -1.0]]

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


# ---------------------------------------------------------------- large and deep models (item 5)

def test_a_sum_of_six_thousand_terms_runs_and_has_equilibria():
    # four definitions of 1,499 cosines each: Python's compiler recursed once per term of the generated sum
    lines = [f"d{j} = " + "+".join(f"cos({i}*x+{j})" for i in range(1, 1500)) for j in range(4)]
    system = compile_model("\n".join(lines) + "\nx' = -x + 1e-6*(d0+d1+d2+d3)\n")
    reference = -0.3 + 1e-6 * sum(math.cos(i * 0.3 + j) for j in range(4) for i in range(1, 1500))  # plain floats
    assert system.rhs(0.0, [0.3])[0] == pytest.approx(reference, rel=1e-12)
    assert system.rhs_vec(0.0, np.array([[0.3]]))[0, 0] == pytest.approx(reference, rel=1e-12)
    from orbitdesk.analyses.equilibria import find_equilibria

    found = find_equilibria(system, starts=5, exact=False)
    assert len(found) >= 1 and abs(system.rhs(0.0, found[0].vector)[0]) < 1e-12


def test_a_tower_of_nested_square_roots_has_the_golden_ratio_as_equilibrium():
    # x' = -x + sqrt(1 + sqrt(1 + ... sqrt(1 + x))): the fixed point of x = sqrt(1 + x) is (1 + sqrt 5)/2
    # (closed form). A tower as deep as the language allows runs; the generated code is flat
    from orbitdesk.language.model import MAX_TREE_DEPTH

    levels = (MAX_TREE_DEPTH - 2) // 2
    system = compile_model("x' = -x + " + "sqrt(1+" * levels + "x" + ")" * levels + "\nx(0) = 1\n")
    from orbitdesk.analyses.equilibria import find_equilibria

    found = find_equilibria(system, starts=5, exact=False)
    assert [round(float(e.vector[0]), 12) for e in found] == [round((1 + math.sqrt(5)) / 2, 12)]
    assert system.jac(0.0, [1.0])[0, 0] == pytest.approx(-1.0 + 0.5 ** levels / math.prod(
        math.sqrt(v) for v in _tower_values(levels, 1.0)), rel=1e-9)


def _tower_values(levels, x):
    values = []  # 1 + x, 1 + sqrt(1 + x), ... : d/dx of the tower is prod 1/(2 sqrt(v)) over these
    for _ in range(levels):
        values.append(1 + x)
        x = math.sqrt(1 + x)
    return values


@pytest.mark.parametrize("text", [
    "x' = -x + " + "sqrt(1+" * 60 + "x" + ")" * 60 + "\n",  # one line, deeper than the bound
    "a0 = sqrt(1+x)\n" + "".join(f"a{i} = sqrt(1+a{i - 1})\n" for i in range(1, 300)) + "x' = -x + a299\n",
])
def test_a_tower_deeper_than_the_bound_is_a_diagnostic_not_a_crash(text):
    # the bound keeps sympy's recursion (differentiation, printing) within Python's default limit
    import sys

    limit = sys.getrecursionlimit()
    model = parse_model(text)
    assert not model.ok and any("levels deep" in d.message for d in model.errors)
    assert sys.getrecursionlimit() == limit


def test_every_symbolic_step_of_the_exact_solve_runs_under_its_time_limit(monkeypatch):
    # building the equations (sympy's expand of a 699-factor product took 176 s) happens in the child
    import time

    from orbitdesk.analyses import equilibria

    def slow_equations(system, p):
        time.sleep(30)

    monkeypatch.setattr(equilibria, "_exact_equations", slow_equations)
    system = compile_model("x' = x*(1 - x)\n")
    points, notes = equilibria.exact_solutions(system, system.param_values, timeout=0.5)
    assert points == [] and notes == ["the exact solve did not finish within 0.5 s of computing; Newton search only"]


# started off the jumps (at x = 1, y = 0 floor and sign jump: the solution is not unique there)
NONSMOOTH = "x' = y\ny' = -x - 0.3*y + 0.5*sign(y) + heaviside(x) - 0.1*floor(x) + 0.2*mod(x, 1)\nx(0) = 1.3\ny(0) = 0.4\n"


def test_the_stiff_method_runs_a_model_with_jumps():
    # Radau with our Jacobian against scipy's Radau with its finite-difference Jacobian
    from scipy.integrate import solve_ivp

    from orbitdesk.engine.runs import RunSettings, simulate

    system = compile_model(NONSMOOTH)
    run = simulate(system, RunSettings(method="stiff", t_end=3.0, samples=7, rtol=1e-9, atol=1e-11))
    ref = solve_ivp(lambda t, u: system.rhs(t, u), (0, 3), [1.3, 0.4], method="Radau", t_eval=np.linspace(0, 3, 7),
                    rtol=1e-9, atol=1e-11)
    assert run.ok and np.allclose(run.states, ref.y, atol=1e-5)


@pytest.mark.parametrize("command", [["equilibria"], ["cycle"], ["export", "--report"], ["run", "--method", "stiff"]])
def test_commands_on_a_model_with_jumps_end_without_a_traceback(tmp_path, capsys, command):
    from orbitdesk.cli import main

    path = tmp_path / "jumps.txt"
    path.write_text(NONSMOOTH)
    code = main([*command, str(path)] + (["-o", str(tmp_path / "r.html")] if "--report" in command else []))
    out, err = capsys.readouterr()
    assert code in (0, 1) and "Traceback" not in err and "could not finish" not in err, err

"""Unit tests of the model language: every statement form, higher-order reduction, exact diagnostics.

Positions are 1-based columns with an exclusive end, counted by hand from the test text.
References: the hand-written first-order form of each higher-order equation (the textbook
reduction, e.g. Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 5.1/6.1: x'' = f becomes
x' = v, v' = f), Python's ``math`` module for the functions, and the Hénon map as defined in
M. Hénon, Commun. Math. Phys. 50 (1976) 69-77.
"""

import math

import numpy as np
import pytest
import sympy as sp

from orbitdesk.language.diagnostics import ERROR, INFO, WARNING
from orbitdesk.language.expression import MAX_DEPTH
from orbitdesk.language.model import FLOW, MAP, parse_model
from orbitdesk.system.compiled_system import compile_model

LORENZ = """# Lorenz (1963)
x' = sigma*(y - x)
y' = x*(rho - z) - y
z' = x*y - beta*z
sigma = 10 in [0, 20]
rho = 28
beta = 8/3
x(0) = 1
y(0) = 1
z(0) = 1.05
"""


def only(model, severity, fragment):
    """The single diagnostic of ``severity`` whose message contains ``fragment``."""
    found = [d for d in model.diagnostics if d.severity == severity and fragment in d.message]
    assert len(found) == 1, [d.format() for d in model.diagnostics]
    return found[0]


def where(d):
    return d.line, d.column, d.end_column


def error_at(text, fragment):
    model = parse_model(text)
    assert not model.ok
    return where(only(model, ERROR, fragment)), only(model, ERROR, fragment)


# ---------------------------------------------------------------- statement forms


def test_flow_equations_parameters_ranges_and_initial_values():
    m = parse_model(LORENZ)
    assert m.ok and m.kind == FLOW
    assert m.states == ["x", "y", "z"]
    x, y, z = (m.symbols[s] for s in "xyz")
    sigma, rho, beta = (m.symbols[s] for s in ("sigma", "rho", "beta"))
    assert sp.simplify(m.equations["x"] - sigma * (y - x)) == 0
    assert sp.simplify(m.equations["y"] - (x * (rho - z) - y)) == 0
    assert sp.simplify(m.equations["z"] - (x * y - beta * z)) == 0
    assert m.parameters["sigma"].value == 10 and (m.parameters["sigma"].lo, m.parameters["sigma"].hi) == (0, 20)
    assert m.parameters["sigma"].line == 5
    assert m.parameters["rho"].lo is None and m.parameters["rho"].hi is None
    assert m.parameters["beta"].value == pytest.approx(8 / 3, rel=1e-15)
    assert m.initial == {"x": 1.0, "y": 1.0, "z": 1.05}
    assert m.time_symbol.name == "t" and m.autonomous
    assert not [d for d in m.diagnostics if d.severity != INFO]


def test_lorenz_right_side_at_a_point_matches_the_formula():
    system = compile_model(LORENZ)
    u = np.array([1.5, -2.0, 20.0])
    x, y, z = u
    expected = [10 * (y - x), x * (28 - z) - y, x * y - 8 / 3 * z]
    np.testing.assert_allclose(system.rhs(0.0, u), expected, rtol=1e-14)


def test_comments_blank_lines_and_windows_line_ends():
    m = parse_model("# a comment\r\n\r\nx' = -k*x   # decay\r\nk = 0.5\r\nx(0) = 2\r\n")
    assert m.ok and m.states == ["x"] and m.initial == {"x": 2.0}
    assert m.parameters["k"].value == 0.5


def test_map_statements_and_the_henon_step():
    m = parse_model("x[n+1] = 1 - a*x[n]^2 + y\ny[n+1] = b*x\na = 1.4\nb = 0.3\nx[0] = 0.1\ny[0] = 0.2")
    assert m.ok and m.kind == MAP and m.time_symbol.name == "n"
    assert m.states == ["x", "y"] and m.initial == {"x": 0.1, "y": 0.2}
    system = compile_model(m)
    x, y = 0.1, 0.2  # Hénon (1976): x' = 1 - a x^2 + y, y' = b x
    np.testing.assert_allclose(system.rhs(0, [x, y]), [1 - 1.4 * x * x + y, 0.3 * x], rtol=1e-15)


def test_map_subscript_spacing_and_step_variable():
    m = parse_model("x[ n + 1 ] = x[ n ] + n\nx[ 0 ] = 1")
    assert m.ok and not m.autonomous
    assert compile_model(m).rhs(3, [2.0])[0] == 5.0


def test_derived_quantities_are_kept_and_put_into_equations():
    m = parse_model("x' = v\nv' = -x - c*speed\nspeed = v*abs(v)\nenergy = v^2/2 + x^2/2\nc = 0.1")
    assert m.ok
    x, v, c = m.symbols["x"], m.symbols["v"], m.symbols["c"]
    assert sp.simplify(m.derived["energy"] - (v**2 / 2 + x**2 / 2)) == 0
    assert sp.simplify(m.equations["v"] - (-x - c * v * sp.Abs(v))) == 0
    assert m.symbols["speed"] not in m.equations["v"].free_symbols


def test_derived_quantity_using_another_derived_quantity_and_time():
    m = parse_model("x' = drive\ndrive = a*cos(w*t)\nw = 2\na = amp*3\namp = 0.5")
    assert m.ok and not m.autonomous
    # a = amp*3 is a derived quantity (it names amp), not a parameter
    assert "a" in m.derived and "amp" in m.parameters
    np.testing.assert_allclose(compile_model(m).rhs(0.3, [0.0]), [1.5 * math.cos(0.6)], rtol=1e-14)


def test_parameter_value_may_be_a_constant_expression():
    m = parse_model("a = 2*pi in [0, 10]\nb = -e^2\nx' = a + b")
    assert m.parameters["a"].value == pytest.approx(2 * math.pi, rel=1e-15)
    assert m.parameters["b"].value == pytest.approx(-math.e**2, rel=1e-15)


def test_initial_values_may_use_parameters_pi_and_e():
    m = parse_model("x'' = -w^2*x\nw = 3\nx(0) = pi/w\nx'(0) = -e")
    assert m.ok
    assert m.initial["x"] == pytest.approx(math.pi / 3, rel=1e-15)
    assert m.initial["x'"] == pytest.approx(-math.e, rel=1e-15)


def test_powers_precedence_and_unary_minus():
    cases = {"2^3^2": 512.0, "2**3**2": 512.0, "-2^2": -4.0, "2^-1": 0.5, "(-2)^2": 4.0,
             "2*3+4": 10.0, "2+3*4": 14.0, "12/3/2": 2.0, "8-3-2": 3.0, "-(-3)": 3.0, "+4": 4.0,
             "1.5e2": 150.0, ".5": 0.5, "5.": 5.0, "2.5E-1": 0.25}
    for rhs, expected in cases.items():
        m = parse_model(f"x' = {rhs}")
        assert m.ok, rhs
        assert compile_model(m).rhs(0, [0.0])[0] == pytest.approx(expected, rel=1e-15), rhs


@pytest.mark.parametrize("call, reference", [
    ("sin(0.7)", math.sin(0.7)), ("cos(0.7)", math.cos(0.7)), ("tan(0.7)", math.tan(0.7)),
    ("asin(0.3)", math.asin(0.3)), ("acos(0.3)", math.acos(0.3)), ("atan(0.3)", math.atan(0.3)),
    ("atan2(-1, -2)", math.atan2(-1, -2)), ("sinh(0.7)", math.sinh(0.7)), ("cosh(0.7)", math.cosh(0.7)),
    ("tanh(0.7)", math.tanh(0.7)), ("exp(0.7)", math.exp(0.7)), ("log(0.7)", math.log(0.7)),
    ("log10(0.7)", math.log10(0.7)), ("sqrt(0.7)", math.sqrt(0.7)), ("abs(-0.7)", 0.7),
    ("sign(-0.7)", -1.0), ("min(0.7, 0.2)", 0.2), ("max(0.7, 0.2)", 0.7), ("heaviside(-0.7)", 0.0),
    ("heaviside(0.7)", 1.0), ("mod(7.5, 2)", 1.5), ("mod(-1, 3)", 2.0), ("floor(-0.7)", -1.0),
    ("pi", math.pi), ("e", math.e),
])
def test_functions_and_constants_match_the_math_module(call, reference):
    # the function is applied to the state so that the compiled (not folded) path is checked
    arg = call.replace("0.7", "x").replace("0.3", "x/7*3")
    for rhs, u in ((call, 0.7), (arg, 0.7)):
        m = parse_model(f"x' = {rhs}")
        assert m.ok, (rhs, [d.format() for d in m.diagnostics])
        assert compile_model(m).rhs(0, [u])[0] == pytest.approx(reference, rel=1e-14, abs=1e-15), rhs


# ---------------------------------------------------------------- higher-order reduction


def assert_same_system(higher: str, first_order: str, rename: dict):
    """Compare the reduced form with a hand-written first-order model (``rename``: its names -> ours)."""
    a, b = parse_model(higher), parse_model(first_order)
    assert a.ok and b.ok, [d.format() for d in a.diagnostics + b.diagnostics]
    swap = {b.symbols[old]: a.symbols[new] for old, new in rename.items()}
    assert a.states == [rename.get(s, s) for s in b.states]
    for state in b.states:
        assert sp.simplify(a.equations[rename.get(state, state)] - b.equations[state].xreplace(swap)) == 0, state
    assert {rename.get(k, k): v for k, v in b.initial.items()} == a.initial
    sa, sb = compile_model(a), compile_model(b)
    rng = np.random.default_rng(1)
    for _ in range(5):
        u, t = rng.normal(size=sa.n_states), rng.uniform(0, 10)
        np.testing.assert_allclose(sa.rhs(t, u), sb.rhs(t, u), rtol=1e-13)


def test_second_order_forced_duffing_reduces_to_the_first_order_form():
    # Duffing oscillator x'' + d x' + a x + b x^3 = g cos(w t)
    assert_same_system(
        "x'' = -d*x' - a*x - b*x^3 + g*cos(w*t)\nd = 0.3\na = -1\nb = 1\ng = 0.5\nw = 1.2\nx(0) = 1\nx'(0) = 0",
        "x' = v\nv' = -d*v - a*x - b*x^3 + g*cos(w*t)\nd = 0.3\na = -1\nb = 1\ng = 0.5\nw = 1.2\nx(0) = 1\nv(0) = 0",
        {"v": "x'"})


def test_van_der_pol_second_order_with_other_states():
    assert_same_system(
        "y' = -y + x\nx'' = mu*(1 - x^2)*x' - x\nmu = 2",
        "y' = -y + x\nx' = v\nv' = mu*(1 - x^2)*v - x\nmu = 2",
        {"v": "x'"})


def test_third_order_equation():
    # jerk equation x''' = -A x'' + x'^2 - x (Sprott's simplest chaotic flows)
    assert_same_system(
        "x''' = -A*x'' + x'^2 - x\nA = 2.017\nx(0) = 0.1\nx''(0) = -0.2",
        "x' = v\nv' = w\nw' = -A*w + v^2 - x\nA = 2.017\nx(0) = 0.1\nw(0) = -0.2",
        {"v": "x'", "w": "x''"})


def test_highest_derivative_used_elsewhere_means_the_equation_right_side():
    m = parse_model("x'' = -x\nforce = 2*x''\ny' = x''")
    assert m.ok
    x = m.symbols["x"]
    assert sp.simplify(m.derived["force"] + 2 * x) == 0
    assert sp.simplify(m.equations["y"] + x) == 0


def test_higher_derivative_than_the_equation_gives_is_an_error():
    (pos, d) = error_at("x' = -x\ny' = x''", "higher derivative")
    assert pos == (2, 6, 9)


# ---------------------------------------------------------------- diagnostics, each at its exact position


@pytest.mark.parametrize("text, fragment, position", [
    ("x' = (x + 1", "expected ')', found the end of the line", (1, 12, 13)),
    ("x' = x +* 2", "unexpected '*'", (1, 9, 10)),
    ("x' = 2 x", "is an operator such as '*' missing?", (1, 8, 9)),
    ("x' = 2x", "write a '*' between a number and a name", (1, 7, 8)),
    ("x' = sin(x", "expected ',' or ')'", (1, 11, 12)),
    ("x' = sin(x, 1)", "sin() takes 1 argument, got 2", (1, 6, 15)),
    ("x' = atan2(x)", "atan2() takes 2 arguments, got 1", (1, 6, 14)),
    ("x' = 1\n  y' = x $ 2", "unexpected character '$'", (2, 10, 11)),
    ("x' = x == 1", "'==' is not supported", (1, 8, 10)),
    ("x' = x < 1", "'<' belongs inside a condition", (1, 8, 9)),
    ("x' = 1 = 2", "only one '=' is allowed", (1, 8, 9)),
    ("x' = ", "missing the right side", (1, 5, 6)),
    ("  = 3\nx' = 1", "missing the left side", (1, 3, 4)),
    ("x' = 1\nx + 1", "expected a statement", (2, 1, 6)),
    ("x' = 1\n2x = 3", "cannot read the left side '2x'", (2, 1, 3)),
    ("x' = 1\nx[n+2] = 3", "cannot read the left side", (2, 1, 7)),
    ("x' = sinn(x)", "unknown function 'sinn'; did you mean 'sin'?", (1, 6, 10)),
    ("x' = sin", "sin is a function; call it as sin(...)", (1, 6, 9)),
    ("x' = n", "'n' is the time of maps; this model is a flow", (1, 6, 7)),
    ("x[n+1] = t", "'t' is the time of flows; this model is a map", (1, 10, 11)),
    ("x' = 1/0", "division by zero", (1, 6, 9)),
    ("x' = 1\nsin' = 2", "'sin' is reserved and cannot be a state", (2, 1, 5)),
    ("x' = 1\nt = 2", "'t' is reserved", (2, 1, 2)),
    ("x' = 1\nlambda = 2", "'lambda' is a reserved word", (2, 1, 7)),
    ("x' = a\na = 1\na = 2", "'a' is already defined on line 2", (3, 1, 2)),
    ("x' = 1\nx = 2", "'x' is already a state", (2, 1, 2)),
    ("x' = 1\nx(0) = 1\nx(0) = 2", "a second initial value for 'x'", (3, 1, 5)),
    ("x' = 1\nx(0) = y", "'y' is not a constant; initial values use numbers, pi, e and parameters", (2, 8, 9)),
    ("x' = a\na = 1 in [2, 1]", "the range [2, 1] is empty", (2, 7, 9)),
    ("x' = a\na = x in [0, 1]", "a range 'in [LO, HI]' belongs to a parameter", (2, 7, 9)),
    ("x' = a\na = 1 in [0]", "a range is written 'in [LO, HI]'", (2, 7, 13)),
    ("x' = a\na = 1 +\n", "expression ends too early", (2, 8, 9)),
    ("x' = a\na = 1 +", "'a' cannot be used: its definition on line 2 has an error", (1, 6, 7)),
    ("", "no equations yet", (1, 1, 2)),
    ("x' = x\x00", "NUL character", (1, 7, 8)),
])
def test_syntax_and_definition_errors_at_exact_positions(text, fragment, position):
    pos, _ = error_at(text, fragment)
    assert pos == position


def test_unknown_name_with_did_you_mean_fix():
    text = "x' = sigam*(y - x)\ny' = x\nsigma = 10"
    pos, d = error_at(text, "unknown name")
    assert pos == (1, 6, 11)
    assert d.message == "unknown name 'sigam'; did you mean 'sigma'?"
    assert d.fix == "did you mean 'sigma'?"


def test_unknown_name_without_a_close_match_has_no_fix():
    _, d = error_at("x' = qwerty", "unknown name")
    assert d.message == "unknown name 'qwerty'" and d.fix is None


def test_state_syntax_without_an_equation_flow():
    pos, d = error_at("x' = y' + 1", "'y' is used as a state but has no equation y' = ...")
    assert pos == (1, 6, 8) and d.fix == "add a line y' = ..."


def test_state_syntax_without_an_equation_map():
    pos, d = error_at("x[n+1] = 0.5*y[n]", "'y' is used as a state but has no equation y[n+1] = ...")
    assert pos == (1, 14, 18) and d.fix == "add a line y[n+1] = ..."


def test_two_equations_for_one_state():
    pos, _ = error_at("x' = 1\ny' = 2\n  x' = 3", "a second equation for 'x' (the first is on line 1)")
    assert pos == (3, 3, 5)


def test_two_equations_for_one_state_of_different_orders():
    pos, _ = error_at("x' = 1\nx'' = 3", "a second equation for 'x'")
    assert pos == (2, 1, 4)


def test_initial_value_for_an_unknown_state():
    pos, d = error_at("theta' = 1\ntheat(0) = 1", "initial value for 'theat', which is not a state")
    assert pos == (2, 1, 9) and d.fix == "did you mean 'theta'?"
    pos, _ = error_at("x' = 1\nx'(0) = 1", "initial value for 'x'', which is not a state")
    assert pos == (2, 1, 6)


@pytest.mark.parametrize("text, position", [
    ("x' = 1\ny[n+1] = 2", (2, 1, 7)),
    ("x[n+1] = 1\ny' = 2", (2, 1, 3)),
    ("x' = 1\nx[0] = 2", (2, 1, 5)),
    ("x[n+1] = x\nx(0) = 2", (2, 1, 5)),
])
def test_map_and_flow_mixing(text, position):
    pos, _ = error_at(text, "a model is either a flow (x' = ...) or a map (x[n+1] = ...)")
    assert pos == position


def test_map_syntax_inside_a_flow_and_primes_inside_a_map():
    pos, _ = error_at("x' = x[n]", "subscripts such as [n] belong to maps; this model is a flow")
    assert pos == (1, 6, 10)
    pos, _ = error_at("x[n+1] = x'", "primes belong to flows; this model is a map")
    assert pos == (1, 10, 12)


def test_derived_quantity_cycle_is_reported_on_every_definition_in_it():
    model = parse_model("x' = a\na = b + x\nb = 2*a\nc = x")
    cycle = [d for d in model.errors if "depend on each other in a loop" in d.message]
    assert [where(d) for d in cycle] == [(2, 1, 2), (3, 1, 2)]
    assert all("a -> b -> a" in d.message for d in cycle)
    assert "c" in model.derived


def test_equation_depending_on_itself_through_its_highest_derivative():
    pos, d = error_at("x'' = x'' + 1", "depend on each other in a loop")
    assert pos == (1, 1, 4) and "x'' -> x''" in d.message


def test_redefining_pi_or_e_warns_and_uses_the_model_value():
    m = parse_model("pi = 3\nx' = pi*x\ne = 2\ny' = e")
    assert m.ok
    assert where(only(m, WARNING, "redefines the constant pi")) == (1, 1, 3)
    assert where(only(m, WARNING, "redefines the constant e")) == (3, 1, 2)
    np.testing.assert_allclose(compile_model(m).rhs(0, [1.0, 0.0]), [3.0, 2.0])


@pytest.mark.parametrize("func, args", [("abs", "x"), ("sign", "x"), ("min", "x, 1"), ("max", "x, 1"),
                                        ("heaviside", "x"), ("mod", "x, 1"), ("floor", "x")])
def test_non_smooth_functions_warn(func, args):
    m = parse_model(f"x' = 1 + {func}({args})")
    assert m.ok
    d = only(m, WARNING, f"{func}() is not smooth")
    assert where(d) == (1, 10, 10 + len(func))
    assert m.nonsmooth == [func]
    assert not compile_model(m).smooth


def test_smooth_model_has_no_non_smooth_warning():
    m = parse_model(LORENZ)
    assert m.nonsmooth == [] and compile_model(m).smooth


def test_parameter_range_that_excludes_its_value_warns():
    m = parse_model("x' = a\na = 5 in [0, 1]")
    assert m.ok
    d = only(m, WARNING, "the value 5 lies outside its range [0, 1]")
    assert where(d) == (2, 5, 6) and d.fix
    m = parse_model("x' = a\na =  -2*pi   in [0, 1]")
    assert where(only(m, WARNING, "outside its range")) == (2, 6, 11)


def test_missing_initial_value_is_information_and_defaults_to_zero():
    m = parse_model("x' = -x\ny'' = -y\ny(0) = 1")
    assert m.ok
    assert where(only(m, INFO, "no initial value for x;")) == (1, 1, 3)
    assert where(only(m, INFO, "no initial value for y';")) == (2, 1, 4)
    assert m.initial == {"x": 0.0, "y": 1.0, "y'": 0.0}
    m = parse_model("x[n+1] = x/2")
    assert "write x[0] = ..." in only(m, INFO, "no initial value for x").message


# ---------------------------------------------------------------- Python that must not be read as Python


@pytest.mark.parametrize("text, fragment, position", [
    ("x' = x.real", "attribute access ('.') is not part of the model language", (1, 7, 8)),
    ("x' = x.__class__", "attribute access", (1, 7, 8)),
    ("x' = 'a'", "strings are not part of the model language", (1, 6, 7)),
    ('x\' = "rm -rf /"', "strings are not part of the model language", (1, 6, 7)),
    ("x' = lambda: 1", "'lambda' is not part of the model language", (1, 6, 12)),
    ("x' = (lambda y: y)(x)", "'lambda' is not part of the model language", (1, 7, 13)),
    ("x' = __import__('os').system('rm -rf /')", "strings are not part of the model language", (1, 17, 18)),
    ("x' = __import__", "unknown name '__import__'", (1, 6, 16)),
    ("x' = eval(x)", "unknown function 'eval'", (1, 6, 10)),
    ("x' = system(x)", "unknown function 'system'", (1, 6, 12)),
    ("x' = x if x else 1", "'else' is not part of the model language", (1, 13, 17)),
    ("x' = x if(x < 1, 1, 0)", "'if' is written as a call here: if(COND, A, B)", (1, 8, 10)),
    ("x' = not x", "'not' belongs inside if(COND, A, B)", (1, 6, 9)),
    ("x' = [x for x in y]", "'for' is not part of the model language", (1, 9, 12)),
    ("x' = [x]", "unexpected '['", (1, 6, 7)),
    ("x' = 1; import os", "unexpected character ';'", (1, 7, 8)),
    ("x[n+1] = x[n-1]", "subscript [n-1] is not allowed; only [n], [n+1] and [0]", (1, 11, 16)),
    ("x[n+1] = x[1]", "subscript [1] is not allowed", (1, 11, 14)),
    ("x[n+1] = x[n+2]", "subscript [n+2] is not allowed", (1, 11, 16)),
    ("x[n+1] = x[i]", "subscript [i] is not allowed", (1, 11, 14)),
    ("x[n+1] = x[0:2]", "unexpected character ':'", (1, 13, 14)),
    ("x[n+1] = x[n+1]", "x[n+1] can only appear on the left of '='", (1, 10, 16)),
    ("x[n+1] = x[0]", "x[0] is an initial value", (1, 10, 14)),
    ("x[n+1] = x[n", "missing ']'", (1, 11, 13)),
])
def test_python_constructs_are_errors(text, fragment, position, monkeypatch):
    import builtins
    import os

    calls = []
    real_import = builtins.__import__

    def refuse(what):
        def trap(*args, **kwargs):
            calls.append(what)
            raise PermissionError(what)
        return trap

    def guarded_import(name, *args, **kwargs):
        if name.split(".")[0] in ("os", "subprocess", "shutil"):
            return refuse(f"import {name}")()
        return real_import(name, *args, **kwargs)

    with monkeypatch.context() as patch:
        for name in ("eval", "exec", "compile"):
            patch.setattr(builtins, name, refuse(name))
        patch.setattr(builtins, "__import__", guarded_import)
        patch.setattr(os, "system", refuse("os.system"))
        model = parse_model(text)
    assert calls == []
    pos = where(only(model, ERROR, fragment))
    assert pos == position
    # (tests/core/test_no_code_execution.py runs the whole hostile corpus under such traps)


# ---------------------------------------------------------------- bounds


def test_nesting_deeper_than_the_limit_is_an_error_at_the_first_level_too_deep():
    m = parse_model("x' = " + "(" * (MAX_DEPTH + 10) + "x" + ")" * (MAX_DEPTH + 10))
    d = only(m, ERROR, f"nested more than {MAX_DEPTH} levels")
    # '(' number k sits at column 5 + k; level 1 is the whole right side
    assert where(d) == (1, 6 + MAX_DEPTH, 7 + MAX_DEPTH)


def test_nesting_at_the_limit_is_fine():
    m = parse_model("x' = " + "(" * (MAX_DEPTH - 1) + "x" + ")" * (MAX_DEPTH - 1))
    assert m.ok


@pytest.mark.parametrize("rhs, fragment, position", [
    ("9^9^9", "too large", (1, 6, 11)),
    ("x + 10^400", "too large", (1, 10, 16)),
    ("1e999", "too large", (1, 6, 11)),
    ("floor(pi^(10^10))", "too large", (1, 12, 22)),
    ("0^-1", "0 raised to a negative power", (1, 6, 10)),
    ("mod(x, 0)", "mod() divides by zero", (1, 6, 15)),
    ("log(0)", "log() of this constant is undefined", (1, 6, 12)),
    ("sqrt(-1)", "sqrt() of this constant is not a real number", (1, 6, 14)),
    ("(-8)^(1/3)", "not a real number", (1, 6, 16)),
    ("x*" + "9" * 41, "number has more than 40 digits", (1, 8, 49)),
])
def test_constants_are_bounded_and_must_be_real(rhs, fragment, position):
    pos, _ = error_at(f"x' = {rhs}", fragment)
    assert pos == position


def test_constants_below_1e_minus_300_become_their_double():
    m = parse_model("x' = mod(exp(-10^10)*x + (1/3)^(10^10), 7) + 1e-99999999 + 1e-320*x")
    assert m.ok
    x = m.symbols["x"]
    assert m.equations["x"] == sp.Float(1e-320) * x  # 1e-320 is a denormal double, the rest is 0.0
    pos, _ = error_at("x' = mod(x, 2^(-10^10))", "mod() divides by zero")
    assert pos == (1, 6, 24)


def test_constants_inside_bounds_fold_exactly():
    m = parse_model("x' = 2^64 + 0.1 + 1e-3 + 10^60/10^59 + (2/3)^2")
    assert m.ok
    assert m.equations["x"] == sp.Integer(2**64) + sp.Rational(1, 10) + sp.Rational(1, 1000) + 10 + sp.Rational(4, 9)


def test_substituted_definition_that_makes_a_huge_constant_is_an_error():
    # 2^1000 = 1.07e301: only too large once x' (or d) is replaced by the constant 2
    pos, d = error_at("x' = 2\ny' = x'^1000", "too large")
    assert pos == (2, 6, 13) and "once the definitions it uses are put in" in d.message
    pos, _ = error_at("d = 2 + x - x\nx' = floor(d^1000)", "too large")
    assert pos == (2, 6, 19)
    assert parse_model("d = 2 + x - x\nx' = d^996").ok  # 2^996 = 6.7e299


@pytest.mark.parametrize("rhs, exponent, position", [
    ("x^1001", "1001", (1, 6, 12)),
    ("(x/3)^(10^10)", "10000000000", (1, 6, 19)),
    ("mod(x^(-2000), 7)", "-2000", (1, 10, 19)),
    ("((x^64)^64)^64", "4096", (1, 6, 17)),  # sympy merges the inner group already
    ("*".join(["x"] * 1001), "1001", (1, 6, 2007)),
    ("x^1e300", "1e+300", (1, 6, 13)),
])
def test_powers_of_expressions_have_bounded_exponents(rhs, exponent, position):
    pos, d = error_at(f"x' = {rhs}", "powers of expressions are limited to exponents within")
    assert pos == position and f"the exponent {exponent} is too large" in d.message


def test_exponents_at_the_limit_are_fine():
    m = parse_model("x' = x^1000 + (x/2)^-996 + x^a\na = 5000")
    assert m.ok
    x = m.symbols["x"]
    assert m.equations["x"].xreplace({m.symbols["a"]: 2}).subs(x, sp.Rational(3, 2)) == \
        sp.Rational(3, 2) ** 1000 + sp.Rational(4, 3) ** 996 + sp.Rational(9, 4)


def test_chain_of_definitions_that_grows_too_large_is_an_error():
    lines = ["a0 = x"] + [f"a{k} = sin(a{k - 1}) + cos(a{k - 1})" for k in range(1, 25)] + ["x' = a24"]
    m = parse_model("\n".join(lines))
    assert any("more than 100,000 parts" in d.message for d in m.errors)


def test_many_cycles_give_one_diagnostic_per_definition():
    n = 60
    text = "\n".join(f"a{i} = x + " + " + ".join(f"a{j}" for j in range(n)) for i in range(n)) + "\nx' = a0"
    m = parse_model(text)
    cycle = [d for d in m.errors if "loop" in d.message]
    assert sorted(d.line for d in cycle) == list(range(1, n + 1))


def test_derived_quantities_are_put_in_even_when_sympy_returns_cached_equal_symbols():
    # sympy caches function calls by equality, so sin(d1) may come back holding another Symbol
    # object equal to the model's d1 (found by the fuzz tests after many models in one process)
    twin = sp.Symbol.__xnew__(sp.Symbol, "d1", real=True)
    assert twin == sp.Symbol("d1", real=True) and twin is not sp.Symbol("d1", real=True)
    sp.sin(twin)
    m = parse_model("z[n+1] = sin(d1)\nd1 = z")
    assert m.ok and m.equations["z"] == sp.sin(m.symbols["z"])


def test_zero_to_a_negative_symbolic_power_is_an_error():
    pos, _ = error_at("x' = x^2 + 0^(-x^2)", "this expression is undefined: it divides by zero")
    assert pos == (1, 12, 20)
    assert parse_model("x' = 0^x").ok  # 0^x is 0 for x > 0: not refused


def test_nothing_half_resolved_is_left_behind_by_a_failed_definition():
    m = parse_model("x' = a + y'\na = 1/0 + x\ny' = b\nb = 2*y\nz' = x'")
    assert not m.ok
    assert [d.message for d in m.errors] == ["division by zero"]
    y = m.symbols["y"]
    assert m.equations == {"y": 2 * y} and m.derived == {"b": 2 * y}


def test_quick_fixes_are_offered_only_where_they_are_certain():
    from orbitdesk.language.diagnostics import apply_fix, quick_fix

    text = "sigma = 1\nx' = -sgima*sin(x\ny' = frobnicate(y)\n"
    fixes = [f for f in map(quick_fix, parse_model(text).diagnostics) if f is not None]
    # one at a time: the line does not parse until its parenthesis closes, then the name is checked
    assert [(f.line, f.text, f.label) for f in fixes] == [(2, ")", "close the parenthesis")]
    fixed = apply_fix(text, fixes[0])
    fixes = [f for f in map(quick_fix, parse_model(fixed).diagnostics) if f is not None]
    assert [(f.line, f.text, f.label) for f in fixes] == [(2, "sigma", "write 'sigma'")]
    fixed = apply_fix(fixed, fixes[0])
    assert fixed.splitlines()[1] == "x' = -sigma*sin(x)"
    # an unknown function with no close name gets no quick fix
    assert [d for d in parse_model(fixed).errors if quick_fix(d) is not None] == []

"""The compiled system: Jacobians, vectorized evaluators, parameters."""

import numpy as np
import pytest
import sympy as sp

from orbitdesk.system.compiled_system import ModelError, UndefinedValue, compile_model
from orbitdesk.samples.models import LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={'y(0)': None, 'z(0)': None})


def test_lorenz_jacobian_is_the_textbook_matrix():
    # Strogatz, Nonlinear Dynamics and Chaos, sec. 9.2: the linearisation of the Lorenz equations
    system = compile_model(LORENZ)
    x, y, z = system.state_symbols
    sigma, r, beta = system.param_symbols
    expected = sp.Matrix([[-sigma, sigma, 0], [r - z, -1, -x], [y, x, -beta]])
    assert sp.simplify(system.jacobian - expected) == sp.zeros(3, 3)
    assert np.allclose(system.jac(0, [1, 2, 3]), [[-10, 10, 0], [25, -1, -1], [2, 1, -8 / 3]])


def test_jacobian_matches_finite_differences():
    system = compile_model("a = 1.3\nx' = sin(x*y) + a*exp(-y)\ny' = x^3 - atan2(y, 1 + x^2)\n")
    u = np.array([0.4, -0.7])
    eps = 1e-6
    numeric = np.column_stack([(system.rhs(0, u + eps * e) - system.rhs(0, u - eps * e)) / (2 * eps)
                               for e in np.eye(2)])
    assert np.allclose(system.jac(0, u), numeric, atol=1e-8)


def test_parameter_jacobian():
    system = compile_model(LORENZ)
    dfdp = np.array(system.param_jacobian.subs(dict(zip(system.state_symbols, [1, 2, 3]))), dtype=float)
    assert np.allclose(dfdp, [[1, 0, 0], [0, 1, 0], [0, 0, -3]])


def test_vectorized_evaluator_agrees_with_scalar_and_broadcasts_parameters():
    system = compile_model(LORENZ)
    rng = np.random.default_rng(3)
    U = rng.normal(size=(3, 50))
    P = np.vstack([np.full(50, 10.0), np.linspace(0, 30, 50), np.full(50, 8 / 3)])
    vec = system.rhs_vec(0.0, U, P)
    for k in range(50):
        assert np.allclose(vec[:, k], system.rhs(0.0, U[:, k], P[:, k]))
    J = system.jac_vec(0.0, U, P)
    assert J.shape == (3, 3, 50)
    assert np.allclose(J[:, :, 7], system.jac(0.0, U[:, 7], P[:, 7]))


def test_constant_components_broadcast():
    system = compile_model("x' = 1\ny' = x\n")
    assert system.rhs_vec(0.0, np.zeros((2, 4))).shape == (2, 4)


def test_nonautonomous_and_nonsmooth_flags():
    forced = compile_model("x'' = -x + cos(t)\n")
    assert not forced.autonomous
    assert compile_model(LORENZ).autonomous
    assert compile_model("x' = -abs(x)\n").nonsmooth == ["abs"]


def test_model_with_errors_is_not_compiled():
    with pytest.raises(ModelError) as err:
        compile_model("x' = sigam*x\n")
    assert "sigam" in str(err.value)


def test_undefined_value_names_the_expression():
    system = compile_model("x' = sqrt(x - 2)\n")
    with pytest.raises(UndefinedValue, match=r"sqrt\(x - 2\)"):
        system.rhs(0.0, [1.0])


def test_parameter_and_initial_overrides():
    system = compile_model(LORENZ)
    assert system.param_vector({"r": 5})[1] == 5
    assert system.initial_vector({"z": 2}).tolist() == [1, 0, 2]
    with pytest.raises(KeyError):
        system.param_vector({"q": 1})


def test_derived_quantities_along_a_run():
    system = compile_model("k = 2\nx' = -x\nenergy = k*x^2/2\nhalf = energy/2\n")
    values = system.derived_values(np.array([0.0, 1.0]), np.array([[1.0, 2.0]]))
    assert values["energy"].tolist() == [1.0, 4.0]
    assert values["half"].tolist() == [0.5, 2.0]

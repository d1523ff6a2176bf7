"""f and the Jacobian for many members at once (``CompiledSystem.rhs_vec`` / ``jac_vec``) come from the one code
generator: the numpy twin of the batched kernel (``codegen.vector_source``) that the plain-Python engine's
members run on. Checked against the closed forms of the Lorenz equations (Lorenz, J. Atmos. Sci. 20 (1963)
130-141) and against the engine's batched kernel itself."""

import numpy as np
import pytest

from orbitdesk.engine import compiled
from orbitdesk.samples.models import LORENZ
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback


def _lorenz_closed_form(U, P):
    x, y, z = U
    s, r, b = P
    f = np.array([s * (y - x), x * (r - z) - y, x * y - b * z])
    zero, one = np.zeros_like(x), np.ones_like(x)
    J = np.array([[-s * one, s * one, zero], [r - z, -one, -x], [y, x, -b * one]])
    return f, J


def _members(count=40, seed=5):
    rng = np.random.default_rng(seed)
    U = rng.normal(scale=10.0, size=(3, count))
    P = np.vstack([rng.uniform(5, 15, count), rng.uniform(0, 40, count), rng.uniform(1, 3, count)])
    return U, P


def test_many_members_agree_with_the_lorenz_closed_form():
    system = compile_model(LORENZ)
    assert system.parameters == ["sigma", "r", "beta"]
    U, P = _members()
    f, J = _lorenz_closed_form(U, P)
    assert np.allclose(system.rhs_vec(0.0, U, P), f, rtol=1e-15, atol=1e-13)
    assert np.allclose(system.jac_vec(0.0, U, P), J, rtol=1e-15, atol=0.0)
    # one parameter vector for every member, and a grid of members (the direction field's shape)
    f1, J1 = _lorenz_closed_form(U, system.param_values[:, None])
    assert np.allclose(system.rhs_vec(0.0, U), f1, rtol=1e-15, atol=1e-13)
    grid = U.reshape(3, 5, 8)
    assert np.allclose(system.rhs_vec(0.0, grid), f1.reshape(3, 5, 8), rtol=1e-15, atol=1e-13)
    assert system.jac_vec(0.0, grid).shape == (3, 3, 5, 8)


def test_the_members_evaluators_are_the_engines_batched_kernel():
    """rhs_vec and jac_vec give what the plain-Python engine's batched kernel gives its members, bit for bit:
    f with no tangent vectors, and J V = J for the identity as tangent vectors."""
    system = compile_model(LORENZ)
    U, P = _members(count=17, seed=9)
    count = U.shape[1]
    T = np.linspace(0.0, 3.0, count)
    batch = compiled.python_engine(system).batch
    z = np.vstack([U, np.repeat(np.eye(3).reshape(9, 1), count, axis=1)])
    out = np.empty((12, count))
    batch(3, T, z, P, out, count)
    assert np.array_equal(out[:3], system.rhs_vec(T, U, P))
    assert np.array_equal(out[3:].reshape(3, 3, count), system.jac_vec(T, U, P))


def test_time_is_one_per_member_or_one_for_all():
    system = compile_model("a = 0.5\nx' = -a*x + sin(t)\nx(0) = 1\n")
    U = np.array([[0.0, 1.0, 2.0, -1.0]])
    T = np.array([0.0, 0.5, 1.0, 1.5])
    assert np.allclose(system.rhs_vec(T, U)[0], -0.5 * U[0] + np.sin(T), rtol=1e-15, atol=1e-16)
    assert np.allclose(system.rhs_vec(0.7, U)[0], -0.5 * U[0] + np.sin(0.7), rtol=1e-15, atol=1e-16)
    assert system.jac_vec(T, U)[0, 0].tolist() == [-0.5] * 4


def test_an_undefined_member_is_nan_and_the_others_are_not():
    system = compile_model("x' = log(x) + y\ny' = sqrt(x)\nx(0) = 1\ny(0) = 0\n")
    U = np.array([[-1.0, 4.0], [1.0, 1.0]])
    f = system.rhs_vec(0.0, U)
    assert np.isnan(f[:, 0]).all() and f[:, 1].tolist() == [np.log(4.0) + 1.0, 2.0]
    J = system.jac_vec(0.0, U)
    assert J[:, :, 1].tolist() == [[0.25, 1.0], [0.25, 0.0]]  # d log(x)/dx = 1/x, d sqrt(x)/dx = 1/(2 sqrt x)
    assert np.isnan(J[1, 0, 0]) and J[0, 1, 0] == 1.0


def test_derived_quantities_along_a_run_with_parameters_per_member():
    # closed forms: E = (x^2 + y^2)/2 + k z, and a quantity of the parameters alone broadcast to every point
    system = compile_model("k = 2\nx' = y\ny' = -x\nz' = 0\nE = (x^2 + y^2)/2 + k*z\nhalf = k/2\n")
    rng = np.random.default_rng(2)
    Y = rng.normal(size=(3, 6))
    t = np.linspace(0.0, 1.0, 6)
    k = np.linspace(1.0, 3.0, 6)
    values = system.derived_values(t, Y, k[None, :])
    assert np.allclose(values["E"], (Y[0] ** 2 + Y[1] ** 2) / 2 + k * Y[2], rtol=1e-15)
    assert np.array_equal(values["half"], k / 2)
    assert system.derived_values(t, Y)["half"].tolist() == [1.0] * 6

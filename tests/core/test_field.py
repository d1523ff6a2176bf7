"""Direction field on a grid against closed-form vector fields."""

import numpy as np
import pytest

from orbitdesk.analyses.field import direction_field
from orbitdesk.system.compiled_system import compile_model


def test_linear_centre_field_is_rotation():
    # x' = y, y' = -w^2 x: the field at (x, y) is (y, -w^2 x) exactly
    system = compile_model("x' = y\ny' = -w^2*x\nw = 2\n")
    X, Y, U, V = direction_field(system, None, (-1, 1), (-2, 2), (5, 7))
    assert X.shape == (7, 5)
    np.testing.assert_allclose(U, Y)
    np.testing.assert_allclose(V, -4 * X)
    X2, Y2, U2, V2 = direction_field(system, [3.0], (-1, 1), (-2, 2), 4)
    np.testing.assert_allclose(V2, -9 * X2)


def test_plane_of_two_states_with_others_held():
    # Lorenz (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2): x' = s(y-x), z' = xy - bz
    system = compile_model("x' = s*(y - x)\ny' = r*x - y - x*z\nz' = x*y - b*z\ns = 10\nr = 28\nb = 8/3\n")
    X, Z, U, W = direction_field(system, None, (-5, 5), (0, 30), 6, axes=(0, 2), base=[0, 2.0, 0])
    np.testing.assert_allclose(U, 10 * (2.0 - X))
    np.testing.assert_allclose(W, X * 2.0 - 8 / 3 * Z)


def test_undefined_points_are_nan_and_bad_axes_refused():
    system = compile_model("x' = log(x)\ny' = -y\n")
    X, Y, U, V = direction_field(system, None, (-1, 1), (-1, 1), 3)
    assert np.isnan(U[:, 0]).all() and np.isnan(V[:, 0]).all()  # log of a negative number
    np.testing.assert_allclose(U[:, 2], 0.0, atol=1e-15)  # log(1) = 0
    with pytest.raises(ValueError):
        direction_field(system, None, (-1, 1), (-1, 1), 3, axes=(1, 1))

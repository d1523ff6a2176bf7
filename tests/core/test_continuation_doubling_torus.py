"""Cycle period doublings with switching onto the doubled branch, torus points of cycles and of maps.

References: the Rössler system (Rössler 1976) at a = b = 0.2 starts its period-doubling cascade in c
near 2.83, 3.84, 4.12 (values from memory, so each is also checked against scipy below); the torus
points are closed forms of models built for the check (derivations in each docstring).
"""

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.signal import argrelmax

from orbitdesk.analyses.continuation import PERIOD_DOUBLING, TORUS, steady_branches
from orbitdesk.analyses.continuation.branches import default_settings
from orbitdesk.analyses.continuation.cycles import cycle_branches
from orbitdesk.system.compiled_system import compile_model

ROSSLER = ("a = 0.2\nb = 0.2\nc = 2.5\nx' = -y - z\ny' = x + a*y\nz' = b + z*(x - c)\n"
           "x(0) = 1\ny(0) = 1\nz(0) = 0\n")


def rossler(c):
    def f(t, w):
        x, y, z = w[:3]
        J = np.array([[0.0, -1.0, -1.0], [1.0, 0.2, 0.0], [z, 0.0, x - c]])
        return np.concatenate([[-y - z, x + 0.2 * y, 0.2 + z * (x - c)], (J @ w[3:].reshape(3, 3)).ravel()])
    return f


def scipy_multipliers(c, u0, period):
    """Floquet multipliers from scipy's integration of the variational equations over one period."""
    done = solve_ivp(rossler(c), (0, period), np.concatenate([u0, np.eye(3).ravel()]), method="DOP853",
                     rtol=1e-11, atol=1e-11)
    return np.linalg.eigvals(done.y[3:, -1].reshape(3, 3))


def branch_state(branch, i):
    return np.array([branch.points[j][i] for j in range(3)])


@pytest.fixture(scope="module")
def cascade():
    settings = default_settings(2.5, 3.3, 200)
    return cycle_branches(compile_model(ROSSLER), "c", 2.5, 3.3, settings=settings)


def test_rossler_period_doubling_is_where_a_multiplier_crosses_minus_one(cascade):
    parent = cascade.branches[0]
    (pd,) = [s for s in parent.special if s.type == PERIOD_DOUBLING]
    assert pd.value == pytest.approx(2.83, abs=0.01)  # from memory (see the module docstring)
    # scipy on the parent branch's own points on either side: the multiplier nearest -1 passes through it
    below = int(np.argmax(np.where(parent.values < pd.value, parent.values, -np.inf)))
    above = int(np.argmin(np.where(parent.values > pd.value, parent.values, np.inf)))
    for i, sign in ((below, 1.0), (above, -1.0)):
        mu = scipy_multipliers(parent.values[i], branch_state(parent, i), parent.periods[i])
        real = mu[np.abs(mu.imag) < 1e-9].real
        nearest = real[np.argmin(np.abs(real + 1))]
        assert sign * (nearest + 1.0) > 0  # above -1 before the point, below it after
        assert abs(nearest + 1.0) < 0.2


def test_rossler_switches_onto_the_cycle_of_twice_the_period(cascade):
    parent, doubled = cascade.branches[:2]
    (pd,) = [s for s in parent.special if s.type == PERIOD_DOUBLING]
    assert doubled.values.min() >= pd.value - 1e-6  # born at the point, on the supercritical side
    assert doubled.values.min() == pytest.approx(pd.value, abs=0.01)
    assert doubled.periods[0] == pytest.approx(2 * pd.period, rel=0.02)
    i = int(np.argmin(np.abs(doubled.values - 3.2)))
    c, u0, period = doubled.values[i], branch_state(doubled, i), doubled.periods[i]
    closed = solve_ivp(rossler(c), (0, period), np.concatenate([u0, np.eye(3).ravel()]), method="DOP853",
                       rtol=1e-11, atol=1e-11)
    half = solve_ivp(rossler(c), (0, period / 2), np.concatenate([u0, np.eye(3).ravel()]), method="DOP853",
                     rtol=1e-11, atol=1e-11)
    assert np.linalg.norm(closed.y[:3, -1] - u0) < 1e-5  # a cycle of this period ...
    assert np.linalg.norm(half.y[:3, -1] - u0) > 0.1  # ... that half the period does not close
    # it is the attractor there: a long scipy run settles on two maxima of x, the branch's extremes
    assert doubled.stable[i]
    run = solve_ivp(rossler(c), (0, 600), np.concatenate([[1.0, 1.0, 0.0], np.zeros(9)]), method="DOP853",
                    rtol=1e-10, atol=1e-10, t_eval=np.linspace(400, 600, 40001))
    peaks = np.unique(np.round(run.y[0][argrelmax(run.y[0])[0]], 2))
    assert len(peaks) == 2
    assert max(peaks) == pytest.approx(doubled.maxima["x"][i], abs=0.02)


def test_no_switching_when_asked_not_to():
    result = cycle_branches(compile_model(ROSSLER), "c", 2.5, 3.0, switch=False,
                            settings=default_settings(2.5, 3.0, 80))
    assert len(result.branches) == 1
    assert any(s.type == PERIOD_DOUBLING for s in result.branches[0].special)


# A cycle built to lose stability to a torus. In polar form the (x, y) plane carries the cycle r = 1,
# theta' = w (period 2 pi / w, radial multiplier exp(-4 pi / w)); the (u, v) plane is a Hopf normal
# form along it, uncoupled, so the cycle's other multipliers are exp(2 pi (m +- i nu) / w): they leave
# the unit circle at m = 0 with angle 2 pi nu / w (closed form).
TORUS_MODEL = ("m = -0.3\nw = 1\nnu = 0.3\n"
               "x' = -w*y + x*(1 - x^2 - y^2)\ny' = w*x + y*(1 - x^2 - y^2)\n"
               "u' = m*u - nu*v - u*(u^2 + v^2)\nv' = nu*u + m*v - v*(u^2 + v^2)\n"
               "x(0) = 1\ny(0) = 0\nu(0) = 0\nv(0) = 0\n")


def test_cycle_torus_point_against_the_closed_form():
    result = cycle_branches(compile_model(TORUS_MODEL), "m", -0.3, 0.3, guess={"x": 1.0, "y": 0.0, "u": 0.0, "v": 0.0},
                            settings=default_settings(-0.3, 0.3, 60))
    (branch,) = result.branches
    (torus,) = [s for s in branch.special if s.type == TORUS]
    assert torus.value == pytest.approx(0.0, abs=1e-7)
    assert abs(torus.frequency) == pytest.approx(2 * math.pi * 0.3, rel=1e-6)
    assert torus.period == pytest.approx(2 * math.pi, rel=1e-8)
    assert not any(s.type == PERIOD_DOUBLING for s in branch.special)
    for m, stable in zip(branch.values, branch.stable):
        if abs(m) > 1e-3:
            assert stable == (m < 0)


# The delayed logistic map x -> y, y -> a y (1 - x): its fixed point x = y = 1 - 1/a has the Jacobian
# [[0, 1], [1 - a, 1]], determinant a - 1 and trace 1, so a complex pair of multipliers leaves the unit
# circle at a = 2 with angle pi / 3 (closed form).
DELAYED_LOGISTIC = "a = 1.5\nx[n+1] = y\ny[n+1] = a*y*(1 - x)\nx[0] = 0.3\ny[0] = 0.3\n"


def test_map_torus_point_against_the_closed_form():
    result = steady_branches(compile_model(DELAYED_LOGISTIC), "a", 1.5, 2.3, guess={"x": 1 / 3, "y": 1 / 3})
    points = [s for b in result.branches for s in b.special if s.type == TORUS]
    (torus,) = {round(s.value, 9): s for s in points}.values()
    assert torus.value == pytest.approx(2.0, rel=1e-10)
    assert torus.state["x"] == pytest.approx(0.5, rel=1e-9)
    assert abs(torus.frequency) == pytest.approx(math.pi / 3, rel=1e-8)

"""Two-parameter maps of the attractor's period against closed forms."""

import math

import numpy as np
import pytest

from scipy.integrate import solve_ivp

from orbitdesk.analyses.parameter_maps import DIVERGED, NONE, STEADY, minimal_periods, period_grid
from orbitdesk.analyses.sweep import GridSettings, STROBE, SweepSettings, lyapunov_grid
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import HENON

FORCED = "c = 0.5\nA = 1\nw = 1.3\nx'' = -c*x' - x + A*cos(w*t)\nx(0) = 0\nx'(0) = 0\n"


def test_minimal_periods_of_plain_sequences():
    rows = np.array([[1.0] * 12, [1, 2] * 6, [1, 2, 3] * 4, [1, 2, 3, 5] * 3, np.arange(12.0),
                     [1.0] * 11 + [np.nan]])
    assert minimal_periods(rows, 5).tolist() == [1, 2, 3, 4, NONE, DIVERGED]


def test_henon_periods_follow_the_closed_form_period_doubling():
    # the fixed point of the Henon map loses stability (multiplier -1) at a = 3 (1 - b)^2 / 4
    # (closed form): 0.48 for b = 0.2, 0.3675 for b = 0.3; the classic a = 1.4, b = 0.3 is chaotic
    system = compile_model(HENON)
    xs, ys = np.array([0.2, 0.45, 1.4]), np.array([0.2, 0.3])
    grid = period_grid(system, "a", xs, "b", ys, SweepSettings(transient=3000, samples=80), max_period=16)
    assert grid.period.shape == (2, 3) and grid.unit == "iterations"
    assert grid.period[:, 0].tolist() == [1, 1]
    assert grid.period[0, 1] == 1 and grid.period[1, 1] == 2  # 0.45 lies between the two thresholds
    assert grid.period[1, 2] == NONE
    # the largest exponent agrees in sign: positive only where no period was found (Henon 1976:
    # about 0.42 at a = 1.4, b = 0.3, value from memory)
    lyap = lyapunov_grid(system, "a", xs, "b", ys, GridSettings(transient=1000, duration=20000))
    assert lyap.exponent[1, 2] == pytest.approx(0.42, abs=0.02)
    assert np.all(lyap.exponent[:, 0] < 0) and lyap.exponent[1, 1] < 0
    data = grid.to_dict()
    assert data["period"][1][1] == 2 and data["x"]["parameter"] == "a"


def test_a_damped_linear_oscillator_answers_every_forcing_once_per_period():
    # x'' + c x' + x = A cos(w t): a unique periodic response with the forcing's period (closed form)
    system = compile_model(FORCED)
    T = 2 * math.pi / 1.3
    grid = period_grid(system, "c", [0.5, 1.0], "A", [0.5, 1.0],
                       SweepSettings(mode=STROBE, period=T, transient=60 * T, dt=T / 200), max_period=4)
    assert grid.period.tolist() == [[1, 1], [1, 1]] and grid.unit == "forcing periods"
    with pytest.raises(ValueError, match="forcing period"):
        period_grid(system, "c", [0.5], "A", [1.0], SweepSettings(mode="plane", plane=("x", 0.0)))


# the Hopf normal form r' = a r - r^3, theta' = w in Cartesian form: for a < 0 the origin attracts, for a > 0
# the limit cycle r = sqrt(a) of period 2 pi / w (closed form)
HOPF = "a = 0.5\nw = 1\nx' = a*x - w*y - x*(x^2 + y^2)\ny' = w*x + a*y - y*(x^2 + y^2)\nx(0) = 0.1\ny(0) = 0\n"
ROSSLER = "a = 0.2\nb = 0.2\nc = 2.5\nx' = -y - z\ny' = x + a*y\nz' = b + z*(x - c)\nx(0) = 1\ny(0) = 1\nz(0) = 0\n"


def test_an_autonomous_flow_settles_or_cycles_with_the_closed_form_period():
    system = compile_model(HOPF)
    grid = period_grid(system, "a", [-0.5, 0.5, 1.0], "w", [1.0, 2.0], SweepSettings(transient=200, duration=100),
                       max_period=4)
    assert grid.unit == "maxima per cycle"
    assert grid.period.tolist() == [[STEADY, 1, 1], [STEADY, 1, 1]]
    np.testing.assert_allclose(grid.time_period[:, 1:], [[2 * math.pi] * 2, [math.pi] * 2], rtol=1e-6)
    assert np.isnan(grid.time_period[:, 0]).all()
    data = grid.to_dict()
    assert data["time_period"][0][0] is None and data["legend"]["-2"] == "settles at an equilibrium"


@pytest.mark.slow
def test_the_rossler_period_doubling_cascade():
    # Roessler system, a = b = 0.2 (Strogatz, Nonlinear Dynamics and Chaos, sec. 12.3, values from memory):
    # one maximum of x per cycle at c = 2.5, two at c = 3.5, four at c = 4, chaos at c = 5
    system = compile_model(ROSSLER)
    grid = period_grid(system, "c", [2.5, 3.5, 4.0, 5.0], "a", [0.2],
                       SweepSettings(transient=300, duration=200, dt=0.01), max_period=8)
    assert grid.period.tolist() == [[1, 2, 4, NONE]]
    # the period in time against scipy's solve_ivp: the times between maxima of x (x' = -y - z falls through 0)
    for i, c in enumerate([2.5, 3.5]):
        def rhs(t, u, c=c):
            return [-u[1] - u[2], u[0] + 0.2 * u[1], 0.2 + u[2] * (u[0] - c)]
        top = lambda t, u: -u[1] - u[2]  # noqa: E731
        top.direction = -1
        ref = solve_ivp(rhs, (0, 500), [1.0, 1.0, 0.0], rtol=1e-10, atol=1e-12, events=top)
        times = ref.t_events[0][ref.t_events[0] > 300]
        k = grid.period[0, i]
        assert grid.time_period[0, i] == pytest.approx(np.mean(times[k:] - times[:-k]), rel=1e-4)

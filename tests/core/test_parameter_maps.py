"""Two-parameter maps of the attractor's period against closed forms."""

import math

import numpy as np
import pytest

from orbitdesk.analyses.parameter_maps import DIVERGED, NONE, minimal_periods, period_grid
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
        period_grid(system, "c", [0.5], "A", [1.0], SweepSettings(mode="maxima"))

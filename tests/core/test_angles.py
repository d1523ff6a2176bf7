"""States declared angles: the language form, wrapping, and equilibria listed once per position."""

import math

import numpy as np
import pytest

from orbitdesk.language.angles import break_at_wraps, wrap
from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.language.model import parse_model
from orbitdesk.system.compiled_system import compile_model

PENDULUM = "g = 9.81\ntheta'' = -g*sin(theta)\nangle theta\ntheta(0) = 0.3\n"


def test_the_angle_statement():
    model = parse_model(PENDULUM)
    assert model.ok and model.angles == ["theta"]
    model = parse_model("x' = y\ny' = -sin(x)\nangle x, y  # two angles\n")
    assert model.ok and model.angles == ["x", "y"]
    model = parse_model("theta'' = -sin(theta)\nangle thta\n")
    (error,) = model.errors
    assert (error.line, error.column, error.end_column) == (2, 7, 11)
    assert "'thta' is not a state" in error.message and error.fix == "did you mean 'theta'?"
    assert parse_model("x' = -angle*x\nangle = 2\n").ok  # 'angle' is still a fine parameter name


def test_wrap_to_minus_pi_pi():
    values = np.array([0.0, math.pi, -math.pi, 3 * math.pi, 2 * math.pi + 0.5, -7.0])
    expected = [0.0, math.pi, math.pi, math.pi, 0.5, -7.0 + 2 * math.pi]
    assert wrap(values) == pytest.approx(expected, abs=1e-12)
    x, y = break_at_wraps(wrap([3.0, 3.1, 3.2, 3.3]), [1.0, 2.0, 3.0, 4.0])
    assert np.isnan(x[2]) and x.size == 5 and y[3] == 3.0  # a NaN where the angle went round


def test_pendulum_equilibria_are_listed_once_per_position():
    # sin(theta) = 0: hanging down (theta = 0, a centre) and upright (theta = pi, a saddle) -- closed form;
    # without the declaration the search box holds one copy per turn
    wrapped = find_equilibria(compile_model(PENDULUM))
    assert sorted((round(e.state["theta"], 9), e.kind.split()[0]) for e in wrapped) == [
        (0.0, "centre"), (round(math.pi, 9), "saddle")]
    plain = find_equilibria(compile_model(PENDULUM.replace("angle theta\n", "")))
    assert len(plain) > 2

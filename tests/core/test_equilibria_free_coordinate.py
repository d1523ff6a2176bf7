"""A solution sympy leaves with a free coordinate is a curve of equilibria only where the Jacobian is singular:
the stirred tank's equilibria are isolated points that sympy cannot write in closed form, not "a curve or
surface"; a true line of equilibria still is one."""

import numpy as np
import pytest

from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.system.compiled_system import compile_model

# Exothermic stirred-tank reactor (Uppal, Ray and Poore 1974), as in the stirred-tank sample
TANK = "stay = 0.05\nheat = 6\nc' = -c + stay*(1 - c)*exp(T)\nT' = -T + heat*stay*(1 - c)*exp(T)\n"


@pytest.mark.parametrize("stay, count", [(0.05, 3), (0.02, 1), (0.1, 1)])
def test_isolated_equilibria_without_a_closed_form_are_not_called_a_curve(stay, count):
    system = compile_model(TANK)
    eqs = find_equilibria(system, np.array([stay, 6.0]), exact_timeout=3.0)
    # closed form: T = heat c, and c solves c = stay (1 - c) exp(heat c); three roots between the two folds
    # (stay from about 0.0329 to 0.0754 at heat = 6), one outside them
    assert len(eqs) == count
    for eq in eqs:
        c, T = eq.state["c"], eq.state["T"]
        assert T == pytest.approx(6.0 * c, rel=1e-9)
        assert c == pytest.approx(stay * (1 - c) * np.exp(6.0 * c), rel=1e-9)
        assert np.all(np.abs(eq.eigenvalues) > 1e-6)
    assert not any("curve or surface" in note for note in eqs.notes), eqs.notes


def test_a_true_line_of_equilibria_is_still_called_a_curve():
    # x' = y - x, y' = x - y: every point of the line y = x is an equilibrium (closed form)
    eqs = find_equilibria(compile_model("x' = y - x\ny' = x - y\n"), exact_timeout=3.0)
    assert all(abs(e.state["x"] - e.state["y"]) < 1e-9 for e in eqs)
    assert any("curve or surface" in note for note in eqs.notes)

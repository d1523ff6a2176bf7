"""Cycle branches by shooting: a cycle fold against the closed form of a subcritical Hopf normal form."""

import math

import numpy as np
import pytest

from orbitdesk.analyses.continuation import CYCLE_FOLD, HOPF, steady_branches
from orbitdesk.analyses.continuation.cycles import cycle_branches, hopf_points
from orbitdesk.system.compiled_system import compile_model

# Strogatz, Nonlinear Dynamics and Chaos, section 8.2: r' = mu r + r^3 - r^5, theta' = 1, written in x, y
SUBCRITICAL = ("mu = -0.1\nx' = mu*x - y + x*(x^2 + y^2) - x*(x^2 + y^2)^2\n"
               "y' = x + mu*y + y*(x^2 + y^2) - y*(x^2 + y^2)^2\nx(0) = 1\n")


def test_subcritical_hopf_and_its_cycle_fold():
    system = compile_model(SUBCRITICAL)
    (h,) = hopf_points(steady_branches(system, "mu", -0.6, 0.3))
    assert h.value == pytest.approx(0, abs=1e-12) and h.first_lyapunov_coefficient > 0  # subcritical
    (branch,) = cycle_branches(system, "mu", -0.6, 0.3, hopf=h).branches
    (fold,) = [s for s in branch.special if s.type == CYCLE_FOLD]
    # closed form: the cycles r^2 = (1 +- sqrt(1 + 4 mu)) / 2 meet at mu = -1/4, r^2 = 1/2, period 2 pi
    assert fold.value == pytest.approx(-0.25, abs=1e-10)
    assert fold.state["x"] ** 2 + fold.state["y"] ** 2 == pytest.approx(0.5, rel=1e-8)
    assert fold.period == pytest.approx(2 * math.pi, rel=1e-9)
    # the small cycles (born at the Hopf point) are unstable, the large ones stable
    r2 = (branch.amplitude("x") / 2) ** 2
    for mu, radius2, stable in zip(branch.values, r2, branch.stable):
        if abs(mu + 0.25) > 1e-3 and stable is not None:
            big = (1 + math.sqrt(max(1 + 4 * mu, 0))) / 2
            assert stable == (abs(radius2 - big) < 1e-4)
    assert np.allclose(branch.periods, 2 * math.pi, rtol=1e-8)


def test_cycle_branch_from_a_found_cycle():
    system = compile_model(SUBCRITICAL)
    (branch,) = cycle_branches(system, "mu", -0.3, 0.0, guess={"x": 1.0, "y": 0.0}).branches
    mus = branch.values
    assert mus.min() == pytest.approx(-0.25, abs=1e-3)  # the branch turns at the cycle fold
    (fold,) = [s for s in branch.special if s.type == CYCLE_FOLD]
    assert fold.value == pytest.approx(-0.25, abs=1e-10)
    # on the large cycles, amplitude in x is 2 r with r^2 = (1 + sqrt(1 + 4 mu)) / 2
    i = int(np.argmax(mus))
    assert branch.amplitude("x")[i] == pytest.approx(2 * math.sqrt((1 + math.sqrt(1 + 4 * mus[i])) / 2), rel=1e-7)

"""Equilibrium and fixed-point branches: special points against closed forms and published values."""

import math

import numpy as np
import pytest

from orbitdesk.analyses.continuation import BRANCH_POINT, FOLD, HOPF, PERIOD_DOUBLING, steady_branches
from orbitdesk.analyses.continuation.functions import ModelFunctions
from orbitdesk.analyses.continuation.hopf import first_lyapunov_coefficient
from orbitdesk.engine.progress import CancelToken, Cancelled
from orbitdesk.system.compiled_system import compile_model
from orbitdesk.samples.models import LOGISTIC_REF, LORENZ_REF, model

LORENZ = model(LORENZ_REF, initial={"y(0)": None, "z(0)": None})
BRUSSELATOR = "a = 1.5\nb = 1\nx' = a - (b + 1)*x + x^2*y\ny' = b*x - x^2*y\n"
CUSP = "a = 0.1\nb = 1\nx' = a + b*x - x^3\n"
LOGISTIC = model(LOGISTIC_REF, r=2.5, initial={'x[0]': 0.3})


def specials(result, kind):
    return [s for b in result.branches for s in b.special if s.type == kind]


def test_lorenz_branch_point_and_subcritical_hopf():
    # Strogatz, Nonlinear Dynamics and Chaos, ch. 9: the origin's pitchfork at r = 1, and the outer
    # equilibria lose stability in a subcritical Hopf bifurcation at r = sigma (sigma + beta + 3) / (sigma - beta - 1)
    result = steady_branches(compile_model(LORENZ), "r", 0, 30)
    sigma, beta = 10, 8 / 3
    r_h = sigma * (sigma + beta + 3) / (sigma - beta - 1)
    hopfs = specials(result, HOPF)
    assert len(hopfs) == 2  # one on each outer equilibrium; the origin's neutral saddle (r ~ 4.64) is not one
    for h in hopfs:
        assert h.value == pytest.approx(r_h, rel=1e-12)
        assert abs(h.state["x"]) == pytest.approx(math.sqrt(beta * (r_h - 1)), rel=1e-10)
        # the characteristic polynomial l^3 + (sigma + beta + 1) l^2 + beta (sigma + r) l + 2 beta sigma (r - 1)
        # has the roots +-i omega with omega^2 = beta (sigma + r) at the Hopf point
        assert h.frequency == pytest.approx(math.sqrt(beta * (sigma + r_h)), rel=1e-10)
        assert h.first_lyapunov_coefficient > 0  # subcritical
    bps = specials(result, BRANCH_POINT)
    assert bps and all(s.value == pytest.approx(1.0, abs=1e-10) for s in bps)
    assert not [s for s in specials(result, FOLD)]
    # both kinds of branch are there: the origin (all r) and the outer pair (r >= 1), switched onto at r = 1
    origin = [b for b in result.branches if np.allclose(b.points, 0, atol=1e-9)]
    assert origin and origin[0].values.min() == pytest.approx(0) and origin[0].values.max() == pytest.approx(30)
    stable_at = {bool(s) for b in origin for v, s in zip(b.values, b.stable) if v < 0.99}
    assert stable_at == {True}


def test_brusselator_supercritical_hopf():
    # closed form: the equilibrium (a, b/a) has a Hopf bifurcation at b = 1 + a^2 with frequency a
    result = steady_branches(compile_model(BRUSSELATOR), "b", 0, 5)
    (h,) = specials(result, HOPF)
    assert h.value == pytest.approx(1 + 1.5 ** 2, rel=1e-12)
    assert h.frequency == pytest.approx(1.5, rel=1e-10)
    assert h.first_lyapunov_coefficient < 0
    assert h.describe().startswith("Hopf (supercritical")


def test_cusp_form_folds_on_the_cusp_curve():
    # x' = a + b x - x^3 folds where 27 a^2 = 4 b^3 (closed form), at x = +-sqrt(b/3)
    for b in (0.5, 1.0, 2.0):
        result = steady_branches(compile_model(CUSP), "a", -3, 3, p=[0.0, b])
        folds = sorted(specials(result, FOLD), key=lambda s: s.value)
        assert [s.value for s in folds] == pytest.approx([-math.sqrt(4 * b ** 3 / 27), math.sqrt(4 * b ** 3 / 27)],
                                                         rel=1e-12)
        assert [abs(s.state["x"]) for s in folds] == pytest.approx([math.sqrt(b / 3)] * 2, rel=1e-9)
        (branch,) = result.branches  # one S-shaped branch: stable, unstable middle, stable
        assert branch.stable[0] is True and branch.stable[-1] is True and False in branch.stable


@pytest.mark.parametrize("c", [-0.7, 0.4])
def test_first_lyapunov_coefficient_of_the_normal_form(c):
    # Kuznetsov 2004, (3.19): for z' = (mu + i) z + c |z|^2 z, l1 = Re c / omega = c here
    model = f"mu = -0.5\nx' = mu*x - y + {c}*x*(x^2 + y^2)\ny' = x + mu*y + {c}*y*(x^2 + y^2)\n"
    (h,) = specials(steady_branches(compile_model(model), "mu", -1, 1), HOPF)
    assert h.value == pytest.approx(0, abs=1e-12) and h.frequency == pytest.approx(1)
    assert h.first_lyapunov_coefficient == pytest.approx(c, rel=1e-9)


@pytest.mark.parametrize("f, g, expected", [("x^2 + x^3", "0", 6 / 16), ("x^2", "x^2", -4 / 16),
                                            ("x*y", "y^3", 6 / 16)])
def test_first_lyapunov_coefficient_with_quadratic_terms(f, g, expected):
    # Guckenheimer & Holmes, Nonlinear Oscillations (1983), formula (3.4.11) (recalled from memory) for
    # x' = -y + f, y' = x + g (omega = 1): a = [f_xxx + f_xyy + g_xxy + g_yyy] / 16
    #   + [f_xy (f_xx + f_yy) - g_xy (g_xx + g_yy) - f_xx g_xx + f_yy g_yy] / 16; worked out by hand per case
    system = compile_model(f"x' = -y + {f}\ny' = x + {g}\n")
    funcs = ModelFunctions(system)
    l1 = first_lyapunov_coefficient(funcs, np.zeros(2), np.zeros(0), 1.0)
    assert l1 == pytest.approx(expected, rel=1e-9)


def test_logistic_map_period_doublings():
    # closed form: the fixed point 1 - 1/r flips at r = 3; the 2-cycle flips at r = 1 + sqrt(6)
    result = steady_branches(compile_model(LOGISTIC), "r", 2.5, 3.5)
    values = sorted(s.value for s in specials(result, PERIOD_DOUBLING))
    assert values[0] == pytest.approx(3.0, rel=1e-12)
    assert values[-1] == pytest.approx(1 + math.sqrt(6), rel=1e-12)
    doubled = [b for b in result.branches if b.map_period == 2]
    assert doubled and all(v >= 3.0 - 1e-9 for b in doubled for v in b.values)
    started = steady_branches(compile_model(LOGISTIC), "r", 3.2, 3.5, p=[3.3], map_period=2, switch=False)
    (flip,) = {round(s.value, 9) for s in specials(started, PERIOD_DOUBLING)}
    assert flip == pytest.approx(1 + math.sqrt(6), rel=1e-9)


def test_branch_turns_at_a_fold():
    # x' = a - x^2: equilibria +-sqrt(a) exist for a >= 0 only (closed form); one branch turns at a = 0
    result = steady_branches(compile_model("a = 1\nx' = a - x^2\nx(0) = 1\n"), "a", -1, 2)
    (branch,) = result.branches
    assert any("fold" == s.type for s in branch.special)
    assert branch.values.min() >= -1e-9  # no equilibrium for a < 0: the branch turns at the fold


def test_cancel_stops_continuation():
    token = CancelToken()
    token.cancel()
    with pytest.raises(Cancelled):
        steady_branches(compile_model(LORENZ), "r", 0, 30, cancel=token)


def test_a_closed_branch_is_recognised():
    # x' = x^2 + p^2 - 1: the equilibria form the unit circle in (p, x) (closed form); folds at p = +-1
    result = steady_branches(compile_model("p = 0\nx' = x^2 + p^2 - 1\nx(0) = 1\n"), "p", -2, 2)
    (branch,) = result.branches  # the two equilibria at p = 0 lie on one closed branch
    assert "the branch closed on itself" in branch.reasons
    assert np.allclose(branch.points[0] ** 2 + branch.values ** 2, 1, atol=1e-10)
    assert sorted(s.value for s in branch.special if s.type == FOLD) == pytest.approx([-1, 1], abs=1e-10)


def test_a_failing_corrector_ends_the_branch_in_plain_words():
    # sqrt(p) is undefined for p < 0: the branch x = sqrt(p) cannot be followed past p = 0
    result = steady_branches(compile_model("p = 0.5\nx' = sqrt(p) - x\nx(0) = 0.7\n"), "p", -1, 1)
    (branch,) = result.branches
    assert branch.values.min() >= 0 and branch.values.max() == pytest.approx(1)
    assert any("smallest step" in reason for reason in branch.reasons)

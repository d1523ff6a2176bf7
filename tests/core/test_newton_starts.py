"""The multi-start Newton loop (engine/newton_starts.py) and the equilibria search on it, against closed
forms, numpy's eigenvalues and scipy's root finders; each start's status; compiled and plain Python alike."""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.document.project import load
from orbitdesk.engine import compiled, status
from orbitdesk.engine.newton_starts import newton_starts
from orbitdesk.language.model import parse_model
from orbitdesk.samples.models import BRUSSELATOR, HENON, LORENZ
from orbitdesk.system.compiled_system import compile_model
from tests.core.test_kernels import chain  # masses on springs in a row: 2 x masses states

pytestmark = pytest.mark.fallback
SAMPLES = __import__("pathlib").Path(__file__).resolve().parents[2] / "orbitdesk" / "samples"


def system_of(text):
    return compile_model(parse_model(text))


def test_lorenz_starts_end_on_the_three_closed_form_equilibria():
    # Lorenz: 0 and (+-sqrt(beta (rho - 1)), +-sqrt(beta (rho - 1)), rho - 1) (closed form; Strogatz,
    # Nonlinear Dynamics and Chaos, 2nd ed., sec. 9.2), sigma = 10, rho = 28, beta = 8/3
    system = system_of(LORENZ)
    starts = np.random.default_rng(3).uniform(-30, 30, (120, 3))
    ends = newton_starts(system, starts, system.param_values, max_iter=100)
    c = math.sqrt(8.0 / 3.0 * 27.0)
    roots = np.array([[0, 0, 0], [c, c, 27.0], [-c, -c, 27.0]])
    ok = ends.codes == status.C_OK
    assert ok.sum() >= 110  # nearly every start converges; the others say why
    gaps = np.min(np.linalg.norm(ends.x[ok][:, None, :] - roots[None], axis=2), axis=1)
    assert np.max(gaps) < 1e-12
    assert set(np.argmin(np.linalg.norm(ends.x[ok][:, None, :] - roots[None], axis=2), axis=1)) == {0, 1, 2}
    assert np.all(ends.norm[ok] < 1e-12) and np.all(ends.step[ok] < 1e-12)
    assert sum(ends.counts().values()) == 120


def test_each_start_has_its_own_status():
    # x' = log(x) - 1: root e (closed form); undefined for x <= 0
    system = system_of("x' = log(x) - 1\n")
    ends = newton_starts(system, [[2.0], [-1.0]], system.param_values)
    assert list(ends.codes) == [status.C_OK, status.C_UNDEFINED]
    assert ends.x[0, 0] == pytest.approx(math.e, rel=1e-15)
    # x' = x^2 + 1 has no real root; at x = 0 its derivative vanishes: the Newton matrix is singular and
    # the regularised step is zero there
    system = system_of("x' = x^2 + 1\n")
    assert newton_starts(system, [[0.0]], system.param_values).codes[0] == status.C_SINGULAR
    # elsewhere Newton wanders without a root: no step lowers |f| for good, or the iterate leaves the box
    codes = newton_starts(system, [[0.7], [3.0]], system.param_values, bound=1e3).codes
    assert set(codes) <= {status.C_STALLED, status.C_DIVERGED, status.C_SINGULAR} and status.C_OK not in codes
    # x' = exp(-x): the root is at infinity: steps of 1 that do not shrink, or past the bound
    system = system_of("x' = exp(-x)\n")
    ends = newton_starts(system, [[0.0], [8.0]], system.param_values, bound=10.0)
    assert list(ends.codes) == [status.C_STALLED, status.C_DIVERGED]


def test_compiled_and_plain_loops_agree():
    # the same starts in the compiled loop and in the numpy version over the starts
    system = system_of(LORENZ)
    starts = np.random.default_rng(5).uniform(-20, 20, (40, 3))
    plain = newton_starts(system, starts, system.param_values, engine=compiled.python_engine(system))
    fast = newton_starts(system, starts, system.param_values, engine=compiled.engine_for(system, wait=True))
    assert list(plain.codes) == list(fast.codes)
    ok = plain.codes == status.C_OK
    assert np.allclose(plain.x[ok], fast.x[ok], atol=1e-12)


def test_stirred_tank_three_steady_states_against_brentq():
    # at a steady state T = heat c and c = stay e^T / (1 + stay e^T): the three roots of
    # T - heat stay e^T / (1 + stay e^T) = 0, bracketed by hand and solved by scipy's brentq
    project = load(SAMPLES / "stirred_tank.orbitdesk")
    system = compile_model(project.model)
    stay, heat = (float(system.param_values[system.parameters.index(k)]) for k in ("stay", "heat"))

    def g(T):
        e = stay * math.exp(T)
        return T - heat * e / (1 + e)

    grid = np.linspace(-1.0, 8.0, 9001)
    signs = np.sign([g(T) for T in grid])
    brackets = np.flatnonzero(signs[:-1] * signs[1:] < 0)
    roots = sorted(brentq(g, grid[i], grid[i + 1], xtol=1e-15) for i in brackets)
    assert len(roots) == 3
    eqs = find_equilibria(system, exact=False)
    found = sorted(eq.state["T"] for eq in eqs)
    assert found == pytest.approx(roots, abs=1e-10)
    for eq in eqs:
        assert eq.state["c"] == pytest.approx(eq.state["T"] / heat, abs=1e-12)
    assert [eq.stable for eq in sorted(eqs, key=lambda e: e.state["T"])] == [True, False, True]
    assert eqs.starts.get("ok", 0) > 0


def test_brusselator_equilibrium_closed_form():
    # Brusselator: the only equilibrium is (a, b/a) (closed form)
    system = system_of(BRUSSELATOR)
    a, b = (float(system.param_values[system.parameters.index(k)]) for k in ("a", "b"))
    (eq,) = find_equilibria(system, exact=False)
    assert eq.vector == pytest.approx([a, b / a], abs=1e-13)


@pytest.mark.parametrize("masses", [3, 10])
def test_chains_of_masses_against_numpy_eigenvalues(masses):
    # the chain (springs k, damping c, cubic g; as in benchmarks/bench_growth): the origin is its only
    # equilibrium and its Jacobian there is [[0, I], [k L, -c I]] in the states (x_i, x_i') with L the
    # discrete Laplacian (closed form); its eigenvalues by numpy.linalg.eigvals
    system = system_of(chain(masses))
    eqs = find_equilibria(system, exact=False)
    assert len(eqs) == 1 and np.max(np.abs(eqs[0].vector)) < 1e-12
    k, c = 1.0, 0.05
    L = -2 * np.eye(masses) + np.eye(masses, k=1) + np.eye(masses, k=-1)
    J = np.zeros((2 * masses, 2 * masses))
    J[0::2, 1::2] = np.eye(masses)
    J[1::2, 0::2] = k * L
    J[1::2, 1::2] = -c * np.eye(masses)
    expected = np.linalg.eigvals(J)
    got = eqs[0].eigenvalues
    assert np.sort_complex(np.round(got, 10)) == pytest.approx(np.sort_complex(np.round(expected, 10)), abs=1e-9)
    assert np.allclose(got.real, -c / 2)  # closed form for this damped chain: Re = -c/2


def test_map_fixed_points_and_two_cycle_of_the_henon_map():
    # Henon map (a = 1.4, b = 0.3): fixed points x = (-(1 - b) +- sqrt((1 - b)^2 + 4a)) / (2a), y = b x
    # (closed form); f^2(x) = x adds the 2-cycle x = ((1 - b) +- sqrt(4a - 3(1 - b)^2)) / (2a)
    system = system_of(HENON)
    a, b = 1.4, 0.3
    starts = np.random.default_rng(7).uniform(-1.5, 1.5, (60, 2))
    ends = newton_starts(system, starts, system.param_values, iterate=2, frel=1e-13, xtol=0.0, slow=0)
    ok = ends.codes == status.C_OK
    found = np.unique(np.round(ends.x[ok, 0], 9))
    fixed = [(-(1 - b) + s * math.sqrt((1 - b) ** 2 + 4 * a)) / (2 * a) for s in (1, -1)]
    cycle = [((1 - b) + s * math.sqrt(4 * a - 3 * (1 - b) ** 2)) / (2 * a) for s in (1, -1)]
    assert sorted(found) == pytest.approx(sorted(fixed + cycle), abs=1e-9)


def test_numeric_answer_comes_before_the_exact_refinement():
    # Lorenz (closed form as above): the Newton search's list is handed over before the wait for sympy;
    # the list returned carries the exact solve's points, and refine_exactly does the same afterwards
    from orbitdesk.analyses.equilibria import refine_exactly

    system = system_of(LORENZ)
    first = []
    final = find_equilibria(system, exact_timeout=30.0, on_numeric=first.append)
    assert len(first) == 1 and [eq.method for eq in first[0]] == ["newton"] * 3
    assert [eq.method for eq in final] == ["exact+newton"] * 3
    c = math.sqrt(8.0 / 3.0 * 27.0)
    assert sorted(eq.state["x"] for eq in final) == [-c, 0.0, c]  # the exact coordinates, to the last digit
    numeric = find_equilibria(system, exact=False)
    assert [eq.method for eq in numeric] == ["newton"] * 3 and numeric.notes == []
    refined = refine_exactly(system, numeric, timeout=30.0)
    assert [eq.method for eq in refined] == ["exact+newton"] * 3
    assert [eq.method for eq in numeric] == ["newton"] * 3  # a new list; the numeric one is left as it was

"""Multi-start shooting (engine/shooting.py): every start of a periodic-orbit search advanced together,
against closed forms and a published period, with a status per start."""

import math

import numpy as np
import pytest

from orbitdesk.engine import compiled
from orbitdesk.engine.newton_starts import RUNNING
from orbitdesk.engine.shooting import flow_ends, shooting_starts
from orbitdesk.engine.status import C_OK, C_UNDEFINED
from orbitdesk.samples.models import VAN_DER_POL
from orbitdesk.system.compiled_system import compile_model

pytestmark = pytest.mark.fallback  # closed forms and published values: with the compiler and without

C, F, W = 0.3, 0.7, 1.3
FORCED = f"c = {C}\nF = {F}\nw = {W}\nx'' = -c*x' - x + F*cos(w*t)\n"


class Counted:
    """A flow for shooting_starts on flow_ends, counting its calls and the rows of each."""

    def __init__(self, system, rtol=1e-10, atol=1e-12):
        self.engine = compiled.engine_for(system, wait=True)
        self.p = system.param_values.astype(float)
        self.rtol, self.atol = rtol, atol
        self.calls = []  # (rows, tangents)

    def __call__(self, U, T, tangents):
        self.calls.append((len(U), bool(tangents)))
        return flow_ends(self.engine, "dop853", U, T, self.p, self.rtol, self.atol, tangents)


def test_flow_ends_against_scipy_and_the_variational_closed_form():
    # x'' + c x' + x = F cos(w t) is linear: its monodromy over T is expm(A T) with A = [[0, 1], [-1, -c]]
    # (scipy.linalg.expm), and phi_T(u) = M u + phi_T(0), the same for every start
    from scipy.integrate import solve_ivp
    from scipy.linalg import expm

    system = compile_model(FORCED)
    flow = Counted(system)
    U = np.array([[0.0, 0.0], [1.0, -0.5], [-2.0, 3.0]])
    T = np.array([1.0, 2.5, 2.5])
    ends, M, ok = flow(U, T, True)
    assert ok.all() and flow.calls == [(3, True)]
    for j in range(3):
        exact = expm(np.array([[0.0, 1.0], [-1.0, -C]]) * T[j])
        assert M[j] == pytest.approx(exact, abs=1e-9)
        ref = solve_ivp(lambda t, y: [y[1], -C * y[1] - y[0] + F * math.cos(W * t)], (0, T[j]), U[j], rtol=1e-12,
                        atol=1e-13, method="DOP853")
        assert ends[j] == pytest.approx(ref.y[:, -1], abs=1e-8)
    plain, none, ok = flow(U, T, False)
    assert none is None and ok.all() and plain == pytest.approx(ends, abs=1e-9)


@pytest.mark.parametrize("tangent_trials", [False, True])
def test_forced_starts_together_with_a_status_each(tangent_trials):
    # the periodic response of x'' + c x' + x = F cos(w t): amplitude F / sqrt((1 - w^2)^2 + (c w)^2) (closed
    # form), reached from every finite start; a start holding a value that is not a number is undefined
    system = compile_model(FORCED)
    flow = Counted(system)
    Tf = 2 * math.pi / W
    starts = np.array([[0.0, 0.0], [3.0, -2.0], [-5.0, 5.0], [0.5, 0.5], [np.nan, 1.0], [10.0, 0.0]])
    ends = shooting_starts(flow, starts, np.full(len(starts), Tf), goal=lambda idx, X, G: np.full(len(idx), 1e-10),
                           tangent_trials=tangent_trials)
    assert ends.codes.tolist() == [C_OK, C_OK, C_OK, C_OK, C_UNDEFINED, C_OK]
    assert ends.counts() == {"ok": 5, "undefined": 1}
    amplitude = F / math.hypot(1 - W * W, C * W)
    good = ends.x[ends.codes == C_OK]
    assert np.hypot(good[:, 0], good[:, 1] / W) == pytest.approx(np.full(5, amplitude), rel=1e-8)
    assert np.ptp(good, axis=0) == pytest.approx([0.0, 0.0], abs=1e-9)  # one orbit, whatever the start
    # a linear problem: one Newton step from any start; every run holds all the starts still iterating
    assert ends.iterations.max() <= 3
    assert [rows for rows, _ in flow.calls][:2] == [6, 5]
    expected = np.sort_complex(np.exp(np.roots([1, C, 1]) * Tf))  # exp(lambda T), lambda^2 + c lambda + 1 = 0
    if tangent_trials:  # every run carries the tangent vectors: the end points have their monodromy
        assert all(tangents for _, tangents in flow.calls)
        M = ends.monodromy[0]
    else:  # the monodromy only where a step was needed, one run with tangent vectors per iteration
        assert len([1 for _, tangents in flow.calls if tangents]) <= ends.iterations.max()
        assert np.isnan(ends.monodromy[0]).all()
        M = flow(good[:1], [Tf], True)[1][0]
    assert np.sort_complex(np.linalg.eigvals(M)) == pytest.approx(expected, abs=1e-8)


def test_autonomous_starts_with_their_own_sections_reach_the_van_der_pol_cycle():
    # Van der Pol at mu = 1: period 6.6632868593 (Strogatz, Nonlinear Dynamics and Chaos, sec. 7.5; value from
    # memory), from four starts near the cycle, each with its own phase condition and period guess, together
    system = compile_model(VAN_DER_POL)
    p = system.param_values.astype(float)
    flow = Counted(system)
    starts = np.array([[2.0, 0.0], [0.0, 2.2], [-1.9, 0.3], [1.0, -2.5]])
    normals = np.array([system.rhs(0.0, u, p) for u in starts])
    normals /= np.linalg.norm(normals, axis=1)[:, None]

    def rhs(T, U):
        return np.array([system.rhs(t, u, p) for t, u in zip(T, U)])

    ends = shooting_starts(flow, starts, [6.0, 7.0, 6.5, 6.3], goal=lambda idx, X, G: np.full(len(idx), 1e-9),
                           sections=(normals, starts), rhs=rhs)
    assert (ends.codes == C_OK).all()
    assert ends.x[:, 2] == pytest.approx(np.full(4, 6.6632868593), abs=1e-7)
    assert np.einsum("ij,ij->i", normals, ends.x[:, :2] - starts) == pytest.approx(np.zeros(4), abs=1e-12)
    # the trivial multiplier (the flow's direction) is 1; their product is exp of the divergence mu (1 - x^2)
    # integrated over one period (Liouville's formula), the integral by scipy's solve_ivp along the orbit
    from scipy.integrate import solve_ivp

    for j in range(4):
        M = ends.monodromy[j] if np.isfinite(ends.monodromy[j]).all() else flow(ends.x[j:j + 1, :2],
                                                                               ends.x[j:j + 1, 2], True)[1][0]
        values = np.sort(np.abs(np.linalg.eigvals(M)))
        assert values[1] == pytest.approx(1.0, abs=1e-6)
        ref = solve_ivp(lambda t, y: [y[1], (1 - y[0] ** 2) * y[1] - y[0], 1 - y[0] ** 2], (0, ends.x[j, 2]),
                        [*ends.x[j, :2], 0.0], rtol=1e-12, atol=1e-13, method="DOP853")
        assert values[0] * values[1] == pytest.approx(math.exp(ref.y[2, -1]), rel=1e-6)
    # every run of an iteration held all the starts still iterating: the calls do not grow with the starts
    assert len(flow.calls) <= 3 * ends.iterations.max() + 1


def test_enough_leaves_the_later_starts_unfinished():
    # the first start converges (a linear problem: one Newton step); the second is held to a goal it never
    # meets, so only ``enough`` ends the search, leaving it unfinished
    system = compile_model(FORCED)
    flow = Counted(system)
    Tf = 2 * math.pi / W
    asked = []

    def enough(result):
        asked.append(result.codes.tolist())
        return result.codes[0] == C_OK

    ends = shooting_starts(flow, np.array([[0.0, 0.0], [1.0, 1.0]]), [Tf, 2 * Tf],
                           goal=lambda idx, X, G: np.where(idx == 0, 1e-10, -1.0), enough=enough)
    assert ends.codes.tolist() == [C_OK, RUNNING]
    assert asked[-1] == [C_OK, RUNNING] and len(asked) == ends.iterations[1]


def test_the_newton_systems_solved_without_lapack_match_numpy():
    # newton_starts.solve_each (the multi-start loop's own LU with partial pivoting) against numpy's LAPACK
    # solve; an exactly singular matrix gives a row of NaN
    system = compile_model(FORCED)
    engine = compiled.engine_for(system, wait=True)
    rng = np.random.default_rng(5)
    M = rng.normal(size=(3, 7, 7))
    M[2, :, 3] = 0.0
    B = rng.normal(size=(3, 7))
    expected = [np.linalg.solve(M[q], B[q]) for q in range(2)]
    A, X = M.copy(), B.copy()
    engine.entry("solve_each")(A, X, 3)
    assert X[:2] == pytest.approx(np.array(expected), rel=1e-10, abs=1e-12)
    assert np.isnan(X[2]).all()

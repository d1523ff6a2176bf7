"""Pseudo-arclength continuation of a curve G(x) = 0, G: R^(m+1) -> R^m, for any problem.

The last component of x is the parameter that is bounded to an interval. Each step: tangent
predictor x + ds t, Newton corrector on the bordered system [DG; t^T] dx = -[G; t.(x - x_pred)],
step size adapted to the corrector's iterations and to the turn of the tangent (curvature). Test
functions are watched between consecutive points; a sign change is located by the Illinois
(secant-bisection) method on points corrected at trial arclengths, then handed to the problem for
checking and polishing (for instance Newton on an augmented system).

A problem provides ``size`` (m + 1), ``residual(x)``, ``jacobian(x)`` (m x (m+1)), ``describe(x)``
(what to store at an accepted point; optionally ``quick_describe(x)``, just what the tests need),
``tests(x, tangent, data, only=None)`` ({name: float}),
``special(name, x, tangent, data)`` (a SpecialPoint or None to reject), optionally ``accept(x)``
(e.g. to move a phase condition's reference) and ``out_of_bounds(x)`` (a reason or None).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.analyses.continuation.functions import ContinuationError
from orbitdesk.analyses.newton import Singular, damped_newton

STEP_REASONS = {
    "end": "reached the end of the parameter interval",
    "points": "reached the largest number of points",
    "closed": "the branch closed on itself",
}


@dataclass
class StepSettings:
    ds: float = 0.02
    ds_min: float = 1e-7
    ds_max: float = 0.2
    max_points: int = 400
    tolerance: float = 1e-10
    max_iterations: int = 8
    max_turn: float = 0.35  # radians between consecutive tangents
    state_bound: float = 1e6


@dataclass
class SpecialPoint:
    type: str
    x: np.ndarray
    info: dict = field(default_factory=dict)  # frequency, first_lyapunov_coefficient, ...
    index: int = 0  # where it lies among the branch's points (after point index - 1)
    tangent: np.ndarray | None = None


@dataclass
class Curve:
    xs: list  # accepted points (arrays)
    tangents: list
    data: list  # problem.describe(x) per point
    special: list  # SpecialPoint
    reasons: list  # plain-words reason each direction ended


def newton_bordered(problem, x_pred, tangent, settings: StepSettings, anchor=None, target=0.0):
    """Correct ``x_pred`` onto G = 0 with the hyperplane t.(x - anchor) = target (anchor: x_pred):
    Newton's plain iteration (analyses/newton.py), failing when a step after the second is more than
    twice the one before it.

    Returns (x, iterations) or (None, iterations) when the corrector fails."""
    anchor = x_pred if anchor is None else anchor
    x = np.array(x_pred, dtype=float)
    scale = 1.0 + float(np.linalg.norm(x))
    # problems whose residual comes from an integration set a looser tolerance (``problem.tolerance``)
    tolerance = max(settings.tolerance, getattr(problem, "tolerance", 0.0))
    outcome = {"last": math.inf, "converged": False}

    def residual(z):
        with np.errstate(all="ignore"):
            return np.concatenate([problem.residual(z), [float(tangent @ (z - anchor)) - target]])

    def jacobian(z):
        with np.errstate(all="ignore"):
            return np.vstack([problem.jacobian(z), tangent])

    def done(state):
        if state.steps == 0:
            return False
        size, last = state.step_norm, outcome["last"]
        outcome["last"] = size
        if state.steps > 2 and size > 2 * last:
            return True  # diverging
        outcome["converged"] = size <= tolerance * scale
        return outcome["converged"] or state.steps >= settings.max_iterations

    try:
        state = damped_newton(residual, jacobian, x, done=done, max_iter=settings.max_iterations + 1,
                              min_damping=1.0, monotone=False, rejects=(ContinuationError, ValueError))
    except (ContinuationError, ValueError, Singular):
        return None, 1
    if not outcome["converged"]:
        return None, max(state.steps, 1)
    return state.x, state.steps


def tangent_at(problem, x, reference) -> np.ndarray | None:
    """The unit tangent at x, oriented along ``reference``."""
    try:
        A = problem.jacobian(x)
        t = np.linalg.solve(np.vstack([A, reference]), np.concatenate([np.zeros(A.shape[0]), [1.0]]))
    except (ContinuationError, np.linalg.LinAlgError):
        return None
    norm = float(np.linalg.norm(t))
    if not (np.isfinite(norm) and norm > 0):
        return None
    return t / norm


def null_tangent(problem, x, direction=None) -> np.ndarray:
    """The unit null vector of DG(x) (the last right singular vector); ``direction`` orients it."""
    A = problem.jacobian(x)
    t = np.linalg.svd(A)[2][-1]
    if direction is None:
        direction = np.zeros(len(t))
        direction[-1] = 1.0
    return t if float(t @ direction) >= 0 else -t


def bordered_determinant(problem, x, tangent) -> float:
    """det [DG; t^T] with its scale removed: its sign changes at a branch point."""
    A = np.vstack([problem.jacobian(x), tangent])
    norms = np.linalg.norm(A, axis=1)
    norms[norms == 0] = 1.0
    return float(np.linalg.det(A / norms[:, None]))


def continue_curve(problem, x0, tangent0, lo: float, hi: float, settings: StepSettings, both=True,
                   cancel: CancelToken | None = None, progress=None) -> Curve:
    """Follow the curve through x0 both ways (or along ``tangent0`` only); parameter in [lo, hi]."""
    report = Reporter(progress, cancel)
    directions = [tangent0, -tangent0] if both else [tangent0]
    runs = []
    for d, t in enumerate(directions):
        runs.append(_one_direction(problem, np.asarray(x0, float), t, lo, hi, settings, cancel,
                                   report.part(d / len(directions), 1 / len(directions))))
        if runs[-1][4] == STEP_REASONS["closed"]:
            break  # a closed branch is complete after one way round
    if len(runs) == 1:
        xs, ts, data, special, reason = runs[0]
        return Curve(xs, ts, data, special, [reason])
    (xa, ta, da, sa, ra), (xb, tb, db, sb, rb) = runs
    # the backward run reversed, then the forward run without its repeated start
    nb = len(xb)
    xs = xb[::-1] + xa[1:]
    ts = [-t for t in tb[::-1]] + ta[1:]
    data = db[::-1] + da[1:]
    special = []
    for s in sb:
        s.index = nb - s.index
        if s.tangent is not None:
            s.tangent = -s.tangent
        special.append(s)
    for s in sa:
        s.index = s.index + nb - 1
        special.append(s)
    special.sort(key=lambda s: s.index)
    return Curve(xs, ts, data, special, [rb, ra])


def _one_direction(problem, x0, t0, lo, hi, settings, cancel, report):
    x, t = x0.copy(), t0 / np.linalg.norm(t0)
    data = problem.describe(x)
    tests = problem.tests(x, t, data)
    xs, ts, ds_list, found = [x], [t], [data], []
    ds = settings.ds
    reason = STEP_REASONS["points"]
    if hasattr(problem, "accept"):
        problem.accept(x)
    while len(xs) < settings.max_points:
        if cancel is not None:
            cancel.check()
        report(max(len(xs) / settings.max_points, 0.0))
        x_new, its = newton_bordered(problem, x + ds * t, t, settings)
        t_new = tangent_at(problem, x_new, t) if x_new is not None else None
        turn = math.acos(min(1.0, max(-1.0, float(t @ t_new)))) if t_new is not None else math.inf
        if x_new is None or t_new is None or turn > settings.max_turn:
            if ds <= settings.ds_min * 1.0000001:
                reason = (f"the corrector did not converge even with the smallest step ({settings.ds_min:g}) "
                          f"near {problem.where(x)}")
                break
            ds = max(ds * 0.5, settings.ds_min)
            continue
        data_new = problem.describe(x_new)
        tests_new = problem.tests(x_new, t_new, data_new)
        for name, value in tests_new.items():
            before = tests.get(name)
            if before is None or value is None or not (before * value < 0):
                continue
            point = _locate(problem, name, x, t, ds, before, settings)
            if point is not None:
                point.index = len(xs)
                found.append(point)
        if hasattr(problem, "accept"):
            problem.accept(x_new)  # the problem may change (a phase condition's reference): its tangent too
            t_new = _or(tangent_at(problem, x_new, t_new), t_new)
        p_new = x_new[-1]
        if p_new < lo or p_new > hi:
            end = lo if p_new < lo else hi
            x_end = _at_parameter(problem, x, x_new, end, settings)
            if x_end is not None:
                t_end = tangent_at(problem, x_end, t_new)
                xs.append(x_end)
                ts.append(t_new if t_end is None else t_end)
                ds_list.append(problem.describe(x_end))
            found = [s for s in found if lo <= s.x[-1] <= hi]
            reason = f"{STEP_REASONS['end']} at {end:.6g}"
            break
        xs.append(x_new)
        ts.append(t_new)
        ds_list.append(data_new)
        bound = problem.out_of_bounds(x_new) if hasattr(problem, "out_of_bounds") else None
        if bound is None and float(np.max(np.abs(x_new[:-1]), initial=0.0)) > settings.state_bound:
            bound = f"the state grew beyond {settings.state_bound:g}"
        if bound is not None:
            reason = bound
            break
        if len(xs) > 4 and np.linalg.norm(x_new - x0) < 0.75 * ds and float(t_new @ t0) > 0.5:
            xs.append(x0.copy())
            ts.append(t0)
            ds_list.append(data)
            reason = STEP_REASONS["closed"]
            break
        x, t, tests = x_new, t_new, tests_new
        if its <= 3:
            ds = min(ds * (1.5 if its <= 2 else 1.25), settings.ds_max)
        elif its >= 6:
            ds = max(ds * 0.6, settings.ds_min)
        if turn > 0.5 * settings.max_turn:
            ds = max(ds * 0.7, settings.ds_min)
    return xs, ts, ds_list, found, reason


def _or(value, fallback):
    return fallback if value is None else value


def _at_parameter(problem, x_in, x_out, end, settings):
    """The curve's point where the parameter equals ``end``, between x_in and x_out."""
    share = (end - x_in[-1]) / (x_out[-1] - x_in[-1])
    guess = x_in + share * (x_out - x_in)
    hyper = np.zeros(len(guess))
    hyper[-1] = 1.0
    x, _ = newton_bordered(problem, guess, hyper, settings, anchor=guess)
    return x


def _corrected(problem, x, t, sigma, settings):
    """The point of the curve at arclength ``sigma`` from x along the hyperplane normal to t."""
    y, _ = newton_bordered(problem, x + sigma * t, t, settings, anchor=x, target=sigma)
    return y


def _locate(problem, name, x, t, ds, before, settings, max_iter=60):
    """Illinois iteration on the test function ``name`` between arclength 0 and the step."""
    a, fa = 0.0, before
    xb = _corrected(problem, x, t, ds, settings)
    if xb is None:
        return None
    b = float(t @ (xb - x))
    fb = _test_value(problem, name, xb, t)
    if fb is None or fa * fb > 0:
        return None
    best = xb
    for _ in range(max_iter):
        if abs(b - a) <= 1e-14 * (1.0 + abs(b)) or fb == 0:
            break
        c = (a * fb - b * fa) / (fb - fa)
        if not (min(a, b) < c < max(a, b)):
            c = 0.5 * (a + b)
        xc = _corrected(problem, x, t, c, settings)
        fc = _test_value(problem, name, xc, t) if xc is not None else None
        if fc is None:
            return None
        best = xc
        if fc * fb < 0:
            a, fa = b, fb
        else:
            fa = 0.5 * fa
        b, fb = c, fc
    tangent = tangent_at(problem, best, t)
    data = problem.describe(best)
    return problem.special(name, best, t if tangent is None else tangent, data)


def _test_value(problem, name, x, reference):
    tangent = tangent_at(problem, x, reference)
    if tangent is None:
        return None
    describe = getattr(problem, "quick_describe", problem.describe)  # what the tests need, no more
    return problem.tests(x, tangent, describe(x), only=name).get(name)

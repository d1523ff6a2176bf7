"""One damped Newton iteration for G(x) = 0, shared by the analyses' solvers, in two forms:
``newton_starts`` runs it from many starts at once in the compiled loop of engine/newton_starts.py
(the equilibria's and fixed points' multi-start search, the starts of a map's cycle search: the
model's batched kernel, dense LU, a status per start); ``damped_newton`` runs it from one start on
any residual and Jacobian given as Python functions: the equilibria's refinement of exact points and
their search on large systems (a sparse Jacobian), the cycles of maps, the continuation's corrector, its stroboscopic polish and the
location of folds and Hopf points on their augmented systems, and the time-scale probe's nearest
equilibrium.

Each iteration solves J dx = -G(x) (a dense matrix by LAPACK, a scipy sparse one by its sparse LU)
and tries x + lam dx for lam = 1, 1/2, ... down to ``min_damping``, taking the first trial that
lowers |G|; when none does the iteration stops where it is (the rounding level, or no root in reach).
Without damping (``min_damping=1``) it is Newton's plain iteration, stopping when a step does not
lower |G|; ``monotone=False`` takes every finite step.
G is evaluated at every trial, the Jacobian only at accepted points: for a cycle, a trial costs one
run and the Jacobian a run with n tangent vectors (the monodromy matrix).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from orbitdesk.engine.newton_starts import NewtonStarts, newton_starts  # the multi-start form, re-exported


class Singular(ArithmeticError):
    """The Newton matrix is singular at the current point."""


@dataclass
class NewtonState:
    x: np.ndarray
    residual: np.ndarray
    norm: float  # |G(x)|
    jacobian: object = None  # J at x, when it was evaluated there
    iterations: int = 0  # the iteration the loop stopped in (1 when it stopped before any step)
    step_norm: float = math.inf  # the size of the last step taken
    tried: float = math.inf  # the size of the last full step computed (taken or not)
    stalled: bool = False  # stopped because no trial lowered |G|
    steps: int = 0  # steps taken


def solve(J, b, singular: str = "raise") -> np.ndarray:
    """J^-1 b for a dense array or a scipy sparse matrix; ``singular``: "raise" (Singular) or "lstsq"
    (the least-squares step when J is exactly singular)."""
    if hasattr(J, "tocsc"):  # scipy sparse
        from scipy.sparse.linalg import splu

        try:
            with np.errstate(all="ignore"):
                x = splu(J.tocsc()).solve(np.asarray(b, dtype=float))
        except RuntimeError:  # "Factor is exactly singular"
            if singular != "lstsq":
                raise Singular("the Newton matrix is singular") from None
            return np.linalg.lstsq(J.toarray(), b, rcond=None)[0]
        if not np.all(np.isfinite(x)):
            if singular != "lstsq":
                raise Singular("the Newton matrix is singular")
            return np.linalg.lstsq(J.toarray(), b, rcond=None)[0]
        return x
    try:
        return np.linalg.solve(J, b)
    except np.linalg.LinAlgError:
        if singular != "lstsq":
            raise Singular("the Newton matrix is singular") from None
        return np.linalg.lstsq(J, b, rcond=None)[0]


def difference_gradient(fn, x, value=None) -> np.ndarray:
    """The gradient of the scalar ``fn`` at x by forward differences (steps sqrt(eps) (1 + |x_j|)): the
    row of a Newton matrix that no kernel gives (a bordered test function's, say)."""
    x = np.asarray(x, dtype=float)
    value = fn(x) if value is None else value
    out = np.empty(x.size)
    for j in range(x.size):
        h = 1.5e-8 * (1.0 + abs(x[j]))
        shifted = x.copy()
        shifted[j] += h
        out[j] = (fn(shifted) - value) / h
    return out


def damped_newton(residual: Callable, jacobian: Callable, x0, *, done: Callable | None = None,
                  max_iter: int = 50, min_damping: float = 1 / 64, admissible: Callable | None = None,
                  rejects: tuple = (ArithmeticError,), singular: str = "raise", r0=None, J0=None,
                  final_jacobian: bool = False, monotone: bool = True) -> NewtonState:
    """Newton's iteration on ``residual`` from ``x0`` with step halving.

    ``done(state)`` before each iteration: True stops (converged, or the caller's own stop).
    ``admissible(x_new, x)``: False skips a trial (a period that collapses, say). A trial whose
    residual raises one of ``rejects`` counts as not lowering |G|. ``singular`` as in ``solve``
    (with "raise", Singular propagates to the caller, who words it). ``r0``/``J0``: G and J at x0
    when the caller has them. ``final_jacobian``: make sure ``state.jacobian`` is J at the end point.
    ``monotone=False``: plain Newton (every step with a finite residual is taken; the caller's
    ``done`` judges convergence and divergence from ``state.step_norm``), as a continuation
    corrector wants it.
    """
    x = np.array(x0, dtype=float)
    r = np.asarray(residual(x) if r0 is None else r0, dtype=float)
    state = NewtonState(x, r, float(np.linalg.norm(r)), J0)
    for it in range(1, max_iter + 1):
        state.iterations = it
        if not math.isfinite(state.norm) or (done is not None and done(state)):
            break
        if state.jacobian is None:
            state.jacobian = jacobian(state.x)
        step = solve(state.jacobian, -state.residual, singular)
        state.tried = float(np.linalg.norm(step))
        lam, accepted = 1.0, False
        while lam >= min_damping:
            x_new = state.x + lam * step
            if admissible is None or admissible(x_new, state.x):
                try:
                    r_new = np.asarray(residual(x_new), dtype=float)
                    n_new = float(np.linalg.norm(r_new))
                except rejects:
                    n_new = math.inf
                if n_new < state.norm or (not monotone and math.isfinite(n_new)):
                    state.x, state.residual, state.norm, state.jacobian = x_new, r_new, n_new, None
                    state.step_norm, accepted = lam * state.tried, True
                    state.steps += 1
                    break
            lam /= 2
        if not accepted:
            state.stalled = True
            break
    if final_jacobian and state.jacobian is None:
        state.jacobian = jacobian(state.x)
    return state


__all__ = ["NewtonState", "NewtonStarts", "Singular", "damped_newton", "difference_gradient", "newton_starts",
           "solve"]

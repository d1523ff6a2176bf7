"""Ensembles: many initial conditions and/or parameter sets advanced together.

Every member is a column of ``U`` (shape ``(n_states, N)``); parameters are ``P`` of shape
``(n_params,)`` (shared) or ``(n_params, N)`` (one set per member).

* ``rk4_ensemble`` and ``dopri5_ensemble``: the members run one after the other in the compiled loop
  of ``integrators/members.py`` (the explicit Runge-Kutta loop of single runs, a step size per
  member for Dormand-Prince 5(4), output at common sample times off each step's dense output).
* ``rk4_ensemble`` with an ``observer`` (the sweeps' samplers): all members at once through the
  system's vectorized evaluator, in place, so samplers see every step without whole trajectories.
* ``iterate_ensemble``: maps.

Members that go non-finite or pass ``bound`` are frozen at their last good state and flagged in
``status`` ("diverged" past the bound or infinite, "undefined" for NaN, "step_failed" when the
adaptive step collapses) with the time it happened; the others continue. Cancellation raises
``Cancelled`` (from ``progress.Reporter``); progress is reported as a fraction.

Observers are called ``observer(step, t, U)`` after every step (and once with step 0 before the
first). An observer with a true attribute ``wants_rates`` is called ``observer(step, t, U, F)``
with ``F = f(t, U)`` as well (RK4 computes it anyway for the next step). An observer returning
True ends the run early.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from orbitdesk.engine.status import DIVERGED, OK, STEP_FAILED, UNDEFINED
from orbitdesk.engine.status import WIDTH as _STATUS_WIDTH
from orbitdesk.engine.progress import Reporter


@dataclass
class EnsembleResult:
    time: np.ndarray  # (N,) time (step for maps) each member reached; for a frozen member, when it froze
    states: np.ndarray  # (n, N) final states; a frozen member keeps its last good state
    status: np.ndarray  # (N,) "ok" | "diverged" | "undefined" | "step_failed"
    steps: np.ndarray  # (N,) steps taken (accepted steps of the adaptive method)
    rejected: np.ndarray | None = None  # (N,) rejected steps (adaptive method)
    sample_times: np.ndarray | None = None  # (K,)
    samples: np.ndarray | None = None  # (n, N, K) states at sample_times; NaN where a member never got there

    @property
    def ok(self) -> np.ndarray:
        return self.status == OK

    @property
    def n_members(self) -> int:
        return self.states.shape[1]


def member_params(system, P, n_members: int) -> np.ndarray:
    """``P`` as given (shared 1-D vector or (n_params, N)), defaulting to the model's values."""
    P = system.param_values if P is None else np.asarray(P, dtype=float)
    if P.ndim == 2 and P.shape[1] != n_members:
        raise ValueError(f"P has {P.shape[1]} columns for {n_members} members")
    if P.shape[0] != len(system.parameters):
        raise ValueError(f"P has {P.shape[0]} rows for {len(system.parameters)} parameters")
    return P


def _shared_rows(P):
    """Parameter rows as numbers where every member has the same value (cheaper to evaluate)."""
    return [float(row[0]) if row.size and np.all(row == row[0]) else row for row in P]


def member_rhs(system, P):
    """``f(t, U) -> (n, N)`` for the members' parameters ``P``; call it under ``np.errstate(all="ignore")``.

    A parameter every member shares is passed to the generated evaluator as a number, so expressions
    such as ``cos(omega*t)`` are computed once instead of once per member."""
    P = np.asarray(P, dtype=float)
    fn = getattr(system, "_f_vector", None)
    if P.ndim == 1 or fn is None:
        return lambda t, U: system.rhs_vec(t, U, P)
    rows = _shared_rows(P)

    def rhs(t, U):
        return _stacked(fn(t, *U, *rows), U.shape[1:])

    return rhs


def member_jac(system, P):
    """``J(t, U) -> (n, n, N)`` like ``member_rhs``."""
    P = np.asarray(P, dtype=float)
    fn = getattr(system, "_jac_vector", None)
    if P.ndim == 1 or fn is None:
        return lambda t, U: system.jac_vec(t, U, P)
    rows = _shared_rows(P)
    n = system.n_states

    def jac(t, U):
        return _stacked(fn(t, *U, *rows), U.shape[1:]).reshape((n, n) + U.shape[1:])

    return jac


def _stacked(values, shape):
    out = np.empty((len(values),) + tuple(shape))
    for i, v in enumerate(values):
        out[i] = v
    return out


def _states(system, U0) -> np.ndarray:
    U = np.array(U0, dtype=float)  # a copy: the ensemble updates it in place
    if U.ndim == 1:
        U = U[:, None]
    if U.ndim != 2 or U.shape[0] != system.n_states:
        raise ValueError(f"U0 must have shape ({system.n_states}, N)")
    return U


def bad_members(U, bound) -> np.ndarray:
    """Members (columns) that are non-finite or beyond ``bound`` in any component."""
    return ~(np.abs(U).max(axis=0) <= bound)


def _kind_of_failure(U) -> np.ndarray:
    return np.where(np.isnan(U).any(axis=0), UNDEFINED, DIVERGED)


class _Freezer:
    """Status bookkeeping shared by the fixed-step loops."""

    def __init__(self, n_members, check_rows, bound):
        self.status = np.full(n_members, OK, dtype=_STATUS_WIDTH)
        self.time = np.full(n_members, np.nan)
        self.frozen = np.zeros(n_members, dtype=bool)
        self.any = False
        self.rows = check_rows
        self.bound = bound

    def check(self, t, Y_new, Y_old) -> None:
        """Flag members of ``Y_new`` that went bad and put every frozen member back to ``Y_old``."""
        bad = bad_members(Y_new[:self.rows], self.bound)
        if self.any:
            bad &= ~self.frozen
        if bad.any():  # rare: only then are the bad members located
            self.status[bad] = _kind_of_failure(Y_new[:self.rows, bad])
            self.time[bad] = t
            self.frozen |= bad
            self.any = True
        if self.any:
            np.copyto(Y_new, Y_old, where=self.frozen[None, :])


def _call(observer, wants_rates, step, t, Y, F):
    if observer is None:
        return False
    return bool(observer(step, t, Y, F) if wants_rates else observer(step, t, Y))


def rk4_ensemble(system, U0, P=None, t0: float = 0.0, dt: float = 0.01, n_steps: int = 1000,
                 observer=None, cancel=None, progress=None, bound: float = 1e10,
                 compiled: bool | None = None) -> EnsembleResult:
    """Fixed-step RK4 for all members at once; times are ``t0 + k*dt`` exactly (no accumulation).

    Without an observer the run may use the compiled loops of ``jit`` (numba, optional): with
    ``compiled`` None when the work pays for compiling, True to insist (if numba is there), False never."""
    U = _states(system, U0)
    P = member_params(system, P, U.shape[1])
    if observer is None:
        return _members(system, "rk4", U, P, t0, t0 + int(n_steps) * dt, Reporter(progress, cancel),
                        4.0 * U.shape[1] * n_steps, compiled, dt=dt, bound=bound)
    return rk4_run(member_rhs(system, P), U, t0, dt, n_steps, observer, Reporter(progress, cancel), bound,
                   U.shape[0])


def rk4_run(fun, Y, t0, dt, n_steps, observer, report, bound, check_rows) -> EnsembleResult:
    """The RK4 loop on any ``fun(t, Y) -> (m, N)``; the first ``check_rows`` rows are bound-checked.

    ``Y`` is updated in place (two buffers swapped each step, two scratch arrays, the four stage
    values returned by ``fun``)."""
    n_steps = int(n_steps)
    N = Y.shape[1]
    wants_rates = bool(getattr(observer, "wants_rates", False))
    freezer = _Freezer(N, check_rows, bound)
    old = np.empty_like(Y)
    tmp = np.empty_like(Y)
    acc = np.empty_like(Y)
    half, sixth = dt / 2.0, dt / 6.0
    steps_done = 0
    with np.errstate(all="ignore"):
        F = fun(t0, Y)
        stop = _call(observer, wants_rates, 0, t0, Y, F)
        for step in range(1, n_steps + 1):
            if stop:
                break
            t = t0 + (step - 1) * dt
            k1 = F
            np.multiply(k1, half, out=tmp)
            tmp += Y
            k2 = fun(t + half, tmp)
            np.multiply(k2, 2.0, out=acc)
            acc += k1
            np.multiply(k2, half, out=tmp)
            tmp += Y
            k3 = fun(t + half, tmp)
            acc += k3
            acc += k3
            np.multiply(k3, dt, out=tmp)
            tmp += Y
            k4 = fun(t + dt, tmp)
            acc += k4
            Y, old = old, Y  # old now holds the state at t
            np.multiply(acc, sixth, out=Y)
            Y += old
            t_new = t0 + step * dt
            freezer.check(t_new, Y, old)
            F = fun(t_new, Y)
            steps_done = step
            stop = _call(observer, wants_rates, step, t_new, Y, F)
            if step % 8 == 0:
                report(step / n_steps)
    return _finish(freezer, Y, t0 + steps_done * dt, steps_done)


def _members(system, method, U, P, t0, t_end, report, evaluations, compiled=None, sample_times=None,
             **options) -> EnsembleResult:
    """Members run one after the other in the compiled loop (integrators/members.py), each with its
    own step control; ``compiled`` False keeps to plain Python, True compiles now, None when it pays."""
    from orbitdesk.engine import compiled as kernels
    from orbitdesk.engine import drivers
    from orbitdesk.engine.status import words

    if compiled is False:
        engine = kernels.python_engine(system)
    else:
        engine = kernels.engine_for(system, wait=bool(compiled)) if compiled else kernels.engine_for_work(
            system, evaluations)
    ts = None if sample_times is None else np.asarray(sample_times, dtype=float).ravel()
    grid = None if ts is None else ts[ts != t0]
    with np.errstate(all="ignore"):
        out = drivers.members_run(engine, method, t0, t_end, U, P, grid=grid, report=report, **options)
    samples = None
    if ts is not None:
        samples = np.empty((U.shape[0], U.shape[1], ts.size))
        samples[:, :, ts == t0] = U[:, :, None]
        samples[:, :, ts != t0] = out.samples
    report(1.0)
    return EnsembleResult(time=out.t, states=out.states, status=words(out.codes), steps=out.steps,
                          sample_times=ts, samples=samples)


def _finish(freezer, Y, t_end, steps_done):
    N = Y.shape[1]
    time = np.where(freezer.frozen, freezer.time, t_end)
    return EnsembleResult(time=time, states=Y.copy(), status=freezer.status, steps=np.full(N, steps_done))


def iterate_ensemble(system, U0, P=None, n_steps: int = 1000, observer=None, cancel=None, progress=None,
                     bound: float = 1e10, n0: int = 0) -> EnsembleResult:
    """Iterate a map ``u[n+1] = f(n, u)`` for all members at once."""
    U = _states(system, U0)
    P = member_params(system, P, U.shape[1])

    return iterate_run(member_rhs(system, P), U, n0, n_steps, observer, Reporter(progress, cancel), bound, U.shape[0])


def iterate_run(fun, Y, n0, n_steps, observer, report, bound, check_rows) -> EnsembleResult:
    """The map loop on any ``fun(n, Y) -> next Y``; observers get ``(step, n, Y)``."""
    n_steps = int(n_steps)
    freezer = _Freezer(Y.shape[1], check_rows, bound)
    steps_done = 0
    with np.errstate(all="ignore"):
        stop = _call(observer, False, 0, n0, Y, None)
        for step in range(1, n_steps + 1):
            if stop:
                break
            new = fun(n0 + step - 1, Y)
            freezer.check(n0 + step, new, Y)
            Y = new
            steps_done = step
            stop = _call(observer, False, step, n0 + step, Y, None)
            if step % 64 == 0:
                report(step / n_steps)
    return _finish(freezer, Y, n0 + steps_done, steps_done)


# ---------------------------------------------------------------- adaptive Dormand-Prince 5(4)
def dopri5_ensemble(system, U0, P=None, t0: float = 0.0, t_end=1.0, sample_times=None,
                    rtol: float = 1e-8, atol: float = 1e-10, max_step: float = math.inf,
                    bound: float = 1e10, max_steps: int = 10_000_000, cancel=None, progress=None) -> EnsembleResult:
    """Adaptive Dormand-Prince 5(4), one step size per member, until each member reaches its ``t_end``.

    ``t_end`` is a number or one per member (all on the same side of ``t0``). ``sample_times`` (K,)
    are common output times; each member's values there come from the dense output of the step that
    covers them. Members run one after the other in the compiled loop (``max_steps`` is not used: a
    member whose step collapses stops with the status step_failed)."""
    U = _states(system, U0)
    n, N = U.shape
    P = member_params(system, P, N)
    t_end = np.broadcast_to(np.asarray(t_end, dtype=float), (N,)).copy()
    span = t_end - t0
    if not np.all(np.isfinite(span)) or np.any(span == 0):
        raise ValueError("every end time must be finite and differ from the start time")
    direction = 1.0 if span[0] > 0 else -1.0
    if np.any(np.sign(span) != direction):
        raise ValueError("all end times must lie on the same side of the start time")
    ts = None if sample_times is None else np.asarray(sample_times, dtype=float).ravel()
    if ts is not None and ts.size > 1 and np.any(np.diff(ts) * direction <= 0):
        raise ValueError("sample times must be strictly ordered in the direction of integration")
    return _members(system, "rk45", U, P, t0, t_end, Reporter(progress, cancel), 7.0 * N * 1000.0, None,
                    sample_times=ts, rtol=rtol, atol=atol, max_step=max_step if math.isfinite(max_step) else None,
                    bound=bound)

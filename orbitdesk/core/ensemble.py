"""Ensembles: many initial conditions and/or parameter sets advanced together.

Every member is a column of ``U`` (shape ``(n_states, N)``); parameters are ``P`` of shape
``(n_params,)`` (shared) or ``(n_params, N)`` (one set per member). Each stage evaluates the
system's generated vector evaluator once for all members; there is no Python loop over members.

* ``rk4_ensemble``: fixed-step classical Runge-Kutta, in place, with an ``observer`` hook so samplers
  (strobe, maxima, section crossings) see every step without whole trajectories being stored.
* ``dopri5_ensemble``: Dormand-Prince 5(4) with a step size per member (accepted or rejected per
  member, Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4), output at common sample times by
  the method's dense output; finished members are dropped from the working set.
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
from scipy.integrate import RK45

from .integrators.status import DIVERGED, OK, STEP_FAILED, UNDEFINED
from .integrators.status import WIDTH as _STATUS_WIDTH
from .progress import Reporter


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
    if observer is None and compiled is not False:
        from . import jit

        if jit.available() and (compiled or jit.worth_it(system, U.shape[1] * float(n_steps))):
            return _rk4_compiled(jit, system, U, P, t0, dt, n_steps, Reporter(progress, cancel), bound)
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


def _rk4_compiled(jit, system, U, P, t0, dt, n_steps, report, bound) -> EnsembleResult:
    U, codes, when = jit.rk4_final(system, U, P, t0, dt, int(n_steps), bound, report)
    status = np.full(U.shape[1], OK, dtype=_STATUS_WIDTH)
    status[codes == jit.STATUS_DIVERGED] = DIVERGED
    status[codes == jit.STATUS_UNDEFINED] = UNDEFINED
    frozen = codes != jit.STATUS_OK
    time = np.where(frozen, when, t0 + int(n_steps) * dt)
    report(1.0)
    return EnsembleResult(time=time, states=U, status=status, steps=np.full(U.shape[1], int(n_steps)))


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
# Tableau, error weights and dense-output polynomial of Dormand & Prince (1980), as scipy's RK45 holds them.
_A, _B, _C, _E, _P = RK45.A, RK45.B, RK45.C, RK45.E, RK45.P
_SAFETY, _FAC_MIN, _FAC_MAX = 0.9, 0.2, 10.0


def _rms(X, scale):
    return np.sqrt(np.mean((X / scale) ** 2, axis=0))


def _initial_step(fun, t0, Y, F0, direction, rtol, atol, order=5):
    """Starting step per member (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4)."""
    scale = atol + np.abs(Y) * rtol
    d0, d1 = _rms(Y, scale), _rms(F0, scale)
    h0 = np.where((d0 < 1e-5) | (d1 < 1e-5), 1e-6, 0.01 * d0 / np.where(d1 > 0, d1, 1.0))
    F1 = fun(t0 + direction * h0, Y + direction * h0 * F0)
    d2 = _rms(F1 - F0, scale) / h0
    big = np.maximum(d1, d2)
    h1 = np.where(big <= 1e-15, np.maximum(1e-6, h0 * 1e-3), (0.01 / np.where(big > 0, big, 1.0)) ** (1 / order))
    h = np.minimum(100 * h0, h1)
    return np.where(np.isfinite(h) & (h > 0), h, 1e-6)


def dopri5_ensemble(system, U0, P=None, t0: float = 0.0, t_end=1.0, sample_times=None,
                    rtol: float = 1e-8, atol: float = 1e-10, max_step: float = math.inf,
                    bound: float = 1e10, max_steps: int = 10_000_000, cancel=None, progress=None) -> EnsembleResult:
    """Adaptive Dormand-Prince 5(4), one step size per member, until each member reaches its ``t_end``.

    ``t_end`` is a number or one per member (all on the same side of ``t0``). ``sample_times`` (K,)
    are common output times; each member's values there come from the dense output of the step that
    covers them. Finished and frozen members leave the working arrays, so their cost stops."""
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
    report = Reporter(progress, cancel)

    status = np.full(N, OK, dtype=_STATUS_WIDTH)
    time_out = np.full(N, float(t0))
    states_out = U.copy()
    accepted = np.zeros(N, dtype=np.int64)
    rejected = np.zeros(N, dtype=np.int64)
    samples = None
    if ts is not None:
        samples = np.full((n, N, ts.size), np.nan)
        at_start = np.nonzero(ts == t0)[0]
        samples[:, :, at_start] = U[:, :, None]

    # working set: members still running
    idx = np.arange(N)
    shared_p = P.ndim == 1

    fun = member_rhs(system, P)
    Y = U
    t = np.full(N, float(t0))
    tend = t_end.copy()
    nxt = np.zeros(N, dtype=np.int64) if ts is None else np.full(N, np.searchsorted(ts * direction, t0 * direction,
                                                                                    side="right"))
    K = np.empty((7, n, N))
    with np.errstate(all="ignore"):
        K[0] = fun(t, Y)
        h = np.minimum(_initial_step(fun, t, Y, K[0], direction, rtol, atol), max_step)
        last_rejected = np.zeros(N, dtype=bool)
        Ynew, tmp, err = np.empty_like(Y), np.empty_like(Y), np.empty_like(Y)
        total = float(np.max(np.abs(span)))
        iteration = 0
        while idx.size:
            iteration += 1
            if iteration > max_steps:
                status[idx] = STEP_FAILED
                time_out[idx] = t
                states_out[:, idx] = Y
                break
            hh = np.minimum(h, (tend - t) * direction)  # positive step lengths, never past the end
            hs = direction * hh
            flat = K.reshape(7, -1)
            for s in range(1, 6):
                np.dot(_A[s, :s], flat[:s], out=tmp.reshape(-1))
                tmp *= hs
                tmp += Y
                K[s] = fun(t + _C[s] * hs, tmp)
            np.dot(_B, flat[:6], out=Ynew.reshape(-1))
            Ynew *= hs
            Ynew += Y
            t_new = t + hs
            K[6] = fun(t_new, Ynew)
            np.dot(_E, flat, out=err.reshape(-1))
            err *= hs
            np.maximum(np.abs(Y), np.abs(Ynew), out=tmp)
            tmp *= rtol
            tmp += atol
            err /= tmp
            err *= err
            en = np.sqrt(err.sum(axis=0) / n)
            finite = np.isfinite(en)
            accept = en <= 1.0
            factor = _SAFETY * en ** -0.2
            factor[~finite] = _FAC_MIN
            np.minimum(factor, np.where(accept, np.where(last_rejected, 1.0, _FAC_MAX), 1.0), out=factor)
            np.maximum(factor, _FAC_MIN, out=factor)
            h = np.minimum(hh * factor, max_step)
            last_rejected = ~accept

            bad = accept & bad_members(Ynew, bound)
            if bad.any():
                accept &= ~bad
                status[idx[bad]] = _kind_of_failure(Ynew[:, bad])
            if ts is not None and accept.any():
                _dense_samples(ts, direction, accept, nxt, t, t_new, hs, Y, K, samples, idx)

            np.copyto(Y, Ynew, where=accept[None, :])
            np.copyto(K[0], K[6], where=accept[None, :])
            t = np.where(accept, t_new, t)
            accepted[idx] += accept
            rejected[idx] += ~accept & ~bad

            done = accept & ((tend - t) * direction <= 1e-12 * np.maximum(1.0, np.abs(tend)))
            tiny = ~accept & ~bad & (h <= 16 * np.finfo(float).eps * np.maximum(1.0, np.abs(t)))
            if tiny.any():
                status[idx[tiny]] = np.where(np.isnan(Ynew[:, tiny]).any(axis=0), UNDEFINED, STEP_FAILED)
            leaving = done | bad | tiny
            if leaving.any():
                gone = idx[leaving]
                time_out[gone] = np.where(bad, t_new, t)[leaving]  # frozen: when it went bad
                states_out[:, gone] = Y[:, leaving]  # frozen members keep their last good state
                keep = ~leaving
                idx = idx[keep]
                Y = Y[:, keep].copy()
                Ynew, tmp, err = np.empty_like(Y), np.empty_like(Y), np.empty_like(Y)
                K = K[:, :, keep].copy()
                t, tend, h, nxt, last_rejected = t[keep], tend[keep], h[keep], nxt[keep], last_rejected[keep]
                if not shared_p:
                    fun = member_rhs(system, P[:, idx])
            if idx.size and iteration % 16 == 0:
                report(1.0 - float(np.max((tend - t) * direction)) / total)
    return EnsembleResult(time=time_out, states=states_out, status=status, steps=accepted, rejected=rejected,
                          sample_times=ts, samples=samples)


def _dense_samples(ts, direction, accept, nxt, t_old, t_new, hs, Y, K, samples, idx):
    """Fill the sample times inside each accepted step from the step's quartic dense output."""
    n_ts = ts.size
    while True:
        j = np.minimum(nxt, n_ts - 1)
        sel = accept & (nxt < n_ts) & ((ts[j] - t_new) * direction <= 0)
        if not sel.any():
            return
        w = np.nonzero(sel)[0]
        jw = nxt[w]
        x = (ts[jw] - t_old[w]) / hs[w]
        powers = np.stack([x, x * x, x ** 3, x ** 4])  # (4, m)
        weights = _P @ powers  # (7, m): stage weights at each x
        Kw = K[:, :, w]  # (7, n, m)
        values = Y[:, w] + hs[w] * np.einsum("snm,sm->nm", Kw, weights)
        samples[:, idx[w], jw] = values
        nxt[w] += 1

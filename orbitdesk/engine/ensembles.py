"""Ensembles: many initial conditions and/or parameter sets, each member run by the engine's member
loops (``members.py`` for flows, ``maps.py`` for maps) with its own step control.

Every member is a column of ``U`` (shape ``(n_states, N)``); parameters are ``P`` of shape
``(n_params,)`` (shared) or ``(n_params, N)`` (one set per member).

* ``rk4_ensemble``: fixed-step RK4; ``dopri5_ensemble``: adaptive Dormand-Prince 5(4), one step size
  per member, output at common sample times off each step's dense output;
* ``iterate_ensemble``: maps.

Members that go non-finite or pass ``bound`` stop at their last good state and are flagged in
``status`` ("diverged" past the bound or infinite, "undefined" for NaN, "step_failed" when the
adaptive step collapses) with the time it happened; the others continue. Cancellation raises
``Cancelled`` (from ``progress.Reporter``); progress is reported as a fraction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from orbitdesk.engine.status import DIVERGED, OK, STEP_FAILED, UNDEFINED  # noqa: F401 (the words, for callers)
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
    notes: dict = field(default_factory=dict)  # member index -> why it stopped early (its pace: drivers._Pace)

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


def _states(system, U0) -> np.ndarray:
    U = np.array(U0, dtype=float)  # a copy: the ensemble updates it in place
    if U.ndim == 1:
        U = U[:, None]
    if U.ndim != 2 or U.shape[0] != system.n_states:
        raise ValueError(f"U0 must have shape ({system.n_states}, N)")
    return U


def rk4_ensemble(system, U0, P=None, t0: float = 0.0, dt: float = 0.01, n_steps: int = 1000,
                 cancel=None, progress=None, bound: float = 1e10,
                 compiled: bool | None = None) -> EnsembleResult:
    """Fixed-step RK4 for every member; the members' times are ``t0 + k*dt`` up to round-off.

    ``compiled`` None compiles the engine when the work pays for it, True always, False never."""
    U = _states(system, U0)
    P = member_params(system, P, U.shape[1])
    return _members(system, "rk4", U, P, t0, t0 + int(n_steps) * dt, Reporter(progress, cancel),
                    4.0 * U.shape[1] * n_steps, compiled, dt=dt, bound=bound)


def _members(system, method, U, P, t0, t_end, report, evaluations, compiled=None, sample_times=None,
             **options) -> EnsembleResult:
    """Members run one after the other in the compiled loop (members.py), each with its
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
                          sample_times=ts, samples=samples, notes=out.notes)


def iterate_ensemble(system, U0, P=None, n_steps: int = 1000, cancel=None, progress=None,
                     bound: float = 1e10, n0: int = 0) -> EnsembleResult:
    """Iterate a map ``u[n+1] = f(n, u)`` for every member (``maps.members_iterate``)."""
    from orbitdesk.engine import compiled as kernels
    from orbitdesk.engine import drivers
    from orbitdesk.engine.status import words

    U = _states(system, U0)
    P = member_params(system, P, U.shape[1])
    report = Reporter(progress, cancel)
    engine = kernels.engine_for_work(system, float(U.shape[1]) * n_steps)
    with np.errstate(all="ignore"):
        out = drivers.members_iterate(engine, int(n0), int(n0) + int(n_steps), int(n0), U, P, bound=bound,
                                      report=report)
    report(1.0)
    return EnsembleResult(time=out.t, states=out.states, status=words(out.codes), steps=out.steps)


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

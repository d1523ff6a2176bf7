"""Orbit diagrams of delay models: one method-of-steps run per parameter value (``sweep.sweep`` sends
delay models here; the ensemble engine has no history to carry).

Each value runs from the model's start with its own history, through the transient, then samples
the observed state: plane crossings (located on the dense output), local maxima (a parabola
through the largest sample of a fine grid and its neighbours) or strobe samples. With
``lyapunov`` each value also gets its largest exponent from two nearby histories
(``delay_lyapunov``).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from orbitdesk.engine.delay import delay_values
from orbitdesk.engine.progress import Cancelled, Reporter
from orbitdesk.engine.runs import CANCELLED, OK, Event, RunSettings, simulate

MAXIMA_GRID = 0.05  # sampling step for maxima, in units of the shortest delay (at most dt when one is given)


def delay_sweep_arrays(system, P, U0, settings, cancel=None, progress=None):
    """(samples (M, K), times (M, K), exponents (M,) or None, status (M,)) over the columns of P."""
    from orbitdesk.analyses.delay_lyapunov import largest_delay_exponent
    from orbitdesk.analyses.sweep import MAXIMA, PLANE, STROBE

    s = settings
    if s.observe not in system.states:
        raise ValueError(f"for a model with delays the sweep observes a state ({', '.join(system.states)})")
    M, K = P.shape[1], s.samples
    U0 = np.asarray(U0, dtype=float)
    U0 = np.repeat(U0[:, None], M, axis=1) if U0.ndim == 1 else U0
    samples, times = np.full((M, K), np.nan), np.full((M, K), np.nan)
    exponents = np.full(M, np.nan) if s.lyapunov else None
    status = np.full(M, OK, dtype=object)
    report = Reporter(progress, cancel)
    t0 = float(s.t_start)
    t_keep = t0 + s.transient
    k_obs = system.states.index(s.observe)
    base = RunSettings(t_start=t0, t_end=t_keep + s.duration, samples=2, bound=s.bound,
                       rtol=getattr(s, "rtol", 1e-8), atol=getattr(s, "atol", 1e-10))
    for m in range(M):
        p, u = P[:, m], U0[:, m]
        events = []
        if s.mode == PLANE:
            name, value = s.plane
            events = [Event.on_plane(np.eye(system.n_states)[system.states.index(name)], value, s.direction)]
            run = simulate(system, base, u, p, events=events, cancel=cancel)
            keep = run.event_times[0] >= t_keep
            t_found, values = run.event_times[0][keep], run.event_states[0][k_obs, keep]
        elif s.mode == STROBE:
            T = float(s.period)
            periods = int(math.ceil(s.transient / T - 1e-9))
            run = simulate(system, replace(base, t_end=t0 + (periods + K - 1) * T, samples=periods + K), u, p,
                           cancel=cancel)
            t_found, values = run.time[periods:], run.states[k_obs, periods:]
        elif s.mode == MAXIMA:
            step = MAXIMA_GRID * float(min(delay_values(system, p)))
            step = min(float(s.dt), step) if s.dt else step
            run = simulate(system, replace(base, t_start=t0, samples=max(2, int(math.ceil(
                (t_keep + s.duration - t0) / step)) + 1)), u, p, cancel=cancel)
            t_found, values = _maxima(run.time, run.states[k_obs], t_keep)
        else:
            raise ValueError(f"{s.mode} sampling does not apply to a flow with delays")
        status[m] = run.status
        if run.status == CANCELLED:
            raise Cancelled("cancelled")
        k = min(K, len(values))
        samples[m, :k], times[m, :k] = values[:k], t_found[:k]
        if s.lyapunov and run.ok:
            result = largest_delay_exponent(system, p, u, t0, t_keep + s.duration, s.transient, 1e-8, None,
                                            base, cancel)
            exponents[m] = result.largest if result.ok else np.nan
        report((m + 1) / M)
    return samples, times, exponents, status.astype(str)


def _maxima(time, x, t_keep):
    """Local maxima of the sampled series after ``t_keep``, each refined by the parabola through its neighbours."""
    inner = (x[1:-1] > x[:-2]) & (x[1:-1] >= x[2:]) & (time[1:-1] >= t_keep)
    idx = np.nonzero(inner)[0] + 1
    a, b, c = x[idx - 1], x[idx], x[idx + 1]
    h = time[1] - time[0] if time.size > 1 else 0.0
    denom = a - 2 * b + c
    with np.errstate(all="ignore"):
        shift = np.where(denom != 0, 0.5 * (a - c) / denom, 0.0)
    return time[idx] + shift * h, b - 0.25 * (a - c) * shift


__all__ = ["delay_sweep_arrays"]

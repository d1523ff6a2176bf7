"""The largest Lyapunov exponent of a delay model from two nearby histories.

The state of a delay equation is the whole solution segment over the last tau_max (Farmer, Physica
4D (1982) 366-393, reference from memory, who measured the exponents of the Mackey-Glass equation this way). A reference
solution and a companion that starts ``d0`` away are integrated side by side (``DelayModel.pair``: one
step control, so the difference of their dense outputs is a smooth piecewise polynomial too); every
renormalisation interval the separation is measured as the root-mean-square distance of the two
segments over [T - tau_max, T] and the companion's whole segment is pulled back to distance ``d0``
along itself (Benettin et al. 1976/1980, applied to segments). The logarithms of the growth,
averaged over the time after the transient, give the exponent. Renormalisations start once a whole
segment lies after the start (the histories before it cannot be rescaled).
"""

from __future__ import annotations

import math

import numpy as np

from orbitdesk.engine.delay import DelayModel, _Stop, history_functions
from orbitdesk.engine.compiled import engine_loops
from orbitdesk.engine.progress import Cancelled, Reporter
from orbitdesk.engine.tangent import renormalise
from orbitdesk.engine.runs import CANCELLED, OK, UNDEFINED
from orbitdesk.system.compiled_system import UNDEFINED_ERRORS

SEGMENT_POINTS = 24  # points of the segment over which the distance is measured
NOTE = ("delays: the distance between the two solutions is the root-mean-square separation of their "
        "segments over the longest delay, and the whole segment is renormalised")


def _log_growth(loops, solver, n, T, tau_max, d0) -> float | None:
    """The logarithm of the two segments' root-mean-square separation over [T - tau_max, T] over ``d0``
    (None when they met), by the engine's one renormalisation (``tangent.renormalise``) of the
    separation as one vector: its stretch is the distance, its logarithm the growth."""
    D = np.empty((SEGMENT_POINTS * n, 1))
    for k, s in enumerate(np.linspace(T - tau_max, T, SEGMENT_POINTS)):
        for i in range(n):
            D[k * n + i, 0] = solver.value(n + i, float(s)) - solver.value(i, float(s))
    D /= d0 * math.sqrt(SEGMENT_POINTS)
    logs = np.empty(1)
    return float(logs[0]) if renormalise(loops, D, logs) else None


def _pull_back(solver, n, T, tau_max, scale) -> None:
    """Companion := reference + scale * (companion - reference) over every step record reaching past T - tau_max."""
    first = T - tau_max - 1e-9 * max(1.0, abs(T))
    for start, h, y, Q in reversed(solver.records):
        if start + h < first:
            break
        for i in range(n):
            y[n + i] = y[i] + scale * (y[n + i] - y[i])
            qi, qc = Q[i], Q[n + i]
            for r in range(4):
                qc[r] = qi[r] + scale * (qc[r] - qi[r])
    y = solver.y
    y[n:] = y[:n] + scale * (y[n:] - y[:n])
    solver.K0 = None  # the slope at the new point is computed afresh


def largest_delay_exponent(system, p, u, start, end, transient, d0, renorm_every, settings, cancel=None,
                           progress=None):
    """``lyapunov.largest_lyapunov_two_trajectory`` for a delay model (it sends them here)."""
    from orbitdesk.analyses.lyapunov import TWO_TRAJECTORY, _failed, _sorted_result, _stride

    model = DelayModel(system, p)
    loops = engine_loops()
    n = system.n_states
    tau_max = float(max(model.taus))
    report = Reporter(progress, cancel)
    interval = tau_max if renorm_every is None else float(renorm_every)
    if not (math.isfinite(interval) and interval > 0):
        raise ValueError("the renormalisation interval must be positive")
    ts = start + transient
    direction = np.full(n, 1.0 / math.sqrt(n))
    base = history_functions(system, p, u)
    shifted = [lambda t, f=f, k=k: f(t) + d0 * direction[k] for k, f in enumerate(base)]
    solver = model.pair(start, u, np.asarray(u, float) + d0 * direction, shifted, settings.rtol, settings.atol,
                        settings.max_step, end)
    first = max(ts, start + tau_max)  # renormalise once a whole segment lies after the start
    if first >= end:
        raise ValueError(f"the run must be longer than the transient and the longest delay ({tau_max:g})")
    times = list(np.arange(first, end, interval)[1:]) + [end]
    rows, row_times = [], []
    total, status, message = 0.0, OK, ""
    stride = _stride(len(times))
    try:
        while solver.t < first:
            solver.step(first)
        growth = _log_growth(loops, solver, n, first, tau_max, d0)
        _pull_back(solver, n, first, tau_max, 1.0 if growth is None else math.exp(-growth))
        for k, t_next in enumerate(times):
            while solver.t < t_next:
                solver.step(t_next)
            if not np.all(np.isfinite(solver.y)) or np.max(np.abs(solver.y)) > settings.bound:
                raise _Stop(UNDEFINED, f"the solution blows up near {system.time_name} = {solver.t:.6g}")
            growth = _log_growth(loops, solver, n, t_next, tau_max, d0)
            if growth is None:
                raise _Stop(UNDEFINED, f"the two solutions merged near {system.time_name} = {t_next:.6g}")
            total += growth
            _pull_back(solver, n, t_next, tau_max, math.exp(-growth))
            solver.forget_before(t_next - 2 * tau_max)
            if (k + 1) % stride == 0 or k == len(times) - 1:
                rows.append([total / (t_next - first)])
                row_times.append(t_next)
            report((t_next - start) / (end - start))
    except _Stop as stop:
        status, message = stop.status, stop.message
    except UNDEFINED_ERRORS:
        status, message = UNDEFINED, system.explain_undefined(solver.t, solver.y[:n], p) or "an expression is undefined"
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    if not row_times and status != OK:
        return _failed("flow", TWO_TRAJECTORY, status, message, 1)
    averaged = (row_times[-1] - first) if row_times else 0.0
    if row_times:
        total = rows[-1][0] * averaged
    result = _sorted_result([total], rows, row_times, "flow", TWO_TRAJECTORY, averaged, dt=None,
                            renorm_interval=interval, status=status, message=message)
    result.warnings.append(NOTE)
    return result


__all__ = ["largest_delay_exponent"]

"""The parts of the standalone script (``run_script``) that reproduce a run of a delay model.

The script carries the engine's own method-of-steps integrator: the source of ``breakpoints``,
``DelayIntegrator`` and ``_Stop`` is copied from ``engine/delay.py`` (our module, never user text), with
the Dormand-Prince tableau taken from scipy's RK45 as the engine takes it. The right-hand side is
printed, as the engine's kernels are, over the states followed by the delayed values; the history
before the start is printed the same way (a held initial value is its number).
"""

from __future__ import annotations

import inspect

import numpy as np
import sympy as sp

from orbitdesk.engine import delay as engine_delay
from orbitdesk.system.codegen import scalar_function


def delay_head(system, p, u0) -> list[str]:
    """The script's constants of the delays."""
    taus = engine_delay.delay_values(system, np.asarray(p, dtype=float))
    lag_state = [system.states.index(d.state) for d in system.delays]
    return [
        "# delays: Dormand-Prince 5(4) with its continuous extension, the method of steps (as OrbitDesk runs it)",
        f"DELAYED = {[d.label for d in system.delays]!a}  # the delayed values the equations use",
        f"TAUS = [{', '.join(repr(float(x)) for x in taus)}]  # their delays at these parameter values",
        f"LAG_STATE = {lag_state!r}  # the state each delays",
        f"DISCONTINUITY_ORDER = {engine_delay.DISCONTINUITY_ORDER!r}",
        f"MAX_BREAKPOINTS = {engine_delay.MAX_BREAKPOINTS!r}",
        "STEP_FAILED, UNDEFINED = 'step_failed', 'undefined'",
        "_A, _B, _C, _E, _P = RK45.A, RK45.B, numpy.append(RK45.C, 1.0), RK45.E, RK45.P  # Dormand-Prince 5(4)",
        "LAGGED = []  # the delayed values at the output times (for derived quantities), filled by run()",
    ]


def delay_parts(system, u0) -> list[str]:
    """The right-hand side over (states, delayed values), the history, the integrator and run()."""
    aug = engine_delay.augmented(system)
    n = system.n_states
    parts = [scalar_function(aug, "rhs", aug.plain(aug.f[:n]))]
    history = [system.model.history.get(name, sp.Float(float(u0[i]))) for i, name in enumerate(system.states)]
    parts.append(scalar_function(aug, "history", aug.plain(history)))
    if system.derived_exprs:
        parts.append(scalar_function(aug, "_derived_point", aug.plain(aug.derived_exprs)))
        parts.append(_DERIVED)
    for piece in (engine_delay._Stop, engine_delay.breakpoints, engine_delay.DelayIntegrator):
        parts.append(inspect.getsource(piece).rstrip())
    parts.append(_RUN)
    return parts


_DERIVED = '''def derived(time, states, p):
    """Derived quantities at the output times, their delayed values read off the run (LAGGED)."""
    rows = [_derived_point(t, list(states[:, k]) + [lag[k] for lag in LAGGED], p) for k, t in enumerate(time)]
    return numpy.array(rows, dtype=float).T'''

_RUN = '''def run():
    """The method of steps from T_START to T_END; returns the output times and the states."""
    p = list(PARAMETERS.values())
    n = len(STATES)
    before = [lambda t, i=i: float(history(t, None, p)[i]) for i in range(n)]

    def fun(t, y, lags):
        return rhs(t, list(y) + list(lags), p)[:n]

    solver = DelayIntegrator(fun, T_START, INITIAL, LAG_STATE, TAUS, before, RTOL, ATOL, MAX_STEP, T_END)
    t_eval = numpy.linspace(T_START, T_END, SAMPLES) if SAMPLES > 1 else None
    times, values, j = [T_START], [list(INITIAL)], 1
    try:
        while solver.t < T_END:
            solver.step(T_END)
            if t_eval is None:
                times.append(solver.t)
                values.append(list(solver.y))
                continue
            k = j
            while k < len(t_eval) and t_eval[k] <= solver.t:
                k += 1
            if k > j:
                times.extend(t_eval[j:k])
                values.extend(solver.dense(t_eval[j:k]).T.tolist())
                j = k
    except (_Stop, ArithmeticError, ValueError) as stop:
        print("integration stopped early at t =", solver.t, stop, file=sys.stderr)
    time, states = numpy.array(times, dtype=float), numpy.array(values, dtype=float).T
    LAGGED[:] = [[solver.value(i, s - tau) for s in time] for i, tau in zip(LAG_STATE, TAUS)]
    if TRANSIENT > 0:
        keep = time >= T_START + TRANSIENT
        time, states = time[keep], states[:, keep]
        LAGGED[:] = [[v for v, kept in zip(lag, keep) if kept] for lag in LAGGED]
    return time, states'''


__all__ = ["delay_head", "delay_parts"]

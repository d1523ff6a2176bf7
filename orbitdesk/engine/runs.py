"""Single runs: integrate a flow or iterate a map, with sampling, events, bounds and cancel.

Explicit methods (Dormand-Prince 8(5,3) and 5(4), RK4) and maps run in the compiled loops
(``explicit_rk.py``, ``maps.py``) on the model's kernels: output samples are read off each step's
dense output in the same pass, plane events are located there by one root finder. Stiff methods
(``stiff.py``: scipy's steppers on the model's kernels and sparse Jacobian, each step's interpolant
checked), and events given as Python functions (the same compiled loop taken one step at a time,
``drivers.ExplicitStepper``), step one step at a time here. Every path
reports progress, stops cleanly on blow-up, undefined values or cancel and keeps what it computed.
"""

from __future__ import annotations

import math
from time import perf_counter
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from orbitdesk.engine.methods import NAMES
from orbitdesk.engine.settings import RunSettings
from orbitdesk.engine import compiled, drivers, limits, stiff, stochastic
from orbitdesk.engine.stiff import StiffStepper
from orbitdesk.engine.status import (C_CANCELLED, C_DIVERGED, C_STEP_FAILED, C_UNDEFINED, CANCELLED, DIVERGED,
                                 OK, STEP_FAILED, UNDEFINED)
from orbitdesk.engine.status import word as status_word
from orbitdesk.engine.progress import CancelToken, Cancelled, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem, UndefinedValue


METHODS = NAMES
PREPARE_AFTER = 0.3  # seconds of a plain-Python run after which the model's kernels compile in the background


@dataclass
class Event:
    """A crossing of g(t, u) = 0; direction +1 (g rising), -1 (falling) or 0 (both).

    ``rate`` (optional) is dg/dt along the solution; with it a step is split where g turns, so a
    pair of crossings inside one step (a near-grazing pass) is found too. An event made by
    ``Event.on_plane`` is located inside the compiled loop, on the step's dense output.
    """

    g: Callable[[float, np.ndarray], float]
    direction: int = 0
    terminal: bool = False
    rate: Callable[[float, np.ndarray], float] | None = None
    plane: tuple | None = None  # (normal (n,), value) when g is that plane

    @classmethod
    def on_plane(cls, normal, value: float, direction: int = 0, terminal: bool = False) -> "Event":
        """g = normal . u - value, located inside the compiled loop."""
        normal = np.asarray(normal, dtype=float).ravel()
        value = float(value)
        return cls(lambda t, u: float(normal @ np.asarray(u)) - value, direction, terminal, plane=(normal, value))


@dataclass
class Trajectory:
    kind: str
    time: np.ndarray
    states: np.ndarray  # (n_states, K)
    state_names: list[str]
    params: dict[str, float]
    status: str = OK
    message: str = ""
    derived: dict[str, np.ndarray] = field(default_factory=dict)
    event_times: list[np.ndarray] = field(default_factory=list)
    event_states: list[np.ndarray] = field(default_factory=list)  # each (n_states, M)
    steps_taken: int = 0
    realisations: object = None  # a model with noise: engine.stochastic.Realisations (states = the first)
    model_events: list = field(default_factory=list)  # AppliedEvent of the model's 'when' lines, in time order
    final_params: np.ndarray | None = None  # parameters at the end when the model's events changed them
    event_params: list = field(default_factory=list)  # per event of the caller: (n_params, M) when they changed

    def end_params(self, p):
        """The parameter values at the end of the run (``p`` unless the model's events changed them)."""
        return p if self.final_params is None else self.final_params

    def params_at_crossing(self, k, j, p):
        """The parameter values at the caller's event k, crossing j (``p`` unless events changed them)."""
        return p if not self.event_params else self.event_params[k][:, j]

    @property
    def ok(self) -> bool:
        return self.status == OK

    @property
    def final_state(self) -> np.ndarray:
        return self.states[:, -1]

    def series(self, name: str) -> np.ndarray:
        """A state, a derived quantity or the time ('t' or 'n') by name."""
        if name in ("t", "n"):
            return self.time
        if name in self.state_names:
            return self.states[self.state_names.index(name)]
        if name in self.derived:
            return self.derived[name]
        raise KeyError(f"no series named '{name}'")


class _Stop(Exception):
    def __init__(self, status, message):
        super().__init__(message)
        self.status, self.message = status, message


def _describe_state(system: CompiledSystem, u) -> str:
    return ", ".join(f"{s} = {float(v):.6g}" for s, v in zip(system.states, u))


def _check_state(system, t, u, bound):
    bad = ~np.isfinite(u) | (np.abs(u) > bound)
    if bad.any():
        which = system.states[int(np.argmax(bad))]
        name = system.time_name
        if system.kind == MAP:
            raise _Stop(DIVERGED, f"the orbit escapes to infinity: {which} passes {bound:g} at {name} = {t:g}")
        raise _Stop(DIVERGED, f"the solution blows up: {which} passes {bound:g} in size at {name} = {t:.6g} "
                              f"({_describe_state(system, u)})")


def simulate(system: CompiledSystem, settings: RunSettings | None = None, u0=None, p=None,
             events: list[Event] | tuple = (), cancel: CancelToken | None = None,
             progress=None, noise: bool = False) -> Trajectory:
    """One run of a flow or a map from ``u0`` (default: the model's) with parameters ``p``.

    A model with noise runs its noise-free part (what analyses that assume determinism use) unless
    ``noise``: then realisations (``engine/stochastic.py``; forward in time, events not located)."""
    settings = settings or RunSettings()
    u0 = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    report = Reporter(progress, cancel)
    check_request(system, settings)
    if system.kind == MAP:
        return _iterate(system, settings, u0, p, report)
    if noise and system.stochastic:  # realisations by a fixed-step scheme for noise
        return stochastic.simulate_noise(system, settings, u0, p, report)
    if system.delays:  # delay models: the method of steps (engine/delay.py)
        from orbitdesk.engine.delay import simulate_delay

        return simulate_delay(system, settings, u0, p, list(events), report)
    if system.model.events:
        from orbitdesk.engine.model_events import simulate_with_events

        return simulate_with_events(system, settings, u0, p, list(events), report)
    if settings.method_info.family == "explicit_rk" and all(ev.plane is not None for ev in events):
        return _integrate_loop(system, settings, u0, p, list(events), report)
    return _integrate(system, settings, u0, p, list(events), report)


def check_request(system: CompiledSystem, settings: RunSettings) -> None:
    """Size a run before it starts (limits.py): the steps it implies and the memory of its output;
    LimitExceeded names the limit and how to raise it."""
    row = 8.0 * (system.n_states + 1 + len(system.derived_names))  # bytes per output point
    limits.check_run_settings(settings, system.kind == MAP)
    if system.kind == MAP:
        limits.check_memory(row * (settings.steps + 1.0), f"a run of {settings.steps:,} iterations")
    elif settings.samples > 1:
        limits.check_memory(row * settings.samples, f"a run of {settings.samples:,} samples")


def _describe_stop(system, code, t, y, p, h, bound) -> str:
    name = system.time_name
    if code == C_DIVERGED:
        which = system.states[int(np.argmax(np.abs(y)))] if y.size else "the state"
        return (f"the solution blows up: {which} passes {bound:g} in size at {name} = {t:.6g} "
                f"({_describe_state(system, y)})")
    if code == C_UNDEFINED:
        return _explain_near(system, t, y, p, h) or f"an expression is undefined at {name} = {t:.6g}"
    if code == C_STEP_FAILED:
        return (f"the step size collapsed at {name} = {t:.6g}; the system may be stiff: "
                "try the stiff method")
    return ""


def _collapse_words(system, settings, t, why) -> str:
    """A step-by-step run whose step size collapsed: what was tried, and the option that goes further."""
    head = f"the step size collapsed at {system.time_name} = {t:.6g} ({why})"
    if settings.method_info.stiff:  # the stiff method already: its error control asked for less than round-off
        return (f"{head}: the {settings.method_info.label} at rtol {settings.rtol:g}, atol {settings.atol:g} "
                "needed steps below the round-off of the time. Either the solution or its rate grows without bound "
                "there (the run's last values show it; no method goes past such a point) or the tolerance is "
                "tighter than the method can follow there (a looser --rtol, --atol)")
    return f"{head}; the system may be stiff: try the stiff method"


def _explain_near(system, t, y, p, h) -> str | None:
    """Name what is undefined at the run's last good point, or just beyond it along the flow."""
    found = system.explain_undefined(t, y, p)
    if found is not None:
        return found
    try:
        slope = system.rhs(t, y, p)
    except ArithmeticError:
        return None
    for k in range(0, 60, 3):
        step = h * 2.0 ** k
        found = system.explain_undefined(t + step, y + step * slope, p)
        if found is not None:
            return found
    return None


def _integrate_loop(system, settings, u0, p, events, report) -> Trajectory:
    """A run of an explicit method in the compiled loop (plain Python until the model's kernels are compiled)."""
    t0, t1 = float(settings.t_start), float(settings.t_end)
    n = system.n_states
    per_time = 4 / settings.dt if settings.method == "rk4" else 1200
    engine = compiled.engine_for_work(system, abs(t1 - t0) * per_time * max(1.0, n / 3))
    every_step = settings.samples <= 1
    grid = None if every_step else np.linspace(t0, t1, settings.samples)[1:]
    planes = None
    if events:
        rows = np.array([np.append(ev.plane[0], ev.plane[1]) for ev in events], dtype=float)
        planes = (rows, np.array([int(np.sign(ev.direction)) for ev in events]),
                  np.array([bool(ev.terminal) for ev in events]))
    started = perf_counter()
    with np.errstate(all="ignore"):
        out = drivers.flow_run(engine, settings.method, t0, t1, u0, p, settings.rtol, settings.atol,
                               settings.max_step, settings.dt, settings.bound, grid=grid, every_step=every_step,
                               planes=planes, report=report)
    if not engine.compiled and perf_counter() - started > PREPARE_AFTER:
        compiled.prepare(system)  # runs this slow are worth compiling: in the background, for the next ones
    if every_step:
        time, states = out.time, out.states
    else:
        time = np.concatenate([[t0], out.time])
        states = np.concatenate([np.asarray(u0, float)[:, None], out.states], axis=1)
    status = status_word(out.code)
    last_step = 1e-12 * max(1.0, abs(out.t))
    message = "cancelled" if status == CANCELLED else out.note or _describe_stop(
        system, out.code, out.t, out.y, p, last_step, settings.bound)
    if settings.transient > 0:
        direction = 1.0 if t1 > t0 else -1.0
        keep = (time - (t0 + direction * settings.transient)) * direction >= 0
        time, states = time[keep], states[:, keep]
    ev_t = [out.event_t[out.event_k == k] for k in range(len(events))]
    ev_y = [out.event_y[:, out.event_k == k] for k in range(len(events))]
    return Trajectory("flow", time, states, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(time, states, p) if time.size else {}, ev_t, ev_y,
                      steps_taken=out.steps)


def _iterate(system, settings, u0, p, report) -> Trajectory:
    steps = int(settings.steps)
    engine = compiled.engine_for_work(system, steps * max(1.0, system.n_states / 3))
    try:
        _check_state(system, 0, u0, settings.bound)
    except _Stop as stop:
        states, status, message = np.asarray(u0, float)[:, None], stop.status, stop.message
    else:
        with np.errstate(all="ignore"):
            states, code = drivers.map_run(engine, 0, steps, u0, p, settings.bound, report)
        last = states.shape[1] - 1
        status, message = status_word(code), ""
        if code == C_CANCELLED:
            message = "cancelled"
        elif code == C_UNDEFINED:
            message = system.explain_undefined(last, states[:, -1], p) or f"undefined value at n = {last}"
        elif code == C_DIVERGED:
            message = f"the orbit escapes to infinity at n = {last + 1}"
            try:
                _check_state(system, last + 1, system.rhs(last, states[:, -1], p), settings.bound)
            except _Stop as stop:
                message = stop.message
            except ArithmeticError:
                pass
    n_time = np.arange(states.shape[1], dtype=float)
    return Trajectory(MAP, n_time, states, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(n_time, states, p), steps_taken=states.shape[1] - 1)


def _root(fn, ta, tb):
    """A zero of fn between ta and tb, where the step's end values showed a sign change.

    On the dense output an end value can differ from the step's by round-off and lose the sign
    change (brentq would refuse); the zero then sits at that end.
    """
    from scipy.optimize import brentq  # only runs with events given as functions get here

    fa, fb = fn(ta), fn(tb)
    if fa == 0 or fb == 0 or fa * fb > 0:
        return ta if abs(fa) <= abs(fb) else tb
    return brentq(fn, ta, tb, xtol=1e-14)


def _read_inside(sample_t, events, direction):
    """For the stiff stepper (``reads``): whether a step's interior is read, i.e. it holds a sample time or
    a crossing of an event's function (a sign change of g, or of its rate: g turns inside), as found below."""
    keys = None if sample_t is None else np.asarray(sample_t, dtype=float) * direction  # increasing
    if (keys is None or keys.size <= 2) and not events:
        return False  # samples at the run's two ends only: they are step ends

    def reads(t_old, y_old, t_new, y_new) -> bool:
        if keys is not None and np.searchsorted(keys, t_new * direction, side="left") > \
                np.searchsorted(keys, t_old * direction, side="right"):
            return True
        for ev in events:
            ga, gb = ev.g(t_old, y_old), ev.g(t_new, y_new)
            if ga * gb < 0 or (gb == 0 and ga != 0):
                return True
            if ev.rate is not None and ev.rate(t_old, y_old) * ev.rate(t_new, y_new) < 0:
                return True
        return False

    return reads


def _integrate(system, settings, u0, p, events, report) -> Trajectory:
    t0, t1 = float(settings.t_start), float(settings.t_end)
    if not t1 != t0 or not (math.isfinite(t0) and math.isfinite(t1)):
        raise ValueError("the end time must differ from the start time")
    direction = 1.0 if t1 > t0 else -1.0
    n = system.n_states
    sample_t = np.linspace(t0, t1, settings.samples) if settings.samples > 1 else None
    t_keep = t0 + direction * max(settings.transient, 0.0)
    ts, ys = [], []
    ev_t = [[] for _ in events]
    ev_y = [[] for _ in events]
    status, message, steps = OK, "", 0
    try:
        if settings.method_info.stiff:  # every step's interpolant held to the tolerance (stiff.py)
            fun, jac = stiff.model_functions(system, p)
            solver = StiffStepper(settings.method_info.scipy_name, fun, jac, t0, u0, t1, settings.rtol, settings.atol,
                                  settings.max_step, reads=_read_inside(sample_t, events, direction))
        else:  # the compiled loop one step at a time
            per_time = 4 / settings.dt if settings.method == "rk4" else 1200
            engine = compiled.engine_for_work(system, abs(t1 - t0) * per_time * max(1.0, n / 3))
            solver = drivers.ExplicitStepper(engine, settings.method, t0, u0, t1, p, settings.rtol, settings.atol,
                                             settings.max_step, settings.dt, settings.bound)
        if sample_t is None:
            ts.append(t0)
            ys.append(u0.copy())
        elif sample_t[0] == t0:
            ts.append(t0)
            ys.append(u0.copy())
        next_sample = 1 if sample_t is not None else None
        g_prev = [ev.g(t0, u0) for ev in events]
        r_prev = [ev.rate(t0, u0) if ev.rate else 0.0 for ev in events]
        while solver.status == "running":
            message_step = solver.step()
            steps += 1
            if solver.status == "failed" and getattr(solver, "code", 0):  # the compiled loop's own stop
                raise _Stop(status_word(solver.code), _describe_stop(system, solver.code, solver.t, solver.y, p,
                                                                      1e-12 * max(1.0, abs(solver.t)), settings.bound))
            if solver.status == "failed":
                raise _Stop(STEP_FAILED, _collapse_words(system, settings, solver.t, message_step))
            t_new, y_new = solver.t, solver.y
            _check_state(system, t_new, y_new, settings.bound)
            sol = None
            if sample_t is not None:
                j = next_sample
                while j < len(sample_t) and (sample_t[j] - t_new) * direction <= 0:
                    j += 1
                if j > next_sample:
                    sol = solver.dense_output()
                    block = sample_t[next_sample:j]
                    values = sol(block).reshape(n, -1)
                    ts.extend(block)
                    ys.extend(values.T)
                    next_sample = j
            else:
                ts.append(t_new)
                ys.append(y_new.copy())
            stop_here = False
            for k, ev in enumerate(events):
                g_new = ev.g(t_new, y_new)
                g_old = g_prev[k]
                g_prev[k] = g_new
                pieces = [(solver.t_old, g_old, t_new, g_new)]
                if ev.rate is not None:
                    r_new = ev.rate(t_new, y_new)
                    if r_prev[k] * r_new < 0:  # g turns inside the step: test both sides of the turn
                        sol = sol or solver.dense_output()
                        tm = _root(lambda tq: ev.rate(tq, sol(tq)), solver.t_old, t_new)
                        if tm != solver.t_old and tm != t_new:
                            gm = ev.g(tm, sol(tm))
                            pieces = [(solver.t_old, g_old, tm, gm), (tm, gm, t_new, g_new)]
                    r_prev[k] = r_new
                for ta, ga, tb, gb in pieces:
                    if not (ga * gb < 0 or (gb == 0 and ga != 0)):
                        continue
                    rising = gb > ga
                    if ev.direction and (ev.direction > 0) != rising:
                        continue
                    sol = sol or solver.dense_output()
                    te = tb if gb == 0 else _root(lambda tq: ev.g(tq, sol(tq)), ta, tb)
                    ev_t[k].append(te)
                    ev_y[k].append(np.asarray(sol(te), float).reshape(n))
                    stop_here = stop_here or ev.terminal
            if stop_here:
                break
            report((t_new - t0) / (t1 - t0))
    except _Stop as stop:
        status, message = stop.status, stop.message
    except UndefinedValue as err:  # the stiff path's right-hand side or Jacobian
        status, message = UNDEFINED, str(err)
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    time = np.array(ts, dtype=float)
    states = np.array(ys, dtype=float).reshape(-1, n).T if ys else np.empty((n, 0))
    if settings.transient > 0:
        keep = (time - t_keep) * direction >= 0
        time, states = time[keep], states[:, keep]
    return Trajectory("flow", time, states, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(time, states, p) if time.size else {},
                      [np.array(v) for v in ev_t],
                      [np.array(v).reshape(-1, n).T if v else np.empty((n, 0)) for v in ev_y],
                      steps_taken=steps)

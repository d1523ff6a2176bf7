"""Runs of flows with events (``when COND then ...`` in the model, language/events.py).

The run goes in segments. Each segment integrates with every event boundary given to the loop as a
terminal plane (explicit methods: located on the step's dense output by the compiled loop's one
root finder; stiff methods: scipy's stepper with the same planes), or up to the next time event
(its time is known exactly). At the first crossing the assignments are applied together (every
right side evaluated with the values before the event), the run restarts from there with the new
states and parameters, and the event is recorded (time, line, rule, values before and after).
``stop`` ends the run with the status ``stopped``; events faster than ``settings.event_rate`` per
unit time (over the last ``WINDOW`` events) end it with ``chattering`` and plain words, never a hang.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass
from time import perf_counter

import numpy as np

from orbitdesk.engine import compiled, drivers
from orbitdesk.engine.progress import Cancelled
from orbitdesk.engine.status import CANCELLED, CHATTERING, OK, STOPPED, STEP_FAILED
from orbitdesk.engine.status import word as status_word
from orbitdesk.system.compiled_system import UNDEFINED_ERRORS

WINDOW = 20  # events over which the rate is judged


@dataclass
class AppliedEvent:
    """One event that happened in a run."""

    t: float
    index: int  # in system.model.events
    line: int
    rule: str
    before: dict
    after: dict

    def to_dict(self) -> dict:
        return {"t": self.t, "line": self.line, "rule": self.rule, "before": self.before, "after": self.after}


_HUGE = 2 ** 1000  # an exact integer beyond this cannot be converted to a float in generated code


def _float_sized(e):
    """An event's coefficient with exact numbers too large for a float (10^300 / sqrt(1 + 10^600), what
    sin(atan(1e300)) becomes exactly) evaluated to 20 digits, so the generated code only meets floats."""
    import sympy as sp

    if isinstance(e, sp.Basic) and any(abs(a.p) > _HUGE or abs(a.q) > _HUGE for a in e.atoms(sp.Rational)):
        return e.evalf(n=20)
    return e


class EventPlan:
    """The events of one compiled system as numbers: plane rows, event times, assignments."""

    def __init__(self, system):
        self.system = system
        self.events = list(system.model.events)
        self.planes = [k for k, ev in enumerate(self.events) if not ev.on_time]
        self.timed = [k for k, ev in enumerate(self.events) if ev.on_time]
        rows = [_float_sized(e) for k in self.planes for e in (*self.events[k].normal, -self.events[k].offset)]
        self._rows = system._compile(rows, "math") if rows else None
        times = [_float_sized(e) for k in self.timed for e in (self.events[k].time_rate, self.events[k].time_offset)]
        self._times = system._compile(times, "math") if times else None
        self._values = [system._compile([_float_sized(e) for _, _, e in ev.assignments], "math")
                        if ev.assignments else None for ev in self.events]
        self.directions = np.array([self.events[k].direction for k in self.planes], dtype=np.int64)

    def plane_rows(self, t, u, p) -> np.ndarray:
        n = len(u)
        if self._rows is None:
            return np.empty((0, n + 1))
        return np.array(self._rows(t, *u, *p), dtype=float).reshape(len(self.planes), n + 1)

    def undefined_boundary(self, t, u, p) -> str:
        """Which event's boundary (or time) is undefined at (t, u, p), in words."""
        for k, ev in enumerate(self.events):
            parts = (ev.time_rate, ev.time_offset) if ev.on_time else (*ev.normal, -ev.offset)
            try:
                values = [float(v) for v in self.system._compile([_float_sized(e) for e in parts], "math")(t, *u, *p)]
            except UNDEFINED_ERRORS:
                values = [math.nan]
            if not all(math.isfinite(v) for v in values):
                return f"the boundary of the event on line {ev.line} ({ev.rule}) is undefined at t = {t:.6g}"
        return f"the boundary of an event is undefined at t = {t:.6g}"

    def next_time(self, t, t_end, p):
        """(time, event index) of the first time event in (t, t_end], or (None, None)."""
        if self._times is None:
            return None, None
        values = self._times(0.0, *np.zeros(self.system.n_states), *p)
        best, which = None, None
        for j, k in enumerate(self.timed):
            rate, offset = float(values[2 * j]), float(values[2 * j + 1])
            if rate == 0.0 or not math.isfinite(rate) or (rate > 0) != (self.events[k].direction > 0):
                continue
            when = -offset / rate
            if t + 1e-13 * max(1.0, abs(t)) < when <= t_end and (best is None or when < best):
                best, which = when, k
        return best, which

    def return_time(self, k, t, u, p) -> float:
        """How soon the solution would cross event k's boundary again after the reset to (t, u, p): 0 when
        the flow does not carry it away from the boundary, else 2 |dg/dt| / |d2g/dt2| (a parabola's
        return), inf when it does not come back or for an event at a known time."""
        ev = self.events[k]
        if ev.on_time:
            return math.inf
        try:
            normal = self.plane_rows(t, u, p)[self.planes.index(k)][:-1]
            f = self.system.rhs(t, u, p)
            rate = float(normal @ f)
            h = 1e-7 * max(1.0, abs(t)) / max(1.0, float(np.max(np.abs(f))))
            accel = (float(normal @ self.system.rhs(t + h, u + h * f, p)) - rate) / h
        except (ArithmeticError, ValueError, TypeError):  # an undefined boundary: the next segment says so
            return math.inf
        if not math.isfinite(rate) or ev.direction * rate >= 0:  # not carried away from the boundary
            return 0.0
        if ev.direction * accel <= 0:
            return math.inf
        return 2.0 * abs(rate) / abs(accel)

    def apply(self, k, t, u, p):
        """The states and parameters after event k at (t, u, p): every right side first, then the targets."""
        ev = self.events[k]
        u_new, p_new = np.array(u, dtype=float), np.array(p, dtype=float)
        if ev.assignments:
            values = self._values[k](t, *u, *p)
            for (target, kind, _), value in zip(ev.assignments, values):
                if kind == "state":
                    u_new[self.system.states.index(target)] = float(value)
                else:
                    p_new[self.system.parameters.index(target)] = float(value)
        return u_new, p_new


def describe_events(system) -> str:
    """The model's events in words for refusals and notes: "line 5 (when x < 0 then x' = -e*x')"."""
    events = system.model.events
    shown = "; ".join(f"line {ev.line} ({ev.rule})" for ev in events[:3])
    return shown + (f" and {len(events) - 3} more" if len(events) > 3 else "")


def saltation_refusal(system, what: str) -> str:
    """Why ``what`` is not computed for a model with events (empty when it has none)."""
    if not system.model.events:
        return ""
    return (f"{what} of a model with events are not computed: across each event a perturbation jumps by the "
            "saltation matrix, which this analysis does not apply, so its answer would be wrong. The model's "
            f"events: {describe_events(system)}")


def refuse_ensembles(system, what: str) -> None:
    """ValueError in plain words: ``what`` runs many members together on an ensemble engine that does not
    stop at the model's events."""
    if getattr(system.model, "events", None):
        raise ValueError(f"{what} of a model with events are not computed yet: they run many members together "
                         "on an ensemble engine that does not stop at the model's events "
                         f"({describe_events(system)}). Single runs and Poincaré sections apply the events")


def plan_for(system) -> EventPlan:
    plan = system.__dict__.get("_event_plan")
    if plan is None:
        plan = system.__dict__["_event_plan"] = EventPlan(system)
    return plan


def _values(system, u, p, ev) -> dict:
    out = {s: float(v) for s, v in zip(system.states, u)}
    for target, kind, _ in ev.assignments:
        if kind == "parameter":
            out[target] = float(p[system.parameters.index(target)])
    return out


def simulate_with_events(system, settings, u0, p, extra, report):
    """One run of a flow with model events (and the caller's plane events ``extra``)."""
    from orbitdesk.engine.runs import Event, Trajectory, _describe_stop

    t0, t1 = float(settings.t_start), float(settings.t_end)
    n = system.n_states
    p0 = np.array(p, dtype=float)
    if t1 < t0:
        return Trajectory("flow", np.array([t0]), np.asarray(u0, float)[:, None], list(system.states),
                          system.param_dict(p0), STEP_FAILED,
                          "this model has events, which happen forward in time; a run backward in time is not made")
    plan = plan_for(system)
    explicit = settings.method_info.family == "explicit_rk"
    every_step = settings.samples <= 1 or not explicit
    grid = None if every_step else np.linspace(t0, t1, settings.samples)
    if explicit:
        per_time = 4 / settings.dt if settings.method == "rk4" else 1200
        engine = compiled.engine_for_work(system, abs(t1 - t0) * per_time * max(1.0, n / 3))
    started = perf_counter()
    t, y, p = t0, np.array(u0, dtype=float), p0.copy()
    times, chunks, derived = [np.array([t0])], [y[:, None].copy()], []
    ev_t = [[] for _ in extra]
    ev_y = [[] for _ in extra]
    ev_p = [[] for _ in extra]  # the parameters at each of the caller's crossings
    applied: list[AppliedEvent] = []
    recent = deque(maxlen=WINDOW)
    status, message, steps = OK, "", 0
    end_hit = end_after = None
    seg_start = 0  # index into times/chunks where the current parameter values began

    def close_segment():
        nonlocal seg_start
        if len(times) > seg_start:  # none: the run ended where the parameters changed
            tt = np.concatenate(times[seg_start:])
            derived.append(system.derived_values(tt, np.concatenate(chunks[seg_start:], axis=1), p) if tt.size else {})
        seg_start = len(times)

    while True:
        try:
            rows = plan.plane_rows(t, y, p)
            t_time, k_time = plan.next_time(t, t1, p)
        except UNDEFINED_ERRORS:  # asin(k + 1) as a boundary: no run can follow it
            status, message = "undefined", plan.undefined_boundary(t, y, p)
            break
        seg_end = t1 if t_time is None else t_time
        planes = [Event.on_plane(r[:n], r[n], int(d), True) for r, d in zip(rows, plan.directions)] + list(extra)

        def seg_report(fraction, a=t, b=seg_end):
            report((a + fraction * (b - a) - t0) / (t1 - t0))

        if explicit:
            seg = _explicit_segment(engine, settings, t, seg_end, y, p, planes, grid, every_step, seg_report)
        else:
            seg = _stiff_segment(system, settings, t, seg_end, y, p, planes, seg_report)
        seg_t, seg_y, e_t, e_y, e_k, code, note, t_reached, y_reached, seg_steps = seg
        steps += seg_steps
        hit_t, hit_k, hit_y = None, None, None
        for te, k, ye in zip(e_t, e_k, e_y.T):
            if k < len(plan.planes) and (hit_t is None or te < hit_t):
                hit_t, hit_k, hit_y = te, plan.planes[k], ye
        if hit_t is None and k_time is not None and code == 0 and t_reached >= seg_end - 1e-12 * max(1.0, abs(seg_end)):
            hit_t, hit_k, hit_y = seg_end, k_time, y_reached
        if hit_t is None:  # the end, or a caller's terminal plane, or trouble
            times.append(seg_t)
            chunks.append(seg_y)
            _keep_extra(e_t, e_y, e_k, len(plan.planes), None, ev_t, ev_y, ev_p, p)
            if code != 0:
                status = status_word(code) if isinstance(code, (int, np.integer)) else code
                message = "cancelled" if status == CANCELLED else note or _describe_stop(
                    system, code, t_reached, y_reached, p, 1e-12 * max(1.0, abs(t_reached)), settings.bound)
            break
        keep = seg_t <= hit_t
        times.append(seg_t[keep])
        chunks.append(seg_y[:, keep])
        _keep_extra(e_t, e_y, e_k, len(plan.planes), hit_t, ev_t, ev_y, ev_p, p)
        if every_step:
            times.append(np.array([hit_t]))
            chunks.append(np.asarray(hit_y, float)[:, None])
        event = plan.events[hit_k]
        try:
            y_new, p_new = plan.apply(hit_k, hit_t, hit_y, p)
        except (ValueError, ZeroDivisionError, TypeError, OverflowError):
            status, message = "undefined", (f"the event on line {event.line} ({event.rule}) could not be applied at "
                                            f"t = {hit_t:.6g}: a value it sets is undefined there")
            break
        applied.append(AppliedEvent(float(hit_t), hit_k, event.line, event.rule, _values(system, hit_y, p, event),
                                    _values(system, y_new, p_new, event)))
        if not np.all(np.isfinite(y_new)) or np.any(np.abs(y_new) > settings.bound):
            status, message = "diverged", (f"the event on line {event.line} ({event.rule}) at t = {hit_t:.6g} sets "
                                           f"a state beyond {settings.bound:g} in size")
            break
        end_hit = (hit_t, hit_y)  # should the run end at this event, its last points are the event's
        if event.stop:
            status = STOPPED
            message = f"stopped by the event on line {event.line} ({event.rule}) at t = {hit_t:.6g}"
            end_after = (y_new, p_new) if event.assignments else None
            break
        recent.append(hit_t)
        back = plan.return_time(hit_k, hit_t, y_new, p_new)
        if back * settings.event_rate < 1.0:
            status = CHATTERING
            again = "at once" if back == 0 else f"within {back:.3g} time units"
            message = (f"at t = {hit_t:.6g} the event on line {event.line} ({event.rule}) leaves the solution on "
                       f"its boundary, and the flow would carry it across again {again}, faster than the limit of "
                       f"{settings.event_rate:g} events per unit time: the events pile up there (Zeno behaviour, "
                       "such as a ball coming to rest on the floor, or a part pressed against its stop) or the "
                       "solution would slide along the boundary. The run ends here")
            break
        if len(recent) == WINDOW and (recent[-1] - recent[0]) * settings.event_rate < WINDOW - 1:
            span = recent[-1] - recent[0]
            status = CHATTERING
            message = (f"{WINDOW} events within {span:.3g} time units up to t = {hit_t:.6g} (the last on line "
                       f"{event.line}: {event.rule}), more than the limit of {settings.event_rate:g} events per unit "
                       "time: the solution reaches an accumulation point (Zeno behaviour, such as a ball coming to "
                       "rest) or switches back and forth on a boundary (chattering). Raise the limit only if the "
                       "events are meant to come this fast")
            break
        end_hit = None
        if not np.array_equal(p_new, p):
            close_segment()
        t, y, p = float(hit_t), y_new, p_new
        if every_step:
            times.append(np.array([t]))
            chunks.append(y[:, None].copy())
        try:
            report((t - t0) / (t1 - t0))
        except Cancelled:
            status, message = CANCELLED, "cancelled"
            break
    if end_hit is not None and not every_step:
        times.append(np.array([end_hit[0]]))
        chunks.append(np.asarray(end_hit[1], float)[:, None])
    if end_after is not None:
        close_segment()
        p = end_after[1]
        times.append(np.array([end_hit[0]]))
        chunks.append(end_after[0][:, None])
    close_segment()
    if explicit and not engine.compiled and perf_counter() - started > 0.3:
        compiled.prepare(system)
    time = np.concatenate(times)
    states = np.concatenate(chunks, axis=1)
    names = derived[0].keys() if derived else ()
    derived_all = {name: np.concatenate([d[name] for d in derived if name in d]) for name in names}
    if settings.transient > 0:
        keep = time >= t0 + settings.transient
        time, states = time[keep], states[:, keep]
        derived_all = {k: v[keep] for k, v in derived_all.items()}
    traj = Trajectory("flow", time, states, list(system.states), system.param_dict(p0), status, message,
                      derived_all, [np.array(v) for v in ev_t],
                      [np.array(v).reshape(-1, n).T if v else np.empty((n, 0)) for v in ev_y], steps_taken=steps)
    traj.model_events = applied
    if not np.array_equal(p, p0):
        traj.final_params = p.copy()
    if any(not np.array_equal(q, p0) for v in ev_p for q in v):
        m = len(system.parameters)
        traj.event_params = [np.array(v).reshape(-1, m).T if v else np.empty((m, 0)) for v in ev_p]
    return traj


def _keep_extra(e_t, e_y, e_k, first, until, ev_t, ev_y, ev_p, p):
    """The caller's plane crossings of a segment (indices from ``first`` on), up to ``until``."""
    for te, k, ye in zip(e_t, e_k, e_y.T):
        if k >= first and (until is None or te <= until):
            ev_t[k - first].append(float(te))
            ev_y[k - first].append(np.array(ye, dtype=float))
            ev_p[k - first].append(np.array(p, dtype=float))


def _explicit_segment(engine, settings, t, t_end, y, p, planes, grid, every_step, report):
    seg_grid = None if every_step else grid[(grid > t) & (grid <= t_end)]
    rows = np.array([np.append(ev.plane[0], ev.plane[1]) for ev in planes], dtype=float).reshape(len(planes), y.size + 1)
    spec = (rows, np.array([int(np.sign(ev.direction)) for ev in planes], dtype=np.int64),
            np.array([bool(ev.terminal) for ev in planes], dtype=np.bool_))
    with np.errstate(all="ignore"):
        out = drivers.flow_run(engine, settings.method, t, t_end, y, p, settings.rtol, settings.atol,
                               settings.max_step, settings.dt, settings.bound, grid=seg_grid, every_step=every_step,
                               planes=spec, report=report)
    seg_t, seg_y = out.time, out.states
    if every_step:
        seg_t, seg_y = seg_t[1:], seg_y[:, 1:]
    e_y = out.event_y if out.event_y.size else np.empty((y.size, 0))
    return seg_t, seg_y, out.event_t, e_y, out.event_k, out.code, out.note, out.t, out.y, out.steps


def _stiff_segment(system, settings, t, t_end, y, p, planes, report):
    from orbitdesk.engine.runs import _integrate

    part = settings.replace(t_start=t, t_end=t_end, samples=0, transient=0.0)
    traj = _integrate(system, part, y, p, planes, report)
    e_t = np.concatenate([np.asarray(v, float) for v in traj.event_times]) if planes else np.empty(0)
    e_y = np.concatenate(traj.event_states, axis=1) if planes else np.empty((y.size, 0))
    e_k = np.concatenate([np.full(len(v), k, dtype=np.int64) for k, v in enumerate(traj.event_times)]) \
        if planes else np.empty(0, dtype=np.int64)
    code = 0 if traj.status == OK else traj.status
    y_end = traj.states[:, -1] if traj.states.size else np.asarray(y, float)
    t_end_reached = float(traj.time[-1]) if traj.time.size else t
    return (traj.time[1:], traj.states[:, 1:], e_t, e_y, e_k, code, traj.message, t_end_reached, y_end,
            traj.steps_taken)


__all__ = ["AppliedEvent", "EventPlan", "plan_for", "describe_events", "saltation_refusal", "refuse_ensembles", "simulate_with_events", "WINDOW"]

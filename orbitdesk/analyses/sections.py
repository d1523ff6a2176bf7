"""Poincaré sections of flows: hyperplane crossings, stroboscopic samples, return maps.

Hyperplane crossings are located by the engine's event finder (a bracketing root finder on each
step's dense output, with the step split where the section function turns, so near-grazing
passes are not lost). A pass that only touches the plane, within the integrator's accuracy, is
recorded once. Stroboscopic points are taken exactly at t0 + phase + k T from the dense output.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import sympy as sp

from orbitdesk.engine.runs import CANCELLED, OK, Event, RunSettings, simulate
from orbitdesk.engine.progress import Cancelled, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem, lambdify
from orbitdesk.engine import limits
from orbitdesk.analyses.time_scales import MIN_WINDOW, time_scale

DIRECTIONS = ("up", "down", "both")
TOUCH_FACTOR = 10.0  # a pass nearer the plane than this many tolerances counts as a touch


@dataclass
class SectionResult:
    points: np.ndarray  # (n_states, M)
    times: np.ndarray  # (M,)
    state_names: list[str]
    requested: int
    status: str = OK
    message: str = ""
    touches: int = 0  # passes that only touched the plane (recorded once each)
    warnings: list[str] = field(default_factory=list)

    @property
    def complete(self) -> bool:
        return self.times.size >= self.requested

    def series(self, name: str) -> np.ndarray:
        if name == "t":
            return self.times
        return self.points[self.state_names.index(name)]

    def as_rows(self) -> list[dict[str, float]]:
        """One ``{state: value, ..., "t": time}`` per point, for CSV and JSON."""
        rows = []
        for k in range(self.times.size):
            row = {name: float(self.points[i, k]) for i, name in enumerate(self.state_names)}
            row["t"] = float(self.times[k])
            rows.append(row)
        return rows


def return_map(points, coordinate) -> tuple[np.ndarray, np.ndarray]:
    """Successive values (x_k, x_{k+1}) of one coordinate of a SectionResult (by name or index)."""
    if isinstance(points, SectionResult):
        values = points.series(coordinate) if isinstance(coordinate, str) else points.points[coordinate]
    else:
        values = np.asarray(points, dtype=float)[coordinate]
    values = np.asarray(values, dtype=float)
    return values[:-1].copy(), values[1:].copy()


# ---------------------------------------------------------------- hyperplane sections
def _section_function(system: CompiledSystem, coordinate: str, value: float, p):
    """(g, rate): g(t, u) = coordinate - value, and dg/dt along the flow (None if not smooth): a state's
    rate by the model's kernel, a derived quantity's (its derivative along the flow, no kernel holds it)
    generated here."""
    t, u, ps, _ = system._plain
    pv = tuple(float(v) for v in p)
    if coordinate in system.states:
        i = system.states.index(coordinate)

        def g(tt, uu):
            return uu[i] - value

        def rate(tt, uu):  # the state's own rate: the model's kernel
            try:
                return float(system.rhs(tt, uu, p)[i])
            except ArithmeticError:  # UndefinedValue
                return math.nan

        return g, rate
    if coordinate in system.derived_names:
        expr = system.plain([system.derived_exprs[system.derived_names.index(coordinate)]])[0]
        g_fn = lambdify([t, *u, *ps], expr)
        f = system.plain(system.f)
        rate_expr = sp.diff(expr, t) + sum(sp.diff(expr, uj) * fj for uj, fj in zip(u, f))
        smooth = not rate_expr.has(sp.DiracDelta, sp.Derivative, sp.Subs)
        rate_fn = lambdify([t, *u, *ps], rate_expr) if smooth else None

        def g(tt, uu):
            try:
                return g_fn(tt, *uu, *pv) - value
            except (ValueError, ZeroDivisionError, TypeError, OverflowError):
                return math.nan
    else:
        known = ", ".join(list(system.states) + list(system.derived_names))
        raise ValueError(f"unknown coordinate '{coordinate}' (states and derived quantities: {known})")

    if rate_fn is None:
        return g, None

    def rate(tt, uu):
        try:
            return float(rate_fn(tt, *uu, *pv))
        except (ValueError, ZeroDivisionError, TypeError, OverflowError):
            return math.nan

    return g, rate


def _crossing_rate(g, rate, system, p, t, u) -> float:
    """dg/dt at a crossing: the exact rate, else a central difference along the flow."""
    if rate is not None:
        return rate(t, u)
    try:
        f = system.rhs(t, u, p)
    except ArithmeticError:  # UndefinedValue
        return math.nan
    eps = 1e-7 * max(1.0, float(np.max(np.abs(u))) / max(float(np.max(np.abs(f))), 1e-300))
    return (g(t + eps, u + eps * f) - g(t - eps, u - eps * f)) / (2 * eps)


def _refine(g, rate, system, p, t, u):
    """Newton steps along the flow from a located crossing, so the point sits on the plane to round-off."""
    best_t, best_u, best_g = t, u, abs(g(t, u))
    for _ in range(2):
        r = _crossing_rate(g, rate, system, p, best_t, best_u)
        if not (math.isfinite(r) and r != 0 and best_g > 0):
            break
        delta = -g(best_t, best_u) / r
        if abs(delta) > 1e-6 * max(1.0, abs(best_t)):
            break
        t_new = best_t + delta
        try:
            u_new = best_u + delta * system.rhs(best_t, best_u, p)
        except ArithmeticError:
            break
        g_new = abs(g(t_new, u_new))
        if not g_new < best_g:
            break
        best_t, best_u, best_g = t_new, u_new, g_new
    return best_t, best_u


def _select(times, rates, direction, tolerance):
    """Crossings to keep (indices) and whether each is a touch, from all crossings in time order.

    Two successive crossings in opposite senses whose excursion beyond the plane (about
    |rate| * gap / 4 for a parabolic pass) is within ``tolerance`` are one touch, recorded once;
    a crossing with zero rate is a touch too. A touch counts for every direction.
    """
    keep, touch, k, m = [], [], 0, len(times)
    want = {"up": 1, "down": -1, "both": 0}[direction]
    while k < m:
        r = rates[k]
        if k + 1 < m and r * rates[k + 1] < 0:
            depth = 0.25 * 0.5 * (abs(r) + abs(rates[k + 1])) * abs(times[k + 1] - times[k])
            if depth <= tolerance:
                pick = k + 1 if want and np.sign(rates[k + 1]) == want else k
                keep.append(pick)
                touch.append(True)
                k += 2
                continue
        if k > 0 and np.sign(rates[k - 1]) == np.sign(r) != 0 \
                and abs(times[k] - times[k - 1]) <= 1e-12 * max(1.0, abs(times[k])):
            k += 1  # the same crossing seen twice (round-off at a step end)
            continue
        if r == 0 or not math.isfinite(r):
            keep.append(k)
            touch.append(True)
        elif not want or np.sign(r) == want:
            keep.append(k)
            touch.append(False)
        k += 1
    return keep, touch


def _size_section(system, count, transient) -> None:
    """Refuse a section whose points or transient are beyond the limits (limits.py) before it starts."""
    limits.check_memory(8.0 * (system.n_states + 1) * count, f"a section of {count:,} points")
    limits.check_span(float(transient), "the transient")


def plane_section(system: CompiledSystem, p=None, u0=None, coordinate: str = "", value: float = 0.0,
                  direction: str = "up", count: int = 100, transient: float = 0.0,
                  settings: RunSettings | None = None, cancel=None, progress=None,
                  t_max: float | None = None) -> SectionResult:
    """The first ``count`` crossings of ``coordinate = value`` after ``transient``.

    ``coordinate`` is a state (``x'`` included) or a derived quantity. ``direction``: "up"
    (coordinate increasing), "down" or "both". The start itself is never a crossing. The flow is
    integrated in chunks until enough crossings are found or ``t_max`` (default: 100 search spans)
    is passed; the search also gives up after one span with no crossing. The span is the longer of
    the run length of ``settings`` and three slow time scales of the system (time_scales.py: the
    eigenvalues at the equilibrium nearest the start, the forcing period).
    """
    if system.kind == MAP:
        raise ValueError("hyperplane sections are for flows; a map's orbit is already a sequence of points")
    if direction not in DIRECTIONS:
        raise ValueError(f"direction must be one of {', '.join(DIRECTIONS)}")
    if int(count) < 1:
        raise ValueError("count must be at least 1")
    value = float(value)
    if not math.isfinite(value) or not math.isfinite(float(transient)) or transient < 0:
        raise ValueError("the plane's value must be finite and the transient non-negative")
    count = int(count)
    _size_section(system, count, transient)
    settings = settings or RunSettings()
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    u = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    if system.delays:  # the history is part of the state: one run from the start, never restarted at a point
        return _delay_plane_section(system, p, u, coordinate, value, direction, count, transient,
                                    settings or RunSettings(), cancel, t_max)
    g, rate = _section_function(system, coordinate, value, p)
    functions = {np.asarray(p, dtype=float).tobytes(): (g, rate)}  # (g, rate) per parameter values met
    if coordinate in system.states:  # a plane: located inside the compiled loop
        event = Event.on_plane(np.eye(system.n_states)[system.states.index(coordinate)], value)
    else:
        event = Event(g, 0, rate=rate)
    scale = time_scale(system, p, u)
    span = max(abs(settings.t_end - settings.t_start) or 100.0, scale.window())
    if span <= abs(settings.t_end - settings.t_start):
        why = "the run length"
    elif span > MIN_WINDOW:
        why = f"three times the slowest time scale {scale.slow:.4g}, from {scale.source}"
    else:
        why = f"the shortest search window ({scale.source} give a slowest time scale of {scale.slow:.4g})"

    t = float(settings.t_start)
    report = Reporter(progress, cancel)
    names = list(system.states)
    tolerance = TOUCH_FACTOR * (settings.atol + settings.rtol * max(1.0, abs(value)))
    base = replace(settings, samples=2, transient=0.0)
    warnings = [] if rate is not None else [
        f"{coordinate} has no smooth rate of change; crossing pairs inside one step may be missed"]

    def result(times, states, status=OK, message="", touches=0):
        points = np.array(states, dtype=float).reshape(-1, len(names)).T if states else np.empty((len(names), 0))
        return SectionResult(points, np.array(times, dtype=float), names, count, status, message, touches, warnings)

    if transient > 0:
        run = simulate(system, replace(base, t_start=t, t_end=t + transient), u, p, cancel=cancel)
        if not run.ok:
            return result([], [], run.status, f"during the transient: {run.message}")
        u, t, p = run.final_state.copy(), t + transient, run.end_params(p)
    t_begin = t
    t_limit = t_begin + 100.0 * span if t_max is None else max(float(t_max), t_begin)
    quiet = span if t_max is None else t_limit - t_begin  # a given duration is searched to its end
    if t_max is not None:
        why = "the duration given"
    raw_t, raw_u, raw_r = [], [], []
    keep, touch = [], []
    chunk = 0.1 * span  # grows to what the crossing rate so far says is left
    status, message = OK, ""
    while len(keep) < count and t < t_limit:
        t_end = min(t + chunk, t_limit)
        run = simulate(system, replace(base, t_start=t, t_end=t_end), u, p, events=[event], cancel=cancel)
        for j, (te, ue) in enumerate(zip(run.event_times[0], run.event_states[0].T)):
            pe = run.params_at_crossing(0, j, p)  # events of the model may have changed parameters
            key = np.asarray(pe, dtype=float).tobytes()
            if key not in functions:
                functions[key] = _section_function(system, coordinate, value, pe)
            ge, rate_e = functions[key]
            te, ue = _refine(ge, rate_e, system, pe, float(te), ue)
            raw_t.append(te)
            raw_u.append(ue)
            raw_r.append(_crossing_rate(ge, rate_e, system, pe, te, ue))
        keep, touch = _select(raw_t, raw_r, direction, tolerance)
        if not run.ok:
            status, message = run.status, run.message
            break
        u, t, p = run.final_state.copy(), float(run.time[-1]), run.end_params(p)
        if not raw_t and t - t_begin >= quiet:
            message = (f"no crossing of {coordinate} = {value:g} in {t - t_begin:.4g} time units after the "
                       f"transient (the search gives up after {quiet:.4g} time units without a crossing: {why}); a longer "
                       "duration (--duration) searches further, unless the orbit stays on one side of the plane (the run's "
                       f"range of {coordinate} shows whether it reaches {value:g})")
            break
        found = len(keep)
        try:
            report(max(found / count, (t - t_begin) / max(t_limit - t_begin, 1e-300)))
        except Cancelled:
            status, message = CANCELLED, "cancelled"
            break
        per_time = found / max(t - t_begin, 1e-300)
        chunk = min(2 * chunk, span) if found == 0 else min(max(1.2 * (count - found) / per_time, 0.1 * span),
                                                            10 * span)
    keep = keep[:count]
    touches = sum(touch[:count])
    if status == OK and not message and len(keep) < count:
        message = (f"found {len(keep)} of {count} crossings by {system.time_name} = {t:.6g}, the end of the "
                   f"search ({t_limit - t_begin:.4g} time units after the transient); a longer duration "
                   "(--duration) finds more")
    elif status == OK and not message and touches:
        message = f"{touches} pass(es) only touched the plane; each is recorded once"
    return result([raw_t[k] for k in keep], [raw_u[k] for k in keep], status, message, touches)


def _delay_plane_section(system, p, u, coordinate, value, direction, count, transient, settings, cancel, t_max):
    """Plane sections of a delay model: runs from the start, each twice as long as the last, until
    ``count`` crossings after the transient are found (the direction of each from the event that found it)."""
    from orbitdesk.engine.delay import delayed_quantity, simulate_delay

    attach = None
    if coordinate in system.states:
        normal = np.eye(system.n_states)[system.states.index(coordinate)]
        events = [Event.on_plane(normal, value, +1), Event.on_plane(normal, value, -1)]
    elif coordinate in system.derived_names:  # its delayed values are read off the run itself
        g, attach = delayed_quantity(system, coordinate, p)
        events = [Event(lambda t, u: g(t, u) - value, +1), Event(lambda t, u: g(t, u) - value, -1)]
    else:
        known = ", ".join([*system.states, *system.derived_names])
        raise ValueError(f"unknown coordinate '{coordinate}' (states and derived quantities: {known})")
    t0 = float(settings.t_start)
    t_begin = t0 + transient
    span = abs(settings.t_end - settings.t_start) or 100.0
    t_limit = t_begin + 100.0 * span if t_max is None else max(float(t_max), t_begin)
    tolerance = TOUCH_FACTOR * (settings.atol + settings.rtol * max(1.0, abs(value)))
    length = span
    while True:
        t_end = min(t_begin + length, t_limit)
        run = simulate_delay(system, replace(settings, t_start=t0, t_end=t_end, samples=2, transient=0.0), u, p,
                             events, Reporter(None, cancel), attach)
        found = sorted((float(te), sign, ue) for sign, k in ((1.0, 0), (-1.0, 1))
                       for te, ue in zip(run.event_times[k], run.event_states[k].T) if te >= t_begin)
        keep, touch = _select([f[0] for f in found], [f[1] for f in found], direction, tolerance)
        if len(keep) >= count or not run.ok or t_end >= t_limit:
            break
        length *= 2
    keep = keep[:count]
    message = run.message
    if run.ok and len(keep) < count:
        message = f"found {len(keep)} of {count} crossings by {system.time_name} = {t_end:.6g}"
    points = np.array([found[k][2] for k in keep], dtype=float).reshape(-1, system.n_states).T
    return SectionResult(points, np.array([found[k][0] for k in keep], dtype=float), list(system.states), count,
                         run.status, message, sum(touch[:count]))


# ---------------------------------------------------------------- stroboscopic sections
def strobe_section(system: CompiledSystem, p=None, u0=None, period: float = 2 * math.pi, count: int = 100,
                   transient: float = 0.0, transient_periods: int | None = None, phase: float = 0.0,
                   settings: RunSettings | None = None, cancel=None, progress=None) -> SectionResult:
    """The state at t0 + phase + k T for ``count`` successive k after the transient.

    The transient is ``transient_periods`` whole periods, or ``transient`` time rounded up to whole
    periods so every point has the same forcing phase. Points come from the integrator's dense
    output at exactly those times.
    """
    system.refuse_delays("the stroboscopic section")
    if system.kind == MAP:
        raise ValueError("stroboscopic sections are for forced flows; a map is already sampled at each step")
    period = float(period)
    if not (math.isfinite(period) and period > 0):
        raise ValueError("the period must be a positive number")
    if int(count) < 1:
        raise ValueError("count must be at least 1")
    if not math.isfinite(float(transient)) or transient < 0 or (transient_periods or 0) < 0:
        raise ValueError("the transient must be non-negative")
    if not (0 <= phase < period):
        raise ValueError("the phase must lie in [0, period)")
    count = int(count)
    _size_section(system, count, transient)
    settings = settings or RunSettings()
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    u = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    names = list(system.states)
    k0 = int(transient_periods) if transient_periods is not None else math.ceil(transient / period - 1e-9)
    limits.check_steps(k0 + float(count), f"a section of {count:,} points after {float(k0):.6g} transient "
                                          f"periods of {period:g}")
    t0 = float(settings.t_start)
    t_first = t0 + phase + k0 * period
    report = Reporter(progress, cancel)
    base = replace(settings, transient=0.0)
    warnings = [] if not system.autonomous else ["the model is autonomous: its flow has no forcing period"]

    def result(times, states, status=OK, message=""):
        return SectionResult(np.asarray(states, dtype=float).reshape(len(names), -1),
                             np.asarray(times, dtype=float), names, count, status, message, 0, warnings)

    lead = t_first - t0
    share = lead / (lead + count * period)
    if lead > 0:
        run = simulate(system, replace(base, t_start=t0, t_end=t_first, samples=2), u, p, cancel=cancel,
                       progress=report.part(0.0, share) if progress else None)
        if not run.ok:
            return result(np.empty(0), np.empty((len(names), 0)), run.status, f"during the transient: {run.message}")
        u, p = run.final_state.copy(), run.end_params(p)
    if count == 1:
        return result([t_first], u.reshape(-1, 1))
    t_last = t_first + (count - 1) * period
    run = simulate(system, replace(base, t_start=t_first, t_end=t_last, samples=count), u, p, cancel=cancel,
                   progress=report.part(share, 1.0 - share) if progress else None)
    times = t_first + period * np.arange(run.time.size)
    message = run.message
    if not run.ok:
        message = f"{run.message} (after {run.time.size} of {count} points)"
    return result(times, run.states, run.status, message)
